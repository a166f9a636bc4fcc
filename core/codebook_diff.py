"""What changes between two codebooks, for ``keyproof codebook --update``.

The store decides what an update may do (keyed data must not lose its
variable); this module only says what differs, variable by variable, in words
a data manager can check before accepting. Renames are a guess and are shown
as one: a variable that disappears and a new one that takes its place in
paper order with the same type and label (or the same type, codes and range)
is listed as "renamed?", and not also as removed and added.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields

from .codebook import Codebook, Variable

#: Variable attributes compared, in the order they are reported.
COMPARED = tuple(f.name for f in fields(Variable) if f.name not in ("name", "row"))


@dataclass(frozen=True)
class VariableChange:
    """One variable present in both codebooks whose attributes differ."""

    name: str
    """The variable's name in the new codebook."""
    changes: tuple[tuple[str, object, object], ...]
    """``(attribute, old, new)`` for each attribute that differs, e.g. ``("max", 5.0, 7.0)``."""

    @property
    def attributes(self) -> tuple[str, ...]:
        """Names of the attributes that changed."""
        return tuple(c[0] for c in self.changes)


@dataclass(frozen=True)
class CodebookDiff:
    """The differences between an old and a new codebook."""

    added: tuple[str, ...]
    """Names only in the new codebook (paper order), renames excluded."""
    removed: tuple[str, ...]
    """Names only in the old codebook, renames excluded."""
    renamed: tuple[tuple[str, str], ...]
    """Likely renames as ``(old name, new name)``; a guess, shown with a question mark."""
    changed: tuple[VariableChange, ...]
    """Variables in both whose attributes differ (renamed ones included under their new name)."""
    reordered: bool = False
    """True when the variables both codebooks share come in a different paper order."""
    added_types: dict = field(default_factory=dict, compare=False, repr=False)
    """Type of each added variable, for :meth:`lines`."""

    @property
    def empty(self) -> bool:
        """True when the codebooks describe the same variables the same way."""
        return not (self.added or self.removed or self.renamed or self.changed or self.reordered)

    def lines(self) -> list[str]:
        """Readable lines, one per change, for the command line.

        >>> from core.codebook import Codebook, Variable
        >>> old = Codebook((Variable("pid", is_id=True), Variable("age", "integer", max=99)))
        >>> new = Codebook((Variable("pid", is_id=True), Variable("age", "integer", max=120),
        ...                 Variable("town")))
        >>> diff_codebooks(old, new).lines()
        ['added town (string)', 'changed age: max 99 -> 120']
        """
        if self.empty:
            return ["no changes"]
        out = [f"added {n}" + (f" ({self.added_types[n]})" if n in self.added_types else "")
               for n in self.added]
        out += [f"removed {n}" for n in self.removed]
        out += [f"renamed? {old} -> {new}" for old, new in self.renamed]
        for change in self.changed:
            parts = [f"{attr} {_show(attr, old)} -> {_show(attr, new)}" for attr, old, new in change.changes]
            out.append(f"changed {change.name}: " + "; ".join(parts))
        if self.reordered:
            out.append("paper order of existing variables changed")
        return out


def _show(attr: str, value) -> str:
    if attr in ("codes", "missing"):
        return "(" + "; ".join(f"{c.value}={c.label}" if c.label else c.value for c in value) + ")" \
            if value else "(none)"
    if value is None or value == "":
        return "(none)"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return repr(value) if isinstance(value, str) and " " in value else str(value)


def _changes(old: Variable, new: Variable) -> tuple[tuple[str, object, object], ...]:
    return tuple((a, getattr(old, a), getattr(new, a)) for a in COMPARED if getattr(old, a) != getattr(new, a))


def _looks_renamed(old: Variable, new: Variable) -> bool:
    if old.type != new.type:
        return False
    if old.label and old.label == new.label:
        return True
    return bool(old.codes or old.min is not None or old.max is not None) and \
        (old.codes, old.min, old.max, old.missing) == (new.codes, new.min, new.max, new.missing)


def diff_codebooks(old: Codebook, new: Codebook) -> CodebookDiff:
    """Compare two codebooks variable by variable (names matched exactly).

    >>> from core.codebook import Codebook, Variable
    >>> old = Codebook((Variable("pid", is_id=True), Variable("q1", "integer", label="Mood")))
    >>> new = Codebook((Variable("pid", is_id=True), Variable("mood", "integer", label="Mood")))
    >>> diff_codebooks(old, new).renamed
    (('q1', 'mood'),)
    """
    old_names, new_names = set(old.names), set(new.names)
    gone = [n for n in old.names if n not in new_names]
    fresh = [n for n in new.names if n not in old_names]
    renamed: list[tuple[str, str]] = []
    for name in list(gone):
        # Guess a rename only for a new variable sitting where the old one sat.
        before = _neighbour(old.names, name, old_names & new_names)
        for candidate in fresh:
            if _neighbour(new.names, candidate, old_names & new_names) == before and \
                    _looks_renamed(old[name], new[candidate]):
                renamed.append((name, candidate))
                gone.remove(name)
                fresh.remove(candidate)
                break
    changed = []
    renamed_to = {new_name: old_name for old_name, new_name in renamed}
    for name in new.names:
        source = renamed_to.get(name, name)
        if source in old_names:
            diffs = _changes(old[source], new[name])
            if diffs:
                changed.append(VariableChange(name, diffs))
    shared_old = [n for n in old.names if n in new_names]
    shared_new = [n for n in new.names if n in old_names]
    return CodebookDiff(tuple(fresh), tuple(gone), tuple(renamed), tuple(changed),
                        reordered=shared_old != shared_new,
                        added_types={n: new[n].type for n in fresh})


def _neighbour(names: list[str], name: str, anchors: set[str]) -> str | None:
    """The nearest earlier variable that both codebooks share (None at the start)."""
    i = names.index(name)
    for prev in reversed(names[:i]):
        if prev in anchors:
            return prev
    return None


"""A study's progress and the work left open, for ``keyproof status`` and screens.

Counts come from the store (forms, fields, set-asides); open discrepancies
come from the comparison joined with the decisions (``core.resolution``),
which costs a whole comparison, so callers that only need the counts can ask
for them alone with ``discrepancies=False``.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field


@dataclass(frozen=True)
class PassProgress:
    """How far one pass has come."""

    pass_no: int
    forms: int
    """Forms of the pass, dropped ones not counted."""
    finished: int
    """Of ``forms``, those their keyer finished (imported forms count as finished)."""
    dropped: int
    """Forms dropped as keyed twice (kept in the study, left out of comparison)."""
    keyers: tuple[str, ...]
    """Initials of everyone who keyed a form of this pass, sorted."""
    fields_keyed: int
    """Fields with a value, blank or illegible mark, in forms not dropped."""
    fields_expected: int
    """``forms`` times the number of codebook variables."""


@dataclass(frozen=True)
class StudyStatus:
    """Everything ``keyproof status`` shows."""

    study: str
    variables: int
    passes: tuple[PassProgress, ...]
    set_aside: int
    """Participants set aside now."""
    discrepancies: dict[str, int] = field(default_factory=dict)
    """Worklist rows by status (``open``, ``settled``, ``stale``); empty when not computed."""

    @property
    def open_work(self) -> list[str]:
        """What is still to do, one short phrase each; empty when the study is done."""
        todo = []
        for p in self.passes:
            if p.forms == 0:
                todo.append(f"pass {p.pass_no} has no forms yet")
            elif p.finished < p.forms:
                todo.append(f"pass {p.pass_no}: {p.forms - p.finished} forms not finished")
        still = self.discrepancies.get("open", 0) + self.discrepancies.get("stale", 0)
        if still:
            todo.append(f"{still} discrepancies to resolve")
        return todo

    def to_dict(self) -> dict:
        """JSON-ready, with ``open_work`` included."""
        d = asdict(self)
        d["passes"] = [asdict(p) | {"keyers": list(p.keyers)} for p in self.passes]
        d["open_work"] = self.open_work
        return d


def study_status(study, discrepancies: bool = True) -> StudyStatus:
    """Progress of both passes, set-asides and (optionally) discrepancies by status.

    >>> # s = study_status(Study.open("study.sqlite", readonly=True)); s.open_work
    """
    forms = study.forms()
    width = len(study.codebook)
    passes = []
    for pass_no in (1, 2):
        f = forms[forms["pass"] == pass_no]
        live = f[~f["dropped"]]
        passes.append(PassProgress(
            pass_no=pass_no,
            forms=len(live),
            finished=int(live["finished_at"].notna().sum()),
            dropped=int(f["dropped"].sum()),
            keyers=tuple(sorted(set(f["keyer"]))),
            fields_keyed=int(live["entered"].sum()),
            fields_expected=len(live) * width,
        ))  # fmt: skip
    counts: dict[str, int] = {}
    if discrepancies and all(p.forms for p in passes):
        from .resolution import counts_by_status, worklist

        counts = counts_by_status(worklist(study))
    return StudyStatus(study.name, width, tuple(passes), len(study.set_asides()), counts)

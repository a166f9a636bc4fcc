"""What the keying screen knows and does, without any widget.

The keying screen is a thin view over :class:`KeyingModel`: the editor hands
it each confirmed text, and the model commits it to the study at once and
moves the cursor. Keeping this plain Python means every key a keyer presses
is handled synchronously, in order, by one object, which is what keeps
type-ahead in the right field, and it lets the rules be read in one place.

Rules kept here:

- The form starts with its participant ID. If this pass already holds that ID
  the keyer chooses to continue (or correct) one of those forms, or to key a
  second form with the same number: duplicates happen on paper.
- Enter on an empty field records "blank on paper"; the illegible key records
  "illegible" (both store text ``""``). A value that breaks its variable's
  type, range or codes, and a blank in a required field, get a warning and
  need a second Enter to keep.
- Fields whose ``applies_if`` is false are visited like every other field,
  never skipped: the prompt says the question does not apply, Enter records
  it blank (what the codebook says it must be), and a value typed there gets
  a warning and needs a second Enter (the paper may really hold one). Every
  box on the paper then takes the same keys, which is what type-ahead needs:
  a field skipped by the screen turned a keyer's Enter for the empty box on
  the paper into a blank in the next field and shifted every later value by
  one, and two keyers with the same habit shift alike, so their passes agree
  on wrong values that comparison cannot see.
- Blindness: the model asks the study for this pass's forms only; of the
  other pass it knows a count of forms and nothing else.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

from core.conditions import parse_condition
from core.values import BLANK, ILLEGIBLE, KEYED, allowed_text, clean_text, parse

from .keying_checks import QuickCheck

ID_MODE = "id"
CHOOSE_MODE = "choose"
FIELD_MODE = "field"
REVIEW_MODE = "review"

#: Per-study setting switching auto-advance at a field's width; "on" or "off".
AUTO_ADVANCE_SETTING = "keying.auto_advance"


@dataclass(frozen=True)
class Flag:
    """Why a field is marked in the finishing review."""

    index: int
    """Position of the field in paper order."""
    text: str
    """Short reason, e.g. "not keyed" or the soft-check message."""


class KeyingModel:
    """One keyer keying one pass of a study, form after form.

    ``texts``/``states`` hold the current form's values as this pass keyed
    them (None = not keyed yet). ``message`` is the one line the screen shows
    under the editor (a warning, or what the keys do now).
    """

    def __init__(self, study, pass_no: int, keyer: str):
        self.study = study
        self.pass_no = int(pass_no)
        self.keyer = keyer
        self.variables = list(study.codebook)
        self.names = [v.name for v in self.variables]
        self.id_index = next(i for i, v in enumerate(self.variables) if v.is_id)
        self._conditions = [parse_condition(v.applies_if) for v in self.variables]
        # Only variables a condition mentions are ever parsed for applies_if.
        self._condition_names = {n for c in self._conditions for n in c.names}
        self.widths = [v.implied_width for v in self.variables]
        self._quick = [QuickCheck(v) for v in self.variables]
        self.allowed = [allowed_text(v) for v in self.variables]
        self.auto_advance = str(study.get_setting(AUTO_ADVANCE_SETTING, "on")) != "off"
        self.mode = ID_MODE
        self.form_id: int | None = None
        self.cursor = self.id_index
        self.texts: dict[str, str | None] = {}
        self.states: dict[str, str | None] = {}
        self.candidates: list[int] = []
        self.pending_id = ""
        self.message = ""
        self._warned: tuple[int, str] | None = None
        self.sitting_fields = 0
        self._sitting_start: float | None = None
        self.forms_done = self._count_finished()
        self.other_pass_forms = self._count_other_pass()

    # ------------------------------------------------------------------ counts

    def _count_finished(self) -> int:
        forms = self.study.forms(pass_no=self.pass_no)
        return int(forms["finished_at"].notna().sum()) if len(forms) else 0

    def _count_other_pass(self) -> int:
        # A count only: the other pass's IDs and values never reach this screen.
        return len(self.study.forms(pass_no=2 if self.pass_no == 1 else 1))

    @property
    def fields_per_minute(self) -> float:
        """Fields confirmed per minute in this sitting (0 before the second field)."""
        if self._sitting_start is None or self.sitting_fields < 2:
            return 0.0
        minutes = (time.monotonic() - self._sitting_start) / 60
        return self.sitting_fields / minutes if minutes > 0 else 0.0

    def unfinished_forms(self) -> list[tuple[int, str]]:
        """This pass's unfinished forms as (form_id, participant), oldest first."""
        forms = self.study.forms(pass_no=self.pass_no)
        if not len(forms):
            return []
        open_ = forms[forms["finished_at"].isna()]
        if "dropped" in open_:
            open_ = open_[~open_["dropped"].fillna(False).astype(bool)]
        return [(int(f), "" if p is None else str(p))
                for f, p in zip(open_["form_id"], open_["participant"], strict=True)]

    # ------------------------------------------------------------------ form start

    def submit_id(self, text: str) -> None:
        """The keyer typed a participant ID and pressed Enter."""
        var = self.variables[self.id_index]
        if not text.strip():
            self.message = "Type the participant ID written on the form, then Enter."
            return
        problem = self.problem_of(self.id_index, text)
        if problem and self._warned != (-1, text):
            self._warned = (-1, text)
            self.message = f"{problem} Enter again keeps it as the paper says."
            return
        self._warned = None
        self.pending_id = text
        found = set(self.study.find_forms(self.pass_no, text))
        canonical = self._quick[self.id_index].canonical(text)
        if canonical is None and not problem:
            canonical = parse(var, text).canonical
        if canonical and canonical != text.strip():  # "07" finds a form keyed "7"
            found |= set(self.study.find_forms(self.pass_no, canonical))
        self.candidates = sorted(found)[:9]
        if not self.candidates:
            self._new_form()
            return
        self.mode = CHOOSE_MODE
        self.message = ""

    def choice_lines(self) -> list[str]:
        """What the keyer can choose when the ID is already in this pass."""
        lines = [f"Participant {self.pending_id} already has "
                 f"{len(self.candidates)} form(s) in pass {self.pass_no}."]
        for n, form_id in enumerate(self.candidates, start=1):
            rec = self.study.form(form_id)
            keyed = sum(1 for s in rec.states.values() if s is not None)
            done = "finished" if _finished(rec) else "not finished"
            lines.append(f"  {n}  continue or correct form {form_id} "
                         f"({done}, {keyed} of {len(self.names)} fields keyed)")
        lines.append("  0  key a second form with the same number")
        lines.append("  Esc  type another number")
        return lines

    def choose(self, key: str) -> None:
        """Answer the choice: ``"0"`` new form, ``"1"``.. an existing one."""
        if key == "0":
            self._new_form()
        elif key.isdigit() and 1 <= int(key) <= len(self.candidates):
            self._open_form(self.candidates[int(key) - 1])
        else:
            self.message = "Press a number from the list, or Esc."

    def cancel(self) -> None:
        """Back to the participant-ID prompt (nothing typed is lost: fields commit on Enter)."""
        self.mode = ID_MODE
        self.form_id = None
        self.candidates = []
        self._warned = None
        self.cursor = self.id_index
        self.message = ""

    def _new_form(self) -> None:
        self.form_id = self.study.start_form(self.pass_no, self.keyer)
        self.texts = dict.fromkeys(self.names)
        self.states = dict.fromkeys(self.names)
        self._write(self.id_index, self.pending_id, KEYED)
        self.mode = FIELD_MODE
        self.cursor = self.id_index
        self._advance()

    def _open_form(self, form_id: int) -> None:
        rec = self.study.form(form_id)
        self.form_id = form_id
        self.texts = {n: rec.texts.get(n) for n in self.names}
        self.states = {n: rec.states.get(n) for n in self.names}
        self.mode = FIELD_MODE
        self.message = ""
        self.resume()

    def resume(self) -> None:
        """Put the cursor on the first unkeyed field that applies.

        A form with every field keyed opens on its first flagged field, else on
        the first field after the ID, so a correction is a few keys away.
        """
        self.mode = FIELD_MODE
        for i, name in enumerate(self.names):
            if self.states[name] is None:
                self.cursor = i
                return
        flagged = [f.index for f in self.flags()]
        self.cursor = flagged[0] if flagged else min(self.id_index + 1, len(self.names) - 1)
        self.message = ("Every field is keyed: Enter walks on, ↑ goes back, "
                        "Esc leaves the form as it is.")

    def next_flagged(self) -> None:
        """From the review, go to the first flagged field (nothing flagged: stay)."""
        flagged = [f.index for f in self.flags()]
        if flagged:
            self.mode = FIELD_MODE
            self.cursor = flagged[0]
            self.message = ""

    # ------------------------------------------------------------------ fields

    def typed_values(self) -> dict:
        """Keyed values that conditions mention, typed where they parse (for ``applies_if``)."""
        out = {}
        for i, var in enumerate(self.variables):
            if var.name not in self._condition_names:
                continue
            text = self.texts.get(var.name)
            if self.states.get(var.name) != KEYED or text is None:
                continue
            canon = self._quick[i].canonical(text)
            if canon is not None:  # plain values: no pandas on the key path
                out[var.name] = {"integer": int, "number": float}.get(var.type, str)(canon)
                continue
            parsed = parse(var, text)
            out[var.name] = parsed.value if parsed.value is not None else clean_text(text)
        return out

    def applies(self, index: int, values: dict | None = None) -> bool:
        """Whether field ``index`` is asked, given what this form holds so far."""
        cond = self._conditions[index]
        if cond.always:
            return True
        return cond.evaluate_one(self.typed_values() if values is None else values)

    def confirm(self, text: str) -> bool:
        """Enter/Tab on the current field; returns True when the cursor moved on."""
        i = self.cursor
        var = self.variables[i]
        name = var.name
        if text == "":
            if self.states[name] == ILLEGIBLE:
                self._counted()
                self._advance()  # Enter on a field marked illegible keeps the mark
                return True
            if var.required and self._warned != (i, "") and self.applies(i):
                self._warned = (i, "")
                self.message = f"{name} is required; Enter again records it as blank on paper."
                return False
            self._write(i, "", BLANK)
        else:
            problem = self.problem_of(i, text) or self.not_applying(i, text)
            if problem and self._warned != (i, text):
                self._warned = (i, text)
                self.message = f"{problem} Enter again keeps it as the paper says."
                return False
            self._write(i, text, KEYED)
        self._counted()
        self._advance()
        return True

    def problem_of(self, index: int, text: str) -> str:
        """The soft-check message for ``text`` in field ``index``; empty when allowed."""
        if self._quick[index].allowed(text):
            return ""
        parsed = parse(self.variables[index], text)
        return parsed.message if parsed.problem else ""

    def not_applying(self, index: int, text: str) -> str:
        """The warning for a value typed where ``applies_if`` is false (missing codes pass)."""
        var = self.variables[index]
        if self.applies(index) or self._quick[index].is_missing_code(text):
            return ""
        return f"{var.name} does not apply here ({var.applies_if} is false)."

    def text_changed(self, text: str) -> None:
        """The keyer edited the text: a warning given for another text no longer counts."""
        if self._warned is not None and self._warned[1] != text:
            self._warned = None

    def mark_illegible(self) -> None:
        """The illegible key on the current field."""
        self._write(self.cursor, "", ILLEGIBLE)
        self._counted()
        self._advance()

    def reaches_width(self, text: str) -> bool:
        """True when auto-advance should confirm ``text`` now."""
        width = self.widths[self.cursor]
        return self.auto_advance and width is not None and len(text) >= width

    def back(self) -> None:
        """Shift+Tab / Up: the previous field in paper order, skipped ones included."""
        self._warned = None
        self.message = ""
        if self.mode == REVIEW_MODE:
            self.mode = FIELD_MODE
            self.cursor = len(self.names) - 1
        elif self.cursor > 0:
            self.cursor -= 1

    def _counted(self) -> None:
        if self._sitting_start is None:
            self._sitting_start = time.monotonic()
        self.sitting_fields += 1

    def _write(self, index: int, text: str, state: str) -> None:
        name = self.names[index]
        # Committed before the next key is looked at: a kill loses at most the field being typed.
        self.study.set_value(self.form_id, name, text, state, self.keyer)
        self.texts[name] = text
        self.states[name] = state
        self._warned = None
        self.message = ""

    def _advance(self) -> None:
        i = self.cursor + 1
        if i >= len(self.names):
            self.mode = REVIEW_MODE
            self.cursor = len(self.names) - 1
        else:
            self.cursor = i

    # ------------------------------------------------------------------ review

    def flags(self) -> list[Flag]:
        """Fields the finishing review marks: not keyed, illegible, breaking the codebook."""
        out = []
        values = self.typed_values()
        for i, var in enumerate(self.variables):
            state, text = self.states[var.name], self.texts[var.name]
            applies = self.applies(i, values)
            if state is None:
                out.append(Flag(i, "not keyed"))
            elif state == ILLEGIBLE:
                out.append(Flag(i, "illegible"))
            elif state == BLANK:
                if var.required and applies:
                    out.append(Flag(i, "required, blank on paper"))
            else:
                if not self._quick[i].allowed(text or ""):
                    problem = parse(var, text or "").problem
                    if problem:
                        out.append(Flag(i, _SHORT.get(problem, problem)))
                        continue
                if not applies:
                    out.append(Flag(i, f"keyed although {var.applies_if} is false"))
        return out

    def finish(self) -> None:
        """Finish the form (journaled) and return to the participant-ID prompt."""
        self.study.finish_form(self.form_id, self.keyer)
        self.forms_done = self._count_finished()  # a corrected form is not counted twice
        self.cancel()
        self.message = "Form finished. Next form: type its participant ID."


_SHORT = {"invalid_type": "not of its type", "out_of_range": "outside its range",
          "not_in_codes": "not one of its codes"}


def _finished(rec) -> bool:
    return getattr(rec, "finished_at", None) not in (None, "")

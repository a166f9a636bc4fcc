"""The keying screen: one pass, form after form, eyes on the paper.

A view over :class:`~tui.screens.keying_model.KeyingModel`. The one
:class:`~tui.widgets.field_editor.FieldEditor` holds focus for the whole
sitting and calls back into this screen for every key that matters; the
screen asks the model to act, then repaints only what changed (the editor,
two lines of the field list, a few fixed-size text lines), so the cost of a
key does not grow with the number of fields.
"""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Static

from core.values import BLANK, ILLEGIBLE

from ..widgets.field_editor import FieldEditor
from ..widgets.field_list import FieldList
from .keying_model import (
    AUTO_ADVANCE_SETTING,
    CHOOSE_MODE,
    FIELD_MODE,
    ID_MODE,
    REVIEW_MODE,
    KeyingModel,
)


class KeyingScreen(Screen):
    """Keying one pass of a study as one keyer."""

    BINDINGS = [
        Binding("f6", "toggle_auto_advance", "auto-advance", id="keying.auto-advance"),
    ]

    def __init__(self, study, pass_no: int, keyer: str, *, can_leave: bool = False, **kwargs):
        super().__init__(**kwargs)
        self.model = KeyingModel(study, pass_no, keyer)
        self.can_leave = can_leave
        """True when opened from home: Esc at the participant-ID prompt goes back there."""
        self._flags: dict[int, str] = {}
        self._absorb_enter = False
        """True right after auto-advance moved on: the keyer's habitual Enter is absorbed."""
        self._shown: tuple[str, int | None, int | None] | None = None

    def compose(self) -> ComposeResult:
        m = self.model
        yield Static("", id="keying-header", markup=False)
        yield FieldList(
            m.names, [v.label for v in m.variables], [v.section for v in m.variables],
            self._describe, id="field-list",
        )
        yield Static("", id="field-detail", markup=False)
        yield FieldEditor(self, id="field-editor")
        yield Static("", id="keying-message", markup=False)
        yield Static("", id="keying-status", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        self.editor = self.query_one(FieldEditor)
        self.field_list = self.query_one(FieldList)
        self.header = self.query_one("#keying-header", Static)
        self.detail = self.query_one("#field-detail", Static)
        self.message_line = self.query_one("#keying-message", Static)
        self.status_line = self.query_one("#keying-status", Static)
        self.editor.focus()
        self._sync(reload=True)

    # ------------------------------------------------------------- editor calls

    def editor_character(self, character: str) -> bool:
        """A printable key; True when the screen used it (choices), False to type it."""
        m = self.model
        if m.mode == CHOOSE_MODE:
            m.choose(character)
            self._sync(reload=True)
            return True
        if m.mode == REVIEW_MODE:
            m.message = "The form is in review: Enter finishes it, ↑ goes back to its fields."
            self._sync()
            return True
        return False

    def editor_changed(self, text: str) -> None:
        m = self.model
        m.text_changed(text)
        self._absorb_enter = False
        # Only fields auto-advance. The participant ID always takes Enter, as its
        # prompt says: a keyer's habitual Enter after an ID that moved on by itself
        # would otherwise record the form's first field as blank on paper.
        if m.mode == FIELD_MODE and text and m.reaches_width(text):
            self.editor_confirm(text)
            # Auto-advance stands in for the keyer's Enter, so the Enter a keyer
            # presses out of habit right after is taken as that one: the keys for a
            # form are the same with auto-advance on or off (value ⏎, and a second ⏎
            # to keep a warned value). Otherwise it would record the next field
            # blank and shift every later value by one field.
            self._absorb_enter = True

    def editor_confirm(self, text: str) -> None:
        m = self.model
        if self._absorb_enter:
            self._absorb_enter = False
            return
        if m.mode == ID_MODE:
            m.submit_id(text)
        elif m.mode == FIELD_MODE:
            if not m.confirm(text):
                self._sync()
                return
        elif m.mode == REVIEW_MODE:
            m.finish()
        else:
            return
        self._sync(reload=True)

    def editor_tab(self, text: str) -> None:
        """Tab confirms like Enter; in the review it goes to the first flagged field."""
        if self.model.mode == REVIEW_MODE:
            self._absorb_enter = False
            self.model.next_flagged()
            self._sync(reload=True)
        else:
            self.editor_confirm(text)

    def editor_page(self, direction: int) -> None:
        """PageUp/PageDown scroll the field list (the editor keeps its place)."""
        if direction < 0:
            self.field_list.scroll_page_up(animate=False)
        else:
            self.field_list.scroll_page_down(animate=False)

    def editor_back(self) -> None:
        self._absorb_enter = False
        m = self.model
        if m.mode == CHOOSE_MODE:
            m.cancel()
        elif m.mode in (FIELD_MODE, REVIEW_MODE):
            m.back()
        self._sync(reload=True)

    def editor_illegible(self) -> None:
        self._absorb_enter = False
        m = self.model
        if m.mode == FIELD_MODE:
            m.mark_illegible()
            self._sync(reload=True)
        elif m.mode == ID_MODE:
            m.message = "A form needs a participant ID: key the digits you can read."
            self._sync()

    def editor_escape(self) -> None:
        self._absorb_enter = False
        m = self.model
        if m.mode in (FIELD_MODE, REVIEW_MODE):
            left = m.form_id
            m.cancel()
            m.message = (f"Form {left} left unfinished; everything confirmed is saved. "
                         "Type its participant ID to go on with it.")
        elif m.mode == CHOOSE_MODE:
            m.cancel()
        elif self.can_leave:
            self.dismiss()
            return
        self._sync(reload=True)

    def action_toggle_auto_advance(self) -> None:
        m = self.model
        m.auto_advance = not m.auto_advance
        m.study.set_setting(AUTO_ADVANCE_SETTING, "on" if m.auto_advance else "off", m.keyer)
        m.message = f"Auto-advance at a field's width is {'on' if m.auto_advance else 'off'}."
        self._sync()

    # ------------------------------------------------------------- painting

    def _describe(self, index: int) -> tuple[str, str]:
        """This pass's value of field ``index`` for the list, and its review flag."""
        m = self.model
        if m.form_id is None:
            return "", ""
        name = m.names[index]
        state = m.states.get(name)
        if state is None:
            value = "·"
        elif state == BLANK:
            value = "(blank)"
        elif state == ILLEGIBLE:
            value = "(illegible)"
        else:
            value = m.texts.get(name) or ""
        return value, self._flags.get(index, "")

    def _sync(self, reload: bool = False) -> None:
        """Repaint after the model acted; the editor is reloaded only when the place changed.

        A warning leaves the keyer's text in the editor (so a second Enter keeps it).
        """
        m = self.model
        shown = (m.mode, m.form_id, m.cursor)
        if m.mode == REVIEW_MODE:
            self._flags = {f.index: f.text for f in m.flags()}
        elif self._flags:
            self._flags = {}
        if reload and shown != self._shown:
            self._load_editor()
        if shown[:2] != (self._shown or (None, None))[:2] or m.mode == REVIEW_MODE:
            self.field_list.refresh()  # new form or review flags: repaint the visible window
        elif self._shown is not None and self._shown[2] is not None:
            self.field_list.refresh_field(self._shown[2])
        self.field_list.show(m.cursor if m.mode == FIELD_MODE else None)
        self._shown = shown
        self.detail.update(self._detail_text(), layout=False)
        self.message_line.update(m.message, layout=False)
        self.header.update(self._header_text(), layout=False)
        self.status_line.update(self._status_text(), layout=False)

    def _load_editor(self) -> None:
        m = self.model
        if m.mode == FIELD_MODE:
            name = m.names[m.cursor]
            state = m.states.get(name)
            hint = "illegible: Enter keeps, type to change" if state == ILLEGIBLE else \
                "Enter on empty = blank on paper · * = illegible"
            self.editor.load(m.texts.get(name) or "", hint)
        elif m.mode == ID_MODE:
            self.editor.load("", "participant ID of the next form")
        elif m.mode == CHOOSE_MODE:
            self.editor.load("", "press a number from the list")
        else:
            self.editor.load("", "Enter finishes this form")

    def _header_text(self) -> str:
        m = self.model
        form = f" · form {m.form_id}" if m.form_id is not None else ""
        return (f"Pass {m.pass_no} · keyer {m.keyer}{form} · forms done in this pass "
                f"{m.forms_done} · the other pass has {m.other_pass_forms} forms")

    def _status_text(self) -> str:
        m = self.model
        auto = "on" if m.auto_advance else "off"
        return (f"fields this sitting {m.sitting_fields} · {m.fields_per_minute:.1f} fields "
                f"per minute · forms done {m.forms_done} · auto-advance {auto}")

    def _detail_text(self) -> str:
        m = self.model
        if m.mode == ID_MODE:
            lines = ["New form: type the participant ID written on it, then Enter."]
            waiting = m.unfinished_forms()
            if waiting:
                listed = ", ".join(p or f"form {f}" for f, p in waiting[:8])
                more = f" and {len(waiting) - 8} more" if len(waiting) > 8 else ""
                lines.append(f"Unfinished in this pass: {listed}{more}.")
            return "\n".join(lines)
        if m.mode == CHOOSE_MODE:
            return "\n".join(m.choice_lines())
        if m.mode == REVIEW_MODE:
            n = len(self._flags)
            if n:
                named = ", ".join(f"{m.names[i]} ({why})" for i, why in
                                  list(self._flags.items())[:4])
                flagged = f"{n} field(s) marked !: {named}{' …' if n > 4 else ''}"
            else:
                flagged = "nothing flagged"
            return (f"Review of form {m.form_id} (participant {m.pending_id or '?'}): "
                    f"{flagged}.\nEnter finishes the form · Tab goes to the first flagged "
                    "field · ↑ the last field · PgUp/PgDn scroll · Esc leaves it unfinished.")
        var = m.variables[m.cursor]
        page = f"page {var.section}" if var.section.isdigit() else var.section
        section = f"{page} · " if page else ""
        skipped = "" if m.applies(m.cursor) else \
            f"\ndoes not apply here ({var.applies_if} is false): Enter for blank"
        return (f"{section}{var.name}  {var.label}\nallowed: {m.allowed[m.cursor]}"
                f"{' · required' if var.required else ''}{skipped}")

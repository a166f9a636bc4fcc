"""Set-asides from the resolution screen: the prompt and the list with undo.

Setting a participant aside keeps them out of the analysis file with a
reason (and, optionally, the name of the rule applied); undoing it is a new
journal entry, never a deletion (``core.resolution.set_aside`` / ``restore``).
The list is short (participants, not cells), so a stock DataTable is fine.
"""

from __future__ import annotations

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen, Screen
from textual.widgets import DataTable, Footer, Input, Static

from core import resolution as res
from core.errors import KeyproofError

from .reason_dialog import DIALOG_CSS, ValueDialog, keys_in_order


class SetAsideDialog(ModalScreen[tuple[str, str, str] | None]):
    """Participant, reason and optional rule; Enter moves on, Enter on the last submits."""

    DEFAULT_CSS = "SetAsideDialog { align: center middle; }" + DIALOG_CSS
    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, participant: str = "", **kwargs):
        super().__init__(**kwargs)
        self.participant = participant

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield Static("Set a participant aside (kept in the study, left out of the analysis file)",
                         classes="dialog-title", markup=False)
            yield Input(value=self.participant, placeholder="participant ID", id="aside-participant")
            yield Input(placeholder="reason (required), e.g. answered the wrong version", id="aside-reason")
            yield Input(placeholder="rule applied (optional), e.g. fewer than half answered", id="aside-rule")
            yield Static("", classes="dialog-note", id="aside-problem", markup=False)

    def on_mount(self) -> None:
        target = "#aside-reason" if self.participant else "#aside-participant"
        self.query_one(target, Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        order = ["aside-participant", "aside-reason", "aside-rule"]
        at = order.index(event.input.id)
        if at < 2:
            self.query_one(f"#{order[at + 1]}", Input).focus()
            return
        who, reason, rule = (self.query_one(f"#{i}", Input).value.strip() for i in order)
        if not who or not reason:
            missing = "participant ID" if not who else "reason"
            self.query_one("#aside-problem", Static).update(f"The {missing} is empty — fill it in.")
            self.query_one(f"#{order[0 if not who else 1]}", Input).focus()
            return
        self.dismiss((who, reason, rule))

    def action_cancel(self) -> None:
        self.dismiss(None)


class SetAsideView(Screen):
    """Everyone set aside now, with reasons; ``u`` brings the highlighted one back."""

    DEFAULT_CSS = """
    SetAsideView { layout: vertical; }
    #aside-heading { height: 1; padding: 0 1; text-style: bold; }
    #aside-table { height: 1fr; }
    #aside-message { height: 1; padding: 0 1; color: $warning; }
    """
    BINDINGS = [
        Binding("u", "undo", "bring back", id="setaside.undo"),
        Binding("escape", "leave", "back", id="setaside.leave"),
    ]

    def __init__(self, study, keyer: str, **kwargs):
        super().__init__(**kwargs)
        self.study, self.keyer = study, keyer
        self.participants: list[str] = []

    def compose(self) -> ComposeResult:
        yield Static("Participants set aside", id="aside-heading", markup=False)
        yield DataTable(id="aside-table", cursor_type="row", zebra_stripes=True)
        yield Static("", id="aside-message", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one("#aside-table", DataTable)
        table.add_columns("participant", "reason", "rule", "by", "at")
        self.refill()
        table.focus()

    def refill(self) -> None:
        table = self.query_one("#aside-table", DataTable)
        table.clear()
        listed = res.set_aside_list(self.study)
        self.participants = [str(p) for p in listed["participant"]]
        for r in listed.itertuples(index=False):
            table.add_row(str(r.participant), str(r.reason), str(r.rule or ""), str(r.keyer),
                          str(r.at)[:16])
        n = len(self.participants)
        self.query_one("#aside-heading", Static).update(
            f"Participants set aside: {n}" if n else "No participant is set aside.")

    async def on_key(self, event: events.Key) -> None:
        await keys_in_order(self, event)

    def action_undo(self) -> None:
        table = self.query_one("#aside-table", DataTable)
        if not self.participants:
            return
        who = self.participants[table.cursor_row]

        def done(reason: str | None) -> None:
            if not reason:
                return
            try:
                res.restore(self.study, who, reason, self.keyer)
            except KeyproofError as exc:
                self.query_one("#aside-message", Static).update(str(exc))
                return
            self.query_one("#aside-message", Static).update(
                f"Participant {who} is back in the analysis file (journaled).")
            self.refill()

        self.app.push_screen(ValueDialog(f"Bring participant {who} back: the reason, then Enter"), done)

    def action_leave(self) -> None:
        self.app.pop_screen()

"""A small dialog asking the keyer's initials before keying from home."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static


class KeyerPrompt(ModalScreen[str | None]):
    """Dismisses with the initials typed, or None on Esc."""

    BINDINGS = [Binding("escape", "cancel", "cancel", id="keyer-prompt.cancel")]

    def __init__(self, pass_no: int, **kwargs):
        super().__init__(**kwargs)
        self.pass_no = pass_no

    def compose(self) -> ComposeResult:
        with Vertical(id="keyer-box"):
            yield Static(f"Keying pass {self.pass_no}: your initials, then Enter.",
                         id="keyer-question")
            yield Input(placeholder="e.g. AB", max_length=12, id="keyer-initials")
            yield Static("", id="keyer-problem")

    def on_mount(self) -> None:
        self.query_one("#keyer-initials", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        initials = event.value.strip()
        if not initials:
            self.query_one("#keyer-problem", Static).update(
                "The journal records who keyed each field: type your initials.")
            return
        self.dismiss(initials)

    def action_cancel(self) -> None:
        self.dismiss(None)

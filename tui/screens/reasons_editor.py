"""The study's list of reasons, edited from the resolution screen.

The list is what the reason dialog offers, in the same order: the first
reason is picked with 1, the second with 2, and so on. Digits 1 to 9 are
all the resolver's hand has, so the editor holds at most nine reasons and
refuses a tenth (a longer list stored by other means still works: the
dialog gives digits to the first nine and ↑↓ Enter reaches the rest).

A reason can be added, reworded in place (it keeps its digit), removed and
moved. Decisions already taken keep the words they were taken with: the
journal holds each decision's reason as text, not as a position in this list.

Nothing is written until ``s``: the whole list is then saved at once with
``core.resolution.set_reasons`` (one journal row under the resolver's
initials). Esc leaves without saving.
"""

from __future__ import annotations

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Footer, Static

from core import resolution as res
from core.errors import KeyproofError

from .reason_dialog import DIALOG_CSS, ValueDialog, keys_in_order

#: One reason per digit key 1..9 in the reason dialog.
MAX_REASONS = 9


def editor_text(items: list[str], marked: int) -> str:
    """The list as the editor shows it: marker, the digit that will pick it, the words."""
    lines = []
    for i, item in enumerate(items):
        key = str(i + 1) if i < MAX_REASONS else " "
        lines.append(f"{'›' if i == marked else ' '} {key}  {item}")
    return "\n".join(lines)


class ReasonsEditor(ModalScreen[list[str] | None]):
    """Add, remove and reorder the study's reasons; ``s`` saves, Esc cancels.

    Dismisses with the list saved (as ``set_reasons`` kept it), or None.
    """

    AUTO_FOCUS = None  # every key is a binding here; there is no text field
    DEFAULT_CSS = "ReasonsEditor { align: center middle; }" + DIALOG_CSS
    BINDINGS = [
        Binding("up", "mark(-1)", show=False),
        Binding("down", "mark(1)", show=False),
        Binding("a", "add", "add", id="reasons.add"),
        Binding("r", "reword", "reword", id="reasons.reword"),
        Binding("x", "remove", "remove", id="reasons.remove"),
        Binding("k,shift+up", "move_item(-1)", "move up", id="reasons.up"),
        Binding("j,shift+down", "move_item(1)", "move down", id="reasons.down"),
        Binding("s", "save", "save", id="reasons.save"),
        Binding("escape", "cancel", "cancel", id="reasons.cancel"),
    ]
    HINT = ("↑↓ mark · a add · r reword · x remove · k/j move up/down · s save · Esc cancel\n"
            "the digit beside a reason picks it when a decision asks why")

    def __init__(self, study, keyer: str, **kwargs):
        super().__init__(**kwargs)
        self.study, self.keyer = study, keyer
        self.items: list[str] = res.reasons(study)
        self.saved = list(self.items)
        self.marked = 0

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield Static(self._title(), id="reasons-title", classes="dialog-title", markup=False)
            yield Static(editor_text(self.items, self.marked), id="reasons-list",
                         classes="dialog-list", markup=False)
            yield Static("", id="reasons-message", classes="dialog-note", markup=False)
            yield Static(self.HINT, classes="dialog-hint", markup=False)
        yield Footer(compact=True)

    async def on_key(self, event: events.Key) -> None:
        # Keys typed right after "a" belong to the new reason's dialog.
        await keys_in_order(self, event)

    @property
    def changed(self) -> bool:
        return self.items != self.saved

    def _title(self) -> str:
        unsaved = "  ·  not saved yet" if self.changed else ""
        return f"Reasons for this study: {len(self.items)} of at most {MAX_REASONS}{unsaved}"

    def _repaint(self, message: str = "") -> None:
        self.query_one("#reasons-title", Static).update(self._title())
        self.query_one("#reasons-list", Static).update(editor_text(self.items, self.marked))
        self.query_one("#reasons-message", Static).update(message)

    def action_mark(self, step: int) -> None:
        if self.items:
            self.marked = (self.marked + step) % len(self.items)
            self._repaint()

    def action_add(self) -> None:
        if len(self.items) >= MAX_REASONS:
            self._repaint(f"{MAX_REASONS} reasons already, one per digit — remove one (x) before adding.")
            return

        def added(text: str | None) -> None:
            words = " ".join((text or "").split())
            if not words:
                return
            if words in self.items:
                self.marked = self.items.index(words)
                self._repaint(f"“{words}” is already in the list.")
                return
            self.items.append(words)
            self.marked = len(self.items) - 1
            self._repaint()

        self.app.push_screen(ValueDialog("A new reason (added at the end), then Enter:"), added)

    def action_reword(self) -> None:
        """Change the marked reason's words, keeping its place (and so its digit)."""
        if not self.items:
            return
        at = self.marked

        def reworded(text: str | None) -> None:
            words = " ".join((text or "").split())
            if not words or words == self.items[at]:
                return
            if words in self.items:
                self._repaint(f"“{words}” is already in the list — remove one of the two (x).")
                return
            self.items[at] = words
            self._repaint()

        self.app.push_screen(ValueDialog(f"Reason {at + 1} in new words (Backspace to change), "
                                         "then Enter:", value=self.items[at]), reworded)

    def action_remove(self) -> None:
        if len(self.items) <= 1:
            self._repaint("A decision always needs a reason to pick — keep at least one.")
            return
        self.items.pop(self.marked)
        self.marked = min(self.marked, len(self.items) - 1)
        self._repaint()

    def action_move_item(self, step: int) -> None:
        to = self.marked + step
        if not self.items or not 0 <= to < len(self.items):
            return
        self.items[self.marked], self.items[to] = self.items[to], self.items[self.marked]
        self.marked = to
        self._repaint()

    def action_save(self) -> None:
        try:
            kept = res.set_reasons(self.study, self.items, self.keyer)
        except KeyproofError as exc:
            self._repaint(str(exc))
            return
        self.dismiss(kept)

    def action_cancel(self) -> None:
        self.dismiss(None)

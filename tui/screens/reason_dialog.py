"""The small modal prompts of a decision: the reason, a typed value, a choice.

All three suit a person with the paper in one hand: a digit picks an entry
at once, Enter accepts the entry marked, Esc cancels. Nothing here touches
the study; each dialog dismisses with what was chosen (None on Esc) and the
resolution screen records the decision.
"""

from __future__ import annotations

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

# Shared by the three dialogs; kept here because the package ships only the
# app's own .tcss beside tui/ (see the report to the lead).
DIALOG_CSS = """
.dialog-box {
    width: 76; height: auto; max-height: 90%;
    padding: 1 2; background: $surface; border: round $primary;
}
.dialog-title { text-style: bold; margin-bottom: 1; }
.dialog-note { color: $warning; margin-bottom: 1; }
.dialog-list { height: auto; }
.dialog-hint { color: $text-muted; margin-top: 1; }
"""

#: Keys that pick entries 1..10 of a list, in order.
PICK_KEYS = ("1", "2", "3", "4", "5", "6", "7", "8", "9", "0")


async def keys_in_order(screen, event: events.Key) -> None:
    """Call from a screen's ``on_key`` so keys typed quickly keep their order across dialogs.

    Textual hands a key to the screen on top when the key is read, and runs a
    screen's bindings only once the key has bubbled back up to the app; by
    then the next keys are already queued on the old screen. So "5", "4",
    "2", Enter typed in a burst would open the value dialog and lose the
    value. Here the screen runs its own binding at once (a dialog it opens
    is then on top), and hands keys that reach it while a dialog is on top
    on to that dialog.
    """
    top = screen.app.screen
    if top is not screen:
        event.stop()
        event.prevent_default()
        top.post_message(events.Key(event.key, event.character))
        return
    active = screen.active_bindings.get(event.key)
    if active is not None and active.enabled and active.node is screen:
        event.stop()
        event.prevent_default()
        await screen.run_action(active.binding.action)


def _list_text(items: list[str], marked: int, digits: int = len(PICK_KEYS)) -> str:
    lines = []
    for i, item in enumerate(items):
        key = PICK_KEYS[i] if i < digits else " "
        lines.append(f"{'›' if i == marked else ' '} {key}  {item}")
    return "\n".join(lines)


class PickList(ModalScreen[str | None]):
    """Shared behaviour: a list picked by digit or by arrows and Enter."""

    AUTO_FOCUS = None  # digits must reach the bindings, not a text field
    DEFAULT_CSS = "PickList { align: center middle; }" + DIALOG_CSS
    BINDINGS = [
        *(Binding(k, f"pick({i})", show=False) for i, k in enumerate(PICK_KEYS)),
        Binding("up", "mark(-1)", show=False),
        Binding("down", "mark(1)", show=False),
        Binding("enter", "accept", "accept marked"),
        Binding("escape", "cancel", "cancel"),
    ]

    HINT = "digit: pick  ·  ↑↓ Enter: the marked one  ·  Esc: cancel"
    DIGITS = len(PICK_KEYS)
    """How many entries get a digit; the rest are reached with ↑↓ Enter."""

    def __init__(self, title: str, items: list[str], marked: int = 0, note: str = "", **kwargs):
        super().__init__(**kwargs)
        self.title_text = title
        self.items = list(items)
        self.marked = max(0, min(marked, len(self.items) - 1))
        self.note = note

    def compose_list(self) -> ComposeResult:
        yield Static(self.title_text, classes="dialog-title", markup=False)
        if self.note:
            yield Static(self.note, classes="dialog-note", markup=False)
        yield Static(_list_text(self.items, self.marked, self.DIGITS), classes="dialog-list", markup=False)
        yield Static(self.HINT, classes="dialog-hint", markup=False)

    async def on_key(self, event: events.Key) -> None:
        await keys_in_order(self, event)

    def _repaint(self) -> None:
        self.query_one(".dialog-list", Static).update(_list_text(self.items, self.marked, self.DIGITS))

    def action_pick(self, i: int) -> None:
        if i < min(len(self.items), self.DIGITS):
            self.dismiss(self.items[i])

    def action_mark(self, step: int) -> None:
        if self.items:
            self.marked = (self.marked + step) % len(self.items)
            self._repaint()

    def action_accept(self) -> None:
        if self.items:
            self.dismiss(self.items[self.marked])

    def action_cancel(self) -> None:
        self.dismiss(None)


class ReasonDialog(PickList):
    """Why the decision stands: one of the study's reasons, or free text.

    A digit picks a reason; Enter takes the marked one (the screen marks the
    likeliest); ``t`` moves to the free-text line, where Enter submits it.
    Digits 1 to 9 follow the study's list in order (the reasons editor keeps
    it to nine); 0 picks nothing here, as it means "blank" on the screen
    behind, and reasons past the ninth are reached with ↑↓ Enter.
    """

    BINDINGS = [Binding("t", "free_text", "type a reason")]
    DIGITS = 9
    HINT = "digit: pick  ·  ↑↓ Enter: the marked one  ·  t: type a reason  ·  Esc: cancel"

    def __init__(self, what: str, reasons: list[str], marked: int = 0, note: str = "", **kwargs):
        super().__init__(f"Reason for: {what}", reasons, marked, note, **kwargs)

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield from self.compose_list()
            free = Input(placeholder="t: type your own reason, then Enter", id="reason-text")
            # Not focusable until asked for: Textual focuses the first focusable
            # widget of a new screen, and digits must reach the pick bindings.
            free.can_focus = False
            yield free

    def action_free_text(self) -> None:
        free = self.query_one("#reason-text", Input)
        free.can_focus = True
        free.focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        text = " ".join(event.value.split())
        if text:
            self.dismiss(text)


class ChoiceDialog(PickList):
    """One of a few entries (a missing code, a pass, a form, a filter)."""

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield from self.compose_list()


class ValueDialog(ModalScreen[str | None]):
    """One line of text: the value on the paper, a form ID, the resolver's initials.

    Enter submits what is typed (empty allowed only with ``allow_empty``).
    """

    DEFAULT_CSS = "ValueDialog { align: center middle; }" + DIALOG_CSS
    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, question: str, value: str = "", note: str = "",
                 allow_empty: bool = False, **kwargs):
        super().__init__(**kwargs)
        self.question, self.value, self.note = question, value, note
        self.allow_empty = allow_empty

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield Static(self.question, classes="dialog-title", markup=False)
            if self.note:
                yield Static(self.note, classes="dialog-note", markup=False)
            yield Input(value=self.value, id="value-text")

    def on_mount(self) -> None:
        self.query_one("#value-text", Input).focus()

    async def on_key(self, event: events.Key) -> None:
        # Keys typed right after the one that opened this dialog reach the
        # screen, not the field: they are put into the field here. Keys that
        # come after Enter go on to whatever is on top by then.
        if self.app.screen is not self:
            await keys_in_order(self, event)
            return
        field = self.query_one("#value-text", Input)
        if event.key == "enter":
            event.stop()
            self._submit(field.value)
        elif event.key == "backspace":
            event.stop()
            field.value = field.value[:-1]
        elif event.is_printable and event.character:
            event.stop()
            field.value += event.character
            field.cursor_position = len(field.value)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self._submit(event.value)

    def _submit(self, value: str) -> None:
        if value.strip() or self.allow_empty:
            self.dismiss(value)

    def action_cancel(self) -> None:
        self.dismiss(None)

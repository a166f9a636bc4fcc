"""The one editor every keyed character goes into.

Textual delivers keys to the focused widget's queue in the order they were
typed, but a key the widget does not stop bubbles up and meets the
(non-priority) bindings later, after characters typed behind it may already
have been handled. So this editor handles every key that moves between fields
or changes its text (Enter, keypad Enter, Tab, Shift+Tab, Up, Down, the
illegible mark, Backspace, Delete, Left, Right, Home, End, Escape) in its own
``_on_key``: each key is finished, committed and the next field loaded before
the next key is looked at. ``12⏎34⏎⏎5`` therefore lands exactly as if typed
slowly, however fast it arrives. For the same reason the editor calls its
owner (the :class:`Keyer` protocol) directly rather than posting messages: a
message would wait in the screen's queue while later keys ran ahead of it.

The illegible key is ``*`` (on the numeric keypad) pressed on an empty
field: ``*`` is not part of any integer, number or ISO date, and a string
field whose paper text begins with ``*`` is keyed with a leading space
(values are trimmed when compared).
"""

from __future__ import annotations

from typing import Protocol

from textual import events
from textual.binding import Binding
from textual.widgets import Input

ILLEGIBLE_CHARACTER = "*"


class Keyer(Protocol):
    """What the editor calls; the keying screen implements it."""

    def editor_character(self, character: str) -> bool: ...
    def editor_confirm(self, text: str) -> None: ...
    def editor_tab(self, text: str) -> None: ...
    def editor_back(self) -> None: ...
    def editor_illegible(self) -> None: ...
    def editor_escape(self) -> None: ...
    def editor_changed(self, text: str) -> None: ...
    def editor_page(self, direction: int) -> None: ...


class FieldEditor(Input):
    """An Input that confirms, moves and marks in its own key handler (see module doc)."""

    # Shown in the footer; the keys themselves are handled in ``_on_key`` so they
    # stay in order with typed characters (a binding would run too late in a burst).
    BINDINGS = [
        Binding("enter", "confirm", "confirm", id="keying.confirm"),
        Binding("shift+tab", "back", "back", key_display="⇧Tab/↑", id="keying.back"),
        Binding("asterisk", "illegible", "illegible", key_display="*", id="keying.illegible"),
        Binding("escape", "escape", "new form", key_display="Esc", id="keying.escape"),
    ]

    def __init__(self, keyer: Keyer, **kwargs):
        # A steady cursor: a blinking one repaints twice a second for nothing.
        super().__init__(select_on_focus=False, **kwargs)
        self.cursor_blink = False
        self._keyer = keyer

    def load(self, text: str, placeholder: str = "") -> None:
        """Show ``text`` (the field's current value) with the cursor at its end."""
        self.value = text
        self.cursor_position = len(text)
        self.placeholder = placeholder

    async def _on_key(self, event: events.Key) -> None:
        key = event.key
        handled = True
        if key in ("enter", "ctrl+m", "ctrl+j"):
            self._keyer.editor_confirm(self.value)
        elif key == "tab":
            self._keyer.editor_tab(self.value)
        elif key in ("shift+tab", "up"):
            self._keyer.editor_back()
        elif key in ("pageup", "pagedown"):
            self._keyer.editor_page(-1 if key == "pageup" else 1)
        elif key == "escape":
            self._keyer.editor_escape()
        elif (event.character == ILLEGIBLE_CHARACTER or key == "multiply") and not self.value:
            self._keyer.editor_illegible()
        elif key == "backspace":
            if self.value:
                self.action_delete_left()
            self._keyer.editor_changed(self.value)
        elif key == "delete":
            self.action_delete_right()
        elif key == "left":
            self.action_cursor_left()
        elif key == "right":
            self.action_cursor_right()
        elif key == "home":
            self.action_home()
        elif key == "end":
            self.action_end()
        elif event.is_printable and event.character:
            if not self._keyer.editor_character(event.character):
                self.insert_text_at_cursor(event.character)
                self._keyer.editor_changed(self.value)
        else:
            handled = False
        if handled:
            event.stop()
            event.prevent_default()
            self._restart_blink()

    def _on_paste(self, event: events.Paste) -> None:
        # A paste is one field's text; newlines in it do not confirm anything.
        super()._on_paste(event)
        self._keyer.editor_changed(self.value)

    # The footer's bindings, for a mouse click; typed keys never reach these.
    def action_confirm(self) -> None:
        self._keyer.editor_confirm(self.value)

    def action_back(self) -> None:
        self._keyer.editor_back()

    def action_illegible(self) -> None:
        if not self.value:
            self._keyer.editor_illegible()

    def action_escape(self) -> None:
        self._keyer.editor_escape()

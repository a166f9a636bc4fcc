"""The keying screen's list of fields: a Line API view that renders visible rows only.

A form can have hundreds of fields. One widget per field makes every
keystroke re-lay the whole screen (TEXTUAL-NOTES.md measured 75–85 ms per key
at 300 fields); this view keeps one flat list of rows and paints just the
lines in its window, so a keystroke or an advance costs the same for 30 or
300 fields. It never takes focus: the one field editor keeps every key.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from rich.segment import Segment
from textual.geometry import Size
from textual.scroll_view import ScrollView
from textual.strip import Strip


@dataclass(frozen=True)
class Row:
    """One line of the list: a section heading (``index`` None) or a field."""

    index: int | None
    text: str = ""


class FieldList(ScrollView, can_focus=False):
    """Fields in paper order, grouped by section, with this pass's values.

    ``describe(index)`` returns ``(value_text, note)`` for a field: what this
    pass holds and a short flag ("!" reason) or "". It is called only for the
    rows on screen.
    """

    COMPONENT_CLASSES = {
        "field-list--section",
        "field-list--current",
        "field-list--muted",
        "field-list--flag",
    }

    DEFAULT_CSS = """
    FieldList { overflow-x: hidden; }
    FieldList > .field-list--section { text-style: bold; }
    FieldList > .field-list--current { text-style: reverse; }
    FieldList > .field-list--muted { color: $text-muted; }
    FieldList > .field-list--flag { color: $text-warning; }
    """

    def __init__(self, names, labels, sections, describe: Callable[[int], tuple[str, str]],
                 **kwargs):
        super().__init__(**kwargs)
        self._names = list(names)
        self._labels = list(labels)
        self._describe = describe
        self._rows: list[Row] = []
        self._line_of: list[int] = []
        last = None
        for i, section in enumerate(sections):
            if section and section != last:
                # A bare number is a page of the paper form.
                title = f"page {section}" if section.isdigit() else section
                self._rows.append(Row(None, f" {title} "))
            last = section
            self._line_of.append(len(self._rows))
            self._rows.append(Row(i))
        self._name_width = min(max((len(n) for n in self._names), default=4), 24)
        self.current: int | None = None
        self.virtual_size = Size(0, len(self._rows))

    def show(self, index: int | None) -> None:
        """Mark field ``index`` as current and scroll it into the middle third."""
        old = self.current
        self.current = index
        if index is not None:
            line = self._line_of[index]
            top, height = int(self.scroll_y), max(self.size.height, 1)
            if not (top + height // 3 <= line < top + height - height // 3):
                self.scroll_to(y=max(0, line - height // 2), animate=False)
        for i in (old, index):
            if i is not None:
                self.refresh_line(self._line_of[i])

    def refresh_field(self, index: int) -> None:
        """Repaint one field's line (its value changed)."""
        self.refresh_line(self._line_of[index])

    def render_line(self, y: int) -> Strip:
        width = self.size.width
        line = int(self.scroll_y) + y
        base = self.rich_style
        if line >= len(self._rows):
            return Strip.blank(width, base)
        row = self._rows[line]
        if row.index is None:
            style = base + self.get_component_rich_style("field-list--section")
            return Strip([Segment(row.text.center(width, "─")[:width], style)], width)
        i = row.index
        value, note = self._describe(i)
        name = self._names[i][: self._name_width].ljust(self._name_width)
        marker = "›" if i == self.current else " "
        head = f"{marker} {name}  {value[:14]:<14}  "
        label = self._labels[i]
        style = base
        if i == self.current:
            style = base + self.get_component_rich_style("field-list--current")
        segments = [Segment(head, style)]
        if note:
            flag = style + self.get_component_rich_style("field-list--flag")
            segments.append(Segment(f"! {note}  ", flag))
        muted = style + self.get_component_rich_style("field-list--muted")
        segments.append(Segment(label, muted))
        return Strip(segments).crop_extend(0, width, style if i == self.current else base)

    def on_resize(self) -> None:
        if self.current is not None:
            self.show(self.current)

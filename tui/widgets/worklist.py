"""The resolution screen's worklist: a Line API view over column arrays.

Why not a stock DataTable: TEXTUAL-NOTES.md measured it measuring every cell
on the first idle after rows are added (10,000 rows freeze the screen about
1.9 s). This view keeps the worklist as a few NumPy arrays (one per shown
column) and a vector of row positions for the current filter, and formats
only the lines in its window. Loading 50,000 rows is a handful of array
copies; moving the cursor repaints two lines, whatever the length.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from rich.segment import Segment
from textual.geometry import Size
from textual.scroll_view import ScrollView
from textual.strip import Strip

#: Columns shown, with their widths in cells (the last one takes the rest).
SHOWN = (
    ("participant", 9),
    ("variable", 14),
    ("kind", 14),
    ("pass1", 14),
    ("pass2", 14),
    ("cause", 14),
    ("_status", 8),
)
HEADINGS = {"participant": "form", "variable": "field", "kind": "kind", "pass1": "pass 1",
            "pass2": "pass 2", "cause": "likely cause", "_status": "state"}
#: What the state column says; "open" rows say nothing, so the eye finds the rest.
STATE_WORDS = {"open": "", "settled": "settled", "stale": "REOPENED"}


def _texts(column: pd.Series) -> np.ndarray:
    """A column as an object array, as it is: NA is turned into "" only when drawn.

    Converting 50,000 values per column up front costs more than the whole
    first paint; a window of lines converts about 40.
    """
    return column.to_numpy(dtype=object)


def _cell(value) -> str:
    if value is None or value is pd.NA or value != value:  # None, NA, NaN
        return ""
    return str(value)


class WorklistView(ScrollView, can_focus=False):
    """Discrepancies one per line; ``view`` holds the worklist positions shown.

    The cursor is a position in ``view`` (None when the view is empty). The
    screen owns the keys and calls :meth:`goto`; this widget never takes focus.
    """

    COMPONENT_CLASSES = {"worklist--current", "worklist--settled", "worklist--heading"}

    DEFAULT_CSS = """
    WorklistView { overflow-x: hidden; }
    WorklistView > .worklist--current { text-style: reverse; }
    WorklistView > .worklist--settled { color: $text-muted; }
    WorklistView > .worklist--heading { text-style: bold underline; }
    """

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        self._cols: dict[str, np.ndarray] = {name: np.empty(0, dtype=object) for name, _ in SHOWN}
        self.view = np.empty(0, dtype=np.int64)
        self.cursor: int | None = None
        self.virtual_size = Size(0, 1)

    # ------------------------------------------------------------------ data

    def load(self, rows: pd.DataFrame, view: np.ndarray) -> None:
        """Show ``rows`` (a worklist) restricted to positions ``view``; cursor to the top."""
        self._cols = {name: _texts(rows[name]) if name in rows else
                      np.full(len(rows), "", dtype=object) for name, _ in SHOWN}
        self._cols["_status"] = self._cols["_status"].copy()  # set_status writes into it
        self.set_view(view)

    def set_view(self, view: np.ndarray, at: int | None = None) -> None:
        """Show other worklist positions (a new filter); ``at`` is a worklist position to land on."""
        self.view = np.asarray(view, dtype=np.int64)
        self.virtual_size = Size(0, len(self.view) + 1)  # +1: the heading line
        self.cursor = None
        self.refresh()
        if len(self.view):
            pos = 0
            if at is not None:
                hit = np.flatnonzero(self.view == at)
                pos = int(hit[0]) if len(hit) else int(np.searchsorted(self.view, at).clip(0, len(self.view) - 1))
            self.goto(pos)

    def set_status(self, positions, status: str) -> None:
        """Mark worklist ``positions`` with a new status and repaint them if shown."""
        self._cols["_status"][np.asarray(positions, dtype=np.int64)] = status
        self.refresh()

    @property
    def current(self) -> int | None:
        """The worklist position under the cursor (None when nothing is shown)."""
        return None if self.cursor is None else int(self.view[self.cursor])

    # ------------------------------------------------------------------ cursor

    def goto(self, pos: int) -> None:
        """Put the cursor on view position ``pos`` (clipped) and keep it in sight."""
        if not len(self.view):
            self.cursor = None
            return
        old, pos = self.cursor, max(0, min(int(pos), len(self.view) - 1))
        self.cursor = pos
        top, height = int(self.scroll_y), max(self.size.height, 2)
        if not (top <= pos <= top + height - 2):
            self.scroll_to(y=max(0, pos - height // 3), animate=False, immediate=True)
        for p in (old, pos):
            if p is not None:
                self.refresh_line(p + 1)  # virtual line: the heading is line 0

    def next_waiting(self, status: np.ndarray, forward: bool = True) -> int | None:
        """View position of the next row (after the cursor) whose ``status`` is not settled."""
        if not len(self.view):
            return None
        here = -1 if self.cursor is None else self.cursor
        if forward:
            # Usually the very next rows are open: look at a short stretch before the whole list.
            near = self.view[here + 1: here + 257]
            hit = np.flatnonzero(status[near] != "settled")
            if len(hit):
                return here + 1 + int(hit[0])
        waiting = np.flatnonzero(status[self.view] != "settled")
        if not len(waiting):
            return None
        if forward:
            later = waiting[waiting > here]
            return int(later[0]) if len(later) else int(waiting[0])
        earlier = waiting[waiting < here]
        return int(earlier[-1]) if len(earlier) else int(waiting[-1])

    # ------------------------------------------------------------------ painting

    def render_line(self, y: int) -> Strip:
        width = self.size.width
        base = self.rich_style
        if y == 0:  # the heading stays put while the rows scroll under it
            text = "  " + "".join(HEADINGS[n][:w - 1].ljust(w) for n, w in SHOWN)
            style = base + self.get_component_rich_style("worklist--heading")
            return Strip([Segment(text[:width], style)]).crop_extend(0, width, base)
        pos = int(self.scroll_y) + y - 1
        if pos >= len(self.view) or pos < 0:
            return Strip.blank(width, base)
        i = self.view[pos]
        cells = []
        for name, w in SHOWN:
            value = _cell(self._cols[name][i])
            if name == "_status":
                value = STATE_WORDS.get(value, value)
            value = " ".join(value.split())  # a newline in free text stays on one line
            cells.append((value[:w - 2] + "…" if len(value) > w - 1 else value).ljust(w))
        style = base
        if _cell(self._cols["_status"][i]) == "settled":
            style = style + self.get_component_rich_style("worklist--settled")
        if pos == self.cursor:
            style = style + self.get_component_rich_style("worklist--current")
        marker = "› " if pos == self.cursor else "  "
        return Strip([Segment(marker + "".join(cells), style)]).crop_extend(0, width, style)

    def on_resize(self) -> None:
        if self.cursor is not None:
            self.goto(self.cursor)

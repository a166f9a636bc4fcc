"""Screening before analysis: a menu of pages (overview, each scale, each variable)
beside the page picked, and set-asides by rule.

The numbers are ``core.screening``'s. Gathering them means building the
verified table (a draft: open cells are left out and said so), the same
table with set-aside participants kept in, and both passes for kappa, which
can take a moment on a big study, so it runs in a worker thread on its own
read-only connection. Setting participants aside by rule runs in a worker
too, on a writing connection of its own: each set-aside is its own synced,
journaled transaction, and a rule may catch many participants.
"""

from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Header, OptionList, Static
from textual.widgets.option_list import Option

from core.errors import KeyproofError
from tui.widgets.screening_text import ScreeningData, page_ids, page_text

from .rule_dialog import RuleDialog


def gather(study_path) -> ScreeningData:
    """Everything the view shows, read through a read-only connection of its own."""
    import pandas as pd

    from core.resolution import everyone_kept, verified_table
    from core.screening import kappa_pairs_from_passes, screen
    from core.store import Study

    with Study.open(study_path, readonly=True) as study:
        codebook = study.codebook
        verified = verified_table(study, draft=True)
        data_all = None
        if len(verified.set_aside):
            data_all = verified_table(everyone_kept(study), draft=True).data
        pairs = kappa_pairs_from_passes(codebook, study.load_pass(1), study.load_pass(2))
    result = screen(verified.data, codebook, data_all=data_all, kappa_pairs=pairs)
    open_cells = len(verified.open_cells)
    notes = []
    if verified.data.empty:
        notes.append("Nobody in the verified table yet — key or import the passes first.")
    if open_cells:
        notes.append(f"Draft: {open_cells} open cell(s) left out of every statistic — "
                     "settle them (r on the home screen) before trusting these numbers.")  # fmt: skip
    aside = verified.set_aside if isinstance(verified.set_aside, pd.DataFrame) else pd.DataFrame()
    if len(aside):
        notes.append(f"{len(aside)} participant(s) set aside and left out; "
                      "the overview shows the numbers with them kept in.")  # fmt: skip
    return ScreeningData(result, verified.data, codebook, verified.study or Path(study_path).name,
                         tuple(notes), verified.open_cells, aside.reset_index(drop=True))  # fmt: skip


class ScreeningScreen(Screen):
    """Pages of screening results; ``a`` sets aside by rule, ``u`` recomputes."""

    DEFAULT_CSS = """
    ScreeningScreen #screening-body { height: 1fr; }
    ScreeningScreen #screening-menu { width: 30; height: 1fr; border-right: solid $primary-darken-2; }
    ScreeningScreen #screening-scroll { width: 1fr; height: 1fr; padding: 0 1; }
    ScreeningScreen #screening-page { width: auto; height: auto; }
    ScreeningScreen #screening-state { height: 1; padding: 0 1; color: $text-muted; }
    """
    BINDINGS = [
        Binding("a", "rule", "set aside by rule", id="screening.rule"),
        Binding("u", "recompute", "recompute", id="screening.recompute"),
        # The menu keeps the arrows and PgUp/PgDn; the page scrolls like a pager.
        Binding("space", "scroll_page(1)", "scroll page", id="screening.page-down"),
        Binding("b", "scroll_page(-1)", "scroll back", show=False, id="screening.page-up"),
        Binding("escape", "leave", "home", id="screening.leave"),
    ]

    def __init__(self, study, **kwargs):
        super().__init__(**kwargs)
        self.study = study
        self.view: ScreeningData | None = None
        self.page = "overview"
        self._texts: dict[str, str] = {}
        self._left = False  # set on leaving: a worker finishing later must not paint

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static("computing…", id="screening-state", markup=False)
        with Horizontal(id="screening-body"):
            yield OptionList(id="screening-menu")
            with VerticalScroll(id="screening-scroll", can_focus=False):
                yield Static("", id="screening-page", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#screening-menu", OptionList).focus()
        self.compute()

    # ------------------------------------------------------------ computing

    @work(thread=True, exclusive=True, group="screening")
    def compute(self) -> None:
        try:
            view = gather(self.study.path)
        except KeyproofError as exc:
            self.app.call_from_thread(self._failed, str(exc))
            return
        # The overview tabulates every variable (most of a second at 5,000 x 300),
        # so it is written here; a single scale's or variable's page takes milliseconds.
        self.app.call_from_thread(self._show, view, page_text(view, "overview"))

    def _failed(self, text: str) -> None:
        if self._left:
            return
        self.query_one("#screening-state", Static).update(f"could not screen: {text}")

    def _show(self, view: ScreeningData, overview: str) -> None:
        if self._left:
            return
        self.view = view
        self._texts = {"overview": overview}
        pages = page_ids(view)
        if self.page not in {pid for pid, _ in pages}:
            self.page = "overview"
        menu = self.query_one("#screening-menu", OptionList)
        menu.set_options(Option(text, id=pid) for pid, text in pages)
        menu.highlighted = [pid for pid, _ in pages].index(self.page)
        self.query_one("#screening-state", Static).update(
            f"{len(view.data)} participants screened · ↑↓ pick a page · a set aside by rule")
        self._paint()

    def _paint(self) -> None:
        if self.view is None:
            return
        if self.page not in self._texts:
            self._texts[self.page] = page_text(self.view, self.page)
        self.query_one("#screening-page", Static).update(self._texts[self.page])

    @on(OptionList.OptionHighlighted, "#screening-menu")
    def _highlighted(self, event: OptionList.OptionHighlighted) -> None:
        if event.option.id and event.option.id != self.page:
            self.page = event.option.id
            self._paint()
            self.query_one("#screening-scroll", VerticalScroll).scroll_home(animate=False)

    # ------------------------------------------------------------ actions

    def action_scroll_page(self, step: int) -> None:
        scroll = self.query_one("#screening-scroll", VerticalScroll)
        (scroll.scroll_page_down if step > 0 else scroll.scroll_page_up)(animate=False)

    def action_recompute(self) -> None:
        self.query_one("#screening-state", Static).update("computing…")
        self.compute()

    def action_leave(self) -> None:
        self._left = True
        self.app.pop_screen()

    def on_unmount(self) -> None:
        self._left = True

    def action_rule(self) -> None:
        if self.view is None:
            self.notify("Still computing — try again in a moment.")
            return
        self.app.push_screen(RuleDialog(self.view, suggestion=self._suggested_rule()),
                             self._apply_rule)

    def _suggested_rule(self) -> str:
        if self.page.startswith("scale:"):
            return f"blank:{self.page[6:]}:1"
        if self.page.startswith("var:"):
            name = self.page[4:]
            if self.view and self.view.result.variables[name].measured:
                return f"z:{name}:3.29"
        return ""

    def _apply_rule(self, chosen) -> None:
        """Set aside everyone the confirmed rule caught, under the rule's name."""
        if not chosen:
            return
        rule, who, reason, keyer = chosen
        self.query_one("#screening-state", Static).update(
            f"setting {len(who)} participant(s) aside under rule {rule.name}…")
        self.set_aside_all(rule.name, who, reason, keyer)

    @work(thread=True, exclusive=True, group="screening-aside")
    def set_aside_all(self, rule_name: str, who: list[str], reason: str, keyer: str) -> None:
        # Its own connection: each set-aside is a journaled, synced transaction,
        # and a rule can catch many participants, so this stays off the screen's thread.
        from core.resolution import set_aside
        from core.store import Study

        done, problem = 0, ""
        try:
            with Study.open(self.study.path) as study:
                for participant in who:
                    set_aside(study, participant, reason, keyer, rule=rule_name)
                    done += 1
        except KeyproofError as exc:
            problem = str(exc)
        self.app.call_from_thread(self._set_aside_done, rule_name, done, len(who), problem)

    def _set_aside_done(self, rule_name: str, done: int, total: int, problem: str) -> None:
        if self._left:
            return
        if problem:
            self.notify(f"Stopped after {done} of {total}: {problem}", severity="error",
                        title="set aside")
        else:
            self.notify(f"{done} participant(s) set aside under rule {rule_name}.",
                        title="set aside")
        self.action_recompute()

"""Home: where a study stands and the ways to go on.

Progress per pass comes straight from the study (one small query). Open
discrepancies need a whole comparison, which can take a moment on a big
study, so it runs in a worker thread on its own read-only connection and the
screen says "counting…" meanwhile.
"""

from __future__ import annotations

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import Footer, Header, OptionList, Static
from textual.widgets.option_list import Option

#: (option id, text shown, app hook); the digit/letter keys are in BINDINGS.
WAYS_ON = (
    ("key-1", "1  key pass 1", "key_1"),
    ("key-2", "2  key pass 2", "key_2"),
    ("resolve", "r  resolve discrepancies", "resolve"),
    ("export", "e  export the verified file", "export"),
    ("report", "p  verification report", "report"),
    ("screen", "s  screening", "screen"),
)


class HomeScreen(Screen):
    """The study's progress, its open discrepancies, and where to go next."""

    BINDINGS = [
        Binding("1", "go('key_1')", "key pass 1", id="home.key-1"),
        Binding("2", "go('key_2')", "key pass 2", id="home.key-2"),
        Binding("r", "go('resolve')", "resolve", id="home.resolve"),
        Binding("e", "go('export')", "export", id="home.export"),
        Binding("p", "go('report')", "report", id="home.report"),
        Binding("s", "go('screen')", "screen", id="home.screen"),
    ]

    def __init__(self, study, **kwargs):
        super().__init__(**kwargs)
        self.study = study

    def compose(self) -> ComposeResult:
        yield Header()
        with Horizontal(id="home-body"):
            with Vertical(id="home-facts"):
                yield Static("Progress", classes="home-heading")
                yield Static("", id="home-progress", markup=False)
                yield Static("Open discrepancies", classes="home-heading")
                yield Static("counting…", id="home-discrepancies", markup=False)
            with Vertical(id="home-ways"):
                yield Static("Go on", classes="home-heading")
                yield OptionList(*(Option(text, id=oid) for oid, text, _ in WAYS_ON),
                                 id="home-menu")
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#home-menu", OptionList).focus()
        self.refresh_facts()

    def on_screen_resume(self) -> None:
        self.refresh_facts()

    def refresh_facts(self) -> None:
        """Re-read progress now and recount discrepancies in the background."""
        self.query_one("#home-progress", Static).update(progress_text(self.study))
        self.query_one("#home-discrepancies", Static).update("counting…")
        self.count_discrepancies()

    @work(thread=True, exclusive=True, group="home-count")
    def count_discrepancies(self) -> None:
        text = discrepancy_text(self.study.path)
        self.app.call_from_thread(self._show_discrepancies, text)

    def _show_discrepancies(self, text: str) -> None:
        self.query_one("#home-discrepancies", Static).update(text)

    @on(OptionList.OptionSelected, "#home-menu")
    def _chosen(self, event: OptionList.OptionSelected) -> None:
        hook = {oid: h for oid, _, h in WAYS_ON}[event.option.id]
        self.action_go(hook)

    def action_go(self, hook: str) -> None:
        app = self.app
        if hook in ("key_1", "key_2"):
            app.ask_keyer_then_key(int(hook[-1]))
        else:
            getattr(app, f"open_{'screening' if hook == 'screen' else hook}")()


def progress_text(study) -> str:
    """Forms, finished forms and keyers of each pass, one line per pass."""
    forms = study.forms()
    lines = []
    for pass_no in (1, 2):
        f = forms[(forms["pass"] == pass_no) & ~forms["dropped"]] if len(forms) else forms
        if not len(f):
            lines.append(f"pass {pass_no}: nothing keyed yet")
            continue
        keyers = ", ".join(sorted({str(k) for k in f["keyer"] if k}))
        finished = int(f["finished_at"].notna().sum())
        lines.append(f"pass {pass_no}: {len(f)} forms, {finished} finished · keyers {keyers}")
    dropped = int(forms["dropped"].sum()) if len(forms) else 0
    if dropped:
        lines.append(f"{dropped} form(s) dropped as keyed twice")
    return "\n".join(lines)


def discrepancy_text(study_path) -> str:
    """Discrepancies by kind (``core.compare.summarise``) and how many are still open.

    Runs in a worker thread, so it opens its own read-only connection.
    """
    from core.compare import compare_study, summarise
    from core.errors import KeyproofError
    from core.store import Study

    try:
        with Study.open(study_path, readonly=True) as study:
            table = compare_study(study)
            summary = summarise(table)
            still_open = _still_open(study, table)
    except KeyproofError as exc:
        return f"could not count: {exc}"
    lines = summary.lines()
    if still_open is not None and len(table):
        lines.insert(0, f"{still_open} of {len(table)} still open (not yet decided, or stale)")
    return "\n".join(lines)


def _still_open(study, table) -> int | None:
    try:
        from core.resolution import join_decisions
    except ImportError:  # decisions not part of this build: every row counts as open
        return None
    rows = join_decisions(table, study.decisions())
    return int((rows["_status"] != "settled").sum())

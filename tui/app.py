"""The Textual app: opens a study and wires the screens together.

Kept small on purpose: it opens the study, pushes the home, keying or
resolution screen, and offers one ``open_*`` hook per way to go on from home;
each hook imports its screen only when it is used, so start-up stays quick.
"""

from __future__ import annotations

from pathlib import Path

from textual.app import App
from textual.binding import Binding

from core.store import Study


class KeyproofApp(App):
    """keyproof's terminal app over one study."""

    CSS_PATH = "app.tcss"
    TITLE = "keyproof"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [Binding("ctrl+q", "quit", "quit", id="app.quit", priority=True)]

    def __init__(self, study_path, *, mode: str = "home", pass_no: int | None = None,
                 keyer: str | None = None):
        super().__init__()
        if mode not in ("home", "key", "resolve"):
            raise ValueError(f"mode must be 'home', 'key' or 'resolve', not {mode!r}")
        if mode == "key" and (pass_no not in (1, 2) or not keyer):
            raise ValueError("keying needs pass_no 1 or 2 and the keyer's initials")
        if mode == "resolve" and not keyer:
            raise ValueError("resolving needs the resolver's initials")
        self.study_path = Path(study_path)
        # Opening is a connect plus one small read (well under a frame), so it is
        # done here: a bad path fails before the screen takes over the terminal.
        self.study = Study.open(self.study_path)
        self.start_mode, self.start_pass, self.start_keyer = mode, pass_no, keyer
        self.sub_title = self.study_path.name

    def on_mount(self) -> None:
        if self.start_mode == "key":
            self.open_keying(self.start_pass, self.start_keyer)
        elif self.start_mode == "resolve":
            self.open_resolve_as(self.start_keyer)
        else:
            from .screens.home import HomeScreen

            self.push_screen(HomeScreen(self.study))

    def on_unmount(self) -> None:
        self.study.close()

    # ------------------------------------------------------------------ hooks

    def open_keying(self, pass_no: int, keyer: str) -> None:
        """Key pass ``pass_no`` as ``keyer``."""
        from .screens.keying import KeyingScreen

        self.push_screen(KeyingScreen(self.study, pass_no, keyer,
                                      can_leave=self.start_mode == "home"))

    def ask_keyer_then_key(self, pass_no: int) -> None:
        """Ask the keyer's initials, then open the keying screen."""
        from .screens.keyer_prompt import KeyerPrompt

        def go(keyer: str | None) -> None:
            if keyer:
                self.open_keying(pass_no, keyer)

        self.push_screen(KeyerPrompt(pass_no), go)

    def open_resolve(self) -> None:
        """Ask the resolver's initials, then resolve discrepancies against the paper."""
        from .screens.reason_dialog import ValueDialog

        def go(keyer: str | None) -> None:
            if keyer and keyer.strip():
                self.open_resolve_as(keyer.strip())

        self.push_screen(ValueDialog("Resolving: your initials, then Enter."), go)

    def open_resolve_as(self, keyer: str) -> None:
        """The resolution screen for ``keyer`` (Esc goes home when opened from there)."""
        from .screens.resolve import ResolveScreen

        self.push_screen(ResolveScreen(self.study, keyer, can_leave=self.start_mode == "home"))

    def open_export(self) -> None:
        """Write the verified file."""
        from .screens.export_dialog import ExportDialog

        self.push_screen(ExportDialog(self.study_path))

    def open_report(self) -> None:
        """Write the verification report."""
        from .screens.report_dialog import ReportDialog

        self.push_screen(ReportDialog(self.study_path))

    def open_screening(self) -> None:
        """Screening before analysis."""
        from .screens.screening import ScreeningScreen

        self.push_screen(ScreeningScreen(self.study))


def make_app(study_path, *, mode: str = "home", pass_no: int | None = None,
             keyer: str | None = None) -> KeyproofApp:
    """The app for the command line and the tests (raises StoreError for a bad study)."""
    return KeyproofApp(study_path, mode=mode, pass_no=pass_no, keyer=keyer)


def run_app(study_path, **kw) -> int:
    """Run the app until the user quits; returns an exit status."""
    app = make_app(study_path, **kw)
    app.run()
    return int(app.return_code or 0)

"""Write the verification report from the app (.html printable page or .md).

Building the report compares the passes and reads every decision, so it
runs in a worker thread on its own read-only connection; the page is
written atomically. A report can be written at any time: open work is
counted in it, not refused. Errors are shown in the dialog.
"""

from __future__ import annotations

from pathlib import Path

from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

from core.errors import ExportError, KeyproofError

from .export_dialog import DIALOG_CSS, default_target

REPORT_ENDINGS = (".html", ".htm", ".md")


def check_report_target(out: Path, study_path: Path) -> None:
    """Refuse a report path the report command would refuse (one sentence, what to do)."""
    suffix = out.suffix.lower()
    if suffix not in REPORT_ENDINGS:
        raise ExportError(f"{out}: cannot write a report as {suffix or 'a file without a suffix'}"
                          " — choose a .html or .md file.")  # fmt: skip
    folder = out.parent if str(out.parent) else Path(".")
    if not folder.is_dir():
        raise ExportError(f"{out}: the folder {folder} does not exist — create it or choose "
                          "another place.")  # fmt: skip
    if out.resolve() == study_path.resolve():
        raise ExportError(f"{out}: this is the study file — choose another name for the report.")


class ReportDialog(ModalScreen[None]):
    """Where to write the report; Enter writes it, Esc closes."""

    DEFAULT_CSS = DIALOG_CSS.format(name="ReportDialog")
    BINDINGS = [Binding("escape", "close", "close")]

    def __init__(self, study_path, **kwargs):
        super().__init__(**kwargs)
        self.study_path = Path(study_path)
        self.running = False
        self.written: Path | None = None

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield Static("Verification report: .html (printable page) or .md (Markdown)",
                         classes="dialog-title", markup=False)
            yield Input(value=str(default_target(self.study_path, "-report.html")),
                        placeholder="where to write", id="report-path")
            yield Static("Enter writes; Esc closes.", id="report-phase", markup=False)
            yield Static("", classes="dialog-note", id="report-problem", markup=False)
            yield Static("", classes="dialog-done", id="report-done", markup=False)

    def on_mount(self) -> None:
        self.query_one("#report-path", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if self.running:
            return
        out = event.value.strip()
        if not out:
            self.query_one("#report-problem", Static).update("Where to? Type a .html or .md file.")
            return
        self.running = True
        self.query_one("#report-problem", Static).update("")
        self.query_one("#report-done", Static).update("")
        self.query_one("#report-phase", Static).update("building the report…")
        self.write(Path(out))

    @work(thread=True, exclusive=True, group="report")
    def write(self, out: Path) -> None:
        from core.atomic import atomic_text
        from core.report import build_report, render_html, render_markdown
        from core.store import Study

        call = self.app.call_from_thread
        try:
            check_report_target(out, self.study_path)
            with Study.open(self.study_path, readonly=True) as study:
                report = build_report(study)
            page = render_markdown(report) if out.suffix.lower() == ".md" else render_html(report)
            try:
                atomic_text(out, page)
            except OSError as exc:
                raise ExportError(f"{out}: could not be written ({exc.strerror or exc}) — check "
                                  "the folder is writable, then try again.") from exc  # fmt: skip
        except KeyproofError as exc:
            call(self._finished, None, str(exc))
            return
        still_open = report.status.get("open", 0) + report.status.get("stale", 0)
        call(self._finished, out, f"Wrote {out}: {report.paired} participants compared, "
                                  f"{sum(report.status.values())} discrepancies ({still_open} "
                                  f"still open), {len(report.set_aside)} set aside.")  # fmt: skip

    def _finished(self, out: Path | None, text: str) -> None:
        self.running = False
        self.query_one("#report-phase", Static).update("Enter writes; Esc closes.")
        if out is None:
            self.query_one("#report-problem", Static).update(text)
            return
        self.written = out
        self.query_one("#report-done", Static).update(text)
        self.notify(f"Wrote {out.name}", title="report")

    def action_close(self) -> None:
        if self.running:
            self.notify("Still writing the report — wait for it to finish.", title="report")
            return
        self.dismiss(None)

"""Export the verified file from the app: where to, draft or not, and a progress bar.

The export runs in a worker thread on its own read-only connection and
posts its progress (variables typed, then rows written) to the bar, so the
app keeps answering keys meanwhile. While anything is open the export is
refused and nothing is written; the dialog then shows what is open, by
kind, and how to go on. Errors are shown in the dialog; the app keeps
running. Writes are ``core.export``'s, atomic, so leaving mid-way can never
leave half a file: the dialog only asks the user to wait.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.message import Message
from textual.screen import ModalScreen
from textual.widgets import Checkbox, Input, ProgressBar, Static

from core.errors import KeyproofError, OpenWorkError

DIALOG_CSS = """
{name} {{ align: center middle; }}
{name} .dialog-box {{
    width: 84; height: auto; max-height: 90%;
    padding: 1 2; background: $surface; border: round $primary;
}}
{name} .dialog-title {{ text-style: bold; margin-bottom: 1; }}
{name} .dialog-note {{ color: $warning; height: auto; }}
{name} .dialog-done {{ height: auto; }}
{name} ProgressBar {{ margin: 1 0 0 0; }}
"""


def default_target(study_path, ending: str) -> Path:
    """A file beside the study: ``garden.sqlite`` -> ``garden-verified.csv``.

    >>> default_target("studies/garden.sqlite", "-verified.csv").as_posix()
    'studies/garden-verified.csv'
    """
    path = Path(study_path)
    return path.with_name(path.stem + ending)


def refusal_text(exc: OpenWorkError) -> str:
    """What an export refused for open work says: the counts by kind and the ways on."""
    total = sum(exc.counts.values())
    kinds = ", ".join(f"{kind} {n}" for kind, n in sorted(exc.counts.items()))
    return (f"Refused: {total} discrepanc{'y is' if total == 1 else 'ies are'} still open "
            f"({kinds}); nothing was written. Settle them (r on the home screen), or tick "
            "draft (Tab to it, space) to export with open cells left empty.")  # fmt: skip


class ExportDialog(ModalScreen[None]):
    """Target, optional identifying file, draft toggle; Enter exports, Esc closes."""

    DEFAULT_CSS = DIALOG_CSS.format(name="ExportDialog")
    # Enter exports from any field: on the draft box a checkbox's own Enter would
    # untick what the keyer just ticked with space, and nothing would happen.
    BINDINGS = [Binding("enter", "start", "export", priority=True),
                Binding("escape", "close", "close")]

    @dataclass
    class Progress(Message):
        """Posted from the export's thread: ``done`` of ``total`` in ``phase``.

        A message rather than a call into the app: posting does not wait for
        the screen, so a busy screen never slows the export down.
        """

        phase: str
        done: int
        total: int

    @dataclass
    class Finished(Message):
        """Posted from the export's thread last (after every Progress, same queue).

        ``result``: the ``ExportResult``, or None with ``problem`` saying why.
        """

        result: object
        problem: str

    def __init__(self, study_path, **kwargs):
        super().__init__(**kwargs)
        self.study_path = Path(study_path)
        self.running = False
        self.result = None
        """The last ``ExportResult`` written (None until an export succeeds)."""

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield Static("Export the verified file: .csv, .xlsx, or a folder for a Data Package",
                         classes="dialog-title", markup=False)
            yield Input(value=str(default_target(self.study_path, "-verified.csv")),
                        placeholder="where to write", id="export-path")
            yield Input(placeholder="identifying variables to this separate file (optional)",
                        id="export-identifying")
            yield Checkbox("draft: export although work is open (open cells left empty)",
                           id="export-draft")
            yield ProgressBar(show_eta=False, id="export-progress")
            yield Static("Enter exports; Esc closes.", id="export-phase", markup=False)
            yield Static("", classes="dialog-note", id="export-problem", markup=False)
            yield Static("", classes="dialog-done", id="export-done", markup=False)

    def on_mount(self) -> None:
        # The bar appears once an export starts (an idle bar would read as busy).
        self.query_one("#export-progress", ProgressBar).display = False
        self.query_one("#export-path", Input).focus()

    def action_start(self) -> None:
        self.start()

    def start(self) -> None:
        """Export what the dialog says (ignored while an export is running)."""
        if self.running:
            return
        out = self.query_one("#export-path", Input).value.strip()
        ident = self.query_one("#export-identifying", Input).value.strip() or None
        if not out:
            self._say("Where to? Type a .csv or .xlsx file, or a folder.")
            return
        self.running = True
        self._say("")
        self.query_one("#export-done", Static).update("")
        bar = self.query_one("#export-progress", ProgressBar)
        bar.update(total=None, progress=0)
        bar.display = True
        self.query_one("#export-phase", Static).update("starting…")
        self.run_export(out, ident, self.query_one("#export-draft", Checkbox).value)

    @work(thread=True, exclusive=True, group="export")
    def run_export(self, out: str, identifying: str | None, draft: bool) -> None:
        from core.errors import ExportError
        from core.export import export, target_of
        from core.resolution import verified_table
        from core.store import Study

        def progress(phase: str):
            return lambda done, total: self.post_message(self.Progress(phase, done, total))

        try:
            _, target = target_of(out, draft)
            for given in (target, Path(identifying) if identifying else None):
                if given is not None and given.resolve() == self.study_path.resolve():
                    raise ExportError(f"{given}: this is the study file — choose another name.")
            with Study.open(self.study_path, readonly=True) as study:
                verified = verified_table(study, draft=draft,
                                          progress=progress("reading variables"))
            result = export(verified, out, identifying=identifying,
                                      progress=progress("writing rows"))
        except OpenWorkError as exc:
            self.post_message(self.Finished(None, refusal_text(exc)))
        except KeyproofError as exc:
            self.post_message(self.Finished(None, str(exc)))
        else:
            self.post_message(self.Finished(result, ""))

    @on(Progress)
    def _progress(self, event: Progress) -> None:
        self.query_one("#export-phase", Static).update(
            f"{event.phase}: {event.done:,} of {event.total:,}")
        self.query_one("#export-progress", ProgressBar).update(
            total=max(event.total, 1), progress=event.done)

    @on(Finished)
    def _finished(self, event: Finished) -> None:
        result, problem = event.result, event.problem
        self.running = False
        bar = self.query_one("#export-progress", ProgressBar)
        if result is None:
            bar.update(total=None, progress=0)
            bar.display = False
            self.query_one("#export-phase", Static).update("Enter exports; Esc closes.")
            self._say(problem)
            return
        self.result = result
        bar.update(total=max(result.rows, 1), progress=max(result.rows, 1))
        self.query_one("#export-phase", Static).update("done")
        draft = " (DRAFT)" if result.provenance and result.provenance.draft else ""
        lines = [f"Wrote {result.path}{draft}: {result.rows} participants, "
                 f"{result.columns} variables; {result.set_aside} set aside, listed apart."]
        if result.open_cells:
            lines.append(f"{result.open_cells} open cell(s) left empty and listed beside it.")
        if result.left_out:
            lines.append(f"Identifying variables left out: {', '.join(result.left_out)}.")
        self.query_one("#export-done", Static).update("\n".join(lines))
        self.notify(f"Wrote {result.path.name}", title="export")

    def _say(self, text: str) -> None:
        self.query_one("#export-problem", Static).update(text)

    def action_close(self) -> None:
        if self.running:
            self.notify("Still writing — the file appears whole or not at all; "
                        "wait for it to finish.", title="export")  # fmt: skip
            return
        self.dismiss(None)

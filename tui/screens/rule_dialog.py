"""Set aside by rule: write the rule, see everyone it catches, confirm with a reason.

Three lines, each confirmed with Enter: the rule (``z:VARIABLE[:THRESHOLD]``
or ``blank:SCALE:K``, the same words as ``keyproof screen --rule``), the
reason (the rule's own sentence offered), the resolver's initials. The
dialog only works out who the rule catches, on the table the view
screened; it dismisses with (rule, participants, reason, initials) and the
screening view records the set-asides. A rule is refused while an open cell
touches its variables: a blank that is only not settled yet must not get
anyone set aside.
"""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Input, Static

from core.errors import KeyproofError


def rule_variables(rule, codebook) -> set[str]:
    """The variables a rule reads: its variable, or every item of its scale (and its score)."""
    variable = getattr(rule, "variable", None)
    if variable is not None:
        items = codebook.scales.get(variable, ())
        return {variable} | {v.name for v in items}
    return {v.name for v in codebook.scales.get(rule.scale, ())}


def open_cells_touching(open_cells, names: set[str]) -> int:
    """Open cells on ``names``, plus open form-level problems (they leave only an ID)."""
    if open_cells is None or not len(open_cells) or "variable" not in open_cells:
        return 0
    variables = open_cells["variable"].astype("string").fillna("")
    return int((variables.isin(names) | (variables == "")).sum())


class RuleDialog(ModalScreen[tuple | None]):
    """Rule, then reason, then initials; Esc cancels at any point."""

    DEFAULT_CSS = """
    RuleDialog { align: center middle; }
    RuleDialog .dialog-box {
        width: 80; height: auto; max-height: 90%;
        padding: 1 2; background: $surface; border: round $primary;
    }
    RuleDialog .dialog-title { text-style: bold; margin-bottom: 1; }
    RuleDialog .dialog-note { color: $warning; height: auto; }
    RuleDialog #rule-caught { height: auto; max-height: 12; }
    """
    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, view, suggestion: str = "", **kwargs):
        super().__init__(**kwargs)
        self.view = view
        self.suggestion = suggestion
        self.rule = None
        self.caught: list[str] = []

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog-box"):
            yield Static("Set aside by rule: everyone it catches, under the rule's name",
                         classes="dialog-title", markup=False)
            yield Static("z:VARIABLE[:THRESHOLD] (|z| above, 3.29 common practice) or "
                         "blank:SCALE:K (more than K items blank); Enter shows who it catches",
                         markup=False)  # fmt: skip
            yield Input(value=self.suggestion, placeholder="z:age:3.29", id="rule-text")
            with VerticalScroll(id="rule-caught", can_focus=False):
                yield Static("", id="rule-catches", markup=False)
            reason = Input(placeholder="reason recorded with each set-aside", id="rule-reason")
            keyer = Input(placeholder="your initials, then Enter sets them aside", id="rule-keyer")
            reason.disabled = keyer.disabled = True
            yield reason
            yield keyer
            yield Static("", classes="dialog-note", id="rule-problem", markup=False)

    def on_mount(self) -> None:
        self.query_one("#rule-text", Input).focus()

    def _problem(self, text: str) -> None:
        self.query_one("#rule-problem", Static).update(text)

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id == "rule-text" and self.rule is not None:
            # The rule changed after its preview: the list shown no longer holds.
            self.rule, self.caught = None, []
            self.query_one("#rule-catches", Static).update("")
            for i in ("#rule-reason", "#rule-keyer"):
                self.query_one(i, Input).disabled = True

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self._problem("")
        if event.input.id == "rule-text":
            self._preview(event.value)
        elif event.input.id == "rule-reason":
            if not event.value.strip():
                self._problem("The reason is empty — write why they are set aside.")
                return
            self.query_one("#rule-keyer", Input).focus()
        elif event.input.id == "rule-keyer":
            keyer = event.value.strip()
            reason = " ".join(self.query_one("#rule-reason", Input).value.split())
            if not keyer:
                self._problem("Your initials are empty — type them for the journal.")
                return
            if not reason:
                self._problem("The reason is empty — write why they are set aside.")
                self.query_one("#rule-reason", Input).focus()
                return
            self.dismiss((self.rule, list(self.caught), reason, keyer))

    def _preview(self, text: str) -> None:
        from core.screening_rules import parse_rule

        view = self.view
        try:
            rule = parse_rule(text)
            caught = rule.catches(view.data, view.codebook)
        except KeyproofError as exc:
            self._problem(str(exc))
            return
        touching = open_cells_touching(view.open_cells, rule_variables(rule, view.codebook))
        lines = [f"Rule {rule.name}: {rule.text}",
                 f"It catches {len(caught)}: {', '.join(caught) if caught else 'nobody'}."]
        self.query_one("#rule-catches", Static).update("\n".join(lines))
        if touching:
            self._problem(f"{touching} open cell(s) touch this rule's variables — settle them "
                          "first, so nobody is caught for a cell not yet decided.")  # fmt: skip
            return
        if not caught:
            return
        self.rule, self.caught = rule, caught
        reason = self.query_one("#rule-reason", Input)
        keyer = self.query_one("#rule-keyer", Input)
        reason.disabled = keyer.disabled = False
        if not reason.value.strip():
            reason.value = rule.text
        reason.focus()

    def action_cancel(self) -> None:
        self.dismiss(None)

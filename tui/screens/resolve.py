"""The resolution screen: every open discrepancy, settled against the paper.

The worklist (``core.resolution.worklist``: a whole comparison joined with
the decisions) is computed in a worker thread on its own read-only
connection, so the screen never waits on it. The list is a Line API view
over column arrays (``tui.widgets.worklist``): 50,000 rows load as a few
array copies and a move repaints two lines and the detail pane.

A decision on one cell is recorded at once (``core.resolution``) and marked
settled here without recomputing the comparison; a form-level decision
(pair, drop, confirm) changes which forms are compared, so the worklist is
computed again in the background. ``r`` does the same on demand.
"""

from __future__ import annotations

import numpy as np
from textual import events, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Static

from core import resolution as res
from core.errors import KeyproofError

from ..widgets.discrepancy_detail import DiscrepancyDetail, detail_text
from ..widgets.worklist import WorklistView
from .reason_dialog import ChoiceDialog, ReasonDialog, ValueDialog, keys_in_order

CELL_ACTIONS = {"take_pass", "paper_value", "blank", "missing_code", "keep"}
FORM_ACTIONS = {"pair", "drop", "confirm"}
#: The reason marked first in the dialog, per decision (found by its words).
LIKELY_REASON = {
    "take_pass(1)": "pass 1 right", "take_pass(2)": "pass 2 right",
    "paper_value": "both wrong", "blank": "paper blank", "missing_code": "paper blank",
    "keep": "outside the rule", "pair": "mistyped", "drop": "keyed twice",
}


class ResolveScreen(Screen):
    """Open discrepancies of one study, worked off by one resolver."""

    DEFAULT_CSS = """
    ResolveScreen { layout: vertical; }
    #resolve-header { height: 2; padding: 0 1; background: $primary-darken-2; }
    #worklist { height: 1fr; min-height: 6; padding: 0 1; }
    #resolve-detail { height: auto; max-height: 18; padding: 0 1;
                      border-top: solid $primary-darken-2; background: $surface; }
    #resolve-message { height: 1; padding: 0 1; color: $warning; }
    """

    # Digits for the cell decisions (the numeric keypad, paper in the other hand),
    # letters for the rest; words kept short so the whole set, with e and Esc,
    # fits one footer line 120 columns wide.
    BINDINGS = [
        Binding("1", "take_pass(1)", "pass 1", id="resolve.pass-1"),
        Binding("2", "take_pass(2)", "pass 2", id="resolve.pass-2"),
        Binding("5", "paper_value", "paper", id="resolve.paper-value"),
        Binding("0", "blank", "blank", id="resolve.blank"),
        Binding("7", "missing_code", "missing", id="resolve.missing-code"),
        Binding("9", "keep", "keep", id="resolve.keep"),
        Binding("8", "shift", "shift", id="resolve.shift"),
        # Rare, so out of the footer: the detail names it on a row it applies to.
        Binding("s", "spelling", "spelling", id="resolve.spelling", show=False),
        Binding("p", "pair", "pair", id="resolve.pair"),
        Binding("d", "drop", "drop twice-keyed", id="resolve.drop"),
        Binding("c", "confirm", "one pass only", id="resolve.confirm"),
        Binding("plus,n", "next_open(1)", "next", id="resolve.next"),
        Binding("minus,b", "next_open(-1)", "back", id="resolve.back", show=False),
        Binding("down", "move(1)", show=False),
        Binding("up", "move(-1)", show=False),
        Binding("pagedown", "move(10)", show=False),
        Binding("pageup", "move(-10)", show=False),
        Binding("f", "filter", "filter", id="resolve.filter"),
        Binding("j", "jump", "jump", id="resolve.jump"),
        Binding("a", "set_aside", "aside", id="resolve.set-aside"),
        Binding("v", "view_set_aside", "asides", id="resolve.set-aside-list"),
        Binding("e", "edit_reasons", "reasons", id="resolve.reasons"),
        Binding("r", "reload", "reload", id="resolve.reload", show=False),
        Binding("escape", "leave", "home", id="resolve.leave"),
    ]

    def __init__(self, study, keyer: str, *, can_leave: bool = False, **kwargs):
        super().__init__(**kwargs)
        self.study, self.keyer, self.can_leave = study, keyer, can_leave
        self.rows = None
        """The worklist (``core.resolution.worklist``); None until the worker returns."""
        self.statuses = np.empty(0, dtype=object)
        self.shown_filter: tuple[str, str] | None = None
        """("kind", k) or ("variable", v) while the list is filtered."""
        self.reasons: list[str] = list(res.DEFAULT_REASONS)
        self._warnings: dict[str, str | None] = {}
        self.own: set[str] = set()
        """Participants with a form keyed by this resolver (found once per load)."""
        self._shape: str | None = None
        self._counts: str | None = None
        self._land_on: tuple[str, str, str] | None = None

    def compose(self) -> ComposeResult:
        yield Static("loading the worklist…", id="resolve-header", markup=False)
        yield WorklistView(id="worklist")
        yield DiscrepancyDetail(id="resolve-detail")
        yield Static("", id="resolve-message", markup=False)
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.load_worklist()

    # ------------------------------------------------------------------ loading

    @work(thread=True, exclusive=True, group="resolve-load")
    def load_worklist(self) -> None:
        from core.store import Study

        try:
            with Study.open(self.study.path, readonly=True) as study:
                rows, reasons = res.worklist(study), res.reasons(study)
                own = keyed_by_resolver(study, self.keyer)
        except KeyproofError as exc:
            self.app.call_from_thread(self.say, f"could not load the worklist: {exc}")
            return
        self.app.call_from_thread(self.show_worklist, rows, reasons, own)

    def show_worklist(self, rows, reasons: list[str] | None = None, own: set[str] | None = None) -> None:
        """Take a freshly computed worklist; keep the cursor on the same item if it is still there."""
        if reasons:
            self.reasons = reasons
        if own is not None:
            self.own = own
        land = self._land_on or self._key_at(self.current_pos)
        self.rows = rows
        self.statuses = rows["_status"].to_numpy(dtype=object, copy=True)
        self._counts = None
        self._warnings.clear()
        self.worklist.load(rows, self._view())
        at = self._position_of(land) if land else None
        if at is None or self.statuses[at] == res.SETTLED:
            self.worklist.cursor = None
            start = self.worklist.next_waiting(self.statuses)
            self.worklist.goto(start if start is not None else 0)
        else:
            self.worklist.set_view(self.worklist.view, at=at)
        self._land_on = None
        self.say("")
        self.show_current()

    # ------------------------------------------------------------------ shown state

    @property
    def worklist(self) -> WorklistView:
        return self.query_one("#worklist", WorklistView)

    @property
    def current_pos(self) -> int | None:
        """Worklist position under the cursor."""
        return None if self.rows is None else self.worklist.current

    def row(self, i: int | None = None):
        i = self.current_pos if i is None else i
        return None if i is None else self.rows.iloc[i]

    def _view(self) -> np.ndarray:
        if self.rows is None:
            return np.empty(0, dtype=np.int64)
        if self.shown_filter is None:
            return np.arange(len(self.rows))
        column, value = self.shown_filter
        return np.flatnonzero(self.rows[column].astype("string").fillna("").to_numpy() == value)

    def _key_at(self, i: int | None):
        if i is None or self.rows is None:
            return None
        r = self.rows.iloc[i]
        return (str(r["participant"]), str(r["variable"]), str(r["kind"]))

    def _position_of(self, key) -> int | None:
        p = self.rows["participant"].to_numpy(dtype=object)
        v = self.rows["variable"].to_numpy(dtype=object)
        k = self.rows["kind"].to_numpy(dtype=object)
        hit = np.flatnonzero((p == key[0]) & (v == key[1]) & (k == key[2]))
        return int(hit[0]) if len(hit) else None

    def show_current(self) -> None:
        """Repaint the header and detail for the item under the cursor (the per-move cost)."""
        self.query_one("#resolve-header", Static).update(self.header_text())
        detail = self.query_one("#resolve-detail", DiscrepancyDetail)
        row = self.row()
        if row is None:
            detail.show("Nothing to resolve here." if self.rows is not None else "")
            self._set_shape(None)
            return
        participant = str(row["participant"])
        if participant not in self._warnings:
            # Only the resolver's own forms can warn; the exact words come from core.
            self._warnings[participant] = (res.independence_warning(self.study, participant, self.keyer)
                                           if participant in self.own else None)
        form_level = row["kind"] in res.FORM_KINDS
        around = None if form_level else res.neighbours(self.study, row)
        partner = self.partner_id(row) if form_level else None
        detail.show(detail_text(self.study.codebook, row, around, self._warnings[participant],
                                partner_id=partner))
        self._set_shape(row)

    def partner_id(self, row) -> str | None:
        """The suggested partner's participant ID as its own pass keyed it (None without one).

        A form serial means nothing on paper; the ID written on the form does.
        Read only for form-level rows, a handful per study.
        """
        form_id = _form_id(row.get("_partner"))
        if form_id is None:
            return None
        try:
            texts = self.study.form(form_id).texts
        except KeyproofError:
            return None
        return texts.get(self.study.codebook.id_variable.name) or ""

    def header_text(self) -> str:
        if self.rows is None:
            return "loading the worklist…"
        if self._counts is None:  # counted again only when a decision or a load changed them
            waiting = self.statuses != res.SETTLED
            kinds = self.rows.loc[waiting, "kind"].value_counts()
            counts = ", ".join(f"{int(n)} {k.replace('_', ' ')}" for k, n in kinds.items()) or "nothing"
            self._counts = f"resolving as {self.keyer} · {int(waiting.sum())} open of {len(self.rows)}: {counts}"
        where = ""
        if self.worklist.cursor is not None:
            where = f"item {self.worklist.cursor + 1} of {len(self.worklist.view)}"
        shown = f" · filter: {self.shown_filter[0]} = {self.shown_filter[1]}" if self.shown_filter else ""
        return f"{self._counts}\n{where}{shown}"

    def _set_shape(self, row) -> None:
        # Re-listing bindings recomposes the footer (~0.1 s of CPU here), so the
        # footer has two shapes only, cells and forms: in paper order it changes
        # once, where the form-level problems end.
        shape = None if row is None else "form" if row["kind"] in res.FORM_KINDS else "cell"
        if shape != self._shape:
            self._shape = shape
            self.refresh_bindings()

    def check_action(self, action: str, parameters) -> bool | None:
        if action in CELL_ACTIONS or action == "shift":
            return self._shape == "cell"
        if action in FORM_ACTIONS:
            return self._shape == "form"
        if action == "leave":
            return self.can_leave
        return True

    async def on_key(self, event: events.Key) -> None:
        await keys_in_order(self, event)

    def say(self, text: str) -> None:
        self.query_one("#resolve-message", Static).update(text)

    # ------------------------------------------------------------------ moving

    def action_move(self, step: int) -> None:
        if self.worklist.cursor is not None:
            self.worklist.goto(self.worklist.cursor + step)
            self.show_current()

    def action_next_open(self, step: int = 1) -> None:
        pos = self.worklist.next_waiting(self.statuses, forward=step > 0)
        if pos is None:
            self.say("Nothing open in this list.")
        else:
            self.worklist.goto(pos)
        self.show_current()

    def action_jump(self) -> None:
        def go(text: str | None) -> None:
            if text is None or self.rows is None:
                return
            at = res.position_of(self.rows, text)
            if at is None:
                self.say(f"No open item for form {text.strip()} — check the ID.")
                return
            self.shown_filter = None
            self.worklist.set_view(self._view(), at=at)
            self.show_current()

        self.app.push_screen(ValueDialog("Jump to form (participant ID), then Enter:"), go)

    def action_filter(self) -> None:
        if self.rows is None:
            return
        waiting = self.rows[self.statuses != res.SETTLED]
        kinds = waiting["kind"].value_counts()
        items = ["everything", *(f"kind {k} ({n})" for k, n in kinds.items()), "one field…"]

        def chosen(item: str | None) -> None:
            if item is None:
                return
            if item == "everything":
                self._apply_filter(None)
            elif item == "one field…":
                self.app.push_screen(ValueDialog("Show only this field (variable name):"),
                                     lambda name: name and self._apply_filter(("variable", name.strip())))
            else:
                self._apply_filter(("kind", item.split()[1]))

        self.app.push_screen(ChoiceDialog("Show", items), chosen)

    def _apply_filter(self, which) -> None:
        here = self.current_pos
        self.shown_filter = which
        view = self._view()
        if which is not None and not len(view):
            self.say(f"Nothing has {which[0]} {which[1]} — showing everything.")
            self.shown_filter, view = None, self._view()
        self.worklist.set_view(view, at=here)
        self.show_current()

    def action_leave(self) -> None:
        if self.can_leave:
            self.app.pop_screen()

    def action_reload(self) -> None:
        self.say("recomputing the worklist…")
        self.load_worklist()

    # ------------------------------------------------------------------ decisions

    def _ask_reason(self, what: str, likely: str, then) -> None:
        marked = next((i for i, r in enumerate(self.reasons) if LIKELY_REASON.get(likely, "\0") in r), 0)
        row = self.row()
        note = self._warnings.get(str(row["participant"])) if row is not None else None
        self.app.push_screen(ReasonDialog(what, self.reasons, marked, note or ""),
                             lambda reason: reason and self._record(then, reason))

    def _record(self, then, reason: str) -> None:
        """Run one decision; a refusal (DecisionError) is shown and nothing moves."""
        try:
            then(reason)
        except KeyproofError as exc:
            self.say(str(exc))
            self.app.notify(str(exc), title="not recorded", severity="error")
            return
        self.say("")

    def _settled(self, positions, action: str, value: str, state: str, reason: str) -> None:
        """Mark cells decided here as settled (the store has them) and go to the next open one."""
        shown = {"_status": res.SETTLED, "_decision_action": action, "_decision_value": value,
                 "_decision_state": state, "_decision_reason": reason, "_decided_by": self.keyer}
        index = self.rows.index[list(positions)]
        for column, text in shown.items():
            if self.rows[column].dtype != object:
                self.rows[column] = self.rows[column].astype(object)
            self.rows.loc[index, column] = text
        self.statuses[list(positions)] = res.SETTLED
        self._counts = None
        self.worklist.set_status(positions, res.SETTLED)
        self.action_next_open(1)

    def _cell(self, what: str, likely: str, act) -> None:
        """Ask the reason, then ``act(row, reason) -> (value, state, action)`` on the current cell."""
        i = self.current_pos
        if i is None:
            return
        row = self.row(i)

        def then(reason: str) -> None:
            value, state, action = act(row, reason)
            self._settled([i], action, value, state, reason)

        self._ask_reason(what, likely, then)

    def action_take_pass(self, pass_no: int) -> None:
        def act(row, reason):
            res.take_pass(self.study, row, pass_no, reason, self.keyer)
            return str(row[f"pass{pass_no}"]), "", res.VALUE

        self._cell(f"take pass {pass_no}", f"take_pass({pass_no})", act)

    def action_blank(self) -> None:
        def act(row, reason):
            res.mark_blank(self.study, row, reason, self.keyer)
            return "", "blank", res.VALUE

        self._cell("blank on paper", "blank", act)

    def action_paper_value(self, keep: bool = False) -> None:
        row = self.row()
        if row is None:
            return
        shown = [str(row[f"pass{p}"]) for p in (1, 2)]

        def typed(text: str | None) -> None:
            if text is None:
                return

            def act(row, reason):
                res.set_paper_value(self.study, row, text, reason, self.keyer, keep=keep)
                return text.strip(), "", res.KEEP if keep else res.VALUE

            self._cell("keep the value on the paper" if keep else f"paper says {text.strip()!r}",
                       "keep" if keep else "paper_value", act)

        question = ("The value on the paper (kept even outside the rule), then Enter:" if keep
                    else "The value on the paper, then Enter (empty = blank on paper):")
        start = next((s for s in shown if s and s != res.ILLEGIBLE_SHOWN), "") if keep else ""
        self.app.push_screen(ValueDialog(question, start, f"pass 1: {shown[0]!r}   pass 2: {shown[1]!r}",
                                         allow_empty=not keep), typed)

    def action_keep(self) -> None:
        self.action_paper_value(keep=True)

    def action_missing_code(self) -> None:
        row = self.row()
        if row is None:
            return
        var = self.study.codebook[str(row["variable"])]
        if not var.missing:
            self.say(f"{var.name} declares no missing codes — type the paper's value (5) or mark it blank (0).")
            return
        items = [f"{c.value} = {c.label}" if c.label else c.value for c in var.missing]

        def picked(item: str | None) -> None:
            if item is None:
                return
            code = item.split(" = ")[0]

            def act(row, reason):
                res.set_missing_code(self.study, row, code, reason, self.keyer)
                return code, "", res.VALUE

            self._cell(f"missing code {item}", "missing_code", act)

        self.app.push_screen(ChoiceDialog(f"Missing code for {var.name}", items), picked)

    def action_shift(self) -> None:
        row = self.row()
        if row is None:
            return
        if row["cause"] != res.SHIFT_CAUSE:
            self.say("This cell is not part of a field shift — settle it on its own.")
            return
        participant = str(row["participant"])

        def picked(item: str | None) -> None:
            if item is None:
                return
            pass_no = int(item.split()[1])

            def then(reason: str) -> None:
                mask = ((self.rows["participant"].astype(str) == participant)
                        & (self.rows["cause"].astype("string").fillna("") == res.SHIFT_CAUSE)
                        & (self.statuses != res.SETTLED))
                res.settle_shift(self.study, participant, pass_no, reason, self.keyer, rows=self.rows)
                self._settled(np.flatnonzero(mask.to_numpy()), res.VALUE, "", "", reason)

            self._ask_reason(f"the shifted run of form {participant}: pass {pass_no} right",
                             f"take_pass({pass_no})", then)

        self.app.push_screen(ChoiceDialog(f"Form {participant}: which pass has the run right?",
                                          ["pass 1 is right", "pass 2 is right"]), picked)

    def action_spelling(self) -> None:
        """Settle every free-text difference of case or spaces at once, one pass's text standing."""
        if self.rows is None:
            return
        todo = res.spelling_rows(self.study.codebook, self.rows)
        if todo.empty:
            self.say("No open difference of case or spaces in free text — settle cells one by one.")
            return
        n = len(todo)
        what = f"{n} free-text difference" + ("" if n == 1 else "s")
        choices = {"keep pass 1's spelling": 1, "keep pass 2's spelling": 2}

        def picked(item: str | None) -> None:
            if item is None:
                return
            pass_no = choices[item]

            def then(reason: str) -> None:
                positions = [self.rows.index.get_loc(i) for i in todo.index]
                res.settle_spelling(self.study, pass_no, reason, self.keyer, rows=self.rows)
                self._settled(positions, res.VALUE, "", "", reason)

            self._ask_reason(f"{what} of case or spaces: pass {pass_no}'s text stands",
                             f"take_pass({pass_no})", then)

        self.app.push_screen(ChoiceDialog(
            f"{what}, open, of only case or spaces: whose spelling stands?", list(choices)),
            picked)

    # ------------------------------------------------------------------ form level

    def _form_decision(self, what: str, likely: str, act) -> None:
        row = self.row()
        if row is None:
            return

        def then(reason: str) -> None:
            act(row, reason)
            self._land_on = None
            self.action_reload()

        self._ask_reason(what, likely, then)

    def action_pair(self) -> None:
        row = self.row()
        if row is None:
            return
        if row["kind"] == "duplicate_id":
            self.say("Both passes know this ID — drop the form keyed twice (d) instead.")
            return
        partner = row.get("_partner")
        if partner is None or str(partner) in ("<NA>", "nan", ""):
            self.say("No likely partner was found for this form — key the other pass or confirm it (c).")
            return
        partner = int(partner)
        here = 1 if row["kind"] == "only_in_pass1" else 2
        own_id = str(row["participant"])
        other_id = self.study.form(partner).texts.get(self.study.codebook.id_variable.name) or ""
        ids = {here: own_id, 3 - here: other_id}
        items = [f"pass 1's ID {ids[1]} is on the paper", f"pass 2's ID {ids[2]} is on the paper"]

        def picked(item: str | None) -> None:
            if item is None:
                return
            keep_from = int(item.split()[1][0])
            self._form_decision(f"pair form {own_id} with form {other_id} (ID {ids[keep_from]})", "pair",
                                lambda r, reason: res.pair_forms(self.study, r, keep_from, reason, self.keyer,
                                                                 partner=partner))

        self.app.push_screen(ChoiceDialog("Which ID is written on the paper?", items), picked)

    def action_drop(self) -> None:
        row = self.row()
        if row is None:
            return
        if row["kind"] != "duplicate_id":
            self.say("Only an ID keyed twice in one pass has a form to drop — pair (p) or confirm (c).")
            return
        participant = str(row["participant"])
        forms = self.study.forms()
        forms = forms[~forms["dropped"].astype(bool)]
        live = set(forms["form_id"])
        per_pass = [[f for f in self.study.find_forms(p, participant) if f in live] for p in (1, 2)]
        twice = [f for fs in per_pass if len(fs) > 1 for f in fs]  # only the pass that has it twice
        items = []
        for f in twice:
            rec = forms[forms["form_id"] == f].iloc[0]
            items.append(f"form {f} (pass {rec['pass']}, keyed by {rec['keyer']} at {str(rec['created_at'])[:16]})")

        def picked(item: str | None) -> None:
            if item is None:
                return
            form_id = int(item.split()[1])
            self._form_decision(f"drop form {form_id} as keyed twice", "drop",
                                lambda r, reason: res.drop_duplicate(self.study, form_id, reason, self.keyer, row=r))

        self.app.push_screen(ChoiceDialog(f"Which form of {participant} is the second keying? (it is kept, "
                                          "marked dropped)", items), picked)

    def action_confirm(self) -> None:
        self._form_decision("this form exists in one pass only (the other pass must key it)", "confirm",
                            lambda r, reason: res.confirm_one_pass(self.study, r, reason, self.keyer))

    # ------------------------------------------------------------------ reasons

    def action_edit_reasons(self) -> None:
        from .reasons_editor import ReasonsEditor

        def saved(kept: list[str] | None) -> None:
            if kept is None:
                self.say("Reasons unchanged.")
                return
            self.reasons = kept
            self.say(f"Reasons saved: {len(kept)}, journaled under {self.keyer}.")

        self.app.push_screen(ReasonsEditor(self.study, self.keyer), saved)

    # ------------------------------------------------------------------ set aside

    def action_set_aside(self) -> None:
        from .setaside_view import SetAsideDialog

        row = self.row()
        participant = str(row["participant"]) if row is not None else ""

        def done(answer) -> None:
            if answer is None:
                return
            who, reason, rule = answer
            try:
                res.set_aside(self.study, who, reason, self.keyer, rule=rule)
            except KeyproofError as exc:
                self.say(str(exc))
                return
            self.say(f"Participant {who} is set aside: {reason}.")

        self.app.push_screen(SetAsideDialog(participant), done)

    def action_view_set_aside(self) -> None:
        from .setaside_view import SetAsideView

        self.app.push_screen(SetAsideView(self.study, self.keyer))


def _form_id(value) -> int | None:
    """A worklist cell holding a form id (None, NA or a number) as an int or None."""
    text = res.cell_text(value)
    return int(float(text)) if text else None


def keyed_by_resolver(study, keyer: str) -> set[str]:
    """Participant IDs (canonical, as the worklist shows them) of forms ``keyer`` keyed."""
    from core.values import canonical_series

    forms = study.forms()
    if forms.empty:
        return set()
    mine = forms[(forms["keyer"].astype("string").fillna("").str.strip() == keyer.strip())
                 & ~forms["dropped"].fillna(False).astype(bool)]
    canon, _ = canonical_series(study.codebook.id_variable, mine["participant"].astype(object))
    return {str(p) for p in canon.dropna()}

"""The demo study resolved with its paper truth, for the resolution, screening and export tests.

The paper (fixtures/demo/paper.csv, written by fixtures/make_demo.py with the
keyed passes) is the outside record: every discrepancy is settled the way a
resolver holding that paper would, through ``core.resolution``.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd

from core.demo import KEYERS, make_demo_study
from core.resolution import (
    FORM_KINDS,
    confirm_one_pass,
    mark_blank,
    pair_forms,
    set_missing_code,
    set_paper_value,
    settle_shift,
    take_pass,
    worklist,
)
from core.store import Study
from core.values import parse

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "demo"
RESOLVER = "LM"


def paper() -> pd.DataFrame:
    """The paper truth as text, indexed by member number."""
    return pd.read_csv(FIXTURES / "paper.csv", dtype=str, keep_default_na=False).set_index(
        "member_id")


def resolved_demo(folder: Path) -> Path:
    """Build the demo study in ``folder`` and settle it with the paper; returns its path."""
    path = make_demo_study(folder)
    with Study.open(path) as study:
        settle_with_paper(study)
    return path


def settle_with_paper(study: Study, truth: pd.DataFrame | None = None) -> pd.DataFrame:
    """Settle every discrepancy of an open study with the paper; returns the settled worklist.

    Form-level rows go one at a time (pairing or keying a form changes the
    comparison), then every open cell of one worklist.
    """
    truth = paper() if truth is None else truth
    for _round in range(20):
        rows = worklist(study)
        pending = rows[rows["_status"] != "settled"]
        if pending.empty:
            return rows
        forms = pending[pending["kind"].isin(FORM_KINDS)]
        if len(forms):
            assert forms.iloc[0]["kind"] != "duplicate_id", "the demo has no duplicated ID"
            _settle_form(study, forms.iloc[0], truth)
            continue
        shifted = set()
        for _, row in pending.iterrows():
            p, var = row["participant"], row["variable"]
            if row["cause"] == "field_shift":
                if p not in shifted:
                    right = 1 if row["pass1"] == truth.loc[p, var] else 2
                    settle_shift(study, p, right, f"checked against paper: pass {right} right",
                                 RESOLVER, rows=rows)
                    shifted.add(p)
            else:
                _settle_cell(study, row, truth.loc[p, var])
    raise AssertionError("the demo study did not settle in twenty rounds")


def copy_study(path: Path, folder: Path) -> Path:
    """A copy of a closed study file in ``folder`` (each test changes its own)."""
    folder.mkdir(parents=True, exist_ok=True)
    return Path(shutil.copy(path, folder / path.name))


def _settle_form(study, row, truth) -> None:
    here = 1 if row["kind"] == "only_in_pass1" else 2
    id_name = study.codebook.id_variable.name
    if row["participant"] not in truth.index:  # this side's ID is the mistyped one
        pair_forms(study, row, 3 - here, "form number mistyped in one pass", RESOLVER)
        return
    partner = row.get("_partner")
    if partner is not None and not pd.isna(partner):
        if study.form(int(partner)).texts[id_name] not in truth.index:
            pair_forms(study, row, here, "form number mistyped in one pass", RESOLVER)
            return
    # A real paper the other pass never keyed: confirm, then key it from the paper.
    confirm_one_pass(study, row, "paper found, not keyed in the other pass", RESOLVER)
    keyer = KEYERS[3 - here]  # the keyer of the pass that missed it
    form = study.start_form(3 - here, keyer)
    study.set_value(form, id_name, row["participant"], "keyed", keyer)
    for name, text in truth.loc[row["participant"]].items():
        study.set_value(form, name, text, "keyed" if text else "blank", keyer)
    study.finish_form(form, keyer)


def _settle_cell(study, row, truth: str) -> None:
    var = study.codebook[row["variable"]]
    keep = bool(truth) and not parse(var, truth).ok
    if truth == "":
        mark_blank(study, row, "paper blank", RESOLVER)
    elif truth in var.missing_values:
        set_missing_code(study, row, truth, "paper blank", RESOLVER)
    elif row["pass1"] == truth:
        take_pass(study, row, 1, "checked against paper: pass 1 right", RESOLVER, keep=keep)
    elif row["pass2"] == truth:
        take_pass(study, row, 2, "checked against paper: pass 2 right", RESOLVER, keep=keep)
    else:
        set_paper_value(study, row, truth, "checked against paper: both wrong", RESOLVER,
                        keep=keep)

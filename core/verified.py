"""The verified table: what stands for every participant and variable.

A plain result object handed from the resolution step (which builds it from
agreed values, decisions and set-asides) to the exports, the report and
screening, so none of them needs to know how a value came to stand.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from .codebook import Codebook


@dataclass(frozen=True)
class Verified:
    """Everything an export needs, frozen at one journal head.

    ``data``: one row per participant not set aside, indexed 0..n-1, the
    codebook's columns in paper order, typed per the codebook (Int64,
    Float64, string, datetime64); a declared missing code stays as its code.
    Open cells (only in a draft) are NA and listed in ``open_cells``
    (participant, variable, kind). ``set_aside``: participant, reason, rule,
    keyer, at. ``decisions``: the decisions that count, oldest first.
    ``kept``: cells kept outside the codebook's rule because the paper says
    so (participant, variable, value, reason). ``head``: the journal's head
    hash; ``study``: the study file's name; ``draft``: True when open work was
    left in.
    """

    codebook: Codebook
    data: pd.DataFrame
    open_cells: pd.DataFrame = field(default_factory=pd.DataFrame)
    set_aside: pd.DataFrame = field(default_factory=pd.DataFrame)
    decisions: pd.DataFrame = field(default_factory=pd.DataFrame)
    kept: pd.DataFrame = field(default_factory=pd.DataFrame)
    head: str = ""
    study: str = ""
    draft: bool = False

"""One keyed pass as two aligned tables: what was typed, and in which state.

This is the hand-over object between the places passes come from (the store,
a keyed spreadsheet) and the comparison engine, so the engine never needs to
know where a pass was keyed. Two DataFrames rather than one of objects keep
every later step vectorised.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .values import BLANK, KEYED


@dataclass(frozen=True)
class PassData:
    """One pass: text and state per form (rows) and variable (columns).

    ``text`` and ``state`` share one index (the form id: the store's form
    serial, or the row number in a keyed file) and the codebook's variable
    names as columns, in paper order. A cell's text is the exact text keyed,
    ``""`` for a blank or illegible field, and None when the field has not
    been keyed yet; its state is ``keyed``, ``blank``, ``illegible`` or None.
    ``keyer`` holds the keyer's initials per form id (may be empty).
    ``label`` says where each form came from, for messages ("form 12",
    "pass1.csv row 14").
    """

    pass_no: int
    text: pd.DataFrame
    state: pd.DataFrame
    keyer: pd.Series = field(default_factory=lambda: pd.Series(dtype="string"))
    label: pd.Series = field(default_factory=lambda: pd.Series(dtype="string"))

    @classmethod
    def from_texts(
        cls, pass_no: int, texts: pd.DataFrame, keyer: str = "", label_prefix: str = "row"
    ) -> PassData:
        """Build a pass from plain texts, where an empty cell means blank on paper.

        >>> import pandas as pd
        >>> p = PassData.from_texts(1, pd.DataFrame({"id": ["1", "2"], "q1": ["3", ""]}))
        >>> list(p.state["q1"])
        ['keyed', 'blank']
        """
        text = texts.fillna("").astype(object)
        # Blankness is worked out once per distinct text of a column (keyed
        # columns hold few distinct texts), never with a Python call per cell.
        states = {}
        for name in text.columns:
            codes, uniques = pd.factorize(text[name], use_na_sentinel=False)
            blank = np.fromiter((not str(u).strip() for u in uniques), bool, len(uniques))
            states[name] = np.where(blank[codes], BLANK, KEYED)
        state = pd.DataFrame(states, index=text.index, columns=text.columns, dtype=object)
        keyers = pd.Series(keyer, index=text.index, dtype="string")
        labels = pd.Series(
            [f"{label_prefix} {i}" for i in text.index], index=text.index, dtype="string"
        )
        return cls(pass_no, text, state, keyers, labels)

    @property
    def forms(self) -> int:
        """Number of forms in the pass."""
        return len(self.text)

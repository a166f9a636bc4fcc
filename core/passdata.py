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

#: A keyed file's states, as categories (code 0 blank, 1 keyed).
_STATE_WORDS = pd.Index([BLANK, KEYED], dtype=object)


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

        Both tables come back categorical, column by column: a column's distinct
        texts are tested for blankness once (never a Python call per cell), and
        each cell holds a small code instead of an object pointer, which also
        spares the comparison hashing the cells again. A categorical column
        of texts is taken as it is (its categories must be ``str``). Labels read
        ``"<label_prefix> <index>"``.

        >>> import pandas as pd
        >>> p = PassData.from_texts(1, pd.DataFrame({"id": ["1", "2"], "q1": ["3", ""]}))
        >>> list(p.state["q1"])
        ['keyed', 'blank']
        """
        text, state = {}, {}
        for name in texts.columns:
            column = texts[name]
            if isinstance(column.dtype, pd.CategoricalDtype) and not column.hasnans:
                # Already numbered (a plain CSV file, see core.csv_columns).
                codes = column.cat.codes.to_numpy()
                uniques = column.cat.categories.to_numpy(dtype=object)
            else:
                codes, uniques = pd.factorize(column.fillna("").to_numpy(dtype=object))
            filled = np.fromiter((bool(str(u).strip()) for u in uniques), bool, len(uniques))
            text[name] = pd.Categorical.from_codes(codes, pd.Index(uniques, dtype=object))
            state[name] = pd.Categorical.from_codes(filled[codes].view(np.int8), _STATE_WORDS)
        index = texts.index
        text = pd.DataFrame(text, index=index, columns=texts.columns, copy=False)
        state = pd.DataFrame(state, index=index, columns=texts.columns, copy=False)
        keyers = pd.Series(keyer, index=index, dtype="string")
        labels = (f"{label_prefix} " + index.astype(str)).astype("string")
        return cls(pass_no, text, state, keyers, pd.Series(labels, index=index))

    @property
    def forms(self) -> int:
        """Number of forms in the pass."""
        return len(self.text)

"""Plain CSV rows split into categorical columns (core.csv_columns), checked against
Python's csv module, the reference for how a CSV file splits into cells."""

from __future__ import annotations

import csv
import io

from hypothesis import assume, given, settings
from hypothesis import strategies as st

from core.csv_columns import categorical_columns

# Any character but the separator, quotes and line ends (the plain files this reader takes).
CELL = st.text(st.characters(blacklist_characters=',"\r\n\x00', blacklist_categories=("Cs",)),
               max_size=6)


@st.composite
def grids(draw):
    width = draw(st.integers(1, 5))
    # Few distinct texts per column, as in keyed data, and some rare ones.
    pool = draw(st.lists(CELL, min_size=1, max_size=8))
    cell = st.one_of(st.sampled_from(pool), CELL)
    return draw(st.lists(st.lists(cell, min_size=width, max_size=width), min_size=1,
                         max_size=60))


def _csv_module(data: bytes) -> list[list[str]]:
    return list(csv.reader(io.StringIO(data.decode("utf-8"), newline="")))


@settings(max_examples=150, deadline=None)
@given(grids(), st.sampled_from([256, 1 << 22]), st.booleans())
def test_cells_are_the_texts_the_csv_module_reads(rows, block_size, final_newline):
    # A 256-byte block makes pyarrow number a few rows' texts at a time, so the
    # merging of the numberings is exercised too.
    data = "\n".join(",".join(r) for r in rows).encode("utf-8")
    if final_newline:
        data += b"\n"
    # A row of one empty cell is an empty line, which the importer skips before this.
    assume(rows[0] != [""] * len(rows[0]) or len(rows[0]) > 1)
    assume(all(r != [""] for r in rows))
    expected = _csv_module(data)
    frame = categorical_columns(data, len(rows[0]), ",", block_size=block_size)
    assert frame.astype(object).to_numpy().tolist() == expected
    for _, column in frame.items():
        categories = list(column.cat.categories)
        assert len(set(categories)) == len(categories)
        assert all(isinstance(c, str) for c in categories)


def test_texts_pandas_would_turn_into_missing_values_stay_text():
    # pandas and pyarrow both read "NA", "null" and "" as missing by default.
    frame = categorical_columns(b"NA;null;\n#N/A;nan;1\n", 3, ";")
    assert frame.astype(object).to_numpy().tolist() == [["NA", "null", ""], ["#N/A", "nan", "1"]]


def test_a_row_longer_than_a_block_is_still_read():
    long = "x" * 5000
    data = f"1,{long}\n2,b\n".encode()
    frame = categorical_columns(data, 2, ",", block_size=1024)
    assert frame.astype(object).to_numpy().tolist() == [["1", long], ["2", "b"]]

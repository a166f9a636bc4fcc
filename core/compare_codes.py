"""Cells of two passes as integer codes, for the comparison engine (``core.compare``).

A keyed column holds few distinct texts, so the engine works on codes: each
cell's position among the distinct texts of its group of columns, the same
numbering in both passes. Categorical columns (as ``read_pass_file`` gives
them) already hold codes, and only their categories are matched up; other
columns are hashed, pass 2 only where it differs from pass 1. States become
small integers. Everything here is per column or per few columns, never per
cell in Python.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .values import BLANK, ILLEGIBLE, KEYED

#: State codes in the engine's arrays: keyed, blank, illegible, not keyed yet.
K, B, I, N = 0, 1, 2, 3  # noqa: E741 - the state letters read best as they are

#: Columns of one group factorised together.
CHUNK = 16


def pair_codes(a: np.ndarray, b: np.ndarray):
    """Codes of the cells of two aligned 1-D object arrays (-1 = no text), and the texts.

    Most cells of two passes are equal, so only pass 1 is hashed in full;
    pass 2 borrows its codes and hashes just the cells that differ.

    >>> a, b, u = pair_codes(np.array(["3", "4", None], object), np.array(["3", "7", "4"], object))
    >>> a.tolist(), b.tolist(), u.tolist()
    ([0, 1, -1], [0, 2, 1], ['3', '4', '7'])
    """
    codes_a, uniques = pd.factorize(a)
    uniques = np.asarray(uniques, dtype=object)
    try:
        diff = ~np.asarray(a == b, dtype=bool)
    except (TypeError, ValueError):  # exotic cell objects: hash pass 2 in full
        diff = np.ones(len(a), dtype=bool)
    codes_b = codes_a.copy()
    if diff.any():
        codes_d, uniques_d = pd.factorize(b[diff])
        uniques_d = np.asarray(uniques_d, dtype=object)
        where = positions(uniques, uniques_d)
        new = where < 0
        where[new] = len(uniques) + np.arange(int(new.sum()))
        uniques = np.concatenate([uniques, uniques_d[new]])
        codes_b[diff] = np.append(where, -1)[codes_d]
    return codes_a, codes_b, uniques


def positions(reference: np.ndarray, values: np.ndarray, index: pd.Index | None = None):
    """Position of each value in ``reference`` (-1 if absent); a dict for the usual small case.

    >>> positions(np.array(["a", "b"], object), np.array(["b", "c"], object)).tolist()
    [1, -1]
    """
    if len(reference) + len(values) > 5_000:
        index = index if index is not None else pd.Index(reference, dtype=object)
        return index.get_indexer(values)
    where = {v: i for i, v in enumerate(reference.tolist())}
    return np.array([where.get(v, -1) for v in values.tolist()], dtype=np.intp)


def columns_of(frame: pd.DataFrame) -> list[pd.Series]:
    """The columns of a frame, in order, as a list (``columns_of(df)[j]`` is column j).

    >>> [c.name for c in columns_of(pd.DataFrame({"a": [1], "b": [2]}))]
    ['a', 'b']
    """
    # One pass over the columns: positional access one at a time costs far more.
    return [column for _, column in frame.items()]


def grid(columns: list[pd.Series], rows: np.ndarray) -> np.ndarray:
    """The listed rows of some columns as one column-major 2-D object array.

    >>> grid([pd.Series(["x", "y"]), pd.Series(["z", "w"])], np.array([1])).tolist()
    [['y', 'w']]
    """
    out = np.empty((len(rows), len(columns)), dtype=object, order="F")
    every = bool(columns) and len(rows) == len(columns[0]) \
        and bool((rows == np.arange(len(rows))).all())
    for i, col in enumerate(columns):
        column = col.to_numpy(dtype=object)
        out[:, i] = column if every else column[rows]
    return out


def categorical(columns: list[pd.Series]) -> bool:
    """Whether every column is categorical (then its codes can be used as they are).

    >>> categorical([pd.Series(["a"], dtype="category")]), categorical([pd.Series(["a"])])
    (True, False)
    """
    return all(isinstance(c.dtype, pd.CategoricalDtype) for c in columns)


def pair_chunk(t1: list[pd.Series], t2: list[pd.Series], pos1, pos2, chunk: list[int]):
    """Codes of a few columns of both passes (-1 = no text), column-major, and their texts.

    Categorical columns (keyed files) already hold codes: only their few
    categories are matched up, no cell is hashed. Other columns are factorised.

    >>> t1 = [pd.Series(["1", "2"], dtype="category")]
    >>> t2 = [pd.Series(["2", "5"], dtype="category")]
    >>> a, b, u = pair_chunk(t1, t2, np.array([0, 1]), np.array([0, 1]), [0])
    >>> a[:, 0].tolist(), b[:, 0].tolist(), u.tolist()
    ([0, 1], [1, 2], ['1', '2', '5'])
    """
    cols1 = [t1[j] for j in chunk]
    cols2 = [t2[j] for j in chunk]
    shape = (len(pos1), len(chunk))
    if not categorical(cols1 + cols2):
        codes_a, codes_b, uniques = pair_codes(grid(cols1, pos1).ravel(order="F"),
                                                grid(cols2, pos2).ravel(order="F"))
        return (codes_a.reshape(shape, order="F"), codes_b.reshape(shape, order="F"), uniques)
    # One factorisation of all the columns' categories numbers them for the chunk.
    cats = [c.cat.categories.to_numpy(dtype=object) for c in cols1 + cols2]
    numbered, uniques = pd.factorize(np.concatenate(cats + [np.empty(0, object)]))
    ends = np.cumsum([len(c) for c in cats])
    out = [np.empty(shape, dtype=np.int32, order="F") for _ in range(2)]
    for k, col in enumerate(cols1 + cols2):
        # Code -1 (no text) picks the appended -1.
        remap = np.append(numbered[ends[k] - len(cats[k]):ends[k]], -1).astype(np.int32)
        side, i = divmod(k, len(chunk))
        out[side][:, i] = remap[col.cat.codes.to_numpy()[pos2 if side else pos1]]
    return out[0], out[1], np.asarray(uniques, dtype=object)


def state_grid(state: pd.DataFrame, rows: np.ndarray) -> np.ndarray:
    """State codes (:data:`K`, :data:`B`, :data:`I`, :data:`N`) of the listed rows, column-major.

    >>> state_grid(pd.DataFrame({"q": ["keyed", "blank", None]}), np.array([2, 0])).tolist()
    [[3], [0]]
    """
    columns = columns_of(state)
    if categorical(columns):
        out = np.empty((len(rows), len(columns)), dtype=np.int8, order="F")
        words = {KEYED: K, BLANK: B, ILLEGIBLE: I}
        for j, col in enumerate(columns):
            lookup = np.array([words.get(w, N) for w in col.cat.categories] + [N], np.int8)
            out[:, j] = lookup[col.cat.codes.to_numpy()[rows]]
        return out
    cells = state.to_numpy(dtype=object)
    if not (len(rows) == len(state) and bool((rows == np.arange(len(rows))).all())):
        cells = cells[rows]
    out = np.full(cells.shape, N, dtype=np.int8, order="F")
    try:
        # Comparing with the few state words beats hashing every cell; most cells
        # are keyed, so the other words are looked for among the rest only.
        keyed = np.asarray(cells == KEYED, dtype=bool)
        out[keyed] = K
        r, c = np.nonzero(~keyed)
        if len(r):
            others = cells[r, c]
            for word, code in ((BLANK, B), (ILLEGIBLE, I)):
                at = np.asarray(others == word, dtype=bool)
                out[r[at], c[at]] = code
    except (TypeError, ValueError):  # a state like pd.NA has no truth value: hash instead
        codes, uniques = pd.factorize(cells.ravel())
        lookup = np.array([{KEYED: K, BLANK: B, ILLEGIBLE: I}.get(u, N) for u in uniques]
                          + [N], dtype=np.int8)
        out[:] = lookup[codes].reshape(cells.shape)
    return out

"""Split the rows of a plain CSV file into categorical columns, with pyarrow's CSV reader.

``core.importer`` checks a keyed file line by line (empty, short and
overlong rows, with their row numbers) and hands the rows it keeps here, as
UTF-8 bytes with no quote character and ``\\n`` line ends. pyarrow splits
them and numbers each column's distinct texts as it goes
(dictionary columns), so no cell is hashed again afterwards: the comparison
engine takes the codes as they are, and each column's few distinct texts
become the categories. Every cell stays the exact text typed (no missing
value words, no type guessing).

Why pyarrow and not ``pandas.read_csv``: on two 20,000 × 200 files, reading
and numbering the texts took 0.8–0.9 s with pandas' C reader plus
``pd.factorize``, and takes 0.55–0.6 s this way (bench/compare.py).

One thread, and the C library's allocator: reading on both cores saved
another 0.1 s but raised the comparison's peak memory by ~30 MB (freed
memory stays in the reader threads' arenas), and pyarrow's own allocator
keeps freed memory for reuse (~50 MB more); the benchmark's memory target is
the plain pandas script's peak.
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def categorical_columns(data: bytes, width: int, delimiter: str,
                        block_size: int = 1 << 22) -> pd.DataFrame:
    """The rows in ``data`` as a frame of ``width`` categorical text columns named 0, 1, ….

    ``data`` holds whole rows only (no header), each with exactly ``width``
    cells, separated by ``delimiter``, ending in ``\\n`` (the last may lack it).
    The categories of each column are its distinct texts as ``str``.
    ``block_size`` is how many bytes pyarrow reads at a time (each block
    numbers its texts on its own before the numberings are merged).

    >>> frame = categorical_columns(b"1,07,\\n2,7,x\\n", 3, ",")
    >>> frame[1].tolist(), frame[2].tolist(), list(frame[1].cat.categories)
    (['07', '7'], ['', 'x'], ['07', '7'])
    """
    import pyarrow as pa
    from pyarrow import csv as pa_csv

    names = [str(i) for i in range(width)]
    texts = pa.dictionary(pa.int32(), pa.string())
    pool = pa.system_memory_pool()
    def read(block: int):
        return pa_csv.read_csv(
            pa.py_buffer(data),
            read_options=pa_csv.ReadOptions(column_names=names, block_size=block,
                                            use_threads=False),
            parse_options=pa_csv.ParseOptions(delimiter=delimiter, quote_char=False,
                                              double_quote=False, escape_char=False,
                                              newlines_in_values=False,
                                              ignore_empty_lines=False),
            convert_options=pa_csv.ConvertOptions(column_types=dict.fromkeys(names, texts),
                                                  null_values=[], strings_can_be_null=False,
                                                  quoted_strings_can_be_null=False),
            memory_pool=pool,
        )

    try:
        table = read(block_size)
    except pa.ArrowInvalid:
        # A row longer than a block (megabytes of free text) cannot be split
        # across blocks: read the whole buffer as one block.
        table = read(len(data) + 1)
    # Each block of rows numbers its texts on its own; one numbering per column.
    table = table.unify_dictionaries(memory_pool=pool)
    columns = {}
    for i, column in enumerate(table.columns):
        array = column.chunk(0) if column.num_chunks == 1 \
            else column.combine_chunks(memory_pool=pool)
        codes = array.indices.to_numpy(zero_copy_only=False).astype(np.int32, copy=False)
        categories = pd.Index(array.dictionary.to_numpy(zero_copy_only=False), dtype=object)
        columns[i] = pd.Categorical.from_codes(codes, categories, validate=False)
    return pd.DataFrame(columns, copy=False)

"""Any file handed to keyproof either reads or is refused with one of our own errors.

Generated files (hypothesis) are stitched from the pieces real files are made
of, plus the awkward ones (quotes, line ends of three kinds, NUL, byte-order
marks, Unicode line separators, numbers pandas would overflow on). Whatever
comes out, the only exception allowed is a ``KeyproofError``, which the command
line turns into one located sentence and exit status 2: a ``ValueError`` from
pandas or an ``ArrowInvalid`` from pyarrow escaping here would be a traceback
for the user.
"""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.codebook import Codebook, Variable
from core.codebook_io import load_codebook
from core.errors import KeyproofError
from core.importer import read_keyed_file, read_pass_file

CB = Codebook((Variable("id", "integer", is_id=True), Variable("q1", "integer"),
               Variable("t", "string")))

FILE_PIECES = ["id", "q1", "t", ",", ";", "\t", "\n", "\r\n", "\r", '"', "1", "07", " ", "é",
               "\x00", "\ufeff", "xxx", "\u2028", "\x85"]
CODEBOOK_PIECES = ["name", "type", "id", "min", "max", "codes", "missing", "required",
                   "applies_if", "scale", "reverse", "width", "label", "format", "score",
                   "min_answered", ",", ";", "\n", '"', "integer", "number", "date", "string",
                   "yes", "no", "1=a; 2=b", "9=x", "1", "-3", "2.5", "1e400", "nan", "q1",
                   "q2", "q1 = 1", "q1 >", "(", ")", "and", "is blank", "%d.%m.%Y", "sum",
                   "mean", "0.5", "=", " ", "\ufeff"]
SETTINGS = settings(max_examples=300, deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])


@SETTINGS
@given(st.lists(st.sampled_from(FILE_PIECES), max_size=40),
       st.sampled_from(["utf-8", "cp1252", "utf-16"]), st.booleans())
def test_a_keyed_file_reads_or_is_refused_with_our_error(tmp_path, parts, encoding, header):
    text = ("id,q1,t\n" if header else "") + "".join(parts)
    try:
        data = text.encode(encoding)
    except UnicodeEncodeError:
        data = text.encode("utf-8")
    path = tmp_path / "pass.csv"
    path.write_bytes(data)
    try:
        texts, _ = read_keyed_file(path, CB)
        read_pass_file(path, CB, 1)
    except KeyproofError:
        return
    assert list(texts.columns) == CB.names
    assert all(isinstance(v, str) for v in texts.to_numpy().ravel())


@SETTINGS
@given(st.lists(st.sampled_from(CODEBOOK_PIECES), max_size=60), st.booleans())
def test_a_codebook_reads_or_is_refused_with_our_error(tmp_path, parts, header):
    text = ("name,type,id,min,max,codes,missing,required,applies_if\n" if header else "") \
        + "".join(parts)
    path = tmp_path / "codebook.csv"
    path.write_text(text, encoding="utf-8")
    try:
        load_codebook(path)
    except KeyproofError:
        pass

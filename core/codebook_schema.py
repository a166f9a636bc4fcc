"""A codebook as a Frictionless Table Schema (an open standard), both ways.

Written beside every export and accepted by ``keyproof init`` as a codebook.
What maps onto the standard does: ``name``, ``title`` (the label),
``description`` (what is allowed, in words), ``type``, ``format`` (a date's
strptime pattern), ``constraints`` (``required``, ``minimum``, ``maximum``,
``enum`` of the codes), ``categories`` (codes with their labels),
field-level ``missingValues`` (blank plus the declared missing codes, so a
reader of the file treats them as missing), a schema-level ``missingValues``
and the ``primaryKey`` (the participant ID). What the standard has no word
for sits under ``keyproof:variable`` (id, identifying, section, scale,
reverse, applies_if, width, score, min_answered) and ``keyproof:missing``
(the missing codes' labels); other tools ignore those keys. A required
variable with declared missing codes is marked required only there, because
in Table Schema a missing code reads as null and ``required`` refuses null.

Reading back goes through the same checks as a CSV codebook, so a Table
Schema from elsewhere gets the same located messages (``schema.json field 3``).
A schema written by :func:`to_table_schema` reads back as an equal codebook.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from .codebook import DEFAULT_MIN_ANSWERED, Code, Codebook, Variable
from .codebook_rules import RawRow, build_codebook
from .errors import CodebookError
from .values import allowed_text, canonical_series

EXT = "keyproof:variable"
EXT_MISSING = "keyproof:missing"
EXT_CODE_TEXTS = "keyproof:code_texts"
_FLAGS = ("identifying", "reverse")
_TEXTS = ("section", "scale", "applies_if")


def to_table_schema(codebook: Codebook) -> dict:
    """The codebook as a Table Schema descriptor (a JSON-ready dict).

    >>> from core.codebook import Code, Codebook, Variable
    >>> cb = Codebook((Variable("pid", is_id=True, required=True),
    ...                Variable("q1", "integer", codes=(Code("1", "no"), Code("2", "yes")))))
    >>> d = to_table_schema(cb)
    >>> d["primaryKey"], d["fields"][1]["constraints"]["enum"], d["fields"][1]["categories"][0]
    (['pid'], [1, 2], {'value': 1, 'label': 'no'})
    """
    fields = [_field(v) for v in codebook.variables]
    schema: dict = {"fields": fields, "missingValues": [""]}
    ids = [v.name for v in codebook.variables if v.is_id]
    if ids:
        schema["primaryKey"] = ids
    return schema


def write_table_schema(codebook: Codebook, path) -> Path:
    """Write :func:`to_table_schema` as UTF-8 JSON, atomically; returns the path.

    >>> import tempfile, pathlib
    >>> from core.codebook import Codebook, Variable
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "schema.json"
    >>> write_table_schema(Codebook((Variable("pid", is_id=True),)), p).name
    'schema.json'
    """
    from .atomic import atomic_text

    text = json.dumps(to_table_schema(codebook), indent=2, ensure_ascii=False) + "\n"
    return atomic_text(path, text)


def read_table_schema(path) -> Codebook:
    """Read a Table Schema ``.json`` (or a Data Package's first resource schema) as a codebook.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "schema.json"
    >>> _ = p.write_text('{"fields": [{"name": "pid", "type": "string"}], "primaryKey": "pid"}')
    >>> read_table_schema(p).id_variable.name
    'pid'
    """
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8-sig"))
    except OSError as exc:
        raise CodebookError(f"{path.name}: cannot be read ({exc.strerror}) — check the file.") from None
    except UnicodeDecodeError:
        raise CodebookError(f"{path.name}: is not UTF-8 text — save the JSON as UTF-8.") from None
    except json.JSONDecodeError as exc:
        raise CodebookError(f"{path.name} line {exc.lineno}: not valid JSON ({exc.msg} at column "
                            f"{exc.colno}) — fix the JSON syntax.") from None
    if isinstance(data, dict) and isinstance(data.get("resources"), list):
        schemas = [r.get("schema") for r in data["resources"] if isinstance(r, dict)]
        schemas = [s for s in schemas if isinstance(s, dict)]
        if not schemas:
            raise CodebookError(f"{path.name}: a Data Package with no inline resource schema — "
                                "give the Table Schema file itself.")
        data = schemas[0]
    return codebook_from_table_schema(data, source=str(path))


def codebook_from_table_schema(d: dict, source: str = "") -> Codebook:
    """Build (and check) a codebook from a Table Schema descriptor.

    ``source`` is the file it came from, for messages. Raises ``CodebookError``
    listing every problem, located as ``<file> field <n> ("<name>")``.

    >>> d = {"fields": [{"name": "pid", "type": "string"}, {"name": "age", "type": "integer",
    ...      "constraints": {"minimum": 16, "maximum": 99}}], "primaryKey": ["pid"]}
    >>> codebook_from_table_schema(d)["age"].max
    99.0
    """
    label = Path(source).name if source else "the Table Schema"
    if not isinstance(d, dict) or not isinstance(d.get("fields"), list):
        raise CodebookError(f'{label}: has no "fields" list — a Table Schema lists its fields '
                            'under "fields".')
    problems: list[str] = []
    key = d.get("primaryKey", [])
    key = [key] if isinstance(key, str) else list(key or [])
    if len(key) > 1:
        problems.append(f"{label}: primaryKey names {len(key)} fields ({', '.join(map(str, key))}) — "
                        "keyproof needs one participant-ID field; keep one.")
    shared_missing = [m if isinstance(m, str) else str(m.get("value", ""))
                      for m in d.get("missingValues", [""]) or []]
    rows = []
    for i, f in enumerate(d["fields"], start=1):
        where = f"{label} field {i}"
        if not isinstance(f, dict):
            problems.append(f"{where}: is not an object — write each field as "
                            '{"name": ..., "type": ...}.')
            continue
        rows.append(RawRow(where, None, _cells(f, key, shared_missing)))
    return build_codebook(rows, source=source, problems=problems, label=label)


# --------------------------------------------------------------------------- writing


def _typed(var: Variable, texts: list[str]) -> list:
    """Codes as the JSON values a Table Schema reader expects for the field's type.

    All of a variable's codes go through one ``canonical_series`` call: the
    call has a fixed cost of several pandas steps, and paying it per code (and
    per use) made writing a 300-item codebook take most of a minute.

    >>> _typed(Variable("x", "integer"), ["01", "2"])
    [1, 2]
    """
    canon = canonical_series(var, pd.Series(texts, dtype=object))[0].tolist()
    if var.type == "integer":
        return [int(c) for c in canon]
    if var.type == "number":
        return [float(c) for c in canon]
    return canon


def _field(var: Variable) -> dict:
    f: dict = {"name": var.name, "type": var.type}
    if var.label:
        f["title"] = var.label
    f["description"] = allowed_text(var)
    if var.type == "date" and var.format:
        f["format"] = var.format
    constraints: dict = {}
    # In Table Schema a declared missing code reads as null, and a required
    # field refuses null; ours allows "refused" on a required item. So such a
    # field keeps its requirement under the keyproof key only.
    required = var.required or var.is_id
    if required and not var.missing:
        constraints["required"] = True
    if var.min is not None:
        constraints["minimum"] = int(var.min) if var.type == "integer" else var.min
    if var.max is not None:
        constraints["maximum"] = int(var.max) if var.type == "integer" else var.max
    typed = _typed(var, [c.value for c in var.codes]) if var.codes else []
    if var.codes:
        constraints["enum"] = typed
    if constraints:
        f["constraints"] = constraints
    if var.codes:
        f["categories"] = [{"value": t, **({"label": c.label} if c.label else {})}
                           for t, c in zip(typed, var.codes, strict=True)]
        if any(str(t) != c.value for t, c in zip(typed, var.codes, strict=True)):
            f[EXT_CODE_TEXTS] = list(var.code_values)
    if var.missing:
        f["missingValues"] = ["", *var.missing_values]
        f[EXT_MISSING] = [{"value": c.value, "label": c.label} for c in var.missing]
    ext: dict = {}
    if var.is_id:
        ext["id"] = True
    if required and var.missing:
        ext["required"] = True
    for name in _FLAGS:
        if getattr(var, name):
            ext[name] = True
    for name in _TEXTS:
        if getattr(var, name):
            ext[name] = getattr(var, name)
    if var.width:
        ext["width"] = var.width
    if var.scale:
        ext["score"] = var.score
        ext["min_answered"] = var.min_answered
    if ext:
        f[EXT] = ext
    return f


# --------------------------------------------------------------------------- reading


def _text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _cells(f: dict, key: list, shared_missing: list[str]) -> dict:
    ext = f.get(EXT) if isinstance(f.get(EXT), dict) else {}
    constraints = f.get("constraints") if isinstance(f.get("constraints"), dict) else {}
    fmt = f.get("format", "")
    cells = {
        "name": _text(f.get("name")),
        "label": _text(f.get("title")),
        "type": _text(f.get("type", "string")),
        "id": "yes" if f.get("name") in key or ext.get("id") else "no",
        "required": _text(bool(constraints.get("required", False) or ext.get("required", False))),
        "min": _text(constraints.get("minimum")),
        "max": _text(constraints.get("maximum")),
        # Only a date's format is a pattern keyproof reads; "email", "uri" etc. describe strings.
        "format": "" if fmt in ("", "default", "any", None) or f.get("type") != "date" else _text(fmt),
        "width": _text(ext.get("width")),
        "codes": _codes(f, constraints),
        "missing": _missing(f, shared_missing),
    }
    for name in _FLAGS:
        cells[name] = _text(bool(ext.get(name, False)))
    for name in _TEXTS:
        cells[name] = _text(ext.get(name))
    if ext.get("scale"):
        cells["score"] = _text(ext.get("score", ""))
        share = ext.get("min_answered", DEFAULT_MIN_ANSWERED)
        cells["min_answered"] = repr(float(share)) if isinstance(share, int | float) else _text(share)
    return cells


def _codes(f: dict, constraints: dict) -> tuple[Code, ...]:
    labels: dict[str, str] = {}
    order: list[str] = []
    for item in f.get("categories") or []:
        value = item.get("value") if isinstance(item, dict) else item
        text = _text(value)
        labels[text] = _text(item.get("label", "")) if isinstance(item, dict) else ""
        order.append(text)
    enum = constraints.get("enum")
    if enum:
        order = [_text(v) for v in enum]
    texts = f.get(EXT_CODE_TEXTS)
    if isinstance(texts, list) and len(texts) == len(order):
        return tuple(Code(str(t), labels.get(v, "")) for t, v in zip(texts, order, strict=True))
    return tuple(Code(v, labels.get(v, "")) for v in order)


def _missing(f: dict, shared: list[str]) -> tuple[Code, ...]:
    labelled = {str(m.get("value")): _text(m.get("label", ""))
                for m in f.get(EXT_MISSING) or [] if isinstance(m, dict)}
    values = f.get("missingValues")
    if values is None:
        # Schema-wide missing values apply to a field only where they are values of its type.
        probe = Variable("x", _text(f.get("type", "string")) if f.get("type") in
                         ("integer", "number", "date", "string") else "string")
        candidates = [m for m in shared if m.strip()]
        if not candidates:
            return ()
        valid = canonical_series(probe, pd.Series(candidates, dtype=object))[1]
        values = [m for m, ok in zip(candidates, valid, strict=True) if ok]
    out = []
    for m in values:
        value = m if isinstance(m, str) else _text(m.get("value", "")) if isinstance(m, dict) else _text(m)
        label = labelled.get(value, _text(m.get("label", "")) if isinstance(m, dict) else "")
        if value.strip():
            out.append(Code(value, label))
    return tuple(out)

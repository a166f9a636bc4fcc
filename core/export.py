"""The verified file: CSV, XLSX or a Frictionless Data Package, written atomically.

:func:`export` takes a :class:`~core.verified.Verified` (built by the
resolution step) and writes it where ``out`` points:

- ``*.csv``: the data (UTF-8), plus ``<name>.schema.json`` (its Table
  Schema: types, ranges, codes, missing values), ``<name>.set_aside.csv``
  (who was set aside and why) and ``<name>.about.json`` (provenance) beside it;
- ``*.xlsx``: one workbook, sheets ``data``, ``codebook``, ``decisions``,
  ``set aside``, ``kept values`` and ``about`` (openpyxl write-only mode);
- anything else without a suffix: a folder holding a Data Package
  (``datapackage.json``, ``data.csv`` with its Table Schema ``schema.json``,
  ``set_aside.csv``, ``decisions.csv``).

After the codebook's variables come the scale scores, computed here by
:func:`core.screening.scale_scores` from the verified items, never keyed:
one column per scale (named after the scale, or ``<scale>_score`` when a
variable already has that name), its rule written in the Table Schema's
``description`` and the XLSX codebook sheet. See :func:`core.scores.score_columns`.

Identifying variables never go into any of these: with ``identifying=PATH``
they are written, with the participant ID alone, to that separate file.
A draft export (``verified.draft``) carries ``DRAFT`` in its name and
metadata and lists its open cells in ``<name>.open.csv``.

Every file is written through :mod:`core.atomic`: a target is either the old
complete file or the new complete one. The analysis file is written last, so
a new analysis file always comes with its new companions.

The three formats share their companions (provenance, set-aside list,
identifying file, computed score columns) and the schema adjustments; the
score columns themselves are computed in :mod:`core.scores`. That sharing
keeps this module a little over the house's ~600 lines: the formats' private
helpers (frames, safe decision lists, provenance) would otherwise have to be
made public for a second module. The Data Package writer (the last third) is
the part to move out if a fourth format comes.

Trade-off: values are written as their typed form (``7``, ``3.5``,
``2024-05-01``) rather than the keyed text, so a declared missing code of a
``number`` variable is written the way the number prints (``-9.0``); the
Table Schema lists both spellings as missing values.
"""

from __future__ import annotations

import functools
import json
import re
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import pandas as pd

from .atomic import atomic_folder, atomic_text, atomic_write
from .codebook import Codebook, Variable
from .errors import ExportError
from .scores import (  # partial_scores and score_names re-exported for older callers
    ScoreColumn,
    partial_scores,  # noqa: F401
    score_columns,
    score_names,  # noqa: F401
)
from .values import canonical_series
from .verified import Verified

#: progress(rows_done, rows_total): called now and then during a long export.
Progress = Callable[[int, int], None]

DRAFT = "DRAFT"
_CHUNK = 1000
# Characters XML 1.0 (and so XLSX) cannot hold; openpyxl refuses them.
_ILLEGAL_XML = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")


@dataclass(frozen=True)
class Provenance:
    """Where a verified file came from; written into every export."""

    study: str
    """The study file's name (not its full path)."""
    journal_head: str
    """Hash of the journal's newest row when the verified table was built."""
    exported_at: str
    """UTC time of the export, ISO 8601 with ``Z``."""
    keyproof_version: str
    draft: bool = False
    """True when open cells were left empty (see the open cells file)."""

    def as_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class ExportResult:
    """What :func:`export` wrote."""

    path: Path
    """The analysis file (CSV, XLSX) or the Data Package folder."""
    format: str
    """``csv``, ``xlsx`` or ``datapackage``."""
    files: tuple[Path, ...]
    """Every file written, the analysis file last."""
    rows: int
    """Participants in the analysis file."""
    columns: int
    """Variables in the analysis file (identifying ones left out)."""
    set_aside: int
    open_cells: int
    """Cells left empty because they are still open (0 unless a draft)."""
    left_out: tuple[str, ...] = ()
    """Identifying variables kept out of the analysis file."""
    computed: tuple[str, ...] = ()
    """Scale score columns computed after the variables (not counted in ``columns``)."""
    provenance: Provenance | None = field(default=None, compare=False)


def keyproof_version() -> str:
    """The installed keyproof version, ``0+unknown`` when run from a bare source tree."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("keyproof")
    except PackageNotFoundError:
        return "0+unknown"


def target_of(out: str | Path, draft: bool) -> tuple[str, Path]:
    """The format and the path an export to ``out`` writes (``DRAFT`` added for drafts).

    >>> target_of("verified.csv", draft=True)
    ('csv', PosixPath('verified.DRAFT.csv'))
    >>> target_of("pkg", draft=False)
    ('datapackage', PosixPath('pkg'))
    """
    path = Path(out)
    suffix = path.suffix.lower()
    if suffix in (".csv", ".xlsx"):
        kind = suffix[1:]
        stem = path.name[: -len(suffix)]
    elif path.is_dir() or suffix in ("", ".draft"):
        kind, stem, suffix = "datapackage", path.name, ""
    else:
        raise ExportError(
            f"{path}: cannot export to a {suffix} file — choose a .csv or .xlsx file, "
            "or a folder for a Data Package."
        )
    if draft and DRAFT not in stem.split("."):
        stem = f"{stem}.{DRAFT}"
    return kind, path.with_name(stem + (path.suffix if suffix else ""))


def analysis_columns(codebook: Codebook) -> list[str]:
    """Columns of the analysis file: the codebook's, minus identifying ones (the ID stays).

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("pid", is_id=True), Variable("name", identifying=True),
    ...                Variable("q1", "integer")))
    >>> analysis_columns(cb)
    ['pid', 'q1']
    """
    # The participant ID is the key that joins the analysis file to the
    # identifying file, so it stays even when flagged identifying.
    return [v.name for v in codebook if v.is_id or not v.identifying]


def export(
    verified: Verified,
    out: str | Path,
    identifying: str | Path | None = None,
    progress: Progress | None = None,
    *,
    now: datetime | None = None,
) -> ExportResult:
    """Write the verified table to ``out`` (``.csv``, ``.xlsx`` or a folder), atomically.

    ``identifying``: where to write the identifying variables with the
    participant ID (``.csv`` or ``.xlsx``); when None they are written nowhere.
    ``progress(done, total)`` is called as rows are written. ``now`` fixes
    the export time (tests). Raises :class:`ExportError` for a target that
    cannot be written.

    >>> import tempfile, pathlib, pandas as pd
    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("pid", is_id=True), Variable("q1", "integer")))
    >>> v = Verified(cb, pd.DataFrame({"pid": ["1"], "q1": pd.array([3], dtype="Int64")}))
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "v.csv"
    >>> export(v, out).path.read_text()
    'pid,q1\\n1,3\\n'
    """
    codebook = verified.codebook
    kind, path = target_of(out, verified.draft)
    _check_target(path, kind, identifying)
    stamp = (now or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    prov = Provenance(verified.study, verified.head, stamp, keyproof_version(), verified.draft)
    columns = analysis_columns(codebook)
    left_out = tuple(v.name for v in codebook if v.identifying and not v.is_id)
    scores, computed = score_columns(verified.data, codebook)
    data = pd.concat([verified.data.reindex(columns=columns), scores], axis=1)
    written: list[Path] = []
    try:
        if identifying is not None:
            written.append(_write_identifying(verified, Path(identifying)))
        if verified.draft:
            open_path = path.with_name(_stem(path) + ".open.csv")
            written.append(_write_csv(open_path, _frame(verified.open_cells, OPEN_COLUMNS)))
        if kind == "csv":
            written += _export_csv(verified, data, path, prov, progress, computed)
        elif kind == "xlsx":
            written.append(_export_xlsx(verified, data, path, prov, progress, computed))
        else:
            written.append(_export_package(verified, data, path, prov, progress, computed))
    except ExportError:
        raise
    except OSError as exc:
        raise ExportError(
            f"{path}: could not be written ({exc.strerror or exc}) — check the folder "
            "exists and is writable, then export again."
        ) from exc
    return ExportResult(
        path=path,
        format=kind,
        files=tuple(written),
        rows=len(data),
        columns=len(columns),
        set_aside=len(verified.set_aside),
        open_cells=len(verified.open_cells) if verified.draft else 0,
        left_out=left_out,
        computed=tuple(c.name for c in computed),
        provenance=prov,
    )


OPEN_COLUMNS = ("participant", "variable", "kind")
SET_ASIDE_COLUMNS = ("participant", "reason", "rule", "keyer", "at")
KEPT_COLUMNS = ("participant", "variable", "value", "reason")
DECISION_COLUMNS = ("decision_id", "at", "keyer", "participant", "variable", "kind", "action",
                    "pass1", "pass2", "value", "state", "reason")


def _stem(path: Path) -> str:
    return path.name[: -len(path.suffix)] if path.suffix.lower() in (".csv", ".xlsx") else path.name


def _check_target(path: Path, kind: str, identifying: str | Path | None) -> None:
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise ExportError(
            f"{path}: the folder {folder} does not exist — create it or choose another --out."
        )
    if kind != "datapackage" and path.is_dir():
        raise ExportError(f"{path}: is a folder — choose a file name or remove the folder.")
    if kind == "datapackage" and path.exists() and not path.is_dir():
        raise ExportError(f"{path}: is a file — choose a folder name for a Data Package.")
    if identifying is not None:
        ident = Path(identifying)
        if ident.resolve() == path.resolve() or (
            kind == "datapackage" and path.resolve() in ident.resolve().parents
        ):
            raise ExportError(
                f"{ident}: the identifying file must be stored apart from the analysis "
                "file — choose another --identifying path."
            )
        if ident.suffix.lower() not in (".csv", ".xlsx"):
            raise ExportError(f"{ident}: write identifying variables to a .csv or .xlsx file.")


def _frame(table: pd.DataFrame, columns: tuple[str, ...]) -> pd.DataFrame:
    """``table`` with at least ``columns`` (empty ones added), those first."""
    table = table if isinstance(table, pd.DataFrame) else pd.DataFrame()
    table = table.reset_index(drop=True)
    extra = [c for c in table.columns if c not in columns and not str(c).startswith("_")]
    return table.reindex(columns=[*columns, *extra])


def _safe_decisions(verified: Verified) -> pd.DataFrame:
    """Decisions without the values of identifying variables (they name people)."""
    table = _frame(verified.decisions, DECISION_COLUMNS)
    hidden = set(verified.codebook.identifying_names) - {verified.codebook.id_variable.name}
    if "variable" in table and hidden:
        rows = table["variable"].isin(hidden)
        for col in ("pass1", "pass2", "value"):
            if col in table:
                table[col] = table[col].astype(object).where(~rows, "(identifying)")
    return table


def _safe_kept(verified: Verified) -> pd.DataFrame:
    table = _frame(verified.kept, KEPT_COLUMNS)
    hidden = set(verified.codebook.identifying_names) - {verified.codebook.id_variable.name}
    return table[~table["variable"].isin(hidden)]


def _csv_ready(data: pd.DataFrame) -> pd.DataFrame:
    """Dates as ISO text; everything else stays typed for pandas' writer."""
    out = data.copy()
    for name in out.columns:
        if pd.api.types.is_datetime64_any_dtype(out[name]):
            out[name] = out[name].dt.strftime("%Y-%m-%d")
    return out


def _write_csv(path: Path, table: pd.DataFrame, progress: Progress | None = None) -> Path:
    def write(tmp: Path) -> None:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            total = len(table)
            if total == 0 or progress is None:
                table.to_csv(fh, index=False, lineterminator="\n")
            else:
                # Chunks only to report progress; pandas writes each one in C.
                for start in range(0, total, _CHUNK):
                    part = table.iloc[start : start + _CHUNK]
                    part.to_csv(fh, index=False, header=start == 0, lineterminator="\n")
                    progress(min(start + _CHUNK, total), total)

    return atomic_write(path, write)


def _write_identifying(verified: Verified, path: Path) -> Path:
    codebook = verified.codebook
    names = [codebook.id_variable.name] + [
        v.name for v in codebook if v.identifying and not v.is_id
    ]
    table = verified.data.reindex(columns=names)
    if path.suffix.lower() == ".xlsx":
        return _write_workbook(path, [("identifying", table)])
    return _write_csv(path, _csv_ready(table))


def _about(prov: Provenance, verified: Verified, data: pd.DataFrame,
           computed: tuple[ScoreColumn, ...] = ()) -> dict:
    return {
        **prov.as_dict(),
        "participants": len(data),
        "variables": len(data.columns) - len(computed),
        "computed_columns": [c.name for c in computed],
        "set_aside": len(verified.set_aside),
        "open_cells": len(verified.open_cells) if verified.draft else 0,
        "identifying_left_out": sum(
            1 for v in verified.codebook if v.identifying and not v.is_id
        ),
        "codebook_hash": verified.codebook.hash,
    }


def _export_csv(verified, data, path, prov, progress, computed) -> list[Path]:
    stem = _stem(path)
    about = path.with_name(stem + ".about.json")
    set_aside = path.with_name(stem + ".set_aside.csv")
    schema = path.with_name(stem + ".schema.json")
    info = _about(prov, verified, data, computed)
    info["computed"] = {c.name: c.rule for c in computed}
    info["files"] = {"data": path.name, "schema": schema.name, "set_aside": set_aside.name}
    if verified.draft:
        info["files"]["open_cells"] = stem + ".open.csv"
    names = list(data.columns[: len(data.columns) - len(computed)])
    table = table_schema(verified.codebook, names, _safe_kept(verified), computed)
    files = [
        _write_csv(set_aside, _frame(verified.set_aside, SET_ASIDE_COLUMNS)),
        atomic_text(schema, json.dumps(table, indent=2, ensure_ascii=False) + "\n"),
        atomic_text(about, json.dumps(info, indent=2, ensure_ascii=False) + "\n"),
    ]
    files.append(_write_csv(path, _csv_ready(data), progress))
    return files


# --- XLSX -------------------------------------------------------------------


def _cells(table: pd.DataFrame):
    """Rows of plain Python values for openpyxl (None for empty), column-wise conversion."""
    columns = []
    for name in table.columns:
        col = table[name]
        if pd.api.types.is_datetime64_any_dtype(col):
            values = col.dt.date.astype(object)
        elif pd.api.types.is_string_dtype(col) or col.dtype == object:
            values = col.astype("string").str.replace(_ILLEGAL_XML, "", regex=True).astype(object)
        else:
            values = col.astype(object)
        columns.append(values.where(col.notna(), None).tolist())
    return zip(*columns, strict=True)


def _write_workbook(
    path: Path,
    sheets: list[tuple[str, pd.DataFrame]],
    progress: Progress | None = None,
) -> Path:
    from openpyxl import Workbook

    def write(tmp: Path) -> None:
        wb = Workbook(write_only=True)
        for title, table in sheets:
            ws = wb.create_sheet(title)
            ws.append([str(c) for c in table.columns])
            total = len(table)
            guard = _may_look_like_formulas(table)
            for i, row in enumerate(_cells(table), start=1):
                ws.append([_as_text_if_formula(ws, v) for v in row] if guard else row)
                if progress is not None and title == "data" and (i % _CHUNK == 0 or i == total):
                    progress(i, total)
        wb.save(tmp)

    return atomic_write(path, write)


def _may_look_like_formulas(table: pd.DataFrame) -> bool:
    """Whether any text cell starts with "=" (checked per column, vectorised)."""
    for name in table.columns:
        col = table[name]
        if pd.api.types.is_string_dtype(col) or col.dtype == object:
            if col.astype("string").str.startswith("=").fillna(False).any():
                return True
    return False


def _as_text_if_formula(ws, value):
    # A keyed text starting with "=" must stay text, never become a formula.
    if isinstance(value, str) and value.startswith("="):
        from openpyxl.cell import WriteOnlyCell

        cell = WriteOnlyCell(ws, value=value)
        cell.data_type = "s"
        return cell
    return value


def _codebook_table(codebook: Codebook, names: list[str],
                    computed: tuple[ScoreColumn, ...] = ()) -> pd.DataFrame:
    rows = []
    for v in codebook:
        if v.name not in names:
            continue
        rows.append({
            "name": v.name,
            "label": v.label,
            "type": v.type,
            "id": "yes" if v.is_id else "",
            "min": _number_text(v.min),
            "max": _number_text(v.max),
            "codes": _codes_text(v.codes),
            "missing": _codes_text(v.missing),
            "required": "yes" if v.required else "",
            "section": v.section,
            "scale": v.scale,
            "reverse": "yes" if v.reverse else "",
            "applies_if": v.applies_if,
            "format": v.format,
            "origin": "keyed",
        })
    rows += [{"name": c.name, "label": f"{c.scale} score ({c.method})", "type": "number",
              "scale": c.scale, "origin": "computed", "rule": c.rule} for c in computed]
    return pd.DataFrame(rows, columns=["name", "label", "type", "id", "min", "max", "codes",
                                       "missing", "required", "section", "scale", "reverse",
                                       "applies_if", "format", "origin", "rule"])


def _number_text(x: float | None) -> str:
    if x is None:
        return ""
    return str(int(x)) if float(x).is_integer() else repr(float(x))


def _codes_text(codes) -> str:
    return "; ".join(f"{c.value}={c.label}" if c.label else c.value for c in codes)


def _export_xlsx(verified, data, path, prov, progress, computed) -> Path:
    about = _about(prov, verified, data, computed)
    about_table = pd.DataFrame({"item": list(about), "value": [str(v) for v in about.values()]})
    sheets = [
        ("data", data),
        ("codebook", _codebook_table(verified.codebook, list(data.columns), computed)),
        ("decisions", _safe_decisions(verified)),
        ("set aside", _frame(verified.set_aside, SET_ASIDE_COLUMNS)),
        ("kept values", _safe_kept(verified)),
        ("about", about_table),
    ]
    return _write_workbook(path, sheets, progress)


# --- Data Package -----------------------------------------------------------


def table_schema(codebook: Codebook, names: list[str], kept: pd.DataFrame | None = None,
                 computed: tuple[ScoreColumn, ...] = ()) -> dict:
    """The Table Schema of the analysis file: ``names`` of ``codebook`` in order.

    Starts from the codebook's own Table Schema (``core.codebook_io``) and
    makes it describe the verified data rather than the keying rules:

    - every field with declared missing codes gets field-level
      ``missingValues`` spelled the way the CSV writes them (``-9`` and
      ``-9.0`` for a number), so codes of one variable never blank another's;
    - ``required`` is a keying rule (a blank on paper is checked), not a
      promise that the data has no blanks: the paper may really be blank, so
      it moves to ``keyproof:variable`` except for the ID;
    - a value kept outside the rule because the paper says so (``kept``:
      participant, variable, value) widens that field's minimum, maximum or
      enum just enough, and is listed under ``keyproof:kept``;
    - dates are written ISO 8601, so their format is ``default``;
    - ``computed`` scale scores follow as ``number`` fields whose
      ``description`` gives the rule (also under ``keyproof:computed``).

    >>> from core.codebook import Code, Codebook, Variable
    >>> cb = Codebook((Variable("pid", is_id=True), Variable("q", "number",
    ...                missing=(Code("-9", "refused"),))))
    >>> table_schema(cb, ["pid", "q"])["fields"][1]["missingValues"]
    ['', '-9', '-9.0']
    """
    schema, fields = _codebook_schema(codebook)
    schema["fields"] = [fields[n] for n in names]
    kept = _frame(kept, KEPT_COLUMNS)
    for f in schema["fields"]:
        var = codebook[f["name"]]
        constraints = f.setdefault("constraints", {})
        if var.missing:
            f["missingValues"] = _spelled_missing(var.type, var.format, var.missing_values)
        if var.is_id:
            constraints["required"] = True
        elif constraints.pop("required", False):
            f.setdefault("keyproof:variable", {})["required"] = True
        if var.type == "date":
            f["format"] = "default"
        mine = kept.loc[kept["variable"] == var.name, "value"].dropna().astype(str)
        if len(mine):
            _widen(var, constraints, list(mine))
            f["keyproof:kept"] = [
                {"participant": str(p), "value": str(v)}
                for p, v in kept.loc[mine.index, ["participant", "value"]].itertuples(index=False)
            ]
        if not constraints:
            f.pop("constraints")
    schema["fields"] += [
        {"name": c.name, "title": f"{c.scale} score ({c.method})", "type": "number",
         "description": c.rule, "keyproof:computed": c.as_dict()}
        for c in computed
    ]
    id_name = codebook.id_variable.name
    if id_name in names:
        schema["primaryKey"] = [id_name]
    else:
        schema.pop("primaryKey", None)
    schema.setdefault("missingValues", [""])
    return schema


@functools.lru_cache(maxsize=256)
def _spelled_missing(type_: str, fmt: str, codes: tuple[str, ...]) -> list[str]:
    """Missing codes as the codebook writes them and as the CSV prints them."""
    var = Variable("x", type_, format=fmt)
    printed = canonical_series(var, pd.Series(list(codes), dtype=object))[0]
    return list(dict.fromkeys(["", *codes, *printed]))


def _codebook_schema(codebook: Codebook) -> tuple[dict, dict[str, dict]]:
    """The codebook's Table Schema and its fields by name, each field a fresh copy.

    Questionnaires repeat the same rule over many items (300 five-point
    items), and building a field parses every code, so the codebook module's
    writer runs once per distinct rule; the other variables of that rule get
    a copy with their own name and label.
    """
    from dataclasses import replace

    from .codebook_io import to_table_schema

    def rule(v: Variable) -> Variable:
        return replace(v, name="", label="", row=None)

    firsts: dict[Variable, Variable] = {}
    for v in codebook:
        firsts.setdefault(rule(v), v)
    schema = dict(to_table_schema(Codebook(tuple(firsts.values()), source=codebook.source)))
    template = {f["name"]: f for f in schema.get("fields", [])}
    fields = {}
    for v in codebook:
        f: dict = {"name": v.name}
        if v.label:
            f["title"] = v.label
        for key, value in template[firsts[rule(v)].name].items():
            if key not in ("name", "title"):
                f[key] = json.loads(json.dumps(value))
        fields[v.name] = f
    return schema, fields


def _widen(var: Variable, constraints: dict, texts: list[str]) -> None:
    """Let the values the paper really shows pass their field's constraints."""
    canon, valid = canonical_series(var, pd.Series(texts, dtype=object))
    values = [_typed_code(var, c) for c, ok in zip(canon, valid, strict=True) if ok]
    if not values:
        return
    if "enum" in constraints:
        constraints["enum"] = list(dict.fromkeys([*constraints["enum"], *values]))
    if var.type in ("integer", "number"):
        if "minimum" in constraints:
            constraints["minimum"] = min([constraints["minimum"], *values])
        if "maximum" in constraints:
            constraints["maximum"] = max([constraints["maximum"], *values])


def _typed_code(var: Variable, canonical: str):
    if var.type == "integer":
        return int(canonical)
    if var.type == "number":
        return float(canonical)
    return canonical


def _package_name(path: Path) -> str:
    name = re.sub(r"[^a-z0-9._-]+", "-", path.name.lower()).strip("-.")
    return name or "verified"


def _export_package(verified, data, path, prov, progress, computed) -> Path:
    names = list(data.columns[: len(data.columns) - len(computed)])
    schema = table_schema(verified.codebook, names, _safe_kept(verified), computed)
    set_aside = _frame(verified.set_aside, SET_ASIDE_COLUMNS)
    decisions = _safe_decisions(verified)
    descriptor = {
        "name": _package_name(path),
        "title": f"Verified data of {verified.study or 'a keyproof study'}"
        + (" (draft)" if verified.draft else ""),
        "created": prov.exported_at,
        "keyproof:provenance": _about(prov, verified, data, computed),
        "resources": [
            _resource("data", "data.csv", "schema.json"),
            _resource("set-aside", "set_aside.csv", _text_schema(set_aside)),
            _resource("decisions", "decisions.csv", _text_schema(decisions)),
        ],
    }

    def build(folder: Path) -> None:
        (folder / "schema.json").write_text(
            json.dumps(schema, indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
        )
        set_aside.to_csv(folder / "set_aside.csv", index=False, lineterminator="\n")
        decisions.to_csv(folder / "decisions.csv", index=False, lineterminator="\n")
        _plain_csv(folder / "data.csv", _csv_ready(data), progress)
        (folder / "datapackage.json").write_text(
            json.dumps(descriptor, indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
        )

    return atomic_folder(path, build)


def _plain_csv(path: Path, table: pd.DataFrame, progress: Progress | None) -> None:
    with open(path, "w", encoding="utf-8", newline="") as fh:
        total = len(table)
        for start in range(0, max(total, 1), _CHUNK):
            part = table.iloc[start : start + _CHUNK]
            part.to_csv(fh, index=False, header=start == 0, lineterminator="\n")
            if progress is not None and total:
                progress(min(start + _CHUNK, total), total)


def _resource(name: str, path: str, schema) -> dict:
    return {
        "name": name,
        "path": path,
        "type": "table",
        "format": "csv",
        "mediatype": "text/csv",
        "encoding": "utf-8",
        "schema": schema,
    }


def _text_schema(table: pd.DataFrame) -> dict:
    return {"fields": [{"name": str(c), "type": "string"} for c in table.columns],
            "missingValues": [""]}

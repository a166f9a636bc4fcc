"""A quick "is this keyed text allowed?" for one field, on the keying screen's key path.

``core.values.parse`` is the rule (comparison uses the same), but it is
built for whole columns and pays pandas' per-call overhead: several
milliseconds for one value, and seconds for reviewing a 300-field form. This
answers the common case (plain ASCII integers, numbers and code lists) in
microseconds, and says "ask ``parse``" for anything else (dates, other
scripts, very long numbers). It only ever answers "allowed"; when a text
looks wrong, the caller asks ``parse`` for the real verdict and its message,
so a slip here can hide a warning but never invent one.
``tests/test_keying_checks.py`` holds it to ``parse`` on generated texts.
"""

from __future__ import annotations

import functools
import re
import unicodedata

from core.codebook import Variable

_INTEGER = re.compile(r"[+-]?[0-9]+")
_NUMBER = re.compile(r"[+-]?([0-9]+([.,][0-9]*)?|[.,][0-9]+)")
_LONGEST = 15  # beyond this, float rounding could differ from pandas' reading


class QuickCheck:
    """``allowed(text)``: True when ``text`` is surely allowed; None when unsure."""

    def __init__(self, var: Variable):
        self.var = var
        self.usable = var.type in ("integer", "number", "string")
        self.codes = self._canonical_set(var.code_values)
        self.missing = self._canonical_set(var.missing_values)
        if self.codes is None or self.missing is None:
            self.usable = False

    def _canonical_set(self, values: tuple[str, ...]) -> set[str] | None:
        out = set()
        for v in values:
            c = self.canonical(v)
            if c is None:
                return None
            out.add(c)
        return out

    def canonical(self, text: str) -> str | None:
        """Canonical text as ``core.values`` writes it; None when not sure or not of the type."""
        if not text.isascii() or len(text) > _LONGEST:
            return None
        s = unicodedata.normalize("NFC", text).strip()
        kind = self.var.type
        if kind == "string":
            return s
        if kind == "integer":
            if not _INTEGER.fullmatch(s):
                return None
            s = s.lstrip("+")
            sign = "-" if s.startswith("-") else ""
            digits = s.lstrip("-").lstrip("0") or "0"
            return "0" if digits == "0" else sign + digits
        if kind == "number":
            if not _NUMBER.fullmatch(s):
                return None
            r = repr(float(s.replace(",", ".")))
            return "0.0" if r == "-0.0" else r
        return None

    def allowed(self, text: str) -> bool | None:
        if not self.usable or not text.strip():
            return None
        canon = self.canonical(text)
        if canon is None:
            return None
        if canon in self.missing:
            return True
        if self.codes and canon not in self.codes:
            return None
        var = self.var
        if var.type in ("integer", "number"):
            x = float(canon)
            if (var.min is not None and x < var.min) or (var.max is not None and x > var.max):
                return None
        return True

    def is_missing_code(self, text: str) -> bool:
        """Whether ``text`` is one of the variable's declared missing codes (``09`` is ``9``)."""
        if not self.var.missing_values or not text.strip():
            return False
        canon = self.canonical(text) if self.missing is not None else None
        if canon is not None:
            return canon in self.missing
        # Dates, other scripts: the rule itself decides (rare, so its cost is fine).
        from core.values import parse

        return parse(self.var, text).canonical in self._parsed_missing

    @functools.cached_property
    def _parsed_missing(self) -> set[str]:
        from core.values import parse

        return {parse(self.var, code).canonical for code in self.var.missing_values}

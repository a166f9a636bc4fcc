"""Rules that set participants aside after screening: ``z:VARIABLE[:THRESHOLD]``, ``blank:SCALE:K``.

A rule names the participants it catches in the verified table; the command
line (``keyproof screen --rule``) and the screening screen's rule dialog set
them aside under the rule's name, which the journal and the report keep
beside each set-aside. Each rule also says itself in a sentence for the
report. The z threshold's default, 3.29, is common practice (a two-sided
p < .001); z is computed from the screened participants' mean and SD (n - 1),
with declared missing codes left out, as everywhere in ``core.screening``.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from .codebook import Codebook, Variable
from .errors import UsageError
from .screening import NUMERIC, numeric_values, participant_ids, scale_scores, short_number
from .screening_stats import Z_THRESHOLD, z_scores

__all__ = ["BlankItemsRule", "ZRule", "parse_rule"]


@dataclass(frozen=True)
class ZRule:
    """Set aside everyone whose |z| on ``variable`` (a variable or a scale's score) is above ``threshold``."""

    variable: str
    threshold: float = Z_THRESHOLD

    @property
    def name(self) -> str:
        """Short name recorded with every set-aside it makes."""
        return f"z>{short_number(self.threshold)}:{self.variable}"

    @property
    def text(self) -> str:
        """The rule in a sentence, for the journal and the report."""
        return (
            f"|z| above {short_number(self.threshold)} on {self.variable} "
            "(z from the mean and SD, n - 1, of the screened participants; missing codes left out)"
        )

    def catches(self, data: pd.DataFrame, codebook: Codebook) -> list[str]:
        """Participants (IDs, in data order) the rule catches.

        >>> from core.codebook import Codebook, Variable
        >>> cb = Codebook((Variable("id", is_id=True), Variable("x", "number")))
        >>> ZRule("x", 1.0).catches(pd.DataFrame({"id": ["a", "b", "c"], "x": [1.0, 2, 9]}), cb)
        ['c']
        """
        if self.variable not in codebook and self.variable in codebook.scales:
            x = scale_scores(data, codebook).scores[self.variable]
        else:
            var = _variable(codebook, self.variable)
            if var.type not in NUMERIC or var.codes:
                raise UsageError(
                    f"rule {self.name}: {var.name} is not a measured number (it is "
                    f"{'coded' if var.codes else var.type}) — pick a numeric variable or a scale."
                )
            x, _ = numeric_values(data[var.name], var)
        hit = (z_scores(x).abs() > self.threshold).fillna(False)
        return participant_ids(data, codebook)[hit].tolist()


@dataclass(frozen=True)
class BlankItemsRule:
    """Set aside everyone with more than ``k`` items of ``scale`` blank."""

    scale: str
    k: int

    @property
    def name(self) -> str:
        """Short name recorded with every set-aside it makes."""
        return f"blank>{self.k}:{self.scale}"

    @property
    def text(self) -> str:
        """The rule in a sentence, for the journal and the report."""
        return (
            f"more than {self.k} items of scale {self.scale} blank "
            "(blank on paper or a declared missing code)"
        )

    def catches(self, data: pd.DataFrame, codebook: Codebook) -> list[str]:
        """Participants (IDs, in data order) the rule catches.

        >>> from core.codebook import Codebook, Variable
        >>> cb = Codebook((Variable("id", is_id=True), Variable("a1", "integer", scale="A"),
        ...                Variable("a2", "integer", scale="A")))
        >>> df = pd.DataFrame({"id": ["p", "q"], "a1": [None, 1], "a2": [None, None]})
        >>> BlankItemsRule("A", 1).catches(df, cb)
        ['p']
        """
        items = codebook.scales.get(self.scale)
        if not items:
            raise UsageError(
                f"rule {self.name}: the codebook has no scale {self.scale!r} — check the name."
            )
        blank = sum(numeric_values(data[v.name], v)[0].isna().astype(int) for v in items)
        return participant_ids(data, codebook)[blank > self.k].tolist()


def parse_rule(text: str) -> ZRule | BlankItemsRule:
    """Read a rule written ``z:VARIABLE[:THRESHOLD]`` or ``blank:SCALE:K``.

    >>> parse_rule("z:age:3")
    ZRule(variable='age', threshold=3.0)
    >>> parse_rule("blank:anx:2")
    BlankItemsRule(scale='anx', k=2)
    """
    parts = [p.strip() for p in text.split(":")]
    try:
        if parts[0] == "z" and len(parts) in (2, 3) and parts[1]:
            return ZRule(parts[1], float(parts[2]) if len(parts) == 3 else Z_THRESHOLD)
        if parts[0] == "blank" and len(parts) == 3 and parts[1]:
            k = int(parts[2])
            if k >= 0:
                return BlankItemsRule(parts[1], k)
    except ValueError:
        pass
    raise UsageError(
        f"rule {text!r} is not understood — write z:VARIABLE[:THRESHOLD] or blank:SCALE:K."
    )


def _variable(codebook: Codebook, name: str) -> Variable:
    if name not in codebook:
        raise UsageError(f"the codebook has no variable or scale {name!r} — check the name.")
    return codebook[name]

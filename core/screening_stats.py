"""The numbers behind screening, on plain arrays: reliability, agreement, shape, outliers.

No codebook here: callers (``core.screening``) clean the values first
(declared missing codes out). Choices, stated once:

- Cronbach's alpha is listwise (rows with every item answered), variances
  with n - 1; alpha-if-deleted and corrected item-total correlations come
  from one covariance matrix of the complete rows.
- Split-half uses odd/even items in paper order with the Spearman-Brown
  correction.
- Skewness and kurtosis are the adjusted Fisher-Pearson G1 and the adjusted
  excess kurtosis G2 (what common statistics packages print).
- z uses the n - 1 SD; Tukey's fences use quartiles by linear interpolation
  between order statistics (numpy's default, Hyndman-Fan type 7).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

Z_THRESHOLD = 3.29
"""Default |z| for an outlier candidate (two-sided p < .001; common practice)."""
TUKEY_K = 1.5
"""Tukey's fences: this many IQRs beyond the quartiles."""

# ---------------------------------------------------------------- reliability


@dataclass(frozen=True)
class Alpha:
    """Cronbach's alpha of a set of items, listwise."""

    alpha: float
    """NaN when fewer than 2 items or 2 complete rows, or no variance in the total."""
    n_used: int
    """Rows with every item answered (the rows alpha is computed on)."""
    k: int
    """Number of items."""


def cronbach_alpha(items: pd.DataFrame) -> Alpha:
    """Cronbach's alpha, listwise: k/(k-1) x (1 - sum of item variances / variance of the total).

    >>> cronbach_alpha(pd.DataFrame({"a": [1, 2, 3, 4], "b": [1, 2, 3, 4]})).alpha
    1.0
    """
    complete = items.astype("float64").dropna()
    k, n = complete.shape[1], len(complete)
    if k < 2 or n < 2:
        return Alpha(math.nan, n, k)
    total_var = complete.sum(axis=1).var(ddof=1)
    if not total_var > 0:
        return Alpha(math.nan, n, k)
    alpha = k / (k - 1) * (1 - complete.var(ddof=1).sum() / total_var)
    return Alpha(float(alpha), n, k)


def item_analysis(items: pd.DataFrame) -> pd.DataFrame:
    """Per item: alpha if deleted, corrected item-total correlation, negative flag (listwise).

    The corrected item-total correlation is Pearson's r between the item and
    the sum of the *other* items; a negative one usually means a missed
    reverse key.

    >>> t = item_analysis(pd.DataFrame({"a": [1, 2, 3, 4], "b": [1, 2, 4, 3], "c": [4, 3, 2, 1]}))
    >>> t.loc[t["item"] == "c", "negative"].item()
    True
    """
    complete = items.astype("float64").dropna()
    names = list(complete.columns)
    k, n = len(names), len(complete)
    alpha_del = np.full(k, np.nan)
    r = np.full(k, np.nan)
    if n >= 2 and k >= 2:
        # One covariance matrix serves every item: the rest's variance is the
        # total minus the item's row and column, so no per-item refit.
        cov = np.atleast_2d(np.cov(complete.to_numpy(), rowvar=False, ddof=1))
        item_var = np.diag(cov)
        row_sum = cov.sum(axis=1)
        rest_var = cov.sum() - 2 * row_sum + item_var
        rest_items_var = item_var.sum() - item_var
        with np.errstate(divide="ignore", invalid="ignore"):
            if k >= 3:
                alpha_del = (k - 1) / (k - 2) * (1 - rest_items_var / rest_var)
                alpha_del[~(rest_var > 0)] = np.nan
            r = (row_sum - item_var) / np.sqrt(item_var * rest_var)
            r[~((item_var > 0) & (rest_var > 0))] = np.nan
    return pd.DataFrame(
        {"item": names, "alpha_if_deleted": alpha_del, "item_total_r": r, "negative": r < 0},
        columns=["item", "alpha_if_deleted", "item_total_r", "negative"],
    )


def _pearson(a: pd.Series, b: pd.Series) -> float:
    if len(a) < 2 or a.std(ddof=1) == 0 or b.std(ddof=1) == 0:
        return math.nan
    return float(np.corrcoef(a.to_numpy(float), b.to_numpy(float))[0, 1])


def spearman_brown(r: float, factor: float = 2.0) -> float:
    """Reliability of a test ``factor`` times as long, from reliability (or half-test r) ``r``.

    >>> round(spearman_brown(0.6), 2)
    0.75
    """
    return factor * r / (1 + (factor - 1) * r)


@dataclass(frozen=True)
class SplitHalf:
    """Odd/even split-half reliability."""

    r_halves: float
    """Pearson's r between the sums of odd and even items (paper order); NaN if undefined."""
    spearman_brown: float
    """``r_halves`` corrected to the full length (Spearman-Brown, factor 2)."""
    n_used: int
    """Rows with every item answered."""


def split_half(items: pd.DataFrame) -> SplitHalf:
    """Split items into 1st, 3rd, ... and 2nd, 4th, ...; correlate the half sums.

    >>> split_half(pd.DataFrame({"a": [1, 2, 3], "b": [2, 3, 4]})).spearman_brown
    1.0
    """
    complete = items.astype("float64").dropna()
    if complete.shape[1] < 2:
        return SplitHalf(math.nan, math.nan, len(complete))
    odd = complete.iloc[:, 0::2].sum(axis=1)
    even = complete.iloc[:, 1::2].sum(axis=1)
    r = _pearson(odd, even)
    return SplitHalf(r, spearman_brown(r) if r == r else math.nan, len(complete))


@dataclass(frozen=True)
class Kappa:
    """Cohen's kappa between two codings of the same cases."""

    kappa: float
    """(po - pe) / (1 - pe); NaN when there are no pairs or chance agreement is 1."""
    agreement: float
    """Observed share of pairs that agree (po), 0..1; NaN without pairs."""
    n: int
    """Pairs where both codings have a value."""


def cohen_kappa(a: pd.Series, b: pd.Series) -> Kappa:
    """Cohen's (unweighted) kappa between two aligned series; pairs with a missing side left out.

    >>> cohen_kappa(pd.Series([1, 1, 2, 2]), pd.Series([1, 1, 2, 1])).agreement
    0.75
    """
    a = pd.Series(a).reset_index(drop=True)
    b = pd.Series(b).reset_index(drop=True)
    both = a.notna() & b.notna()
    a, b = _same_kind(a[both]), _same_kind(b[both])
    n = len(a)
    if n == 0:
        return Kappa(math.nan, math.nan, 0)
    po = float((a == b).mean())
    pa, pb = a.value_counts(normalize=True), b.value_counts(normalize=True)
    pe = float((pa * pb.reindex(pa.index, fill_value=0)).sum())
    kappa = (po - pe) / (1 - pe) if pe < 1 else math.nan
    return Kappa(float(kappa), po, n)


def _same_kind(s: pd.Series) -> pd.Series:
    # Numbers compare by value (1 == 1.0 == "01"); anything else by its text.
    x = pd.to_numeric(s, errors="coerce")
    return x.astype("float64").astype(str) if x.notna().all() else s.astype(str)


@dataclass(frozen=True)
class Fences:
    """Tukey's fences (quartiles by linear interpolation, type 7)."""

    q1: float
    q3: float
    low: float
    """q1 - k x IQR."""
    high: float
    """q3 + k x IQR."""


def tukey_fences(x: pd.Series, k: float = TUKEY_K) -> Fences:
    """Quartiles (numpy's default linear method) and the fences k x IQR beyond them.

    >>> tukey_fences(pd.Series([1.0, 2, 3, 4, 5])).high
    7.0
    """
    values = pd.Series(x, dtype="float64").dropna().to_numpy()
    if len(values) == 0:
        return Fences(math.nan, math.nan, math.nan, math.nan)
    q1, q3 = (float(q) for q in np.percentile(values, [25, 75]))
    return Fences(q1, q3, q1 - k * (q3 - q1), q3 + k * (q3 - q1))


def z_scores(x: pd.Series) -> pd.Series:
    """(x - mean) / SD with SD on n - 1; NaN stays NaN.

    >>> z_scores(pd.Series([1.0, 2.0, 3.0])).tolist()
    [-1.0, 0.0, 1.0]
    """
    x = pd.Series(x, dtype="float64")
    sd = x.std(ddof=1)
    if not sd > 0:
        return pd.Series(math.nan, index=x.index)
    return (x - x.mean()) / sd


def skewness_g1(x: pd.Series) -> float:
    """Adjusted Fisher-Pearson skewness G1 = g1 x sqrt(n(n-1)) / (n-2); NaN for n < 3.

    >>> skewness_g1(pd.Series([1.0, 2.0, 3.0]))
    0.0
    """
    v = pd.Series(x, dtype="float64").dropna().to_numpy()
    n = len(v)
    if n < 3:
        return math.nan
    d = v - v.mean()
    m2, m3 = (d**2).mean(), (d**3).mean()
    if m2 == 0:
        return math.nan
    return float(m3 / m2**1.5 * math.sqrt(n * (n - 1)) / (n - 2))


def kurtosis_g2(x: pd.Series) -> float:
    """Adjusted excess kurtosis G2 = ((n+1) g2 + 6)(n-1) / ((n-2)(n-3)); NaN for n < 4.

    >>> round(kurtosis_g2(pd.Series([1.0, 2, 3, 4])), 2)
    -1.2
    """
    v = pd.Series(x, dtype="float64").dropna().to_numpy()
    n = len(v)
    if n < 4:
        return math.nan
    d = v - v.mean()
    m2, m4 = (d**2).mean(), (d**4).mean()
    if m2 == 0:
        return math.nan
    g2 = m4 / m2**2 - 3
    return float(((n + 1) * g2 + 6) * (n - 1) / ((n - 2) * (n - 3)))

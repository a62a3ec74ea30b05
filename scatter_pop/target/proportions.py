"""Binomial proportions with confidence intervals (pure functions).

A count ``k`` of ``n`` trials (systems, survivors) becomes a :class:`Proportion`
with a two-sided interval from :func:`scipy.stats.binomtest` — the exact
Clopper–Pearson interval (Clopper & Pearson 1934, Biometrika 26, 404) or the
Wilson score interval (Wilson 1927, JASA 22, 209).  When ``k = 0`` the
exact *one-sided* upper limit is also given, 1 − (1 − C)^(1/n) (for C = 0.95:
1 − 0.05^(1/n)), together with its familiar approximation, the "rule of
three" 3/n (Hanley & Lippman-Hand 1983, JAMA 249, 1743).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import scipy.stats

__all__ = ["INTERVAL_METHODS", "Proportion", "proportion", "upper_limit"]

#: interval methods accepted (names as in scipy.stats.BinomTestResult.proportion_ci)
INTERVAL_METHODS = ("exact", "wilson")

_METHOD_WORDS = {"exact": "Clopper-Pearson", "wilson": "Wilson"}


@dataclass(frozen=True)
class Proportion:
    """``k`` successes out of ``n`` with a confidence interval.

    Attributes
    ----------
    k, n : int
        Successes and trials.
    fraction : float
        k / n (NaN when n = 0).
    low, high : float
        Two-sided interval at ``confidence`` (NaN when n = 0).
    confidence : float
        Confidence level of the interval, e.g. 0.95.
    method : str
        "exact" (Clopper–Pearson) or "wilson".
    upper_limit : float or None
        For k = 0: the exact one-sided upper limit at ``confidence``; else None.
    rule_of_three : float or None
        For k = 0 and confidence 0.95: 3/n, the approximation of ``upper_limit``.
    """

    k: int
    n: int
    fraction: float
    low: float
    high: float
    confidence: float
    method: str
    upper_limit: float | None = None
    rule_of_three: float | None = None

    @property
    def method_name(self) -> str:
        """Name of the interval for printed text ("Clopper-Pearson" or "Wilson")."""
        return _METHOD_WORDS[self.method]


def upper_limit(n: int, confidence: float = 0.95) -> float:
    """Exact one-sided upper limit on a rate after 0 successes in ``n`` trials.

    Parameters
    ----------
    n : int
        Trials (>= 1).
    confidence : float
        One-sided confidence level (0 < C < 1).

    Returns
    -------
    float
        The p with (1 − p)^n = 1 − C, i.e. 1 − (1 − C)^(1/n), computed by
        :func:`scipy.stats.binomtest` (``alternative="less"``).
    """
    if n < 1:
        raise ValueError(f"n must be >= 1, got {n}")
    return float(
        scipy.stats.binomtest(0, n, alternative="less").proportion_ci(confidence_level=confidence, method="exact").high
    )


def proportion(k: int, n: int, *, confidence: float = 0.95, method: str = "exact") -> Proportion:
    """The proportion k/n with its binomial confidence interval.

    Parameters
    ----------
    k, n : int
        Successes and trials (0 <= k <= n).
    confidence : float
        Two-sided confidence level of the interval.
    method : {"exact", "wilson"}
        Clopper–Pearson or Wilson score interval.
    """
    if method not in INTERVAL_METHODS:
        raise ValueError(f"method must be one of {INTERVAL_METHODS}, got {method!r}")
    k, n = int(k), int(n)
    if not 0 <= k <= max(n, 0):
        raise ValueError(f"need 0 <= k <= n, got k={k}, n={n}")
    if n == 0:
        return Proportion(k, n, math.nan, math.nan, math.nan, confidence, method)
    ci = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=confidence, method=method)
    ul = r3 = None
    if k == 0:
        ul = upper_limit(n, confidence)
        r3 = 3.0 / n if abs(confidence - 0.95) < 1e-12 else None
    return Proportion(k, n, k / n, float(ci.low), float(ci.high), confidence, method, ul, r3)

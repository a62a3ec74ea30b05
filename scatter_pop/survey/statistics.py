"""Two-sample and one-sample tests of eccentricity distributions (pure functions).

Numbers in, numbers out: nothing here reads files or datasets.  The tests
are scipy's; this module fixes the choices that matter for honest p-values:

* Kolmogorov–Smirnov (:func:`scipy.stats.ks_2samp`, ``method="auto"``: exact
  for small samples, asymptotic otherwise — never clipped);
* one-sample KS and Anderson–Darling against a fully specified reference
  distribution, through the probability integral transform (the statistic
  is then distribution-free; the AD p-value comes from
  :func:`scipy.stats.goodness_of_fit` on the uniform distribution);
* k-sample Anderson–Darling (Scholz & Stephens 1987, JASA 82, 918) with the
  midrank variant (ties allowed) and a *permutation* p-value
  (:class:`scipy.stats.PermutationMethod`), because scipy's interpolated
  p-value is floored at 0.001 and capped at 0.25.  A permutation p-value has
  resolution ``1 / (permutations + 1)``: it is never below that.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.stats

__all__ = [
    "Spread",
    "TwoSampleResult",
    "two_sample",
    "ks_critical_coefficient",
    "ks_critical_value",
    "ad_ksamp",
    "ad_sigma",
    "ADResult",
    "REFERENCE_DISTRIBUTIONS",
    "reference_distribution",
    "OneSampleResult",
    "one_sample",
    "fit_beta",
]


@dataclass(frozen=True)
class Spread:
    """Median and 16th / 84th percentiles of the finite values of a sample, with their number.

    The 16–84 % range is the central 68 % (±1σ for a normal law; common practice).  NaN and
    infinite values are left out; with none left every field is NaN and ``n`` is 0.
    """

    median: float
    p16: float
    p84: float
    n: int

    @classmethod
    def of(cls, values) -> Spread:
        v = np.asarray(values, dtype=float)
        v = v[np.isfinite(v)]
        if v.size == 0:
            return cls(math.nan, math.nan, math.nan, 0)
        p16, med, p84 = np.percentile(v, [16.0, 50.0, 84.0])
        return cls(median=float(med), p16=float(p16), p84=float(p84), n=int(v.size))


@dataclass(frozen=True)
class TwoSampleResult:
    """KS and Anderson–Darling comparison of two samples.

    Attributes
    ----------
    ks_statistic : float
        Two-sample KS distance D (largest gap between the empirical CDFs).
    ks_pvalue : float
        Its p-value (exact for small samples, asymptotic otherwise).
    ad_statistic : float
        Standardised k-sample Anderson–Darling statistic T (Scholz & Stephens
        1987, eq. 7; scipy's ``anderson_ksamp`` statistic, midrank variant).
    ad_pvalue : float
        Permutation p-value of T; never below ``1 / (permutations + 1)``.
    n_x, n_y : int
        Sample sizes (non-finite values dropped).
    permutations : int
        Permutations behind ``ad_pvalue``.
    """

    ks_statistic: float
    ks_pvalue: float
    ad_statistic: float
    ad_pvalue: float
    n_x: int
    n_y: int
    permutations: int = 0


def _finite(x, name: str) -> np.ndarray:
    a = np.asarray(x, dtype=float).ravel()
    a = a[np.isfinite(a)]
    if a.size < 2:
        raise ValueError(f"{name} needs at least 2 finite values, got {a.size}")
    return a


def two_sample(x, y, *, permutations: int = 2000, rng=None) -> TwoSampleResult:
    """Compare two samples with KS and k-sample Anderson–Darling.

    Parameters
    ----------
    x, y : array_like
        The two samples (e.g. simulated and observed eccentricities,
        dimensionless).  NaN and infinite entries are dropped.
    permutations : int
        Random permutations for the Anderson–Darling p-value (>= 1).
    rng : numpy.random.Generator, int or None
        Source of the permutations; pass a seeded generator for
        reproducible p-values.

    Returns
    -------
    TwoSampleResult
    """
    if int(permutations) < 1:
        raise ValueError(f"permutations must be >= 1, got {permutations}")
    x = _finite(x, "x")
    y = _finite(y, "y")
    rng = np.random.default_rng(rng)
    ks = scipy.stats.ks_2samp(x, y, method="auto")
    if np.unique(np.concatenate([x, y])).size < 2:
        # every value equal: no evidence against the null hypothesis
        ad_stat, ad_p = 0.0, 1.0
    else:
        ad_stat, ad_p = _ad_permutation(x, y, int(permutations), rng)
    return TwoSampleResult(
        ks_statistic=float(ks.statistic),
        ks_pvalue=float(ks.pvalue),
        ad_statistic=ad_stat,
        ad_pvalue=ad_p,
        n_x=int(x.size),
        n_y=int(y.size),
        permutations=int(permutations),
    )


def _ad_permutation(x: np.ndarray, y: np.ndarray, permutations: int, rng) -> tuple[float, float]:
    """Midrank two-sample AD: standardised T and its permutation p-value.

    The same test as ``scipy.stats.anderson_ksamp([x, y], variant="midrank",
    method=PermutationMethod(...))`` — same statistic, same permutations drawn
    by :func:`scipy.stats.permutation_test`, hence the same p-value — but with
    a vectorised statistic: A²_akN (Scholz & Stephens 1987, eq. 7) depends only
    on which pooled tie-groups each sample holds, so the permutations act on
    integer group codes and one ``bincount`` per batch replaces a sort and a
    search per permutation.  For two samples both terms of eq. 7 share the
    numerator (N M_a1j − n_1 B_aj)², so A² = (N−1)/N (1/n_1 + 1/n_2)
    Σ_j (l_j/N) (N M_a1j − n_1 B_aj)² / (B_aj (N − B_aj) − N l_j / 4).
    """
    n1, n2 = x.size, y.size
    n = n1 + n2
    _, codes, tie = np.unique(np.concatenate([x, y]), return_inverse=True, return_counts=True)
    groups = tie.size
    b_mid = np.cumsum(tie) - tie / 2.0  # B_aj: pooled below z_j plus half the ties
    denom = b_mid * (n - b_mid) - n * tie / 4.0
    weight = np.divide(tie / n, denom, out=np.zeros(groups), where=denom > 0)
    factor = (n - 1.0) / n * (1.0 / n1 + 1.0 / n2)

    def a2(cx, cy, axis=-1):
        cx = np.moveaxis(np.asarray(cx), axis, -1)
        shape = cx.shape[:-1]
        flat = cx.reshape(-1, cx.shape[-1])
        rows = flat.shape[0]
        offset = flat + groups * np.arange(rows)[:, None]
        f = np.bincount(offset.ravel(), minlength=rows * groups).reshape(rows, groups)
        m_mid = np.cumsum(f, axis=1) - f / 2.0  # M_a1j
        return (factor * np.sum(weight * (n * m_mid - n1 * b_mid) ** 2, axis=1)).reshape(shape)

    res = scipy.stats.permutation_test(
        (codes[:n1], codes[n1:]),
        a2,
        permutation_type="independent",
        vectorized=True,
        n_resamples=permutations,
        batch=max(1, 2_000_000 // n),
        alternative="greater",
        rng=rng,
    )
    t = (float(res.statistic) - 1.0) / ad_sigma([n1, n2])
    return t, float(res.pvalue)


def ks_critical_coefficient(alpha: float) -> float:
    """Asymptotic two-sample KS coefficient c(α) = √(−½ ln(α/2)).

    Parameters
    ----------
    alpha : float
        Significance level, 0 < α < 1.
    """
    if not 0.0 < alpha < 1.0:
        raise ValueError(f"alpha must lie in (0, 1), got {alpha}")
    return math.sqrt(-0.5 * math.log(alpha / 2.0))


def ks_critical_value(alpha: float, n: int, m: int) -> float:
    """Asymptotic two-sample KS critical distance D_α = c(α) √((n+m)/(nm)).

    Parameters
    ----------
    alpha : float
        Significance level, 0 < α < 1.
    n, m : int
        Sample sizes (>= 1).
    """
    if n < 1 or m < 1:
        raise ValueError(f"sample sizes must be >= 1, got {n}, {m}")
    return ks_critical_coefficient(alpha) * math.sqrt((n + m) / (n * m))


@dataclass(frozen=True)
class ADResult:
    """k-sample Anderson–Darling statistic in both forms.

    Attributes
    ----------
    a2 : float
        Unstandardised A²_kN (``variant="right"``) or A²_akN (``"midrank"``).
    t : float
        Standardised T = (A² − (k − 1)) / σ_N.
    sigma : float
        σ_N, the standard deviation of A² under the null hypothesis.
    """

    a2: float
    t: float
    sigma: float


def ad_sigma(sizes: list[int]) -> float:
    """σ_N of the k-sample A² under H0 (Scholz & Stephens 1987, eq. 4)."""
    k = len(sizes)
    n = sum(sizes)
    big_h = sum(1.0 / s for s in sizes)
    inv = 1.0 / np.arange(1, n, dtype=float)  # 1/i, i = 1..N-1
    h = inv.sum()
    # g = sum_{i=1}^{N-2} sum_{j=i+1}^{N-1} 1 / ((N - i) j)
    tail = np.cumsum(inv[::-1])[::-1]  # tail[i-1] = sum_{j>=i} 1/j
    i = np.arange(1, n - 1)
    g = float(np.sum(tail[i] / (n - i)))
    a = (4 * g - 6) * (k - 1) + (10 - 6 * g) * big_h
    b = (2 * g - 4) * k**2 + 8 * h * k + (2 * g - 14 * h - 4) * big_h - 8 * h + 4 * g - 6
    c = (6 * h + 2 * g - 2) * k**2 + (4 * h - 4 * g + 6) * k + (2 * h - 6) * big_h + 4 * h
    d = (2 * h + 6) * k**2 - 4 * h * k
    var = (a * n**3 + b * n**2 + c * n + d) / ((n - 1.0) * (n - 2.0) * (n - 3.0))
    return math.sqrt(var)


def ad_ksamp(samples, *, variant: str = "midrank") -> ADResult:
    """k-sample Anderson–Darling statistic, unstandardised and standardised.

    Parameters
    ----------
    samples : sequence of array_like
        k >= 2 samples (dimensionless).
    variant : {"midrank", "right"}
        ``"midrank"``: A²_akN, valid with ties; ``"right"``: A²_kN
        (Scholz & Stephens 1987, eqs. 6 and 7).
    """
    if variant not in ("midrank", "right"):
        raise ValueError(f"variant must be 'midrank' or 'right', got {variant!r}")
    arrays = [np.asarray(s, dtype=float).ravel() for s in samples]
    with warnings.catch_warnings():
        # only the statistic is used here; scipy warns about its interpolated p-value
        warnings.filterwarnings("ignore", message="p-value (floored|capped)", category=UserWarning)
        t = float(scipy.stats.anderson_ksamp(arrays, variant=variant).statistic)
    sigma = ad_sigma([a.size for a in arrays])
    return ADResult(a2=t * sigma + (len(arrays) - 1), t=t, sigma=sigma)


# --------------------------------------------------------------------------- one sample
_RAYLEIGH_SIGMA = 0.3

#: name -> description with its source (see :func:`reference_distribution`)
REFERENCE_DISTRIBUTIONS: dict[str, str] = {
    "beta_kipping2013": "Beta(a=0.867, b=3.03), Kipping 2013, MNRAS 434, L51",
    "rayleigh_jt2008": "Rayleigh(sigma=0.3) renormalised on [0, 1), Juric & Tremaine 2008, ApJ 686, 603",
}


def reference_distribution(name: str):
    """Frozen scipy distribution of a published eccentricity law.

    Parameters
    ----------
    name : str
        A key of :data:`REFERENCE_DISTRIBUTIONS`.

    Notes
    -----
    The Rayleigh law dn ∝ e exp[−½(e/σ)²] de is truncated to [0, 1) and
    renormalised; it is a Weibull law with shape 2 and scale σ√2, so scipy's
    ``truncweibull_min`` represents it exactly.
    """
    if name == "beta_kipping2013":
        return scipy.stats.beta(0.867, 3.03)
    if name == "rayleigh_jt2008":
        scale = _RAYLEIGH_SIGMA * math.sqrt(2.0)
        return scipy.stats.truncweibull_min(2.0, 0.0, 1.0 / scale, scale=scale)
    raise ValueError(f"reference distribution {name!r} unknown; allowed: {', '.join(REFERENCE_DISTRIBUTIONS)}")


@dataclass(frozen=True)
class OneSampleResult:
    """KS and Anderson–Darling test of one sample against a reference law.

    Attributes
    ----------
    reference : str
        Name of the reference distribution.
    ks_statistic, ks_pvalue : float
        One-sample KS distance and its exact p-value.
    ad_statistic, ad_pvalue : float
        One-sample A² and its Monte-Carlo p-value (never below
        ``1 / (samples + 1)``); A² = inf and p = 0 when a value lies where the
        law's CDF is 0 or 1 (e.g. an exact e = 0), which the law cannot produce.
    n : int
        Sample size.
    """

    reference: str
    ks_statistic: float
    ks_pvalue: float
    ad_statistic: float
    ad_pvalue: float
    n: int


def one_sample(x, reference: str, *, samples: int = 2000, rng=None) -> OneSampleResult:
    """Test a sample of eccentricities against a published distribution.

    Parameters
    ----------
    x : array_like
        Eccentricities (dimensionless, in [0, 1)); non-finite values dropped.
    reference : str
        A key of :data:`REFERENCE_DISTRIBUTIONS`.
    samples : int
        Monte-Carlo samples of the null distribution of A².
    rng : numpy.random.Generator, int or None
    """
    dist = reference_distribution(reference)
    x = _finite(x, "x")
    u = dist.cdf(x)
    ks = scipy.stats.kstest(u, "uniform", method="auto")
    if np.any((u <= 0.0) | (u >= 1.0)):
        # a value at F = 0 or 1 (e.g. an exact e = 0; both laws have F(0) = 0): the A^2
        # integrand diverges, A^2 is infinite and the sample is impossible under the law
        ad_stat, ad_p = math.inf, 0.0
    else:
        ad = scipy.stats.goodness_of_fit(
            scipy.stats.uniform,
            u,
            known_params={"loc": 0.0, "scale": 1.0},
            statistic="ad",
            n_mc_samples=int(samples),
            rng=np.random.default_rng(rng),
        )
        ad_stat, ad_p = float(ad.statistic), float(ad.pvalue)
    return OneSampleResult(
        reference=reference,
        ks_statistic=float(ks.statistic),
        ks_pvalue=float(ks.pvalue),
        ad_statistic=ad_stat,
        ad_pvalue=ad_p,
        n=int(x.size),
    )


def fit_beta(x) -> tuple[float, float]:
    """Maximum-likelihood Beta(a, b) on [0, 1] (``scipy.stats.beta.fit``).

    Parameters
    ----------
    x : array_like
        Eccentricities strictly inside (0, 1) (the Beta log-density is
        infinite at e = 0, so exact zeros must be removed first).

    Returns
    -------
    (a, b) : tuple of float
    """
    x = _finite(x, "x")
    if np.any((x <= 0.0) | (x >= 1.0)):
        raise ValueError("fit_beta needs values strictly inside (0, 1); remove exact zeros first")
    a, b, _, _ = scipy.stats.beta.fit(x, floc=0.0, fscale=1.0)
    return float(a), float(b)

"""How much a two-sample p-value moves with the data: uncertainties and finite samples.

Two resamplings around :func:`scatter_pop.survey.statistics.two_sample`:

* :func:`observed_uncertainty_spread` redraws every observed eccentricity
  from its (possibly asymmetric) error bar — a split normal truncated to
  [0, 1) — and repeats the comparison;
* :func:`simulated_bootstrap_spread` resamples the finite simulated sample
  with replacement and repeats the comparison.

Both report the median and the 16–84 % range of D, T and both p-values.
Each repetition uses its own child generator spawned from ``rng``, so the
result is reproducible from one seed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.special

from scatter_pop.survey.statistics import Spread, TwoSampleResult, two_sample

__all__ = [
    "Spread",
    "ResampledComparison",
    "split_normal_truncated",
    "observed_uncertainty_spread",
    "simulated_bootstrap_spread",
]

_E_MAX = float(np.nextafter(1.0, 0.0))  # largest eccentricity below 1


@dataclass(frozen=True)
class ResampledComparison:
    """Spread of a two-sample comparison over resamplings.

    Attributes
    ----------
    kind : str
        ``"observed_uncertainty"`` or ``"simulated_bootstrap"``.
    draws : int
        Number of resamplings.
    ks_statistic, ks_pvalue, ad_statistic, ad_pvalue : Spread
    n_varied : int
        Entries that were varied (observed rows with error bars, or the
        simulated sample size for the bootstrap).
    """

    kind: str
    draws: int
    ks_statistic: Spread
    ks_pvalue: Spread
    ad_statistic: Spread
    ad_pvalue: Spread
    n_varied: int


def _summarise(kind: str, results: list[TwoSampleResult], n_varied: int) -> ResampledComparison:
    return ResampledComparison(
        kind=kind,
        draws=len(results),
        ks_statistic=Spread.of([r.ks_statistic for r in results]),
        ks_pvalue=Spread.of([r.ks_pvalue for r in results]),
        ad_statistic=Spread.of([r.ad_statistic for r in results]),
        ad_pvalue=Spread.of([r.ad_pvalue for r in results]),
        n_varied=int(n_varied),
    )


def split_normal_truncated(mode, sigma_lo, sigma_hi, rng, lower: float = 0.0, upper: float = 1.0) -> np.ndarray:
    """Draw from split normals truncated to [lower, upper), by inverse CDF.

    The split normal has its mode at ``mode``, a half-Gaussian of width
    ``sigma_lo`` below it and one of width ``sigma_hi`` above it (the usual
    reading of an asymmetric error bar, common practice).  Truncation is
    exact: the uniform variate is drawn between the CDF values at the bounds.

    Parameters
    ----------
    mode : array_like
        Catalogue values (here eccentricities, dimensionless).
    sigma_lo, sigma_hi : array_like
        Lower and upper 1σ errors (>= 0, same units as ``mode``); entries
        where both are zero or not finite are returned unchanged.
    rng : numpy.random.Generator
    lower, upper : float
        Truncation bounds; results lie in [lower, upper).
    """
    mode, slo, shi = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (mode, sigma_lo, sigma_hi)))
    slo = np.where(np.isfinite(slo), np.abs(slo), 0.0)
    shi = np.where(np.isfinite(shi), np.abs(shi), 0.0)
    total = slo + shi
    varied = total > 0.0
    w_lo = np.divide(slo, total, out=np.zeros_like(total), where=varied)

    def cdf(x):
        below = np.divide(x - mode, slo, out=np.full_like(x, -np.inf), where=slo > 0)
        above = np.divide(x - mode, shi, out=np.full_like(x, np.inf), where=shi > 0)
        return np.where(
            x < mode,
            2.0 * w_lo * scipy.special.ndtr(below),
            w_lo + 2.0 * (1.0 - w_lo) * (scipy.special.ndtr(above) - 0.5),
        )

    f_lo = cdf(np.full_like(mode, lower))
    f_hi = cdf(np.full_like(mode, upper))
    u = f_lo + rng.random(mode.shape) * (f_hi - f_lo)
    left = u < w_lo
    with np.errstate(divide="ignore", invalid="ignore"):
        z_lo = scipy.special.ndtri(u / (2.0 * w_lo))
        z_hi = scipy.special.ndtri(0.5 + (u - w_lo) / (2.0 * (1.0 - w_lo)))
    out = np.where(left, mode + slo * z_lo, mode + shi * z_hi)
    out = np.where(varied, np.clip(out, lower, np.nextafter(upper, lower)), mode)
    return out


def _children(rng, n: int):
    return np.random.default_rng(rng).spawn(n)


def observed_uncertainty_spread(
    simulated, observed, err_lo, err_hi, *, draws: int = 200, permutations: int = 200, rng=None
) -> ResampledComparison:
    """Repeat the comparison with observed eccentricities redrawn from their errors.

    Parameters
    ----------
    simulated : array_like
        Simulated eccentricities (dimensionless).
    observed : array_like
        Observed catalogue eccentricities (dimensionless, in [0, 1)).
    err_lo, err_hi : array_like
        Their lower and upper 1σ errors (NaN where unknown: kept fixed).
    draws : int
        Monte-Carlo realisations.
    permutations : int
        Anderson–Darling permutations per realisation.
    rng : numpy.random.Generator, int or None
    """
    observed = np.asarray(observed, dtype=float)
    lo = np.asarray(err_lo, dtype=float)
    hi = np.asarray(err_hi, dtype=float)
    n_varied = int(np.count_nonzero((np.nan_to_num(lo) + np.nan_to_num(hi)) > 0))
    results = []
    for child in _children(rng, int(draws)):
        e = split_normal_truncated(observed, lo, hi, child, 0.0, 1.0)
        results.append(two_sample(simulated, e, permutations=permutations, rng=child))
    return _summarise("observed_uncertainty", results, n_varied)


def simulated_bootstrap_spread(
    simulated, observed, *, draws: int = 200, permutations: int = 200, rng=None
) -> ResampledComparison:
    """Repeat the comparison on bootstrap resamples of the simulated sample.

    Parameters
    ----------
    simulated : array_like
        Simulated eccentricities (dimensionless); resampled with replacement
        at its own size.
    observed : array_like
        Observed eccentricities (dimensionless), kept as they are.
    draws : int
        Bootstrap resamples.
    permutations : int
        Anderson–Darling permutations per resample.
    rng : numpy.random.Generator, int or None
    """
    simulated = np.asarray(simulated, dtype=float)
    simulated = simulated[np.isfinite(simulated)]
    results = []
    for child in _children(rng, int(draws)):
        resample = child.choice(simulated, size=simulated.size, replace=True)
        results.append(two_sample(resample, observed, permutations=permutations, rng=child))
    return _summarise("simulated_bootstrap", results, simulated.size)

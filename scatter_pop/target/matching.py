"""Which simulated planets are like the target: a hard cut and a soft weight (pure).

Hard cut (:func:`hard_match`): final e >= the e threshold, final a inside the
a window, projected m sin i inside the m sin i window (:class:`Windows`),
with sin i drawn once per planet for an isotropic line of sight.

Soft weight (:func:`soft_weight`), using the target's measurement
uncertainties instead of windows; for a planet with true elements
(e, a, m) it is the product of

* P(e_true <= e) = Φ((e − ê)/σ_e): the probability that the target's true
  eccentricity (posterior N(ê, σ_e²) under a flat prior) is at most the
  simulated one — the smooth version of "e at or above the target's";
* exp[−½ ((a − â)/σ_a)²]: the Gaussian likelihood of the measured a,
  relative to a perfect match;
* E_i{exp[−½ ((m sin i − m̂)/σ_m)²]}: the same for m sin i, averaged over an
  isotropic orientation (cos i uniform), computed by quadrature — no random
  draws (for a target whose mass is a true mass, the Gaussian of m itself).

Each factor lies in [0, 1]; 1 is a perfect match.  A zero uncertainty turns
its factor back into the hard window (for m sin i: the probability that
m sin i falls inside it).  Isotropic orientation: P(sin i <= s) = 1 − √(1 − s²)
(common practice for RV minimum masses).
"""

from __future__ import annotations

import numpy as np
import scipy.special

from scatter_pop.target.planet import Target, Windows

__all__ = ["hard_match", "soft_weight", "sin_i_cdf", "msini_kernel", "msini_window_probability"]

_NODES = 2048  # equal-probability nodes of the orientation average
_CHUNK = 2048  # planets per block of the quadrature


def sin_i_cdf(s):
    """P(sin i <= s) for an isotropic orientation: 1 − √(1 − s²), s clipped to [0, 1]."""
    s = np.clip(np.asarray(s, dtype=float), 0.0, 1.0)
    return 1.0 - np.sqrt(1.0 - s * s)


def _sin_i_nodes(n: int = _NODES) -> np.ndarray:
    # midpoints of n equal-probability intervals of sin i: s = F^-1(u), u = (k + 1/2)/n
    u = (np.arange(n) + 0.5) / n
    return np.sqrt(1.0 - (1.0 - u) ** 2)


def msini_kernel(m_true, m_obs: float, sigma: float):
    """Orientation-averaged Gaussian likelihood of a measured m sin i.

    Parameters
    ----------
    m_true : array_like
        True planet masses [M_sun].
    m_obs : float
        Measured m sin i [M_sun].
    sigma : float
        Its 1σ uncertainty [M_sun] (> 0).

    Returns
    -------
    numpy.ndarray
        E over isotropic sin i of exp[−½((m sin i − m_obs)/σ)²], in [0, 1].
    """
    m = np.asarray(m_true, dtype=float).ravel()
    s = _sin_i_nodes()
    out = np.zeros(m.size)
    for start in range(0, m.size, _CHUNK):
        block = m[start : start + _CHUNK, None]
        z = (block * s[None, :] - m_obs) / sigma
        out[start : start + _CHUNK] = np.exp(-0.5 * z * z).mean(axis=1)
    out[~np.isfinite(m)] = 0.0
    return out.reshape(np.shape(m_true))


def msini_window_probability(m_true, low: float, high: float):
    """P(low <= m sin i <= high) for an isotropic orientation.

    Parameters
    ----------
    m_true : array_like
        True masses [M_sun].
    low, high : float
        Window [M_sun].
    """
    m = np.asarray(m_true, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        p = sin_i_cdf(high / m) - sin_i_cdf(low / m)
    return np.where(np.isfinite(p) & (m > 0), p, 0.0)


def hard_match(e, a, msini, target: Target, windows: Windows):
    """Survivors inside all three windows (boolean array).

    Parameters
    ----------
    e : array_like
        Final eccentricities.
    a : array_like
        Final semi-major axes [AU].
    msini : array_like
        Projected masses m sin i [M_sun].
    target : Target
    windows : Windows
    """
    e, a, msini = (np.asarray(x, dtype=float) for x in (e, a, msini))
    a_lo, a_hi = windows.a_range(target)
    m_lo, m_hi = windows.msini_range(target)
    return (e >= windows.e_min(target)) & (e < 1.0) & (a >= a_lo) & (a <= a_hi) & (msini >= m_lo) & (msini <= m_hi)


def soft_weight(e, a, m_true, target: Target, windows: Windows):
    """Likelihood weight of each survivor, in [0, 1] (see the module docstring).

    Parameters
    ----------
    e : array_like
        Final eccentricities.
    a : array_like
        Final semi-major axes [AU].
    m_true : array_like
        True final masses [M_sun] (projected here by the orientation average
        unless ``target.true_mass``).
    target : Target
    windows : Windows
        Used only for a quantity whose uncertainty is zero.
    """
    e, a, m = (np.asarray(x, dtype=float) for x in (e, a, m_true))
    if target.e_err > 0:
        w_e = scipy.special.ndtr((e - target.e) / target.e_err)
    else:
        w_e = (e >= windows.e_min(target)).astype(float)
    w_e = np.where(e < 1.0, w_e, 0.0)
    if target.a_err > 0:
        w_a = np.exp(-0.5 * ((a - target.a) / target.a_err) ** 2)
    else:
        lo, hi = windows.a_range(target)
        w_a = ((a >= lo) & (a <= hi)).astype(float)
    if target.true_mass:
        if target.msini_err > 0:
            w_m = np.exp(-0.5 * ((m - target.msini) / target.msini_err) ** 2)
        else:
            lo, hi = windows.msini_range(target)
            w_m = ((m >= lo) & (m <= hi)).astype(float)
    elif target.msini_err > 0:
        w_m = msini_kernel(m, target.msini, target.msini_err)
    else:
        w_m = msini_window_probability(m, *windows.msini_range(target))
    w = w_e * w_a * w_m
    return np.where(np.isfinite(w), w, 0.0)

"""Radial-velocity semi-amplitude and Keplerian period.

Physics in AU, yr and M_sun with G from :mod:`scatter_pop.constants`; the
semi-amplitude is converted to m/s once, on the way out.

The semi-amplitude of the star's reflex motion is (Lovis & Fischer 2010, in
*Exoplanets*, ed. S. Seager, eq. 14)

    K = (2πG/P)^{1/3} m_p sin i (M* + m_p)^{−2/3} (1 − e²)^{−1/2},

with the *true* planet mass in the total mass M* + m_p.
"""

from __future__ import annotations

import numpy as np

from scatter_pop.constants import AU_PER_YR_MS, G_AU_YR_MSUN, TWO_PI

__all__ = ["orbital_period", "semi_amplitude", "semi_amplitude_from_a", "isotropic_sin_i"]


def orbital_period(a, m_star, m_planet=0.0):
    """Keplerian period from Kepler's third law, P = 2π √(a³ / G(M* + m_p)).

    Parameters
    ----------
    a : array_like
        Semi-major axis [AU]; non-positive values (unbound orbits) give NaN.
    m_star : array_like
        Stellar mass [M_sun].
    m_planet : array_like
        Planet mass [M_sun].

    Returns
    -------
    numpy.ndarray or float
        Period [yr].
    """
    a = np.asarray(a, dtype=float)
    mu = G_AU_YR_MSUN * (np.asarray(m_star, dtype=float) + np.asarray(m_planet, dtype=float))
    with np.errstate(invalid="ignore"):
        p = TWO_PI * np.sqrt(np.where(a > 0.0, a, np.nan) ** 3 / mu)
    return p if p.ndim else float(p)


def semi_amplitude(m_planet, period, e, m_star, sin_i=1.0):
    """Stellar RV semi-amplitude (Lovis & Fischer 2010, eq. 14).

    Parameters
    ----------
    m_planet : array_like
        True planet mass [M_sun] (enters both m sin i and M* + m_p).
    period : array_like
        Orbital period [yr].
    e : array_like
        Eccentricity, 0 <= e < 1 (larger values give NaN).
    m_star : array_like
        Stellar mass [M_sun].
    sin_i : array_like
        Sine of the inclination of the orbit to the sky plane (1: edge-on).

    Returns
    -------
    numpy.ndarray or float
        K [m/s].
    """
    m = np.asarray(m_planet, dtype=float)
    p = np.asarray(period, dtype=float)
    e = np.asarray(e, dtype=float)
    total = np.asarray(m_star, dtype=float) + m
    with np.errstate(invalid="ignore", divide="ignore"):
        k = (
            (TWO_PI * G_AU_YR_MSUN / p) ** (1.0 / 3.0)
            * m
            * np.asarray(sin_i, dtype=float)
            * total ** (-2.0 / 3.0)
            / np.sqrt(np.where((e >= 0) & (e < 1), 1.0 - e * e, np.nan))
        )
    k = k * AU_PER_YR_MS
    return k if k.ndim else float(k)


def semi_amplitude_from_a(m_planet, a, e, m_star, sin_i=1.0):
    """Semi-amplitude from the semi-major axis, the period following Kepler's third law.

    Parameters
    ----------
    m_planet : array_like
        True planet mass [M_sun].
    a : array_like
        Semi-major axis [AU].
    e : array_like
        Eccentricity.
    m_star : array_like
        Stellar mass [M_sun].
    sin_i : array_like
        Sine of the inclination to the sky plane.

    Returns
    -------
    numpy.ndarray or float
        K [m/s].
    """
    return semi_amplitude(m_planet, orbital_period(a, m_star, m_planet), e, m_star, sin_i)


def isotropic_sin_i(rng, size):
    """sin i for lines of sight distributed isotropically (cos i uniform on [0, 1]).

    Parameters
    ----------
    rng : numpy.random.Generator
    size : int or tuple of int

    Returns
    -------
    numpy.ndarray
        sin i, dimensionless, in [0, 1].
    """
    cos_i = rng.random(size)
    return np.sqrt(1.0 - cos_i * cos_i)

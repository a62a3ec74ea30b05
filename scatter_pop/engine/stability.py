"""Stability criteria and scale numbers of planet pairs (pure functions, numpy only).

Sources
-------
Marchal, C. & Bozis, G. 1982, Celest. Mech. 26, 311: the three-body system is
Hill stable (the ordering of the bodies cannot change) when
``-2 M c^2 h / (G^2 M_*^3)`` exceeds its value at the collinear (Euler) central
configuration; M = m0 + m1 + m2, M_* = m0 m1 + m0 m2 + m1 m2, c the total
angular momentum and h the total energy in the barycentric frame.
Gladman, B. 1993, Icarus 106, 247: the small-mass form of that criterion in
orbital elements (used by :func:`marchal_bozis_ratio`) and its circular limit
Delta > 2 sqrt(3) R_H (:func:`gladman_circular_critical_delta`).
Petrovich, C. 2015, ApJ 808, 120: empirical stability boundary of two planets.
Safronov number: Theta = (M_p/M*)(a/R_p) = (1/2)(v_esc/v_orb)^2 (trade definition,
e.g. Goldreich, Lithwick & Sari 2004, ARA&A 42, 549).
Tidal disruption radius r_t = R_p (M*/M_p)^(1/3) (Guillochon, Ramirez-Ruiz & Lin
2011, ApJ 732, 74 find disruption within about 2.7 r_t).

The criteria are sufficient, not necessary: a pair that fails them may still
be long-lived.  Units: masses in any one unit (M_sun in the package), lengths in
AU, velocities in AU/yr, G in AU^3 yr^-2 M_sun^-1.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "mutual_hill_radius",
    "hill_spacing",
    "hill_factor",
    "gladman_circular_critical_delta",
    "gladman_circular_critical_spacing",
    "hill_stable_circular",
    "euler_value",
    "marchal_bozis_ratio",
    "marchal_bozis_critical",
    "marchal_bozis_state_ratio",
    "petrovich_2015_critical_ratio",
    "petrovich_2015_stable",
    "safronov_number",
    "tidal_disruption_radius",
]

_THREE_43 = 3.0 ** (4.0 / 3.0)


# --------------------------------------------------------------------------- Hill radii
def hill_factor(m_star, m1, m2):
    """[(m1+m2)/(3 M*)]^(1/3): the mutual Hill radius in units of the mean semi-major axis.

    Python numbers take ``math.cbrt`` (the engine calls this per pair and chunk), arrays ``np.cbrt``;
    both round the same way.
    """
    if isinstance(m_star, float | int) and isinstance(m1, float | int) and isinstance(m2, float | int):
        return math.cbrt((m1 + m2) / (3.0 * m_star))
    return np.cbrt((np.asarray(m1, dtype=float) + m2) / (3.0 * np.asarray(m_star, dtype=float)))


def mutual_hill_radius(m_star, m1, m2, a1, a2):
    """Mutual Hill radius R_H,m = [(m1+m2)/(3 M*)]^(1/3) (a1+a2)/2 (Chambers, Wetherill & Boss 1996).

    The one definition in the package: the spacing of the initial conditions, the engine's
    first-encounter radius (with the orbits' current sizes for a1, a2) and the starting
    configurations of finished runs all use it.

    Parameters
    ----------
    m_star, m1, m2 : float or array
        Masses of the star and the two planets (M_sun).
    a1, a2 : float or array
        Semi-major axes (AU).

    Returns
    -------
    float or array
        R_H,m in AU.
    """
    if isinstance(a1, float | int) and isinstance(a2, float | int):
        return hill_factor(m_star, m1, m2) * 0.5 * (a1 + a2)
    return hill_factor(m_star, m1, m2) * 0.5 * (np.asarray(a1, dtype=float) + a2)


def hill_spacing(m_star, m1, m2, a1, a2):
    """Separation (a2 - a1) in mutual Hill radii (dimensionless); masses in M_sun, a in AU."""
    return (np.asarray(a2) - a1) / mutual_hill_radius(m_star, m1, m2, a1, a2)


# --------------------------------------------------------------------------- Gladman (1993)
def _bisect_increasing(f, lo, hi, n_iter=200):
    """Root of an increasing function on [lo, hi] (arrays allowed) by bisection."""
    lo, hi = np.broadcast_arrays(np.asarray(lo, dtype=float), np.asarray(hi, dtype=float))
    lo, hi = lo.copy(), hi.copy()
    for _ in range(n_iter):
        mid = 0.5 * (lo + hi)
        up = f(mid) > 0
        hi = np.where(up, mid, hi)
        lo = np.where(up, lo, mid)
        if np.all(hi - lo <= 4e-16 * hi):
            break
    return 0.5 * (lo + hi)


def gladman_circular_critical_delta(mu1, mu2):
    """Critical fractional separation Delta/a1 for two planets on circular coplanar orbits.

    Solves the Marchal-Bozis criterion in Gladman's (1993) small-mass form with
    e1 = e2 = 0 exactly: mu^-3 (mu1 + mu2/lam^2)(mu1 + mu2 lam)^2 = 1 + 3^(4/3) mu1 mu2 / mu^(4/3),
    lam = sqrt(a2/a1).  The pair is Hill stable when (a2 - a1)/a1 exceeds the result;
    for small masses it approaches 2 sqrt(3) mutual Hill radii.

    Parameters
    ----------
    mu1, mu2 : float or array
        Planet-to-star mass ratios of the inner and outer planet.

    Returns
    -------
    float or array
        Critical (a2 - a1)/a1.
    """
    mu1, mu2 = np.asarray(mu1, dtype=float), np.asarray(mu2, dtype=float)
    mu = mu1 + mu2
    rhs = 1.0 + _THREE_43 * mu1 * mu2 / mu ** (4.0 / 3.0)

    def excess(lam):  # increasing in lam > 1 (derivative 2 mu1 mu2 (mu1 + mu2 lam)(1 - lam^-3))
        return (mu1 + mu2 / lam**2) * (mu1 + mu2 * lam) ** 2 / mu**3 - rhs

    lam = _bisect_increasing(excess, np.ones_like(mu), np.full_like(mu, 10.0))
    out = lam**2 - 1.0
    return out if out.ndim else float(out)


def gladman_circular_critical_spacing(mu1, mu2):
    """The critical separation of :func:`gladman_circular_critical_delta` in mutual Hill radii
    (with the mean semi-major axis (a1+a2)/2 in R_H,m)."""
    x = np.asarray(gladman_circular_critical_delta(mu1, mu2))
    k = np.cbrt((np.asarray(mu1) + mu2) / 3.0)
    out = x / (k * (1.0 + 0.5 * x))
    return out if out.ndim else float(out)


def hill_stable_circular(m_star, m1, m2, a1, a2):
    """True if two planets on circular coplanar orbits are Hill stable (Gladman 1993).

    Parameters
    ----------
    m_star, m1, m2 : float or array
        Masses (M_sun); m1 belongs to the orbit a1.
    a1, a2 : float or array
        Semi-major axes (AU), any order.
    """
    m_star, m1, m2, a1, a2 = (np.asarray(x, dtype=float) for x in (m_star, m1, m2, a1, a2))
    inner_first = a1 <= a2
    m_in, m_out = np.where(inner_first, m1, m2), np.where(inner_first, m2, m1)
    a_in, a_out = np.minimum(a1, a2), np.maximum(a1, a2)
    crit = gladman_circular_critical_delta(m_in / m_star, m_out / m_star)
    out = (a_out - a_in) / a_in > crit
    return out if out.ndim else bool(out)


def marchal_bozis_ratio(m_star, m1, m2, a1, a2, e1, e2):
    """LHS/RHS of the Hill-stability criterion in orbital elements (Gladman 1993).

    LHS = mu^-3 (mu1 + mu2/lam^2)(mu1 g1 + mu2 g2 lam)^2, RHS = 1 + 3^(4/3) mu1 mu2 / mu^(4/3),
    with mu_i = m_i/M*, mu = mu1 + mu2, lam = sqrt(a2/a1), g_i = sqrt(1 - e_i^2); planet 1 is
    the inner one.  A ratio above 1 means Hill stable (coplanar orbits, small masses).

    Parameters
    ----------
    m_star, m1, m2 : float or array
        Masses (M_sun).
    a1, a2 : float or array
        Semi-major axes (AU), a1 < a2.
    e1, e2 : float or array
        Eccentricities (< 1).
    """
    mu1, mu2 = np.asarray(m1) / m_star, np.asarray(m2) / m_star
    mu = mu1 + mu2
    lam = np.sqrt(np.asarray(a2) / a1)
    g1, g2 = np.sqrt(1.0 - np.asarray(e1) ** 2), np.sqrt(1.0 - np.asarray(e2) ** 2)
    lhs = (mu1 + mu2 / lam**2) * (mu1 * g1 + mu2 * g2 * lam) ** 2 / mu**3
    rhs = 1.0 + _THREE_43 * mu1 * mu2 / mu ** (4.0 / 3.0)
    return lhs / rhs


# --------------------------------------------------------------------------- exact, from E and L
def euler_value(m_a, m_b, m_c):
    """M I U^2 / M_*^3 (G = 1) of the collinear central configuration a-b-c (b in the middle)."""
    # Euler's quintic for x = r_bc / r_ab (Moulton 1910; e.g. Murray & Dermott 1999, sect. 3.5
    # for the restricted case); exactly one positive root by Descartes' rule of signs.
    coeffs = [m_a + m_b, 3 * m_a + 2 * m_b, 3 * m_a + m_b, -(m_b + 3 * m_c), -(2 * m_b + 3 * m_c), -(m_b + m_c)]
    roots = np.roots(coeffs)
    x = float(max(r.real for r in roots if abs(r.imag) < 1e-9 * max(1.0, abs(r)) and r.real > 0))
    for _ in range(3):  # polish with Newton steps
        p, dp = np.polyval(coeffs, x), np.polyval(np.polyder(coeffs), x)
        x -= p / dp
    m = np.array([m_a, m_b, m_c])
    pos = np.array([0.0, 1.0, 1.0 + x])
    pos -= np.dot(m, pos) / m.sum()
    inertia = float(np.dot(m, pos**2))
    potential = m_a * m_b / 1.0 + m_b * m_c / x + m_a * m_c / (1.0 + x)
    m_big = m.sum()
    m_star3 = (m_a * m_b + m_a * m_c + m_b * m_c) ** 3
    return m_big * inertia * potential**2 / m_star3


def marchal_bozis_critical(m_star, m1, m2):
    """Critical value of -2 M c^2 h / (G^2 M_*^3) for Hill stability (Marchal & Bozis 1982).

    Evaluated exactly at the collinear central configuration with a planet between
    the star and the other planet (the one that bounds an inner planet's and an
    outer planet's zero-velocity region); the larger of the two planet orders is
    returned, so the criterion stays sufficient whichever planet is inside.  For
    small masses it equals 1 + 3^(4/3) m1 m2 / (M*^(2/3) (m1+m2)^(4/3)) + O(mu).

    Parameters
    ----------
    m_star, m1, m2 : float
        Masses (any one unit).
    """
    return max(euler_value(m_star, m1, m2), euler_value(m_star, m2, m1))


def marchal_bozis_state_ratio(masses, positions, velocities, G):
    """Hill-stability ratio of a star and two planets from their total energy and angular momentum.

    ratio = [-2 M c^2 h / (G^2 M_*^3)] / :func:`marchal_bozis_critical`; above 1 the pair is
    Hill stable (valid for any eccentricities and inclinations).

    Parameters
    ----------
    masses : array (3,)
        Star and two planet masses (M_sun).
    positions : array (3, 3)
        Positions in any inertial frame (AU).
    velocities : array (3, 3)
        Velocities in the same frame (AU/yr).
    G : float
        Gravitational constant (AU^3 yr^-2 M_sun^-1).

    Returns
    -------
    float
        The ratio; negative when the system is unbound (h > 0).
    """
    m = np.asarray(masses, dtype=float)
    x = np.asarray(positions, dtype=float)
    v = np.asarray(velocities, dtype=float)
    m_big = m.sum()
    x = x - (m[:, None] * x).sum(axis=0) / m_big
    v = v - (m[:, None] * v).sum(axis=0) / m_big
    kinetic = 0.5 * float(np.sum(m * np.sum(v * v, axis=1)))
    potential = 0.0
    for i in range(3):
        for j in range(i + 1, 3):
            potential -= G * m[i] * m[j] / float(np.linalg.norm(x[i] - x[j]))
    h = kinetic + potential
    c = np.linalg.norm((m[:, None] * np.cross(x, v)).sum(axis=0))
    m_star3 = (m[0] * m[1] + m[0] * m[2] + m[1] * m[2]) ** 3
    value = -2.0 * m_big * c**2 * h / (G**2 * m_star3)
    return float(value / marchal_bozis_critical(m[0], m[1], m[2]))


# --------------------------------------------------------------------------- Petrovich (2015)
def petrovich_2015_critical_ratio(mu_in, mu_out, e_in=0.0, e_out=0.0):
    """Critical a_out/a_in of the Petrovich (2015) stability boundary.

    Solves a_out(1-e_out) / [a_in(1+e_in)] = 2.4 [max(mu_in, mu_out)]^(1/3) (a_out/a_in)^(1/2) + 1.15
    for a_out/a_in (a quadratic in its square root).  Fitted for mu = 1e-4...1e-2.

    Parameters
    ----------
    mu_in, mu_out : float or array
        Planet-to-star mass ratios.
    e_in, e_out : float or array
        Eccentricities.
    """
    big = np.maximum(mu_in, mu_out)
    a = (1.0 - np.asarray(e_out)) / (1.0 + np.asarray(e_in))
    b = 2.4 * np.cbrt(big)
    s = (b + np.sqrt(b * b + 4.0 * a * 1.15)) / (2.0 * a)
    out = np.asarray(s * s)
    return out if out.ndim else float(out)


def petrovich_2015_stable(m_star, m_in, m_out, a_in, a_out, e_in, e_out):
    """True if the pair satisfies the Petrovich (2015) criterion (masses M_sun, a in AU)."""
    lhs = np.asarray(a_out) * (1.0 - np.asarray(e_out)) / (np.asarray(a_in) * (1.0 + np.asarray(e_in)))
    rhs = 2.4 * np.cbrt(np.maximum(m_in, m_out) / np.asarray(m_star)) * np.sqrt(np.asarray(a_out) / a_in) + 1.15
    out = np.asarray(lhs > rhs)
    return out if out.ndim else bool(out)


# --------------------------------------------------------------------------- scales
def safronov_number(m_p, m_star, a, r_p):
    """Safronov number Theta = (m_p/M*)(a/R_p) = (1/2)(v_esc/v_orb)^2.

    Parameters
    ----------
    m_p, m_star : float or array
        Planet and star masses (same unit).
    a : float or array
        Orbital distance (AU).
    r_p : float or array
        Planet radius (AU).
    """
    return np.asarray(m_p) / m_star * np.asarray(a) / r_p


def tidal_disruption_radius(m_p, r_p, m_star, eta=1.0):
    """Tidal disruption distance eta R_p (M*/M_p)^(1/3).

    Parameters
    ----------
    m_p, m_star : float or array
        Planet and star masses (same unit).
    r_p : float or array
        Planet radius (AU).
    eta : float
        Multiple of the tidal radius r_t (2.7 for disruption, Guillochon et al. 2011).

    Returns
    -------
    float or array
        Distance in AU.
    """
    return eta * np.asarray(r_p) * np.cbrt(np.asarray(m_star) / m_p)

"""Geometry of close approaches, contacts and escapes (pure numpy, no REBOUND).

These functions take positions and velocities in one frame.  Every quantity
here depends only on *relative* positions and velocities, so it is the same in
the inertial frame and in the shifted/boosted frames hybrid integrators keep
their particles in during a step (democratic-heliocentric coordinates: positions
relative to the star, velocities relative to the centre of mass).

Units: AU, yr, M_sun; G in AU^3 yr^-2 M_sun^-1.
"""

from __future__ import annotations

import math

import numpy as np

from scatter_pop.engine.stability import mutual_hill_radius, tidal_disruption_radius

__all__ = [
    "relative_orbit",
    "line_min_distance",
    "merge_jump",
    "binding_to_interior",
    "star_contact_distance",
    "classify_star_pass",
    "pericentre_timescale",
    "encounter_radii",
]


def relative_orbit(dx, dv, gm):
    """Semi-major axis, eccentricity and pericentre of a two-body relative orbit.

    Parameters
    ----------
    dx : array (3,)
        Relative position (AU).
    dv : array (3,)
        Relative velocity (AU/yr).
    gm : float
        G (m1 + m2) (AU^3/yr^2).

    Returns
    -------
    a : float
        Semi-major axis (AU), negative for an unbound orbit, inf for a parabola.
    e : float
    q : float
        Pericentre distance (AU), valid for bound and unbound orbits.
    """
    dx, dv = np.asarray(dx, dtype=float), np.asarray(dv, dtype=float)
    r = math.sqrt(float(dx @ dx))
    v2 = float(dv @ dv)
    h = np.cross(dx, dv)
    h2 = float(h @ h)
    energy = 0.5 * v2 - gm / r
    e = math.sqrt(max(0.0, 1.0 + 2.0 * energy * h2 / gm**2))
    q = h2 / (gm * (1.0 + e))  # p / (1 + e): exact for any conic
    a = -gm / (2.0 * energy) if energy != 0.0 else math.inf
    return a, e, q


def line_min_distance(dx_end, dv, dt):
    """Smallest separation on the straight line a pair travelled during the last step.

    The same construction as REBOUND's ``collision = "line"`` search: the
    separation at the end of the step is ``dx_end``, at its beginning
    ``dx_end - dt dv``.

    Parameters
    ----------
    dx_end : array (3,)
        Separation at the end of the step (AU).
    dv : array (3,)
        Relative velocity at the end of the step (AU/yr).
    dt : float
        Length of the last step (yr).
    """
    dx_end, dv = np.asarray(dx_end, dtype=float), np.asarray(dv, dtype=float)
    r2 = min(float(dx_end @ dx_end), float((dx_end - dt * dv) @ (dx_end - dt * dv)))
    vv = float(dv @ dv)
    if vv > 0.0 and dt > 0.0:
        t_closest = float(dx_end @ dv) / vv
        if 0.0 <= t_closest <= dt:
            d3 = dx_end - t_closest * dv
            r2 = min(r2, float(d3 @ d3))
    return math.sqrt(r2)


def merge_jump(m, x, v, i, j, G):
    """Exact change of total energy and angular momentum when bodies i and j merge.

    The merged body sits at their centre of mass with their centre-of-mass
    velocity (REBOUND's "merge").  Linear momentum is conserved; the energy
    changes by the lost relative kinetic energy, the removed pair potential and
    the change of the potential of every third body; the angular momentum loses
    the pair's orbital angular momentum.

    Parameters
    ----------
    m : array (N,)
        Masses (M_sun).
    x, v : arrays (N, 3)
        Positions (AU) and velocities (AU/yr) in one frame.
    i, j : int
        The merging bodies.
    G : float
        Gravitational constant.

    Returns
    -------
    dE : float
        E_after - E_before (M_sun AU^2 / yr^2).
    dL : array (3,)
        L_after - L_before (M_sun AU^2 / yr).
    """
    m, x, v = np.asarray(m, dtype=float), np.asarray(x, dtype=float), np.asarray(v, dtype=float)
    mi, mj = m[i], m[j]
    mt = mi + mj
    mu = mi * mj / mt
    dx, dvel = x[i] - x[j], v[i] - v[j]
    de = -0.5 * mu * float(dvel @ dvel) + G * mi * mj / math.sqrt(float(dx @ dx))
    com = (mi * x[i] + mj * x[j]) / mt
    for k in range(len(m)):
        if k in (i, j):
            continue
        de += (
            G
            * m[k]
            * (mi / np.linalg.norm(x[k] - x[i]) + mj / np.linalg.norm(x[k] - x[j]) - mt / np.linalg.norm(x[k] - com))
        )
    dl = -mu * np.cross(dx, dvel)
    return float(de), dl


def binding_to_interior(m, x, v, k, G):
    """Two-body orbit of planet k about the star and every body closer to the star than k.

    Body 0 is the star.  The reference point is the centre of mass of the star and of the bodies whose
    distance from the star is smaller than k's (Jacobi-style hierarchy, common practice for judging
    escape in hierarchical systems): a bound inner planet stays bound however far a wide companion
    pulls the system's centre of mass, and a distant planet is judged against all the mass inside it.

    Returns
    -------
    energy : float
        Specific orbital energy (AU^2/yr^2); >= 0 means unbound.
    apocentre : float
        Apocentre distance (AU); inf when unbound.
    """
    m, x, v = np.asarray(m, dtype=float), np.asarray(x, dtype=float), np.asarray(v, dtype=float)
    dist = np.linalg.norm(x - x[0], axis=1)
    inner = dist < dist[k]
    inner[0] = True
    inner[k] = False
    m_in = m[inner].sum()
    x_in = (m[inner, None] * x[inner]).sum(axis=0) / m_in
    v_in = (m[inner, None] * v[inner]).sum(axis=0) / m_in
    gm = G * (m_in + m[k])
    dx, dv = x[k] - x_in, v[k] - v_in
    energy = 0.5 * float(dv @ dv) - gm / float(np.linalg.norm(dx))
    if energy >= 0.0:
        return energy, math.inf
    a, e, _ = relative_orbit(dx, dv, gm)
    return energy, a * (1.0 + e)


def star_contact_distance(m_star, r_star, m_p, r_p, eta):
    """Distance from the star inside which a planet's pericentre passage ends it (AU).

    The larger of the contact distance R* + R_p and the disruption distance
    eta R_p (M*/M_p)^(1/3).
    """
    return max(r_star + r_p, float(tidal_disruption_radius(m_p, r_p, m_star, eta)))


def classify_star_pass(q, m_star, r_star, m_p, r_p, eta):
    """Fate of a pericentre passage at distance q: "hit_star", "disrupted" or None.

    A pericentre inside R* + R_p is a collision with the star (the planet ends in
    the star whether or not tides tear it first); otherwise a pericentre inside
    eta R_p (M*/M_p)^(1/3) is a tidal disruption.

    Parameters
    ----------
    q : float
        Pericentre distance of the star-planet two-body orbit (AU).
    m_star, m_p : float
        Masses (M_sun).
    r_star, r_p : float
        Physical radii (AU).
    eta : float
        Disruption factor (multiple of r_t).
    """
    if q < r_star + r_p:
        return "hit_star"
    if q < float(tidal_disruption_radius(m_p, r_p, m_star, eta)):
        return "disrupted"
    return None


def pericentre_timescale(gm, a, e):
    """Orbital time scale that a fixed-step map must resolve (yr).

    2 pi sqrt(q^3 / (G M (1 + e))), the time to sweep one radian at pericentre
    times 2 pi: the period for a circular orbit, shorter by (1-e)^(3/2)/(1+e)^(1/2)
    for an eccentric one.
    """
    q = a * (1.0 - e)
    return 2.0 * math.pi * math.sqrt(q**3 / (gm * (1.0 + e)))


def encounter_radii(m_star, masses, sizes, margin=1.25):
    """Search radii that flag every pair closer than one mutual Hill radius.

    Radius_k = margin/2 * max_j R_H,m(k, j), so that radius_k + radius_j >= margin R_H,m(k, j)
    for every pair; a contact search with these radii lists (a superset of) the
    pairs inside one mutual Hill radius.

    Parameters
    ----------
    m_star : float
        M_sun.
    masses, sizes : sequences
        Planet masses (M_sun) and orbit sizes (AU): the osculating astrocentric semi-major axis
        when bound, else the current distance from the star.
    margin : float
        Allowance for orbit sizes changing between updates.
    """
    n = len(masses)
    out = []
    for k in range(n):
        big = max(
            (mutual_hill_radius(m_star, masses[k], masses[j], sizes[k], sizes[j]) for j in range(n) if j != k),
            default=0.0,
        )
        out.append(0.5 * margin * big)
    return out

"""Whether a system's outcome is final: the settlement class of a record (pure, numpy only).

The rule (stored with every ensemble, :data:`RULE`):

``settled``
    no bound planet left besides at most one (``one_planet_left`` / ``no_planet_left``), or
    exactly two planets left whose pair is Hill stable by the exact criterion
    (Marchal & Bozis 1982, Celest. Mech. 26, 311): the ratio of -2 M c^2 h / (G^2 M_*^3) to its
    critical value, from the conserved energy and angular momentum, is at least the spec's
    ``integration.hill_margin``.  Such an outcome cannot change any more: one planet cannot
    scatter, and a Hill-stable pair can never have a close encounter.
``likely_stable``
    exactly two bound planets left, not Hill stable, that meet the empirical criterion of
    Petrovich (2015, ApJ 808, 120) at the end,
    a_out(1 - e_out) / [a_in(1 + e_in)] > 2.4 [max(mu_in, mu_out)]^(1/3) (a_out/a_in)^(1/2) + 1.15,
    inside its stated range of validity (both planet-to-star mass ratios in 1e-4 ... 1e-2,
    mutual inclination at most 40 degrees), and whose osculating gap q_out - Q_in stayed above
    :data:`GAP_HILL` mutual Hill radii at each of the last :data:`GAP_CHECKS` stopping checks of
    the run (``recent_gap``; the distance between the planets can never be smaller than this gap
    while the orbits are as they were).  Petrovich fitted his criterion to integrations of up
    to 1e8 inner orbits: it is a statement of likely long-term stability, not a proof.
``unsettled``
    everything else: a snapshot at the end time (or at the wall-clock cap) whose orbits may still
    change — among them every pair that started Hill unstable and kept both planets, which by the
    exact criterion can never become Hill stable (its E and L are conserved) and settles only by
    losing a planet.

A planet still in the system but unbound from the star (fate ``unbound_at_end``) makes the system
unsettled: it is on its way out, but the record is a snapshot of that.
"""

from __future__ import annotations

import math

import numpy as np

from scatter_pop.engine.outcome import EndReason, Fate, Settlement
from scatter_pop.engine.stability import mutual_hill_radius, petrovich_2015_stable

__all__ = [
    "RULE",
    "GAP_HILL",
    "GAP_CHECKS",
    "PETROVICH_MU_RANGE",
    "PETROVICH_MAX_MUTUAL_INC_DEG",
    "classify",
    "orbit_gap_hill",
    "mutual_inclination",
]

GAP_HILL = 3.0  # the osculating gap must stay above this many mutual Hill radii ...
GAP_CHECKS = 10  # ... at each of this many last stopping checks (check_orbits apart)
PETROVICH_MU_RANGE = (1e-4, 1e-2)  # planet-to-star mass ratios of Petrovich's (2015) fits
PETROVICH_MAX_MUTUAL_INC_DEG = 40.0  # mutual inclinations of his fits, at most

RULE = (
    "settled: at most one planet left, or a pair Hill stable by the exact Marchal-Bozis criterion "
    "(ratio >= integration.hill_margin); likely_stable: two bound planets meeting the Petrovich (2015, "
    "ApJ 808, 120) criterion at the end, both mass ratios in 1e-4..1e-2, mutual inclination <= 40 deg, "
    f"and an osculating gap q_out - Q_in above {GAP_HILL:g} mutual Hill radii at each of the last "
    f"{GAP_CHECKS} stopping checks; unsettled: everything else (a snapshot)"
)


def orbit_gap_hill(m_star, m1, m2, a1, e1, a2, e2) -> float:
    """Osculating gap q_out - Q_in of two bound orbits in mutual Hill radii (negative: they cross).

    The planets' distance can never be smaller than the difference of their distances from the
    star, hence than q_out - Q_in, while the orbits are as given.  Masses in M_sun, a in AU.
    """
    (m_in, a_in, e_in), (m_out, a_out, e_out) = sorted(((m1, a1, e1), (m2, a2, e2)), key=lambda p: p[1])
    gap = a_out * (1.0 - e_out) - a_in * (1.0 + e_in)
    return float(gap / mutual_hill_radius(m_star, m_in, m_out, a_in, a_out))


def mutual_inclination(inc1, node1, inc2, node2) -> float:
    """Angle between two orbit normals (rad) from inclinations and nodes to one reference plane."""
    n1 = np.array([math.sin(inc1) * math.sin(node1), -math.sin(inc1) * math.cos(node1), math.cos(inc1)])
    n2 = np.array([math.sin(inc2) * math.sin(node2), -math.sin(inc2) * math.cos(node2), math.cos(inc2)])
    return float(math.acos(max(-1.0, min(1.0, float(n1 @ n2)))))


def _bound(p) -> bool:
    return p.fate == Fate.SURVIVED and p.a_final > 0 and 0 <= p.e_final < 1


def classify(
    end_reason: EndReason, planets, star_mass: float, *, hill_ratio: float, recent_gap: float, hill_margin: float
) -> Settlement | None:
    """Settlement class of one system (see the module docstring); None for a failed system.

    Parameters
    ----------
    end_reason : EndReason
    planets : sequence of PlanetRecord
        Final states (``fate``, ``a_final``, ``e_final``, ``mass_final``, ``inc_final``, ``node_final``).
    star_mass : float
        M_sun (the star's mass at the end; planets merged into it add nothing to the ratios used).
    hill_ratio : float
        Exact Marchal-Bozis ratio of the pair at the end (NaN unless two planets are left).
    recent_gap : float
        Smallest osculating gap (mutual Hill radii) at the last :data:`GAP_CHECKS` checks; NaN when
        the run has no such full window with two planets.
    hill_margin : float
        The spec's ``integration.hill_margin``.
    """
    if end_reason == EndReason.FAILED:
        return None
    if end_reason in (EndReason.ONE_PLANET, EndReason.NO_PLANETS, EndReason.HILL_STABLE):
        return Settlement.SETTLED
    present = [p for p in planets if p.fate in (Fate.SURVIVED, Fate.UNBOUND)]
    if any(p.fate == Fate.UNBOUND for p in present):
        return Settlement.UNSETTLED
    if len(present) <= 1:
        return Settlement.SETTLED
    if len(present) != 2 or not all(_bound(p) for p in present):
        return Settlement.UNSETTLED
    if math.isfinite(hill_ratio) and hill_ratio >= hill_margin:
        return Settlement.SETTLED
    (p_in, p_out) = sorted(present, key=lambda p: p.a_final)
    mu = [p_in.mass_final / star_mass, p_out.mass_final / star_mass]
    in_range = all(PETROVICH_MU_RANGE[0] <= x <= PETROVICH_MU_RANGE[1] for x in mu)
    flat = (
        math.degrees(mutual_inclination(p_in.inc_final, p_in.node_final, p_out.inc_final, p_out.node_final))
        <= PETROVICH_MAX_MUTUAL_INC_DEG
    )
    stable = bool(
        petrovich_2015_stable(
            star_mass, p_in.mass_final, p_out.mass_final, p_in.a_final, p_out.a_final, p_in.e_final, p_out.e_final
        )
    )
    quiet = math.isfinite(recent_gap) and recent_gap > GAP_HILL
    return Settlement.LIKELY_STABLE if (in_range and flat and stable and quiet) else Settlement.UNSETTLED

"""Search radii: what REBOUND's collision search and escape check will report.

The particles' ``r`` are search radii, not physical radii (those live in the
ledger, ``Ledger.radius``); REBOUND lists a pair to the engine's resolve
function only when their search spheres touch, and raises ``Escape`` only
beyond ``exit_max_distance``.

* Planets: until the first close encounter, ``ENCOUNTER_MARGIN`` / 2 times the
  largest mutual Hill radius of each planet (from osculating astrocentric a),
  so that every pair within one mutual Hill radius at the end of a step is
  listed; their physical radii afterwards, or when fewer than two planets are
  left.
* Star: large enough that every planet is listed within its own end distance
  max(R* + R_p, eta r_t) (a planet's search radius counts towards it).
* Escape radius: distances are judged from the star.  The ejection distance,
  or ``ESCAPE_MARGIN`` times the apocentre (about the star and the bodies inside
  it) of a bound planet that is currently beyond it, until that planet is back
  inside; REBOUND measures from the centre of mass, so the star's offset from
  it is added (every planet beyond the radius from the star is then reported,
  none inside it).
"""

from __future__ import annotations

import numpy as np

from scatter_pop.engine.encounters import binding_to_interior, encounter_radii, star_contact_distance
from scatter_pop.engine.rebound_state import body_size, state_arrays

__all__ = ["set_search_radii", "set_star_radius", "set_escape_radius", "ENCOUNTER_MARGIN", "ESCAPE_MARGIN"]

ENCOUNTER_MARGIN = 1.25  # search radii cover 1.25 mutual Hill radii until the first encounter
ESCAPE_MARGIN = 1.05  # a bound planet beyond the ejection distance: escape radius 1.05 x apocentre


def set_star_radius(sim, ledger, star_radius: float, eta: float, exclude: int | None = None) -> None:
    """Star search radius: every planet (but ``exclude``) is listed once within its end distance.

    ``star_radius`` is the star's physical radius (AU), ``eta`` the tidal-disruption factor.
    """
    ps = sim.particles
    need = [
        star_contact_distance(ps[0].m, star_radius, ps[k].m, ledger.radius[ledger.bodies[k]], eta) - ps[k].r
        for k in range(1, sim.N)
        if k != exclude
    ]
    ps[0].r = max([0.0, *need]) if need else star_radius


def set_search_radii(sim, ledger, star_radius: float, eta: float) -> None:
    """Planet search radii (Hill-scale before the first encounter, physical after) and the star's."""
    ps, n = sim.particles, sim.N
    if ledger.encounter_found or n < 3:
        for k in range(1, n):
            ps[k].r = ledger.radius[ledger.bodies[k]]
    else:
        radii = encounter_radii(
            ps[0].m, [ps[k].m for k in range(1, n)], [body_size(sim, k) for k in range(1, n)], ENCOUNTER_MARGIN
        )
        for k in range(1, n):
            ps[k].r = max(radii[k - 1], ledger.radius[ledger.bodies[k]])
    set_star_radius(sim, ledger, star_radius, eta)


def set_escape_radius(sim, ejection_distance: float) -> None:
    """Escape radius: the ejection distance from the star, or above the apocentre of a bound planet beyond it."""
    m, x, v = state_arrays(sim)
    radius = ejection_distance
    for k in range(1, sim.N):
        dist = float(np.linalg.norm(x[k] - x[0]))
        if dist > ejection_distance:
            _, apo = binding_to_interior(m, x, v, k, sim.G)
            radius = max(radius, ESCAPE_MARGIN * max(apo, dist))
    sim.exit_max_distance = radius + float(np.linalg.norm(x[0]))

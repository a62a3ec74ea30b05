"""What the engine reads from a REBOUND simulation (read-only; no REBOUND import).

Particle 0 is the star.  Orbits are astrocentric (about the star, two-body
G (M* + m)) and computed from relative coordinates, so they are the same in any
frame.  Units: AU, yr, M_sun, rad.
"""

from __future__ import annotations

import math

import numpy as np

from scatter_pop.engine.encounters import pericentre_timescale, relative_orbit
from scatter_pop.engine.ledger import FateEntry
from scatter_pop.engine.outcome import NO_PLANET, Fate

__all__ = ["state_arrays", "astrocentric_orbit", "body_size", "hybrid_step", "fate_entry"]


def state_arrays(sim):
    """Masses (N,), positions (N, 3) and velocities (N, 3) of all particles."""
    ps = sim.particles
    n = sim.N
    m = np.array([ps[i].m for i in range(n)])
    x = np.array([ps[i].xyz for i in range(n)])
    v = np.array([ps[i].vxyz for i in range(n)])
    return m, x, v


def astrocentric_orbit(sim, k: int):
    """(a, e, q) of particle k about the star, from relative coordinates (any frame)."""
    ps = sim.particles
    dx = np.subtract(ps[k].xyz, ps[0].xyz)
    dv = np.subtract(ps[k].vxyz, ps[0].vxyz)
    return relative_orbit(dx, dv, sim.G * (ps[0].m + ps[k].m))


def body_size(sim, k: int) -> float:
    """Orbit size of particle k (AU): its astrocentric a if bound, else its distance to the star."""
    a, _, _ = astrocentric_orbit(sim, k)
    if 0.0 < a < math.inf:
        return a
    ps = sim.particles
    return float(np.linalg.norm(np.subtract(ps[k].xyz, ps[0].xyz)))


def hybrid_step(sim, steps_per_orbit: float, fallback_period: float) -> float:
    """Hybrid step (yr): shortest current orbital time scale (pericentre-resolved) / steps_per_orbit.

    ``fallback_period`` stands in when no planet is on a bound orbit.
    """
    ps = sim.particles
    scales = []
    for k in range(1, sim.N):
        a, e, _ = astrocentric_orbit(sim, k)
        if 0.0 < a < math.inf and e < 1.0:
            scales.append(pericentre_timescale(sim.G * (ps[0].m + ps[k].m), a, e))
    base = min(scales) if scales else fallback_period
    return base / steps_per_orbit


def fate_entry(sim, k: int, fate: Fate, radius: float, merged_into: int = NO_PLANET) -> FateEntry:
    """Particle k's state now, as the ledger books it (physical ``radius`` in AU)."""
    ps = sim.particles
    orbit = ps[k].orbit(primary=ps[0])
    _, _, q = astrocentric_orbit(sim, k)
    return FateEntry(
        fate=int(fate),
        t=float(sim.t),
        merged_into=int(merged_into),
        mass=float(ps[k].m),
        a=float(orbit.a),
        e=float(orbit.e),
        inc=float(orbit.inc),
        omega=float(orbit.omega),
        node=float(orbit.Omega),
        q=float(q),
        radius=float(radius),
    )

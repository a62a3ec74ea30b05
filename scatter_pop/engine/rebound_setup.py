"""Build, restore and serialise the REBOUND simulation of one system.

Building: ``sim.G`` set to the IAU value (:data:`constants.G_AU_YR_MSUN`), the
star and then the planets added with astrocentric elements (``primary`` = the
star, true anomaly from our own Kepler solver), the centre-of-mass frame, the
random seed that orders simultaneous contacts, the integrator and its
tolerances, the collision search (``"line"``; MERCURIUS accepts only
``"direct"``), no energy-offset tracking (the engine books every jump itself)
and the ejection distance as escape radius.  The particles' ``r`` start as the
physical radii; the engine replaces them with search radii
(:mod:`scatter_pop.engine.search_radii`) and keeps the physical ones in its ledger.

Restoring: from the REBOUND binary of a checkpoint.  Function pointers are not
saved, so the caller sets ``collision_resolve`` again; nothing else is re-set
(re-assigning the integrator would reset its state).
"""

from __future__ import annotations

import math
import warnings

import rebound

from scatter_pop.constants import G_AU_YR_MSUN
from scatter_pop.engine.initial_conditions import InitialSystem, true_anomaly
from scatter_pop.errors import InputError

__all__ = [
    "build_simulation",
    "restore_simulation",
    "simulation_blob",
    "contact_time",
    "initial_state",
    "orbit_elements",
    "STAR_NAME",
    "MIN_DT_FRACTION",
]

STAR_NAME = "star"
MIN_DT_FRACTION = 1e-4  # IAS15 step floor: 1e-4 of the shortest contact free-fall time


def build_simulation(initial: InitialSystem, integration, planet_names, backend) -> rebound.Simulation:
    """A new simulation of ``initial`` set up for ``integration`` (IntegrationSpec).

    ``planet_names[i]`` names planet i; the star is :data:`STAR_NAME`.  The step
    ``sim.dt`` is left to the caller.  Raises InputError when the elements give
    no finite position.
    """
    ini, integ = initial, integration
    sim = _bodies(ini, planet_names)
    sim.rand_seed = int(ini.seed) % 2**32  # orders simultaneous contacts; saved with the state
    backend.configure_simulation(sim, integ, ini)
    sim.track_energy_offset = 0  # every jump is booked in the ledger instead
    sim.exit_max_distance = integ.ejection_distance
    return sim


def _bodies(ini: InitialSystem, planet_names) -> rebound.Simulation:
    """The star and the planets of ``ini`` in the centre-of-mass frame (no integrator set up)."""
    sim = rebound.Simulation()
    sim.G = G_AU_YR_MSUN
    sim.add(m=ini.star_mass, r=ini.star_radius, name=STAR_NAME)
    for i in range(ini.count):
        sim.add(
            primary=sim.particles[0],
            m=ini.mass[i],
            r=ini.radius[i],
            a=ini.a[i],
            e=ini.e[i],
            inc=ini.inc[i],
            omega=ini.omega[i],
            Omega=ini.node[i],
            f=true_anomaly(ini.mean_anomaly[i], ini.e[i]),
            name=planet_names[i],
        )
    sim.move_to_com()
    if not all(math.isfinite(c) for k in range(sim.N) for c in (*sim.particles[k].xyz, *sim.particles[k].vxyz)):
        raise InputError(f"initial system {ini.index}: the elements give no finite position (a = {ini.a}, e = {ini.e})")
    return sim


def initial_state(initial: InitialSystem):
    """Masses (N,), positions (N, 3) and velocities (N, 3) of ``initial`` (star first), centre-of-mass
    frame: the same numbers :func:`build_simulation` starts the REBOUND path from."""
    import numpy as np

    sim = _bodies(initial, [f"p{i}" for i in range(initial.count)])
    ps = sim.particles
    m = np.array([ps[k].m for k in range(sim.N)])
    x = np.array([ps[k].xyz for k in range(sim.N)])
    v = np.array([ps[k].vxyz for k in range(sim.N)])
    return m, x, v


def orbit_elements(m_star: float, m: float, dx, dv, G: float = G_AU_YR_MSUN):
    """(a, e, inc, omega, node) of the orbit dx, dv (relative to the star) with REBOUND's definitions,
    as the REBOUND path records them (``Particle.orbit(primary=star)``)."""
    star = rebound.Particle(m=float(m_star))
    p = rebound.Particle(
        m=float(m), x=float(dx[0]), y=float(dx[1]), z=float(dx[2]), vx=float(dv[0]), vy=float(dv[1]), vz=float(dv[2])
    )
    o = p.orbit(primary=star, G=G)
    return float(o.a), float(o.e), float(o.inc), float(o.omega), float(o.Omega)


def contact_time(initial: InitialSystem) -> float:
    """Shortest free-fall time at contact (yr): star surface or two touching planets."""
    ini = initial
    g = G_AU_YR_MSUN
    times = [math.sqrt((ini.star_radius + r) ** 3 / (g * (ini.star_mass + m))) for m, r in zip(ini.mass, ini.radius)]
    for i in range(ini.count):
        for j in range(i + 1, ini.count):
            d = ini.radius[i] + ini.radius[j]
            times.append(math.sqrt(d**3 / (g * (ini.mass[i] + ini.mass[j]))))
    return min(times)


def restore_simulation(blob: bytes, bodies) -> rebound.Simulation:
    """The simulation saved in ``blob``, its particles renamed from ``bodies`` (the ledger's list).

    Names are not trusted after a reload (REBOUND 5.2.2 can change them once other
    simulations are freed).  The caller must set ``collision_resolve`` again.
    """
    with warnings.catch_warnings():  # the caller sets the resolve function again
        warnings.filterwarnings("ignore", message="You have to reset function pointers")
        sim = rebound.Simulation(blob)
    for particle, name in zip(sim.particles, bodies):
        particle.name = name
    return sim


def simulation_blob(sim: rebound.Simulation) -> bytes:
    """REBOUND's binary snapshot of ``sim`` (what :func:`restore_simulation` reads)."""
    return sim.__reduce__()[1][0]

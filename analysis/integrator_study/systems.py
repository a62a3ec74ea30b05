"""Initial conditions for the integrator study (plain REBOUND, independent of the engine).

Star of 1 M_sun and 1 R_sun; three Jupiter-mass planets (IAU 2015 nominal GM_J), radius from a
bulk density of 1.33 g/cm^3 (Jupiter's mean density, common practice); innermost at 5 AU, neighbours
spaced by ``spacing`` mutual Hill radii R_H = ((m_i+m_j)/(3M))^(1/3) (a_i+a_j)/2 (Chambers, Wetherill &
Boss 1996, Icarus 119, 261); e from a Rayleigh law of scale 0.01, i from a Rayleigh law of scale 0.5 deg,
angles uniform. Units AU, yr, M_sun; G from scatter_pop.constants.
"""

from __future__ import annotations

import math

import numpy as np
import rebound

from scatter_pop.constants import G_AU_YR_MSUN, GCM3_MSUN_AU3, MJUP_MSUN, R_SUN_AU

__all__ = ["draw_system", "build_sim", "NAMES"]

NAMES = ("p0", "p1", "p2")


def draw_system(seed: int, spacing: float = 3.0, a_inner: float = 5.0, n: int = 3) -> list[dict]:
    """Planet elements of one system drawn from ``seed`` (a list of dicts, AU / rad / M_sun)."""
    rng = np.random.default_rng(np.random.SeedSequence(20240501, spawn_key=(seed,)))
    m = MJUP_MSUN
    rho = 1.33 * GCM3_MSUN_AU3
    radius = (3.0 * m / (4.0 * math.pi * rho)) ** (1.0 / 3.0)
    k = (2.0 * m / 3.0) ** (1.0 / 3.0)
    a = [a_inner]
    for _ in range(n - 1):
        a.append(a[-1] * (1.0 + spacing * k / 2.0) / (1.0 - spacing * k / 2.0))
    planets = []
    for i in range(n):
        planets.append(
            dict(
                m=m,
                r=radius,
                a=a[i],
                e=0.01 * math.sqrt(-2.0 * math.log(1.0 - rng.random())),
                inc=math.radians(0.5) * math.sqrt(-2.0 * math.log(1.0 - rng.random())),
                Omega=2 * math.pi * rng.random(),
                omega=2 * math.pi * rng.random(),
                M=2 * math.pi * rng.random(),
                name=NAMES[i],
            )
        )
    return planets


def build_sim(planets: list[dict], rand_seed: int = 1) -> rebound.Simulation:
    """A REBOUND simulation (heliocentric elements, COM frame, star radius R_sun)."""
    sim = rebound.Simulation()
    sim.G = G_AU_YR_MSUN
    sim.rand_seed = rand_seed
    sim.add(m=1.0, r=R_SUN_AU, name="star")
    star = sim.particles[0]
    for p in planets:
        sim.add(
            m=p["m"],
            r=p["r"],
            a=p["a"],
            e=p["e"],
            inc=p["inc"],
            Omega=p["Omega"],
            omega=p["omega"],
            M=p["M"],
            primary=star,
            name=p["name"],
        )
    sim.move_to_com()
    return sim

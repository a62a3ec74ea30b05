"""Initial conditions of one system: a pure function of the run seed and the system index.

Frame
-----
Elements are **astrocentric** (heliocentric: relative to the star, with the
two-body gravitational parameter G(M* + m_i)).  Reasons: (1) the outcome record
and the comparison with radial-velocity catalogues use astrocentric elements,
so a_initial and a_final are then in one frame; (2) the spacing rule in mutual
Hill radii and the Hill-stability criteria are stated with astrocentric
semi-major axes; (3) the difference from Jacobi elements is of order m_i/M*
(~1e-3 in a), far below the spread the distributions put in.  REBOUND's own
default (Jacobi) is therefore overridden: every planet is added with the star
as its primary.

Randomness
----------
Every system draws from its own numpy Generator seeded by :func:`system_seed`
(a 64-bit integer derived from ``SeedSequence(run_seed, spawn_key=(index,))``,
recorded in the outcome), so a system's initial conditions do not depend on
batching, worker count or the order in which systems run.  All draws are
uniform deviates taken in blocks of fixed length, in this order:

1. masses       : ``count`` deviates (one per planet, innermost first)
2. spacings     : ``count - 1`` deviates (one per neighbouring pair; drawn even
                  when the spec gives explicit semi-major axes)
3. eccentricity : ``count`` deviates (truncated Rayleigh on [0, 1))
4. inclination  : ``count`` deviates (truncated Rayleigh on [0, pi))
5. argument of pericentre, 6. longitude of node, 7. mean anomaly : ``count`` each

Each quantity is an inverse-CDF transform of one deviate, so the number of
draws never depends on the values drawn; a quantity added later goes in a new
block at the end and leaves every earlier draw unchanged.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scatter_pop.constants import G_AU_YR_MSUN
from scatter_pop.engine.stability import hill_factor
from scatter_pop.errors import InputError

__all__ = [
    "InitialSystem",
    "system_seed",
    "system_rng",
    "draw_system",
    "spaced_semi_major_axes",
    "true_anomaly",
    "DRAW_ORDER",
]

DRAW_ORDER = ("mass", "spacing", "e", "inc", "omega", "node", "mean_anomaly")


@dataclass(frozen=True)
class InitialSystem:
    """Initial conditions of one system (astrocentric elements).

    Attributes
    ----------
    star_mass : float
        M_sun.
    star_radius : float
        AU.
    mass, radius, a, e, inc, omega, node, mean_anomaly : tuple of float
        Per planet, innermost first: mass (M_sun), radius (AU), semi-major axis
        (AU), eccentricity, inclination, argument of pericentre, longitude of the
        ascending node and mean anomaly (rad).
    seed : int
        64-bit seed the draws came from (0 for hand-made systems).
    index : int
        System index within the run (-1 for hand-made systems).
    """

    star_mass: float
    star_radius: float
    mass: tuple[float, ...]
    radius: tuple[float, ...]
    a: tuple[float, ...]
    e: tuple[float, ...]
    inc: tuple[float, ...]
    omega: tuple[float, ...]
    node: tuple[float, ...]
    mean_anomaly: tuple[float, ...]
    seed: int = 0
    index: int = -1

    @property
    def count(self) -> int:
        return len(self.mass)

    def inner_period(self) -> float:
        """Astrocentric orbital period of the innermost bound planet (yr)."""
        bound = [k for k in range(self.count) if self.a[k] > 0.0]
        if not bound:
            raise InputError(
                "initial system: no planet on a bound orbit (every a <= 0); "
                "the inner period sets the time unit and needs one"
            )
        i = min(bound, key=lambda k: self.a[k])
        return 2.0 * math.pi * math.sqrt(self.a[i] ** 3 / (G_AU_YR_MSUN * (self.star_mass + self.mass[i])))


def true_anomaly(mean_anomaly: float, e: float) -> float:
    """True anomaly (rad) from the mean anomaly (rad) by Kepler's equation.

    Elliptic (e < 1): E - e sin E = M; hyperbolic (e > 1): e sinh F - F = M;
    parabolic (e = 1): Barker's equation M = D + D^3/3, D = tan(f/2).  Solved
    here because REBOUND 5.2.2 returns NaN positions for a hyperbolic orbit
    given M = 0.
    """
    m = float(mean_anomaly)
    if e < 1.0:
        m = math.remainder(m, 2.0 * math.pi)
        big = m + e * math.sin(m) if e < 0.8 else math.copysign(math.pi, m) if m else 0.0
        for _ in range(100):
            step = (big - e * math.sin(big) - m) / (1.0 - e * math.cos(big))
            big -= step
            if abs(step) < 1e-15:
                break
        return 2.0 * math.atan2(math.sqrt(1.0 + e) * math.sin(0.5 * big), math.sqrt(1.0 - e) * math.cos(0.5 * big))
    if e == 1.0:
        w = 1.5 * m
        y = math.cbrt(w + math.sqrt(w * w + 1.0))
        return 2.0 * math.atan(y - 1.0 / y)
    big = math.asinh(m / e)
    for _ in range(200):
        step = (e * math.sinh(big) - big - m) / (e * math.cosh(big) - 1.0)
        big -= step
        if abs(step) < 1e-15 * max(1.0, abs(big)):
            break
    return 2.0 * math.atan(math.sqrt((e + 1.0) / (e - 1.0)) * math.tanh(0.5 * big))


def system_seed(run_seed: int, index: int) -> int:
    """The 64-bit seed of system ``index`` of a run (numpy SeedSequence spawn key)."""
    if index < 0:
        raise InputError(f"system index = {index!r}: must be >= 0")
    seq = np.random.SeedSequence(int(run_seed), spawn_key=(int(index),))
    return int(seq.generate_state(1, dtype=np.uint64)[0])


def system_rng(seed: int) -> np.random.Generator:
    """The Generator all of a system's draws come from (PCG64 seeded with ``seed``)."""
    return np.random.Generator(np.random.PCG64(int(seed)))


def _rayleigh_truncated(u: float, sigma: float, upper: float) -> float:
    """Inverse CDF of a Rayleigh distribution of scale ``sigma`` truncated to [0, upper)."""
    if sigma == 0.0:
        return 0.0
    tail = math.exp(-0.5 * (upper / sigma) ** 2)
    return sigma * math.sqrt(-2.0 * math.log1p(-u * (1.0 - tail)))


def spaced_semi_major_axes(a_inner: float, spacings, masses, star_mass: float) -> tuple[float, ...]:
    """Semi-major axes with neighbours ``spacings`` mutual Hill radii apart.

    a_{i+1} - a_i = Delta_i k_i (a_i + a_{i+1})/2 with k_i = [(m_i + m_{i+1})/(3 M*)]^(1/3),
    hence a_{i+1} = a_i (1 + Delta_i k_i / 2) / (1 - Delta_i k_i / 2).

    Parameters
    ----------
    a_inner : float
        Innermost semi-major axis (AU).
    spacings : sequence of float
        Delta_i in mutual Hill radii (one per neighbouring pair).
    masses : sequence of float
        Planet masses (M_sun).
    star_mass : float
        M_sun.
    """
    a = [float(a_inner)]
    for i, delta in enumerate(spacings):
        half = 0.5 * delta * hill_factor(star_mass, masses[i], masses[i + 1])
        if half >= 1.0:
            raise InputError(
                f"planets.spacing = {delta!r} mutual Hill radii between planets {i} and {i + 1}: "
                f"too wide for these masses (needs Delta < {2.0 / (2.0 * half / delta):.4g})"
            )
        a.append(a[-1] * (1.0 + half) / (1.0 - half))
    return tuple(a)


def draw_system(spec, index: int) -> InitialSystem:
    """Draw the initial conditions of system ``index`` of the ensemble ``spec``.

    A pure function of (spec, index): same arguments, bitwise the same result.

    Parameters
    ----------
    spec : scatter_pop.spec.reader.EnsembleSpec
    index : int
        System index, 0 <= index < spec.run.systems is usual (not required).

    Returns
    -------
    InitialSystem
    """
    seed = system_seed(spec.run.seed, index)
    rng = system_rng(seed)
    pl, n = spec.planets, spec.planets.count
    masses = tuple(float(d.draw(rng)) for d in pl.masses)  # block 1
    if pl.spacing is not None:
        spacings = [float(pl.spacing.draw(rng)) for _ in range(n - 1)]  # block 2
        a = spaced_semi_major_axes(pl.a_inner, spacings, masses, spec.star.mass)
    else:
        rng.random(n - 1)  # block 2, unused
        a = tuple(float(x) for x in pl.a_list)
    if a[-1] >= spec.integration.ejection_distance:
        raise InputError(
            f"planets.spacing: the outermost planet starts at a = {a[-1]:.6g} AU, beyond "
            f"integration.ejection_distance = {spec.integration.ejection_distance!r} AU"
        )
    ecc = tuple(_rayleigh_truncated(float(u), pl.e_sigma, 1.0) for u in rng.random(n))  # block 3
    inc = tuple(_rayleigh_truncated(float(u), pl.inc_sigma, math.pi) for u in rng.random(n))  # block 4
    omega = tuple(float(x) for x in 2.0 * math.pi * rng.random(n))  # block 5
    node = tuple(float(x) for x in 2.0 * math.pi * rng.random(n))  # block 6
    mean_anomaly = tuple(float(x) for x in 2.0 * math.pi * rng.random(n))  # block 7
    if pl.radius is not None:
        radius = (float(pl.radius),) * n
    else:
        radius = tuple(math.cbrt(3.0 * m / (4.0 * math.pi * pl.density)) for m in masses)
    return InitialSystem(
        star_mass=spec.star.mass,
        star_radius=spec.star.radius,
        mass=masses,
        radius=radius,
        a=a,
        e=ecc,
        inc=inc,
        omega=omega,
        node=node,
        mean_anomaly=mean_anomaly,
        seed=seed,
        index=int(index),
    )

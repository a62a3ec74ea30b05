"""Assemble the outcome record of one system from its initial conditions and ledger.

Pure bookkeeping (no REBOUND): :mod:`scatter_pop.engine.rebound_run` hands over the
state of every surviving planet as a :class:`~scatter_pop.engine.ledger.FateEntry`
(astrocentric elements at the end) together with the end-of-run totals.
"""

from __future__ import annotations

import math

import numpy as np

from scatter_pop.engine.initial_conditions import InitialSystem
from scatter_pop.engine.ledger import Ledger
from scatter_pop.engine.outcome import EndReason, Fate, PlanetRecord, SystemRecord
from scatter_pop.engine.settlement import classify

__all__ = ["build_record", "planet_name", "planet_index"]


def planet_name(i: int) -> str:
    """Name of planet i (initial order, innermost first) in the simulation."""
    return f"p{i}"


def planet_index(name: str) -> int:
    """Initial index of the planet called ``name``."""
    return int(name[1:])


def build_record(
    initial: InitialSystem,
    ledger: Ledger,
    survivors: dict,
    *,
    reason: EndReason,
    t_end: float,
    energy: float,
    angmom,
    steps: int,
    integrator: str,
    circularisation_q: float,
    star_mass: float | None = None,
    t_limit: float = math.nan,
    hill_margin: float = 1.01,
    hill_ratio: float = math.nan,
    recent_gap: float = math.nan,
    lanes: int = 0,
) -> SystemRecord:
    """The SystemRecord of a finished (or capped) integration.

    Parameters
    ----------
    initial : InitialSystem
    ledger : Ledger
        Fates of removed planets, removed energy and angular momentum, timings.
    survivors : dict
        Planet name -> FateEntry (fate SURVIVED) with its final astrocentric state.
    reason : EndReason
    t_end : float
        Time the integration stopped (yr).
    energy : float
        Total energy now (M_sun AU^2 yr^-2).
    angmom : array (3,)
        Total angular momentum now (M_sun AU^2 yr^-1).
    steps : int
        Integrator steps taken.
    integrator : str
    circularisation_q : float
        Survivors with pericentre below this (AU) are flagged as tidal candidates.
    star_mass : float, optional
        The star's mass at the end (M_sun), for the settlement class (default: the initial one).
    t_limit : float
        The end time the system was integrated towards (yr); NaN: not continuable to a later one.
    hill_margin : float
        ``integration.hill_margin`` (default: the spec's default).
    hill_ratio, recent_gap : float
        Exact Hill ratio of a pair at the end and the smallest recent osculating gap (mutual Hill
        radii), see :mod:`scatter_pop.engine.settlement`.

    A planet still in the simulation whose astrocentric orbit is not an ellipse (a <= 0 or e >= 1)
    gets the fate ``UNBOUND``, not ``SURVIVED``: survivors are bound planets.
    lanes : int
        SIMD lanes of the batch integrator that ran the system (0: one system at a time).
    """
    planets = []
    for i in range(initial.count):
        name = planet_name(i)
        state = survivors.get(name) or ledger.fates[name]
        alive = name in survivors
        fate = Fate(state.fate)
        if alive and not (state.a > 0 and 0 <= state.e < 1):
            fate, alive = Fate.UNBOUND, False
        planets.append(
            PlanetRecord(
                mass_initial=initial.mass[i],
                a_initial=initial.a[i],
                e_initial=initial.e[i],
                inc_initial=initial.inc[i],
                radius_initial=initial.radius[i],
                mass_final=state.mass,
                a_final=state.a,
                e_final=state.e,
                inc_final=state.inc,
                q_final=state.q,
                radius_final=state.radius,
                omega_final=state.omega,
                node_final=state.node,
                fate=fate,
                t_fate=math.nan if name in survivors else state.t,
                merged_into=state.merged_into,
                tidal_candidate=bool(alive and state.q < circularisation_q),
            )
        )
    l_now = np.asarray(angmom, dtype=float) + np.asarray(ledger.angmom_removed)
    l0 = np.asarray(ledger.l0)
    settlement = classify(
        reason,
        planets,
        initial.star_mass if star_mass is None else star_mass,
        hill_ratio=hill_ratio,
        recent_gap=recent_gap,
        hill_margin=hill_margin,
    )
    return SystemRecord(
        index=initial.index,
        seed=initial.seed,
        planets=tuple(planets),
        t_end=float(t_end),
        end_reason=reason,
        t_first_encounter=ledger.t_first_encounter,
        energy_error=float((energy + ledger.energy_removed - ledger.e0) / abs(ledger.e0)),
        angmom_error=float(np.linalg.norm(l_now - l0) / ledger.l_scale),
        steps=int(steps),
        wall_seconds=ledger.wall_seconds,
        integrator=integrator,
        t_limit=float(t_limit),
        hill_ratio=float(hill_ratio),
        recent_gap=float(recent_gap),
        settlement=settlement,
        lanes=int(lanes),
    )

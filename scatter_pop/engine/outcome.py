"""Outcome records: what happened to each planet of one integrated system.

Plain frozen values, produced by :mod:`scatter_pop.engine.rebound_run` and turned into
the ensemble dataset by :mod:`scatter_pop.store.schema`.  Units: AU, yr, M_sun,
angles in radians.  Orbital elements are astrocentric (relative to the star).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import IntEnum

__all__ = ["Fate", "EndReason", "Settlement", "PlanetRecord", "SystemRecord", "NO_PLANET"]

NO_PLANET = -1  # value of ``merged_into`` when a planet did not merge


class Fate(IntEnum):
    """What became of one planet (codes stored as int8 with CF flag_values)."""

    SURVIVED = 0  # still orbiting at the end
    EJECTED = 1  # unbound and beyond the ejection distance; removed
    MERGED = 2  # collided with another planet and merged into it
    HIT_STAR = 3  # physical collision with the star
    DISRUPTED = 4  # pericentre inside eta * r_t: tidally disrupted
    UNBOUND = 5  # still in the system at the end, but its astrocentric orbit is not an ellipse

    @property
    def word(self) -> str:
        return _FATE_WORDS[self]


_FATE_WORDS = {
    Fate.SURVIVED: "survived",
    Fate.EJECTED: "ejected",
    Fate.MERGED: "merged",
    Fate.HIT_STAR: "hit_star",
    Fate.DISRUPTED: "tidally_disrupted",
    Fate.UNBOUND: "unbound_at_end",
}


class EndReason(IntEnum):
    """Which rule ended the integration of a system."""

    END_TIME = 0  # stopped at the spec's end time with no stopping rule met: a snapshot
    ONE_PLANET = 1  # one planet left: nothing more can happen
    HILL_STABLE = 2  # two planets left, Hill stable with the safety margin
    NO_PLANETS = 3  # every planet removed
    CAPPED = 4  # wall-clock cap reached; checkpoint kept, can be extended
    FAILED = 5  # the worker died on this system too often; no result

    @property
    def word(self) -> str:
        return _END_WORDS[self]


_END_WORDS = {
    EndReason.END_TIME: "stopped_at_end_time",
    EndReason.ONE_PLANET: "one_planet_left",
    EndReason.HILL_STABLE: "hill_stable_pair",
    EndReason.NO_PLANETS: "no_planet_left",
    EndReason.CAPPED: "stopped_by_wall_clock_cap",
    EndReason.FAILED: "failed",
}


class Settlement(IntEnum):
    """Whether a system's outcome is final (rule in :mod:`scatter_pop.engine.settlement`)."""

    SETTLED = 0  # one planet (or none) left, or a pair Hill stable by the exact criterion
    LIKELY_STABLE = 1  # a pair meeting the Petrovich (2015) criterion in its range, no recent approach
    UNSETTLED = 2  # a snapshot: the orbits may still change

    @property
    def word(self) -> str:
        return _SETTLEMENT_WORDS[self]


_SETTLEMENT_WORDS = {
    Settlement.SETTLED: "settled",
    Settlement.LIKELY_STABLE: "likely_stable",
    Settlement.UNSETTLED: "unsettled",
}


@dataclass(frozen=True)
class PlanetRecord:
    """Initial and final state of one planet.

    For a removed planet the ``*_final`` elements are those at the moment of
    its fate (e.g. ``e_final > 1`` for an ejected one); ``mass_final`` of a
    planet that merged is its mass just before the merger.
    """

    mass_initial: float  # M_sun
    a_initial: float  # AU
    e_initial: float
    inc_initial: float  # rad, to the initial reference plane
    radius_initial: float  # AU
    mass_final: float  # M_sun
    a_final: float  # AU (negative when unbound)
    e_final: float
    inc_final: float  # rad
    q_final: float  # AU, pericentre distance a(1-e)
    radius_final: float  # AU
    omega_final: float = math.nan  # rad, argument of pericentre
    node_final: float = math.nan  # rad, longitude of ascending node
    fate: Fate = Fate.SURVIVED
    t_fate: float = math.nan  # yr; NaN for survivors
    merged_into: int = NO_PLANET  # planet index it merged into
    tidal_candidate: bool = False  # survivor with q below the circularisation threshold


@dataclass(frozen=True)
class SystemRecord:
    """Outcome of one system of the ensemble."""

    index: int  # system index within the run
    seed: int  # 64-bit seed this system's draws came from
    planets: tuple[PlanetRecord, ...]
    t_end: float  # yr, time the integration stopped
    end_reason: EndReason
    t_first_encounter: float = math.nan  # yr, first separation < 1 mutual Hill radius
    energy_error: float = math.nan  # relative, corrected for mergers/removals
    angmom_error: float = math.nan  # relative, corrected likewise
    steps: int = 0
    wall_seconds: float = 0.0
    attempts: int = 1  # times the system was started (worker deaths)
    integrator: str = ""
    t_limit: float = math.nan  # yr, the end time the system was integrated towards
    hill_ratio: float = math.nan  # exact Marchal-Bozis ratio of a pair at the end (NaN unless 2 planets)
    recent_gap: float = math.nan  # min (q_out - Q_in) / R_H,m at the last checks (NaN: no full window)
    settlement: Settlement = Settlement.UNSETTLED
    lanes: int = 0  # SIMD lanes of the batch integrator that ran it (0: one system at a time)

    def count(self, fate: Fate) -> int:
        return sum(1 for p in self.planets if p.fate == fate)

    @property
    def n_survivors(self) -> int:
        return self.count(Fate.SURVIVED) if self.end_reason != EndReason.FAILED else 0

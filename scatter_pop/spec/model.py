"""The ensemble spec as values: frozen dataclasses in the package's units (AU, yr, M_sun, radians).

:mod:`scatter_pop.spec.reader` builds them from a TOML file, checking every key; everything downstream
reads these values only.  :meth:`EnsembleSpec.identity` is what fixes every system's result, and
:meth:`EnsembleSpec.lineage` the same without the end time (a run folder's records carry over when the
end time is raised).
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import asdict, dataclass, field
from typing import Any

__all__ = [
    "Distribution",
    "RunSpec",
    "StarSpec",
    "PlanetsSpec",
    "IntegrationSpec",
    "OutcomeSpec",
    "EnsembleSpec",
    "DISTRIBUTIONS",
    "END_KEYS",
]

DISTRIBUTIONS = ("fixed", "uniform", "log-uniform", "power-law")


# --------------------------------------------------------------------------- values
@dataclass(frozen=True)
class Distribution:
    """A one-dimensional distribution a spec value is drawn from.

    ``kind`` is "fixed" (``low`` is the value), "uniform" or "log-uniform" on
    [low, high], or "power-law" with dN/dx proportional to x**index on [low, high].
    """

    kind: str
    low: float
    high: float
    index: float = 0.0

    def draw(self, rng) -> float:
        """One draw using ``rng`` (a numpy Generator); always consumes one uniform."""
        u = rng.random()
        if self.kind == "fixed":
            return self.low
        if self.kind == "uniform":
            return self.low + u * (self.high - self.low)
        if self.kind == "log-uniform":
            return math.exp(math.log(self.low) + u * (math.log(self.high) - math.log(self.low)))
        g = self.index + 1.0  # power-law: inverse CDF
        if abs(g) < 1e-12:
            return math.exp(math.log(self.low) + u * (math.log(self.high) - math.log(self.low)))
        return (self.low**g + u * (self.high**g - self.low**g)) ** (1.0 / g)

    def scaled(self, factor: float) -> Distribution:
        return Distribution(self.kind, self.low * factor, self.high * factor, self.index)


@dataclass(frozen=True)
class RunSpec:
    name: str
    seed: int
    systems: int
    batch_size: int = 0  # 0: chosen by the ensemble driver


@dataclass(frozen=True)
class StarSpec:
    mass: float  # M_sun
    radius: float  # AU


@dataclass(frozen=True)
class PlanetsSpec:
    count: int
    masses: tuple[Distribution, ...]  # one per planet, M_sun
    a_inner: float | None  # AU (with spacing)
    spacing: Distribution | None  # mutual Hill radii between neighbours
    a_list: tuple[float, ...] | None  # AU, explicit semi-major axes
    e_sigma: float  # Rayleigh scale of e
    inc_sigma: float  # Rayleigh scale of inclination, rad
    density: float | None  # M_sun / AU^3
    radius: float | None  # AU


END_KEYS = ("end_time", "end_orbits")  # the integration keys that set where a run ends


@dataclass(frozen=True)
class IntegrationSpec:
    integrator: str = "taylor"  # falls back to FALLBACK_INTEGRATOR where heyoka cannot be imported
    end_time: float | None = None  # yr
    end_orbits: float | None = None  # initial inner orbits
    epsilon: float = 1e-9  # IAS15 accuracy parameter
    bs_epsilon: float = 1e-10  # BS tolerance (integrator bs)
    taylor_tolerance: float = 1e-12  # heyoka Taylor-series tolerance (integrator taylor)
    steps_per_orbit: float = 50.0  # hybrid step = current shortest period / this
    r_crit_hill: float = 3.0  # hybrid switching radius, in Hill radii
    ejection_distance: float = 1000.0  # AU from the star
    wall_seconds_max: float = 7200.0  # per system
    check_orbits: float = 100.0  # initial inner orbits between stopping checks
    stop_when_settled: bool = True  # False: reference mode, run to the end time
    hill_margin: float = 1.01  # Hill-stable pair needs LHS/RHS >= this (see README)

    def end_time_years(self, inner_period: float) -> float:
        """End time in years given the initial inner period (yr)."""
        return self.end_time if self.end_time is not None else self.end_orbits * inner_period


@dataclass(frozen=True)
class OutcomeSpec:
    disruption_eta: float = 2.7  # disrupted if q < eta * R_p (M*/M_p)^(1/3)
    circularisation_q: float = 0.05  # AU; survivors with q below are flagged


@dataclass(frozen=True)
class EnsembleSpec:
    run: RunSpec
    star: StarSpec
    planets: PlanetsSpec
    integration: IntegrationSpec
    outcomes: OutcomeSpec
    cluster: Any = None  # scatter_pop.ensemble.cluster.ClusterConfig
    text: str = field(default="", compare=False, repr=False)  # the TOML as read
    source: str = field(default="", compare=False)

    def identity(self) -> dict:
        """What fixes every system's result: two specs with equal identity give equal
        records for equal indices.  Excludes the run name, the number of systems,
        batching, the wall-clock cap and the cluster (none changes a system's result)."""
        integ = asdict(self.integration)
        integ.pop("wall_seconds_max")
        return {
            "seed": self.run.seed,
            "star": asdict(self.star),
            "planets": asdict(self.planets),
            "integration": integ,
            "outcomes": asdict(self.outcomes),
        }

    def digest(self) -> str:
        """SHA-256 of :meth:`identity` (canonical JSON)."""
        text = json.dumps(self.identity(), sort_keys=True, default=repr)
        return hashlib.sha256(text.encode()).hexdigest()

    def lineage(self) -> dict:
        """:meth:`identity` without the end time (``integration.end_time`` / ``end_orbits``): specs of
        equal lineage integrate every system along the same trajectory, only for longer or shorter,
        so a run folder's records carry over when the end time is raised."""
        ident = self.identity()
        for key in END_KEYS:
            ident["integration"].pop(key)
        return ident

    def lineage_digest(self) -> str:
        """SHA-256 of :meth:`lineage` (canonical JSON): what a run folder's part files belong to."""
        text = json.dumps(self.lineage(), sort_keys=True, default=repr)
        return hashlib.sha256(text.encode()).hexdigest()

    def end_setting(self) -> tuple[str, float]:
        """The end-time key in use and its value: ``("end_time", yr)`` or ``("end_orbits", orbits)``."""
        integ = self.integration
        return ("end_time", integ.end_time) if integ.end_time is not None else ("end_orbits", integ.end_orbits)

"""The ensemble spec: a TOML file read once into frozen dataclasses.

Every key is checked here, at load time: an unknown key, a value of the wrong
type or out of range raises :class:`~scatter_pop.errors.InputError` with one
line naming the key, the value and what is allowed.  Units are converted once,
here, from the user's units (M_J, R_sun, R_J, g/cm^3, degrees) to the units
used everywhere else (AU, yr, M_sun, radians).  README.md documents every key.
"""

from __future__ import annotations

import hashlib
import json
import math
import sys
import tomllib
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from scatter_pop.constants import GCM3_MSUN_AU3, MJUP_MSUN, R_JUP_AU, R_SUN_AU
from scatter_pop.engine.backends import backend, backend_names
from scatter_pop.errors import InputError
from scatter_pop.spec.keys import Table, coerce, toml_repr

__all__ = [
    "Distribution",
    "RunSpec",
    "StarSpec",
    "PlanetsSpec",
    "IntegrationSpec",
    "OutcomeSpec",
    "EnsembleSpec",
    "load_spec",
    "with_systems",
    "parse_spec",
    "INTEGRATORS",
]

INTEGRATORS = backend_names()  # one module each under scatter_pop/engine/backends/
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


#: The keys each section takes (docs/spec.md lists every one; tests/spec/test_spec.py checks it).
KEYS = {
    "run": ("name", "seed", "systems", "batch_size"),
    "star": ("mass", "radius"),
    "planets": ("count", "mass", "masses", "a", "a_inner", "spacing", "e_sigma", "inc_sigma", "density", "radius"),
    "integration": tuple(IntegrationSpec.__dataclass_fields__),
    "outcomes": tuple(OutcomeSpec.__dataclass_fields__),
}


# --------------------------------------------------------------------------- checking
def _positive(x):
    return x > 0


def _distribution(value, key: str, *, positive=True) -> Distribution:
    """A number (fixed) or a table {distribution=..., low=, high=, [index=]}."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        value = float(value)
        if positive and not value > 0 or not math.isfinite(value):
            raise InputError(f"{key} = {toml_repr(value)}: must be > 0")
        return Distribution("fixed", value, value)
    if not isinstance(value, dict):
        raise InputError(
            f'{key} = {toml_repr(value)}: must be a number or a table {{distribution = "uniform", low = ..., high = ...}}'
        )
    sec = Table(value, key)
    kind = sec.get(
        "distribution",
        str,
        required=True,
        check=lambda s: s in DISTRIBUTIONS,
        allowed="one of " + ", ".join(DISTRIBUTIONS),
    )
    if kind == "fixed":
        v = sec.get("value", float, required=True, check=_positive, allowed="> 0")
        sec.finish({"distribution", "value"})
        return Distribution("fixed", v, v)
    low = sec.get("low", float, required=True, check=_positive, allowed="> 0")
    high = sec.get("high", float, required=True, check=lambda h: h >= low, allowed=f">= low ({low!r})")
    index = 0.0
    keys = {"distribution", "low", "high"}
    if kind == "power-law":
        index = sec.get("index", float, required=True, allowed="the exponent of dN/dx ~ x^index")
        keys.add("index")
    sec.finish(keys)
    return Distribution(kind, low, high, index)


# --------------------------------------------------------------------------- sections
def _run(table) -> RunSpec:
    s = Table(table, "run")
    name = s.get("name", str, "ensemble", check=lambda n: n.strip() != "", allowed="a non-empty string")
    seed = s.get("seed", int, required=True, check=lambda x: 0 <= x < 2**63, allowed="an integer from 0 to 2^63-1")
    systems = s.get(
        "systems", int, required=True, check=lambda x: 1 <= x <= 10_000_000, allowed="an integer from 1 to 10000000"
    )
    batch = s.get("batch_size", int, 0, check=lambda x: x >= 0, allowed=">= 0 (0: automatic)")
    s.finish(KEYS["run"])
    return RunSpec(name, seed, systems, batch)


def _star(table) -> StarSpec:
    s = Table(table, "star")
    mass = s.get("mass", float, required=True, check=lambda m: 0 < m <= 100, allowed="in M_sun, > 0 and <= 100")
    radius = s.get("radius", float, 1.0, check=lambda r: 0 < r <= 1000, allowed="in R_sun, > 0 and <= 1000")
    s.finish(KEYS["star"])
    return StarSpec(mass, radius * R_SUN_AU)


def _planets(table) -> PlanetsSpec:
    s = Table(table, "planets")
    count = s.get("count", int, required=True, check=lambda n: 2 <= n <= 10, allowed="an integer from 2 to 10")
    if s.has("mass") == s.has("masses"):
        raise InputError(
            "planets.mass / planets.masses: give exactly one (mass: one distribution shared "
            "by all planets; masses: a list with one per planet), in M_J"
        )
    if s.has("mass"):
        shared = _distribution(s.table["mass"], s.name("mass"))
        masses = (shared,) * count
    else:
        items = s.table["masses"]
        if not isinstance(items, list) or len(items) != count:
            raise InputError(
                f"planets.masses = {toml_repr(items)}: must be a list of {count} masses or "
                f"distributions (planets.count = {count})"
            )
        masses = tuple(_distribution(v, f"planets.masses[{i}]") for i, v in enumerate(items))
    masses = tuple(d.scaled(MJUP_MSUN) for d in masses)
    for i, d in enumerate(masses):
        if d.high > 0.1:
            raise InputError(
                f"planets.masses[{i}]: upper mass {d.high / MJUP_MSUN:g} M_J: must be <= 104 M_J (0.1 M_sun)"
            )

    a_inner = spacing = a_list = None
    if s.has("a"):
        if s.has("a_inner") or s.has("spacing"):
            raise InputError("planets.a: give either a (explicit list) or a_inner with spacing, not both")
        items = s.table["a"]
        if not isinstance(items, list) or len(items) != count:
            raise InputError(f"planets.a = {toml_repr(items)}: must be a list of {count} semi-major axes in AU")
        a_list = tuple(coerce(v, float, f"planets.a[{i}]", "in AU") for i, v in enumerate(items))
        if any(x <= 0 for x in a_list) or any(b <= a for a, b in zip(a_list, a_list[1:])):
            raise InputError(f"planets.a = {toml_repr(list(a_list))}: must be positive and increasing (AU)")
    else:
        a_inner = s.get(
            "a_inner", float, required=True, check=_positive, allowed="in AU, > 0 (or give planets.a as a list)"
        )
        if not s.has("spacing"):
            raise InputError("planets.spacing is missing: a number or a uniform range, in mutual Hill radii")
        spacing = _distribution(s.table["spacing"], s.name("spacing"))
        if spacing.kind not in ("fixed", "uniform"):
            raise InputError(f"planets.spacing.distribution = {toml_repr(spacing.kind)}: must be fixed or uniform")
    e_sigma = s.get("e_sigma", float, 0.0, check=lambda x: 0 <= x < 1, allowed=">= 0 and < 1")
    inc_deg = s.get("inc_sigma", float, 0.0, check=lambda x: 0 <= x <= 90, allowed="in degrees, >= 0 and <= 90")
    if s.has("density") and s.has("radius"):
        raise InputError("planets.density / planets.radius: give one (bulk density in g/cm^3, or radius in R_J)")
    density = radius = None
    if s.has("radius"):
        radius = s.get("radius", float, check=lambda r: 0 < r <= 10, allowed="in R_J, > 0 and <= 10") * R_JUP_AU
    else:
        density = (
            s.get("density", float, 1.33, check=lambda r: 0.01 <= r <= 100, allowed="in g/cm^3, from 0.01 to 100")
            * GCM3_MSUN_AU3
        )
    s.finish(KEYS["planets"])
    return PlanetsSpec(count, masses, a_inner, spacing, a_list, e_sigma, math.radians(inc_deg), density, radius)


FALLBACK_INTEGRATOR = "bs"  # used when the default's package cannot be imported here


def _default_integrator(default: str) -> str:
    """The default integrator, or :data:`FALLBACK_INTEGRATOR` with a one-line notice on stderr when the
    default's package cannot be imported in this Python."""
    why = backend(default).unavailable()
    if why is None:
        return default
    if not _NOTICES:
        print(
            f"notice: integration.integrator not given and the default {default!r} is unavailable ({why}); "
            f"using {FALLBACK_INTEGRATOR!r}",
            file=sys.stderr,
        )
        _NOTICES.add(default)
    return FALLBACK_INTEGRATOR


_NOTICES: set = set()


def _integration(table) -> IntegrationSpec:
    s = Table(table, "integration")
    d = IntegrationSpec()
    if s.has("integrator"):
        integrator = s.get(
            "integrator",
            str,
            d.integrator,
            check=lambda x: x in INTEGRATORS,
            allowed="one of " + ", ".join(INTEGRATORS),
        )
        why = backend(integrator).unavailable()
        if why is not None:
            others = [n for n in INTEGRATORS if n != integrator and backend(n).unavailable() is None]
            raise InputError(
                f"integration.integrator = {integrator!r}: unavailable in this Python ({why}); "
                f"install it or choose one of {', '.join(others)}"
            )
    else:
        integrator = _default_integrator(d.integrator)
    if s.has("end_time") == s.has("end_orbits"):
        raise InputError(
            "integration.end_time / integration.end_orbits: give exactly one "
            "(end_time in yr, or end_orbits in initial inner orbits)"
        )
    end_time = s.get("end_time", float, check=lambda x: 0 < x <= 1e11, allowed="in yr, > 0 and <= 1e11")
    end_orbits = s.get(
        "end_orbits", float, check=lambda x: 0 < x <= 1e12, allowed="in initial inner orbits, > 0 and <= 1e12"
    )
    spec = IntegrationSpec(
        integrator=integrator,
        end_time=end_time,
        end_orbits=end_orbits,
        epsilon=s.get("epsilon", float, d.epsilon, check=lambda x: 0 < x < 1, allowed="> 0 and < 1"),
        bs_epsilon=s.get("bs_epsilon", float, d.bs_epsilon, check=lambda x: 0 < x < 1, allowed="> 0 and < 1"),
        taylor_tolerance=s.get(
            "taylor_tolerance", float, d.taylor_tolerance, check=lambda x: 1e-18 <= x < 1, allowed=">= 1e-18 and < 1"
        ),
        steps_per_orbit=s.get("steps_per_orbit", float, d.steps_per_orbit, check=lambda x: x >= 5, allowed=">= 5"),
        r_crit_hill=s.get("r_crit_hill", float, d.r_crit_hill, check=_positive, allowed="> 0 (Hill radii)"),
        ejection_distance=s.get("ejection_distance", float, d.ejection_distance, check=_positive, allowed="in AU, > 0"),
        wall_seconds_max=s.get(
            "wall_seconds_max",
            float,
            d.wall_seconds_max,
            check=lambda x: 0 < x <= 1e9,
            allowed="in seconds, > 0 and <= 1e9",
        ),
        check_orbits=s.get(
            "check_orbits", float, d.check_orbits, check=_positive, allowed="in initial inner orbits, > 0"
        ),
        stop_when_settled=s.get("stop_when_settled", bool, d.stop_when_settled),
        hill_margin=s.get("hill_margin", float, d.hill_margin, check=lambda x: x >= 1, allowed=">= 1"),
    )
    s.finish(KEYS["integration"])
    return spec


def _outcomes(table) -> OutcomeSpec:
    s = Table(table, "outcomes", required=False)
    d = OutcomeSpec()
    spec = OutcomeSpec(
        disruption_eta=s.get(
            "disruption_eta", float, d.disruption_eta, check=lambda x: 0 < x <= 100, allowed="> 0 and <= 100"
        ),
        circularisation_q=s.get(
            "circularisation_q", float, d.circularisation_q, check=lambda x: x >= 0, allowed="in AU, >= 0"
        ),
    )
    s.finish(KEYS["outcomes"])
    return spec


SECTIONS = ("run", "star", "planets", "integration", "outcomes", "cluster")


# --------------------------------------------------------------------------- checks across sections
def _widest_layout(star: StarSpec, planets: PlanetsSpec) -> tuple[float, ...]:
    """Initial semi-major axes of the widest system the spec can draw (AU): every mass and spacing at
    its upper end (a_{i+1}/a_i grows with both), by the engine's own spacing rule."""
    if planets.a_list is not None:
        return planets.a_list
    from scatter_pop.engine.initial_conditions import spaced_semi_major_axes  # the one spacing rule

    return spaced_semi_major_axes(
        planets.a_inner, [planets.spacing.high] * (planets.count - 1), [m.high for m in planets.masses], star.mass
    )


def _check_spacing_fits(star: StarSpec, planets: PlanetsSpec) -> None:
    """planets.spacing: every pair must fit (Delta k / 2 < 1), else the orbits cannot be placed."""
    _widest_layout(star, planets)  # raises InputError naming planets.spacing


def _check_inside_ejection_distance(star: StarSpec, planets: PlanetsSpec, integration: IntegrationSpec) -> None:
    """integration.ejection_distance must exceed the outermost initial orbit of every system."""
    widest = _widest_layout(star, planets)[-1]
    if widest >= integration.ejection_distance:
        how = "the outermost initial semi-major axis" if planets.a_list else "the widest outermost initial orbit"
        raise InputError(
            f"integration.ejection_distance = {integration.ejection_distance!r}: must exceed {how} "
            f"({widest:.6g} AU, with the largest masses and spacing); raise it or narrow planets.spacing / planets.a"
        )


def _check_star_inside_orbits(star: StarSpec, planets: PlanetsSpec) -> None:
    """star.radius must be smaller than the innermost initial semi-major axis."""
    inner = planets.a_list[0] if planets.a_list is not None else planets.a_inner
    if star.radius >= inner:
        raise InputError(
            f"star.radius = {star.radius / R_SUN_AU:g}: the star ({star.radius:.4g} AU) reaches the innermost "
            f"initial orbit ({inner:g} AU); allowed: a radius in R_sun below {inner / R_SUN_AU:.4g}"
        )


def parse_spec(text: str, source: str = "<spec>") -> EnsembleSpec:
    """Parse and check a spec given as TOML text (a leading byte-order mark is ignored)."""
    text = text.removeprefix("\ufeff")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{source}: not valid TOML: {exc}") from None
    for key in doc:
        if key not in SECTIONS:
            raise InputError(f"[{key}]: unknown section; allowed sections: {', '.join(SECTIONS)}")
    run, star, planets = _run(doc.get("run")), _star(doc.get("star")), _planets(doc.get("planets"))
    integration, outcomes = _integration(doc.get("integration")), _outcomes(doc.get("outcomes"))
    _check_spacing_fits(star, planets)
    _check_inside_ejection_distance(star, planets, integration)
    _check_star_inside_orbits(star, planets)
    cluster_table = doc.get("cluster", {})
    if not isinstance(cluster_table, dict):
        raise InputError(f"cluster = {toml_repr(cluster_table)}: must be a table [cluster]")
    from scatter_pop.spec.cluster_table import ClusterConfig  # the cluster table is checked by its own module

    cluster = ClusterConfig.from_table(cluster_table)
    return EnsembleSpec(run, star, planets, integration, outcomes, cluster, text=text, source=source)


def with_systems(spec: EnsembleSpec, systems: int) -> EnsembleSpec:
    """The same spec with ``run.systems`` set to ``systems`` (its TOML text edited, so that the text
    a run folder keeps parses back to it)."""
    import re

    if systems < 1:
        raise InputError(f"run.systems {systems}: must be an integer >= 1")
    text = spec.text
    head = re.search(r"(?m)^\s*\[run\]\s*(#.*)?$", text)
    if head is None:
        raise InputError("spec: no [run] table to set run.systems in")
    nxt = re.search(r"(?m)^\s*\[", text[head.end() :])
    end = head.end() + (nxt.start() if nxt else len(text) - head.end())
    body = text[head.end() : end]
    line = re.compile(r"(?m)^(\s*systems\s*=\s*)[0-9_]+")
    body = (
        line.sub(lambda m: f"{m.group(1)}{systems}", body, count=1)
        if line.search(body)
        else f"\nsystems = {systems}" + body
    )
    out = parse_spec(text[: head.end()] + body + text[end:], spec.source or "<spec>")
    if out.run.systems != systems or out.lineage_digest() != spec.lineage_digest():
        raise InputError("spec: run.systems could not be set in its text; write it as `systems = N` in [run]")
    return out


def load_spec(path) -> EnsembleSpec:
    """Read and check a spec file (TOML)."""
    path = Path(path)
    try:
        text = path.read_bytes().decode("utf-8-sig")  # a byte-order mark (editor exports) is accepted
    except FileNotFoundError:
        raise InputError(f"spec file {str(path)!r} does not exist") from None
    except IsADirectoryError:
        raise InputError(f"spec file {str(path)!r} is a folder; expected a TOML file") from None
    except UnicodeDecodeError as exc:
        raise InputError(f"spec file {str(path)!r}: byte {exc.start} is not UTF-8; save the file as UTF-8") from None
    except OSError as exc:
        raise InputError(f"spec file {str(path)!r} cannot be read ({exc.strerror})") from None
    return parse_spec(text, source=str(path))

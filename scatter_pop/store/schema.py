"""The ensemble dataset: names, dtypes, units and CF attributes, defined once.

Dimensions
----------
``system``  one entry per integrated system (coordinate: the system index);
``planet``  planets of a system in their initial order, innermost first
            (coordinate 0..N-1).

Every variable carries ``units`` (strings udunits-2 parses, meaning what the code computes) and
``long_name``; categorical variables are int8 codes with CF ``flag_values`` / ``flag_meanings``.
Units: lengths in ``au`` (IAU 2012 B2), times in ``365.25 day`` (the Julian year; udunits' ``yr`` is the
tropical year), masses in nominal solar masses written as ``MASS_UNITS`` kg ((GM)_sun of IAU 2015 B3
over G of CODATA 2018).  int8 variables have ``_FillValue`` -1: a system that failed has no outcome, so
its fates and counts are missing, not a code (``merged_into`` -1: did not merge).  Everything a reader
needs to interpret a file is in this module; :func:`records_to_dataset` is the only place that builds a
dataset from outcome records.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import xarray as xr

from scatter_pop.constants import M_SUN_KG
from scatter_pop.engine.outcome import EndReason, Fate, Settlement, SystemRecord
from scatter_pop.engine.settlement import RULE as SETTLEMENT_RULE

__all__ = [
    "Var",
    "VARIABLES",
    "PLANET_VARIABLES",
    "SYSTEM_VARIABLES",
    "PHYSICS_VARIABLES",
    "ENERGY_TOLERANCE_DEFAULT",
    "QualityCuts",
    "FILL_INT",
    "YEAR_UNITS",
    "MASS_UNITS",
    "LENGTH_UNITS",
    "netcdf_encoding",
    "records_to_dataset",
    "validate_dataset",
    "quality_mask",
    "survivor_mask",
    "settlement_mask",
    "SETTLEMENT_RULE",
]

FILL_INT = -1  # _FillValue of int8 variables: no result (failed system) or not applicable
YEAR_UNITS = "365.25 day"  # the Julian year (IAU); udunits' "yr" / "year" is the tropical year
MASS_UNITS = f"{M_SUN_KG:.10g} kg"  # the nominal solar mass; udunits has no solar-mass unit
LENGTH_UNITS = "au"  # udunits: 149597870700 m (IAU 2012 B2)
MASS_COMMENT = "nominal solar masses: (GM)_sun (IAU 2015 Resolution B3) / G (CODATA 2018)"
ENERGY_TOLERANCE_DEFAULT = 1e-4  # |dE/E| above this: flagged, left out of statistics


@dataclass(frozen=True)
class Var:
    name: str
    dims: tuple[str, ...]
    dtype: str
    units: str
    long_name: str
    flags: type | None = None  # IntEnum whose codes the variable holds, or a (values, meanings) pair
    physics: bool = True  # part of the bit-for-bit reproducibility promise


P = ("system", "planet")
S = ("system",)

VARIABLES: tuple[Var, ...] = (
    # per planet
    Var("mass_initial", P, "f8", MASS_UNITS, "initial planet mass"),
    Var("a_initial", P, "f8", LENGTH_UNITS, "initial astrocentric semi-major axis"),
    Var("e_initial", P, "f8", "1", "initial eccentricity"),
    Var("inc_initial", P, "f8", "rad", "initial inclination to the reference plane"),
    Var("radius_initial", P, "f8", LENGTH_UNITS, "initial physical planet radius"),
    Var("mass_final", P, "f8", MASS_UNITS, "planet mass at the end or at its fate"),
    Var(
        "a_final", P, "f8", LENGTH_UNITS, "astrocentric semi-major axis at the end or at its fate (negative if unbound)"
    ),
    Var("e_final", P, "f8", "1", "eccentricity at the end or at its fate"),
    Var("inc_final", P, "f8", "rad", "inclination to the initial reference plane at the end or at its fate"),
    Var("q_final", P, "f8", LENGTH_UNITS, "pericentre distance a(1-e) at the end or at its fate"),
    Var("radius_final", P, "f8", LENGTH_UNITS, "physical planet radius at the end or at its fate"),
    Var("omega_final", P, "f8", "rad", "argument of pericentre at the end or at its fate"),
    Var("node_final", P, "f8", "rad", "longitude of the ascending node at the end or at its fate"),
    Var("fate", P, "i1", "1", "fate of the planet", flags=Fate),
    Var("t_fate", P, "f8", YEAR_UNITS, "time of the planet's fate (NaN for survivors)"),
    Var("merged_into", P, "i1", "1", "index of the planet this one merged into (-1: none)"),
    Var(
        "tidal_candidate",
        P,
        "i1",
        "1",
        "survivor whose pericentre is below the circularisation threshold",
        flags=((0, 1), "not_candidate candidate"),
    ),
    # per system
    Var("seed", S, "u8", "1", "64-bit seed of the system's initial-condition draws"),
    Var("n_survivors", S, "i1", "1", "number of surviving (bound) planets"),
    Var("n_unbound", S, "i1", "1", "number of planets still present but unbound from the star at the end"),
    Var("n_ejected", S, "i1", "1", "number of ejected planets"),
    Var("n_merged", S, "i1", "1", "number of planet-planet mergers"),
    Var("n_star", S, "i1", "1", "number of planets lost to the star (collision or tidal disruption)"),
    Var("t_first_encounter", S, "f8", YEAR_UNITS, "time of the first separation below one mutual Hill radius"),
    Var("t_end", S, "f8", YEAR_UNITS, "time the integration stopped"),
    Var("end_reason", S, "i1", "1", "rule that ended the integration", flags=EndReason),
    # the end time asked, not physics: a settled system keeps the one of the run that settled it
    Var("t_limit", S, "f8", YEAR_UNITS, "end time the system was integrated towards", physics=False),
    Var(
        "settlement",
        S,
        "i1",
        "1",
        "whether the outcome is final (rule in the global attribute settlement_rule)",
        flags=Settlement,
    ),
    Var(
        "hill_ratio", S, "f8", "1", "exact Marchal-Bozis Hill-stability ratio of a pair at the end (NaN: not 2 planets)"
    ),
    Var(
        "recent_gap",
        S,
        "f8",
        "1",
        "smallest osculating gap q_out - Q_in of the pair, in mutual Hill radii, at the last stopping checks",
    ),
    Var("energy_error", S, "f8", "1", "relative energy error, corrected for mergers and removals"),
    Var("angmom_error", S, "f8", "1", "relative angular-momentum error, corrected for mergers and removals"),
    Var("steps", S, "i8", "1", "integrator steps taken"),
    Var(
        "simd_lanes",
        S,
        "i1",
        "1",
        "SIMD lanes of the batch integrator that ran the system (0: one system at a time)",
        physics=False,
    ),
    Var("wall_seconds", S, "f8", "s", "wall-clock time of the integration", physics=False),
    Var("attempts", S, "i1", "1", "times the system was started (worker deaths retried)", physics=False),
)

VAR = {v.name: v for v in VARIABLES}
PLANET_VARIABLES = tuple(v.name for v in VARIABLES if v.dims == P)
SYSTEM_VARIABLES = tuple(v.name for v in VARIABLES if v.dims == S)
PHYSICS_VARIABLES = tuple(v.name for v in VARIABLES if v.physics)


def _attrs(v: Var) -> dict:
    attrs = {"long_name": v.long_name}
    if v.flags is not None:  # CF: a flag variable has no units
        values, meanings = (
            v.flags if isinstance(v.flags, tuple) else ([int(c) for c in v.flags], [c.word for c in v.flags])
        )
        attrs["flag_values"] = np.array(values, dtype=v.dtype)
        attrs["flag_meanings"] = meanings if isinstance(meanings, str) else " ".join(meanings)
    else:
        attrs["units"] = v.units
    if v.units == MASS_UNITS:
        attrs["comment"] = MASS_COMMENT
    return attrs


def netcdf_encoding(ds: xr.Dataset) -> dict:
    """Per-variable netCDF encoding of the schema's variables in ``ds``: the ``_FillValue`` of each."""
    out = {}
    for name in ds.data_vars:
        v = VAR.get(name)
        if v is not None and v.dtype in ("i1", "f8"):
            out[name] = {"_FillValue": np.array(_fill(v.dtype), dtype=v.dtype)[()]}
    return out


def _fill(dtype: str):
    return math.nan if dtype == "f8" else (0 if dtype == "u8" else FILL_INT)


def records_to_dataset(records: list[SystemRecord], n_planets: int) -> xr.Dataset:
    """Build the ensemble dataset from outcome records (any order; sorted by index).

    Parameters
    ----------
    records : list of SystemRecord
    n_planets : int
        Size of the ``planet`` dimension (the spec's planet count).
    """
    records = sorted(records, key=lambda r: r.index)
    ns = len(records)
    data = {v.name: np.full(((ns, n_planets) if v.dims == P else ns), _fill(v.dtype), dtype=v.dtype) for v in VARIABLES}
    for i, r in enumerate(records):
        for j, p in enumerate(r.planets):
            for name in PLANET_VARIABLES:
                value = getattr(p, name)
                data[name][i, j] = int(value) if VAR[name].dtype == "i1" else value
        failed = r.end_reason == EndReason.FAILED
        if failed:  # no outcome: fates unknown, not "survived"
            data["fate"][i, :] = FILL_INT
            data["tidal_candidate"][i, :] = FILL_INT
        data["seed"][i] = r.seed
        data["end_reason"][i] = int(r.end_reason)
        data["settlement"][i] = FILL_INT if failed else int(r.settlement)
        for name, fates in (
            ("n_survivors", (Fate.SURVIVED,)),
            ("n_unbound", (Fate.UNBOUND,)),
            ("n_ejected", (Fate.EJECTED,)),
            ("n_merged", (Fate.MERGED,)),
            ("n_star", (Fate.HIT_STAR, Fate.DISRUPTED)),
        ):
            data[name][i] = FILL_INT if failed else sum(r.count(f) for f in fates)
        for name in (
            "t_limit",
            "hill_ratio",
            "recent_gap",
            "t_first_encounter",
            "t_end",
            "energy_error",
            "angmom_error",
            "steps",
            "wall_seconds",
            "attempts",
        ):
            data[name][i] = getattr(r, name)
        data["simd_lanes"][i] = r.lanes
    ds = xr.Dataset(
        {v.name: (v.dims, data[v.name], _attrs(v)) for v in VARIABLES},
        coords={
            "system": (
                "system",
                np.array([r.index for r in records], dtype="i8"),
                {"long_name": "system index within the run", "units": "1"},
            ),
            "planet": (
                "planet",
                np.arange(n_planets, dtype="i1"),
                {"long_name": "planet index, innermost first at the start", "units": "1"},
            ),
        },
    )
    ds.attrs["Conventions"] = "CF-1.10"
    ds.attrs["settlement_rule"] = SETTLEMENT_RULE
    return ds


def validate_dataset(ds: xr.Dataset) -> None:
    """Raise ValueError if ``ds`` lacks a schema variable or has it with other dims/units (none for flags)."""
    for v in VARIABLES:
        if v.name not in ds:
            raise ValueError(f"dataset lacks variable {v.name!r}")
        if tuple(ds[v.name].dims) != v.dims:
            raise ValueError(f"variable {v.name!r} has dims {ds[v.name].dims}, expected {v.dims}")
        expected = None if v.flags is not None else v.units
        if ds[v.name].attrs.get("units") != expected:
            raise ValueError(f"variable {v.name!r} has units {ds[v.name].attrs.get('units')!r}, expected {expected!r}")


@dataclass(frozen=True)
class QualityCuts:
    """Which systems enter the statistics: one value for every stage that counts systems.

    Parameters
    ----------
    energy_tolerance : float
        Largest accepted corrected |dE/E| (> 0); systems above it are left out (and counted).
    include_capped : bool
        Keep systems stopped by the wall-clock cap before their end time.

    Failed systems are always left out.  Raises InputError naming ``energy_tolerance`` for a
    value that is not a finite number > 0.
    """

    energy_tolerance: float = ENERGY_TOLERANCE_DEFAULT
    include_capped: bool = False

    def __post_init__(self):
        from scatter_pop.errors import InputError

        tol = self.energy_tolerance
        if isinstance(tol, bool) or not isinstance(tol, int | float) or not (math.isfinite(tol) and tol > 0):
            raise InputError(
                f"energy_tolerance = {tol!r}: allowed: a number > 0 (largest accepted |dE/E|, e.g. 1e-4)",
                arguments=("energy_tolerance",),
            )
        object.__setattr__(self, "energy_tolerance", float(tol))
        object.__setattr__(self, "include_capped", bool(self.include_capped))


def quality_mask(ds: xr.Dataset, quality: QualityCuts = QualityCuts()) -> xr.DataArray:
    """Systems that enter the statistics (boolean over ``system``).

    Left out: failed systems, systems whose corrected |dE/E| exceeds
    ``quality.energy_tolerance``, and (unless ``quality.include_capped``) systems stopped by
    the wall-clock cap before their end time.
    """
    reason = ds["end_reason"]
    ok = (reason != int(EndReason.FAILED)) & (np.abs(ds["energy_error"]) <= quality.energy_tolerance)
    if not quality.include_capped:
        ok = ok & (reason != int(EndReason.CAPPED))
    return ok


def survivor_mask(ds: xr.Dataset, quality: QualityCuts = QualityCuts(), settlement=None) -> xr.DataArray:
    """Surviving planets of the systems selected by :func:`quality_mask` (system x planet).

    The one survivor definition of the package: fate ``survived``, which the engine gives only to
    planets on a bound astrocentric orbit at the end (a > 0, 0 <= e < 1; a planet still present
    but unbound has the fate ``unbound_at_end``).  With ``settlement`` (a Settlement or a
    sequence of them) only systems of those classes count.
    """
    a, e = ds["a_final"], ds["e_final"]
    bound = (a > 0) & (e >= 0) & (e < 1)  # what the engine's fate promises; also for hand-made records
    keep = (ds["fate"] == int(Fate.SURVIVED)) & bound & quality_mask(ds, quality)
    if settlement is not None:
        keep = keep & settlement_mask(ds, settlement)
    return keep


def settlement_mask(ds: xr.Dataset, classes) -> xr.DataArray:
    """Systems whose settlement class is one of ``classes`` (a Settlement or a sequence of them)."""
    classes = [classes] if isinstance(classes, Settlement) else list(classes)
    return ds["settlement"].isin([int(c) for c in classes])

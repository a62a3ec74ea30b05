"""Survivors of an ensemble as a radial-velocity survey would see them.

From the ensemble dataset (:mod:`scatter_pop.store.schema`) to a table of surviving
planets with the quantities an RV survey measures:

* systems left out of the statistics by :func:`scatter_pop.store.schema.quality_mask`
  (failed, wall-clock capped, |dE/E| above the tolerance) are counted;
* every system is seen along its own isotropic line of sight; each planet's
  sky-plane inclination follows from its orbit normal (``inc_final``,
  ``node_final``), so planets of one system share the line of sight and the
  marginal distribution of cos i is uniform;
* m sin i, the period (Kepler's third law) and the semi-amplitude K
  (Lovis & Fischer 2010, eq. 14) with that sin i;
* optionally each system is rescaled so that its initial innermost
  semi-major axis lands in another range (point-mass gravity is scale-free;
  physical radii — collisions, tidal disruption — are not, and the
  returned notes say so).

The random draws come from two generators spawned from the caller's, one for
the lines of sight and one for the rescaling, so switching the rescaling on
does not change the lines of sight.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from scatter_pop.constants import DAY_S, MJUP_MSUN, YEAR_S
from scatter_pop.engine.outcome import EndReason, Settlement
from scatter_pop.errors import InputError
from scatter_pop.store.schema import QualityCuts, quality_mask, survivor_mask
from scatter_pop.survey.cuts import CutLog, Range, SampleCuts
from scatter_pop.survey.radial_velocity import isotropic_sin_i, orbital_period, semi_amplitude

__all__ = [
    "RVSurvey",
    "SimulatedSample",
    "ensemble_star_mass",
    "quality_counts",
    "survivor_table",
    "simulated_sample",
    "RESCALE_NOTE",
    "TIDAL_CHOICES",
]

TIDAL_CHOICES = ("keep", "drop", "circularise")

RESCALE_NOTE = (
    "orbits rescaled in semi-major axis: point-mass dynamics is scale-free, but the "
    "physical radii (planet-planet mergers, star collisions, tidal disruption) were "
    "those of the original orbits, so the branching into those fates is not rescaled"
)


@dataclass(frozen=True)
class RVSurvey:
    """Detection rule of a radial-velocity survey.

    Attributes
    ----------
    k_min : float
        Smallest detectable semi-amplitude [m/s].
    baseline : float
        Longest detectable period, the survey's time span [yr].
    """

    k_min: float
    baseline: float


def ensemble_star_mass(ds: xr.Dataset, override: float | None = None, name: str = "ensemble") -> float:
    """Stellar mass of an ensemble [M_sun].

    Parameters
    ----------
    ds : xarray.Dataset
        Ensemble dataset; its global attribute ``star_mass`` [M_sun] or the
        spec text in ``spec_toml`` / ``spec`` (``[star] mass``) is used.
    override : float or None
        Stellar mass given by the user [M_sun]; wins when given.
    name : str
        How to name the ensemble in an error message.
    """
    if override is not None:
        return float(override)
    value = ds.attrs.get("star_mass")
    if value is not None:
        value = float(np.asarray(value).ravel()[0])
        if math.isfinite(value) and value > 0:
            return value
    for key in ("spec_toml", "spec"):
        text = ds.attrs.get(key)
        if isinstance(text, str):
            try:
                star = tomllib.loads(text).get("star", {})
            except tomllib.TOMLDecodeError:
                continue
            mass = star.get("mass") if isinstance(star, dict) else None
            if isinstance(mass, (int, float)) and not isinstance(mass, bool) and mass > 0:
                return float(mass)
    raise InputError(
        f"{name}: the stellar mass is not recorded in the dataset; give it as star_mass (M_sun)",
        arguments=("star_mass",),
    )


def quality_counts(ds: xr.Dataset, quality: QualityCuts = QualityCuts()) -> dict[str, int]:
    """Systems left out of the statistics, by reason (a system counts once, first reason).

    Returns
    -------
    dict
        ``systems``, ``failed``, ``capped`` (0 when capped runs are included),
        ``energy_error`` (|dE/E| above ``quality.energy_tolerance`` or unknown) and ``kept``.
    """
    reason = ds["end_reason"].values
    kept = quality_mask(ds, quality).values
    failed = reason == int(EndReason.FAILED)
    capped = ~failed & (reason == int(EndReason.CAPPED)) & (not quality.include_capped)
    return {
        "systems": int(reason.size),
        "failed": int(failed.sum()),
        "capped": int(capped.sum()),
        "energy_error": int((~kept & ~failed & ~capped).sum()),
        "kept": int(kept.sum()),
    }


def _sky_sin_i(inc: np.ndarray, node: np.ndarray, rng) -> np.ndarray:
    """sin of the sky-plane inclination for one isotropic line of sight per system."""
    ns, npl = inc.shape
    cos_t = 2.0 * rng.random(ns) - 1.0
    phi = 2.0 * math.pi * rng.random(ns)
    sin_t = np.sqrt(1.0 - cos_t**2)
    los = np.stack([sin_t * np.cos(phi), sin_t * np.sin(phi), cos_t], axis=-1)[:, None, :]
    normal = np.stack([np.sin(inc) * np.sin(node), -np.sin(inc) * np.cos(node), np.cos(inc)], axis=-1)
    cos_sky = np.sum(normal * los, axis=-1)
    out = np.sqrt(np.clip(1.0 - cos_sky**2, 0.0, 1.0))
    unknown = ~(np.isfinite(inc) & np.isfinite(node))
    if unknown.any():  # orientation not recorded: an independent isotropic draw
        out[unknown] = isotropic_sin_i(rng, int(unknown.sum()))
    return out


def survivor_table(
    ds: xr.Dataset,
    *,
    rng,
    project_sin_i: bool = True,
    star_mass: float | None = None,
    quality: QualityCuts = QualityCuts(),
    rescale_a: Range | None = None,
    circularise_tidal: bool = False,
    settlement=None,
) -> dict[str, np.ndarray]:
    """Surviving (bound) planets of the systems that pass the quality cuts
    (:func:`scatter_pop.store.schema.survivor_mask`, the package's one survivor definition).

    Parameters
    ----------
    ds : xarray.Dataset
        Ensemble dataset (schema of :mod:`scatter_pop.store.schema`).
    rng : numpy.random.Generator or int
        Source of the lines of sight and of the rescaling draws.
    project_sin_i : bool
        If True, ``msini`` and ``K`` use the drawn sin i; if False, they use
        sin i = 1 (true mass, edge-on K); ``sin_i`` holds the draw either way.
    star_mass : float or None
        Stellar mass [M_sun]; read from the dataset when None.
    quality : QualityCuts
        Which systems are used (failed, capped and energy-flagged ones are left out).
    rescale_a : Range or None
        Target range [AU] of each system's initial innermost semi-major axis:
        a system is scaled by a_target / a_inner with a_target drawn
        log-uniformly in the range (a fixed factor when low == high).
    circularise_tidal : bool
        Replace the orbits of tidal-circularisation candidates (``tidal_candidate``)
        by the circular orbit of equal angular momentum, a = a(1 − e²), e = 0
        (Ford & Rasio 2006: a_final ≈ 2q for e → 1).
    settlement : Settlement or sequence of them, optional
        Only systems of these settlement classes (default: all).

    Returns
    -------
    dict of numpy.ndarray
        One entry per surviving bound planet: ``system``, ``planet``,
        ``mass`` [M_sun], ``sin_i``, ``msini`` [M_sun], ``a`` [AU], ``e``,
        ``q`` [AU], ``inc`` [rad, to the initial reference plane], ``period``
        [yr], ``K`` [m/s], ``m_star`` [M_sun], ``scale`` (rescaling factor),
        ``tidal`` (bool: tidal-circularisation candidate), ``settlement`` (the system's
        :class:`~scatter_pop.engine.outcome.Settlement` code).
    """
    rng = np.random.default_rng(rng)
    los_rng, scale_rng = rng.spawn(2)
    m_star = ensemble_star_mass(ds, star_mass)
    ns = ds.sizes["system"]
    scale = np.ones(ns)
    if rescale_a is not None:
        target = np.exp(np.log(rescale_a.low) + scale_rng.random(ns) * (np.log(rescale_a.high) - np.log(rescale_a.low)))
        a0 = ds["a_initial"].values
        inner = np.min(np.where(a0 > 0, a0, np.inf), axis=1)  # systems without planets: inf
        scale = np.where(np.isfinite(inner), target / inner, np.nan)
    sin_i_all = _sky_sin_i(ds["inc_final"].values, ds["node_final"].values, los_rng)
    keep = np.asarray(survivor_mask(ds, quality, settlement).values, dtype=bool)
    a_fin, e_fin = ds["a_final"].values, ds["e_final"].values
    si, pj = np.nonzero(keep)
    mass = ds["mass_final"].values[si, pj]
    sin_i = sin_i_all[si, pj]
    f = scale[si]
    a = a_fin[si, pj] * f
    e = e_fin[si, pj]
    q = ds["q_final"].values[si, pj] * f
    tidal = ds["tidal_candidate"].values[si, pj] == 1
    if circularise_tidal:
        a = np.where(tidal, a * (1.0 - e * e), a)
        q = np.where(tidal, a, q)
        e = np.where(tidal, 0.0, e)
    period = orbital_period(a, m_star, mass)
    proj = sin_i if project_sin_i else np.ones_like(sin_i)
    return {
        "system": ds["system"].values[si].astype(np.int64),
        "planet": pj.astype(np.int64),
        "mass": mass,
        "sin_i": sin_i,
        "msini": mass * proj,
        "a": a,
        "e": e,
        "q": q,
        "inc": ds["inc_final"].values[si, pj],
        "period": np.asarray(period, dtype=float),
        "K": np.asarray(semi_amplitude(mass, period, e, m_star, proj)),
        "m_star": np.full(si.size, m_star),
        "scale": f,
        "tidal": tidal,
        "settlement": ds["settlement"].values[si].astype(np.int64),
    }


@dataclass(frozen=True, eq=False)
class SimulatedSample:
    """Simulated planets after the cuts.

    Attributes
    ----------
    label : str
        Name of the sample (e.g. the run folder).
    table : dict of numpy.ndarray
        Columns of :func:`survivor_table` for the kept planets (plus
        ``ensemble``: index of the dataset each planet came from).
    log : CutLog
        Planets remaining after each step.
    excluded : dict
        Systems left out by the quality cuts (summed over the datasets).
    notes : tuple of str
        Caveats to print with the result (e.g. rescaling).
    """

    label: str
    table: dict
    log: CutLog = field(default_factory=CutLog)
    excluded: dict = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def e(self) -> np.ndarray:
        return self.table["e"]

    @property
    def n(self) -> int:
        return int(self.table["e"].size)


def simulated_sample(
    datasets,
    *,
    rng,
    label: str = "simulated",
    cuts: SampleCuts = SampleCuts(),
    survey: RVSurvey | None = None,
    project_sin_i: bool = True,
    star_mass: float | None = None,
    quality: QualityCuts = QualityCuts(),
    rescale_a: Range | None = None,
    tidal: str = "keep",
) -> SimulatedSample:
    """Survivors of one or more ensembles, cut and seen through an RV survey.

    Parameters
    ----------
    datasets : xarray.Dataset or sequence of them
        Ensembles pooled into one sample (in the given order).
    rng : numpy.random.Generator or int
    label : str
    cuts : SampleCuts
        Ranges on final a [AU], period [yr] and mass [M_sun] (m sin i when
        ``project_sin_i``, true mass otherwise); ``m_star`` is ignored.
    survey : RVSurvey or None
        Keep only planets with K >= k_min and P <= baseline.
    project_sin_i, star_mass, quality, rescale_a
        As in :func:`survivor_table`.
    tidal : {"keep", "drop", "circularise"}
        What to do with tidal-circularisation candidates (survivors whose
        pericentre is below the spec's threshold): keep their orbits, leave
        them out (counted), or circularise them at constant angular momentum.
    """
    if tidal not in TIDAL_CHOICES:
        raise ValueError(f"tidal must be one of {', '.join(TIDAL_CHOICES)}, got {tidal!r}")
    if isinstance(datasets, xr.Dataset):
        datasets = [datasets]
    datasets = list(datasets)
    if not datasets:
        raise ValueError("simulated_sample needs at least one dataset")
    rng = np.random.default_rng(rng)
    tables, excluded = [], {}
    for i, ds in enumerate(datasets):
        t = survivor_table(
            ds,
            rng=rng,
            project_sin_i=project_sin_i,
            star_mass=star_mass,
            quality=quality,
            rescale_a=rescale_a,
            circularise_tidal=tidal == "circularise",
        )
        t["ensemble"] = np.full(t["e"].size, i, dtype=np.int64)
        tables.append(t)
        for k, v in quality_counts(ds, quality).items():
            excluded[k] = excluded.get(k, 0) + v
    table = {k: np.concatenate([t[k] for t in tables]) for k in tables[0]}
    n_survivors = sum(int(survivor_mask(ds, quality).sum()) for ds in datasets)
    log = CutLog()
    log.record("systems", "systems", excluded["systems"])
    log.record("systems_kept", "systems kept (quality cuts)", excluded["kept"])
    log.record("survivors", "surviving planets of kept systems", n_survivors)
    keep = np.ones(table["e"].size, dtype=bool)
    log.record("bound", "bound survivors (a > 0, e < 1)", int(keep.sum()))
    if tidal == "drop":
        keep &= ~table["tidal"]
        log.record("not_tidal", "not tidal-circularisation candidates", int(keep.sum()))

    mass_column = "msini" if project_sin_i else "mass"
    for name, values in (("a", table["a"]), ("period", table["period"]), ("mass", table[mass_column])):
        scale, unit = {"a": (1.0, "AU"), "period": (YEAR_S / DAY_S, "d"), "mass": (1.0 / MJUP_MSUN, "M_J")}[name]
        keep = log.apply(keep, values, getattr(cuts, name), name if name != "mass" else mass_column, scale, unit)
    if survey is not None:
        keep &= (table["K"] >= survey.k_min) & (table["period"] <= survey.baseline)
        log.record(
            "rv_detectable", f"RV-detectable (K >= {survey.k_min:g} m/s, P <= {survey.baseline:g} yr)", int(keep.sum())
        )
    notes = (RESCALE_NOTE,) if rescale_a is not None else ()
    if tidal == "circularise":
        notes += (
            f"{int(table['tidal'].sum())} tidal-circularisation candidates given the circular orbit "
            "of equal angular momentum (a -> a(1 - e^2), e -> 0) before the cuts",
        )
    snapshots = int(np.sum(keep & (table["settlement"] == int(Settlement.UNSETTLED))))
    if snapshots:
        notes += (
            f"{snapshots} of the {int(keep.sum())} simulated planets are in unsettled systems (snapshots at the "
            "end time whose orbits may still change; raise the end time to carry them further)",
        )
    return SimulatedSample(
        label=label, table={k: v[keep] for k, v in table.items()}, log=log, excluded=excluded, notes=notes
    )

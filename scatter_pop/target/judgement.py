"""How often does scattering make a planet like one target? (pure: datasets in, result out)

For each ensemble the systems that enter the statistics are those of
:func:`scatter_pop.store.schema.quality_mask` (failed, capped and energy-flagged
systems left out and counted).  Their settlement classes
(:mod:`scatter_pop.engine.settlement`) split them: the headline fractions use only the
systems whose outcome is final or likely so (``settled`` + ``likely_stable``); matches in
``unsettled`` systems (snapshots at the end time) are counted apart, by class, and in a
separate line that counts them too (``with_unsettled``), never in the headline.  A surviving planet is "like the target"
by the windows of :mod:`scatter_pop.target.planet` (hard cut, with one seeded
isotropic line of sight per system) and carries a likelihood weight
(:mod:`scatter_pop.target.matching`).  The result gives

* the fraction of systems with at least one such planet and the fraction of
  survivors that are such planets, each with a binomial interval
  (:mod:`scatter_pop.target.proportions`; k = 0 → exact one-sided upper limit);
* the likelihood-weighted versions: survivors Σw / N, systems
  Σ[1 − Π(1 − w)] / N (probability that at least one planet of the system
  matches), with bootstrap intervals over systems
  (:func:`scipy.stats.bootstrap`, percentile method);
* the pathways of the matching systems (:mod:`scatter_pop.target.pathways`);
* their starting configurations against the rest
  (:mod:`scatter_pop.target.pathways`).

With ``target.mstar`` given, simulated planet masses are scaled by
M*_target / M*_ensemble (keeping the planet–star mass ratios the dynamics
depend on) before the mass window is applied.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.stats
import xarray as xr

from scatter_pop.engine.outcome import Settlement
from scatter_pop.store.schema import QualityCuts, quality_mask
from scatter_pop.survey.forward_model import ensemble_star_mass, quality_counts, survivor_table
from scatter_pop.target.architecture import mass_ratio, min_spacing, planet_count
from scatter_pop.target.branches import system_branch
from scatter_pop.target.matching import hard_match, soft_weight
from scatter_pop.target.pathways import ConfigComparison, Pathways, compare_configurations, pathways
from scatter_pop.target.planet import Target, Windows
from scatter_pop.target.proportions import Proportion, proportion

__all__ = [
    "WeightedFraction",
    "EnsembleJudgement",
    "Judgement",
    "SystemFrame",
    "system_frame",
    "judge_frame",
    "judge",
    "pool_frames",
]


@dataclass(frozen=True)
class WeightedFraction:
    """A likelihood-weighted fraction with a bootstrap interval.

    Attributes
    ----------
    value : float
        Weighted fraction (NaN when n = 0).
    low, high : float
        Percentile-bootstrap interval at ``confidence`` (equal to ``value``
        when every weight is equal, e.g. all zero: the bootstrap cannot bound
        a constant — use the hard count's upper limit then).
    expected : float
        Sum of the weights: the expected number of matches.
    n : int
        Systems (or survivors) it is a fraction of.
    confidence : float
    resamples : int
    """

    value: float
    low: float
    high: float
    expected: float
    n: int
    confidence: float
    resamples: int


@dataclass
class SystemFrame:
    """Per-system and per-survivor arrays of one ensemble (or several pooled).

    Everything the judgement needs, already masked to the systems used;
    built by :func:`system_frame`, pooled by :func:`pool_frames`.
    """

    label: str
    n_total: int
    excluded: dict
    branch: np.ndarray  # per system: branch name
    n_survivors: np.ndarray
    n_ejected: np.ndarray
    n_merged: np.ndarray
    n_star: np.ndarray
    t_encounter: np.ndarray  # yr
    mass_ratio: np.ndarray
    spacing: np.ndarray  # mutual Hill radii
    count: np.ndarray
    settlement: np.ndarray  # Settlement code per system
    t_end: np.ndarray  # yr
    s_system: np.ndarray  # per survivor: position of its system in the arrays above
    s_e: np.ndarray
    s_a: np.ndarray  # AU
    s_mass: np.ndarray  # M_sun, true (scaled by mass_scale)
    s_msini: np.ndarray  # M_sun, projected
    s_tidal: np.ndarray  # bool
    mass_scale: float
    star_mass: float | None


def system_frame(
    ds: xr.Dataset,
    *,
    label: str,
    target: Target,
    seed: int = 0,
    quality: QualityCuts = QualityCuts(),
) -> SystemFrame:
    """Extract the arrays of one ensemble (systems used only).

    Parameters
    ----------
    ds : xarray.Dataset
        Ensemble dataset (:mod:`scatter_pop.store.schema`).
    label : str
        Name of the ensemble in reports.
    target : Target
        Its ``mstar`` [M_sun] (mass scaling) and ``true_mass`` (no projection)
        are used here.
    seed : int
        Seed of the lines of sight (one isotropic line of sight per system,
        :func:`scatter_pop.survey.forward_model.survivor_table`).
    quality : QualityCuts
        Which systems are used (|ΔE/E| tolerance, capped systems kept or not).
    """
    use = np.asarray(quality_mask(ds, quality).values, dtype=bool)
    counts = quality_counts(ds, quality)
    excluded = {"failed": counts["failed"], "capped": counts["capped"], "energy": counts["energy_error"]}
    m_star = ensemble_star_mass(ds, name=label)
    scale = target.mstar / m_star if target.mstar is not None else 1.0
    table = survivor_table(
        ds,
        rng=np.random.default_rng(seed),
        project_sin_i=not target.true_mass,
        quality=quality,
    )
    ids = ds["system"].values
    order = np.argsort(ids, kind="stable")
    row = order[np.searchsorted(ids, table["system"], sorter=order)]  # position in ds
    pos = np.cumsum(use) - 1  # position among used systems
    n_surv = ds["n_survivors"].values[use].astype(int)
    return SystemFrame(
        label=label,
        n_total=int(ds.sizes["system"]),
        excluded=excluded,
        branch=system_branch(ds)[use],
        n_survivors=n_surv,
        n_ejected=ds["n_ejected"].values[use].astype(int),
        n_merged=ds["n_merged"].values[use].astype(int),
        n_star=ds["n_star"].values[use].astype(int),
        t_encounter=ds["t_first_encounter"].values[use].astype(float),
        mass_ratio=mass_ratio(ds)[use],
        spacing=min_spacing(ds, m_star)[use],
        count=planet_count(ds)[use],
        settlement=ds["settlement"].values[use].astype(int),
        t_end=ds["t_end"].values[use].astype(float),
        s_system=pos[row],
        s_e=table["e"],
        s_a=table["a"],
        s_mass=table["mass"] * scale,
        s_msini=table["msini"] * scale,
        s_tidal=ds["tidal_candidate"].values[row, table["planet"]] == 1,
        mass_scale=float(scale),
        star_mass=m_star,
    )


def pool_frames(frames: list[SystemFrame], label: str = "all ensembles") -> SystemFrame:
    """Concatenate frames of several ensembles into one (a mixture weighted by size)."""
    offsets = np.cumsum([0] + [f.branch.size for f in frames])[:-1]
    cat = lambda name: np.concatenate([getattr(f, name) for f in frames])  # noqa: E731
    per_system = (
        "branch",
        "n_survivors",
        "n_ejected",
        "n_merged",
        "n_star",
        "t_encounter",
        "mass_ratio",
        "spacing",
        "count",
        "settlement",
        "t_end",
    )
    per_survivor = ("s_e", "s_a", "s_mass", "s_msini", "s_tidal")
    scales = {f.mass_scale for f in frames}
    stars = {f.star_mass for f in frames}
    return SystemFrame(
        label=label,
        n_total=sum(f.n_total for f in frames),
        excluded={k: sum(f.excluded[k] for f in frames) for k in frames[0].excluded},
        **{n: cat(n) for n in per_system + per_survivor},
        s_system=np.concatenate([f.s_system + o for f, o in zip(frames, offsets)]),
        mass_scale=scales.pop() if len(scales) == 1 else float("nan"),
        star_mass=stars.pop() if len(stars) == 1 else None,
    )


@dataclass(frozen=True)
class EnsembleJudgement:
    """The judgement of one ensemble (or of several pooled).

    Attributes
    ----------
    label : str
    n_total, n_systems, n_survivors : int
        Systems in the file, systems used, survivors of the systems used.
    excluded : dict
        Systems left out: ``failed``, ``capped``, ``energy``.
    systems, survivors : Proportion
        Hard-cut fractions with binomial intervals among the systems whose outcome is final or
        likely so (settled + likely stable) — the headline.
    by_class : dict
        Settlement word -> Proportion of matching systems among the systems of that class.
    with_unsettled : Proportion
        Matching systems of every class among all systems used: the unsettled matches counted
        as if they were outcomes (an upper-bound line, never the headline).
    settled_matches : int
        Matching systems among the settled ones (the only ones that show an outcome is possible).
    weighted_systems, weighted_survivors : WeightedFraction
    pathways : Pathways
    configurations : tuple of ConfigComparison
    a_survivors : (float, float)
        Range of the survivors' final a [AU] (NaN if none).
    n_unsettled : int
        Used systems whose outcome is not final (settlement ``unsettled``).
    t_end_max : float
        Longest integration [yr].
    mass_scale : float
        Factor applied to simulated masses (M*_target / M*_ensemble, or 1).
    star_mass : float or None
        The ensemble's stellar mass [M_sun] (None when pooled ensembles differ).
    """

    label: str
    n_total: int
    n_systems: int
    n_survivors: int
    excluded: dict
    systems: Proportion
    survivors: Proportion
    weighted_systems: WeightedFraction
    weighted_survivors: WeightedFraction
    by_class: dict
    with_unsettled: Proportion
    settled_matches: int
    pathways: Pathways
    configurations: tuple[ConfigComparison, ...]
    a_survivors: tuple[float, float]
    n_unsettled: int
    t_end_max: float
    mass_scale: float
    star_mass: float | None


@dataclass(frozen=True)
class Judgement:
    """The judgement of a target against one or more ensembles."""

    target: Target
    windows: Windows
    seed: int
    confidence: float
    method: str
    ensembles: tuple[EnsembleJudgement, ...]
    pooled: EnsembleJudgement | None = None
    quality: QualityCuts = QualityCuts()


def _bootstrap(data: tuple, statistic, *, n: int, confidence: float, resamples: int, rng) -> WeightedFraction:
    value = float(statistic(*data, axis=-1)) if n else float("nan")
    expected = float(np.sum(data[0]))
    if n < 2 or np.all(data[0] == data[0][0]):
        return WeightedFraction(value, value, value, expected, n, confidence, 0)
    res = scipy.stats.bootstrap(
        data,
        statistic,
        paired=True,
        vectorized=True,
        n_resamples=resamples,
        confidence_level=confidence,
        method="percentile",
        rng=rng,
    )
    ci = res.confidence_interval
    return WeightedFraction(value, float(ci.low), float(ci.high), expected, n, confidence, resamples)


def _ratio(w, n, axis=-1):
    return np.sum(w, axis=axis) / np.sum(n, axis=axis)


def _mean(w, axis=-1):
    return np.mean(w, axis=axis)


def judge_frame(
    frame: SystemFrame,
    target: Target,
    windows: Windows,
    *,
    confidence: float = 0.95,
    method: str = "exact",
    resamples: int = 2000,
    seed: int = 0,
) -> EnsembleJudgement:
    """Judge one frame (see the module docstring).

    Parameters
    ----------
    frame : SystemFrame
    target : Target
    windows : Windows
    confidence : float
        Confidence level of all intervals.
    method : {"exact", "wilson"}
        Binomial interval of the hard-cut fractions.
    resamples : int
        Bootstrap resamples of the weighted fractions.
    seed : int
        Seed of the bootstrap.
    """
    n_sys = frame.branch.size
    match = hard_match(frame.s_e, frame.s_a, frame.s_msini, target, windows)
    weight = soft_weight(frame.s_e, frame.s_a, frame.s_mass, target, windows)
    sys_match = np.zeros(n_sys, dtype=bool)
    sys_match[frame.s_system[match]] = True
    final = np.isin(frame.settlement, [int(Settlement.SETTLED), int(Settlement.LIKELY_STABLE)])
    s_final = final[frame.s_system]  # per survivor: its system's outcome is final or likely so
    # P(at least one planet of the system matches) = 1 - prod(1 - w)
    miss = np.ones(n_sys)
    np.multiply.at(miss, frame.s_system, 1.0 - weight)
    w_sys = (1.0 - miss)[final]
    w_sum = np.zeros(n_sys)
    np.add.at(w_sum, frame.s_system, weight)
    rng = np.random.default_rng(seed)
    finite_a = frame.s_a[np.isfinite(frame.s_a)]
    n_final = int(final.sum())
    prop = lambda k, n: proportion(int(k), int(n), confidence=confidence, method=method)  # noqa: E731
    by_class = {
        c.word: prop(np.sum(sys_match & (frame.settlement == int(c))), np.sum(frame.settlement == int(c)))
        for c in Settlement
    }
    return EnsembleJudgement(
        label=frame.label,
        n_total=frame.n_total,
        n_systems=n_sys,
        n_survivors=int(frame.s_e.size),
        excluded=dict(frame.excluded),
        systems=prop(np.sum(sys_match & final), n_final),
        survivors=prop(np.sum(match & s_final), np.sum(s_final)),
        weighted_systems=_bootstrap((w_sys,), _mean, n=n_final, confidence=confidence, resamples=resamples, rng=rng),
        weighted_survivors=_bootstrap(
            (w_sum[final], frame.n_survivors[final].astype(float)),
            _ratio,
            n=n_final,
            confidence=confidence,
            resamples=resamples,
            rng=rng,
        ),
        by_class=by_class,
        with_unsettled=prop(sys_match.sum(), n_sys),
        settled_matches=int(np.sum(sys_match & (frame.settlement == int(Settlement.SETTLED)))),
        pathways=pathways(frame, sys_match & final, match & s_final, unsettled_matching=sys_match & ~final),
        configurations=compare_configurations(frame, sys_match & final, among=final),
        a_survivors=((float(finite_a.min()), float(finite_a.max())) if finite_a.size else (float("nan"), float("nan"))),
        n_unsettled=int(np.sum(frame.settlement == int(Settlement.UNSETTLED))),
        t_end_max=float(np.nanmax(frame.t_end)) if n_sys else float("nan"),
        mass_scale=frame.mass_scale,
        star_mass=frame.star_mass,
    )


def judge(
    datasets,
    target: Target,
    windows: Windows | None = None,
    *,
    labels=None,
    seed: int = 0,
    confidence: float = 0.95,
    method: str = "exact",
    resamples: int = 2000,
    quality: QualityCuts = QualityCuts(),
) -> Judgement:
    """Judge a target planet against one or more ensembles.

    Parameters
    ----------
    datasets : xarray.Dataset or sequence of them
        Ensemble datasets (:mod:`scatter_pop.store.schema`).
    target : Target
    windows : Windows, optional
        Default ±2σ in a and m sin i, e at or above the target's.
    labels : sequence of str, optional
        Names of the ensembles (default "ensemble 1", ...).
    seed : int
        Seed of the sin i draws and of the bootstrap (the same for each ensemble).
    confidence : float
        Confidence level of the intervals (two-sided; one-sided for upper limits).
    method : {"exact", "wilson"}
        Binomial interval: Clopper–Pearson or Wilson.
    resamples : int
        Bootstrap resamples of the weighted fractions.
    quality : QualityCuts
        Which systems are used (|ΔE/E| tolerance, capped systems kept or not).

    Returns
    -------
    Judgement
        One :class:`EnsembleJudgement` per dataset, plus a pooled one when
        more than one dataset is given.
    """
    if isinstance(datasets, xr.Dataset):
        datasets = [datasets]
    datasets = list(datasets)
    windows = windows or Windows()
    labels = list(labels) if labels is not None else [f"ensemble {i + 1}" for i in range(len(datasets))]
    if len(labels) != len(datasets):
        raise ValueError(f"{len(labels)} labels for {len(datasets)} datasets")
    frames = [
        system_frame(ds, label=lab, target=target, seed=seed, quality=quality) for ds, lab in zip(datasets, labels)
    ]
    kw = dict(confidence=confidence, method=method, resamples=resamples, seed=seed)
    results = tuple(judge_frame(f, target, windows, **kw) for f in frames)
    pooled = judge_frame(pool_frames(frames), target, windows, **kw) if len(frames) > 1 else None
    return Judgement(target, windows, seed, confidence, method, results, pooled, quality)

"""Simulated eccentricities against an observed catalogue: the whole comparison.

:func:`compare` takes one or more simulated samples (each made of one or
more ensembles, e.g. a two-planet and a three-planet run) and an observed
sample, and returns a :class:`ComparisonReport` holding, per simulated
sample: the counts after each cut, KS and Anderson–Darling results with
permutation p-values, their spread over the observed error bars and over
bootstrap resamples of the simulated sample, and one-sample tests against
published laws.  :mod:`scatter_pop.survey.report` renders the report.

Randomness: a :class:`numpy.random.SeedSequence` made from ``seed`` spawns
one child per simulated sample (in the order given), and each child spawns
the generators of the lines of sight, the permutations, the error-bar
redraws and the bootstrap.  The whole report is reproducible from the seed.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import xarray as xr

from scatter_pop.errors import InputError
from scatter_pop.store.schema import QualityCuts
from scatter_pop.survey.catalogue import ObservedSample
from scatter_pop.survey.cuts import Range, SampleCuts
from scatter_pop.survey.forward_model import RVSurvey, SimulatedSample, simulated_sample
from scatter_pop.survey.resampling import ResampledComparison, observed_uncertainty_spread, simulated_bootstrap_spread
from scatter_pop.survey.statistics import (
    REFERENCE_DISTRIBUTIONS,
    OneSampleResult,
    TwoSampleResult,
    fit_beta,
    one_sample,
    two_sample,
)

__all__ = ["CompareOptions", "SampleComparison", "ComparisonReport", "describe_e", "load_ensemble", "compare"]


@dataclass(frozen=True)
class CompareOptions:
    """Everything that shapes the comparison besides the data.

    Attributes
    ----------
    cuts : SampleCuts
        Cuts on the simulated planets (a [AU], period [yr], mass [M_sun]).
    survey : RVSurvey or None
        RV detection rule (K_min [m/s], baseline [yr]).
    project_sin_i : bool
        Project simulated masses to m sin i along a random line of sight.
    rescale_a : Range or None
        Target range [AU] of each system's initial innermost semi-major axis.
    star_mass : float or None
        Stellar mass of the ensembles [M_sun], if the datasets do not record it.
    quality : QualityCuts
        Which systems are used (|dE/E| tolerance, capped systems kept or not).
    tidal : str
        Tidal-circularisation candidates: "keep", "drop" or "circularise".
    permutations : int
        Permutations of the main Anderson–Darling p-value.
    uncertainty_draws, bootstrap_draws : int
        Realisations of the observed error bars / bootstrap resamples (0: skip).
    spread_permutations : int
        Permutations per realisation in those spreads.
    references : tuple of str
        Published laws for one-sample tests (keys of REFERENCE_DISTRIBUTIONS).
    reference_samples : int
        Monte-Carlo samples behind the one-sample AD p-values.
    seed : int
        Seed of every random draw of the comparison.
    """

    cuts: SampleCuts = SampleCuts()
    survey: RVSurvey | None = None
    project_sin_i: bool = True
    rescale_a: Range | None = None
    star_mass: float | None = None
    quality: QualityCuts = QualityCuts()
    tidal: str = "keep"
    permutations: int = 2000
    uncertainty_draws: int = 100
    bootstrap_draws: int = 100
    spread_permutations: int = 200
    references: tuple[str, ...] = tuple(REFERENCE_DISTRIBUTIONS)
    reference_samples: int = 2000
    seed: int = 0


@dataclass(frozen=True, eq=False)
class SampleComparison:
    """One simulated sample against the observed one."""

    sample: SimulatedSample
    test: TwoSampleResult
    uncertainty: ResampledComparison | None
    bootstrap: ResampledComparison | None
    references: tuple[OneSampleResult, ...]
    summary: dict


@dataclass(frozen=True, eq=False)
class ComparisonReport:
    """The full comparison: observed sample, one row per simulated sample, options."""

    observed: ObservedSample
    observed_summary: dict
    observed_beta: tuple[float, float] | None
    observed_references: tuple[OneSampleResult, ...]
    rows: tuple[SampleComparison, ...]
    options: CompareOptions
    sources: dict = field(default_factory=dict)


def describe_e(e) -> dict:
    """Summary of an eccentricity sample: n, median, mean, fractions above 0.5 and 0.8, max."""
    e = np.asarray(e, dtype=float)
    return {
        "n": int(e.size),
        "median": float(np.median(e)),
        "mean": float(np.mean(e)),
        "frac_above_0.5": float(np.mean(e > 0.5)),
        "frac_above_0.8": float(np.mean(e > 0.8)),
        "max": float(np.max(e)),
    }


def load_ensemble(path, *, partial: bool = False, flag: str = "path") -> xr.Dataset:
    """Open a run folder (its ``ensemble.nc``) or a netCDF file directly.

    Parameters
    ----------
    path : str or Path
        Run folder, folder holding ``ensemble.nc``, or a ``.nc`` file.
    partial : bool
        Accept an unfinished run folder (systems finished so far).
    flag : str
        Name of the argument, for error messages.
    """
    from scatter_pop.store.run_folder import RunFolder, open_ensemble

    p = Path(path)
    if p.is_dir() and not RunFolder(p).is_run_folder():
        p = p / "ensemble.nc"  # a bare folder holding ensemble.nc
    if not p.exists():
        raise InputError(
            f"{flag} = {str(path)!r}: neither a run folder nor a folder or file with ensemble.nc", arguments=(flag,)
        )
    try:
        return open_ensemble(p, partial=partial)
    except InputError:
        raise
    except (OSError, ValueError, KeyError, RuntimeError) as exc:
        raise InputError(
            f"{flag} = {str(path)!r}: not a readable ensemble dataset ({' '.join(str(exc).split())})",
            arguments=(flag,),
        ) from None


def _spawn(seq: np.random.SeedSequence, n: int) -> list[np.random.Generator]:
    return [np.random.default_rng(s) for s in seq.spawn(n)]


def compare(samples, observed: ObservedSample, options: CompareOptions = CompareOptions()) -> ComparisonReport:
    """Compare simulated samples with the observed eccentricities.

    Parameters
    ----------
    samples : sequence of (str, Dataset or sequence of Dataset)
        Label and ensemble(s) of each simulated sample, in table order.
    observed : ObservedSample
        The observed planets after their cuts.
    options : CompareOptions

    Returns
    -------
    ComparisonReport
    """
    root = np.random.SeedSequence(int(options.seed))
    obs_seq, *sample_seqs = root.spawn(1 + len(samples))
    obs_refs = tuple(
        one_sample(observed.e, name, samples=options.reference_samples, rng=g)
        for name, g in zip(options.references, _spawn(obs_seq, len(options.references)))
    )
    positive = observed.e[observed.e > 0]
    beta = fit_beta(positive) if positive.size >= 3 else None
    rows = []
    for (label, datasets), seq in zip(samples, sample_seqs):
        s_draw, s_test, s_unc, s_boot, s_ref = seq.spawn(5)
        g_draw, g_test, g_unc, g_boot = (np.random.default_rng(s) for s in (s_draw, s_test, s_unc, s_boot))
        sample = simulated_sample(
            datasets,
            rng=g_draw,
            label=label,
            cuts=options.cuts,
            survey=options.survey,
            project_sin_i=options.project_sin_i,
            star_mass=options.star_mass,
            quality=options.quality,
            rescale_a=options.rescale_a,
            tidal=options.tidal,
        )
        if sample.n < 2:
            steps = "; ".join(f"{s.label}: {s.n}" for s in sample.log.steps)
            raise InputError(f"{label}: {sample.n} simulated planets left after the cuts, at least 2 needed ({steps})")
        test = two_sample(sample.e, observed.e, permutations=options.permutations, rng=g_test)
        unc = boot = None
        if options.uncertainty_draws > 0:
            unc = observed_uncertainty_spread(
                sample.e,
                observed.e,
                observed.e_err_lo,
                observed.e_err_hi,
                draws=options.uncertainty_draws,
                permutations=options.spread_permutations,
                rng=g_unc,
            )
        if options.bootstrap_draws > 0:
            boot = simulated_bootstrap_spread(
                sample.e,
                observed.e,
                draws=options.bootstrap_draws,
                permutations=options.spread_permutations,
                rng=g_boot,
            )
        refs = tuple(
            one_sample(sample.e, name, samples=options.reference_samples, rng=g)
            for name, g in zip(options.references, _spawn(s_ref, len(options.references)))
        )
        rows.append(
            SampleComparison(
                sample=sample, test=test, uncertainty=unc, bootstrap=boot, references=refs, summary=describe_e(sample.e)
            )
        )
    return ComparisonReport(
        observed=observed,
        observed_summary=describe_e(observed.e),
        observed_beta=beta,
        observed_references=obs_refs,
        rows=tuple(rows),
        options=options,
    )

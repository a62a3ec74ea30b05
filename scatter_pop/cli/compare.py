"""``scatter-pop compare DIR [DIR ...] --observed CATALOG.csv``: survivors vs an observed catalogue.

Every flag is checked, the catalogue read and the ensembles opened before
anything is computed; the result goes to stdout or, with ``--output``, to a
file written atomically (a failed run leaves an existing file untouched).
"""

from __future__ import annotations

import math
import os
import tempfile
from pathlib import Path

from scatter_pop.cli.options import integer_flag
from scatter_pop.constants import DAY_S, MJUP_MSUN, YEAR_S
from scatter_pop.errors import InputError
from scatter_pop.store.schema import ENERGY_TOLERANCE_DEFAULT
from scatter_pop.survey.catalogue import ColumnMap, load_catalogue
from scatter_pop.survey.cuts import SampleCuts, check_range
from scatter_pop.survey.forward_model import TIDAL_CHOICES, RVSurvey
from scatter_pop.survey.report import FORMATS, render
from scatter_pop.survey.statistics import REFERENCE_DISTRIBUTIONS

__all__ = ["configure", "execute"]


def configure(parser) -> None:
    parser.add_argument(
        "dirs", nargs="+", metavar="DIR", help="run folder (holding ensemble.nc) or a .nc file; one table row each"
    )
    parser.add_argument(
        "--observed",
        required=True,
        metavar="CATALOG.csv",
        help="observed catalogue (CSV with a header; e, e errors, a [AU], period [d], "
        "mass [M_J, m sin i], stellar mass [M_sun])",
    )
    parser.add_argument(
        "--columns",
        default="",
        metavar="Q=COL,...",
        help="catalogue column of each quantity, e.g. e=ecc,a=sma "
        "(quantities: e, e_err_lo, e_err_hi, a, period, mass, m_star)",
    )
    parser.add_argument(
        "--keep-zero-e",
        action="store_true",
        help="keep catalogue entries with e exactly 0 (default: left out and counted)",
    )
    parser.add_argument("--a-range", metavar="LOW,HIGH", help="semi-major axis cut [AU], both samples")
    parser.add_argument("--period-range", metavar="LOW,HIGH", help="period cut [d], both samples")
    parser.add_argument(
        "--mass-range", metavar="LOW,HIGH", help="mass cut [M_J], both samples (m sin i unless --true-mass)"
    )
    parser.add_argument("--mstar-range", metavar="LOW,HIGH", help="stellar-mass cut [M_sun], catalogue only")
    parser.add_argument(
        "--rv-survey",
        metavar="K_MIN,BASELINE",
        help="keep simulated planets with K >= K_MIN [m/s] and P <= BASELINE [yr]",
    )
    parser.add_argument(
        "--true-mass", action="store_true", help="do not project simulated masses to m sin i (K then edge-on)"
    )
    parser.add_argument(
        "--rescale-a",
        metavar="LOW,HIGH",
        help="rescale each system so its initial inner a is log-uniform in [LOW, HIGH] AU",
    )
    parser.add_argument(
        "--star-mass", metavar="MSUN", help="stellar mass of the ensembles [M_sun], if the datasets do not record it"
    )
    parser.add_argument(
        "--tidal",
        default="keep",
        metavar="WHAT",
        help="tidal-circularisation candidates: keep (default), drop, or circularise (a -> a(1-e^2), e -> 0)",
    )
    parser.add_argument("--pool", action="store_true", help="add a row pooling all DIRs")
    parser.add_argument(
        "--energy-tolerance",
        default=str(ENERGY_TOLERANCE_DEFAULT),
        metavar="DE",
        help="largest accepted |dE/E| (default %(default)s)",
    )
    parser.add_argument("--include-capped", action="store_true", help="keep systems stopped by the wall-clock cap")
    parser.add_argument("--partial", action="store_true", help="use the systems finished so far of unfinished runs")
    parser.add_argument(
        "--permutations",
        default="2000",
        metavar="N",
        help="permutations of the Anderson-Darling p-value (default %(default)s)",
    )
    parser.add_argument(
        "--error-draws",
        default="100",
        metavar="N",
        help="redraws of the observed e within their errors (0: skip; default %(default)s)",
    )
    parser.add_argument(
        "--bootstrap",
        default="100",
        metavar="N",
        help="bootstrap resamples of the simulated sample (0: skip; default %(default)s)",
    )
    parser.add_argument(
        "--spread-permutations",
        default="200",
        metavar="N",
        help="AD permutations per redraw / resample (default %(default)s)",
    )
    parser.add_argument(
        "--references",
        default=",".join(REFERENCE_DISTRIBUTIONS),
        metavar="NAME,...",
        help=f"published laws for one-sample tests, or 'none' ({', '.join(REFERENCE_DISTRIBUTIONS)})",
    )
    parser.add_argument(
        "--reference-samples",
        default="2000",
        metavar="N",
        help="Monte-Carlo samples behind the one-sample AD p-values (default %(default)s)",
    )
    parser.add_argument("--seed", default="0", metavar="INT", help="seed of every random draw (default 0)")
    parser.add_argument("--format", default="text", metavar="FMT", help=f"output format: {'|'.join(FORMATS)}")
    parser.add_argument("--output", metavar="FILE", help="write to FILE (atomically) instead of stdout")


def _number(text: str, flag: str, what: str) -> float:
    try:
        value = float(text)
    except (TypeError, ValueError):
        raise InputError(f"{flag} = {text!r}: expected {what}") from None
    if not math.isfinite(value):
        raise InputError(f"{flag} = {text!r}: expected {what}")
    return value


def _pair(text: str | None, flag: str, unit: str, example: str):
    if text is None:
        return None
    parts = [p.strip() for p in text.split(",")]
    what = f"LOW,HIGH in {unit}, e.g. {example}" if flag != "--rv-survey" else f"{unit}, e.g. {example}"
    if len(parts) != 2:
        raise InputError(f"{flag} = {text!r}: expected two numbers {what}")
    lo, hi = (_number(p, flag, f"two numbers {what}") for p in parts)
    return lo, hi


def _range(text, flag, unit, example, scale=1.0, minimum=0.0):
    pair = _pair(text, flag, unit, example)
    if pair is None:
        return None
    r = check_range(pair[0], pair[1], flag, minimum=minimum)
    return type(r)(r.low * scale, r.high * scale)


def _options(args):
    from scatter_pop.survey.comparison import CompareOptions

    if args.format not in FORMATS:
        raise InputError(f"--format = {args.format!r}: allowed: {', '.join(FORMATS)}")
    cuts = SampleCuts(
        a=_range(args.a_range, "--a-range", "AU", "0.1,5"),
        period=_range(args.period_range, "--period-range", "days", "10,3000", DAY_S / YEAR_S),
        mass=_range(args.mass_range, "--mass-range", "M_J", "0.3,15", MJUP_MSUN),
        m_star=_range(args.mstar_range, "--mstar-range", "M_sun", "0.5,1.5"),
    )
    survey = None
    pair = _pair(args.rv_survey, "--rv-survey", "K_MIN [m/s],BASELINE [yr]", "3,10")
    if pair is not None:
        if pair[0] < 0:
            raise InputError(f"--rv-survey = {args.rv_survey!r}: K_MIN must be >= 0 m/s")
        if pair[1] <= 0:
            raise InputError(f"--rv-survey = {args.rv_survey!r}: BASELINE must be > 0 yr")
        survey = RVSurvey(k_min=pair[0], baseline=pair[1])
    rescale = None
    if args.rescale_a is not None:
        rescale = _range(args.rescale_a, "--rescale-a", "AU", "0.5,5")
        if rescale.low <= 0:
            raise InputError(f"--rescale-a = {args.rescale_a!r}: both ends must be > 0 AU")
    star_mass = None
    if args.star_mass is not None:
        star_mass = _number(args.star_mass, "--star-mass", "a stellar mass in M_sun, e.g. 1.0")
        if star_mass <= 0:
            raise InputError(f"--star-mass = {args.star_mass!r}: must be > 0 M_sun")
    if args.tidal not in TIDAL_CHOICES:
        raise InputError(f"--tidal = {args.tidal!r}: allowed: {', '.join(TIDAL_CHOICES)}")
    tol = _number(args.energy_tolerance, "--energy-tolerance", "a number > 0, e.g. 1e-4")
    if tol <= 0:
        raise InputError(f"--energy-tolerance = {args.energy_tolerance!r}: must be > 0")
    refs = (
        ()
        if args.references.strip().lower() == "none"
        else tuple(r.strip() for r in args.references.split(",") if r.strip())
    )
    for r in refs:
        if r not in REFERENCE_DISTRIBUTIONS:
            raise InputError(f"--references: {r!r} unknown; allowed: {', '.join(REFERENCE_DISTRIBUTIONS)} or none")
    return CompareOptions(
        cuts=cuts,
        survey=survey,
        project_sin_i=not args.true_mass,
        rescale_a=rescale,
        star_mass=star_mass,
        energy_tolerance=tol,
        include_capped=args.include_capped,
        tidal=args.tidal,
        permutations=integer_flag(args.permutations, "--permutations", 1),
        uncertainty_draws=integer_flag(args.error_draws, "--error-draws", 0),
        bootstrap_draws=integer_flag(args.bootstrap, "--bootstrap", 0),
        spread_permutations=integer_flag(args.spread_permutations, "--spread-permutations", 1),
        references=refs,
        reference_samples=integer_flag(args.reference_samples, "--reference-samples", 1),
        seed=integer_flag(args.seed, "--seed", 0),
    )


def _labels(paths: list[str]) -> list[str]:
    names = [
        Path(p).stem
        if Path(p).suffix == ".nc" and Path(p).name != "ensemble.nc"
        else (Path(p).parent.name if Path(p).name == "ensemble.nc" else Path(p).name)
        for p in paths
    ]
    return names if len(set(names)) == len(names) else [str(p) for p in paths]


def _write_atomic(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def execute(args) -> int:
    from scatter_pop.survey.comparison import compare, load_ensemble

    options = _options(args)
    columns, explicit = ColumnMap.parse(args.columns)
    observed = load_catalogue(
        args.observed, columns=columns, explicit=explicit, cuts=options.cuts, keep_zero_e=args.keep_zero_e
    )
    labels = _labels(args.dirs)
    datasets = [load_ensemble(p, partial=args.partial) for p in args.dirs]
    samples = [(label, [ds]) for label, ds in zip(labels, datasets)]
    if args.pool and len(datasets) > 1:
        samples.append(("pooled", datasets))
    report = compare(samples, observed, options)
    report.sources.update({label: str(p) for label, p in zip(labels, args.dirs)})
    text = render(report, args.format)
    if args.output:
        _write_atomic(Path(args.output), text)
    else:
        print(text, end="")
    return 0

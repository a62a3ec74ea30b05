"""Options shared by the subcommands, spelled once, and their checks (one-line InputError naming the flag).

One spelling per idea across commands: ``--out`` (where results go), ``--format`` (what they are
written as; ``--json`` is short for ``--format json``), ``--target FILE`` with single-value flags as
overrides, ``--star-mass`` (the target's star) and ``--ensemble-star-mass`` (the simulated star, when a
dataset does not record it), ``--partial`` (read what a stopped run has finished), the sample cuts of
``compare`` and ``figures`` (:func:`add_sample_arguments`) and the quality cuts of every command that
counts systems (:func:`add_quality_arguments`).
"""

from __future__ import annotations

import math
import os
import tempfile
from pathlib import Path

from scatter_pop.constants import DAY_S, MJUP_MSUN, YEAR_S
from scatter_pop.errors import InputError

__all__ = [
    "integer_flag",
    "number_flag",
    "pair_flag",
    "add_target_arguments",
    "target_from_args",
    "add_quality_arguments",
    "quality_from_args",
    "add_sample_arguments",
    "sample_options",
    "add_statistics_arguments",
    "check_statistics",
    "add_partial_argument",
    "open_runs",
    "row_labels",
    "output_file",
    "write_atomic",
    "add_format_arguments",
    "output_format",
]


def integer_flag(text, flag: str, minimum: int, maximum: int = 10**12) -> int:
    """``text`` as an integer in [minimum, maximum], or InputError naming ``flag``."""
    allowed = f"an integer >= {minimum}" + (f" and <= {maximum:g}" if maximum < 10**12 else "")
    try:
        value = int(str(text).strip())
    except (TypeError, ValueError):
        raise InputError(f"{flag} = {text!r}: expected {allowed}") from None
    if not minimum <= value <= maximum:
        raise InputError(f"{flag} = {text!r}: expected {allowed}")
    return value


def number_flag(text, flag: str, what: str, ok=lambda x: True) -> float:
    """``text`` as a finite float for which ``ok`` holds, or InputError naming ``flag``."""
    try:
        value = float(str(text).strip())
    except (TypeError, ValueError):
        raise InputError(f"{flag} = {text!r}: expected {what}") from None
    if not math.isfinite(value) or not ok(value):
        raise InputError(f"{flag} = {text!r}: expected {what}")
    return value


def pair_flag(text, flag: str, what: str) -> tuple[float, float] | None:
    """``LOW,HIGH`` as two finite floats (None when not given)."""
    if text is None:
        return None
    parts = [p.strip() for p in str(text).split(",")]
    if len(parts) != 2:
        raise InputError(f"{flag} = {text!r}: expected two numbers {what}")
    lo, hi = (number_flag(p, flag, f"two numbers {what}") for p in parts)
    return lo, hi


# ----------------------------------------------------------------------------- target
_TARGET_FLAGS = (
    ("e", "E", "eccentricity, in [0, 1)"),
    ("e_err", "S", "1-sigma uncertainty of e (>= 0)"),
    ("a", "AU", "semi-major axis [AU] (> 0)"),
    ("a_err", "AU", "1-sigma uncertainty of a [AU] (>= 0)"),
    ("msini", "MJ", "minimum mass m sin i [M_J] (> 0)"),
    ("msini_err", "MJ", "1-sigma uncertainty of m sin i [M_J] (>= 0)"),
    ("star_mass", "MSUN", "the target's stellar mass [M_sun]; simulated masses are scaled by M*_target/M*_ensemble"),
    ("name", "NAME", "name of the target in reports"),
)
_WINDOW_FLAGS = (
    ("a_window", "K", "a within +-K x a_err (default 2)"),
    ("a_factor", "F", "a within [a/F, a*F] instead of the sigma window"),
    ("msini_window", "K", "m sin i within +-K x msini_err (default 2)"),
    ("msini_factor", "F", "m sin i within [m/F, m*F] instead"),
    ("e_window", "K", "e at least e - K x e_err (default 0: at or above the measured e)"),
)


def _flag(key: str) -> str:
    return "--" + key.replace("_", "-")


def add_target_arguments(parser, *, windows: bool = True, true_mass: bool = True) -> None:
    """``--target FILE`` and one flag per target value (and window) overriding the file's."""
    g = parser.add_argument_group(
        "target planet: a TOML file (see docs/judge-and-figures.md), single values override it"
    )
    g.add_argument("--target", metavar="FILE", help="target file ([target] e, e_err, a, a_err, msini, ...)")
    for key, metavar, help_text in _TARGET_FLAGS:
        g.add_argument(_flag(key), metavar=metavar, help=help_text)
    if true_mass:
        g.add_argument(
            "--true-mass",
            action="store_const",
            const=True,
            default=None,
            help="the target's mass is a true mass (e.g. from astrometry): compare without sin i projection",
        )
    if windows:
        w = parser.add_argument_group("what counts as 'like the target' (override the file's [windows])")
        for key, metavar, help_text in _WINDOW_FLAGS:
            w.add_argument(_flag(key), metavar=metavar, help=help_text)


def target_from_args(args, *, need_mass: bool = True):
    """The :class:`~scatter_pop.target.target_file.TargetFile` of ``--target`` and the overrides."""
    from scatter_pop.target.target_file import load_target_file

    keys = [k for k, _, _ in _TARGET_FLAGS] + [k for k, _, _ in _WINDOW_FLAGS] + ["true_mass"]
    overrides = {k: getattr(args, k, None) for k in keys}
    return load_target_file(args.target, overrides, need_mass=need_mass)


# ----------------------------------------------------------------------------- quality cuts
def add_quality_arguments(parser) -> None:
    """The quality cuts (:class:`~scatter_pop.store.schema.QualityCuts`), the same for every command."""
    from scatter_pop.store.schema import ENERGY_TOLERANCE_DEFAULT

    q = parser.add_argument_group("which systems are used")
    q.add_argument(
        "--energy-tolerance",
        default=str(ENERGY_TOLERANCE_DEFAULT),
        metavar="DE",
        help=f"leave out systems with |dE/E| above this (default {ENERGY_TOLERANCE_DEFAULT:g})",
    )
    q.add_argument(
        "--include-capped", action="store_true", help="keep systems stopped by the wall-clock cap (left out by default)"
    )
    add_partial_argument(q)


def add_partial_argument(parser) -> None:
    parser.add_argument(
        "--partial", action="store_true", help="read the systems finished so far of a run that has not finished"
    )


def quality_from_args(args):
    from scatter_pop.store.schema import QualityCuts

    tol = number_flag(args.energy_tolerance, "--energy-tolerance", "a number > 0, e.g. 1e-4", lambda x: x > 0)
    return QualityCuts(energy_tolerance=tol, include_capped=args.include_capped)


# ----------------------------------------------------------------------------- sample cuts
def add_sample_arguments(parser) -> None:
    """The cuts and the survey model of the simulated and observed samples (``compare`` and ``figures``)."""
    from scatter_pop.survey.forward_model import TIDAL_CHOICES

    c = parser.add_argument_group("comparison sample")
    c.add_argument("--a-range", metavar="LOW,HIGH", help="semi-major axis cut [AU], both samples")
    c.add_argument("--period-range", metavar="LOW,HIGH", help="period cut [d], both samples")
    c.add_argument("--mass-range", metavar="LOW,HIGH", help="mass cut [M_J], both samples (m sin i unless --true-mass)")
    c.add_argument("--star-mass-range", metavar="LOW,HIGH", help="stellar-mass cut [M_sun], catalogue only")
    c.add_argument(
        "--rv-survey",
        metavar="K_MIN,BASELINE",
        help="keep simulated planets with K >= K_MIN [m/s] and P <= BASELINE [yr]",
    )
    c.add_argument(
        "--true-mass",
        action="store_const",
        const=True,
        default=None,
        help="masses are true masses: do not project simulated masses to m sin i (K then edge-on)",
    )
    c.add_argument(
        "--rescale-a",
        metavar="LOW,HIGH",
        help="rescale each system so its initial inner a is log-uniform in [LOW, HIGH] AU",
    )
    c.add_argument(
        "--ensemble-star-mass",
        metavar="MSUN",
        help="stellar mass of the ensembles [M_sun], if the datasets do not record it",
    )
    c.add_argument(
        "--tidal",
        default="keep",
        choices=TIDAL_CHOICES,
        help="tidal-circularisation candidates: keep (default), drop, or circularise (a -> a(1-e^2), e -> 0)",
    )
    c.add_argument(
        "--keep-zero-e", action="store_true", help="keep catalogue entries with e exactly 0 (default: left out)"
    )
    c.add_argument(
        "--columns",
        default="",
        metavar="Q=COL,...",
        help="catalogue column of each quantity, e.g. e=ecc,a=sma (e, e_err_lo, e_err_hi, a, period, mass, m_star)",
    )


def _range(text, flag, unit, example, scale=1.0):
    from scatter_pop.survey.cuts import Range

    pair = pair_flag(text, flag, f"LOW,HIGH in {unit}, e.g. {example}")
    if pair is None:
        return None
    low, high = pair
    if low < 0 or high <= low:
        raise InputError(f"{flag} = {text!r}: expected 0 <= LOW < HIGH ({unit}), e.g. {example}")
    return Range(low * scale, high * scale)


def sample_options(args) -> dict:
    """CompareOptions fields of the sample flags (cuts, survey, projection, rescaling, tidal, star mass)."""
    from scatter_pop.survey.cuts import SampleCuts
    from scatter_pop.survey.forward_model import RVSurvey

    cuts = SampleCuts(
        a=_range(args.a_range, "--a-range", "AU", "0.1,5"),
        period=_range(args.period_range, "--period-range", "days", "10,3000", DAY_S / YEAR_S),
        mass=_range(args.mass_range, "--mass-range", "M_J", "0.3,15", MJUP_MSUN),
        m_star=_range(args.star_mass_range, "--star-mass-range", "M_sun", "0.5,1.5"),
    )
    survey = None
    pair = pair_flag(args.rv_survey, "--rv-survey", "K_MIN [m/s],BASELINE [yr], e.g. 3,10")
    if pair is not None:
        if pair[0] < 0:
            raise InputError(f"--rv-survey = {args.rv_survey!r}: K_MIN must be >= 0 m/s")
        if pair[1] <= 0:
            raise InputError(f"--rv-survey = {args.rv_survey!r}: BASELINE must be > 0 yr")
        survey = RVSurvey(k_min=pair[0], baseline=pair[1])
    rescale = _range(args.rescale_a, "--rescale-a", "AU", "0.5,5")
    if rescale is not None and rescale.low <= 0:
        raise InputError(f"--rescale-a = {args.rescale_a!r}: both ends must be > 0 AU")
    star_mass = None
    if args.ensemble_star_mass is not None:
        star_mass = number_flag(
            args.ensemble_star_mass, "--ensemble-star-mass", "a stellar mass in M_sun, > 0, e.g. 1.0", lambda x: x > 0
        )
    return dict(
        cuts=cuts,
        survey=survey,
        project_sin_i=not args.true_mass,
        rescale_a=rescale,
        star_mass=star_mass,
        tidal=args.tidal,
    )


def load_observed(args, cuts):
    """The observed catalogue of ``--observed`` with ``--columns`` and ``--keep-zero-e``."""
    from scatter_pop.survey.catalogue import ColumnMap, load_catalogue

    columns, explicit = ColumnMap.parse(args.columns, "--columns")
    return load_catalogue(args.observed, columns=columns, explicit=explicit, cuts=cuts, keep_zero_e=args.keep_zero_e)


# ----------------------------------------------------------------------------- statistics
def add_statistics_arguments(parser) -> None:
    """Seed and binomial intervals (``judge`` and ``figures``)."""
    from scatter_pop.target.proportions import INTERVAL_METHODS

    s = parser.add_argument_group("statistics")
    s.add_argument("--seed", default="0", help="seed of every random draw (default 0)")
    s.add_argument(
        "--interval",
        choices=INTERVAL_METHODS,
        default="exact",
        help="binomial interval: exact (Clopper-Pearson, default) or wilson",
    )
    s.add_argument("--confidence", default="0.95", help="confidence level of intervals (default 0.95)")


def check_statistics(args) -> None:
    """Check ``--seed`` and ``--confidence`` in place."""
    args.seed = integer_flag(args.seed, "--seed", 0, 2**63 - 1)
    args.confidence = number_flag(
        args.confidence, "--confidence", "a number in (0, 1), e.g. 0.95", lambda x: 0.0 < x < 1.0
    )


# ----------------------------------------------------------------------------- runs and labels
def row_labels(paths, labels: str | None, flag: str = "--labels") -> list[str]:
    """Names of the ensembles: ``--labels A,B,...`` or the folder names (the paths when those repeat)."""
    if labels is not None:
        names = [s.strip() for s in labels.split(",")]
        if len(names) != len(paths) or len(set(names)) != len(names) or not all(names):
            raise InputError(
                f"{flag} = {labels!r}: expected {len(paths)} distinct non-empty names, one per DIR, comma-separated"
            )
        return names
    paths = [Path(p) for p in paths]
    names = [
        (p.resolve().parent.name if p.name == "ensemble.nc" else p.stem if p.suffix == ".nc" else p.resolve().name)
        or str(p)
        for p in paths
    ]
    return names if len(set(names)) == len(names) else [str(p) for p in paths]


def open_runs(dirs, *, labels: str | None = None, partial: bool = False) -> list[tuple[str, object]]:
    """Open the ensemble of each run folder (or ``.nc`` file): [(label, Dataset)]."""
    from scatter_pop.survey.comparison import load_ensemble

    names = row_labels(dirs, labels)
    return [(name, load_ensemble(d, partial=partial, flag="DIR")) for name, d in zip(names, dirs)]


# ----------------------------------------------------------------------------- output
def add_format_arguments(parser, formats, default: str = "text") -> None:
    parser.add_argument("--format", default=default, choices=formats, help=f"what to print (default {default})")
    parser.add_argument("--json", action="store_const", dest="format", const="json", help="short for --format json")


def output_format(args) -> str:
    return args.format


def output_file(text: str | None, flag: str = "--out") -> Path | None:
    """A file path that can be written (its folder exists or can be made; not a folder itself)."""
    if text is None:
        return None
    path = Path(text)
    if path.is_dir():
        raise InputError(f"{flag} = {text!r}: is a folder; expected a file name")
    for parent in [path.parent, *path.parent.parents]:
        if parent.exists():
            if not parent.is_dir():
                raise InputError(f"{flag} = {text!r}: {str(parent)!r} is a file, not a folder")
            if not os.access(parent, os.W_OK):
                raise InputError(f"{flag} = {text!r}: folder {str(parent)!r} is not writable")
            break
    return path


def output_folder(text, flag: str = "--out") -> Path | None:
    """A folder that can hold results: absent (made later) or a folder; never an existing file."""
    if text is None:
        return None
    path = Path(text)
    for p in [path, *path.parents]:
        if p.exists():
            if not p.is_dir():
                raise InputError(f"{flag} = {str(text)!r}: {str(p)!r} is a file; expected a folder (made if absent)")
            if not os.access(p, os.W_OK):
                raise InputError(f"{flag} = {str(text)!r}: folder {str(p)!r} is not writable")
            break
    return path


def write_atomic(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise

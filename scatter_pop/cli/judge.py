"""``scatter-pop judge DIR [DIR...] --e E --e-err S --a A --a-err S --msini M --msini-err S``.

How often the ensembles in the run folders make a planet like the target;
prints the judgement as text (or JSON with ``--json``) and, with
``--out DIR``, also writes ``verdict.txt`` and ``verdict.json`` there.
Every flag is checked before any file is read.
"""

from __future__ import annotations

import math
from pathlib import Path

from scatter_pop.cli.options import integer_flag
from scatter_pop.errors import InputError
from scatter_pop.store.schema import ENERGY_TOLERANCE_DEFAULT
from scatter_pop.target.proportions import INTERVAL_METHODS

__all__ = ["configure", "execute", "add_target_arguments", "target_from_args", "windows_from_args", "open_runs"]


def add_target_arguments(parser, *, required: bool = True) -> None:
    """Add the target and window flags (shared with ``scatter-pop figures``)."""
    g = parser.add_argument_group("target planet (masses in M_J, a in AU)")
    g.add_argument("--e", required=required, metavar="E", help="eccentricity, in [0, 1)")
    g.add_argument("--e-err", required=required, metavar="S", help="1-sigma uncertainty of e (>= 0)")
    g.add_argument("--a", required=required, metavar="AU", help="semi-major axis [AU] (> 0)")
    g.add_argument("--a-err", required=required, metavar="AU", help="1-sigma uncertainty of a [AU] (>= 0)")
    g.add_argument("--msini", required=required, metavar="MJ", help="minimum mass m sin i [M_J] (> 0)")
    g.add_argument("--msini-err", required=required, metavar="MJ", help="1-sigma uncertainty of m sin i [M_J] (>= 0)")
    g.add_argument(
        "--mstar",
        metavar="MSUN",
        help="the target's stellar mass [M_sun]; simulated masses are scaled by M*_target/M*_ensemble",
    )
    g.add_argument("--name", default="the target", help="name of the target in the report")
    g.add_argument(
        "--true-mass",
        action="store_true",
        help="--msini is a true mass (e.g. from astrometry): compare without sin i projection",
    )
    w = parser.add_argument_group("what counts as 'like the target'")
    w.add_argument("--a-window", default="2", metavar="K", help="a within ±K x --a-err (default 2)")
    w.add_argument("--a-factor", metavar="F", help="a within [a/F, a*F] instead of the sigma window")
    w.add_argument("--msini-window", default="2", metavar="K", help="m sin i within ±K x --msini-err (default 2)")
    w.add_argument("--msini-factor", metavar="F", help="m sin i within [m/F, m*F] instead")
    w.add_argument(
        "--e-window",
        default="0",
        metavar="K",
        help="e at least E - K x --e-err (default 0: at or above the measured e)",
    )


def target_from_args(args):
    """The :class:`~scatter_pop.target.planet.Target` of parsed flags (InputError names the flag)."""
    from scatter_pop.target.planet import target_from_flags

    return target_from_flags(
        e=args.e,
        e_err=args.e_err,
        a=args.a,
        a_err=args.a_err,
        msini=args.msini,
        msini_err=args.msini_err,
        mstar=args.mstar,
        name=args.name,
        true_mass=args.true_mass,
    )


def windows_from_args(args, target):
    """The :class:`~scatter_pop.target.planet.Windows` of parsed flags."""
    from scatter_pop.target.planet import windows_from_flags

    return windows_from_flags(
        target,
        a_window=args.a_window,
        a_factor=args.a_factor,
        msini_window=args.msini_window,
        msini_factor=args.msini_factor,
        e_window=args.e_window,
    )


def _labels(dirs: list[Path]) -> list[str]:
    names = [(d.resolve().parent.name if d.suffix == ".nc" else d.resolve().name) or str(d) for d in dirs]
    return names if len(set(names)) == len(names) else [str(d) for d in dirs]


def open_runs(dirs) -> list[tuple[str, object]]:
    """Open the ensemble of each run folder (or ``.nc`` file): [(label, Dataset)].

    Raises
    ------
    InputError
        A path that is neither a run folder nor holds an ensemble
        (:func:`scatter_pop.survey.comparison.load_ensemble`).
    """
    from scatter_pop.survey.comparison import load_ensemble

    dirs = [Path(d) for d in dirs]
    return [(label, load_ensemble(d, flag="DIR")) for label, d in zip(_labels(dirs), dirs)]


def check_common(args) -> None:
    """Check the statistics flags (seed, confidence, resamples, energy tolerance) in place."""
    args.seed = integer_flag(args.seed, "--seed", 0)
    try:
        args.confidence = float(args.confidence)
    except (TypeError, ValueError):
        raise InputError(f"--confidence {args.confidence!r}: must be a number in (0, 1)") from None
    if not 0.0 < args.confidence < 1.0:
        raise InputError(f"--confidence {args.confidence!r}: must be in (0, 1), e.g. 0.95")
    try:
        args.energy_tolerance = float(args.energy_tolerance)
    except (TypeError, ValueError):
        raise InputError(f"--energy-tolerance {args.energy_tolerance!r}: must be a number > 0") from None
    if not (math.isfinite(args.energy_tolerance) and args.energy_tolerance > 0):
        raise InputError(f"--energy-tolerance {args.energy_tolerance!r}: must be a number > 0")


def add_common_arguments(parser) -> None:
    """Seed, interval and quality flags (shared with ``scatter-pop figures``)."""
    s = parser.add_argument_group("statistics")
    s.add_argument("--seed", default="0", help="seed of the sin i draws and the bootstrap (default 0)")
    s.add_argument(
        "--interval",
        choices=INTERVAL_METHODS,
        default="exact",
        help="binomial interval: exact (Clopper-Pearson, default) or wilson",
    )
    s.add_argument("--confidence", default="0.95", help="confidence level of intervals (default 0.95)")
    s.add_argument(
        "--energy-tolerance",
        default=str(ENERGY_TOLERANCE_DEFAULT),
        help=f"leave out systems with |dE/E| above this (default {ENERGY_TOLERANCE_DEFAULT:g})",
    )
    s.add_argument(
        "--include-capped", action="store_true", help="keep systems stopped by the wall-clock cap (left out by default)"
    )


def configure(parser) -> None:
    parser.add_argument("dirs", nargs="+", metavar="DIR", help="run folders (each holding ensemble.nc)")
    add_target_arguments(parser, required=True)
    add_common_arguments(parser)
    parser.add_argument("--resamples", default="2000", help="bootstrap resamples (default 2000)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of text")
    parser.add_argument("--out", metavar="DIR", help="also write verdict.txt and verdict.json here")


def execute(args) -> int:
    from scatter_pop.target.judgement import judge
    from scatter_pop.target.verdict import render_json, render_text

    target = target_from_args(args)
    windows = windows_from_args(args, target)
    check_common(args)
    resamples = integer_flag(args.resamples, "--resamples", 1)
    runs = open_runs(args.dirs)
    result = judge(
        [ds for _, ds in runs],
        target,
        windows,
        labels=[lab for lab, _ in runs],
        seed=args.seed,
        confidence=args.confidence,
        method=args.interval,
        resamples=resamples,
        energy_tolerance=args.energy_tolerance,
        include_capped=args.include_capped,
    )
    text, doc = render_text(result), render_json(result)
    print(doc if args.json else text, end="")
    if args.out:
        out = Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        (out / "verdict.txt").write_text(text, encoding="utf-8")
        (out / "verdict.json").write_text(doc, encoding="utf-8")
    return 0

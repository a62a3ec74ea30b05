"""``scatter-pop figures DIR [DIR...] [--observed CSV] [--target FILE] [--format pdf,png]``.

Writes the paper's figure set, the CSV of every plotted number and the LaTeX table of branching
ratios and comparison statistics (:func:`scatter_pop.paper.figure_set.write_figure_set`) into
``--out`` (default ``<first DIR>/figures``).  The sample cuts and quality cuts are those of
``scatter-pop compare``, so the CDF figure reproduces a comparison made with the same flags; the
target file is that of ``scatter-pop judge`` (only e, a and their errors are drawn).  Every flag is
checked, the catalogue read and the ensembles opened before anything is written.
"""

from __future__ import annotations

from pathlib import Path

from scatter_pop.cli.options import (
    add_quality_arguments,
    add_sample_arguments,
    add_statistics_arguments,
    add_target_arguments,
    check_statistics,
    integer_flag,
    load_observed,
    open_runs,
    output_folder,
    quality_from_args,
    sample_options,
    target_from_args,
)
from scatter_pop.errors import InputError

__all__ = ["configure", "execute"]

ARGUMENT_FLAGS = {"star_mass": "--ensemble-star-mass", "formats": "--format", "dir": "DIR"}


def configure(parser) -> None:
    from scatter_pop.paper.figure_set import FORMATS, WIDTHS

    parser.add_argument("dirs", nargs="+", metavar="DIR", help="run folders (each holding ensemble.nc)")
    parser.add_argument(
        "--observed", metavar="CSV", help="observed catalogue for the e CDF and the comparison statistics"
    )
    parser.add_argument("--labels", metavar="A,B,...", help="names of the ensembles (default: folder names)")
    parser.add_argument(
        "--format",
        default="pdf",
        metavar="FMT,...",
        help=f"image formats, comma-separated, from {', '.join(FORMATS)} (default pdf)",
    )
    parser.add_argument(
        "--width",
        default="auto",
        choices=WIDTHS,
        help="single (3.35 in) or double (7.1 in) column; auto: single for one panel",
    )
    parser.add_argument("--out", metavar="FIGDIR", help="output folder (default <first DIR>/figures)")
    add_target_arguments(parser, windows=False, true_mass=False)
    add_sample_arguments(parser)
    parser.add_argument("--permutations", default="2000", help="permutations of the AD p-value (default 2000)")
    add_statistics_arguments(parser)
    add_quality_arguments(parser)


def execute(args) -> int:
    from scatter_pop.paper.figure_set import FORMATS, write_figure_set
    from scatter_pop.survey.comparison import CompareOptions

    formats = tuple(f.strip().lower() for f in args.format.split(",") if f.strip())
    bad = [f for f in formats if f not in FORMATS]
    if not formats or bad:
        raise InputError(f"--format = {args.format!r}: allowed formats: {', '.join(FORMATS)} (comma-separated)")
    check_statistics(args)
    quality = quality_from_args(args)
    given = any(getattr(args, k) is not None for k in ("target", "e", "e_err", "a", "a_err"))
    target = target_from_args(args, need_mass=False).point if given else None
    options = CompareOptions(
        **sample_options(args),
        quality=quality,
        permutations=integer_flag(args.permutations, "--permutations", 1, 10**7),
        uncertainty_draws=0,
        bootstrap_draws=0,
        references=(),
        seed=args.seed,
    )  # checked even without --observed (then unused)
    out = output_folder(args.out)
    observed = load_observed(args, options.cuts) if args.observed else None
    runs = open_runs(args.dirs, labels=args.labels, partial=args.partial)
    comparison = None
    if observed is not None:
        from scatter_pop.survey.comparison import compare

        comparison = compare([(lab, [ds]) for lab, ds in runs], observed, options)
    out = out if out is not None else Path(args.dirs[0]) / "figures"
    result = write_figure_set(
        runs,
        out,
        comparison=comparison,
        target=target,
        formats=formats,
        width=args.width,
        confidence=args.confidence,
        method=args.interval,
        quality=quality,
    )
    for f in result.figures:
        print(f"{f.name}: " + ", ".join(str(p) for p in f.images + f.tables))
    print(f"table: {result.latex}")
    return 0

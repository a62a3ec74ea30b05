"""``scatter-pop compare DIR [DIR ...] --observed CATALOG.csv``: survivors vs an observed catalogue.

Every flag is checked, the catalogue read and the ensembles opened before anything is computed; the
result goes to stdout or, with ``--out FILE``, to a file written atomically (a failed run leaves an
existing file untouched).  The sample cuts are those of ``scatter-pop figures`` (options.py).
"""

from __future__ import annotations

from scatter_pop.cli.options import (
    add_format_arguments,
    add_quality_arguments,
    add_sample_arguments,
    integer_flag,
    load_observed,
    open_runs,
    output_file,
    quality_from_args,
    sample_options,
    write_atomic,
)
from scatter_pop.errors import InputError
from scatter_pop.survey.report import FORMATS, render
from scatter_pop.survey.statistics import REFERENCE_DISTRIBUTIONS

__all__ = ["configure", "execute"]

ARGUMENT_FLAGS = {"star_mass": "--ensemble-star-mass", "dir": "DIR"}


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
        "--labels", metavar="A,B,...", help="names of the table rows, one per DIR (default: folder names)"
    )
    parser.add_argument("--pool", action="store_true", help="add a row pooling all DIRs")
    add_sample_arguments(parser)
    add_quality_arguments(parser)
    s = parser.add_argument_group("statistics")
    s.add_argument("--permutations", default="2000", metavar="N", help="permutations of the AD p-value (default 2000)")
    s.add_argument(
        "--error-draws", default="100", metavar="N", help="redraws of the observed e within their errors (0: skip)"
    )
    s.add_argument(
        "--bootstrap", default="100", metavar="N", help="bootstrap resamples of the simulated sample (0: skip)"
    )
    s.add_argument(
        "--spread-permutations", default="200", metavar="N", help="AD permutations per redraw / resample (default 200)"
    )
    s.add_argument(
        "--references",
        default=",".join(REFERENCE_DISTRIBUTIONS),
        metavar="NAME,...",
        help=f"published laws for one-sample tests, or 'none' ({', '.join(REFERENCE_DISTRIBUTIONS)})",
    )
    s.add_argument(
        "--reference-samples", default="2000", metavar="N", help="Monte-Carlo samples behind the one-sample AD p-values"
    )
    s.add_argument("--seed", default="0", metavar="INT", help="seed of every random draw (default 0)")
    add_format_arguments(parser, FORMATS)
    parser.add_argument("--out", metavar="FILE", help="write to FILE (atomically) instead of stdout")


def _options(args):
    from scatter_pop.survey.comparison import CompareOptions

    refs = (
        ()
        if args.references.strip().lower() == "none"
        else tuple(r.strip() for r in args.references.split(",") if r.strip())
    )
    for r in refs:
        if r not in REFERENCE_DISTRIBUTIONS:
            raise InputError(f"--references: {r!r} unknown; allowed: {', '.join(REFERENCE_DISTRIBUTIONS)} or none")
    return CompareOptions(
        **sample_options(args),
        quality=quality_from_args(args),
        permutations=integer_flag(args.permutations, "--permutations", 1, 10**7),
        uncertainty_draws=integer_flag(args.error_draws, "--error-draws", 0, 10**6),
        bootstrap_draws=integer_flag(args.bootstrap, "--bootstrap", 0, 10**6),
        spread_permutations=integer_flag(args.spread_permutations, "--spread-permutations", 1, 10**7),
        references=refs,
        reference_samples=integer_flag(args.reference_samples, "--reference-samples", 1, 10**7),
        seed=integer_flag(args.seed, "--seed", 0, 2**63 - 1),
    )


def execute(args) -> int:
    from scatter_pop.survey.comparison import compare

    options = _options(args)
    out = output_file(args.out)  # refused now, not after the computation
    observed = load_observed(args, options.cuts)
    runs = open_runs(args.dirs, labels=args.labels, partial=args.partial)
    samples = [(label, [ds]) for label, ds in runs]
    if args.pool and len(runs) > 1:
        if "pooled" in {label for label, _ in runs}:
            raise InputError("--labels: 'pooled' is the name of the --pool row; choose other names")
        samples.append(("pooled", [ds for _, ds in runs]))
    report = compare(samples, observed, options)
    report.sources.update({label: str(p) for (label, _), p in zip(runs, args.dirs)})
    text = render(report, args.format)
    if out is not None:
        write_atomic(out, text)
    else:
        print(text, end="")
    return 0

"""``scatter-pop figures DIR [DIR...] [--observed CSV] [--target E,E_ERR,A,A_ERR] [--format pdf,png]``.

Writes the paper's figure set, the CSV of every plotted number and the LaTeX
table of branching ratios and comparison statistics
(:func:`scatter_pop.paper.figure_set.write_figure_set`) into ``--out`` (default
``<first DIR>/figures``).  Every flag is checked, the catalogue read and the
ensembles opened before anything is written.
"""

from __future__ import annotations

from pathlib import Path

from scatter_pop.cli.judge import add_common_arguments, check_common, open_runs
from scatter_pop.constants import MJUP_MSUN
from scatter_pop.errors import InputError

__all__ = ["configure", "execute"]


def configure(parser) -> None:
    from scatter_pop.paper.figure_set import FORMATS, WIDTHS

    parser.add_argument("dirs", nargs="+", metavar="DIR", help="run folders (each holding ensemble.nc)")
    parser.add_argument(
        "--observed",
        metavar="CSV",
        help="observed catalogue for the e CDF and the comparison statistics "
        "(default columns of the shipped observed_rv_giants.csv)",
    )
    parser.add_argument(
        "--target", metavar="E,E_ERR,A,A_ERR", help="a target planet to mark: e, its error, a [AU], its error"
    )
    parser.add_argument("--target-name", default="target", help="its name in legends")
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
    c = parser.add_argument_group("comparison sample (as in scatter-pop compare)")
    c.add_argument("--a-range", metavar="LOW,HIGH", help="semi-major axis cut [AU], both samples")
    c.add_argument("--mass-range", metavar="LOW,HIGH", help="m sin i cut [M_J], both samples")
    c.add_argument(
        "--rv-survey",
        metavar="K_MIN,BASELINE",
        help="keep simulated planets with K >= K_MIN [m/s] and P <= BASELINE [yr]",
    )
    c.add_argument("--permutations", default="2000", help="permutations of the AD p-value (default 2000)")
    add_common_arguments(parser)


def _pair(text, flag: str, what: str):
    if text is None:
        return None
    parts = [p.strip() for p in str(text).split(",")]
    try:
        values = [float(p) for p in parts]
    except ValueError:
        values = []
    if len(values) != 2 or not all(v == v and abs(v) != float("inf") for v in values):
        raise InputError(f"{flag} {text!r}: must be two numbers {what}")
    return values


def _options(args):
    from scatter_pop.survey.comparison import CompareOptions
    from scatter_pop.survey.cuts import SampleCuts, check_range
    from scatter_pop.survey.forward_model import RVSurvey

    a = _pair(args.a_range, "--a-range", "LOW,HIGH in AU, e.g. 1,20")
    m = _pair(args.mass_range, "--mass-range", "LOW,HIGH in M_J, e.g. 0.3,15")
    k = _pair(args.rv_survey, "--rv-survey", "K_MIN [m/s],BASELINE [yr], e.g. 3,10")
    if k is not None and (k[0] < 0 or k[1] <= 0):
        raise InputError(f"--rv-survey {args.rv_survey!r}: K_MIN must be >= 0 m/s and BASELINE > 0 yr")
    try:
        permutations = int(args.permutations)
    except ValueError:
        permutations = 0
    if permutations < 1:
        raise InputError(f"--permutations {args.permutations!r}: must be an integer >= 1")
    cuts = SampleCuts(
        a=None if a is None else check_range(a[0], a[1], "--a-range"),
        mass=None if m is None else check_range(m[0] * MJUP_MSUN, m[1] * MJUP_MSUN, "--mass-range"),
    )
    return CompareOptions(
        cuts=cuts,
        survey=None if k is None else RVSurvey(k[0], k[1]),
        energy_tolerance=args.energy_tolerance,
        include_capped=args.include_capped,
        permutations=permutations,
        uncertainty_draws=0,
        bootstrap_draws=0,
        references=(),
        seed=args.seed,
    )


def execute(args) -> int:
    from scatter_pop.paper.figure_set import FORMATS, write_figure_set
    from scatter_pop.target.planet import target_point_from_flag

    formats = tuple(f.strip().lower() for f in args.format.split(",") if f.strip())
    bad = [f for f in formats if f not in FORMATS]
    if not formats or bad:
        raise InputError(f"--format {args.format!r}: allowed formats: {', '.join(FORMATS)} (comma-separated)")
    check_common(args)
    target = None if args.target is None else target_point_from_flag(args.target, args.target_name)
    options = _options(args)  # checked even without --observed (then unused)
    runs = open_runs(args.dirs)
    if args.labels is not None:
        labels = [s.strip() for s in args.labels.split(",")]
        if len(labels) != len(runs) or len(set(labels)) != len(labels) or not all(labels):
            raise InputError(
                f"--labels {args.labels!r}: must be {len(runs)} distinct non-empty names, one per DIR, comma-separated"
            )
        runs = [(lab, ds) for lab, (_, ds) in zip(labels, runs)]
    comparison = None
    if args.observed:
        from scatter_pop.survey.catalogue import load_catalogue
        from scatter_pop.survey.comparison import compare

        observed = load_catalogue(args.observed, cuts=options.cuts)
        comparison = compare([(lab, [ds]) for lab, ds in runs], observed, options)
    out = Path(args.out) if args.out else Path(args.dirs[0]) / "figures"
    result = write_figure_set(
        runs,
        out,
        comparison=comparison,
        target=target,
        formats=formats,
        width=args.width,
        confidence=args.confidence,
        method=args.interval,
        energy_tolerance=args.energy_tolerance,
        include_capped=args.include_capped,
    )
    for f in result.figures:
        print(f"{f.name}: " + ", ".join(str(p) for p in f.images + f.tables))
    print(f"table: {result.latex}")
    return 0

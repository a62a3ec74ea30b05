"""``scatter-pop judge DIR [DIR...] --target FILE [--e E ...]``.

How often the ensembles in the run folders make a planet like the target.  The target is a small
TOML file (:mod:`scatter_pop.target.target_file`, the same file ``figures`` and the demo read);
single-value flags (``--e``, ``--a-err``, ``--star-mass``, ``--a-window``, ...) override it or, without
a file, give it whole.  Prints the judgement as text (or JSON with ``--format json``) and, with
``--out DIR``, also writes ``verdict.txt`` and ``verdict.json`` there.  Every flag is checked before
any file is read.
"""

from __future__ import annotations

from scatter_pop.cli.options import (
    add_format_arguments,
    add_quality_arguments,
    add_statistics_arguments,
    add_target_arguments,
    check_statistics,
    integer_flag,
    open_runs,
    output_folder,
    quality_from_args,
    target_from_args,
)

__all__ = ["configure", "execute"]

ARGUMENT_FLAGS = {"star_mass": "--star-mass", "dir": "DIR"}


def configure(parser) -> None:
    parser.add_argument("dirs", nargs="+", metavar="DIR", help="run folders (each holding ensemble.nc)")
    add_target_arguments(parser)
    add_statistics_arguments(parser)
    add_quality_arguments(parser)
    parser.add_argument("--resamples", default="2000", help="bootstrap resamples (default 2000)")
    parser.add_argument(
        "--labels", metavar="A,B,...", help="names of the ensembles, one per DIR (default: folder names)"
    )
    add_format_arguments(parser, ("text", "json"))
    parser.add_argument("--out", metavar="DIR", help="also write verdict.txt and verdict.json into this folder")


def execute(args) -> int:
    from scatter_pop.store.atomic import atomic_write_text
    from scatter_pop.target.judgement import judge
    from scatter_pop.target.verdict import render_json, render_text

    chosen = target_from_args(args, need_mass=True)
    check_statistics(args)
    quality = quality_from_args(args)
    resamples = integer_flag(args.resamples, "--resamples", 1, 10**7)
    out = output_folder(args.out)
    runs = open_runs(args.dirs, labels=args.labels, partial=args.partial)
    result = judge(
        [ds for _, ds in runs],
        chosen.target,
        chosen.windows,
        labels=[lab for lab, _ in runs],
        seed=args.seed,
        confidence=args.confidence,
        method=args.interval,
        resamples=resamples,
        quality=quality,
    )
    text, doc = render_text(result), render_json(result)
    print(doc if args.format == "json" else text, end="")
    if out is not None:
        out.mkdir(parents=True, exist_ok=True)
        atomic_write_text(text, out / "verdict.txt")
        atomic_write_text(doc, out / "verdict.json")
    return 0

"""``scatter-pop bench``: integrator throughput and accuracy against the IAS15 reference.

A thin layer over :func:`scatter_pop.ensemble.bench.run_benchmark`; see that module for what is measured.
With no flags it runs the quick comparison (minutes); the full benchmark (hours of CPU time) only
with ``--full``.
"""

from __future__ import annotations

from scatter_pop.ensemble.bench import FULL, QUICK, run_benchmark

__all__ = ["configure", "execute"]

ARGUMENT_FLAGS = {"json_path": "--out"}


def configure(parser) -> None:
    parser.add_argument(
        "--full",
        action="store_true",
        help=f"the full benchmark: {FULL['systems']} systems per path to {FULL['end_time']:g} yr (CPU hours); "
        f"default: {QUICK['systems']} systems to {QUICK['end_time']:g} yr in this process (minutes)",
    )
    parser.add_argument("--systems", type=int, default=None, help=f"systems per path (full: {FULL['systems']})")
    parser.add_argument("--end-time", type=float, default=None, help=f"end time in yr (full: {FULL['end_time']:g})")
    parser.add_argument("--workers", type=int, default=None, help="worker processes (0: this process; full: 1)")
    parser.add_argument(
        "--paths",
        default=None,
        help="comma-separated paths besides the reference (default: all): default, ias15, bs, taylor, trace, mercurius",
    )
    parser.add_argument(
        "--permutations",
        type=int,
        default=None,
        help=f"permutations of the Anderson-Darling p-values (full: {FULL['permutations']})",
    )
    parser.add_argument(
        "--scaling-systems",
        type=int,
        default=None,
        help=f"systems of the 1-vs-2-worker efficiency run (full: {FULL['scaling_systems']}, 0: skip)",
    )
    parser.add_argument("--seed", type=int, default=20240611, help="run seed of the benchmark systems")
    parser.add_argument("--out", default=None, metavar="PATH", help="write the JSON record here")


def execute(args) -> int:
    paths = [p.strip() for p in args.paths.split(",") if p.strip()] if args.paths else None
    run_benchmark(
        quick=not args.full,
        systems=args.systems,
        end_time=args.end_time,
        workers=args.workers,
        paths=paths,
        permutations=args.permutations,
        scaling_systems=args.scaling_systems,
        json_path=args.out,
        seed=args.seed,
    )
    return 0

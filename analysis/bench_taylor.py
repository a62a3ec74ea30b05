"""Benchmark of the taylor back end (heyoka batch mode) against REBOUND IAS15 and BS, side by side.

    nice -n 10 .venv/bin/python analysis/bench_taylor.py [--systems 200] [--end-time 1e5]
        [--tolerances 1e-13,1e-12,1e-11,1e-10,1e-9] [--workers 2] [--json PATH]

The systems are those of ``scatter-pop bench`` (:mod:`scatter_pop.ensemble.bench`: an invented Sun-like
star with three Jupiters from 5 AU, 3.0 mutual Hill radii apart, e and i Rayleigh 0.01 / 0.5 deg), the
same initial conditions on every path, all measured in this one run with ``time.process_time`` of the
worker process that integrated them:

* ``reference``: IAS15, epsilon = 1e-9, no early stop (``reference=True``), one system at a time;
* ``bs``: REBOUND BS (bs_epsilon 1e-10), settled systems stopped early;
* ``taylor <tol>``: the taylor back end at that ``integration.taylor_tolerance``, settled systems stopped
  early, the systems integrated together 64 at a time (as a Dask task's batch), each call's CPU time
  shared equally; compiling (once per worker process, cached by heyoka on disk) is timed apart and
  printed, with the cold compile time (empty disk cache) measured in a fresh process.

Accuracy against the reference: median and worst |dE/E|; two-sample KS and Anderson-Darling p-values
(scipy.stats, :func:`scatter_pop.survey.statistics.two_sample`) of the surviving planets' final e and a;
the branching ratios of the planet fates with their binomial errors sqrt(p (1 - p) / n), and the
difference to the reference in units of the two errors combined.  Worker peak memory is the peak RSS
of the worker process (it also ran the other paths: an upper bound).
"""

from __future__ import annotations

import argparse
import json
import math
import subprocess
import sys
import tempfile
import time
from dataclasses import asdict, replace

from scatter_pop.ensemble.bench import TOGETHER_BATCH, Path, bench_spec, run_paths, summarize
from scatter_pop.spec.reader import IntegrationSpec

FATES = ("survived", "ejected", "merged", "hit_star", "tidally_disrupted")

COLD_COMPILE = """
import json, sys, time
import heyoka
heyoka.llvm_state.set_diskcache_path(sys.argv[1])
from scatter_pop.engine.taylor_lanes import lane_integrator
out = {}
for n in (2, 3, 4):
    t = time.perf_counter()
    lane_integrator(n, int(sys.argv[2]), float(sys.argv[3]))
    out[n] = time.perf_counter() - t
print(json.dumps(out))
"""


def cold_compile_seconds(lanes: int, tol: float) -> dict:
    """Seconds to compile the 2-, 3- and 4-body integrators in a fresh process with an empty disk cache."""
    with tempfile.TemporaryDirectory(prefix="heyoka_cold_") as tmp:
        out = subprocess.run(
            [sys.executable, "-c", COLD_COMPILE, tmp, str(lanes), repr(tol)], capture_output=True, text=True, check=True
        )
    return {int(k): v for k, v in json.loads(out.stdout).items()}


def branching(records, n_planets: int) -> dict:
    """Fraction of planets per fate and its binomial error, over the quality-selected systems."""
    from scatter_pop.engine.outcome import Fate
    from scatter_pop.store.schema import quality_mask, records_to_dataset

    ds = records_to_dataset(list(records), n_planets)
    fate = ds["fate"].values[quality_mask(ds).values].ravel()
    n = fate.size
    out = {}
    for f in Fate:
        p = float((fate == int(f)).sum()) / n
        out[f.word] = (p, math.sqrt(p * (1 - p) / n), n)
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--systems", type=int, default=200)
    ap.add_argument("--end-time", type=float, default=1e5)
    ap.add_argument("--tolerances", default="1e-13,1e-12,1e-11,1e-10,1e-9")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--no-bs", action="store_true", help="leave out the BS path")
    ap.add_argument("--permutations", type=int, default=2000)
    ap.add_argument(
        "--block",
        type=int,
        default=TOGETHER_BATCH,
        help="systems per block (a taylor call's batch at most); tables after each",
    )
    ap.add_argument("--json", default=None)
    args = ap.parse_args(argv)
    tols = [float(x) for x in args.tolerances.split(",") if x.strip()]

    from scatter_pop.engine.backends import backend

    taylor = backend("taylor")
    lanes = taylor.lanes()
    spec = bench_spec(args.systems, args.end_time)
    base = replace(spec.integration, integrator="bs")
    paths = [Path("reference", replace(base, integrator="ias15", stop_when_settled=False), True)]
    if not args.no_bs:
        paths.append(Path("bs", base, False))
    paths += [Path(f"taylor {t:.0e}", replace(base, integrator="taylor", taylor_tolerance=t), False) for t in tols]
    print(
        f"bench_taylor: {args.systems} systems x {len(paths)} paths to {args.end_time:g} yr, "
        f"{args.workers} worker process(es), {lanes} SIMD lanes",
        flush=True,
    )
    t0 = time.monotonic()
    compile_seconds: dict = {}
    results = {p.label: [] for p in paths}
    done = 0
    while done < args.systems:
        upto = min(args.systems, done + args.block)
        spec = bench_spec(upto, args.end_time)
        block = run_paths(
            spec, paths, workers=args.workers, compile_seconds=compile_seconds, first=done, log=lambda s: None
        )
        for label, rows in block.items():
            results[label] += rows
        done = upto
        report(spec, paths, results, compile_seconds, time.monotonic() - t0, lanes, args)
    cold = cold_compile_seconds(lanes, tols[0])
    print(
        f"cold compile (empty disk cache, fresh process), tolerance {tols[0]:.0e}, {lanes} lanes: "
        + ", ".join(f"{n} bodies {s:.2f} s" for n, s in cold.items())
        + f"; total {sum(cold.values()):.2f} s",
        flush=True,
    )
    default = replace(base, integrator="taylor", taylor_tolerance=IntegrationSpec().taylor_tolerance)
    alone = run_paths(
        bench_spec(min(args.systems, TOGETHER_BATCH), args.end_time),
        [Path("default only", default, False)],
        workers=1,
        log=lambda s: None,
    )
    peak = max(mb for _, _, mb in alone["default only"])
    print(
        f"worker peak memory running only the default taylor path ({default.taylor_tolerance:.0e}), "
        f"{min(args.systems, TOGETHER_BATCH)} systems in one call in a fresh process: {peak:.0f} MB",
        flush=True,
    )
    return 0


def report(spec, paths, results, compile_seconds, wall, lanes, args) -> None:
    """Print the tables for the systems measured so far (and write the JSON record)."""
    summary = summarize(spec, results, permutations=args.permutations)
    ref_branch = branching([r for r, _, _ in results["reference"]], spec.planets.count)
    print(f"\n{spec.run.systems} systems to {args.end_time:g} yr; {lanes} lanes; {wall:.0f} s wall")
    head = (
        f"{'path':<13} {'CPU s/sys':>9} {'x IAS15':>7} {'med|dE/E|':>9} {'max|dE/E|':>9} "
        f"{'KS e':>6} {'AD e':>6} {'KS a':>6} {'AD a':>6} {'peak MB':>7}"
    )
    print(head)
    print("-" * len(head))
    for label, s in summary.items():
        ps = " ".join(f"{s[k]:6.3f}" if s.get(k) is not None else f"{'-':>6}" for k in ("ks_e", "ad_e", "ks_a", "ad_a"))
        print(
            f"{label:<13} {s['cpu_seconds'] / s['systems']:9.4f} {s['speedup']:7.2f} "
            f"{s['energy_error_median']:9.1e} {s['energy_error_max']:9.1e} {ps} {s['worker_peak_rss_mb']:7.0f}"
        )
    print("\nbranching ratios of the planets (fraction +- binomial error; [difference to IAS15 in combined sigmas])")
    print(f"{'path':<13} " + " ".join(f"{f:>24}" for f in FATES))
    branches = {}
    for label, rows in results.items():
        b = branching([r for r, _, _ in rows], spec.planets.count)
        branches[label] = b
        cells = []
        for f in FATES:
            p, err, _ = b[f]
            p0, err0, _ = ref_branch[f]
            comb = math.hypot(err, err0)
            z = (p - p0) / comb if comb > 0 else 0.0
            cells.append(f"{p:6.3f}+-{err:5.3f} [{z:+5.2f}]")
        print(f"{label:<13} " + " ".join(f"{c:>24}" for c in cells))
    end_reasons = {label: s["end_reasons"] for label, s in summary.items()}
    print("\nend reasons:", json.dumps(end_reasons))
    print("\ncompile seconds per call (the first call of a worker process compiles, from heyoka's disk cache if warm):")
    for label, secs in compile_seconds.items():
        print(f"  {label}: first {max(secs):.2f} s, others {sorted(secs)[0]:.2f} s")
    sys.stdout.flush()
    if args.json:
        with open(args.json, "w", encoding="utf-8") as fh:
            json.dump(
                {
                    "systems": spec.run.systems,
                    "end_time": args.end_time,
                    "lanes": lanes,
                    "paths": {p.label: asdict(p.integration) for p in paths},
                    "summary": summary,
                    "branching": branches,
                    "compile_seconds": compile_seconds,
                    "wall_seconds": wall,
                },
                fh,
                indent=1,
                default=float,
            )


if __name__ == "__main__":
    sys.exit(main())

"""Benchmark (not a test): ensemble throughput on 1 and 2 local workers, measured side by side.

Prints, for each worker count, the systems per second of the computation phase, the parallel
efficiency of the largest count against one worker, and the share of worker time spent outside
integration (scheduling, transfers, part files, the driver) -- the goal is < 1 %.

    share outside integration = 1 - sum(per-system integration wall time) / (workers x wall time)

measured over the computation phase (first submission to last part written) and, separately, over
the whole run including cluster start-up and gathering ensemble.nc.  Both runs use the same spec
(an invented three-planet test system, below) and automatic batches; timings on shared machines
swing, so compare the numbers of one invocation only.

    .venv/bin/python analysis/bench_scaling.py [--systems 24] [--end-time 20000] [--workers 1 2]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from scatter_pop.ensemble.cluster import ClusterConfig, connect
from scatter_pop.ensemble.driver import EnsembleRun
from scatter_pop.spec.reader import parse_spec

SPEC = """\
# Invented benchmark system: a Sun-like star and three Jupiter-mass planets packed at 3.5-4.5
# mutual Hill radii (unstable within a few thousand orbits).
[run]
name = "bench"
seed = 20240611
systems = {systems}

[star]
mass = 1.0
radius = 1.0

[planets]
count = 3
mass = {{ distribution = "log-uniform", low = 0.5, high = 3.0 }}
a_inner = 3.0
spacing = {{ distribution = "uniform", low = 3.5, high = 4.5 }}
e_sigma = 0.01
inc_sigma = 1.0

[integration]
integrator = "ias15"
end_time = {end_time!r}
"""


def measure(spec, workers: int, root: Path) -> dict:
    t0 = time.perf_counter()
    with connect(ClusterConfig(), workers=workers) as client:
        t_connected = time.perf_counter()
        run = EnsembleRun(spec, root / f"w{workers}", client=client, progress_interval=3600.0, log=lambda line: None)
        run.run()
    t_end = time.perf_counter()
    tm = run.timings
    integ = tm.integration_seconds
    return {
        "workers": workers,
        "systems": tm.systems_computed,
        "startup": t_connected - t0,
        "compute": tm.compute,
        "gather": tm.gather,
        "total": t_end - t0,
        "integration": integ,
        "throughput": tm.systems_computed / tm.compute,
        "outside_compute": 1.0 - integ / (workers * tm.compute),
        "outside_total": 1.0 - integ / (workers * (t_end - t0)),
    }


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--systems", type=int, default=24)
    ap.add_argument("--end-time", type=float, default=20000.0, help="yr")
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    args = ap.parse_args(argv)
    spec = parse_spec(SPEC.format(systems=args.systems, end_time=args.end_time))
    rows = []
    with tempfile.TemporaryDirectory(prefix="bench_scaling_") as tmp:
        for w in args.workers:
            rows.append(measure(spec, w, Path(tmp)))
    print(f"{args.systems} systems, end time {args.end_time:g} yr, ias15, automatic batches")
    print(
        f"{'workers':>7} {'start s':>8} {'compute s':>10} {'gather s':>9} {'integr. CPU s':>14} "
        f"{'systems/s':>10} {'outside integr. (compute)':>26} {'(whole run)':>12}"
    )
    for r in rows:
        print(
            f"{r['workers']:>7} {r['startup']:>8.2f} {r['compute']:>10.2f} {r['gather']:>9.2f} "
            f"{r['integration']:>14.2f} {r['throughput']:>10.3f} {100 * r['outside_compute']:>25.2f}% "
            f"{100 * r['outside_total']:>11.2f}%"
        )
    base, top = rows[0], rows[-1]
    if top["workers"] != base["workers"]:
        speedup = top["throughput"] / base["throughput"]
        efficiency = speedup / (top["workers"] / base["workers"])
        print(
            f"speed-up {top['workers']} vs {base['workers']} workers: {speedup:.2f}; "
            f"parallel efficiency {100 * efficiency:.1f} %"
        )
        slower = (top["integration"] / top["systems"]) / (base["integration"] / base["systems"])
        print(
            f"mean integration time per system, {top['workers']} vs {base['workers']} workers: x{slower:.2f} "
            "(above 1: the workers compete for CPU -- other processes or too few cores -- which the "
            "driver cannot help)"
        )


if __name__ == "__main__":
    main()

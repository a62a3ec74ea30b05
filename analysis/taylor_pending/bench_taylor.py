"""Benchmark of the taylor back end (heyoka batch mode) against REBOUND IAS15 and BS.

Same initial conditions as :mod:`scatter_pop.bench` (an invented Sun-like star with three Jupiters
from 5 AU, 3.0 mutual Hill radii apart, e and i Rayleigh 0.01 / 0.5 deg).  Paths, all in this one
process, measured side by side with ``time.process_time``:

* ``reference``: IAS15, epsilon = 1e-9, no early stop (``reference=True``), one system at a time;
* ``bs``: REBOUND BS at the default tolerance, settled systems stopped early;
* ``taylor <tol>``: the task's systems in one call of ``integrate_systems_taylor`` (early stop), its
  CPU time shared equally among them; compilation is done before timing (cached per process) and
  reported apart;
* ``taylor-ref <tol>``: the same with ``reference=True`` (no early stop, like the reference).

Accuracy against the reference: median and worst |dE/E|, and KS/AD p-values of the survivors'
final e and a (:func:`scatter_pop.bench.summarize`).

Usage: ``python analysis/bench_taylor.py [systems] [end_time_yr] [tol,tol,...]``
"""

from __future__ import annotations

import json
import sys
import time
from dataclasses import replace

from scatter_pop.bench import bench_spec, format_table, summarize
from scatter_pop.initial_conditions import draw_system
from scatter_pop.integrate import integrate_initial
from scatter_pop.taylor_engine import default_lanes, integrate_systems_taylor
from scatter_pop.taylor_lanes import COMPILE_SECONDS, lane_integrator


def rebound_path(spec, integration, reference):
    rows = []
    for index in range(spec.run.systems):
        ini = draw_system(spec, index)
        c0 = time.process_time()
        rec = integrate_initial(ini, integration, spec.outcomes, reference=reference)
        rows.append((rec, time.process_time() - c0, 0.0))
    return rows


def taylor_path(spec, tol, reference, lanes):
    integ = replace(spec.integration, integrator="taylor", taylor_tolerance=tol)
    this = replace(spec, integration=integ)
    for n in (2, 3, 4):
        lane_integrator(n, lanes, tol)                 # compile outside the timing
    c0 = time.process_time()
    recs = integrate_systems_taylor(this, range(spec.run.systems), reference=reference, lanes=lanes)
    cpu = (time.process_time() - c0) / len(recs)
    return [(r, cpu, 0.0) for r in recs]


def main(argv):
    systems = int(argv[1]) if len(argv) > 1 else 16
    end_time = float(argv[2]) if len(argv) > 2 else 1e4
    tols = [float(x) for x in argv[3].split(",")] if len(argv) > 3 else [1e-15, 1e-13, 1e-11, 1e-9]
    lanes = default_lanes()
    spec = bench_spec(systems, end_time)
    results, log = {}, print
    t0 = time.monotonic()
    results["reference"] = rebound_path(spec, replace(spec.integration, integrator="ias15",
                                                       stop_when_settled=False), True)
    log(f"reference done, {time.monotonic() - t0:.0f} s")
    results["bs"] = rebound_path(spec, replace(spec.integration, integrator="bs"), False)
    log(f"bs done, {time.monotonic() - t0:.0f} s")
    for tol in tols:
        results[f"ty {tol:.0e}"] = taylor_path(spec, tol, False, lanes)
        results[f"tyref {tol:.0e}"] = taylor_path(spec, tol, True, lanes)
        log(f"taylor {tol:.0e} done, {time.monotonic() - t0:.0f} s")
    summary = summarize(spec, results, permutations=500)
    for label, entry in summary.items():
        entry["integrator"] = "ias15" if label == "reference" else label.split()[0]
        entry["cpu_per_system"] = entry["cpu_seconds"] / entry["systems"]
    print(f"\n{systems} systems to {end_time:g} yr, {lanes} lanes, one process")
    print(format_table(summary))
    print(f"\n{'path':<14} {'CPU s/system':>12} {'x IAS15':>8} {'med |dE/E|':>10}")
    for label, entry in summary.items():
        print(f"{label:<14} {entry['cpu_per_system']:12.4f} {entry['speedup']:8.2f} {entry['energy_error_median']:10.1e}")
    print("\ncompile seconds:", {f"{k[0]} bodies, {k[1]} lanes, tol {k[2]:.0e}": round(v, 2)
                                 for k, v in COMPILE_SECONDS.items()})
    with open(f"analysis/bench_taylor_{systems}x{end_time:g}.json", "w") as fh:
        json.dump({"summary": summary, "compile_seconds": {repr(k): v for k, v in COMPILE_SECONDS.items()}},
                  fh, indent=1, default=str)


if __name__ == "__main__":
    main(sys.argv)

"""Integrator benchmark: one set of initial conditions through every supported integration path.

Paths
-----
``reference``   IAS15 to the fixed end time, no early stop (``integrate_system(reference=True)``);
``default``     the engine's default settings (:class:`~scatter_pop.spec.reader.IntegrationSpec`), settled
                systems stopped early;
``<name>``      every other integrator of :data:`~scatter_pop.spec.reader.INTEGRATORS`, with early stopping
                (``taylor``: heyoka batch mode, the systems integrated together :data:`TOGETHER_BATCH` at a
                time, each call's CPU time shared equally; compiling, once per process, timed apart).

Every path integrates the same systems (same spec, same indices, hence the same initial
conditions).  The runs are interleaved system by system (system 0 on every path, then system 1, ...)
so that a change of machine load hits all paths alike; the cost of a system is the CPU time
(``time.process_time``) of the process that integrated it.  Throughput is systems per CPU-second and
its ratio to the reference is measured in the same run.

Accuracy is judged against the reference: median and worst |dE/E| of each path, branching ratios
(planet fates), and two-sample Kolmogorov-Smirnov and Anderson-Darling p-values
(:func:`scatter_pop.survey.statistics.two_sample`) of the final eccentricity and semi-major axis of the
surviving planets, in the systems :func:`scatter_pop.store.schema.quality_mask` keeps.

The benchmark system is invented for this purpose: a 1 M_sun, 1 R_sun star with three Jupiter-mass
planets, the innermost at 5 AU, neighbours 3.0 mutual Hill radii apart, e and i Rayleigh-distributed
(scales 0.01 and 0.5 deg).
"""

from __future__ import annotations

import json
import math
import os
import platform
import resource
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import asdict, dataclass, replace
from multiprocessing import get_context

from scatter_pop.engine.backends import backend
from scatter_pop.ensemble.bench_summary import format_table, summarize  # re-exported
from scatter_pop.ensemble.plan import MAX_AUTO_BATCH
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import INTEGRATORS, IntegrationSpec, parse_spec

__all__ = [
    "BENCH_SPEC",
    "Path",
    "make_paths",
    "bench_spec",
    "run_paths",
    "TOGETHER_BATCH",
    "summarize",
    "format_table",
    "measure_scaling",
    "run_benchmark",
    "FULL",
    "QUICK",
]

BENCH_SPEC = """\
# Invented benchmark system: a Sun-like star and three Jupiter-mass planets 3.0 mutual Hill radii apart.
[run]
name = "bench"
seed = {seed}
systems = {systems}

[star]
mass = 1.0
radius = 1.0

[planets]
count = 3
mass = 1.0
a_inner = 5.0
spacing = 3.0
e_sigma = 0.01
inc_sigma = 0.5

[integration]
end_time = {end_time!r}
"""

FULL = dict(systems=200, end_time=1e6, permutations=2000, scaling_systems=8, workers=1)
QUICK = dict(systems=4, end_time=3000.0, permutations=200, scaling_systems=0, workers=0)


@dataclass(frozen=True)
class Path:
    """One way of integrating the benchmark systems.

    Attributes
    ----------
    label : str
        ``reference``, ``default`` or an integrator name.
    integration : IntegrationSpec
        Settings used for every system of this path.
    reference : bool
        Never stop early (run every system to the end time).
    """

    label: str
    integration: IntegrationSpec
    reference: bool


def bench_spec(systems: int, end_time: float, seed: int = 20240611):
    """The benchmark spec (an :class:`~scatter_pop.spec.reader.EnsembleSpec`) with ``end_time`` in yr."""
    if systems < 2:
        raise InputError(
            f"systems = {systems}: must be >= 2 (the two-sample tests need two values)", arguments=("systems",)
        )
    if not (end_time > 0 and math.isfinite(end_time)):
        raise InputError(f"end_time = {end_time!r}: must be a positive number of years", arguments=("end_time",))
    return parse_spec(BENCH_SPEC.format(seed=seed, systems=systems, end_time=float(end_time)), "<bench>")


def make_paths(spec, names=None) -> list[Path]:
    """The reference, the default and every other integrator (or only ``names``), in that order."""
    base = spec.integration
    paths = [
        Path("reference", replace(base, integrator="ias15", stop_when_settled=False), True),
        Path("default", base, False),
    ]
    paths += [
        Path(name, replace(base, integrator=name), False)
        for name in INTEGRATORS
        if name != base.integrator and backend(name).unavailable() is None
    ]
    if names:
        known = [p.label for p in paths]
        names = ["default" if n == base.integrator else n for n in names]  # the default's integrator
        unknown = [n for n in names if n not in known]
        if unknown:
            raise InputError(
                f"paths = {','.join(unknown)}: unknown; choose from {', '.join(known)}", arguments=("paths",)
            )
        paths = [p for p in paths if p.label in set(names) | {"reference"}]
    return paths


# --------------------------------------------------------------------------- running
# systems per call of a back end that integrates them together: a full-size automatic Dask task of a
# campaign (plan.MAX_AUTO_BATCH).  Lanes idle in a call's tail (its last systems finish alone) and in
# the pools of systems that lost a planet; measured with taylor at 1e-9 to 1e5 yr, the share of lane
# steps doing work was 84 % with 64 systems per call, 92 % with 100 (90 % at 1e-12), 95 % with 256.
TOGETHER_BATCH = MAX_AUTO_BATCH


def _rss_mb() -> float:
    """Peak resident memory of this process's own address space, MB.

    Linux ``VmHWM`` (/proc/self/status), not ``ru_maxrss``: getrusage's figures are preserved across
    execve (getrusage(2)), so a spawned worker's ru_maxrss starts at its parent's peak (measured: a
    driver holding 414 MB gave its fresh worker a ru_maxrss of 414 MB against a VmHWM of 15 MB).
    Elsewhere ru_maxrss (macOS reports it in bytes, Linux in KB).
    """
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / 1024.0 / (1024.0 if sys.platform == "darwin" else 1.0)


def _run_one(spec_text: str, integration: dict, reference: bool, index: int):
    """Integrate one system in this process; return (record, CPU seconds, peak RSS in MB)."""
    from scatter_pop.engine.initial_conditions import draw_system
    from scatter_pop.engine.integrate import integrate_initial

    spec = parse_spec(spec_text, "<bench>")
    initial = draw_system(spec, index)
    c0 = time.process_time()
    record = integrate_initial(initial, IntegrationSpec(**integration), spec.outcomes, reference=reference)
    cpu = time.process_time() - c0
    return record, cpu, _rss_mb()


def _run_together(spec_text: str, integration: dict, reference: bool, indices: tuple[int, ...]):
    """Integrate ``indices`` in one call of a back end that integrates them together (as one Dask task
    would); the call's CPU time is shared equally among them.  What the back end does once per process
    (compiling) is done first and timed apart.  Returns (rows, compile seconds)."""
    from scatter_pop.engine.initial_conditions import draw_system

    spec = parse_spec(spec_text, "<bench>")
    integ = IntegrationSpec(**integration)
    chosen = backend(integ.integrator)
    initials = [draw_system(spec, i) for i in indices]
    compile_seconds = chosen.prepare(integ, max(ini.count for ini in initials) + 1)
    c0 = time.process_time()
    records = chosen.integrate_many(initials, integ, spec.outcomes, reference=reference)
    cpu = (time.process_time() - c0) / len(records)
    rss = _rss_mb()
    return [(r, cpu, rss) for r in records], compile_seconds


def _jobs(spec, paths, first: int = 0):
    """(label, function, args, first index) of every integration, interleaved by system index."""
    jobs = []
    n = spec.run.systems
    for p in paths:
        args = (spec.text, asdict(p.integration), p.reference)
        if backend(p.integration.integrator).integrates_together:
            for lo in range(first, n, TOGETHER_BATCH):
                jobs.append((p.label, _run_together, (*args, tuple(range(lo, min(n, lo + TOGETHER_BATCH)))), lo))
        else:
            jobs += [(p.label, _run_one, (*args, i), i) for i in range(first, n)]
    order = {p.label: k for k, p in enumerate(paths)}
    return sorted(jobs, key=lambda j: (j[3], order[j[0]]))


def run_paths(spec, paths, workers: int = 0, log=print, compile_seconds=None, first: int = 0) -> dict:
    """Integrate every system of ``spec`` on every path, interleaved system by system.

    A back end that integrates systems together gets them :data:`TOGETHER_BATCH` at a time, as a Dask
    task's batch would reach it (a lone system would run padded in a full batch: not its cost).

    Parameters
    ----------
    workers : int
        0: in this process; >= 1: that many fresh worker processes (spawned, so a worker's peak
        memory is that of integrating, not of this driver).
    compile_seconds : dict, optional
        Filled with label -> list of the seconds each call spent compiling before it was timed.
    first : int
        Integrate systems ``first`` .. ``spec.run.systems - 1`` only (a benchmark grown in blocks).

    Returns
    -------
    dict
        label -> list of (record, cpu_seconds, worker_peak_rss_MB), in system order.
    """
    jobs = _jobs(spec, paths, first)
    results = {p.label: [] for p in paths}
    t0 = time.monotonic()
    pool = None
    if workers == 0:
        outputs = (fn(*args) for _, fn, args, _ in jobs)
    else:
        pool = ProcessPoolExecutor(max_workers=workers, mp_context=get_context("spawn"))
        outputs = (f.result() for f in [pool.submit(fn, *args) for _, fn, args, _ in jobs])
    try:
        for k, ((label, fn, _, _), out) in enumerate(zip(jobs, outputs), start=1):
            if fn is _run_together:
                rows, seconds = out
                results[label] += rows
                if compile_seconds is not None:
                    compile_seconds.setdefault(label, []).append(seconds)
            else:
                results[label].append(out)
            if log and (k % max(1, len(paths) * 10) == 0 or k == len(jobs)):
                log(f"bench: {k}/{len(jobs)} integration calls done, {time.monotonic() - t0:.0f} s")
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)
    for label in results:
        results[label].sort(key=lambda row: row[0].index)
    return results


# --------------------------------------------------------------------------- statistics
def measure_scaling(spec, systems: int, workers=(1, 2), log=print) -> dict:
    """Throughput of the ensemble driver (Dask, default path) on 1 and 2 local workers.

    Returns wall-clock seconds of the computation phase for each worker count, the speed-up and
    the parallel efficiency speed-up / (workers ratio).
    """
    import tempfile
    from pathlib import Path as _P

    from scatter_pop.ensemble.cluster import connect
    from scatter_pop.ensemble.driver import EnsembleRun
    from scatter_pop.spec.cluster_table import ClusterConfig

    text = spec.text.replace(f"systems = {spec.run.systems}", f"systems = {systems}")
    small = parse_spec(text, "<bench-scaling>")
    rows = {}
    with tempfile.TemporaryDirectory(prefix="bench_scaling_") as tmp:
        for w in workers:
            with connect(ClusterConfig(), workers=w) as client:
                run = EnsembleRun(
                    small, _P(tmp) / f"w{w}", client=client, progress_interval=3600.0, log=lambda line: None
                )
                run.run()
            rows[w] = run.timings.compute
            if log:
                log(f"bench: scaling, {w} worker(s): {systems} systems in {rows[w]:.1f} s")
    lo, hi = min(workers), max(workers)
    speedup = rows[lo] / rows[hi]
    return {
        "systems": systems,
        "compute_seconds": {str(k): v for k, v in rows.items()},
        "speedup": speedup,
        "efficiency": speedup / (hi / lo),
    }


# --------------------------------------------------------------------------- the whole benchmark
def _version(package: str) -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version(package)
    except PackageNotFoundError:
        return "unknown"


def run_benchmark(
    *,
    quick=False,
    systems=None,
    end_time=None,
    workers=None,
    paths=None,
    permutations=None,
    scaling_systems=None,
    json_path=None,
    seed=20240611,
    log=print,
) -> dict:
    """Run the benchmark, print the table, write the JSON record and return it."""
    mode = dict(QUICK if quick else FULL)
    for key, value in (
        ("systems", systems),
        ("end_time", end_time),
        ("workers", workers),
        ("permutations", permutations),
        ("scaling_systems", scaling_systems),
    ):
        if value is not None:
            mode[key] = value
    if mode["workers"] < 0:
        raise InputError(f"workers = {mode['workers']}: must be >= 0 (0: in this process)", arguments=("workers",))
    if mode["permutations"] < 1:
        raise InputError(f"permutations = {mode['permutations']}: must be >= 1", arguments=("permutations",))
    if json_path is not None and not os.path.isdir(os.path.dirname(os.path.abspath(json_path))):
        raise InputError(f"json_path = {json_path}: its folder does not exist", arguments=("json_path",))
    spec = bench_spec(mode["systems"], mode["end_time"], seed)
    chosen = make_paths(spec, paths)
    log(
        f"bench: {mode['systems']} systems x {len(chosen)} paths to {mode['end_time']:g} yr "
        f"({'quick' if quick else 'full'} mode, workers {mode['workers']})"
    )
    compile_seconds: dict = {}
    results = run_paths(spec, chosen, workers=mode["workers"], log=log, compile_seconds=compile_seconds)
    summary = summarize(spec, results, permutations=mode["permutations"])
    for p in chosen:
        summary[p.label]["integrator"] = p.integration.integrator
        summary[p.label]["stops_early"] = not p.reference and p.integration.stop_when_settled
        summary[p.label]["lanes"] = max(r.lanes for r, _, _ in results[p.label])
        if p.label in compile_seconds:  # per call; the first call of a process compiles, the others reuse
            summary[p.label]["compile_seconds"] = compile_seconds[p.label]
    log(format_table(summary))
    for label, seconds in compile_seconds.items():
        log(
            f"bench: {label}: {summary[label]['lanes']} SIMD lanes, compiling {max(seconds):.1f} s per worker "
            "process (not in its CPU time)"
        )
    record = {
        "mode": "quick" if quick else "full",
        "settings": mode,
        "seed": seed,
        "paths": {p.label: {"integration": asdict(p.integration), "reference": p.reference} for p in chosen},
        "summary": summary,
        "systems": {
            label: [
                {
                    "index": r.index,
                    "cpu_seconds": c,
                    "energy_error": r.energy_error,
                    "end_reason": r.end_reason.word,
                    "t_end": r.t_end,
                    "survivors": r.n_survivors,
                }
                for r, c, _ in rows
            ]
            for label, rows in results.items()
        },
        "machine": {
            "platform": platform.platform(),
            "python": sys.version.split()[0],
            "rebound": _version("rebound"),
            "heyoka": _version("heyoka"),
            "cpus": os.cpu_count(),
        },
    }
    if mode["scaling_systems"]:
        record["scaling"] = measure_scaling(spec, mode["scaling_systems"], log=log)
        s = record["scaling"]
        log(f"bench: parallel efficiency 1 -> 2 workers: {100 * s['efficiency']:.0f} % (speed-up {s['speedup']:.2f})")
    if json_path is not None:
        with open(json_path, "w", encoding="utf-8") as fh:
            json.dump(record, fh, indent=1, default=float)
        log(f"bench: wrote {json_path}")
    return record

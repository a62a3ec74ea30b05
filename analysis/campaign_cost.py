"""Measure the cost of an ensemble spec and extrapolate it to the full campaign (a benchmark).

    .venv/bin/python analysis/campaign_cost.py runs/paper_two_planets.toml [SPEC...] \
        [--systems 8] [--orbits 3000]

For each spec, the first ``--systems`` systems are integrated in this process
(with the spec's integrator, or ``--integrator``) for ``--orbits`` initial inner orbits instead
of the spec's end time.  A back end that integrates systems together (taylor: SIMD lanes) gets the
whole sample in one call, as a Dask task's batch, and its CPU time is shared equally.  Printed: CPU seconds per system and per 1000 inner
orbits, integrator steps per orbit, how many sample systems stopped early, and
the campaign's cost if every system ran to the spec's end time at the measured
rate (an upper bound: systems that lose a planet or become Hill-stable stop
early; systems scattered onto tight orbits take more steps per initial orbit,
so the rate of the systems that ran to the end is printed too).
The cost comments in ``runs/demo.toml`` and ``runs/paper_*.toml`` come from this script.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import time

from scatter_pop.constants import G_AU_YR_MSUN
from scatter_pop.engine.backends import backend
from scatter_pop.engine.integrate import integrate_system, integrate_systems
from scatter_pop.spec.reader import load_spec


def inner_period(spec) -> float:
    """Initial inner period [yr] of a system at the spec's innermost a (Kepler, planet mass ignored)."""
    a = spec.planets.a_list[0] if spec.planets.a_list else spec.planets.a_inner
    return 2 * math.pi * math.sqrt(a**3 / (G_AU_YR_MSUN * spec.star.mass))


def measure(path: str, systems: int, orbits: float, integrator: str | None = None) -> None:
    spec = load_spec(path)
    integ = spec.integration if integrator is None else dataclasses.replace(spec.integration, integrator=integrator)
    short = dataclasses.replace(spec, integration=dataclasses.replace(integ, end_time=None, end_orbits=float(orbits)))
    period = inner_period(spec)
    full_orbits = spec.integration.end_time_years(period) / period
    cpu, steps, early, running = [], [], 0, []
    chosen = backend(short.integration.integrator)
    if chosen.integrates_together:
        chosen.prepare(short.integration, spec.planets.count + 1)  # compiling: once per worker, not counted
        t0 = time.process_time()
        records = integrate_systems(short, range(systems))
        shares = [(time.process_time() - t0) / systems] * systems
    else:
        records, shares = [], []
        for i in range(systems):
            t0 = time.process_time()
            records.append(integrate_system(short, i))
            shares.append(time.process_time() - t0)
    for rec, share in zip(records, shares):
        cpu.append(share)
        steps.append(rec.steps)
        early += rec.end_reason.word != "stopped_at_end_time"
        if rec.end_reason.word == "stopped_at_end_time":
            running.append(1000 * cpu[-1] / orbits)
    per_system = sum(cpu) / systems
    per_korbit = 1000 * per_system / orbits
    upper = per_korbit * full_orbits / 1000 * spec.run.systems / 3600
    print(
        f"{path} ({short.integration.integrator}): {spec.planets.count} planets, inner period {period:.3g} yr, end "
        f"{full_orbits:.3g} inner orbits, {spec.run.systems} systems"
    )
    print(
        f"  sample: {systems} systems x {orbits:g} orbits: {per_system:.2f} CPU s per system, "
        f"{per_korbit:.3f} CPU s per 1000 inner orbits, {sum(steps) / systems / orbits:.1f} steps per "
        f"orbit, {1e6 * sum(cpu) / sum(steps):.1f} us per step; {early} of {systems} stopped early"
    )
    if running:
        print(
            f"  the {len(running)} systems that ran to the end: {sum(running) / len(running):.3f} CPU s per 1000 "
            f"inner orbits on average, {max(running):.3f} at most"
        )
    print(
        f"  campaign if every system ran to the end at this rate: {upper:.3g} CPU hours "
        f"({upper / 64:.3g} h on 64 cores)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("specs", nargs="+")
    parser.add_argument("--systems", type=int, default=8)
    parser.add_argument("--orbits", type=float, default=3000.0)
    parser.add_argument("--integrator", default=None, help="instead of the spec's integration.integrator")
    args = parser.parse_args()
    for path in args.specs:
        measure(path, args.systems, args.orbits, args.integrator)


if __name__ == "__main__":
    main()

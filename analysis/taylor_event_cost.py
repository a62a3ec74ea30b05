"""What the taylor back end's events and step callback cost, and whether events touch the steps (heyoka 7.13).

    .venv/bin/python analysis/taylor_event_cost.py [tol] [end_time_yr] [repeats]

Eight benchmark systems (:mod:`scatter_pop.ensemble.bench`, invented: star + three Jupiters from 5 AU)
in one 8-lane batch, propagated to the end time (no fates applied: a raw comparison) by the bare N-body
batch integrator and by integrators with subsets of the back end's 15 non-terminal events (3 planet-pair
contact and 3 first-encounter events, 3 x star contact, tidal and escape; each scaled by
``taylor_lanes.EVENT_SCALE``), the full set also with the back end's Python step callback.  Printed per
variant (the variants interleaved, ``repeats`` times): the steps of the slowest lane (the batch's steps)
and the median CPU microseconds per batch step (per step: the variants' trajectories part by chaos, so
their step counts differ), and whether the full set gives the bare integrator's final states.
"""

from __future__ import annotations

import sys
import time
from dataclasses import replace

import heyoka as hy
import numpy as np

from scatter_pop.constants import G_AU_YR_MSUN
from scatter_pop.engine.backends.taylor import LaneSystem
from scatter_pop.engine.initial_conditions import draw_system
from scatter_pop.engine.taylor_lanes import LaneIntegrator, event_direction, event_function
from scatter_pop.ensemble.bench import bench_spec

VARIANTS = (
    ("bare", ()),
    ("contact", ("contact",)),
    ("contact+star", ("contact", "star")),
    ("no hill, no tidal", ("contact", "star", "escape")),
    ("no hill", ("contact", "star", "tidal", "escape")),
    ("all 15", ("contact", "hill", "star", "tidal", "escape")),
)


def build(li: LaneIntegrator, kinds, tol):
    """A batch integrator with the back end's events of ``kinds`` only."""
    eqs = hy.model.nbody(li.n, masses=[hy.par[k] for k in range(li.n)], Gconst=G_AU_YR_MSUN)
    var = [lhs for lhs, _ in eqs]
    chosen = [slot for slot in li.slots if slot.kind in kinds]
    events = [hy.nt_event_batch(event_function(var, s), lambda *a: None, direction=event_direction(s)) for s in chosen]
    n_par = max(s.par for s in chosen) + 1 if chosen else li.n
    ta = hy.taylor_adaptive_batch(
        eqs, np.zeros((6 * li.n, li.lanes)), tol=tol, pars=np.zeros((n_par, li.lanes)), nt_events=events
    )
    return ta, len(events), n_par


def load(ta, systems, li, n_par):
    for lane, s in enumerate(systems):
        ta.state[:, lane] = np.concatenate([s.x, s.v], axis=1).reshape(-1)
        ta.pars[:, lane] = s.pars(li.slots)[:n_par]
    ta.set_time(np.zeros(li.lanes))


def main() -> None:
    tol = float(sys.argv[1]) if len(sys.argv) > 1 else 1e-9
    end = float(sys.argv[2]) if len(sys.argv) > 2 else 4000.0
    repeats = int(sys.argv[3]) if len(sys.argv) > 3 else 7
    spec = bench_spec(8, end)
    integ = replace(spec.integration, integrator="taylor", taylor_tolerance=tol)
    systems = [LaneSystem(draw_system(spec, i), integ, spec.outcomes, None, True, lanes=8) for i in range(8)]
    li = LaneIntegrator(4, 8, tol)
    print(f"tol {tol:.0e}, order {li.ta.order}, 8 lanes to {end:g} yr, {repeats} repeats interleaved")
    runs = [(name, kinds, False) for name, kinds in VARIANTS] + [("all 15 + callback", VARIANTS[-1][1], True)]
    built = {name: build(li, kinds, tol) for name, kinds, _ in runs}
    per_step = {name: [] for name, _, _ in runs}
    finals, steps = {}, {}
    for _ in range(repeats):
        for name, _, callback in runs:
            ta, n_events, n_par = built[name]
            load(ta, systems, li, n_par)
            rec = li.recorder
            rec.hits, rec.stop, rec.calls, rec.stops = [], False, 0, None
            rec.targets, rec.real = np.full(8, 10 * end), np.ones(8, dtype=bool)
            start = time.process_time()
            if callback:
                ta.propagate_until(np.full(8, end), callback=li._step_callback)
            else:
                ta.propagate_until(np.full(8, end))
            seconds = time.process_time() - start
            steps[name] = max(int(r[3]) for r in ta.propagate_res)
            per_step[name].append(1e6 * seconds / steps[name])
            finals[name] = ta.state.copy()
    for name, _, _ in runs:
        xs = per_step[name]
        print(
            f"  {name:<18} {built[name][1]:2d} events, {steps[name]} batch steps, "
            f"{np.median(xs):5.2f} us per step (median; min {min(xs):.2f})"
        )
    same = [bool(np.array_equal(finals["bare"][:, k], finals["all 15"][:, k])) for k in range(8)]
    print(f"  final state of each lane equal, bare and all 15 events: {same}")


if __name__ == "__main__":
    main()

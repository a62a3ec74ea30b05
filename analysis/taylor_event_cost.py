"""What the taylor back end's events cost and whether they touch the steps (heyoka 7.13).

    .venv/bin/python analysis/taylor_event_cost.py [tol] [end_time_yr]

Eight benchmark systems (:mod:`scatter_pop.ensemble.bench`, invented: star + three Jupiters from 5 AU)
in one 8-lane batch, propagated to the end time (no fates applied: a raw comparison) by
(a) the bare N-body batch integrator and (b) the back end's integrator with its 15 non-terminal events
(6 planet-pair contact and first-encounter events, 3 x star contact, tidal and escape; each scaled by
``taylor_lanes.EVENT_SCALE``).  Printed: wall seconds, steps per lane, microseconds per batch step, and
whether the two give the same final states.
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
from scatter_pop.engine.taylor_lanes import LaneIntegrator
from scatter_pop.ensemble.bench import bench_spec


def main() -> None:
    tol = float(sys.argv[1]) if len(sys.argv) > 1 else 1e-9
    end = float(sys.argv[2]) if len(sys.argv) > 2 else 2000.0
    spec = bench_spec(8, end)
    integ = replace(spec.integration, integrator="taylor", taylor_tolerance=tol)
    systems = [LaneSystem(draw_system(spec, i), integ, spec.outcomes, None, True, lanes=8) for i in range(8)]
    eqs = hy.model.nbody(4, masses=[hy.par[k] for k in range(4)], Gconst=G_AU_YR_MSUN)
    bare = hy.taylor_adaptive_batch(eqs, np.zeros((24, 8)), tol=tol, pars=np.zeros((4, 8)))
    li = LaneIntegrator(4, 8, tol)
    for lane, s in enumerate(systems):
        bare.state[:, lane] = np.concatenate([s.x, s.v], axis=1).reshape(-1)
        bare.pars[:, lane] = s.m
        li.write(lane, s.x, s.v, (0.0, 0.0), s.pars(li.slots))
    bare.set_time(np.zeros(8))
    print(f"tol {tol:.0e}, order {li.ta.order}, 8 lanes to {end:g} yr")
    for name, ta in (("bare", bare), ("15 events", li.ta)):
        start = time.perf_counter()
        ta.propagate_until(np.full(8, end))
        wall = time.perf_counter() - start
        steps = [int(r[3]) for r in ta.propagate_res]
        print(f"  {name:<10} {wall:6.3f} s, {1e6 * wall / (sum(steps) / 8):5.1f} us per batch step, steps {steps}")
    same = [bool(np.array_equal(bare.state[:, k], li.ta.state[:, k])) for k in range(8)]
    print(f"  final state of each lane equal with and without events: {same}")


if __name__ == "__main__":
    main()

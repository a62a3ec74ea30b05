"""Where does the reference (IAS15) spend its CPU?  A census of configurations along IAS15 runs.

For each chunk of ``--chunk`` yr of an IAS15 (epsilon 1e-9) integration, record the CPU time
(time.process_time), the steps taken, the number of planets left, the smallest pericentre distance,
and the geometry of the closest pair of orbits in radius: gap = q_outer - Q_inner (AU; negative when
the radial ranges overlap, i.e. the orbits may cross) divided by the pair's summed Hill radii
R_H,i + R_H,j, R_H = a (m / 3M)^(1/3).  Writes one CSV row per chunk.
"""

from __future__ import annotations

import argparse
import csv
import math
import os
import sys
import time

import rebound

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from drivers import _Events  # noqa: E402
from systems import build_sim, draw_system  # noqa: E402


def geometry(sim):
    star = sim.particles["star"]
    orbs = []
    for p in sim.particles[1:]:
        o = p.orbit(primary=star)
        if o.a > 0 and o.e < 1:
            orbs.append((o.a * (1 - o.e), o.a * (1 + o.e), o.a * (p.m / (3 * star.m)) ** (1 / 3), o.a, o.e))
    qmin = min((o[0] for o in orbs), default=math.nan)
    gap = math.inf
    for i in range(len(orbs)):
        for j in range(len(orbs)):
            if i != j and orbs[i][3] <= orbs[j][3]:
                g = (orbs[j][0] - orbs[i][1]) / (orbs[i][2] + orbs[j][2])
                gap = min(gap, g)
    a_in = min((o[3] for o in orbs), default=math.nan)
    e_in = [o[4] for o in orbs if o[3] == a_in][0] if orbs else math.nan
    return qmin, gap, a_in, e_in


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("out")
    ap.add_argument("--seeds", default="0-3")
    ap.add_argument("--t-end", type=float, default=3e5)
    ap.add_argument("--chunk", type=float, default=1000.0)
    args = ap.parse_args(argv)
    lo, _, hi = args.seeds.partition("-")
    new = not os.path.exists(args.out)
    with open(args.out, "a", newline="") as fh:
        w = csv.writer(fh)
        if new:
            w.writerow(["seed", "t", "cpu_s", "steps", "n_planets", "q_min", "gap_hill", "a_inner", "e_inner"])
        for seed in range(int(lo), int(hi or lo) + 1):
            sim = build_sim(draw_system(seed), rand_seed=seed + 1)
            ev = _Events(sim)
            sim.integrator = "ias15"
            while sim.t < args.t_end and sim.N > 1:
                c0, s0 = time.process_time(), sim.steps_done
                t = min(args.t_end, sim.t + args.chunk)
                while sim.t < t and sim.N > 1:
                    try:
                        sim.integrate(t, exact_finish_time=0)
                    except rebound.Escape:
                        ev.handle_escape()
                q, gap, a_in, e_in = geometry(sim)
                w.writerow(
                    [
                        seed,
                        f"{sim.t:.1f}",
                        f"{time.process_time() - c0:.4f}",
                        sim.steps_done - s0,
                        sim.N - 1,
                        f"{q:.4f}",
                        f"{gap:.3f}",
                        f"{a_in:.4f}",
                        f"{e_in:.4f}",
                    ]
                )
            fh.flush()
            print("seed", seed, "done at", sim.t, "planets", sim.N - 1, flush=True)


if __name__ == "__main__":
    main()

"""Upper bound on the speed-up any Wisdom-Holman-based hybrid can reach over IAS15 in the crossing phase.

For each system (``systems.draw_system``: three Jupiters at 5 AU, 3 mutual Hill radii apart) this script
measures, in one process and interleaved system by system:

* ``cpu_ias15``  IAS15 (eps 1e-9) to ``t_end``, chunks of 10^3 yr, no early stop: the reference.
* ``cpu_bs``     BS (eps 1e-10, line collision search) over the same interval: the engine's default.
* ``us_wh``      the CPU cost of one WHFast step (Jacobi coordinates, corrector 17, safe_mode 0), timed
                 over 20 000 steps of the same system.

A separate, untimed IAS15 run samples the system every ``sample`` yr and records the innermost bound
orbit's period P_in(t) and the smallest pair separation in units of the pair's mutual Hill radius
R_H = ((m_i+m_j)/(3M))^(1/3) (a_i+a_j)/2 (Chambers, Wetherill & Boss 1996, Icarus 119, 261).

From these it computes the cost of an *idealised* hybrid that is faster than anything buildable:

    cost(n, k) = (1 - f_k) * sum_t (sample / (P_in(t) / n)) * us_wh   +   f_k * cpu_bs

i.e. WHFast at P_in/n steps with no switching cost, no accuracy loss and no Python work, for the fraction
(1 - f_k) of time in which no pair is closer than k mutual Hill radii, and BS (the cheapest accurate
set-up measured, README table) for the fraction f_k of time in encounter.  k = 3 is the encounter radius
REBOUND's MERCURIUS and TRACE use by default (r_crit_hill = 3; Rein et al. 2019, MNRAS 485, 5490;
Lu, Hernandez & Rein 2024, MNRAS 533, 3708 — from memory); n = 50 is the fewest steps per inner orbit
that kept WHFast-Jacobi within |dE/E| ~ 1e-6 on an e = 0.8 inner orbit (quiet_phase.csv).

Usage:  python ceiling.py ceiling.csv --seeds 0-11 --t-end 3e4
"""

from __future__ import annotations

import argparse
import csv
import math
import os
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from drivers import _Events, _integrate_to, run_fixed  # noqa: E402
from systems import build_sim, draw_system  # noqa: E402

N_STEPS = (30, 50, 100)
K_HILL = (1.0, 2.0, 3.0)


def wh_step_cost(planets, seed, steps=20000):
    """CPU seconds per WHFast-Jacobi step (corrector 17, safe_mode 0) for this system."""
    sim = build_sim(planets, rand_seed=seed + 1)
    sim.integrator = "whfast"
    sim.integrator.coordinates = "jacobi"
    sim.integrator.corrector = 17
    sim.integrator.safe_mode = 0
    sim.dt = sim.particles[1].P / 50.0
    c0 = time.process_time()
    sim.steps(steps)
    return (time.process_time() - c0) / steps


def switch_cost(planets, seed, cycles=2000):
    """CPU seconds of the least Python work one WHFast -> BS -> WHFast switch needs.

    Two integrator changes (with their parameters), the inner period for the new WHFast step and the
    three pair separations that decide the way back; the integrations themselves are excluded.
    """
    sim = build_sim(planets, rand_seed=seed + 1)
    star = sim.particles[0]
    c0 = time.process_time()
    for _ in range(cycles):
        sim.integrator = "bs"
        sim.integrator.eps_rel = 1e-10
        sim.integrator.eps_abs = 1e-10
        sim.gravity_ignore = 0
        ps = sim.particles
        for i in range(1, sim.N):
            for j in range(i + 1, sim.N):
                d = ps[i] - ps[j]
                math.sqrt(d.x * d.x + d.y * d.y + d.z * d.z)
        sim.integrator = "whfast"
        sim.integrator.coordinates = "jacobi"
        sim.integrator.corrector = 17
        sim.integrator.safe_mode = 0
        sim.dt = ps[1].orbit(primary=star).P / 50.0
    return (time.process_time() - c0) / cycles


def geometry(planets, seed, t_end, sample):
    """Per sample: (P_in, min pair separation / mutual R_H) from an untimed IAS15 run."""
    sim = build_sim(planets, rand_seed=seed + 1)
    ev = _Events(sim)
    sim.integrator = "ias15"
    out = []
    t = 0.0
    while t < t_end and sim.N > 1:
        t = min(t_end, t + sample)
        _integrate_to(sim, ev, t)
        star = sim.particles[0]
        ps = list(sim.particles[1:])
        periods = []
        for p in ps:
            o = p.orbit(primary=star)
            if 0 < o.e < 1:
                periods.append((o.P, o.a))
        p_in = min(periods)[0] if periods else math.inf
        sep = math.inf
        for i in range(len(ps)):
            oi = ps[i].orbit(primary=star)
            for j in range(i + 1, len(ps)):
                oj = ps[j].orbit(primary=star)
                a_mean = 0.5 * (abs(oi.a) + abs(oj.a))
                r_h = ((ps[i].m + ps[j].m) / (3.0 * star.m)) ** (1.0 / 3.0) * a_mean
                d = ps[i] - ps[j]
                sep = min(sep, math.sqrt(d.x**2 + d.y**2 + d.z**2) / r_h)
        out.append((p_in, sep))
    return out


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("out")
    ap.add_argument("--t-end", type=float, default=3e4)
    ap.add_argument("--seeds", default="0-11")
    ap.add_argument("--sample", type=float, default=0.25, help="geometry sampling interval, yr")
    args = ap.parse_args(argv)
    lo, _, hi = args.seeds.partition("-")
    seeds = range(int(lo), int(hi or lo) + 1)
    cols = ["seed", "t_end", "cpu_ias15", "steps_ias15", "cpu_bs", "us_wh", "median_p_in"]
    cols += [f"f_enc_k{k:g}" for k in K_HILL]
    cols += [f"ceiling_n{n}_k{k:g}" for n in N_STEPS for k in K_HILL]
    cols += [f"wh_only_n{n}" for n in N_STEPS]
    cols += ["us_switch"] + [f"entries_k{k:g}" for k in K_HILL]
    cols += [f"with_switch_n{n}_k{k:g}" for n in N_STEPS for k in K_HILL]
    with open(args.out, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(cols)
        for seed in seeds:
            planets = draw_system(seed)
            ref = run_fixed(build_sim(planets, rand_seed=seed + 1), args.t_end, "ias15")
            bs = run_fixed(build_sim(planets, rand_seed=seed + 1), args.t_end, "bs", eps_rel=1e-10, eps_abs=1e-10)
            us_wh = wh_step_cost(planets, seed)
            us_sw = switch_cost(planets, seed)
            geo = geometry(planets, seed, args.t_end, args.sample)
            dt = args.sample
            p_in = sorted(g[0] for g in geo)
            row = [
                seed,
                args.t_end,
                f"{ref.cpu:.4f}",
                ref.steps,
                f"{bs.cpu:.4f}",
                f"{us_wh * 1e6:.4f}",
                f"{p_in[len(p_in) // 2]:.3f}",
            ]
            f_enc = {k: sum(1 for g in geo if g[1] < k) / len(geo) for k in K_HILL}
            row += [f"{f_enc[k]:.4f}" for k in K_HILL]
            wh_cost = {n: sum(dt * n / g[0] for g in geo if math.isfinite(g[0])) * us_wh for n in N_STEPS}
            for n in N_STEPS:
                for k in K_HILL:
                    ideal = (1.0 - f_enc[k]) * wh_cost[n] + f_enc[k] * bs.cpu
                    row.append(f"{ref.cpu / ideal:.2f}")
            row += [f"{ref.cpu / wh_cost[n]:.2f}" for n in N_STEPS]
            entries = {k: sum(1 for a, b in zip(geo, geo[1:]) if a[1] >= k > b[1]) for k in K_HILL}
            row += [f"{us_sw * 1e6:.1f}"] + [entries[k] for k in K_HILL]
            for n in N_STEPS:
                for k in K_HILL:
                    ideal = (1.0 - f_enc[k]) * wh_cost[n] + f_enc[k] * bs.cpu + entries[k] * us_sw
                    row.append(f"{ref.cpu / ideal:.2f}")
            w.writerow(row)
            fh.flush()
            print(dict(zip(cols, row)), flush=True)


if __name__ == "__main__":
    main()

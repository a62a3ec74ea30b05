"""Run integrator set-ups over the same systems, interleaved system by system, and write a CSV.

Usage: python run_study.py OUT.csv --t-end 1e4 --seeds 0-15 --method 'ias15' --method 'hybrid:n_per=30,eta=1.5'

CPU time is time.process_time() around each system's integration (this process only); methods are
interleaved system by system so that machine load affects them alike.
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from drivers import run_method  # noqa: E402
from systems import build_sim, draw_system  # noqa: E402


def parse_method(text):
    name, _, rest = text.partition(":")
    kw = {}
    for item in filter(None, rest.split(",")):
        k, v = item.split("=")
        try:
            kw[k] = int(v) if v.isdigit() else float(v)
        except ValueError:
            kw[k] = v
    return text, name, kw


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("out")
    ap.add_argument("--t-end", type=float, default=1e4)
    ap.add_argument("--seeds", default="0-7")
    ap.add_argument("--spacing", type=float, default=3.0)
    ap.add_argument("--method", action="append", required=True)
    args = ap.parse_args(argv)
    lo, _, hi = args.seeds.partition("-")
    seeds = range(int(lo), int(hi or lo) + 1)
    methods = [parse_method(m) for m in args.method]
    new = not os.path.exists(args.out)
    with open(args.out, "a", newline="") as fh:
        w = csv.writer(fh)
        if new:
            w.writerow(
                [
                    "seed",
                    "method",
                    "t_end",
                    "cpu_s",
                    "energy_error",
                    "n_left",
                    "n_ejected",
                    "n_merged",
                    "n_hit_star",
                    "steps",
                    "switches",
                    "wh_fraction",
                    "final",
                    "fates",
                ]
            )
        for seed in seeds:
            planets = draw_system(seed, spacing=args.spacing)
            for label, name, kw in methods:
                sim = build_sim(planets, rand_seed=seed + 1)
                r = run_method(name, sim, args.t_end, **kw)
                kinds = [f for f, _ in r.fates.values()]
                w.writerow(
                    [
                        seed,
                        label,
                        args.t_end,
                        f"{r.cpu:.4f}",
                        f"{r.energy_error:.3e}",
                        r.n_left,
                        kinds.count("ejected"),
                        kinds.count("merged"),
                        kinds.count("hit_star"),
                        r.steps,
                        r.switches,
                        f"{r.wh_fraction:.4f}",
                        json.dumps(r.final),
                        json.dumps(r.fates),
                    ]
                )
                fh.flush()
                print(
                    f"seed {seed:3d} {label:40s} cpu {r.cpu:7.3f}s dE {r.energy_error:.2e} left {r.n_left} "
                    f"fates {kinds} sw {r.switches} wh {r.wh_fraction:.3f}",
                    flush=True,
                )


if __name__ == "__main__":
    main()

"""Probe of heyoka's batch-mode semantics that the taylor back end relies on (heyoka 7.13).

    .venv/bin/python analysis/taylor_event_probe.py

Star + two Jupiters on crossing orbits (invented), 8 lanes with slightly different phases, tol 1e-13:

1. event functions and step control: final states without events, with the contact-type event
   d^2 - P^2 (non-terminal), and with the same event multiplied by 1e-9 (the back end's EVENT_SCALE);
2. lane width: one system in lane 0 of 1-, 4- and 8-lane batches (the others hold copies);
3. a terminal event in one lane: what ``propagate_res`` reports per lane and where the other lanes stop.
Prints what it finds; the results are quoted in docs/internals (engine notes) and the commit log.
"""

from __future__ import annotations

import heyoka as hy
import numpy as np

from scatter_pop.constants import G_AU_YR_MSUN, MJUP_MSUN


def state(phase: float) -> np.ndarray:
    """x, y, z, vx, vy, vz of the star and two planets (circular at 5 and 6 AU, crossing soon)."""
    out = []
    ms = [1.0, MJUP_MSUN, MJUP_MSUN]
    for a, ph in ((0.0, 0.0), (5.0, 0.0), (6.0, phase)):
        if a == 0.0:
            out.append([0, 0, 0, 0, 0, 0])
            continue
        v = np.sqrt(G_AU_YR_MSUN / a)
        out.append([a * np.cos(ph), a * np.sin(ph), 0.01 * a, -v * np.sin(ph), v * np.cos(ph), 0.0])
    s = np.array(out, float)
    m = np.array(ms)
    s[:, :3] -= (m[:, None] * s[:, :3]).sum(0) / m.sum()
    s[:, 3:] -= (m[:, None] * s[:, 3:]).sum(0) / m.sum()
    return s.reshape(-1), m


def build(lanes: int, events: str, terminal: bool = False):
    eqs = hy.model.nbody(3, masses=[hy.par[k] for k in range(3)], Gconst=G_AU_YR_MSUN)
    var = [lhs for lhs, _ in eqs]
    a, b = var[6:9], var[12:15]
    d2 = sum(((a[c] - b[c]) ** 2 for c in range(3)), hy.expression(0.0))
    expr = d2 - hy.par[3] ** 2
    kw = {}
    if events != "none":
        scale = 1e-9 if events == "scaled" else 1.0
        if terminal:
            kw["t_events"] = [hy.t_event_batch(scale * expr, direction=hy.event_direction.negative)]
        else:
            kw["nt_events"] = [hy.nt_event_batch(scale * expr, lambda ta, t, d, lane: None)]
    n_par = 3 if events == "none" else 4
    ta = hy.taylor_adaptive_batch(eqs, np.zeros((18, lanes)), tol=1e-13, pars=np.zeros((n_par, lanes)), **kw)
    return ta


def load(ta, lanes: int, phases, radius: float):
    for k in range(lanes):
        s, m = state(phases[k])
        ta.state[:, k] = s
        ta.pars[:3, k] = m
        if ta.pars.shape[0] > 3:
            ta.pars[3, k] = radius
    ta.set_time(np.zeros(lanes))


def main() -> None:
    phases = [0.9 + 0.01 * k for k in range(8)]
    finals = {}
    for events in ("none", "plain", "scaled"):
        ta = build(8, events)
        load(ta, 8, phases, 0.3)
        ta.propagate_until(np.full(8, 200.0))
        finals[events] = ta.state.copy()
    print("1. final state with plain nt events == without events:", np.array_equal(finals["none"], finals["plain"]))
    print("   final state with scaled nt events == without events:", np.array_equal(finals["none"], finals["scaled"]))
    print(
        "   max abs difference plain vs none after 200 yr (AU, AU/yr):",
        float(np.max(np.abs(finals["plain"] - finals["none"]))),
    )

    lone = {}
    for lanes in (1, 4, 8):
        ta = build(lanes, "scaled")
        load(ta, lanes, [phases[0]] * lanes, 0.3)
        ta.propagate_until(np.full(lanes, 200.0))
        lone[lanes] = ta.state[:, 0].copy()
    print("2. lane 0 of 4 lanes == of 8 lanes:", np.array_equal(lone[4], lone[8]))
    print("   lane 0 of 1 lane  == of 8 lanes:", np.array_equal(lone[1], lone[8]))

    ta = build(8, "plain", terminal=True)
    load(ta, 8, phases, 0.3)
    ta.pars[3, 1:] = 0.0  # only lane 0 can have the contact
    ta.propagate_until(np.full(8, 200.0))
    print("3. terminal event in lane 0: outcomes", [int(r[0]) for r in ta.propagate_res])
    print("   lane times after the call:", [round(float(t), 3) for t in ta.time])
    print(
        "   taylor_outcome.success =", int(hy.taylor_outcome.success), "time_limit =", int(hy.taylor_outcome.time_limit)
    )


if __name__ == "__main__":
    main()

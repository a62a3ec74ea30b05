"""The lanes of the ``taylor`` back end (:class:`LaneDriver`): pools of compiled batch integrators per
body count, refilled from a task's queue of systems; events, rollbacks and chunk ends lane by lane.
"""

from __future__ import annotations

import time
from collections import deque

import numpy as np

from scatter_pop.constants import G_AU_YR_MSUN
from scatter_pop.engine.encounters import binding_to_interior
from scatter_pop.engine.outcome import EndReason
from scatter_pop.engine.taylor_lanes import lane_integrator
from scatter_pop.engine.taylor_system import LaneSystem

__all__ = ["LaneDriver"]


class _Pool:
    """The lanes of one compiled integrator and the queue of systems waiting for them."""

    def __init__(self, n, lanes, tol):
        self.li = lane_integrator(n, lanes, tol)
        self.slots: list = [None] * lanes
        self.queue: deque = deque()

    def load(self) -> int:
        return sum(s is not None for s in self.slots) + len(self.queue)


class LaneDriver:
    def __init__(self, lanes, tol):
        self.lanes, self.tol = lanes, tol
        self.pools: dict[int, _Pool] = {}

    def pool(self, n) -> _Pool:
        if n not in self.pools:
            self.pools[n] = _Pool(n, self.lanes, self.tol)
        return self.pools[n]

    def run(self, systems) -> None:
        for s in systems:
            self.start(s)
        while True:
            busy = [p for p in self.pools.values() if p.load()]
            if not busy:
                return
            self.round(max(busy, key=lambda p: (p.load(), p.li.n)))

    def start(self, s: LaneSystem) -> None:
        """Queue a system in its pool, or finish it when nothing is left to integrate."""
        if s.record is not None:
            return
        if s.n <= 2:
            reason = s.settled()
            if reason is not None:
                s.finish(reason)
                return
        if s.time >= s.stop_time():  # past an end time inside the chunk (a fate in the step past it)
            s.finish(EndReason.END_TIME)
            return
        self.pool(s.n).queue.append(s)

    # ------------------------------------------------------------------ one round of one pool
    def round(self, pool: _Pool) -> None:
        li = pool.li
        for lane in range(self.lanes):
            if pool.slots[lane] is None and pool.queue:
                s = pool.queue.popleft()
                pool.slots[lane] = s
                li.write(lane, s.x, s.v, s.t, s.enter_pars(li.slots))
        real = [s is not None for s in pool.slots]
        donor = real.index(True)
        x, v, _ = li.read(donor)
        targets, stops = np.zeros(self.lanes), np.full(self.lanes, np.inf)
        for lane, s in enumerate(pool.slots):
            if s is None:  # a copy of a real lane that does not move
                li.write(lane, x, v, (0.0, 0.0), li.ta.pars[:, donor].copy())
            else:
                targets[lane], stops[lane] = s.target(), s.stop_time()
        start = time.perf_counter()
        hits, steps, ok = li.propagate(targets, real, stops)
        share = (time.perf_counter() - start) / sum(real)
        by_lane: dict = {}
        for lane, t, q in sorted(hits, key=lambda h: (h[0], h[1], h[2])):
            by_lane.setdefault(lane, []).append((t, q))
        for lane, s in enumerate(pool.slots):
            if s is None:
                continue
            s.steps += steps[lane]
            s.spent += share
            if not ok[lane]:
                raise RuntimeError(
                    f"system {s.initial.index}: heyoka stopped with {li.ta.propagate_res[lane][0]} "
                    f"at t = {li.ta.time[lane]!r} yr"
                )
            if self.events(pool, lane, s, by_lane.get(lane, [])):
                continue
            if li.ta.time[lane] >= targets[lane]:
                self.chunk_end(pool, lane, s)
            elif li.ta.time[lane] >= stops[lane]:
                self.stop_inside(pool, lane, s)

    def stop_inside(self, pool: _Pool, lane: int, s: LaneSystem) -> None:
        """Past an end time inside a chunk: no check; the state and the lane's event parameters are
        kept, so that a later end time continues the chunk as if it had never stopped."""
        s.x, s.v, s.t = pool.li.read(lane)
        s.lane_pars = pool.li.ta.pars[:, lane].copy()
        pool.slots[lane] = None
        s.finish(EndReason.END_TIME)

    def leave(self, pool: _Pool, lane: int, s: LaneSystem, t=None) -> None:
        """Take system s out of its lane, its state at time t (dense output) or at the lane's time."""
        if t is None:
            s.x, s.v, s.t = pool.li.read(lane)
        else:
            s.x, s.v = pool.li.dense(lane, t)
            s.t = (float(t), 0.0)
        pool.slots[lane] = None

    def events(self, pool: _Pool, lane: int, s: LaneSystem, hits) -> bool:
        """Handle a lane's events in time order; True if the system left the lane."""
        li = pool.li
        for t, q in hits:
            slot = li.slots[q]
            if slot.kind == "hill":
                if not s.ledger.encounter_found:
                    s.ledger.t_first_encounter = float(t)
                    for other in li.slots:
                        if other.kind == "hill":
                            li.set_par(lane, other.par, 0.0)
                continue
            x, v = li.dense(lane, t)
            m = s.m
            if slot.kind == "escape":
                if binding_to_interior(m, x, v, slot.j, G_AU_YR_MSUN)[0] < 0.0:
                    continue
            elif slot.kind == "tidal":
                s.x, s.v = x, v
                if s.star_pass(slot.j, "tidal") is None:
                    continue
            self.leave(pool, lane, s, t)
            if slot.kind == "contact":
                s.merge(slot.i, slot.j)
            elif slot.kind == "escape":
                s.eject(slot.j)
            else:
                s.merge(0, slot.j, s.star_pass(slot.j, slot.kind))
            if s.finished():
                s.finish(EndReason.NO_PLANETS if s.n == 1 else EndReason.ONE_PLANET)
            else:
                self.start(s)
            return True
        return False

    def chunk_end(self, pool: _Pool, lane: int, s: LaneSystem) -> None:
        """At a grid time: ejections, the stopping rules, the end time, the wall cap; as rebound_run.SystemRun."""
        li = pool.li
        s.x, s.v, s.t = li.read(lane)
        last = s.last_chunk()
        s.ledger.chunks_done += 1
        k = s.unbound_far()
        if k is not None:
            pool.slots[lane] = None
            while k is not None:
                s.eject(k)
                k = s.unbound_far()
        s.sample_gap()
        reason = s.settled()
        if reason is None and last:
            reason = EndReason.END_TIME
        if reason is None and s.ledger.wall_seconds + s.spent >= s.integ.wall_seconds_max:
            reason = EndReason.CAPPED
        if reason is not None:
            pool.slots[lane] = None
            s.finish(reason)
        elif pool.slots[lane] is None:
            self.start(s)
        else:
            s._encounter_now()  # mutual Hill radii from the orbit sizes now
            pars = s.pars(li.slots)
            for slot in li.slots:
                if slot.kind == "hill":
                    li.set_par(lane, slot.par, pars[slot.par])

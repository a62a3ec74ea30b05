"""The ``taylor`` back end: a task's systems integrated together in heyoka batch mode.

heyoka (Biscani & Izzo 2021, MNRAS 504, 2614) compiles an adaptive Taylor-series integrator for the
N-body equations; its batch mode advances one copy per SIMD lane, each with its own state, step and
time.  :mod:`scatter_pop.engine.taylor_lanes` holds the compiled integrators and their events; this
module keeps the systems, their books and their fates.  Same fate semantics and records as the REBOUND
path (:mod:`scatter_pop.engine.rebound_run`), by these means:

* Each system lives in one lane of the integrator compiled for its number of bodies (centre-of-mass
  frame, masses as runtime parameters).  A merger, a star contact, a disruption or an ejection is found
  by a non-terminal event; the lane is rolled back to the event's exact time by heyoka's dense output
  (the other lanes untouched), the fate applied and booked, and the system moved to the integrator for
  one body fewer (no parked bodies: they would loosen the step control of the others and still take
  part in events).  Freed lanes refill from the task's queue; empty lanes hold a copy of a real lane that
  does not move.  A lone system runs padded in a full batch: a 1-lane batch takes another code path in
  heyoka and gives other bits.
* Contacts: planet pair at R_1 + R_2 -> merger (mass, momentum and volume conserved, lower index kept);
  star at R* + R_p -> hit; star at eta r_t -> disrupted when the two-body pericentre of the passage is
  outside R* + R_p and inside eta r_t (``encounters.classify_star_pass``), else the contact event decides.
* Ejection: at crossing the ejection distance outward and at every chunk end, a planet beyond it and
  unbound from the star and the interior bodies (``encounters.binding_to_interior``) is removed and the
  frame moved to the centre of mass.
* First close encounter: the exact time a pair's separation falls below its mutual Hill radius
  (``stability.mutual_hill_radius`` from the orbit sizes at the last chunk end; the REBOUND path samples
  the separation at its step ends instead).
* Chunks end exactly on the grid (k + 1) * ``check_orbits`` initial inner orbits (``propagate_until``
  lands on it); between chunks the same checks as the REBOUND path; the wall cap counts each system's
  share of the batch's wall time.  The lane time is double-length and a checkpoint keeps both halves.

A lane's steps depend on its own state and target time only (heyoka's step-size control is per lane),
so a record does not depend on its companions, its lane, the batch size or the lane count (4 and 8
give the same bits); ``tests/engine/test_taylor.py`` checks each of these bit for bit.
"""

from __future__ import annotations

import json
import math
import os
import time
from collections import deque
from dataclasses import asdict, replace
from pathlib import Path

import numpy as np

from scatter_pop.constants import G_AU_YR_MSUN
from scatter_pop.engine.backends.base import Backend
from scatter_pop.engine.encounters import binding_to_interior, classify_star_pass, merge_jump, relative_orbit
from scatter_pop.engine.ledger import FateEntry, Ledger, read_checkpoint, write_checkpoint
from scatter_pop.engine.outcome import NO_PLANET, EndReason, Fate, SystemRecord
from scatter_pop.engine.record_builder import build_record, planet_index, planet_name
from scatter_pop.engine.settlement import GAP_CHECKS, orbit_gap_hill
from scatter_pop.engine.stability import marchal_bozis_state_ratio, mutual_hill_radius, tidal_disruption_radius
from scatter_pop.errors import InputError

__all__ = ["BACKEND", "TaylorBackend", "LaneSystem", "LaneDriver", "integrate_lanes", "BLOB_MAGIC"]

G = G_AU_YR_MSUN
STAR = "star"
BLOB_MAGIC = b"TAYLOR01"


def _lanes_module():
    """:mod:`scatter_pop.engine.taylor_lanes`, imported on first use (it imports heyoka, ~1 s)."""
    from scatter_pop.engine import taylor_lanes

    return taylor_lanes


def energy(m, x, v) -> float:
    return _lanes_module().energy(m, x, v)


def angular_momentum(m, x, v):
    return _lanes_module().angular_momentum(m, x, v)


def move_to_com(m, x, v):
    return _lanes_module().move_to_com(m, x, v)


class TaylorBackend(Backend):
    name = "taylor"
    summary = (
        "heyoka adaptive Taylor series, a task's systems together in SIMD lanes; tolerance integration.taylor_tolerance"
    )
    integrates_together = True
    spec_keys = ("taylor_tolerance",)

    def unavailable(self) -> str | None:
        try:
            import heyoka  # noqa: F401
        except ImportError as exc:  # the wheel is missing or its LLVM does not load
            return f"heyoka cannot be imported ({exc})"
        return None

    def lanes(self) -> int:
        """SIMD lanes this machine integrates together (heyoka's recommended batch size)."""
        return _lanes_module().lane_count()

    def prepare(self, integration, bodies: int) -> float:
        """Compile the integrators for 2 .. ``bodies`` bodies at ``integration.taylor_tolerance``."""
        lanes = _lanes_module()
        start = time.perf_counter()
        for n in range(2, int(bodies) + 1):
            lanes.lane_integrator(n, self.lanes(), float(integration.taylor_tolerance))
        return time.perf_counter() - start

    def integrate_one(self, initial, integration, outcomes, *, checkpoint_path=None, reference=False):
        paths = None if checkpoint_path is None else [checkpoint_path]
        return integrate_lanes([initial], integration, outcomes, checkpoint_paths=paths, reference=reference)[0]

    def integrate_many(self, initials, integration, outcomes, *, checkpoint_paths=None, budgets=None, reference=False):
        return integrate_lanes(
            initials, integration, outcomes, checkpoint_paths=checkpoint_paths, budgets=budgets, reference=reference
        )


BACKEND = TaylorBackend()


def integrate_lanes(
    initials, integration, outcomes, *, checkpoint_paths=None, budgets=None, reference=False, lanes=None
) -> list[SystemRecord]:
    """Integrate ``initials`` (InitialSystems) together in heyoka batch mode; records in that order.

    Parameters
    ----------
    initials : sequence of InitialSystem
    integration : IntegrationSpec
        ``taylor_tolerance`` is the integrator's tolerance; the other keys as for every back end.
    outcomes : OutcomeSpec
    checkpoint_paths : sequence of (str or Path or None), optional
        Per system, as ``integrate_system``'s ``checkpoint_path``.
    budgets : sequence of float, optional
        Per system, the wall-clock cap (s) instead of ``integration.wall_seconds_max``.
    reference : bool
        Never stop early.
    lanes : int, optional
        SIMD lanes (>= 2); default the machine's (:meth:`TaylorBackend.lanes`).
    """
    lanes = BACKEND.lanes() if lanes is None else lanes
    if not isinstance(lanes, int) or isinstance(lanes, bool) or lanes < 2:
        raise InputError(f"lanes = {lanes!r}: must be an integer >= 2 (a 1-lane batch takes another code path)")
    for name, seq in (("checkpoint_paths", checkpoint_paths), ("budgets", budgets)):
        if seq is not None and len(seq) != len(initials):
            raise InputError(f"{name}: {len(seq)} entries for {len(initials)} systems; give one per system")
    tol = float(integration.taylor_tolerance)
    if not 0.0 < tol < 1.0:
        raise InputError(f"integration.taylor_tolerance = {tol!r}: must be > 0 and < 1")
    systems = []
    for k, ini in enumerate(initials):
        integ = integration if budgets is None else replace(integration, wall_seconds_max=float(budgets[k]))
        path = None if checkpoint_paths is None else checkpoint_paths[k]
        systems.append(LaneSystem(ini, integ, outcomes, path, reference, lanes=lanes))
    LaneDriver(lanes, tol).run(systems)
    return [s.record for s in systems]


class LaneSystem:
    """One system: its ledger, its state while outside a lane, its chunk grid and its record."""

    def __init__(self, initial, integ, out, path, reference, lanes=0):
        self.initial, self.integ, self.out = initial, integ, out
        self.lanes = int(lanes)
        self.path = Path(path) if path is not None else None
        self.settle = integ.stop_when_settled and not reference
        self.p_in = initial.inner_period()
        self.t_end = integ.end_time_years(self.p_in)
        self.chunk = integ.check_orbits * self.p_in
        self.record = None
        self.steps = 0
        self.spent = 0.0  # this segment's share of wall time (s)
        identity = {"initial": asdict(initial), "integration": asdict(integ), "outcomes": asdict(out)}
        identity["integration"].pop("wall_seconds_max")
        identity["integration"]["integrator"] = "taylor"
        self.identity = json.loads(json.dumps(identity))
        if self.path is not None and self.path.exists() and self._restore():
            pass
        else:
            self._build()

    # ------------------------------------------------------------------ set-up and checkpoints
    def _build(self):
        from scatter_pop.engine.rebound_setup import initial_state

        ini = self.initial
        names = [planet_name(i) for i in range(ini.count)]
        self.m, self.x, self.v = initial_state(ini)  # the numbers the REBOUND path starts from
        self.t = (0.0, 0.0)
        self.ledger = Ledger(identity=self.identity)
        self.ledger.radius[STAR] = ini.star_radius
        for i in range(ini.count):
            self.ledger.radius[names[i]] = ini.radius[i]
        self.ledger.bodies = [STAR] + names
        self.ledger.e0 = energy(self.m, self.x, self.v)
        self.ledger.l0 = [float(c) for c in angular_momentum(self.m, self.x, self.v)]
        self.ledger.l_scale = float(
            sum(self.m[k] * np.linalg.norm(np.cross(self.x[k], self.v[k])) for k in range(len(self.m)))
        )
        self._encounter_now()

    def _restore(self) -> bool:
        """Continue from the checkpoint; False (start over) if it was written for another end time.

        A state stopped at its end time is not continued to a later one (``t_limit`` NaN in the
        record): ``propagate_until`` lands exactly on the end time, which changes the last step, so a
        continuation would not be the run made with the later end time from the start.
        """
        self.ledger, blob = read_checkpoint(self.path)
        other = self.ledger.identity.get("integration", {})
        mine = self.identity["integration"]
        if (
            {k: v for k, v in other.items() if k not in ("end_time", "end_orbits")}
            == {k: v for k, v in mine.items() if k not in ("end_time", "end_orbits")}
            and self.ledger.identity.get("initial") == self.identity["initial"]
            and other != mine
        ):
            return False
        if self.ledger.identity != self.identity or not blob.startswith(BLOB_MAGIC):
            raise InputError(
                f"checkpoint {str(self.path)!r}: written for another system or other settings "
                f"(system index {self.ledger.identity.get('initial', {}).get('index')!r}); "
                "remove it or point to the right file"
            )
        state = json.loads(blob[len(BLOB_MAGIC) :].decode("utf-8"))
        self.m = np.array(state["m"])
        self.x, self.v = np.array(state["x"]).reshape(-1, 3), np.array(state["v"]).reshape(-1, 3)
        self.t = (float(state["t_hi"]), float(state["t_lo"]))
        self.steps = int(state["steps"])
        return True

    def write_checkpoint(self):
        state = {
            "m": list(map(float, self.m)),
            "x": list(map(float, self.x.ravel())),
            "v": list(map(float, self.v.ravel())),
            "t_hi": self.t[0],
            "t_lo": self.t[1],
            "steps": self.steps,
        }
        write_checkpoint(self.path, self.ledger, BLOB_MAGIC + json.dumps(state).encode("utf-8"))

    # ------------------------------------------------------------------ quantities
    @property
    def n(self) -> int:
        return len(self.m)

    @property
    def time(self) -> float:
        return self.t[0]

    def target(self) -> float:
        return min((self.ledger.chunks_done + 1) * self.chunk, self.t_end)

    def radius(self, k: int) -> float:
        return self.ledger.radius[self.ledger.bodies[k]]

    def size(self, k: int) -> float:
        a, _, _ = relative_orbit(self.x[k] - self.x[0], self.v[k] - self.v[0], G * (self.m[0] + self.m[k]))
        return a if 0.0 < a < math.inf else float(np.linalg.norm(self.x[k] - self.x[0]))

    def pars(self, slots) -> np.ndarray:
        """Runtime parameters of the integrator's events for this system's current bodies."""
        p = np.zeros(self.n + len(slots))
        p[: self.n] = self.m
        r_star, eta = self.initial.star_radius, self.out.disruption_eta
        for s in slots:
            if s.kind == "contact":
                p[s.par] = self.radius(s.i) + self.radius(s.j)
            elif s.kind == "hill":
                p[s.par] = (
                    0.0
                    if self.ledger.encounter_found
                    else mutual_hill_radius(self.m[0], self.m[s.i], self.m[s.j], self.size(s.i), self.size(s.j))
                )
            elif s.kind == "star":
                p[s.par] = r_star + self.radius(s.j)
            elif s.kind == "tidal":
                p[s.par] = float(tidal_disruption_radius(self.m[s.j], self.radius(s.j), self.m[0], eta))
            else:
                p[s.par] = self.integ.ejection_distance
        return p

    def _encounter_now(self):
        """First encounter at this instant if some pair is already inside one mutual Hill radius."""
        if self.ledger.encounter_found:
            return
        for i in range(1, self.n):
            for j in range(i + 1, self.n):
                r_h = mutual_hill_radius(self.m[0], self.m[i], self.m[j], self.size(i), self.size(j))
                if float(np.linalg.norm(self.x[i] - self.x[j])) < r_h:
                    self.ledger.t_first_encounter = self.time
                    return

    def entry(self, k: int, fate: Fate, merged_into: int = NO_PLANET) -> FateEntry:
        dx, dv = self.x[k] - self.x[0], self.v[k] - self.v[0]
        from scatter_pop.engine.rebound_setup import orbit_elements

        a, e, inc, omega, node = orbit_elements(self.m[0], self.m[k], dx, dv)
        _, _, q = relative_orbit(dx, dv, G * (self.m[0] + self.m[k]))
        return FateEntry(
            fate=int(fate),
            t=self.time,
            merged_into=int(merged_into),
            mass=float(self.m[k]),
            a=a,
            e=e,
            inc=inc,
            omega=omega,
            node=node,
            q=float(q),
            radius=float(self.radius(k)),
        )

    # ------------------------------------------------------------------ fates
    def merge(self, i: int, j: int, fate: Fate = Fate.MERGED) -> None:
        """Merge bodies i < j into i (j = a planet; i = 0 is the star, whose radius stays R*)."""
        name_i, name_j = self.ledger.bodies[i], self.ledger.bodies[j]
        self.ledger.fates[name_j] = self.entry(j, fate, planet_index(name_i) if i > 0 else NO_PLANET)
        self.ledger.book(*merge_jump(self.m, self.x, self.v, i, j, G))
        mt = self.m[i] + self.m[j]
        self.x[i] = (self.m[i] * self.x[i] + self.m[j] * self.x[j]) / mt
        self.v[i] = (self.m[i] * self.v[i] + self.m[j] * self.v[j]) / mt
        self.m[i] = mt
        if i > 0:
            self.ledger.radius[name_i] = float(np.cbrt(self.radius(i) ** 3 + self.radius(j) ** 3))
        self._drop(j)

    def eject(self, k: int) -> None:
        self.ledger.fates[self.ledger.bodies[k]] = self.entry(k, Fate.EJECTED)
        e_before, l_before = energy(self.m, self.x, self.v), angular_momentum(self.m, self.x, self.v)
        self._drop(k)
        self.x, self.v = move_to_com(self.m, self.x, self.v)
        self.ledger.book(energy(self.m, self.x, self.v) - e_before, angular_momentum(self.m, self.x, self.v) - l_before)

    def _drop(self, k: int) -> None:
        self.m, self.x, self.v = (np.delete(a, k, axis=0) for a in (self.m, self.x, self.v))
        del self.ledger.bodies[k]

    def unbound_far(self) -> int | None:
        """The first planet beyond the ejection distance and unbound from the interior bodies."""
        for k in range(1, self.n):
            if (
                float(np.linalg.norm(self.x[k] - self.x[0])) > self.integ.ejection_distance
                and binding_to_interior(self.m, self.x, self.v, k, G)[0] >= 0.0
            ):
                return k
        return None

    def star_pass(self, k: int, kind: str):
        """Fate of planet k crossing the star's contact ("star") or disruption ("tidal") sphere, or None."""
        _, _, q = relative_orbit(self.x[k] - self.x[0], self.v[k] - self.v[0], G * (self.m[0] + self.m[k]))
        word = classify_star_pass(
            q, self.m[0], self.initial.star_radius, self.m[k], self.radius(k), self.out.disruption_eta
        )
        if kind == "star":
            return Fate.HIT_STAR
        return Fate.DISRUPTED if word == "disrupted" else None

    def finished(self) -> bool:
        left = self.n - 1
        return left == 0 or (left == 1 and self.settle)

    def settled(self):
        left = self.n - 1
        if left == 0:
            return EndReason.NO_PLANETS
        if not self.settle:
            return None
        if left == 1:
            return EndReason.ONE_PLANET
        if left == 2 and marchal_bozis_state_ratio(self.m, self.x, self.v, G) >= self.integ.hill_margin:
            return EndReason.HILL_STABLE
        return None

    def finish(self, reason: EndReason) -> None:
        self.ledger.wall_seconds += self.spent
        self.spent = 0.0
        if reason == EndReason.CAPPED:
            if self.path is not None:
                self.write_checkpoint()
        elif self.path is not None and self.path.exists():
            os.remove(self.path)
        survivors = {self.ledger.bodies[k]: self.entry(k, Fate.SURVIVED) for k in range(1, self.n)}
        self.record = build_record(
            self.initial,
            self.ledger,
            survivors,
            reason=reason,
            t_end=self.time,
            energy=energy(self.m, self.x, self.v),
            angmom=angular_momentum(self.m, self.x, self.v),
            steps=self.steps,
            integrator="taylor",
            circularisation_q=self.out.circularisation_q,
            lanes=self.lanes,
            star_mass=float(self.m[0]),
            t_limit=math.nan,  # not continued to a later end time (see _restore)
            hill_margin=self.integ.hill_margin,
            hill_ratio=marchal_bozis_state_ratio(self.m, self.x, self.v, G) if self.n == 3 else math.nan,
            recent_gap=min(gaps) if len(gaps := self.ledger.recent_gaps) == GAP_CHECKS else math.nan,
        )

    def sample_gap(self) -> None:
        """Book the osculating gap of a bound pair at this check (the last GAP_CHECKS are kept), as
        the REBOUND path does."""
        gaps = self.ledger.recent_gaps
        if self.n - 1 == 2:
            orbits = [
                relative_orbit(self.x[k] - self.x[0], self.v[k] - self.v[0], G * (self.m[0] + self.m[k]))
                for k in (1, 2)
            ]
            if all(0.0 < a < math.inf and 0.0 <= e < 1.0 for a, e, _ in orbits):
                (a1, e1, _), (a2, e2, _) = orbits
                gaps.append(orbit_gap_hill(self.m[0], self.m[1], self.m[2], a1, e1, a2, e2))
                del gaps[:-GAP_CHECKS]
                return
        gaps.clear()


class _Pool:
    """The lanes of one compiled integrator and the queue of systems waiting for them."""

    def __init__(self, n, lanes, tol):
        self.li = _lanes_module().lane_integrator(n, lanes, tol)
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
        self.pool(s.n).queue.append(s)

    # ------------------------------------------------------------------ one round of one pool
    def round(self, pool: _Pool) -> None:
        li = pool.li
        for lane in range(self.lanes):
            if pool.slots[lane] is None and pool.queue:
                s = pool.queue.popleft()
                pool.slots[lane] = s
                li.write(lane, s.x, s.v, s.t, s.pars(li.slots))
        real = [s is not None for s in pool.slots]
        donor = real.index(True)
        x, v, _ = li.read(donor)
        targets = np.zeros(self.lanes)
        for lane, s in enumerate(pool.slots):
            if s is None:  # a copy of a real lane that does not move
                li.write(lane, x, v, (0.0, 0.0), li.ta.pars[:, donor].copy())
            else:
                targets[lane] = s.target()
        start = time.perf_counter()
        hits, steps, ok = li.propagate(targets, real)
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
                if binding_to_interior(m, x, v, slot.j, G)[0] < 0.0:
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
        s.ledger.chunks_done += 1
        k = s.unbound_far()
        if k is not None:
            pool.slots[lane] = None
            while k is not None:
                s.eject(k)
                k = s.unbound_far()
        s.sample_gap()
        reason = s.settled()
        if reason is None and s.time >= s.t_end:
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

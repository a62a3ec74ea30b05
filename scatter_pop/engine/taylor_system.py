"""One system of the ``taylor`` back end (:class:`LaneSystem`): its state, books, fates and checkpoint.

The state is held in the centre-of-mass frame between rounds of the lanes; fates are applied and booked
here exactly as the REBOUND path books them (:mod:`scatter_pop.engine.rebound_run`, :mod:`ledger`), and
the record is built by :mod:`scatter_pop.engine.record_builder`.  The lanes that advance it are
:mod:`scatter_pop.engine.taylor_run`; the back end is :mod:`scatter_pop.engine.backends.taylor`.
"""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np

from scatter_pop.constants import G_AU_YR_MSUN
from scatter_pop.engine.encounters import binding_to_interior, classify_star_pass, merge_jump, relative_orbit
from scatter_pop.engine.ledger import (
    END_ON_CHECK,
    FateEntry,
    Ledger,
    checkpoint_identity,
    read_checkpoint,
    without_end_time,
    write_checkpoint,
)
from scatter_pop.engine.outcome import NO_PLANET, EndReason, Fate
from scatter_pop.engine.record_builder import build_record, planet_index, planet_name
from scatter_pop.engine.settlement import GAP_CHECKS, orbit_gap_hill
from scatter_pop.engine.stability import marchal_bozis_state_ratio, mutual_hill_radius, tidal_disruption_radius
from scatter_pop.engine.taylor_lanes import angular_momentum, energy, move_to_com
from scatter_pop.errors import InputError

__all__ = ["LaneSystem", "BLOB_MAGIC"]

G = G_AU_YR_MSUN
STAR = "star"
BLOB_MAGIC = b"TAYLOR01"


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
        self.lane_pars = None  # event parameters to enter a lane with (a state left inside a chunk)
        self.identity = checkpoint_identity(initial, integ, out, integrator="taylor")
        if self.path is not None and self.path.exists():
            self._restore()
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
        """Continue from the checkpoint (a capped state, or a state stopped at an earlier end time).

        The end time is not part of a checkpoint's identity: checks fall on the same chunk grid
        whatever the end time and an end time inside a chunk stops the lane on its first step past
        it with no check (:meth:`stop_time`), so the kept state continues to a later end time exactly
        as the run made with that end time from the start.
        """
        self.ledger, blob = read_checkpoint(self.path)
        if without_end_time(self.ledger.identity) != self.identity or not blob.startswith(BLOB_MAGIC):
            raise InputError(
                f"checkpoint {str(self.path)!r}: written for another system or other settings "
                f"(system index {self.ledger.identity.get('initial', {}).get('index')!r}); "
                "remove it or point to the right file"
            )
        self.ledger.identity = self.identity
        state = json.loads(blob[len(BLOB_MAGIC) :].decode("utf-8"))
        self.m = np.array(state["m"])
        self.x, self.v = np.array(state["x"]).reshape(-1, 3), np.array(state["v"]).reshape(-1, 3)
        self.t = (float(state["t_hi"]), float(state["t_lo"]))
        self.steps = int(state["steps"])
        lane_pars = state.get("lane_pars")
        self.lane_pars = None if lane_pars is None else np.array(lane_pars, dtype=float)
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
        if self.lane_pars is not None:  # the event parameters of a lane left inside a chunk
            state["lane_pars"] = list(map(float, self.lane_pars))
        write_checkpoint(self.path, self.ledger, BLOB_MAGIC + json.dumps(state).encode("utf-8"))

    # ------------------------------------------------------------------ quantities
    @property
    def n(self) -> int:
        return len(self.m)

    @property
    def time(self) -> float:
        return self.t[0]

    def target(self) -> float:
        """The end of the current chunk: (k + 1) * ``check_orbits`` initial inner orbits, whatever the end time."""
        return (self.ledger.chunks_done + 1) * self.chunk

    def last_chunk(self) -> bool:
        """The end time is at the end of the current chunk or before it."""
        boundary = self.target()
        return self.t_end - boundary <= END_ON_CHECK * boundary

    def stop_time(self) -> float:
        """The end time if it falls inside the current chunk (the lane then stops on its first step past
        it, with no check, as ``exact_finish_time = 0`` does on the REBOUND path), else infinity."""
        boundary = self.target()
        return self.t_end if self.last_chunk() and boundary - self.t_end > END_ON_CHECK * boundary else math.inf

    def enter_pars(self, slots) -> np.ndarray:
        """The event parameters to enter a lane with: those kept from the lane it left inside a chunk
        (first-encounter radii are set at chunk ends), else from the state now."""
        pars, self.lane_pars = self.lane_pars, None
        return self.pars(slots) if pars is None else pars

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
        if reason in (EndReason.CAPPED, EndReason.END_TIME):
            if self.path is not None:  # continued by a larger cap or a later end time
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
            t_limit=self.t_end,
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

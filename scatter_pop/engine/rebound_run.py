"""The REBOUND path: one system through its close encounters to a classified outcome.

Together with :mod:`scatter_pop.engine.rebound_setup` (which builds and restores
the simulation), the only module that drives REBOUND.  Flow: initial
conditions -> a REBOUND simulation (astrocentric elements, centre-of-mass
frame, ``sim.G`` set to the IAU value) -> integration in chunks of
``check_orbits`` initial inner orbits (``exact_finish_time = 0``: a chunk ends
on the first step past its end time, so the trajectory does not depend on
where chunks end) -> between chunks: the stopping rules, the hybrid step, the
escape radius -> an outcome record.

Hybrid integrators (TRACE, MERCURIUS) take a fixed step that must resolve the
most demanding orbit: 2 pi sqrt(q^3 / (G M (1+e))) / ``steps_per_orbit``.  It
is checked every ``HYBRID_CHECK_STEPS`` steps inside a chunk, and re-chosen
after a merger, a star contact or an ejection, or when the wanted step differs
from the current one by more than a factor ``STEP_CHANGE`` (a planet scattered
onto a tighter or more eccentric orbit); otherwise it is kept, so that a
symplectic map is not perturbed by needless changes.

Events inside a step come through REBOUND's collision search with a Python
resolve function (called only when some pair is inside its search radius, not
every step), which looks at each listed pair and decides:

* planet-planet: a merger when the pair's path over the last step (straight
  line, as REBOUND's ``"line"`` search) came within R_1 + R_2; merged by
  ``reb_collision_resolve_merge`` (mass, momentum and volume conserved; the
  lower index survives).  Until the first close encounter the planets' search
  radii (:mod:`scatter_pop.engine.search_radii`) are enlarged so that every pair
  inside one mutual Hill radius at the end of a step is listed; the end of the
  first such step is the first-encounter time (the separation is sampled at
  every step end: resolution one integrator step, IAS15 takes ~40-100 per
  inner orbit).
* star-planet: the star's search radius makes every planet within its own
  end distance max(R* + R_p, eta r_t) listed while near pericentre; the
  two-body pericentre q of that passage decides: q < R* + R_p -> hit the star,
  q < eta R_p (M*/M_p)^(1/3) -> tidally disrupted (merged into the star), else
  nothing.  A single passage inside the limit is caught.
* ejection: REBOUND raises ``Escape`` once a planet is farther from the star
  than the ejection distance (``search_radii.set_escape_radius``); such a
  planet is removed when it is unbound from the star and the bodies closer to
  the star than it (``encounters.binding_to_interior``); a bound one is kept
  and the escape radius raised above its apocentre until it returns inside
  the ejection distance.  ``move_to_com`` after every removal.

Every merger and removal is booked by hand in the ledger (exact energy and
angular-momentum jumps including third-body potentials), because REBOUND's own
energy offset ignores third bodies.

Records: final elements are astrocentric (primary = the star) and, for a planet
already gone, those at the moment of its fate (a merging planet's orbit about
the star at contact is often formally unbound).  A planet still inside the
ejection distance at the end whose astrocentric orbit is not an ellipse gets the
fate ``unbound_at_end``, never ``survived``.  The wall-clock cap counts all segments of a system together and is
checked between chunks, so it can be exceeded by one chunk's duration.
"""

from __future__ import annotations

import math
import os
import time
from pathlib import Path

import numpy as np
import rebound
from rebound import clibrebound

from scatter_pop.engine.backends import backend as backend_named
from scatter_pop.engine.encounters import (
    binding_to_interior,
    classify_star_pass,
    line_min_distance,
    merge_jump,
)
from scatter_pop.engine.ledger import (
    END_ON_CHECK,
    FateEntry,
    Ledger,
    checkpoint_identity,
    read_checkpoint,
    write_checkpoint,
)
from scatter_pop.engine.outcome import NO_PLANET, EndReason, Fate, SystemRecord
from scatter_pop.engine.rebound_setup import STAR_NAME, build_simulation, restore_simulation, simulation_blob
from scatter_pop.engine.rebound_state import astrocentric_orbit, body_size, fate_entry, hybrid_step, state_arrays
from scatter_pop.engine.record_builder import build_record, planet_index, planet_name
from scatter_pop.engine.search_radii import set_escape_radius, set_search_radii, set_star_radius
from scatter_pop.engine.settlement import GAP_CHECKS, orbit_gap_hill
from scatter_pop.engine.stability import marchal_bozis_state_ratio, mutual_hill_radius, tidal_disruption_radius
from scatter_pop.errors import InputError

__all__ = ["SystemRun", "STAR_NAME"]

HYBRID_CHECK_STEPS = 2000  # hybrid step re-checked every this many steps (~2 % Python overhead)
STEP_CHANGE = 1.25  # ... and re-chosen when the wanted step differs by more than this factor


class SystemRun:
    """One system's integration: the simulation, its ledger and the event handlers."""

    def __init__(self, initial, integration, outcomes, checkpoint_path, reference, backend=None):
        self.initial, self.integ, self.out = initial, integration, outcomes
        self.backend = backend if backend is not None else backend_named(integration.integrator)
        self.path = Path(checkpoint_path) if checkpoint_path is not None else None
        self.settle = integration.stop_when_settled and not reference
        self.p_in = initial.inner_period()
        self.t_end = integration.end_time_years(self.p_in)
        self.chunk = integration.check_orbits * self.p_in
        self.error = None
        self.events = False  # a merger, star contact or ejection since the step was chosen
        self.step_changes = []  # (t, dt) each time the hybrid step was re-chosen (diagnostics)
        self.identity = checkpoint_identity(initial, integration, outcomes)
        if self.path is not None and self.path.exists():
            self.ledger, blob = read_checkpoint(self.path)
            if self.ledger.identity != self.identity:
                raise InputError(
                    f"checkpoint {str(self.path)!r}: written for another system or other settings "
                    f"(system index {self.ledger.identity.get('initial', {}).get('index')!r}); "
                    "remove it or point to the right file"
                )
            self.sim = restore_simulation(blob, self.ledger.bodies)  # names re-set from the ledger
        else:
            self.ledger = Ledger(identity=self.identity)
            self.sim = self._build()
        self.sim.collision_resolve = self._resolve  # function pointers are not saved: set every time

    # ------------------------------------------------------------------ set-up
    def _build(self):
        ini = self.initial
        names = [planet_name(i) for i in range(ini.count)]
        sim = build_simulation(ini, self.integ, names, self.backend)
        self.ledger.radius[STAR_NAME] = ini.star_radius
        for i in range(ini.count):
            self.ledger.radius[names[i]] = ini.radius[i]
        self.ledger.bodies = [STAR_NAME] + names
        self.sim = sim
        sim.dt = self._step_size() if self.backend.hybrid else self.p_in / 100.0
        self.ledger.e0 = sim.energy()
        self.ledger.l0 = list(sim.angular_momentum())
        self.ledger.l_scale = sum(
            sim.particles[k].m * float(np.linalg.norm(np.cross(sim.particles[k].xyz, sim.particles[k].vxyz)))
            for k in range(sim.N)
        )
        self._set_search_radii()
        return sim

    # ------------------------------------------------------------------ state helpers
    def arrays(self):
        return state_arrays(self.sim)

    def _name(self, k: int) -> str:
        """Name of the body at simulation index k (the engine's own list, see Ledger.bodies)."""
        return self.ledger.bodies[k]

    def _set_star_radius(self, exclude: int | None = None) -> None:
        set_star_radius(self.sim, self.ledger, self.initial.star_radius, self.out.disruption_eta, exclude)

    def _set_search_radii(self) -> None:
        set_search_radii(self.sim, self.ledger, self.initial.star_radius, self.out.disruption_eta)

    def _step_size(self) -> float:
        return hybrid_step(self.sim, self.integ.steps_per_orbit, self.p_in)

    def _fate_entry(self, k: int, fate: Fate, merged_into: int = NO_PLANET) -> FateEntry:
        return fate_entry(self.sim, k, fate, self.ledger.radius[self._name(k)], merged_into)

    # ------------------------------------------------------------------ contacts (inside a step)
    def _resolve(self, sim_pointer, collision):
        try:
            return self._contact(sim_pointer, collision)
        except Exception as exc:  # a ctypes callback must not raise: stop, re-raise after
            self.error = exc
            clibrebound.reb_simulation_stop(sim_pointer)
            return 0

    def _contact(self, sim_pointer, collision) -> int:
        i, j = int(collision.p1), int(collision.p2)
        if i == 0 or j == 0:
            return self._star_pass(sim_pointer, collision, j if i == 0 else i)
        ps = self.sim.particles
        dx = np.subtract(ps[i].xyz, ps[j].xyz)
        dv = np.subtract(ps[i].vxyz, ps[j].vxyz)
        if self.backend.collision == "direct":  # "direct" search: end of step, approaching pairs
            d_min = float(np.linalg.norm(dx)) if float(dx @ dv) <= 0.0 else math.inf
        else:
            d_min = line_min_distance(dx, dv, self.sim.dt_last_done)
        if not self.ledger.encounter_found:  # sampled at step ends (no extrapolation)
            r_hill = mutual_hill_radius(ps[0].m, ps[i].m, ps[j].m, body_size(self.sim, i), body_size(self.sim, j))
            if float(np.linalg.norm(dx)) < r_hill:
                self.ledger.t_first_encounter = float(self.sim.t)
                self._set_search_radii()
        ri, rj = self.ledger.radius[self._name(i)], self.ledger.radius[self._name(j)]
        if d_min >= ri + rj:
            return 0
        keep, gone = (i, j) if i < j else (j, i)  # REBOUND keeps the lower index
        entry = self._fate_entry(gone, Fate.MERGED, planet_index(self._name(keep)))
        m, x, v = self.arrays()
        jump = merge_jump(m, x, v, i, j, self.sim.G)
        search = ps[i].r, ps[j].r
        ps[i].r, ps[j].r = ri, rj  # merged radius from the physical radii
        outcome = clibrebound.reb_collision_resolve_merge(sim_pointer, collision)
        if outcome == 0:  # REBOUND merges a body at most once a step
            ps[i].r, ps[j].r = search
            return 0
        self.ledger.fates[self._name(gone)] = entry
        self.ledger.book(*jump)
        self.ledger.radius[self._name(keep)] = float(ps[keep].r)
        self._set_star_radius(exclude=gone)
        self.events = True
        if self._finished(leaving=1):
            clibrebound.reb_simulation_stop(sim_pointer)  # ends after this step: t_end = event time
        del self.ledger.bodies[gone]  # REBOUND removes `gone` as this returns
        return outcome

    def _star_pass(self, sim_pointer, collision, k: int) -> int:
        ps = self.sim.particles
        _, _, q = astrocentric_orbit(self.sim, k)
        kind = classify_star_pass(
            q, ps[0].m, self.initial.star_radius, ps[k].m, self.ledger.radius[self._name(k)], self.out.disruption_eta
        )
        if kind is None:
            return 0
        fate = Fate.HIT_STAR if kind == "hit_star" else Fate.DISRUPTED
        if self.backend.collision == "line":  # "line" search: wait until the pass is reached
            r_p = self.ledger.radius[self._name(k)]
            limit = (
                self.initial.star_radius + r_p
                if fate == Fate.HIT_STAR
                else float(tidal_disruption_radius(ps[k].m, r_p, ps[0].m, self.out.disruption_eta))
            )
            dx = np.subtract(ps[k].xyz, ps[0].xyz)
            dv = np.subtract(ps[k].vxyz, ps[0].vxyz)
            if float(dx @ dv) < 0.0 and line_min_distance(dx, dv, self.sim.dt_last_done) >= limit:
                return 0  # still falling in: decide at a later step
        entry = self._fate_entry(k, fate)
        m, x, v = self.arrays()
        jump = merge_jump(m, x, v, 0, k, self.sim.G)
        search = ps[0].r
        ps[0].r = self.initial.star_radius
        outcome = clibrebound.reb_collision_resolve_merge(sim_pointer, collision)
        if outcome == 0:  # REBOUND merges a body at most once a step
            ps[0].r = search
            return 0
        self.ledger.fates[self._name(k)] = entry
        self.ledger.book(*jump)
        self._set_star_radius(exclude=k)
        self.events = True
        if self._finished(leaving=1):
            clibrebound.reb_simulation_stop(sim_pointer)
        del self.ledger.bodies[k]  # REBOUND removes the planet as this returns
        return outcome

    # ------------------------------------------------------------------ escapes (between steps)
    def _escape(self) -> None:
        sim, limit = self.sim, self.integ.ejection_distance
        while True:
            m, x, v = self.arrays()
            far = [k for k in range(1, sim.N) if float(np.linalg.norm(x[k] - x[0])) > limit]
            unbound = [k for k in far if binding_to_interior(m, x, v, k, sim.G)[0] >= 0.0]
            if not unbound:
                break
            k = unbound[0]
            self.ledger.fates[self._name(k)] = self._fate_entry(k, Fate.EJECTED)
            e_before, l_before = sim.energy(), np.array(sim.angular_momentum())
            sim.remove(int(k))
            del self.ledger.bodies[k]
            sim.move_to_com()
            self.ledger.book(sim.energy() - e_before, np.array(sim.angular_momentum()) - l_before)
            self._set_star_radius()
            self.events = True
        set_escape_radius(sim, limit)

    # ------------------------------------------------------------------ the run
    def _finished(self, leaving: int = 0) -> bool:
        """True when nothing is left to integrate once ``leaving`` more planets are gone."""
        left = self.sim.N - 1 - leaving
        return left == 0 or (left == 1 and self.settle)

    def integrate_to(self, t: float) -> None:
        """Advance to t (first step past it); a hybrid step is checked every HYBRID_CHECK_STEPS steps."""
        if not self.backend.hybrid:
            self._advance(t)
            return
        while self.sim.t < t and not self._finished():
            self._advance(min(t, self.sim.t + HYBRID_CHECK_STEPS * self.sim.dt))
            self._follow_orbits()

    def _follow_orbits(self) -> None:
        """Re-choose the hybrid step after an event or a large change of the orbits."""
        if self.sim.N < 2:
            return
        want = self._step_size()
        if self.events or not want / STEP_CHANGE <= self.sim.dt <= want * STEP_CHANGE:
            self.sim.dt = want
            self.step_changes.append((float(self.sim.t), float(want)))
        self.events = False

    def _advance(self, t: float) -> None:
        while self.sim.t < t and not self._finished():
            try:
                self.sim.integrate(t, exact_finish_time=0)
            except rebound.Escape:
                self._raise_callback_error()
                self._escape()
                continue
            self._raise_callback_error()

    def _raise_callback_error(self) -> None:
        if self.error is not None:
            error, self.error = self.error, None
            raise RuntimeError(f"event handling failed at t = {self.sim.t!r} yr") from error

    def _settled(self):
        n = self.sim.N - 1
        if n == 0:
            return EndReason.NO_PLANETS
        if not self.settle:
            return None
        if n == 1:
            return EndReason.ONE_PLANET
        if n == 2:
            m, x, v = self.arrays()
            if marchal_bozis_state_ratio(m, x, v, self.sim.G) >= self.integ.hill_margin:
                return EndReason.HILL_STABLE
        return None

    def _sample_gap(self) -> None:
        """Book the osculating gap of a bound pair at this check (the last GAP_CHECKS are kept)."""
        gaps = self.ledger.recent_gaps
        if self.sim.N - 1 == 2:
            orbits = [astrocentric_orbit(self.sim, k) for k in (1, 2)]
            if all(0.0 < a < math.inf and 0.0 <= e < 1.0 for a, e, _ in orbits):
                ps = self.sim.particles
                (a1, e1, _), (a2, e2, _) = orbits
                gaps.append(orbit_gap_hill(ps[0].m, ps[1].m, ps[2].m, a1, e1, a2, e2))
                del gaps[:-GAP_CHECKS]
                return
        gaps.clear()

    def run(self) -> SystemRecord:
        """Integrate to a stopping rule, the end time or the wall-clock cap; the record.

        Checks (ejections, stopping rules, gap samples, search radii, hybrid step, cap) happen
        only at the chunk boundaries k * chunk, whatever the end time.  An end time inside a chunk
        stops on the first step past it with no check, so that raising the end time later
        continues from the stored state exactly as a run made with the later end time from the
        start (the state is kept in the checkpoint file for that).
        """
        start = time.perf_counter()
        spent_before = self.ledger.wall_seconds
        reason = self._settled() if self.sim.N <= 2 else None
        while reason is None:
            boundary = (self.ledger.chunks_done + 1) * self.chunk
            last = self.t_end - boundary <= END_ON_CHECK * boundary  # the end time is at this check or before
            inside = last and boundary - self.t_end > END_ON_CHECK * boundary
            self.integrate_to(self.t_end if inside else boundary)
            if inside and not self._finished():
                reason = EndReason.END_TIME  # inside a chunk: no check, the state stays continuable
                break
            self.ledger.chunks_done += 1
            self._escape()  # eject unbound planets beyond the distance
            self._sample_gap()
            reason = self._settled()
            if reason is None:
                self._set_search_radii()
                if self.backend.hybrid:
                    self._follow_orbits()
                if last:
                    reason = EndReason.END_TIME
                elif spent_before + time.perf_counter() - start >= self.integ.wall_seconds_max:
                    reason = EndReason.CAPPED
        self.ledger.wall_seconds = spent_before + time.perf_counter() - start
        if reason in (EndReason.CAPPED, EndReason.END_TIME):
            if self.path is not None:  # continued by a larger cap or a later end time
                write_checkpoint(self.path, self.ledger, simulation_blob(self.sim))
        elif self.path is not None and self.path.exists():
            os.remove(self.path)
        return self._record(reason)

    # ------------------------------------------------------------------ the record
    def _record(self, reason: EndReason) -> SystemRecord:
        sim = self.sim
        survivors = {self._name(k): self._fate_entry(k, Fate.SURVIVED) for k in range(1, sim.N)}
        return build_record(
            self.initial,
            self.ledger,
            survivors,
            reason=reason,
            t_end=sim.t,
            energy=sim.energy(),
            angmom=sim.angular_momentum(),
            steps=sim.steps_done,
            integrator=self.integ.integrator,
            circularisation_q=self.out.circularisation_q,
            star_mass=float(sim.particles[0].m),
            t_limit=self.t_end,
            hill_margin=self.integ.hill_margin,
            hill_ratio=marchal_bozis_state_ratio(*self.arrays(), sim.G) if sim.N == 3 else math.nan,
            recent_gap=min(gaps) if len(gaps := self.ledger.recent_gaps) == GAP_CHECKS else math.nan,
        )

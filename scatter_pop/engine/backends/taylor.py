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
  lands on it), whatever the end time; between chunks the same checks as the REBOUND path; the wall
  cap counts each system's share of the batch's wall time.  An end time inside a chunk stops the lane
  on its first step past it, with no check (as ``exact_finish_time = 0`` on the REBOUND path); the
  state, its double-length time and the lane's event parameters are kept in the checkpoint, so that a
  raised end time continues the chunk exactly as a run made with the later end time from the start.

A lane's steps depend on its own state and target time only (heyoka's step-size control is per lane),
so a record does not depend on its companions, its lane, the batch size or the lane count (4 and 8
give the same bits); ``tests/engine/test_taylor.py`` checks each of these bit for bit.
"""

from __future__ import annotations

import time
from dataclasses import replace

from scatter_pop.engine.backends.base import Backend
from scatter_pop.engine.outcome import SystemRecord
from scatter_pop.engine.taylor_lanes import lane_count, lane_integrator
from scatter_pop.engine.taylor_run import LaneDriver
from scatter_pop.engine.taylor_system import BLOB_MAGIC, LaneSystem
from scatter_pop.errors import InputError

__all__ = ["BACKEND", "TaylorBackend", "LaneSystem", "LaneDriver", "integrate_lanes", "BLOB_MAGIC"]


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
        return lane_count()

    def prepare(self, integration, bodies: int) -> float:
        """Compile the integrators for 2 .. ``bodies`` bodies at ``integration.taylor_tolerance``."""
        start = time.perf_counter()
        for n in range(2, int(bodies) + 1):
            lane_integrator(n, self.lanes(), float(integration.taylor_tolerance))
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

"""The heyoka batch integrators of the ``taylor`` back end, and the state arithmetic it needs.

One compiled :class:`LaneIntegrator` per (bodies, lanes, tolerance) and thread, kept for the
life of the process (:func:`lane_integrator`; compiling the 2-, 3- and 4-body integrators took
0.3 + 0.8 + 2.0 s cold and at most 0.12 s from heyoka's disk cache, ``analysis/bench_taylor_1e5.log``).  The equations are ``heyoka.model.nbody`` (Biscani & Izzo 2021, MNRAS 504,
2614) in the centre-of-mass frame with G = :data:`~scatter_pop.constants.G_AU_YR_MSUN`; body 0 is the
star, state per body x, y, z, vx, vy, vz; masses are the runtime parameters ``par[0..n-1]``.

Events are all **non-terminal** (a terminal event in one lane ends the call for every lane).  Each
is d^2 - P^2 for a pair of bodies and one runtime parameter P per event and lane:

========  ===========================  ==========  ==========================================
kind      pair                          P           direction
========  ===========================  ==========  ==========================================
contact   planets i < j                 R_i + R_j   inward: a merger
hill      planets i < j                 R_H,mut     inward: first close encounter (P = 0: off)
star      star, planet k                R* + R_k    inward: star contact
tidal     star, planet k                eta r_t,k   inward: disruption if the two-body q < it
escape    star, planet k                D_eject     outward: ejection if unbound
========  ===========================  ==========  ==========================================

heyoka's step-size control sees unscaled event functions (measured: an ejection event d^2 - D^2 with
D = 1000 AU loosened the steps and raised the energy error of the benchmark systems from 6e-13 to
6e-8, and changing a parameter used only in an event changed the lane's trajectory;
``analysis/taylor_event_probe.py``: one plain contact event changes a 3-body trajectory, the same event
times 1e-9 leaves it bitwise alone).  Every event function is therefore multiplied by EVENT_SCALE = 1e-9,
so that event-only parameters (the first-encounter radius, switched off once found) can change freely
(``tests/engine/test_taylor.py`` checks it).  With the full set of 15 events (4 bodies) the trajectories
are not bitwise those of the bare N-body integrator (``analysis/taylor_event_cost.py``: the extra terms
change the compiled evaluation, then chaos amplifies the last bits); they are still a function of the
lane's own state and parameters only.  Event detection costs a mostly fixed share of
the step (``analysis/taylor_event_cost.log``, per 8-lane step: 2.5 us bare, 3.6 us with the 3 contact
events, 4.4 us with all 15 at tol 1e-9; 3.7, 5.3 and 6.2 us at 1e-12).

The callbacks only record (lane, time, slot); every kind but ``hill`` also asks the step callback
of ``propagate_until`` to stop the call after the step (all lanes stop at the end of a normal step;
measured: a lane's trajectory is bitwise the same whether or not a call is stopped and resumed).
A lane's steps depend on its own state and target time only, so it is independent of its
companions.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass

import numpy as np

from scatter_pop.constants import G_AU_YR_MSUN

__all__ = [
    "LaneIntegrator",
    "lane_integrator",
    "EventSlot",
    "energy",
    "angular_momentum",
    "move_to_com",
    "STOPPING_KINDS",
    "lane_count",
    "event_function",
    "event_direction",
]

STOPPING_KINDS = ("contact", "star", "tidal", "escape")
EVENT_SCALE = 1e-9  # event functions scaled so that they never enter the step-size control
TARGET_CHECK_STEPS = 16  # the step callback looks for lanes at their target every this many steps
_CACHE = threading.local()


@dataclass(frozen=True)
class EventSlot:
    """One event of the integrator: its kind, the two bodies and the parameter index of its P."""

    kind: str
    i: int
    j: int
    par: int


class _Recorder:
    """What the event and step callbacks write during one ``propagate_until`` call."""

    def __init__(self):
        self.hits: list = []  # (lane, time, slot index)
        self.stop = False
        self.calls = 0
        self.targets = None
        self.real = None  # mask of the lanes that hold a real system
        self.stops = None  # per lane, the time after whose first step past it the call stops (inf: none)


class LaneIntegrator:
    """A compiled ``taylor_adaptive_batch`` for ``n`` bodies in ``lanes`` lanes at tolerance ``tol``."""

    def __init__(self, n: int, lanes: int, tol: float):
        import heyoka as hy

        self.n, self.lanes, self.tol = int(n), int(lanes), float(tol)
        self.recorder = _Recorder()
        eqs = hy.model.nbody(self.n, masses=[hy.par[k] for k in range(self.n)], Gconst=G_AU_YR_MSUN)
        var = [lhs for lhs, _ in eqs]
        self.slots: list[EventSlot] = []
        for i in range(1, self.n):
            for j in range(i + 1, self.n):
                self.slots += [EventSlot("contact", i, j, 0), EventSlot("hill", i, j, 0)]
        for k in range(1, self.n):
            self.slots += [EventSlot(kind, 0, k, 0) for kind in ("star", "tidal", "escape")]
        self.slots = [EventSlot(s.kind, s.i, s.j, self.n + q) for q, s in enumerate(self.slots)]
        self.n_par = self.n + len(self.slots)
        events = [
            hy.nt_event_batch(
                event_function(var, slot),
                self._event_callback(q, slot.kind in STOPPING_KINDS),
                direction=event_direction(slot),
            )
            for q, slot in enumerate(self.slots)
        ]
        self.ta = hy.taylor_adaptive_batch(
            eqs,
            np.zeros((6 * self.n, self.lanes)),
            tol=self.tol,
            pars=np.zeros((self.n_par, self.lanes)),
            nt_events=events,
        )
        self._ok = {hy.taylor_outcome.time_limit, hy.taylor_outcome.cb_stop, hy.taylor_outcome.success}

    def _event_callback(self, q: int, stops: bool):
        recorder = self.recorder

        def callback(ta, t, d_sgn, lane):
            recorder.hits.append((int(lane), float(t), q))
            if stops:
                recorder.stop = True

        return callback

    def _step_callback(self, ta) -> bool:
        rec = self.recorder
        if rec.stop:
            return False
        rec.calls += 1
        if rec.stops is not None and bool(np.any(ta.time >= rec.stops)):
            return False
        if rec.calls % TARGET_CHECK_STEPS:
            return True
        return not bool(np.any((ta.time >= rec.targets) & rec.real))

    def propagate(self, targets, real, stops=None):
        """Advance every lane towards its own target; stop early after a step with a stopping event,
        after the first step that takes a lane to or past its ``stops`` time (checked every step), or
        once some real lane is at its target (checked every TARGET_CHECK_STEPS steps).

        Returns (hits, steps per lane, outcome ok per lane).
        """
        rec = self.recorder
        rec.hits, rec.stop, rec.calls = [], False, 0
        rec.targets, rec.real = np.asarray(targets, dtype=float), np.asarray(real, dtype=bool)
        rec.stops = None
        if stops is not None and np.isfinite(stops).any():
            rec.stops = np.asarray(stops, dtype=float)
        self.ta.propagate_until(rec.targets, callback=self._step_callback)
        res = self.ta.propagate_res
        return list(rec.hits), [int(r[3]) for r in res], [r[0] in self._ok for r in res]

    # ------------------------------------------------------------------ lane access
    def read(self, lane: int):
        """Positions (n, 3), velocities (n, 3) and (t_hi, t_lo) of a lane (copies)."""
        s = self.ta.state[:, lane].reshape(self.n, 6)
        hi, lo = self.ta.dtime
        return s[:, :3].copy(), s[:, 3:].copy(), (float(hi[lane]), float(lo[lane]))

    def write(self, lane: int, x, v, t, pars) -> None:
        """Set a lane's state, double-length time and parameters; the other lanes are left as they are."""
        s = np.concatenate([np.asarray(x, float), np.asarray(v, float)], axis=1).reshape(-1)
        self.ta.state[:, lane] = s
        self.ta.pars[:, lane] = pars
        hi, lo = (a.copy() for a in self.ta.dtime)
        hi[lane], lo[lane] = t
        self.ta.set_dtime(hi, lo)

    def dense(self, lane: int, t: float):
        """Positions and velocities of a lane at time t inside its last step (heyoka dense output)."""
        times = self.ta.time.copy()
        times[lane] = t
        out = self.ta.update_d_output(times)[:, lane].reshape(self.n, 6)
        return out[:, :3].copy(), out[:, 3:].copy()

    def set_par(self, lane: int, index: int, value: float) -> None:
        self.ta.pars[index, lane] = value


def event_function(var, slot: EventSlot):
    """The event function of ``slot``: EVENT_SCALE * (d^2 - P^2), d the distance of its two bodies
    (state variables ``var``, 6 per body) and P its runtime parameter."""
    import heyoka as hy

    a, b = var[6 * slot.i : 6 * slot.i + 3], var[6 * slot.j : 6 * slot.j + 3]
    d2 = sum(((a[c] - b[c]) ** 2 for c in range(3)), hy.expression(0.0))
    return EVENT_SCALE * (d2 - hy.par[slot.par] ** 2)


def event_direction(slot: EventSlot):
    """heyoka's event direction of ``slot``: outward for an escape, inward for every other kind."""
    import heyoka as hy

    return hy.event_direction.positive if slot.kind == "escape" else hy.event_direction.negative


def lane_count() -> int:
    """heyoka's recommended SIMD width on this machine (doubles per register: 8 with AVX-512, 4 with
    AVX2), at least 2 (a 1-lane batch takes another code path in heyoka)."""
    import heyoka

    return max(2, int(heyoka.recommended_simd_size()))


def lane_integrator(n: int, lanes: int, tol: float) -> LaneIntegrator:
    """The compiled integrator for (n bodies, lanes, tol) of this thread (compiled on first use)."""
    cache = getattr(_CACHE, "integrators", None)
    if cache is None:
        cache = _CACHE.integrators = {}
    key = (int(n), int(lanes), float(tol))
    if key not in cache:
        cache[key] = LaneIntegrator(*key)
    return cache[key]


# --------------------------------------------------------------------------- state arithmetic
def energy(m, x, v, G=G_AU_YR_MSUN) -> float:
    """Total energy (kinetic + pairwise potential) of point masses, M_sun AU^2 yr^-2."""
    m, x, v = np.asarray(m, float), np.asarray(x, float), np.asarray(v, float)
    e = 0.5 * float(np.sum(m * np.sum(v * v, axis=1)))
    for i in range(len(m)):
        for j in range(i + 1, len(m)):
            e -= G * m[i] * m[j] / math.sqrt(float(np.sum((x[i] - x[j]) ** 2)))
    return e


def angular_momentum(m, x, v):
    """Total angular momentum vector sum m x cross v (M_sun AU^2 yr^-1)."""
    m = np.asarray(m, float)
    return (m[:, None] * np.cross(np.asarray(x, float), np.asarray(v, float))).sum(axis=0)


def move_to_com(m, x, v):
    """Positions and velocities shifted to the centre-of-mass frame."""
    m = np.asarray(m, float)
    mt = m.sum()
    return (x - (m[:, None] * x).sum(axis=0) / mt, v - (m[:, None] * v).sum(axis=0) / mt)

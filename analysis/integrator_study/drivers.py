"""Chunked integration drivers for the integrator study (plain REBOUND).

Every driver integrates one system to ``t_end`` (no early stop) in chunks of ``integrate(...,
exact_finish_time=0)`` calls and books mergers (``track_energy_offset``) and ejections (removal +
``move_to_com``, energy change added to ``energy_offset`` by hand) so that ``sim.energy()`` is
conserved; the recorded error is |E(t_end) - E0| / |E0|.

Methods
-------
ias15(eps)          IAS15, PRS23 step criterion (Pham, Rein & Spiegel 2024), accuracy ``eps``.
bs(eps)             Gragg-Bulirsch-Stoer, eps_rel = eps_abs = ``eps``, line collision search.
trace(...)          REBOUND's TRACE (Lu, Hernandez & Rein 2024), step = min period / n re-chosen
                    between chunks.
hybrid(...)         WHFast in Jacobi coordinates (Wisdom & Holman 1991; Rein & Tamayo 2015) in quiet
                    phases, IAS15 through close encounters.  The switch is made between chunks by
                    hand; WHFast stops itself (collision_resolve="halt") when two planets come within
                    ``f_enter`` x (R_H,i + R_H,j) of each other or a planet within ``q_danger`` of the
                    star, using detection radii in place of the physical radii.  The WHFast step is
                    min(P_min / n_per, eta x tau_peri,min) with tau_peri = sqrt(q^3 / (GM(1+e))), the
                    inverse angular speed at pericentre, re-chosen at every chunk.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
import rebound

__all__ = ["Result", "run_method", "METHODS"]

EJECT_R = 1000.0  # AU from the COM


@dataclass
class Result:
    cpu: float
    energy_error: float
    t_end: float
    n_left: int
    fates: dict = field(default_factory=dict)  # name -> (fate, t)
    final: dict = field(default_factory=dict)  # name -> (a, e, inc, q) astrocentric
    steps: int = 0
    switches: int = 0
    wh_fraction: float = float("nan")  # fraction of simulated time in WHFast


class _Events:
    """Merge recorder, ejection handling and energy bookkeeping shared by all drivers."""

    def __init__(self, sim):
        self.sim = sim
        self.fates = {}
        self.eject_r = EJECT_R
        sim.track_energy_offset = 1
        sim.collision = "line"
        self._install_merge()
        sim.exit_max_distance = self.eject_r

    def _install_merge(self):
        fates = self.fates

        def resolve(sim_ptr, collision):
            s = sim_ptr.contents
            p1, p2 = s.particles[collision.p1], s.particles[collision.p2]
            lo, hi = (p1, p2) if collision.p1 < collision.p2 else (p2, p1)
            kind = "hit_star" if lo.name == "star" else "merged"
            fates[hi.name] = (kind, s.t)
            return rebound.clibrebound.reb_collision_resolve_merge(sim_ptr, collision)

        self._resolve = resolve
        self.sim.collision_resolve = resolve

    def restore_merge(self):
        self.sim.collision_resolve = self._resolve

    def handle_escape(self):
        sim = self.sim
        star = sim.particles["star"]
        far = []
        for p in sim.particles[1:]:
            d = math.sqrt(p.x * p.x + p.y * p.y + p.z * p.z)
            if d > self.eject_r:
                far.append((p.name, p.orbit(primary=star).e >= 1.0, d))
        for name, unbound, d in far:
            if unbound:
                e0 = sim.energy()
                self.fates[name] = ("ejected", sim.t)
                sim.remove(name)
                sim.move_to_com()
                sim.energy_offset += e0 - sim.energy()
            else:
                self.eject_r = max(self.eject_r, 1.5 * d)
        sim.exit_max_distance = self.eject_r


def _elements(sim):
    star = sim.particles["star"]
    return {p.name: p.orbit(primary=star) for p in sim.particles[1:]}


def _finish(sim, ev, e0, cpu, extra):
    star = sim.particles["star"]
    final = {}
    for p in sim.particles[1:]:
        o = p.orbit(primary=star)
        final[p.name] = (o.a, o.e, o.inc, o.a * (1 - o.e))
    return Result(
        cpu=cpu,
        energy_error=abs((sim.energy() - e0) / e0),
        t_end=sim.t,
        n_left=sim.N - 1,
        fates=dict(ev.fates),
        final=final,
        **extra,
    )


def _integrate_to(sim, ev, t):
    """integrate to t handling escapes; returns None."""
    while sim.t < t and sim.N > 1:
        try:
            sim.integrate(t, exact_finish_time=0)
        except rebound.Escape:
            ev.handle_escape()


def _periods(sim):
    """(min period of bound planets, min pericentre timescale, min q) astrocentric."""
    star = sim.particles["star"]
    gm = sim.G * star.m
    pmin = taumin = qmin = math.inf
    for p in sim.particles[1:]:
        o = p.orbit(primary=star)
        q = o.a * (1 - o.e)
        qmin = min(qmin, q)
        if o.a > 0 and o.e < 1:
            pmin = min(pmin, o.P)
        taumin = min(taumin, math.sqrt(q**3 / (gm * (1 + o.e))))
    return pmin, taumin, qmin


# ----------------------------------------------------------------------------- simple methods
def run_fixed(sim, t_end, integrator, chunk=1000.0, **opts):
    ev = _Events(sim)
    sim.integrator = integrator
    for k, v in opts.items():
        setattr(sim.integrator, k, v)
    e0 = sim.energy()
    c0 = time.process_time()
    t = 0.0
    while sim.t < t_end and sim.N > 1:
        t = min(t_end, sim.t + chunk)
        _integrate_to(sim, ev, t)
    return _finish(sim, ev, e0, time.process_time() - c0, dict(steps=sim.steps_done))


def run_trace(sim, t_end, n_per=50, eta=1.0, peri_mode="FULL_BS", r_crit=3.0, rechoose=1000.0, tau_eta=None):
    ev = _Events(sim)
    sim.integrator = "trace"
    sim.integrator.peri_crit_eta = eta
    sim.integrator.peri_mode = peri_mode
    sim.integrator.r_crit_hill = r_crit
    e0 = sim.energy()
    c0 = time.process_time()
    while sim.t < t_end and sim.N > 1:
        pmin, tau, _ = _periods(sim)
        dt = pmin / n_per if math.isfinite(pmin) else 1.0
        if tau_eta is not None:
            dt = min(dt, tau_eta * tau)
        sim.dt = dt
        _integrate_to(sim, ev, min(t_end, sim.t + rechoose))
    return _finish(sim, ev, e0, time.process_time() - c0, dict(steps=sim.steps_done))


# ----------------------------------------------------------------------------- hybrid
def _sort_jacobi(sim):
    """Reorder planets by astrocentric semi-major axis (bound first, innermost first)."""
    star = sim.particles["star"]
    items = []
    for p in sim.particles[1:]:
        o = p.orbit(primary=star)
        key = o.a if (o.a > 0 and o.e < 1) else math.inf
        items.append((key, p.name))
    order = [n for _, n in sorted(items)]
    if order == [p.name for p in sim.particles[1:]]:
        return
    saved = [sim.particles[n].copy() for n in order]
    for n in order:
        sim.remove(n)
    for p in saved:
        sim.add(p)


def run_hybrid(
    sim,
    t_end,
    n_per=30.0,
    eta=1.5,
    f_enter=3.0,
    f_exit=4.0,
    q_danger=0.1,
    wh_steps=2000,
    ias_orbits=0.5,
    ias_eps=1e-9,
    corrector=0,
    safe_mode=1,
    enc="ias15",
    bs_eps=1e-10,
):
    ev = _Events(sim)
    e0 = sim.energy()
    c0 = time.process_time()
    m_star = sim.particles["star"].m
    r_true = {p.name: p.r for p in sim.particles}
    switches = 0
    wh_time = 0.0
    steps = 0
    mode = "wh"
    while sim.t < t_end and sim.N > 1:
        pmin, tau, qmin = _periods(sim)
        if not math.isfinite(pmin):
            pmin = 1e3
        if mode == "wh":
            if qmin < q_danger:
                mode = "ias15"
                continue
            _sort_jacobi(sim)
            star = sim.particles["star"]
            # detection radii: planet f/2 * (R_H,i) doubled -> pair sum f*(R_H,i+R_H,j)/... ;
            rdet = {p.name: f_enter * _hill_scale(p, star) * (p.m / (3 * m_star)) ** (1 / 3) for p in sim.particles[1:]}
            rmin = min(rdet.values())
            star.r = q_danger - rmin
            for p in sim.particles[1:]:
                p.r = rdet[p.name]
            sim.integrator = "whfast"
            sim.integrator.corrector = corrector
            sim.integrator.safe_mode = safe_mode
            dt = min(pmin / n_per, eta * tau)
            sim.dt = dt
            sim.collision_resolve = "halt"
            t_stop = min(t_end, sim.t + wh_steps * dt)
            t_start = sim.t
            s0 = sim.steps_done
            halted = False
            while sim.t < t_stop and sim.N > 1:
                try:
                    sim.integrate(t_stop, exact_finish_time=0)
                except rebound.Escape:
                    ev.handle_escape()
                except rebound.Collision:
                    halted = True
                    break
            if safe_mode == 0:
                sim.synchronize()
            steps += sim.steps_done - s0
            wh_time += sim.t - t_start
            for p in sim.particles:
                p.r = r_true[p.name] if p.name in r_true else p.r
            ev.restore_merge()
            if halted:
                mode = "ias15"
                switches += 1
        else:
            sim.gravity_ignore = 0  # WHFast (Jacobi) leaves 1 behind; BS would then drop star terms
            if enc == "bs":
                sim.integrator = "bs"
                sim.integrator.eps_rel = bs_eps
                sim.integrator.eps_abs = bs_eps
            else:
                sim.integrator = "ias15"
                sim.integrator.epsilon = ias_eps
            s0 = sim.steps_done
            _integrate_to(sim, ev, min(t_end, sim.t + ias_orbits * pmin))
            steps += sim.steps_done - s0
            # merged planets keep the sum of radii: refresh true radii
            for p in sim.particles:
                r_true[p.name] = p.r
            if sim.N > 2 and _separated(sim, f_exit, m_star) and _periods(sim)[2] >= q_danger:
                mode = "wh"
                switches += 1
            elif sim.N == 2 and _periods(sim)[2] >= q_danger:
                mode = "wh"
                switches += 1
    return _finish(
        sim,
        ev,
        e0,
        time.process_time() - c0,
        dict(steps=steps, switches=switches, wh_fraction=wh_time / max(sim.t, 1e-300)),
    )


def _hill_scale(p, star):
    """Length the Hill radius scales with: a for a bound orbit, the current distance otherwise."""
    o = p.orbit(primary=star)
    if o.a > 0 and o.e < 1:
        return o.a
    return o.d


def _separated(sim, f, m_star):
    """True when every pair of planets is farther apart than f (R_H,i + R_H,j)."""
    star = sim.particles["star"]
    ps = list(sim.particles[1:])
    xyz = np.array([[p.x, p.y, p.z] for p in ps])
    rh = [_hill_scale(p, star) * (p.m / (3 * m_star)) ** (1 / 3) for p in ps]
    for i in range(len(ps)):
        for j in range(i + 1, len(ps)):
            if np.linalg.norm(xyz[i] - xyz[j]) < f * (rh[i] + rh[j]):
                return False
    return True


METHODS = {
    "ias15": lambda sim, T, eps=1e-9, mode="PRS23": run_fixed(sim, T, "ias15", epsilon=eps, adaptive_mode=mode),
    "bs": lambda sim, T, eps=1e-10, eps_abs=None: run_fixed(
        sim, T, "bs", eps_rel=eps, eps_abs=eps if eps_abs is None else eps_abs
    ),
    "trace": run_trace,
    "hybrid": run_hybrid,
}


def run_method(name, sim, t_end, **kw):
    return METHODS[name](sim, t_end, **kw)

"""Fates of set-up orbits: merger, ejection, star collision, tidal disruption, bound wanderer.

Every set-up is a hand-made InitialSystem (an invented star of 1 M_sun and 1 R_sun with
Jupiter-like planets); expected times and states come from two-body mechanics.
"""

import math

import numpy as np
import pytest

from scatter_pop.constants import G_AU_YR_MSUN, MJUP_MSUN, R_JUP_AU, R_SUN_AU
from scatter_pop.engine.initial_conditions import InitialSystem
from scatter_pop.engine.integrate import integrate_initial
from scatter_pop.engine.outcome import NO_PLANET, EndReason, Fate
from scatter_pop.engine.rebound_run import SystemRun
from scatter_pop.engine.stability import tidal_disruption_radius
from scatter_pop.spec.reader import IntegrationSpec, OutcomeSpec

MJ, RJ = MJUP_MSUN, R_JUP_AU


def system(planets, star_mass=1.0, star_radius=R_SUN_AU):
    """InitialSystem from a list of dicts with m, r, a, e and optional inc, omega, node, M."""
    get = lambda key, default=0.0: tuple(float(p.get(key, default)) for p in planets)  # noqa: E731
    return InitialSystem(
        star_mass,
        star_radius,
        get("m"),
        get("r", RJ),
        get("a"),
        get("e"),
        get("inc"),
        get("omega"),
        get("node"),
        get("M"),
        seed=99,
        index=0,
    )


def run(initial, end_time, reference=False, **integ):
    """The REBOUND path (BS unless ``integrator`` is given; the taylor path has tests/engine/test_taylor.py)."""
    integ.setdefault("integrator", "bs")
    return integrate_initial(initial, IntegrationSpec(end_time=end_time, **integ), OutcomeSpec(), reference=reference)


def period(a, m_star=1.0, m=0.0):
    return 2 * math.pi * math.sqrt(a**3 / (G_AU_YR_MSUN * (m_star + m)))


def total_momentum(sim):
    return sum(np.multiply(sim.particles[k].m, sim.particles[k].vxyz) for k in range(sim.N))


# --------------------------------------------------------------------------- merger
def head_on(phase=0.5):
    """2 M_J prograde and 1 M_J retrograde on the same 5 AU circle, `phase` rad apart."""
    return system([dict(m=2 * MJ, a=5.0, e=0.0), dict(m=MJ, a=5.0, e=0.0, inc=math.pi, M=-phase)])


def test_head_on_collision_merges_conserving_mass_and_momentum():
    initial = head_on()
    sim_run = SystemRun(initial, IntegrationSpec(integrator="bs", end_time=5.0), OutcomeSpec(), None, True)
    p_before = total_momentum(sim_run.sim)
    scale = MJ * 2 * math.pi * math.sqrt(1 / 5.0)  # planet momentum scale, M_sun AU/yr
    assert np.linalg.norm(p_before) < 1e-15 * scale  # centre-of-mass frame
    rec = sim_run.run()
    p0, p1 = rec.planets
    assert (p0.fate, p1.fate) == (Fate.SURVIVED, Fate.MERGED)
    assert p1.merged_into == 0 and p0.merged_into == NO_PLANET
    assert p0.mass_final == 3 * MJ  # summed mass (exact in floating point)
    assert p1.mass_final == MJ
    assert p0.radius_final == pytest.approx(RJ * 2 ** (1 / 3), rel=1e-14)  # volume conserved
    assert sim_run.sim.N == 2
    assert np.linalg.norm(total_momentum(sim_run.sim) - p_before) < 1e-12 * scale
    # they meet after each has moved half the gap: t = 0.25 rad / n (two-body; focusing and the
    # contact distance 2 R_J make it slightly earlier)
    t_meet = 0.25 / (2 * math.pi / period(5.0))
    assert t_meet - 0.01 < p1.t_fate < t_meet
    # momentum 2 m v - m v over 3 m: v/3 at 5 AU -> apocentre 5 AU, a = 5 / (2 - 1/9)
    assert p0.a_final == pytest.approx(5.0 / (2 - 1 / 9), rel=1e-3)
    assert rec.t_first_encounter < p1.t_fate
    assert abs(rec.energy_error) < 1e-10 and rec.angmom_error < 1e-10


def test_merger_in_settling_mode_stops_with_one_planet():
    rec = run(head_on(), 100.0)
    assert rec.end_reason == EndReason.ONE_PLANET
    assert rec.count(Fate.MERGED) == 1 and rec.t_end == rec.planets[1].t_fate  # stops at the merger


def test_equal_mass_head_on_merger_falls_into_the_star():
    # equal and opposite momenta: the merged body is left at rest 5 AU from the star and falls in
    # radially in t_ff = pi/(2 sqrt 2) sqrt(r^3 / G M) = P(5 AU) / (4 sqrt 2) (two-body free fall)
    initial = system([dict(m=MJ, a=5.0, e=0.0), dict(m=MJ, a=5.0, e=0.0, inc=math.pi, M=-0.5)])
    rec = run(initial, 100.0, reference=True)  # do not stop when one planet is left
    p0, p1 = rec.planets
    assert (p0.fate, p1.fate) == (Fate.HIT_STAR, Fate.MERGED) and p1.merged_into == 0
    assert rec.end_reason == EndReason.NO_PLANETS
    t_ff = period(5.0, m=2 * MJ) / (4 * math.sqrt(2))
    assert p0.t_fate - p1.t_fate == pytest.approx(t_ff, rel=0.01)
    assert p0.mass_final == 2 * MJ and p0.e_final == pytest.approx(1.0, abs=1e-3)
    assert rec.t_end == p0.t_fate  # stopped at the event, not at a chunk end
    assert abs(rec.energy_error) < 1e-8 and rec.angmom_error < 1e-8  # L0 ~ 0 here: scale sum |L_k|


# --------------------------------------------------------------------------- ejection
def wanderer(e, a_far):
    """A Jupiter at 5 AU and one starting at pericentre 5 AU on the far side with eccentricity e."""
    return system([dict(m=MJ, a=5.0, e=0.0), dict(m=MJ, a=a_far, e=e, omega=math.pi)])


def test_planet_above_escape_speed_is_ejected():
    # e = 1.05 at q = 5 AU: hyperbolic, a = q / (1 - e) = -100 AU
    rec = run(wanderer(1.05, -100.0), 2000.0, ejection_distance=100.0)
    out = rec.planets[1]
    assert out.fate == Fate.EJECTED and rec.end_reason == EndReason.ONE_PLANET
    assert out.a_final < 0 and out.e_final > 1
    # time to reach 100 AU on the two-body hyperbola from pericentre (Kepler's equation)
    a, e = 100.0, 1.05
    cosh_f = (1 + 100.0 / a) / e
    big_f = math.acosh(cosh_f)
    t_exit = math.sqrt(a**3 / G_AU_YR_MSUN) * (e * math.sinh(big_f) - big_f)
    assert out.t_fate == pytest.approx(t_exit, rel=0.03)
    assert abs(rec.energy_error) < 1e-9


def test_bound_planet_beyond_ejection_distance_is_kept():
    # e = 0.95 at q = 5 AU: a = 100 AU, apocentre 195 AU > ejection distance 100 AU, but bound
    rec = run(wanderer(0.95, 100.0), 600.0, reference=True, ejection_distance=100.0)
    far = rec.planets[1]
    assert far.fate == Fate.SURVIVED and rec.end_reason == EndReason.END_TIME
    assert far.a_final == pytest.approx(100.0, rel=0.05)
    assert abs(rec.energy_error) < 1e-9


def test_bound_wanderer_returns_and_escape_radius_is_reset():
    initial = wanderer(0.95, 100.0)
    sim_run = SystemRun(
        initial,
        # checks every inner orbit, so that some come after the return (the escape radius is reset at checks)
        IntegrationSpec(integrator="bs", end_time=1.05 * period(100.0), ejection_distance=100.0, check_orbits=1.0),
        OutcomeSpec(),
        None,
        True,
    )
    rec = sim_run.run()
    assert rec.planets[1].fate == Fate.SURVIVED
    # back inside: rule restored -- the ejection distance from the star, i.e. from the origin (the
    # centre of mass) plus the star's offset from it
    star = sim_run.sim.particles[0]
    offset = math.sqrt(star.x**2 + star.y**2 + star.z**2)
    assert 0.0 < offset < 0.2
    # set at the last check (the end time falls inside a check interval), from the star's offset then
    assert 100.0 < sim_run.sim.exit_max_distance < 100.0 + 0.2
    assert sim_run.sim.exit_max_distance == pytest.approx(100.0 + offset, abs=0.05)


# --------------------------------------------------------------------------- star
def plunger(q, a=2.0, m=MJ, r=RJ):
    """A planet starting at apocentre with pericentre q, and a Jupiter far out at 20 AU."""
    return system([dict(m=m, r=r, a=a, e=1 - q / a, M=math.pi), dict(m=MJ, a=20.0, e=0.0)])


def test_plunging_orbit_hits_the_star():
    rec = run(plunger(0.002), 10.0)
    p = rec.planets[0]
    assert p.fate == Fate.HIT_STAR and rec.end_reason == EndReason.ONE_PLANET
    assert p.q_final == pytest.approx(0.002, rel=1e-3)
    # from apocentre to pericentre takes half a period (two-body)
    assert p.t_fate == pytest.approx(0.5 * period(2.0, m=MJ), abs=2e-3)
    assert abs(rec.energy_error) < 1e-8


def test_pericentre_inside_disruption_distance_disrupts():
    # 2.7 r_t = 0.0131 AU for Jupiter (Guillochon, Ramirez-Ruiz & Lin 2011, ApJ 732, 74; REFERENCES.md);
    # q = 0.010 AU is outside the star (R_sun + R_J = 0.0051 AU) but inside 2.7 r_t.
    sim_run = SystemRun(plunger(0.010), IntegrationSpec(integrator="bs", end_time=10.0), OutcomeSpec(), None, False)
    rec = sim_run.run()
    p = rec.planets[0]
    assert p.fate == Fate.DISRUPTED
    assert p.t_fate == pytest.approx(0.5 * period(2.0, m=MJ), abs=2e-3)
    assert sim_run.sim.particles[0].m == pytest.approx(1.0 + MJ, rel=1e-15)  # mass went into the star
    assert abs(rec.energy_error) < 1e-8


@pytest.mark.parametrize("factor, fate", [(0.98, Fate.DISRUPTED), (1.02, Fate.SURVIVED)])
def test_disruption_boundary_is_sharp(factor, fate):
    limit = float(tidal_disruption_radius(MJ, RJ, 1.0, 2.7))
    rec = run(plunger(factor * limit), 0.75 * period(2.0, m=MJ), reference=True)
    p = rec.planets[0]
    assert p.fate == fate
    if fate == Fate.SURVIVED:
        assert p.tidal_candidate  # q < 0.05 AU flagged
        assert p.q_final == pytest.approx(factor * limit, rel=1e-3)
        assert abs(rec.energy_error) < 1e-10


def test_single_passage_inside_a_chunk_is_caught():
    # one pericentre passage, far from any chunk boundary (chunk = 100 inner orbits)
    rec = run(plunger(0.010), 0.75 * period(2.0, m=MJ), reference=True, check_orbits=100.0)
    assert rec.planets[0].fate == Fate.DISRUPTED


def test_disruption_factor_comes_from_the_outcome_rules():
    # the same orbit survives when eta is lowered below q / r_t
    rt = float(tidal_disruption_radius(MJ, RJ, 1.0))
    rec = integrate_initial(
        plunger(0.010),
        IntegrationSpec(end_time=0.75 * period(2.0, m=MJ)),
        OutcomeSpec(disruption_eta=0.9 * 0.010 / rt),
        reference=True,
    )
    assert rec.planets[0].fate == Fate.SURVIVED


# --------------------------------------------------------------------------- books
def test_energy_books_close_through_a_merger_and_an_ejection():
    # a 2:1 mass head-on merger at 5 AU and a hyperbolic planet leaving from 8 AU
    initial = system(
        [
            dict(m=2 * MJ, a=5.0, e=0.0),
            dict(m=MJ, a=5.0, e=0.0, inc=math.pi, M=-0.5),
            dict(m=MJ, a=-40.0, e=1.2, omega=2.0),
        ]
    )
    sim_run = SystemRun(
        initial, IntegrationSpec(integrator="bs", end_time=3000.0, ejection_distance=60.0), OutcomeSpec(), None, False
    )
    e0 = sim_run.sim.energy()
    rec = sim_run.run()
    assert [p.fate for p in rec.planets] == [Fate.SURVIVED, Fate.MERGED, Fate.EJECTED]
    assert rec.end_reason == EndReason.ONE_PLANET
    raw = abs(sim_run.sim.energy() - e0) / abs(e0)
    assert raw > 1e-3  # mergers and removals do change E
    assert abs(rec.energy_error) < 1e-8  # ... and the books account for it
    assert rec.angmom_error < 1e-8

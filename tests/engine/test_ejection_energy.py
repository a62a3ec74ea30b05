"""An ejection seen through the energy books: where the survivor must end up.

Check (../shared/REFERENCES.md, "Energy bookkeeping of an ejection", derived, standard argument:
energy conservation of the star + planets system): if one of two planets leaves on a parabolic
orbit, the survivor obeys m_s/a_f = m_1/a_1 + m_2/a_2 (point masses); leaving with positive energy
makes it more bound, so a_f <= m_s / (m_1/a_1 + m_2/a_2), i.e. a_1 a_2/(a_1 + a_2) for equal masses.

The system is invented (a 1 M_sun, 1 R_sun star with two 5 M_J planets at 5 and 6 AU) and goes
through the engine's public entry from a TOML spec.  Why it ejects cheaply rather than merging:
a_2/a_1 = 1.2 is far inside the Gladman (1993, Icarus 106, 247) boundary
Delta/a_1 = 2.40 (mu_1 + mu_2)^(1/3) = 0.51, and its Safronov number
Theta = (M_p/M*)(a/R_p) ~ 50 >> 1 makes encounters unbind rather than collide (REFERENCES.md,
Safronov number; e.g. Goldreich, Lithwick & Sari 2004, ARA&A 42, 549).  The 1 R_J radius is that of
cold giants of a few M_J, whose mass-radius relation is flat near 1 R_J (from memory: Fortney,
Marley & Barnes 2007, ApJ 659, 1661).  System 4 of seed 1 was picked by trying the first systems
of the seed: it ejects after ~1.3e5 yr (~1.1e4 inner orbits) for ~2 s of CPU; its neighbours in
the seed merge, eject as well, or stay together for the 2e4 orbits.

Nothing here is a stored number standing for a result: every limit is computed from the system's
own initial state (masses, a_i, and its total energy E_0 evaluated by REBOUND, a reference library,
from the drawn elements) and from what the record says about the ejected planet.
"""

import math

import pytest
import rebound

from scatter_pop.constants import G_AU_YR_MSUN, MJUP_MSUN, R_JUP_AU, R_SUN_AU
from scatter_pop.engine.initial_conditions import InitialSystem, draw_system
from scatter_pop.engine.integrate import integrate_initial, integrate_system
from scatter_pop.engine.outcome import EndReason, Fate
from scatter_pop.spec.reader import IntegrationSpec, OutcomeSpec, parse_spec

G = G_AU_YR_MSUN

# An invented system: two 5 M_J planets at 5 and 6 AU (a_2/a_1 = 1.2), nearly circular and coplanar.
SPEC = """
[run]
name = "ejection-energy"
seed = 1
systems = 5
[star]
mass = 1.0
radius = 1.0
[planets]
count = 2
mass = 5.0
a = [5.0, 6.0]
e_sigma = 0.01
inc_sigma = 1.0
radius = 1.0
[integration]
integrator = "bs"
end_orbits = 20000
ejection_distance = 50.0
"""
INDEX = 4


@pytest.fixture(scope="module")
def ejection():
    spec = parse_spec(SPEC)
    initial = draw_system(spec, INDEX)
    return spec, initial, integrate_system(spec, INDEX)


def initial_energy(ini):
    """Total energy of the initial state (centre-of-mass frame), computed by REBOUND from the elements."""
    sim = rebound.Simulation()
    sim.G = G
    sim.add(m=ini.star_mass)
    for k in range(ini.count):
        sim.add(
            primary=sim.particles[0],
            m=ini.mass[k],
            a=ini.a[k],
            e=ini.e[k],
            inc=ini.inc[k],
            omega=ini.omega[k],
            Omega=ini.node[k],
            M=ini.mean_anomaly[k],
        )
    sim.move_to_com()
    return sim.energy()


def test_set_up_is_unstable_and_ejection_dominated(ejection):
    spec, ini, _ = ejection
    mu = [m / ini.star_mass for m in ini.mass]
    assert ini.a[1] / ini.a[0] == pytest.approx(1.2)
    # Gladman 1993 (small-mass form, REFERENCES.md): Hill stable iff Delta/a_1 > 2.40 (mu_1 + mu_2)^(1/3)
    assert (ini.a[1] - ini.a[0]) / ini.a[0] < 2.40 * (mu[0] + mu[1]) ** (1 / 3)
    # Safronov number Theta = (M_p/M*)(a/R_p) (REFERENCES.md convention): >> 1, ejection-dominated
    assert min(mu[k] * ini.a[k] / ini.radius[k] for k in range(2)) > 20
    assert ini.radius == (R_JUP_AU, R_JUP_AU) and ini.mass == (5 * MJUP_MSUN, 5 * MJUP_MSUN)


def test_one_planet_is_ejected_and_the_other_survives(ejection):
    spec, ini, rec = ejection
    assert sorted(p.fate for p in rec.planets) == [Fate.SURVIVED, Fate.EJECTED]
    assert rec.end_reason == EndReason.ONE_PLANET
    ejected = next(p for p in rec.planets if p.fate == Fate.EJECTED)
    survivor = next(p for p in rec.planets if p.fate == Fate.SURVIVED)
    assert 0.0 < ejected.t_fate <= rec.t_end
    assert 0.0 < survivor.a_final < ini.a[0] and survivor.e_final < 1.0
    assert survivor.mass_final == survivor.mass_initial and ejected.mass_final == ejected.mass_initial


def test_energy_and_angular_momentum_books_close_through_the_ejection(ejection):
    # The removal is booked as E_before - E_after; an unbooked ejection would show here as the
    # ejected planet's energy, |E_ej/E_0| ~ 1e-2 for this system.  BS at the default tolerance 1e-10
    # keeps |dE/E| ~ 1e-9..1e-8 over 1e5 yr (docs/internals/engine.md, measured); 1e-7 leaves room for that.
    _, _, rec = ejection
    assert abs(rec.energy_error) < 1e-7
    assert abs(rec.angmom_error) < 1e-7


def test_survivor_is_inside_the_parabolic_ejection_bound(ejection):
    # REFERENCES.md (derived, standard argument): a_f <= m_s / (m_1/a_1 + m_2/a_2) for point masses.
    # The point-mass sum E_pm = -G M* sum m_i/(2 a_i) is not the exact initial energy.  In the
    # centre-of-mass frame, with astrocentric r_i, v_i and two-body a_i about G(M*+m_i) (exact identity):
    #   E_0 = E_pm + sum G m_i^2 (1/r_i - 1/(2 a_i)) - |sum m_i v_i|^2/(2 M_tot) - G m_1 m_2/r_12
    #      <= E_pm + delta,   delta = sum G m_i^2 (1+e_i) / (2 a_i (1-e_i)),
    # so |E_0| >= |E_pm| - delta: the bound may be exceeded by the factor 1/(1 - delta/|E_pm|) ~ 1 + m/M*.
    # At the end, E = -G M* m_s/(2 a_f) (exact for the star-survivor pair with astrocentric a_f)
    # + the ejected planet's two-body energy about the pair's barycentre (>= 0: the engine's removal
    # condition) + their tidal coupling ~ 2 (m/M*)(1+e_f)^2 (a_f/D)^3 |E_s| ~ 1e-5 |E_s| at D = 50 AU;
    # the extra 1e-4 covers that and the integration error (< 1e-7 above).
    _, ini, rec = ejection
    survivor = next(p for p in rec.planets if p.fate == Fate.SURVIVED)
    m, a, e, m_star = ini.mass, ini.a, ini.e, ini.star_mass
    m_s = survivor.mass_final
    bound = m_s / (m[0] / a[0] + m[1] / a[1])
    assert bound == pytest.approx(a[0] * a[1] / (a[0] + a[1]), rel=1e-12)  # equal masses
    assert bound / a[0] == pytest.approx(0.545, abs=5e-4)  # REFERENCES.md, a_2/a_1 = 1.2
    e_pm = -sum(G * m_star * m[k] / (2 * a[k]) for k in range(2))
    delta = sum(G * m[k] ** 2 * (1 + e[k]) / (2 * a[k] * (1 - e[k])) for k in range(2))
    assert initial_energy(ini) <= e_pm + delta  # the inequality used
    limit = bound / (1 - delta / abs(e_pm)) * (1 + 1e-4)
    assert limit / bound - 1 < 2 * max(m) / m_star  # a correction of order m/M*
    assert survivor.a_final <= limit
    # sharper, with the exact E_0 instead of the inequality:
    assert survivor.a_final <= G * m_star * m_s / (2 * abs(initial_energy(ini))) * (1 + 1e-4)


def test_survivor_a_follows_from_the_ejected_planets_excess_energy(ejection):
    # Energy conservation with the recorded excess energy of the ejected planet:
    #   -G M* m_s / (2 a_f) = E_0 - E_ej,   E_ej = -G (M* + m_ej) m_ej / (2 a_ej)
    # (a_ej, e_ej: its astrocentric elements at removal, as recorded).  E_ej is evaluated about the
    # star instead of the star-survivor barycentre; relative to |E_s| = G M* m_s/(2 a_f) the neglected
    # terms are (mu = m/M*, equal masses, r_ej >= r_min ~ D the distance at removal):
    #   star's reflex velocity  2 mu k sqrt(x),  k = sqrt((1+e_f)/(1-e_f)), x = a_f (2/r_min - 1/a_ej)
    #   reduced mass            mu x;  survivor's potential and star offset at r_ej: 2 mu (1+e_f) a_f/r_min
    #   second order            2 (mu k)^2
    # The tolerance adds these up (each at its largest); measured here it is ~20 times smaller.
    spec, ini, rec = ejection
    survivor = next(p for p in rec.planets if p.fate == Fate.SURVIVED)
    ejected = next(p for p in rec.planets if p.fate == Fate.EJECTED)
    m_star, m_s, m_ej = ini.star_mass, survivor.mass_final, ejected.mass_final
    a_f, e_f, a_ej = survivor.a_final, survivor.e_final, ejected.a_final
    assert a_ej < 0.0 and ejected.e_final > 1.0  # this planet left on a hyperbolic orbit
    e_ej = -G * (m_star + m_ej) * m_ej / (2 * a_ej)
    e_0 = initial_energy(ini)
    assert 0.0 < e_ej < 0.05 * abs(e_0)  # a small excess energy, as is typical
    predicted = G * m_star * m_s / (2 * (e_ej - e_0))
    mu = m_ej / m_star
    d = spec.integration.ejection_distance
    r_min = d - 2 * mu * (d + a_f * (1 + e_f))  # the star sits near the centre of mass
    k = math.sqrt((1 + e_f) / (1 - e_f))
    x = a_f * (2 / r_min - 1 / a_ej)
    tolerance = 2 * mu * k * math.sqrt(x) + mu * x + 2 * mu * (1 + e_f) * a_f / r_min + 2 * (mu * k) ** 2
    assert tolerance < 0.02
    assert a_f == pytest.approx(predicted, rel=tolerance)
    # the excess energy matters at this precision: the parabolic value (E_ej = 0) lies outside
    parabolic = G * m_star * m_s / (2 * abs(e_0))
    assert abs(parabolic / a_f - 1) > tolerance


def test_bound_inner_planet_is_not_ejected_when_a_wide_companion_displaces_the_star():
    # Hierarchical state after a scattering: a 5 M_J planet at 1 AU (circular) and another 5 M_J
    # planet on a wide bound orbit (a = 8000 AU, e = 0.5) at apocentre, r = 12000 AU.  The centre of
    # mass lies m r / M_tot ~ 57 AU from the star, beyond the 50 AU ejection distance.  The inner
    # planet is bound to the star (two-body energy about the star < 0) and cannot have been ejected;
    # the outer one is bound and beyond the distance, so both are kept (the engine's stated rule).
    mj = 5 * MJUP_MSUN
    ini = InitialSystem(
        1.0,
        R_SUN_AU,
        (mj, mj),
        (R_JUP_AU, R_JUP_AU),
        (1.0, 8000.0),
        (0.0, 0.5),
        (0.0, 0.0),
        (0.0, 0.0),
        (0.0, 0.0),
        (0.0, math.pi),
    )
    offset = mj * 8000.0 * 1.5 / (1.0 + 2 * mj)
    assert offset > 50.0
    rec = integrate_initial(ini, IntegrationSpec(end_time=200.0, ejection_distance=50.0), OutcomeSpec())
    assert [p.fate for p in rec.planets] == [Fate.SURVIVED, Fate.SURVIVED]
    assert rec.planets[0].a_final == pytest.approx(1.0, rel=1e-3)

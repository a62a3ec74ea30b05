"""Initial conditions: purity, the spacing rule, the drawn distributions and the frame."""

import math
from dataclasses import replace

import numpy as np
import pytest
import scipy.stats

from scatter_pop.constants import MJUP_MSUN, R_JUP_AU
from scatter_pop.engine.initial_conditions import InitialSystem, draw_system, spaced_semi_major_axes, system_seed
from scatter_pop.engine.stability import hill_spacing
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import parse_spec

SPEC = """
[run]
seed = 2024
systems = 100
[star]
mass = 1.1
radius = 1.2
[planets]
count = 3
mass = {distribution = "log-uniform", low = 0.3, high = 10.0}
a_inner = 2.0
spacing = {distribution = "uniform", low = 2.0, high = 5.0}
e_sigma = 0.05
inc_sigma = 2.0
[integration]
end_orbits = 1000
"""


def _spec(text=SPEC, **planets):
    spec = parse_spec(text)
    return replace(spec, planets=replace(spec.planets, **planets)) if planets else spec


def test_draw_is_a_pure_function_of_spec_and_index():
    spec = _spec()
    assert draw_system(spec, 7) == draw_system(spec, 7)
    assert draw_system(parse_spec(SPEC), 7) == draw_system(spec, 7)
    a, b = draw_system(spec, 7), draw_system(spec, 8)
    assert a.seed != b.seed and a.mass != b.mass and a.mean_anomaly != b.mean_anomaly
    assert (a.index, b.index) == (7, 8)


def test_seed_depends_on_run_seed_and_index_only():
    seeds = {system_seed(2024, i) for i in range(1000)}
    assert len(seeds) == 1000  # no collisions among 1000 systems
    assert system_seed(2024, 5) == system_seed(2024, 5)
    assert system_seed(2025, 5) != system_seed(2024, 5)
    assert all(0 <= s < 2**64 for s in seeds)
    with pytest.raises(InputError, match="index"):
        system_seed(1, -1)


def test_system_draw_does_not_depend_on_batching():
    # the same index drawn alone or in the middle of a batch gives the same system
    spec = _spec()
    batch = [draw_system(spec, i) for i in range(20, 30)]
    assert batch[5] == draw_system(spec, 25)


def test_spacing_in_mutual_hill_radii():
    # a_{i+1} - a_i = Delta R_H,m with R_H,m = [(m_i+m_{i+1})/(3M*)]^(1/3)(a_i+a_{i+1})/2
    # (Chambers, Wetherill & Boss 1996, Icarus 119, 261; common practice)
    spec = _spec()
    for i in range(20):
        s = draw_system(spec, i)
        for k in range(2):
            delta = float(hill_spacing(s.star_mass, s.mass[k], s.mass[k + 1], s.a[k], s.a[k + 1]))
            assert 2.0 <= delta <= 5.0
        assert s.a[0] == 2.0


def test_spaced_axes_reproduce_given_spacing():
    a = spaced_semi_major_axes(1.0, [2.0, 4.0], [1e-3, 1e-3, 2e-3], 1.0)
    assert float(hill_spacing(1.0, 1e-3, 1e-3, a[0], a[1])) == pytest.approx(2.0, rel=1e-13)
    assert float(hill_spacing(1.0, 1e-3, 2e-3, a[1], a[2])) == pytest.approx(4.0, rel=1e-13)


def test_too_wide_spacing_is_a_user_error():
    with pytest.raises(InputError, match="planets.spacing"):
        spaced_semi_major_axes(1.0, [30.0], [0.05, 0.05], 1.0)


def test_outer_planet_beyond_ejection_distance_is_a_user_error():
    text = SPEC.replace("end_orbits = 1000", "end_orbits = 1000\nejection_distance = 2.1")
    with pytest.raises(InputError, match="ejection_distance"):
        draw_system(parse_spec(text), 0)


def test_explicit_semi_major_axes_are_used_and_keep_other_draws():
    text = SPEC.replace(
        'a_inner = 2.0\nspacing = {distribution = "uniform", low = 2.0, high = 5.0}', "a = [1.0, 2.0, 4.0]"
    )
    s1, s2 = draw_system(parse_spec(text), 3), draw_system(_spec(), 3)
    assert s1.a == (1.0, 2.0, 4.0)
    # the spacing block is drawn either way, so every later draw is unchanged
    assert (s1.mass, s1.e, s1.inc, s1.omega, s1.node, s1.mean_anomaly) == (
        s2.mass,
        s2.e,
        s2.inc,
        s2.omega,
        s2.node,
        s2.mean_anomaly,
    )


def test_number_of_draws_does_not_depend_on_values():
    # changing a scale (e_sigma) or a distribution changes only the quantity it governs
    base = draw_system(_spec(), 11)
    other = draw_system(_spec(e_sigma=0.3, masses=(_spec().planets.masses[0].scaled(2.0),) * 3), 11)
    assert other.e != base.e and other.mass != base.mass
    assert (other.inc, other.omega, other.node, other.mean_anomaly) == (
        base.inc,
        base.omega,
        base.node,
        base.mean_anomaly,
    )


def _many(spec, n=600):
    return [draw_system(spec, i) for i in range(n)]


def test_eccentricities_and_inclinations_are_rayleigh():
    # KS test against scipy.stats.rayleigh (reference library); truncation at e = 1 and i = pi is
    # negligible at these scales.
    systems = _many(_spec())
    e = np.array([x for s in systems for x in s.e])
    inc = np.array([x for s in systems for x in s.inc])
    assert scipy.stats.kstest(e, scipy.stats.rayleigh(scale=0.05).cdf).pvalue > 1e-3
    assert scipy.stats.kstest(inc, scipy.stats.rayleigh(scale=math.radians(2.0)).cdf).pvalue > 1e-3
    assert np.mean(e) == pytest.approx(0.05 * math.sqrt(math.pi / 2), rel=0.05)


def test_truncated_rayleigh_stays_below_one():
    systems = _many(_spec(e_sigma=0.9), 200)
    e = np.array([x for s in systems for x in s.e])
    assert e.max() < 1.0 and e.min() >= 0.0
    # truncated Rayleigh on [0, 1): CDF = (1 - exp(-e^2/2s^2)) / (1 - exp(-1/2s^2))
    norm = 1 - math.exp(-0.5 / 0.81)
    assert scipy.stats.kstest(e, lambda x: (1 - np.exp(-(x**2) / (2 * 0.81))) / norm).pvalue > 1e-3


def test_angles_uniform_and_masses_log_uniform():
    systems = _many(_spec())
    for name in ("omega", "node", "mean_anomaly"):
        values = np.array([x for s in systems for x in getattr(s, name)])
        assert scipy.stats.kstest(values, scipy.stats.uniform(0, 2 * math.pi).cdf).pvalue > 1e-3
    masses = np.array([x for s in systems for x in s.mass]) / MJUP_MSUN
    assert scipy.stats.kstest(masses, scipy.stats.loguniform(0.3, 10.0).cdf).pvalue > 1e-3


def test_radius_from_density_gives_jupiter_radius():
    # Jupiter: mass 1.898e27 kg, mean density 1.326 g/cm^3, volumetric mean radius 69 911 km
    # (NASA Jupiter fact sheet; from memory).  M_J here is the IAU 2015 value (1.8982e27 kg).
    text = SPEC.replace('mass = {distribution = "log-uniform", low = 0.3, high = 10.0}', "mass = 1.0\ndensity = 1.326")
    s = draw_system(parse_spec(text), 0)
    assert s.radius[0] * 1.495978707e8 == pytest.approx(69911.0, rel=2e-3)


def test_fixed_radius_in_jupiter_radii():
    text = SPEC.replace("inc_sigma = 2.0", "inc_sigma = 2.0\nradius = 1.5")
    s = draw_system(parse_spec(text), 0)
    assert s.radius == (1.5 * R_JUP_AU,) * 3


def test_star_and_units_passed_through():
    s = draw_system(_spec(), 0)
    assert s.star_mass == 1.1
    assert s.star_radius == pytest.approx(1.2 * 6.957e8 / 1.495978707e11, rel=1e-12)  # IAU 2015 R_sun
    assert isinstance(s, InitialSystem) and s.count == 3
    # Kepler's third law, P = 2 pi sqrt(a^3 / G(M+m)): a massless body at 1 au around 1 M_sun has the
    # Gaussian year, 365.2568983 d (IAU value; from memory) = 1.0000189 Julian years.
    one = InitialSystem(1.0, 0.0, (0.0,), (0.0,), (1.0,), (0.0,), (0.0,), (0.0,), (0.0,), (0.0,))
    assert one.inner_period() == pytest.approx(365.2568983 / 365.25, abs=2e-7)

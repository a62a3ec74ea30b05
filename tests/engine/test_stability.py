"""Stability criteria and scale numbers against published and derived values.

Check values are those listed in ../shared/REFERENCES.md ("derived" = computed
from the quoted formula, a check of our implementation of it).
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from scatter_pop.constants import MJUP_MSUN, R_JUP_AU
from scatter_pop.engine import stability as s

# Saturn/Sun mass ratio 1/3497.9 (JPL planetary constants, GM_Saturn = 3.7931e16 m^3 s^-2; from memory).
MSAT_MSUN = 1.0 / 3497.9


# --------------------------------------------------------------------------- Gladman (1993)
@pytest.mark.parametrize(
    "mu, delta_a1, delta_hill",
    [(1e-6, 0.030723, 3.464), (1e-5, 0.067360, 3.462), (1e-4, 0.150706, 3.456), (1e-3, 0.352233, 3.428)],
)
def test_gladman_circular_critical_spacing(mu, delta_a1, delta_hill):
    # Gladman, B. 1993, Icarus 106, 247 (criterion after Marchal & Bozis 1982, Celest. Mech. 26, 311),
    # equal masses, circular coplanar orbits; derived values of REFERENCES.md.
    assert s.gladman_circular_critical_delta(mu, mu) == pytest.approx(delta_a1, abs=5e-7)
    assert s.gladman_circular_critical_spacing(mu, mu) == pytest.approx(delta_hill, abs=5e-4)


def test_gladman_small_mass_limit_is_two_root_three_hill_radii():
    # Gladman 1993: Delta > 2 sqrt(3) R_H for small masses; Delta/a1 -> 2.40 (mu1 + mu2)^(1/3).
    mu = 1e-10
    assert s.gladman_circular_critical_spacing(mu, mu) == pytest.approx(2 * math.sqrt(3), rel=1e-4)
    assert s.gladman_circular_critical_delta(mu, mu) / (2 * mu) ** (1 / 3) == pytest.approx(2.40, abs=5e-3)


def test_jupiter_saturn_is_hill_stable_with_ratio_1036():
    # Gladman 1993 eccentric form; Jupiter-Saturn today (a = 5.2026, 9.5549 AU; e = 0.0489, 0.0565):
    # LHS/RHS = 1.036 (REFERENCES.md, derived).
    ratio = s.marchal_bozis_ratio(1.0, MJUP_MSUN, MSAT_MSUN, 5.2026, 9.5549, 0.0489, 0.0565)
    assert ratio == pytest.approx(1.036, abs=5e-4)


def test_eccentric_form_equals_one_on_the_circular_boundary():
    # consistency of the two forms of the same criterion (Gladman 1993)
    for mu in (1e-6, 1e-4, 1e-3):
        x = s.gladman_circular_critical_delta(mu, 2 * mu)
        assert s.marchal_bozis_ratio(1.0, mu, 2 * mu, 1.0, 1.0 + x, 0.0, 0.0) == pytest.approx(1.0, abs=1e-12)


def test_hill_stable_circular_either_order():
    a2 = 1.0 + 1.01 * s.gladman_circular_critical_delta(1e-3, 1e-3)
    assert s.hill_stable_circular(1.0, 1e-3, 1e-3, 1.0, a2)
    assert s.hill_stable_circular(1.0, 1e-3, 1e-3, a2, 1.0)
    a2 = 1.0 + 0.99 * s.gladman_circular_critical_delta(1e-3, 1e-3)
    assert not s.hill_stable_circular(1.0, 1e-3, 1e-3, 1.0, a2)


def test_eccentricity_makes_a_pair_less_stable():
    base = s.marchal_bozis_ratio(1.0, 1e-3, 1e-3, 1.0, 1.6, 0.0, 0.0)
    assert s.marchal_bozis_ratio(1.0, 1e-3, 1e-3, 1.0, 1.6, 0.2, 0.0) < base
    assert s.marchal_bozis_ratio(1.0, 1e-3, 1e-3, 1.0, 1.6, 0.0, 0.2) < base


# --------------------------------------------------------------------------- exact (E, L) form
@pytest.mark.parametrize("mu1, mu2", [(1e-6, 1e-6), (1e-5, 3e-5), (1e-4, 1e-4), (1e-3, 2e-3)])
def test_exact_critical_value_matches_marchal_bozis_series(mu1, mu2):
    # Marchal & Bozis 1982 / Gladman 1993 eq. for the critical value:
    # 1 + 3^(4/3) m1 m2 / (m3^(2/3) (m1+m2)^(4/3)) - m1 m2 (11 m1 + 7 m2) / (3 m3 (m1+m2)^2) + ...
    # (third term from memory).  Our value is exact (Euler collinear configuration); the series
    # must agree to its next order, O(mu^(4/3)).
    series = (
        1
        + 3 ** (4 / 3) * mu1 * mu2 / (mu1 + mu2) ** (4 / 3)
        - mu1 * mu2 * (11 * mu1 + 7 * mu2) / (3 * (mu1 + mu2) ** 2)
    )
    exact = s.euler_value(1.0, mu1, mu2)
    assert abs(exact - series) < 2 * (mu1 + mu2) ** (4 / 3)
    assert s.marchal_bozis_critical(1.0, mu1, mu2) >= exact


@pytest.mark.parametrize("ma, mb, mc", [(1.0, 1e-3, 1e-3), (1.0, 0.3, 0.5), (1.0, 1.0, 1.0)])
def test_euler_configuration_is_a_central_configuration(ma, mb, mc):
    # Euler (1767): in the collinear solution every acceleration points to the centre of mass and is
    # proportional to the distance from it (rigid rotation).  Recover x from the value's ingredients.
    coeffs = [ma + mb, 3 * ma + 2 * mb, 3 * ma + mb, -(mb + 3 * mc), -(2 * mb + 3 * mc), -(mb + mc)]
    x = max(r.real for r in np.roots(coeffs) if abs(r.imag) < 1e-9 and r.real > 0)
    m = np.array([ma, mb, mc])
    pos = np.array([0.0, 1.0, 1.0 + x])
    pos -= m @ pos / m.sum()
    acc = [sum(m[j] * np.sign(pos[j] - pos[i]) / (pos[j] - pos[i]) ** 2 for j in range(3) if j != i) for i in range(3)]
    omega2 = -acc[0] / pos[0]
    for i in (1, 2):
        assert acc[i] == pytest.approx(-omega2 * pos[i], abs=1e-10 * abs(acc[0]))


def _circular_state(mu1, mu2, a1, a2, phase=1.0, G=4 * math.pi**2):
    m = np.array([1.0, mu1, mu2])
    x = np.zeros((3, 3))
    v = np.zeros((3, 3))
    for k, (mu, a, th) in enumerate(((mu1, a1, 0.0), (mu2, a2, phase)), start=1):
        vc = math.sqrt(G * (1.0 + mu) / a)
        x[k] = [a * math.cos(th), a * math.sin(th), 0.0]
        v[k] = [-vc * math.sin(th), vc * math.cos(th), 0.0]
    return m, x, v, G


def test_state_ratio_agrees_with_element_form_for_circular_orbits():
    # For small masses the (E, L) criterion reduces to Gladman's element form (Gladman 1993).
    for a2 in (1.02, 1.03, 1.05, 1.2):
        m, x, v, G = _circular_state(1e-6, 1e-6, 1.0, a2, phase=2.5)
        state = s.marchal_bozis_state_ratio(m, x, v, G)
        elements = s.marchal_bozis_ratio(1.0, 1e-6, 1e-6, 1.0, a2, 0.0, 0.0)
        assert state == pytest.approx(elements, abs=2e-5)


def test_state_ratio_is_frame_independent_and_negative_when_unbound():
    m, x, v, G = _circular_state(1e-3, 1e-3, 1.0, 1.6)
    r0 = s.marchal_bozis_state_ratio(m, x, v, G)
    rot = np.array([[0.0, -0.6, 0.8], [1.0, 0.0, 0.0], [0.0, 0.8, 0.6]])
    r1 = s.marchal_bozis_state_ratio(m, x @ rot.T + [3.0, -1.0, 2.0], v @ rot.T + [0.1, 0.2, -0.3], G)
    assert r1 == pytest.approx(r0, rel=1e-12)
    v[2] *= 2.0  # outer planet well beyond escape speed
    assert s.marchal_bozis_state_ratio(m, x, v, G) < 0


# --------------------------------------------------------------------------- Petrovich (2015)
@pytest.mark.parametrize(
    "mu, e, ratio", [(1e-4, 0.0, 1.2758), (1e-3, 0.0, 1.4378), (1e-2, 0.0, 1.8541), (1e-3, 0.1, 1.7990)]
)
def test_petrovich_critical_ratio(mu, e, ratio):
    # Petrovich, C. 2015, ApJ 808, 120; derived critical a_out/a_in of REFERENCES.md.
    assert s.petrovich_2015_critical_ratio(mu, mu, e, e) == pytest.approx(ratio, abs=5e-5)


def test_petrovich_stable_switches_at_the_critical_ratio():
    x = s.petrovich_2015_critical_ratio(1e-3, 5e-4, 0.1, 0.05)
    assert s.petrovich_2015_stable(1.0, 1e-3, 5e-4, 1.0, 1.001 * x, 0.1, 0.05)
    assert not s.petrovich_2015_stable(1.0, 1e-3, 5e-4, 1.0, 0.999 * x, 0.1, 0.05)


# --------------------------------------------------------------------------- scales
@pytest.mark.parametrize("a, theta", [(0.05, 0.100), (1.0, 2.00), (5.2, 10.39)])
def test_safronov_number_of_jupiter(a, theta):
    # Theta = (M_p/M*)(a/R_p), Jupiter around the Sun (IAU 2015 B3 mass and radius); REFERENCES.md.
    assert s.safronov_number(MJUP_MSUN, 1.0, a, R_JUP_AU) == pytest.approx(theta, rel=2.5e-3)


def test_tidal_disruption_radius_of_jupiter():
    # r_t = R_p (M*/M_p)^(1/3) = 0.00485 AU; 2.7 r_t = 0.0131 AU (Guillochon, Ramirez-Ruiz & Lin 2011,
    # ApJ 732, 74; factor 2.7 from memory); REFERENCES.md.
    assert s.tidal_disruption_radius(MJUP_MSUN, R_JUP_AU, 1.0) == pytest.approx(0.00485, abs=5e-6)
    assert s.tidal_disruption_radius(MJUP_MSUN, R_JUP_AU, 1.0, eta=2.7) == pytest.approx(0.0131, abs=5e-5)


def test_mutual_hill_radius_and_spacing():
    # R_H,m = [(m1+m2)/(3M)]^(1/3) (a1+a2)/2 (Chambers, Wetherill & Boss 1996, Icarus 119, 261; common practice)
    r = s.mutual_hill_radius(1.0, 1e-3, 2e-3, 5.0, 6.0)
    assert r == pytest.approx(0.1 * 5.5, rel=1e-12)
    assert s.hill_spacing(1.0, 1e-3, 2e-3, 5.0, 6.0) == pytest.approx(1.0 / 0.55, rel=1e-12)


@settings(max_examples=60, deadline=None)
@given(mu1=st.floats(1e-7, 1e-2), mu2=st.floats(1e-7, 1e-2))
def test_critical_delta_is_increasing_in_mass(mu1, mu2):
    # a heavier pair needs a wider gap (Gladman 1993)
    assert s.gladman_circular_critical_delta(mu1, mu2) < s.gladman_circular_critical_delta(1.5 * mu1, 1.5 * mu2)
    assert s.marchal_bozis_ratio(
        1.0, mu1, mu2, 1.0, 1.0 + s.gladman_circular_critical_delta(mu1, mu2), 0.0, 0.0
    ) == pytest.approx(1.0, abs=1e-10)

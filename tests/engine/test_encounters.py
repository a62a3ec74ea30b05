"""Geometry helpers of close approaches, contacts and escapes, against REBOUND and brute force."""

import math

import numpy as np
import pytest
import rebound
from hypothesis import given, settings
from hypothesis import strategies as st

from scatter_pop.constants import G_AU_YR_MSUN, MJUP_MSUN, R_JUP_AU, R_SUN_AU
from scatter_pop.engine import encounters as enc
from scatter_pop.engine.ledger import FateEntry, Ledger, read_checkpoint, write_checkpoint
from scatter_pop.engine.stability import mutual_hill_radius
from scatter_pop.errors import InputError

vec = st.lists(st.floats(-10, 10), min_size=3, max_size=3)


@settings(max_examples=80, deadline=None)
@given(x=vec, v=vec)
def test_relative_orbit_matches_rebound(x, v):
    # reference library: REBOUND's own orbital elements of the same two-body state
    if np.linalg.norm(x) < 1e-2 or np.linalg.norm(np.cross(x, v)) < 1e-3:
        return
    sim = rebound.Simulation()
    sim.G = G_AU_YR_MSUN
    sim.add(m=1.0)
    sim.add(m=1e-3, x=x[0], y=x[1], z=x[2], vx=v[0], vy=v[1], vz=v[2])
    o = sim.particles[1].orbit(primary=sim.particles[0])
    a, e, q = enc.relative_orbit(x, v, G_AU_YR_MSUN * 1.001)
    assert e == pytest.approx(o.e, rel=1e-9, abs=1e-9)
    assert q == pytest.approx(o.a * (1 - o.e), rel=1e-7, abs=1e-12)
    if abs(o.e - 1) > 1e-6:
        assert a == pytest.approx(o.a, rel=1e-8)


def test_relative_orbit_radial_plunge_has_zero_pericentre():
    a, e, q = enc.relative_orbit([1.0, 0, 0], [-1.0, 0, 0], G_AU_YR_MSUN)
    assert e == pytest.approx(1.0) and q == 0.0 and a > 0


@settings(max_examples=60, deadline=None)
@given(dx=vec, dv=vec, dt=st.floats(1e-3, 2.0))
def test_line_min_distance_is_the_minimum_on_the_segment(dx, dv, dt):
    # brute force: sample the straight line dx - s dv for s in [0, dt]
    s = np.linspace(0.0, dt, 20001)
    d = np.linalg.norm(np.asarray(dx)[None, :] - s[:, None] * np.asarray(dv)[None, :], axis=1)
    got = enc.line_min_distance(dx, dv, dt)
    assert got <= d.min() + 1e-12
    assert got >= d.min() - (np.linalg.norm(dv) * dt / 20000) - 1e-12


def _energy(m, x, v, G):
    kinetic = 0.5 * sum(m[i] * v[i] @ v[i] for i in range(len(m)))
    pot = -sum(G * m[i] * m[j] / np.linalg.norm(x[i] - x[j]) for i in range(len(m)) for j in range(i + 1, len(m)))
    return kinetic + pot


def _angmom(m, x, v):
    return sum(m[i] * np.cross(x[i], v[i]) for i in range(len(m)))


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**31), boost=vec)
def test_merge_jump_equals_brute_force_difference(seed, boost):
    # brute force: total energy / angular momentum of the system before and after replacing bodies
    # 1 and 2 by one body at their centre of mass moving with their centre-of-mass velocity
    rng = np.random.default_rng(seed)
    m = np.array([1.0, 1e-3, 3e-3, 2e-3])
    x = rng.normal(size=(4, 3)) * 3
    v = rng.normal(size=(4, 3)) * 2
    de, dl = enc.merge_jump(m, x, v, 1, 2, G_AU_YR_MSUN)
    mt = m[1] + m[2]
    xm = (m[1] * x[1] + m[2] * x[2]) / mt
    vm = (m[1] * v[1] + m[2] * v[2]) / mt
    m2, x2, v2 = np.array([m[0], mt, m[3]]), np.array([x[0], xm, x[3]]), np.array([v[0], vm, v[3]])
    scale = abs(_energy(m, x, v, G_AU_YR_MSUN))
    assert de == pytest.approx(_energy(m2, x2, v2, G_AU_YR_MSUN) - _energy(m, x, v, G_AU_YR_MSUN), abs=1e-12 * scale)
    np.testing.assert_allclose(
        dl, _angmom(m2, x2, v2) - _angmom(m, x, v), atol=1e-12 * np.linalg.norm(_angmom(m, x, v))
    )
    # the jump is the same in a translated, boosted frame (hybrid integrators' coordinates)
    de2, dl2 = enc.merge_jump(m, x + [1.0, -2.0, 0.5], v + np.asarray(boost), 1, 2, G_AU_YR_MSUN)
    assert de2 == pytest.approx(de, rel=1e-9, abs=1e-14 * scale)
    np.testing.assert_allclose(dl2, dl, rtol=1e-9, atol=1e-14)


def test_binding_to_interior_separates_bound_and_unbound():
    # Two-body escape speed v_esc = sqrt(2 G (M + m) / r) (textbook two-body problem, e.g. Murray &
    # Dermott 1999, Solar System Dynamics, ch. 2 -- from memory): 1 % above it is unbound, below bound.
    m = np.array([1.0, 1e-3])
    x = np.array([[0.0, 0, 0], [100.0, 0, 0]])
    v_esc = math.sqrt(2 * G_AU_YR_MSUN * (1 + 1e-3) / 100.0)
    e_plus, apo_plus = enc.binding_to_interior(m, x, np.array([[0.0, 0, 0], [0, 1.01 * v_esc, 0]]), 1, G_AU_YR_MSUN)
    e_minus, apo_minus = enc.binding_to_interior(m, x, np.array([[0.0, 0, 0], [0, 0.99 * v_esc, 0]]), 1, G_AU_YR_MSUN)
    assert e_plus > 0 and math.isinf(apo_plus)
    assert e_minus < 0 and apo_minus > 100.0


def test_binding_to_interior_ignores_outer_bodies_and_counts_inner_ones():
    # A bound planet on a circular 1 AU orbit and a 5 M_J companion 12 000 AU out, which pulls the
    # system's centre of mass ~57 AU from the star.  About the barycentre of "everything else" the
    # inner planet would look unbound (it moves with the star at ~v_star relative to a point 57 AU
    # away); about the star and the bodies inside it, it has the circular energy -G(M+m)/(2a)
    # (two-body problem, common practice).
    mj = 5 * MJUP_MSUN
    m = np.array([1.0, mj, mj])
    v_circ = math.sqrt(G_AU_YR_MSUN * (1.0 + mj) / 1.0)
    x = np.array([[0.0, 0, 0], [1.0, 0, 0], [-12000.0, 0, 0]])
    v = np.array([[0.0, 0, 0], [0, v_circ, 0], [0, 0.0, 0]])
    energy, apo = enc.binding_to_interior(m, x, v, 1, G_AU_YR_MSUN)
    assert energy == pytest.approx(-G_AU_YR_MSUN * (1.0 + mj) / 2.0, rel=1e-12)
    assert apo == pytest.approx(1.0, rel=1e-9)
    # the outer body is judged against the star *and* the inner planet: at rest 12 000 AU out it is
    # bound, with apocentre its present distance from their centre of mass
    energy_out, apo_out = enc.binding_to_interior(m, x, v, 2, G_AU_YR_MSUN)
    com_inner = (1.0 * x[0] + mj * x[1]) / (1.0 + mj)
    v_com = (mj * v[1]) / (1.0 + mj)
    d = np.linalg.norm(x[2] - com_inner)
    expected = 0.5 * float(v_com @ v_com) - G_AU_YR_MSUN * (1.0 + 2 * mj) / d
    assert energy_out == pytest.approx(expected, rel=1e-12)
    assert apo_out == pytest.approx(d, rel=1e-6)


def test_star_pass_classification_order():
    rt27 = 2.7 * R_JUP_AU * (1 / MJUP_MSUN) ** (1 / 3)
    args = (1.0, R_SUN_AU, MJUP_MSUN, R_JUP_AU, 2.7)
    assert enc.classify_star_pass(0.5 * R_SUN_AU, *args) == "hit_star"
    assert enc.classify_star_pass(0.99 * rt27, *args) == "disrupted"
    assert enc.classify_star_pass(1.01 * rt27, *args) is None
    assert enc.star_contact_distance(1.0, R_SUN_AU, MJUP_MSUN, R_JUP_AU, 2.7) == pytest.approx(rt27)
    assert enc.star_contact_distance(1.0, R_SUN_AU, MJUP_MSUN, R_JUP_AU, 0.5) == R_SUN_AU + R_JUP_AU


def test_encounter_radii_cover_every_pair():
    masses, sizes = [1e-3, 5e-3, 2e-4], [1.0, 1.5, 2.4]
    radii = enc.encounter_radii(1.0, masses, sizes, margin=1.0)
    for i in range(3):
        for j in range(i + 1, 3):
            assert radii[i] + radii[j] >= mutual_hill_radius(1.0, masses[i], masses[j], sizes[i], sizes[j])


def test_pericentre_timescale_reduces_to_the_period_for_circular_orbits():
    assert enc.pericentre_timescale(G_AU_YR_MSUN, 1.0, 0.0) == pytest.approx(2 * math.pi / math.sqrt(G_AU_YR_MSUN))
    assert enc.pericentre_timescale(G_AU_YR_MSUN, 1.0, 0.9) < 0.05 * enc.pericentre_timescale(G_AU_YR_MSUN, 1.0, 0.0)


# --------------------------------------------------------------------------- ledger and checkpoint file
def test_ledger_round_trips_exactly_through_a_checkpoint(tmp_path):
    led = Ledger(chunks_done=3, e0=-1.234567890123e-3, l0=[0.1, -2e-17, 3.3], t_first_encounter=math.pi)
    led.book(1e-9 / 3, [1e-12, 0.0, -1e-13])
    led.fates["p1"] = FateEntry(2, 12.5, 0, 1e-3, -0.8, 3.9, 0.1, float("nan"), 2.0, 1e-3, 5e-4)
    led.radius["p1"] = 4.7e-4
    path = tmp_path / "x.ckpt"
    write_checkpoint(path, led, b"\x00binary\xff" * 10)
    back, blob = read_checkpoint(path)
    assert blob == b"\x00binary\xff" * 10
    assert back.to_json() == led.to_json()
    assert back.energy_removed == -1e-9 / 3 and back.fates["p1"].a == -0.8
    assert not list(tmp_path.glob("*.tmp*"))  # the temporary file was renamed away


def test_truncated_checkpoint_is_refused(tmp_path):
    path = tmp_path / "x.ckpt"
    write_checkpoint(path, Ledger(), b"abc")
    path.write_bytes(path.read_bytes()[:20])
    with pytest.raises(InputError, match="truncated"):
        read_checkpoint(path)

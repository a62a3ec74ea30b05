"""Integration of one system: two-body accuracy, the Gladman boundary, first encounters,
stopping rules, integrators, determinism and checkpoints.

Set-ups are invented systems (a 1 M_sun, 1 R_sun star with Jupiter-mass planets).
"""

import json
import math
import warnings
from dataclasses import asdict, replace
from pathlib import Path

import numpy as np
import pytest
from tight_trio import tight_trio_spec

from scatter_pop.constants import G_AU_YR_MSUN, MJUP_MSUN, R_JUP_AU, R_SUN_AU
from scatter_pop.engine.initial_conditions import InitialSystem, draw_system, spaced_semi_major_axes, true_anomaly
from scatter_pop.engine.integrate import integrate_initial, integrate_system
from scatter_pop.engine.outcome import EndReason, Fate
from scatter_pop.engine.rebound_run import SystemRun
from scatter_pop.engine.stability import hill_stable_circular, marchal_bozis_ratio, marchal_bozis_state_ratio
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import IntegrationSpec, OutcomeSpec, load_spec
from scatter_pop.store.schema import records_to_dataset, validate_dataset

MJ, RJ = MJUP_MSUN, R_JUP_AU
TINY = Path(__file__).resolve().parents[1] / "data" / "tiny.toml"


def pair(delta, phases=(0.0, 1.0), a1=1.0, e=(0.0, 0.0)):
    """Two Jupiters on circular coplanar orbits `delta` mutual Hill radii apart."""
    a = spaced_semi_major_axes(a1, [delta], [MJ, MJ], 1.0)
    return InitialSystem(
        1.0,
        R_SUN_AU,
        (MJ, MJ),
        (RJ, RJ),
        a,
        tuple(e),
        (0.0, 0.0),
        (0.0, 0.0),
        (0.0, 0.0),
        tuple(phases),
        seed=5,
        index=0,
    )


def same(rec1, rec2):
    """Bitwise equality of two records apart from the wall-clock time (floats via exact repr)."""
    d1, d2 = asdict(rec1), asdict(rec2)
    d1.pop("wall_seconds"), d2.pop("wall_seconds")
    return json.dumps(d1, sort_keys=True) == json.dumps(d2, sort_keys=True)


# --------------------------------------------------------------------------- frame and two-body
def test_simulation_starts_from_astrocentric_elements():
    ini = draw_system(load_spec(TINY), 2)
    sim = SystemRun(ini, IntegrationSpec(integrator="bs", end_time=1.0), OutcomeSpec(), None, True).sim
    star = sim.particles[0]
    for k in range(ini.count):
        o = sim.particles[f"p{k}"].orbit(primary=star)
        assert (o.a, o.e, o.inc) == pytest.approx((ini.a[k], ini.e[k], ini.inc[k]), rel=1e-12, abs=1e-14)
        assert math.remainder(o.M - ini.mean_anomaly[k], 2 * math.pi) == pytest.approx(0.0, abs=1e-10)
    com = sum(np.multiply(sim.particles[k].m, sim.particles[k].xyz) for k in range(sim.N))
    assert np.linalg.norm(com) < 1e-15  # centre-of-mass frame
    assert sim.G == G_AU_YR_MSUN


def test_lone_planet_keeps_its_orbit_for_a_thousand_orbits():
    # two-body problem: a and e constant, mean anomaly advancing at n = sqrt(G(M+m)/a^3) (Kepler)
    a, e, m0 = 1.3, 0.3, 0.7
    ini = InitialSystem(1.0, R_SUN_AU, (MJ,), (RJ,), (a,), (e,), (0.2,), (0.4,), (1.1,), (m0,))
    run = SystemRun(ini, IntegrationSpec(integrator="ias15", end_orbits=1000.0), OutcomeSpec(), None, True)
    rec = run.run()
    p = rec.planets[0]
    assert rec.end_reason == EndReason.END_TIME and p.fate == Fate.SURVIVED
    assert p.a_final == pytest.approx(a, rel=1e-9)
    assert p.e_final == pytest.approx(e, rel=1e-9)
    assert p.inc_final == pytest.approx(0.2, rel=1e-9)
    n = math.sqrt(G_AU_YR_MSUN * (1.0 + MJ) / a**3)
    f_kepler = true_anomaly(m0 + n * rec.t_end, e)
    f_now = run.sim.particles[1].orbit(primary=run.sim.particles[0]).f
    assert math.remainder(f_now - f_kepler, 2 * math.pi) == pytest.approx(0.0, abs=1e-8)
    assert rec.t_end >= 1000 * ini.inner_period()
    assert math.isnan(rec.t_first_encounter)


# --------------------------------------------------------------------------- Gladman boundary
def _phase_draws(n=10, seed=1):
    rng = np.random.default_rng(seed)
    return [tuple(2 * math.pi * rng.random(2)) for _ in range(n)]


def test_pairs_inside_the_gladman_boundary_meet_within_a_thousand_orbits():
    # Gladman 1993, Icarus 106, 247: circular pairs closer than 2 sqrt(3) R_H are not Hill stable and
    # in practice meet quickly; at Delta = 2.0 >= 9 of 10 phase draws come within 1 R_H in 10^3 orbits.
    hits = 0
    for phases in _phase_draws():
        ini = pair(2.0, phases)
        assert not hill_stable_circular(1.0, MJ, MJ, ini.a[0], ini.a[1])
        rec = integrate_initial(ini, IntegrationSpec(end_orbits=1000.0), OutcomeSpec(), reference=True)
        hits += rec.t_first_encounter <= 1000 * ini.inner_period()
    assert hits >= 9


@pytest.mark.slow
def test_pairs_outside_the_gladman_boundary_never_meet_in_ten_thousand_orbits():
    # Gladman 1993: Hill-stable pairs (Delta = 4.0 > 3.43 R_H for mu = 1e-3) can never get close.
    for phases in _phase_draws():
        ini = pair(4.0, phases)
        assert hill_stable_circular(1.0, MJ, MJ, ini.a[0], ini.a[1])
        run = SystemRun(ini, IntegrationSpec(integrator="ias15", end_orbits=1e4), OutcomeSpec(), None, True)
        m, x, v = run.arrays()
        assert marchal_bozis_state_ratio(m, x, v, G_AU_YR_MSUN) > 1.0
        rec = run.run()
        assert math.isnan(rec.t_first_encounter)
        assert [p.fate for p in rec.planets] == [Fate.SURVIVED, Fate.SURVIVED]
        assert abs(rec.energy_error) < 1e-12


@pytest.mark.parametrize("integrator, min_steps", [("ias15", 20), ("bs", 5)])
def test_first_encounter_time_matches_dense_sampling_within_one_step(integrator, min_steps):
    # the engine samples the separation at every integrator step end; a dense, independent sampling
    # (every P/1000, same definition: R_H,m from osculating astrocentric a) must agree to one step.
    ini = pair(2.0, (0.0, 2.0))
    run = SystemRun(ini, IntegrationSpec(integrator=integrator, end_orbits=20.0), OutcomeSpec(), None, True)
    with pytest.warns(RuntimeWarning, match="function pointers"):
        dense = run.sim.copy()  # no resolve function: no contacts
    dense.collision = "none"
    rec = run.run()
    p_in = ini.inner_period()
    t_dense, t = math.nan, 0.0
    while t < 20 * p_in:
        t += p_in / 1000
        dense.integrate(t)
        p1, p2, star = dense.particles[1], dense.particles[2], dense.particles[0]
        a1, a2 = p1.orbit(primary=star).a, p2.orbit(primary=star).a
        r_h = ((2 * MJ) / 3.0) ** (1 / 3) * 0.5 * (a1 + a2)
        if np.linalg.norm(np.subtract(p1.xyz, p2.xyz)) < r_h:
            t_dense = t
            break
    steps_per_orbit = rec.steps / (rec.t_end / p_in)
    assert min_steps < steps_per_orbit  # IAS15 takes > 20 steps an orbit, BS ~10
    assert abs(rec.t_first_encounter - t_dense) < 1.5 * p_in / steps_per_orbit + p_in / 1000


# --------------------------------------------------------------------------- stopping rules
def test_hill_stable_pair_stops_after_the_first_check():
    ini = pair(9.5)  # LHS/RHS = 1.11 for two Jupiters 9.5 R_H apart
    assert marchal_bozis_ratio(1.0, MJ, MJ, ini.a[0], ini.a[1], 0, 0) > 1.1
    rec = integrate_initial(ini, IntegrationSpec(end_orbits=1e5, check_orbits=50), OutcomeSpec())
    assert rec.end_reason == EndReason.HILL_STABLE
    assert rec.t_end == pytest.approx(50 * ini.inner_period(), rel=0.01)


def test_pair_inside_the_margin_is_not_stopped():
    ini = pair(3.8)
    ratio = marchal_bozis_ratio(1.0, MJ, MJ, ini.a[0], ini.a[1], 0, 0)
    assert 1.0 < ratio < IntegrationSpec().hill_margin  # stable, but not by the default margin
    rec = integrate_initial(ini, IntegrationSpec(end_orbits=200, check_orbits=50), OutcomeSpec())
    assert rec.end_reason == EndReason.END_TIME
    rec = integrate_initial(ini, IntegrationSpec(end_orbits=200, check_orbits=50, hill_margin=1.0), OutcomeSpec())
    assert rec.end_reason == EndReason.HILL_STABLE


def test_reference_mode_never_stops_early():
    ini = pair(6.0)
    rec = integrate_initial(ini, IntegrationSpec(end_orbits=200, check_orbits=50), OutcomeSpec(), reference=True)
    assert rec.end_reason == EndReason.END_TIME and rec.t_end >= 200 * ini.inner_period()
    rec = integrate_initial(
        ini, IntegrationSpec(end_orbits=200, check_orbits=50, stop_when_settled=False), OutcomeSpec()
    )
    assert rec.end_reason == EndReason.END_TIME


# --------------------------------------------------------------------------- integrators
@pytest.mark.parametrize(
    "integrator, tolerance", [("ias15", 1e-12), ("bs", 1e-8), ("trace", 1e-3), ("mercurius", 1e-2)]
)
def test_each_integrator_runs_a_scattering_system(integrator, tolerance):
    spec = load_spec(TINY)
    spec = replace(spec, integration=replace(spec.integration, integrator=integrator, end_time=300.0))
    rec = integrate_system(spec, 3)
    assert rec.integrator == integrator and rec.steps > 0 and rec.wall_seconds > 0
    assert abs(rec.energy_error) < tolerance
    assert rec.t_first_encounter == pytest.approx(37.4, abs=1.0)  # same first encounter for all


def test_hybrid_step_follows_the_shortest_orbit():
    # dt = 2 pi sqrt(q^3 / (G M (1+e))) / steps_per_orbit of the most demanding orbit
    ini = InitialSystem(
        1.0, R_SUN_AU, (MJ, MJ), (RJ, RJ), (1.0, 5.0), (0.0, 0.9), (0.0, 0.0), (0.0, 0.0), (0.0, 0.0), (0.0, math.pi)
    )
    run = SystemRun(
        ini, IntegrationSpec(integrator="trace", end_time=1.0, steps_per_orbit=50), OutcomeSpec(), None, True
    )
    q, e = 0.5, 0.9
    expected = 2 * math.pi * math.sqrt(q**3 / (G_AU_YR_MSUN * (1 + MJ) * (1 + e))) / 50
    assert run.sim.dt == pytest.approx(expected, rel=1e-6)
    assert run.sim.dt < ini.inner_period() / 50


# --------------------------------------------------------------------------- determinism
def test_same_spec_and_index_give_the_bitwise_same_record():
    spec = load_spec(TINY)
    r1, r2 = integrate_system(spec, 1), integrate_system(load_spec(TINY), 1)
    assert same(r1, r2)
    r3 = integrate_system(spec, 2)
    assert r3.seed != r1.seed and r3.planets[0].e_initial != r1.planets[0].e_initial


@pytest.mark.parametrize("integrator, end_time, check, index", [("ias15", 80.0, 20, 2), ("trace", 60.0, 5, 1)])
def test_capped_run_continued_from_checkpoint_equals_the_uncapped_run(tmp_path, integrator, end_time, check, index):
    # REBOUND binary + ledger restart; chunk ends fixed in time, exact_finish_time = 0
    spec = tight_trio_spec(integrator, end_time, check)
    whole = integrate_system(spec, index)
    assert whole.count(Fate.MERGED) >= 1  # a merger happens on the way
    capped = replace(spec, integration=replace(spec.integration, wall_seconds_max=1e-9))
    path = tmp_path / "system1.ckpt"
    segments = []
    rec = integrate_system(capped, index, checkpoint_path=path)
    while rec.end_reason == EndReason.CAPPED:
        assert path.exists()
        segments.append(rec.t_end)
        rec = integrate_system(capped, index, checkpoint_path=path)
    assert len(segments) >= 3
    merge_times = [p.t_fate for p in whole.planets if p.fate == Fate.MERGED]
    assert any(segments[0] < t < segments[-1] for t in merge_times)  # the ledger crossed a checkpoint
    assert same(rec, whole)
    # removed once the system settled; kept as its final state when it stopped at the end time
    assert path.exists() == (rec.end_reason == EndReason.END_TIME)
    assert rec.wall_seconds > 0


def test_continuation_does_not_trust_rebound_names_after_a_reload(tmp_path):
    """rebound 5.2.2: a simulation rebuilt from a binary snapshot can see its particle names
    change once other simulations in the process are freed (seen in Dask workers running many
    systems: ['star', 'p1', 'p1']). The engine keeps its own list of who is who; here every
    checkpoint's REBOUND names are scrambled, and the continued record must still equal the
    uncapped one."""
    import rebound

    from scatter_pop.engine.ledger import read_checkpoint, write_checkpoint

    spec = tight_trio_spec("ias15", 80.0, 20)
    whole = integrate_system(spec, 2)
    assert whole.count(Fate.MERGED) >= 1
    capped = replace(spec, integration=replace(spec.integration, wall_seconds_max=1e-9))
    path = tmp_path / "system2.ckpt"
    rec = integrate_system(capped, 2, checkpoint_path=path)
    while rec.end_reason == EndReason.CAPPED:
        ledger, blob = read_checkpoint(path)
        with warnings.catch_warnings():  # no function pointers are needed to rename
            warnings.filterwarnings("ignore", message="You have to reset function pointers")
            sim = rebound.Simulation(blob)
        names = [p.name for p in sim.particles]
        for particle, name in zip(sim.particles, names[::-1]):  # what a corrupted reload looks like
            particle.name = name
        write_checkpoint(path, ledger, sim.__reduce__()[1][0])
        rec = integrate_system(capped, 2, checkpoint_path=path)
    assert same(rec, whole)


def test_checkpoint_of_another_system_is_refused(tmp_path):
    spec = tight_trio_spec("ias15", 80.0, 20)
    capped = replace(spec, integration=replace(spec.integration, wall_seconds_max=1e-9))
    path = tmp_path / "c.ckpt"
    assert integrate_system(capped, 0, checkpoint_path=path).end_reason == EndReason.CAPPED
    with pytest.raises(InputError, match="another system"):
        integrate_system(capped, 1, checkpoint_path=path)
    path.write_bytes(b"not a checkpoint at all")
    with pytest.raises(InputError, match="not a scatter_pop checkpoint"):
        integrate_system(capped, 0, checkpoint_path=path)


def test_records_fill_the_dataset_schema():
    spec = load_spec(TINY)
    records = [integrate_system(spec, i) for i in range(2)]
    ds = records_to_dataset(records, spec.planets.count)
    validate_dataset(ds)
    assert list(ds["seed"].values) == [r.seed for r in records]
    assert np.all(ds["steps"].values > 0)

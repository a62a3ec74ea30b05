"""The taylor back end (heyoka batch mode): determinism across lanes and companions, two-body
accuracy, fates, the Gladman boundary, energy books, and agreement with REBOUND IAS15.

Set-ups are invented systems (tests/test_fates.py, tests/tight_trio.py); expected values come from
two-body mechanics, the sources named beside each check, or REBOUND's IAS15 (Rein & Spiegel 2015,
MNRAS 446, 1424), a reference library, run on the same initial conditions.
"""

import json
import math
from dataclasses import asdict, replace

import numpy as np
import pytest
from ensemble_helpers import spec_text

heyoka = pytest.importorskip("heyoka")

from test_fates import head_on, period, plunger, system, wanderer  # noqa: E402

from scatter_pop.constants import G_AU_YR_MSUN, MJUP_MSUN, R_JUP_AU  # noqa: E402
from scatter_pop.engine.backends.taylor import LaneDriver, LaneSystem, integrate_lanes  # noqa: E402
from scatter_pop.engine.initial_conditions import InitialSystem, draw_system, spaced_semi_major_axes  # noqa: E402
from scatter_pop.engine.integrate import integrate_initial  # noqa: E402
from scatter_pop.engine.outcome import EndReason, Fate  # noqa: E402
from scatter_pop.engine.stability import hill_stable_circular, tidal_disruption_radius  # noqa: E402
from scatter_pop.engine.taylor_lanes import LaneIntegrator, lane_integrator  # noqa: E402
from scatter_pop.errors import InputError  # noqa: E402
from scatter_pop.spec.reader import IntegrationSpec, OutcomeSpec, parse_spec  # noqa: E402

MJ, RJ = MJUP_MSUN, R_JUP_AU
G = G_AU_YR_MSUN


def same(rec1, rec2):
    """Bitwise equality of two records apart from the wall-clock time and the lane count that ran them
    (floats via exact repr)."""
    d1, d2 = asdict(rec1), asdict(rec2)
    for d in (d1, d2):
        d.pop("wall_seconds"), d.pop("lanes")
    return json.dumps(d1, sort_keys=True) == json.dumps(d2, sort_keys=True)


def taylor_systems(spec, indices, lanes=None, **kw):
    initials = [draw_system(spec, int(i)) for i in indices]
    return integrate_lanes(initials, spec.integration, spec.outcomes, lanes=lanes, **kw)


def taylor(initials, end_time, reference=False, lanes=8, **integ):
    return integrate_lanes(
        initials,
        IntegrationSpec(integrator="taylor", end_time=end_time, **integ),
        OutcomeSpec(),
        reference=reference,
        lanes=lanes,
    )


def pair(delta, phases, a1=1.0):
    """Two Jupiters on circular coplanar orbits `delta` mutual Hill radii apart."""
    a = spaced_semi_major_axes(a1, [delta], [MJ, MJ], 1.0)
    return InitialSystem(
        1.0,
        0.00465,
        (MJ, MJ),
        (RJ, RJ),
        a,
        (0.0, 0.0),
        (0.0, 0.0),
        (0.0, 0.0),
        (0.0, 0.0),
        tuple(phases),
        seed=5,
        index=0,
    )


def phase_draws(n=10, seed=1):
    rng = np.random.default_rng(seed)
    return [tuple(2 * math.pi * rng.random(2)) for _ in range(n)]


# --------------------------------------------------------------------------- determinism
# Invented set-up: three 3 M_J planets with inflated 4 R_J radii, 2.0 mutual Hill radii apart from 1 AU
# (inside the Gladman 1993 boundary), a 20 R_sun star and an 8 AU ejection distance, checked every 5
# orbits: mergers, Hill-stable pairs and planets left in tens of years.  Set-up choices, not check values;
# the tolerance is pinned so that the set-up keeps its events whatever the default (the Dask-level
# tests in tests/ensemble/test_taylor_runs.py run at the default).
TRIO_TEXT = """
[run]
seed = 11
systems = 16
[star]
mass = 1.0
radius = 20.0
[planets]
count = 3
mass = 3.0
a_inner = 1.0
spacing = 2.0
e_sigma = 0.1
inc_sigma = 1.0
radius = 4.0
[integration]
integrator = "taylor"
taylor_tolerance = 1e-13
end_time = 100.0
ejection_distance = 8.0
check_orbits = 5
"""
TRIO = parse_spec(TRIO_TEXT)
PICKED = (0, 2, 8, 11)


@pytest.fixture(scope="module")
def trio_alone():
    return {i: taylor_systems(TRIO, [i])[0] for i in PICKED}


def test_trio_has_events_to_be_independent_of(trio_alone):
    # the set-up is only a test of determinism if the systems lose planets on the way
    assert sum(r.count(Fate.MERGED) + r.count(Fate.EJECTED) for r in trio_alone.values()) >= 4
    assert {r.end_reason for r in trio_alone.values()} >= {EndReason.ONE_PLANET, EndReason.HILL_STABLE}


def test_record_is_the_same_among_companions_in_any_lane(trio_alone):
    # common practice: a system's result depends only on the spec and its index
    many = list(range(16))  # more systems than lanes: refills
    recs = taylor_systems(TRIO, many)
    back = taylor_systems(TRIO, many[::-1])[::-1]  # other lane positions and companions
    for i, rec in trio_alone.items():
        assert same(rec, recs[i]) and same(rec, back[i])


def test_record_is_the_same_with_four_and_eight_lanes(trio_alone):
    recs = taylor_systems(TRIO, [2, 0, 5, 8, 11, 3], lanes=4)
    assert all(same(trio_alone[i], rec) for i, rec in zip([2, 0, 5, 8, 11, 3], recs) if i in PICKED)


def test_record_is_the_same_beside_systems_that_collide_or_leave_early(trio_alone):
    early = [head_on(), plunger(0.002), wanderer(1.05, -100.0)]  # merger, star hit, ejection in years
    integ = replace(TRIO.integration, ejection_distance=100.0)
    recs = integrate_lanes(early + [draw_system(TRIO, 2)], integ, TRIO.outcomes)
    assert recs[0].count(Fate.MERGED) == 1 and recs[1].planets[0].fate == Fate.HIT_STAR
    assert recs[2].planets[1].fate == Fate.EJECTED
    assert same(trio_alone[2], recs[3])


def test_capped_system_continues_bit_for_bit(tmp_path, trio_alone):
    # a tiny wall budget caps every system at its first chunk end; continuing from the checkpoints
    # again and again must end with the uncapped records
    paths = {i: tmp_path / f"c{i}.ckpt" for i in PICKED}
    done = {}
    for _ in range(400):
        todo = [i for i in PICKED if i not in done]
        if not todo:
            break
        recs = taylor_systems(TRIO, todo, checkpoint_paths=[paths[i] for i in todo], budgets=[1e-9] * len(todo))
        for i, rec in zip(todo, recs):
            if rec.end_reason == EndReason.CAPPED:
                assert paths[i].exists()
            else:
                done[i] = rec
    assert len(done) == len(PICKED)
    for i in PICKED:  # the state of a system stopped at the end time is kept (it may be carried further)
        assert same(trio_alone[i], done[i])
        assert paths[i].exists() == (done[i].end_reason == EndReason.END_TIME)


@pytest.mark.parametrize("early", ["end_time = 37.3", "end_orbits = 30.0"])  # inside a chunk; on a chunk end
def test_raised_end_time_continues_as_the_later_run_from_the_start(tmp_path, trio_alone, early, monkeypatch):
    # common practice (reproducibility): a state stopped at an earlier end time, carried to a later one
    # from its checkpoint, ends with the record of the run made with the later end time from the start
    # (the first-encounter radii of the chunk it stopped in are kept with the state), and only the
    # steps after the earlier end time are integrated again
    before = parse_spec(TRIO_TEXT.replace("end_time = 100.0", early))
    paths = [tmp_path / f"e{i}.ckpt" for i in PICKED]
    first = taylor_systems(before, PICKED, checkpoint_paths=paths)
    stopped = [k for k, rec in enumerate(first) if rec.end_reason == EndReason.END_TIME]
    assert len(stopped) >= 2 and all(paths[k].exists() for k in stopped)
    assert all(first[k].t_end >= first[k].t_limit for k in stopped)  # on the first step past it
    taken = []
    propagate = LaneIntegrator.propagate

    def counting(self, targets, real, *args):
        hits, steps, ok = propagate(self, targets, real, *args)
        taken.append(sum(n for n, filled in zip(steps, real) if filled))
        return hits, steps, ok

    monkeypatch.setattr(LaneIntegrator, "propagate", counting)
    again = taylor_systems(TRIO, [PICKED[k] for k in stopped], checkpoint_paths=[paths[k] for k in stopped])
    for k, rec in zip(stopped, again):
        assert same(trio_alone[PICKED[k]], rec)
    assert sum(taken) == sum(rec.steps for rec in again) - sum(first[k].steps for k in stopped)


def test_checkpoint_of_another_system_is_refused(tmp_path):
    path = tmp_path / "c.ckpt"
    rec = taylor_systems(TRIO, [0], checkpoint_paths=[path], budgets=[1e-9])[0]
    assert rec.end_reason == EndReason.CAPPED
    with pytest.raises(InputError, match="another system"):
        taylor_systems(TRIO, [1], checkpoint_paths=[path])


def test_event_only_parameters_leave_the_trajectory_unchanged():
    # the scaled event functions keep out of heyoka's step-size control (see taylor_lanes), so
    # switching the first-encounter event off (its parameter to 0) must not move the lane at all
    li = lane_integrator(3, 8, 1e-13)
    s = LaneSystem(pair(2.0, (0.0, 2.0)), IntegrationSpec(end_time=10.0), OutcomeSpec(), None, True)
    hill = [slot.par for slot in li.slots if slot.kind == "hill"][0]
    states = []
    for value in (0.0, 0.1, 5.0):
        pars = s.pars(li.slots)
        pars[hill] = value
        for lane in range(8):
            li.write(lane, s.x, s.v, (0.0, 0.0), pars)
        li.propagate(np.full(8, 10.0), np.zeros(8, bool))
        states.append(li.ta.state.copy())
    assert np.array_equal(states[0], states[1]) and np.array_equal(states[0], states[2])


def test_one_lane_is_refused():
    with pytest.raises(InputError, match="lanes"):
        taylor([head_on()], 1.0, lanes=1)


# --------------------------------------------------------------------------- two-body and merger
def test_lone_planet_keeps_its_orbit_for_a_thousand_orbits():
    # Kepler two-body problem: a and e constant (common practice)
    a, e = 1.3, 0.3
    ini = InitialSystem(1.0, 0.00465, (MJ,), (RJ,), (a,), (e,), (0.2,), (0.4,), (1.1,), (0.7,))
    rec = taylor([ini], 1000.0 * ini.inner_period(), reference=True)[0]
    p = rec.planets[0]
    assert rec.end_reason == EndReason.END_TIME and p.fate == Fate.SURVIVED
    assert p.a_final == pytest.approx(a, rel=1e-9) and p.e_final == pytest.approx(e, rel=1e-9)
    assert p.inc_final == pytest.approx(0.2, rel=1e-9)


def test_head_on_merger_conserves_mass_and_momentum():
    integ = IntegrationSpec(integrator="taylor", end_time=5.0)
    s = LaneSystem(head_on(), integ, OutcomeSpec(), None, True)
    p_before = (s.m[:, None] * s.v).sum(axis=0)
    scale = MJ * 2 * math.pi * math.sqrt(1 / 5.0)  # planet momentum scale, M_sun AU/yr
    LaneDriver(8, 1e-13).run([s])
    rec = s.record
    p0, p1 = rec.planets
    assert (p0.fate, p1.fate) == (Fate.SURVIVED, Fate.MERGED) and p1.merged_into == 0
    assert abs(p0.mass_final - 3 * MJ) <= 1e-12 * MJ and p1.mass_final == MJ
    assert p0.radius_final == pytest.approx(RJ * 2 ** (1 / 3), rel=1e-14)  # volume conserved
    assert len(s.m) == 2
    assert np.linalg.norm((s.m[:, None] * s.v).sum(axis=0) - p_before) < 1e-12 * scale
    t_meet = 0.25 / (2 * math.pi / period(5.0))  # two-body: each moves half the 0.5 rad gap
    assert t_meet - 0.01 < p1.t_fate < t_meet
    assert abs(rec.energy_error) < 1e-10 and rec.angmom_error < 1e-10


# --------------------------------------------------------------------------- fates
def test_ejection_star_hit_and_disruption_are_classified():
    recs = taylor(
        [plunger(0.002), plunger(0.010), wanderer(1.05, -100.0), wanderer(0.95, 100.0)], 600.0, ejection_distance=100.0
    )
    hit, disrupted, ejected, bound = recs
    half = 0.5 * period(2.0, m=MJ)  # apocentre to pericentre (two-body)
    assert hit.planets[0].fate == Fate.HIT_STAR and hit.planets[0].t_fate == pytest.approx(half, abs=2e-3)
    assert hit.planets[0].q_final == pytest.approx(0.002, rel=1e-3)
    # 2.7 r_t = 0.0131 AU (Guillochon, Ramirez-Ruiz & Lin 2011, ApJ 732, 74; REFERENCES.md, 2.7 from memory)
    assert disrupted.planets[0].fate == Fate.DISRUPTED
    out = ejected.planets[1]
    assert out.fate == Fate.EJECTED and out.a_final < 0 and out.e_final > 1
    a, e = 100.0, 1.05  # two-body hyperbola from q = 5 AU to r = 100 AU
    big_f = math.acosh((1 + 100.0 / a) / e)
    assert out.t_fate == pytest.approx(math.sqrt(a**3 / G) * (e * math.sinh(big_f) - big_f), rel=0.03)
    assert bound.planets[1].fate == Fate.SURVIVED  # e = 0.95: beyond 100 AU but bound
    for rec in recs:
        assert abs(rec.energy_error) < 1e-9


@pytest.mark.parametrize("factor, fate", [(0.98, Fate.DISRUPTED), (1.02, Fate.SURVIVED)])
def test_disruption_boundary_is_sharp(factor, fate):
    limit = float(tidal_disruption_radius(MJ, RJ, 1.0, 2.7))
    rec = taylor([plunger(factor * limit)], 0.75 * period(2.0, m=MJ), reference=True)[0]
    assert rec.planets[0].fate == fate


def test_energy_books_close_through_a_merger_and_an_ejection():
    initial = system(
        [
            dict(m=2 * MJ, a=5.0, e=0.0),
            dict(m=MJ, a=5.0, e=0.0, inc=math.pi, M=-0.5),
            dict(m=MJ, a=-40.0, e=1.2, omega=2.0),
        ]
    )
    rec = taylor([initial], 3000.0, ejection_distance=60.0)[0]
    assert [p.fate for p in rec.planets] == [Fate.SURVIVED, Fate.MERGED, Fate.EJECTED]
    assert rec.end_reason == EndReason.ONE_PLANET
    assert abs(rec.energy_error) < 1e-8 and rec.angmom_error < 1e-8


# --------------------------------------------------------------------------- Gladman boundary
def test_pairs_inside_the_gladman_boundary_meet_within_a_thousand_orbits():
    # Gladman 1993, Icarus 106, 247: circular pairs closer than 2 sqrt(3) R_H are not Hill stable;
    # at Delta = 2.0, >= 9 of 10 phase draws come within 1 R_H in 10^3 orbits
    pairs = [pair(2.0, ph) for ph in phase_draws()]
    assert not any(hill_stable_circular(1.0, MJ, MJ, *p.a) for p in pairs)
    recs = taylor(pairs, 1000.0 * pairs[0].inner_period(), reference=True)
    assert sum(r.t_first_encounter <= 1000 * pairs[0].inner_period() for r in recs) >= 9


@pytest.mark.slow
def test_pairs_outside_the_gladman_boundary_never_meet_in_ten_thousand_orbits():
    # Gladman 1993: Hill-stable pairs (Delta = 4.0 > 3.43 R_H for mu = 1e-3) can never get close
    pairs = [pair(4.0, ph) for ph in phase_draws()]
    assert all(hill_stable_circular(1.0, MJ, MJ, *p.a) for p in pairs)
    recs = taylor(pairs, 1e4 * pairs[0].inner_period(), reference=True)
    for rec in recs:
        assert math.isnan(rec.t_first_encounter)
        assert [p.fate for p in rec.planets] == [Fate.SURVIVED, Fate.SURVIVED]
        assert abs(rec.energy_error) < 1e-9  # the benchmark's bar for the default setting (issue 12)


# --------------------------------------------------------------------------- against REBOUND IAS15
def test_fates_and_times_agree_with_ias15():
    # tolerance on fate times: IAS15 finds a contact at a step end (~1e-3 yr near contact here) and an
    # escape at the end of a step far out (~0.3 yr at 100 AU), the taylor events at the crossing itself
    cases = [
        (head_on(), 5.0, {}, 1e-3),
        (plunger(0.002), 10.0, {}, 1e-3),
        (plunger(0.010), 10.0, {}, 1e-3),
        (wanderer(1.05, -100.0), 2000.0, dict(ejection_distance=100.0), 1e-2),
    ]
    for ini, end, extra, tol in cases:
        ref = integrate_initial(ini, IntegrationSpec(integrator="ias15", end_time=end, **extra), OutcomeSpec())
        rec = taylor([ini], end, **extra)[0]
        assert [p.fate for p in rec.planets] == [p.fate for p in ref.planets]
        assert rec.end_reason == ref.end_reason
        for p, q in zip(rec.planets, ref.planets):
            if p.fate != Fate.SURVIVED:
                assert p.t_fate <= q.t_fate + 1e-9  # the event is not later than IAS15's step
                assert p.t_fate == pytest.approx(q.t_fate, rel=tol, abs=1e-3)
            else:
                # the merged star's recoil depends on the contact time, so the survivor's orbit about
                # it agrees to ~(m_p/M*) x the contact-time difference over the orbital time scale
                assert p.a_final == pytest.approx(q.a_final, rel=1e-6)
                assert p.e_final == pytest.approx(q.e_final, rel=1e-4, abs=1e-6)


def test_first_encounter_time_agrees_with_ias15_within_its_steps():
    # IAS15 samples the separation at step ends (tests/test_integrate.py); the event time is exact,
    # so IAS15's time is a little later; both use one mutual Hill radius from osculating a
    pairs = [pair(2.0, (0.0, 2.0)), pair(2.0, (0.0, 3.0)), pair(2.5, (0.0, 1.0))]
    recs = taylor(pairs, 50.0, reference=True)
    for ini, rec in zip(pairs, recs):
        ref = integrate_initial(ini, IntegrationSpec(integrator="ias15", end_time=50.0), OutcomeSpec(), reference=True)
        assert not math.isnan(ref.t_first_encounter)
        assert rec.t_first_encounter == pytest.approx(ref.t_first_encounter, abs=0.05 * ini.inner_period())


@pytest.mark.slow
def test_ejection_leaves_the_survivor_inside_the_parabolic_bound():
    # ../shared/REFERENCES.md, "Energy bookkeeping of an ejection" (derived, standard argument): the
    # survivor obeys a_f <= G M* m_s / (2 |E_0|) (tests/test_ejection_energy.py gives the derivation and
    # the 1e-4 allowance for the tidal coupling at the ejection distance); same invented systems, three
    # of its seed in one batch: 2 and 6 eject on this path, 1 merges at once and frees its lane (chaotic:
    # which of them eject differs from the REBOUND run; the others run the whole 2e5 yr, too long here)
    from test_ejection_energy import SPEC, initial_energy

    spec = parse_spec(SPEC.replace('integrator = "bs"', 'integrator = "taylor"'))
    recs = taylor_systems(spec, (1, 2, 6))
    ejections = 0
    for rec in recs:
        # an unbooked ejection would show as |E_ej/E_0| ~ 1e-2; ~2e6 steps at tol 1e-13 give ~1e-8
        assert abs(rec.energy_error) < 1e-7 and rec.angmom_error < 1e-7
        if sorted(p.fate for p in rec.planets) != [Fate.SURVIVED, Fate.EJECTED]:
            continue
        ejections += 1
        ini = draw_system(spec, rec.index)
        survivor = next(p for p in rec.planets if p.fate == Fate.SURVIVED)
        bound = G * ini.star_mass * survivor.mass_final / (2 * abs(initial_energy(ini)))
        assert survivor.a_final <= bound * (1 + 1e-4)
    assert ejections >= 1


# --------------------------------------------------------------------------- heyoka missing
SPEC_TAYLOR = spec_text(systems=2, end_time=100.0).replace('integrator = "ias15"\n', "")  # the default integrator


@pytest.fixture
def heyoka_missing(monkeypatch):
    """This Python as if heyoka were not installed (``import heyoka`` raises ImportError)."""
    import sys

    from scatter_pop.spec import reader

    monkeypatch.setitem(sys.modules, "heyoka", None)
    monkeypatch.setattr(reader, "_NOTICES", set())


def test_taylor_asked_for_without_heyoka_is_one_line_naming_the_key_and_the_alternatives(heyoka_missing):
    with pytest.raises(InputError) as err:
        parse_spec(SPEC_TAYLOR + 'integrator = "taylor"\n')
    line = str(err.value)
    assert "\n" not in line and line.startswith("integration.integrator = 'taylor': unavailable")
    assert "ias15" in line and "bs" in line


def test_cli_refuses_a_taylor_spec_without_heyoka_with_exit_2(heyoka_missing, tmp_path, capsys):
    from scatter_pop.cli.main import main

    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC_TAYLOR + 'integrator = "taylor"\n')
    assert main(["check", str(spec)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "integration.integrator" in err[0] and "Traceback" not in err[0]


def test_default_falls_back_to_bs_with_a_one_line_notice_without_heyoka(heyoka_missing, capsys):
    assert IntegrationSpec().integrator == "taylor"  # the default this fallback is for
    for _ in range(2):
        assert parse_spec(SPEC_TAYLOR).integration.integrator == "bs"
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("notice:") and "'bs'" in err[0]  # said once per process

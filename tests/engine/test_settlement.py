"""Settlement classes, unbound planets at the end, and carrying a run to a later end time.

Check values: Petrovich (2015, ApJ 808, 120) critical a_out/a_in for mu = 1e-3, e = 0: 1.4378, and
1.7990 for e_in = e_out = 0.1 (../shared/REFERENCES.md, derived from his criterion); the exact Hill
criterion of Marchal & Bozis (1982, Celest. Mech. 26, 311) depends only on the total energy and
angular momentum, which are conserved between planet losses, so a pair that starts Hill unstable
keeps its ratio (to the integration error) and can never become Hill stable.  Records are hand-made
(tests/records.py) unless integrated here; the set-ups are invented systems.
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, replace

import numpy as np
import pytest
from ensemble_helpers import spec_text
from records import dataset, planet, system

from scatter_pop.constants import MJUP_MSUN, R_JUP_AU, R_SUN_AU
from scatter_pop.engine.initial_conditions import InitialSystem, draw_system
from scatter_pop.engine.integrate import integrate_initial, integrate_system
from scatter_pop.engine.outcome import EndReason, Fate, Settlement
from scatter_pop.engine.rebound_run import SystemRun
from scatter_pop.engine.settlement import GAP_HILL, mutual_inclination, orbit_gap_hill
from scatter_pop.engine.stability import marchal_bozis_state_ratio, mutual_hill_radius
from scatter_pop.spec.reader import IntegrationSpec, OutcomeSpec, parse_spec
from scatter_pop.store.schema import survivor_mask

MU = 1e-3
M_MU = MU / MJUP_MSUN  # a planet of mass ratio 1e-3 around a 1 M_sun star, in M_J


def pair_record(ratio, *, e=(0.0, 0.0), gap=5.0, mass_mj=M_MU, inc=(0.05, 0.05), hill=0.99, reason=EndReason.END_TIME):
    """A two-planet record stopped at the end time with a_out/a_in = ratio."""
    return system(
        0,
        [
            planet(mass_mj, 5.0, e[0], inc=inc[0]),
            planet(mass_mj, 5.0 * ratio, e[1], inc=inc[1]),
        ],
        reason=reason,
        hill_ratio=hill,
        recent_gap=gap,
    )


# --------------------------------------------------------------------------- the classes
@pytest.mark.parametrize(
    "reason, fates, expected",
    [
        (EndReason.ONE_PLANET, (Fate.SURVIVED, Fate.EJECTED), Settlement.SETTLED),
        (EndReason.NO_PLANETS, (Fate.HIT_STAR, Fate.EJECTED), Settlement.SETTLED),
        (EndReason.HILL_STABLE, (Fate.SURVIVED, Fate.SURVIVED), Settlement.SETTLED),
        # reference mode runs one-planet systems to the end time: still final
        (EndReason.END_TIME, (Fate.SURVIVED, Fate.MERGED), Settlement.SETTLED),
        # a planet present but unbound is on its way out: a snapshot
        (EndReason.END_TIME, (Fate.SURVIVED, Fate.UNBOUND), Settlement.UNSETTLED),
        # three planets left: no criterion applies
        (EndReason.END_TIME, (Fate.SURVIVED, Fate.SURVIVED, Fate.SURVIVED), Settlement.UNSETTLED),
    ],
)
def test_class_follows_what_is_left(reason, fates, expected):
    planets = [planet(1.0, 2.0 + 3 * k, 0.1, fate=f) for k, f in enumerate(fates)]
    assert system(0, planets, reason=reason).settlement == expected


def test_failed_system_has_no_class_in_the_dataset():
    ds = dataset([system(0, [planet(), planet(a=8.0)], reason=EndReason.FAILED)], 2)
    assert int(ds["settlement"].values[0]) == -1


def test_exact_hill_ratio_above_the_margin_settles_a_pair_stopped_at_the_end_time():
    # the engine checks at chunk boundaries; an end time inside a chunk leaves the ratio to the class
    assert pair_record(1.2, hill=1.02).settlement == Settlement.SETTLED
    assert pair_record(1.2, hill=1.0099).settlement == Settlement.UNSETTLED  # below the 1.01 margin


def test_petrovich_boundary_for_circular_and_eccentric_pairs():
    # Petrovich (2015): critical a_out/a_in = 1.4378 at mu = 1e-3, e = 0 (../shared/REFERENCES.md)
    assert pair_record(1.4378 * 1.002).settlement == Settlement.LIKELY_STABLE
    assert pair_record(1.4378 * 0.998).settlement == Settlement.UNSETTLED
    # and 1.7990 for e_in = e_out = 0.1
    assert pair_record(1.7990 * 1.002, e=(0.1, 0.1)).settlement == Settlement.LIKELY_STABLE
    assert pair_record(1.7990 * 0.998, e=(0.1, 0.1)).settlement == Settlement.UNSETTLED


def test_likely_stable_needs_the_range_of_validity_and_a_quiet_recent_past():
    wide = 2.0  # well beyond the Petrovich boundary
    assert pair_record(wide).settlement == Settlement.LIKELY_STABLE
    # mass ratios outside his fits (1e-4 .. 1e-2)
    assert pair_record(wide, mass_mj=2e-2 / MJUP_MSUN).settlement == Settlement.UNSETTLED
    assert pair_record(wide, mass_mj=5e-5 / MJUP_MSUN).settlement == Settlement.UNSETTLED
    # mutual inclination above 40 degrees (both nodes 0: the angle is the difference of inclinations)
    assert pair_record(wide, inc=(0.0, math.radians(41.0))).settlement == Settlement.UNSETTLED
    assert pair_record(wide, inc=(0.0, math.radians(39.0))).settlement == Settlement.LIKELY_STABLE
    # an approach within GAP_HILL mutual Hill radii at one of the last checks, or no full window
    assert pair_record(wide, gap=GAP_HILL * 0.99).settlement == Settlement.UNSETTLED
    assert pair_record(wide, gap=math.nan).settlement == Settlement.UNSETTLED


def test_orbit_gap_and_mutual_inclination_helpers():
    # gap q_out - Q_in = 8*(1-0.2) - 5*(1.1) = 0.9 AU, in mutual Hill radii of the pair
    r_h = float(mutual_hill_radius(1.0, 1e-3, 2e-3, 5.0, 8.0))
    assert orbit_gap_hill(1.0, 2e-3, 1e-3, 8.0, 0.2, 5.0, 0.1) == pytest.approx(0.9 / r_h, rel=1e-12)
    # the angle between orbit normals from their vectors (numpy), common practice
    i1, n1, i2, n2 = 0.3, 1.0, 0.5, 2.5
    v = [
        np.array([math.sin(i) * math.sin(n), -math.sin(i) * math.cos(n), math.cos(i)]) for i, n in ((i1, n1), (i2, n2))
    ]
    assert mutual_inclination(i1, n1, i2, n2) == pytest.approx(math.acos(v[0] @ v[1]), rel=1e-12)


# --------------------------------------------------------------------------- the engine
def test_hill_unstable_pair_keeps_its_ratio_and_is_unsettled():
    spec = parse_spec(spec_text(systems=2, end_time=300.0))
    initial = draw_system(spec, 0)
    sim = SystemRun(initial, spec.integration, spec.outcomes, None, False).sim
    m = np.array([p.m for p in sim.particles])
    x = np.array([p.xyz for p in sim.particles])
    v = np.array([p.vxyz for p in sim.particles])
    start = marchal_bozis_state_ratio(m, x, v, sim.G)
    rec = integrate_system(spec, 0)
    assert start < 1.0  # 2.5 mutual Hill radii: inside the Gladman (1993) boundary
    assert rec.end_reason == EndReason.END_TIME and rec.settlement == Settlement.UNSETTLED
    # Marchal & Bozis: a function of the conserved E and L only
    assert rec.hill_ratio == pytest.approx(start, rel=1e-8)
    assert rec.t_limit == 300.0


def test_planet_unbound_at_the_end_is_not_a_survivor():
    # e = 1.05 at q = 5 AU (hyperbolic, a = -100 AU), stopped after 50 yr, long before it reaches the
    # ejection distance of 1000 AU: present, unbound from the star
    mj = MJUP_MSUN
    ini = InitialSystem(
        1.0,
        R_SUN_AU,
        (mj, mj),
        (R_JUP_AU, R_JUP_AU),
        (5.0, -100.0),
        (0.0, 1.05),
        (0.0, 0.0),
        (0.0, math.pi),
        (0.0, 0.0),
        (0.0, 0.0),
        seed=3,
        index=0,
    )
    rec = integrate_initial(ini, IntegrationSpec(end_time=50.0, ejection_distance=1000.0), OutcomeSpec())
    far = rec.planets[1]
    assert far.fate == Fate.UNBOUND and far.e_final > 1 and far.a_final < 0
    assert rec.n_survivors == 1 and rec.settlement == Settlement.UNSETTLED
    ds = dataset([rec], 2)
    assert int(ds["n_unbound"].values[0]) == 1 and int(ds["n_survivors"].values[0]) == 1
    assert survivor_mask(ds).values.tolist() == [[True, False]]


# --------------------------------------------------------------------------- carried further
def _same(rec1, rec2):
    d1, d2 = asdict(rec1), asdict(rec2)
    d1.pop("wall_seconds"), d2.pop("wall_seconds")
    return json.dumps(d1, sort_keys=True) == json.dumps(d2, sort_keys=True)


@pytest.mark.parametrize(
    "integrator, t1, t2, check",
    [
        ("ias15", 300.0, 1200.0, 3.0),  # both end times inside a check interval
        ("trace", 250.0, 900.0, 3.0),  # a hybrid step that follows the orbits
        ("ias15", None, None, 4.0),  # end_orbits on check boundaries (40 and 120 inner orbits)
    ],
)
def test_raised_end_time_continues_bit_for_bit(tmp_path, integrator, t1, t2, check):
    base = spec_text(systems=5, extra=f"check_orbits = {check!r}\n").replace('"ias15"', f'"{integrator}"')
    if t1 is None:
        specs = [parse_spec(base.replace("end_time = 300.0", f"end_orbits = {n!r}")) for n in (40.0, 120.0)]
    else:
        specs = [parse_spec(base.replace("end_time = 300.0", f"end_time = {t!r}")) for t in (t1, t2)]
    carried = 0
    for i in range(5):
        path = tmp_path / f"system_{i}.bin"
        first = integrate_system(specs[0], i, checkpoint_path=path)
        later = integrate_system(specs[1], i)  # the later end time from the start
        if first.end_reason != EndReason.END_TIME:
            assert not path.exists()  # settled: nothing kept, nothing to continue
            continue
        assert 1000 < path.stat().st_size < 20000  # the final state: a few KB
        continued = integrate_system(specs[1], i, checkpoint_path=path)
        assert _same(continued, later)
        assert continued.t_limit == later.t_limit > first.t_limit
        carried += 1
    assert carried >= 2


def test_identity_of_a_kept_state_ignores_only_the_end_time(tmp_path):
    from scatter_pop.errors import InputError

    spec = parse_spec(spec_text(systems=1, end_time=100.0))
    path = tmp_path / "s.bin"
    assert integrate_system(spec, 0, checkpoint_path=path).end_reason == EndReason.END_TIME
    other = replace(spec, integration=replace(spec.integration, epsilon=1e-8, end_time=200.0))
    with pytest.raises(InputError, match="another system or other settings"):
        integrate_system(other, 0, checkpoint_path=path)

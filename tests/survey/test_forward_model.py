"""Tests of scatter_pop.survey.forward_model: survivors seen through an RV survey."""

import math
import warnings

import numpy as np
import pytest
import scipy.stats
from records import planet, random_ensemble, system

from scatter_pop.constants import MJUP_MSUN
from scatter_pop.engine.outcome import EndReason, Fate
from scatter_pop.errors import InputError
from scatter_pop.store.schema import QualityCuts, records_to_dataset
from scatter_pop.survey import radial_velocity as rv
from scatter_pop.survey.cuts import Range, SampleCuts
from scatter_pop.survey.forward_model import (
    RESCALE_NOTE,
    RVSurvey,
    ensemble_star_mass,
    quality_counts,
    simulated_sample,
    survivor_table,
)


def _ds(records, n_planets=2, star_mass=1.0):
    ds = records_to_dataset(records, n_planets)
    ds.attrs["star_mass"] = star_mass
    return ds


def test_k_of_hand_made_planet_agrees_with_radial_velocity():
    # a 3 M_J planet at 2 AU, e = 0.85, around 1.1 M_sun: K from the table equals
    # Lovis & Fischer 2010 eq. 14 evaluated by radial_velocity with the same sin i
    ds = _ds([system(0, [planet(3.0, 2.0, 0.85), planet(1.0, -5.0, 1.2, fate=Fate.EJECTED)])], star_mass=1.1)
    m = 3.0 * MJUP_MSUN
    p = rv.orbital_period(2.0, 1.1, m)
    edge = survivor_table(ds, rng=1, project_sin_i=False)
    assert edge["K"][0] == pytest.approx(rv.semi_amplitude(m, p, 0.85, 1.1))
    assert edge["msini"][0] == m and edge["period"][0] == pytest.approx(p)
    # Kepler's third law cross-check in days: P = 2 pi sqrt(a^3 / G M) (common practice)
    assert edge["period"][0] * 365.25 == pytest.approx(365.25 * 2**1.5 / math.sqrt(1.1 + m), rel=1e-4)
    proj = survivor_table(ds, rng=1)
    s = proj["sin_i"][0]
    assert proj["K"][0] == pytest.approx(rv.semi_amplitude(m, p, 0.85, 1.1, s))
    assert proj["msini"][0] == pytest.approx(m * s)
    assert edge["sin_i"][0] == s  # one draw, whether or not it is applied
    assert proj["q"][0] == pytest.approx(2.0 * 0.15) and proj["planet"][0] == 0


def test_lines_of_sight_isotropic_cos_i_uniform():
    # isotropic lines of sight: cos i uniform on [0, 1] (common practice); KS test against
    # the uniform law, for orbits in the reference plane and for tilted ones
    flat = _ds([system(i, [planet(2.0, 1.0, 0.3)]) for i in range(3000)], n_planets=1)
    rng = np.random.default_rng(5)
    tilted = _ds(
        [
            system(
                i, [planet(2.0, 1.0, 0.3, inc=float(np.arccos(rng.uniform(-1, 1))), node=float(rng.uniform(0, 6.28)))]
            )
            for i in range(3000)
        ],
        n_planets=1,
    )
    for ds in (flat, tilted):
        s = survivor_table(ds, rng=2)["sin_i"]
        assert scipy.stats.kstest(np.sqrt(1 - s**2), "uniform").pvalue > 0.01


def test_coplanar_planets_share_the_line_of_sight():
    # two survivors on the same plane are seen at the same inclination (one observer per system)
    ds = _ds(
        [
            system(
                i,
                [planet(2.0, 1.0, 0.2, inc=0.4, node=1.0), planet(1.0, 4.0, 0.1, inc=0.4, node=1.0)],
                reason=EndReason.HILL_STABLE,
            )
            for i in range(50)
        ]
    )
    t = survivor_table(ds, rng=3)
    s = t["sin_i"].reshape(50, 2)
    assert np.allclose(s[:, 0], s[:, 1]) and np.ptp(s[:, 0]) > 0.3


def test_quality_cuts_counted():
    recs = [
        system(0, [planet(2.0, 1.0, 0.5), planet(1.0, -5, 1.2, fate=Fate.EJECTED)]),
        system(1, [planet(2.0, 1.0, 0.5)], reason=EndReason.FAILED),
        system(2, [planet(2.0, 1.0, 0.5)], reason=EndReason.CAPPED),
        system(3, [planet(2.0, 1.0, 0.5)], energy=3e-3),
        system(4, [planet(2.0, 1.0, 0.5)], energy=math.nan),
        system(5, [planet(2.0, 1.0, 0.6), planet(1.0, 3.0, 0.1)], reason=EndReason.HILL_STABLE),
    ]
    ds = _ds(recs)
    assert quality_counts(ds) == {"systems": 6, "failed": 1, "capped": 1, "energy_error": 2, "kept": 2}
    assert quality_counts(ds, QualityCuts(include_capped=True))["kept"] == 3
    t = survivor_table(ds, rng=0)
    assert t["system"].tolist() == [0, 5, 5] and t["planet"].tolist() == [0, 0, 1]
    sample = simulated_sample(ds, rng=0)
    assert [(s.key, s.n) for s in sample.log.steps] == [
        ("systems", 6),
        ("systems_kept", 2),
        ("survivors", 3),
        ("bound", 3),
    ]
    assert len(survivor_table(ds, rng=0, quality=QualityCuts(energy_tolerance=1e-2))["e"]) == 4
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # failed systems must not upset the rescaling
        t = survivor_table(ds, rng=0, rescale_a=Range(2.0, 2.0))
    assert np.allclose(t["a"], [2.0, 2.0, 6.0])  # inner planets (initially 1 AU) land at 2 AU


def test_cuts_and_rv_survey_forward_model():
    ds = random_ensemble(400, 7, lambda r: r.beta(1, 3))
    survey = RVSurvey(k_min=20.0, baseline=8.0)
    cuts = SampleCuts(a=Range(0.6, 4.0), mass=Range(1.0 * MJUP_MSUN, 8.0 * MJUP_MSUN))
    sample = simulated_sample(ds, rng=11, cuts=cuts, survey=survey)
    full = survivor_table(ds, rng=np.random.default_rng(11))  # same draws as the sample's
    keep = (full["a"] >= 0.6) & (full["a"] <= 4.0)
    n_a = int(keep.sum())
    keep &= (full["msini"] >= MJUP_MSUN) & (full["msini"] <= 8 * MJUP_MSUN)
    n_m = int(keep.sum())
    keep &= (full["K"] >= 20.0) & (full["period"] <= 8.0)
    steps = sample.log.as_dict()
    assert steps["a_range"] == n_a and steps["msini_range"] == n_m and steps["rv_detectable"] == int(keep.sum())
    assert sample.n == int(keep.sum()) and 0 < sample.n < n_m
    assert np.array_equal(sample.e, full["e"][keep])
    assert np.all(sample.table["K"] >= 20.0) and np.all(sample.table["period"] <= 8.0)


def test_deterministic_given_seed_and_different_otherwise():
    ds = random_ensemble(100, 1, lambda r: r.uniform(0, 0.9))
    a = survivor_table(ds, rng=42)
    b = survivor_table(ds, rng=42)
    c = survivor_table(ds, rng=43)
    assert all(np.array_equal(a[k], b[k]) for k in a)
    assert not np.array_equal(a["sin_i"], c["sin_i"])


def test_rescaling_scales_orbits_and_says_so():
    ds = random_ensemble(50, 2, lambda r: r.uniform(0, 0.9))
    base = survivor_table(ds, rng=9)
    fixed = survivor_table(ds, rng=9, rescale_a=Range(0.3, 0.3))
    a_inner = ds["a_initial"].values.min(axis=1)[base["system"]]
    f = 0.3 / a_inner
    assert np.allclose(fixed["a"], base["a"] * f) and np.allclose(fixed["q"], base["q"] * f)
    assert np.array_equal(fixed["e"], base["e"]) and np.array_equal(fixed["sin_i"], base["sin_i"])
    # Kepler's third law: P scales as f^(3/2); K as P^(-1/3) = f^(-1/2) (Lovis & Fischer 2010)
    assert np.allclose(fixed["period"], base["period"] * f**1.5)
    assert np.allclose(fixed["K"], base["K"] * f**-0.5)
    ranged = simulated_sample(ds, rng=9, rescale_a=Range(0.1, 1.0))
    inner = ranged.table["a"] / ranged.table["scale"]
    assert np.all((ranged.table["scale"] * a_inner >= 0.1 - 1e-12) & (ranged.table["scale"] * a_inner <= 1.0 + 1e-12))
    assert np.allclose(inner, base["a"])
    assert ranged.notes == (RESCALE_NOTE,) and "physical radii" in RESCALE_NOTE


def test_star_mass_from_attributes_spec_or_flag():
    ds = random_ensemble(3, 0, lambda r: 0.1)
    assert ensemble_star_mass(ds) == 1.0
    del ds.attrs["star_mass"]
    with pytest.raises(InputError, match="star_mass"):
        ensemble_star_mass(ds)
    ds.attrs["spec_toml"] = "[star]\nmass = 0.8\n"
    assert ensemble_star_mass(ds) == 0.8
    assert ensemble_star_mass(ds, 1.3) == 1.3


def test_unbound_or_removed_planets_never_enter():
    ds = _ds(
        [
            system(0, [planet(2.0, 1.0, 0.3), planet(1.0, 2.0, 0.99, fate=Fate.HIT_STAR)]),
            system(1, [planet(2.0, 1.0, 0.3), planet(1.0, -3.0, 1.1)]),
        ]
    )  # "survivor" unbound
    t = survivor_table(ds, rng=0)
    assert t["system"].tolist() == [0, 1] and np.all(t["e"] < 1)


def test_tidal_candidates_keep_drop_circularise():
    # circularisation at constant orbital angular momentum: a_c = a(1 - e^2), e -> 0
    # (Ford & Rasio 2006, ApJ 638, L45: a_final ~ 2q for e -> 1)
    import dataclasses

    hot = dataclasses.replace(planet(2.0, 1.0, 0.97), tidal_candidate=True)
    ds = _ds([system(0, [hot]), system(1, [planet(2.0, 1.0, 0.5)])], n_planets=1)
    t = survivor_table(ds, rng=0, circularise_tidal=True)
    assert t["tidal"].tolist() == [True, False]
    assert t["a"][0] == pytest.approx(1.0 * (1 - 0.97**2)) and t["e"][0] == 0.0
    assert t["a"][0] == pytest.approx(2 * 0.03, rel=0.02)  # ~ 2q
    assert t["a"][1] == 1.0 and t["e"][1] == 0.5
    drop = simulated_sample(ds, rng=0, tidal="drop")
    assert drop.log.as_dict()["not_tidal"] == 1 and drop.e.tolist() == [0.5]
    circ = simulated_sample(ds, rng=0, tidal="circularise")
    assert circ.n == 2 and "1 tidal-circularisation" in circ.notes[0]
    with pytest.raises(ValueError, match="tidal"):
        simulated_sample(ds, rng=0, tidal="melt")


def test_simulated_sample_notes_the_planets_of_unsettled_systems():
    # two settled systems and one pair stopped at the end time (a snapshot): its two planets are kept
    # in the sample (one survivor definition) and the note counts them
    ds = _ds(
        [
            system(0, [planet(2.0, 1.0, 0.3), planet(1.0, -3.0, 1.1, fate=Fate.EJECTED)]),
            system(1, [planet(2.0, 1.5, 0.4), planet(1.0, 2.0, 0.99, fate=Fate.HIT_STAR)]),
            system(2, [planet(2.0, 1.0, 0.5), planet(1.0, 1.6, 0.2)], reason=EndReason.END_TIME, hill_ratio=0.99),
        ]
    )
    sample = simulated_sample(ds, rng=0, project_sin_i=False)
    assert sample.n == 4
    assert any(note.startswith("2 of the 4 simulated planets are in unsettled systems") for note in sample.notes)

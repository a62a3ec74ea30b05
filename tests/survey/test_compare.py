"""Tests of scatter_pop.survey.comparison and scatter_pop.survey.report on hand-made ensembles."""

import csv
import io
import json

import numpy as np
import pytest
from records import random_ensemble, write_run

from scatter_pop.errors import InputError
from scatter_pop.survey.catalogue import load_catalogue
from scatter_pop.survey.comparison import CompareOptions, compare, load_ensemble
from scatter_pop.survey.cuts import Range, SampleCuts
from scatter_pop.survey.forward_model import RESCALE_NOTE, RVSurvey
from scatter_pop.survey.report import FORMATS, render, report_to_dict
from scatter_pop.survey.statistics import reference_distribution

FAST = dict(permutations=199, uncertainty_draws=8, bootstrap_draws=8, spread_permutations=49, reference_samples=199)


def _catalogue(path, e, err=0.03):
    """A synthetic catalogue whose e follow a known law (not data; a test input)."""
    rows = ["id,e,e_err_lo,e_err_hi,a_au,period_days,mass_mjup,mstar_msun"]
    for i, x in enumerate(e):
        rows.append(f"{i + 1},{x:.5f},{err},{err},1.0,365.25,2.0,1.0")
    path.write_text("\n".join(rows) + "\n")
    return path


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("cmp")
    rng = np.random.default_rng(77)
    beta = reference_distribution("beta_kipping2013")
    obs = load_catalogue(_catalogue(tmp / "obs.csv", beta.rvs(250, random_state=rng)))
    same = random_ensemble(300, 1, lambda r: beta.rvs(random_state=r))
    rayl = reference_distribution("rayleigh_jt2008")
    other = random_ensemble(300, 2, lambda r: rayl.rvs(random_state=r))
    return tmp, obs, same, other


def test_same_law_accepted_other_law_rejected(setup):
    # simulated e drawn from the law of the observed e (Kipping 2013 Beta) vs from the
    # Juric & Tremaine 2008 Rayleigh: the second must be rejected, the first not
    _, obs, same, other = setup
    rep = compare([("same", [same]), ("other", [other])], obs, CompareOptions(**FAST, seed=3))
    a, b = rep.rows
    assert a.test.ks_pvalue > 0.01 and a.test.ad_pvalue > 0.01
    assert b.test.ks_pvalue < 1e-4 and b.test.ad_pvalue == pytest.approx(1 / 200)
    assert a.test.n_x == 300 and a.test.n_y == 250
    refs = {x.reference: x for x in a.references}
    assert refs["beta_kipping2013"].ks_pvalue > 0.01 and refs["rayleigh_jt2008"].ks_pvalue < 1e-4
    # error-bar spread and bootstrap are reported with ordered percentiles
    for sp in (a.uncertainty, a.bootstrap):
        assert sp.draws == 8 and sp.ks_pvalue.p16 <= sp.ks_pvalue.median <= sp.ks_pvalue.p84
    assert a.uncertainty.n_varied == 250


def test_several_ensembles_pooled_and_deterministic(setup):
    _, obs, same, other = setup
    samples = [("two", [same]), ("three", [other]), ("pooled", [same, other])]
    opts = CompareOptions(**FAST, seed=5, survey=RVSurvey(k_min=10.0, baseline=20.0))
    r1 = report_to_dict(compare(samples, obs, opts))
    r2 = report_to_dict(compare(samples, obs, opts))
    assert r1 == r2
    r3 = report_to_dict(
        compare(samples, obs, CompareOptions(**FAST, seed=6, survey=RVSurvey(k_min=10.0, baseline=20.0)))
    )
    assert r3["samples"][0]["observed_uncertainty"] != r1["samples"][0]["observed_uncertainty"]
    n = [s["test"]["n_x"] for s in r1["samples"]]
    assert n[2] == pytest.approx(n[0] + n[1], abs=40)  # pooled: own sin i draws, same survivors
    counts = {c["key"]: c["n"] for c in r1["samples"][2]["counts"]}
    assert counts["systems"] == 600 and counts["survivors"] == 600
    assert counts["rv_detectable"] == n[2]


def test_rescale_note_and_cuts_in_report(setup):
    _, obs, same, _ = setup
    opts = CompareOptions(**FAST, rescale_a=Range(0.5, 2.0), cuts=SampleCuts(a=Range(0.1, 3.0)))
    rep = compare([("same", [same])], obs, opts)
    assert rep.rows[0].sample.notes == (RESCALE_NOTE,)
    text = render(rep, "text")
    assert "physical radii" in text and "a in [0.1, 3] AU" in text
    with pytest.raises(InputError, match="left after the cuts"):
        compare([("same", [same])], obs, CompareOptions(**FAST, cuts=SampleCuts(a=Range(50.0, 60.0))))


def test_every_format_renders_the_same_numbers(setup):
    _, obs, same, other = setup
    rep = compare([("two_planet", [same]), ("three_planet", [other])], obs, CompareOptions(**FAST, seed=1))
    t = rep.rows[0].test
    rows = list(csv.DictReader(io.StringIO(render(rep, "csv"))))
    two = [r for r in rows if r["sample"] == "two_planet" and r["test"] == "two_sample"][0]
    assert float(two["ks_statistic"]) == t.ks_statistic and float(two["ad_pvalue"]) == t.ad_pvalue
    assert int(two["n_sample"]) == t.n_x and int(two["n_bound"]) == t.n_x  # no cut after "bound"
    assert {r["against"] for r in rows if r["test"] == "one_sample"} == {"beta_kipping2013", "rayleigh_jt2008"}
    doc = json.loads(render(rep, "json"))
    assert doc["samples"][0]["test"]["ks_pvalue"] == t.ks_pvalue
    # c(0.05) sqrt((n+m)/(nm)) with c(0.05) = 1.3581 (asymptotic KS, REFERENCES.md)
    assert doc["samples"][0]["ks_critical_value_0.05"] == pytest.approx(
        1.3581 * ((t.n_x + t.n_y) / (t.n_x * t.n_y)) ** 0.5, rel=1e-4
    )
    assert doc["observed"]["counts"][0] == {"key": "read", "label": "rows read", "n": 250}
    tex = render(rep, "latex")
    for word in (r"\toprule", r"\midrule", r"\bottomrule", r"two\_planet", r"three\_planet"):
        assert word in tex
    assert tex.count(r"\\") == 3  # header + two rows
    text = render(rep, "text")
    assert f"D = {t.ks_statistic:.4f}" in text and "two_planet" in text
    assert set(FORMATS) == {"text", "csv", "json", "latex"}
    with pytest.raises(ValueError, match="allowed"):
        render(rep, "html")


def test_load_ensemble_paths(setup, tmp_path):
    _, _, same, _ = setup
    folder = write_run(tmp_path / "run_a", same)
    a = load_ensemble(folder)
    b = load_ensemble(folder / "ensemble.nc")
    assert a.sizes["system"] == b.sizes["system"] == 300
    with pytest.raises(InputError, match="neither a run folder"):
        load_ensemble(tmp_path / "missing")
    bad = tmp_path / "bad.nc"
    bad.write_text("not netcdf")
    with pytest.raises(InputError, match="bad.nc"):
        load_ensemble(bad)

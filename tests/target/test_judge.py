"""Tests of the judge: hand-made ensembles with known counts, checked against
scipy's binomial test and closed-form references; the command line's errors."""

import json
import math

import numpy as np
import pytest
import scipy.integrate
import scipy.stats
from records import dataset, planet, system, write_run

from scatter_pop import cli
from scatter_pop.constants import MJUP_MSUN
from scatter_pop.engine.outcome import EndReason, Fate
from scatter_pop.engine.stability import hill_spacing
from scatter_pop.store.schema import QualityCuts
from scatter_pop.survey.forward_model import ensemble_star_mass
from scatter_pop.target.architecture import min_spacing
from scatter_pop.target.judgement import judge
from scatter_pop.target.matching import msini_kernel, sin_i_cdf, soft_weight
from scatter_pop.target.planet import Target, Windows, target_from_flags
from scatter_pop.target.proportions import proportion, upper_limit
from scatter_pop.target.verdict import render_text, to_dict

TARGET = dict(e=0.9, e_err=0.02, a=9.0, a_err=1.5, msini=5.0, msini_err=0.5)


def _target(**kw):
    return target_from_flags(**{**TARGET, **kw})


# the target of the hand-made ensembles below, as judge flags
TARGET_FLAGS = ["--e", "0.9", "--e-err", "0.02", "--a", "9", "--a-err", "1.5", "--msini", "5", "--msini-err", "0.5"]


def _match():
    # a survivor inside every window: e 0.95 >= 0.9, a 9 AU, 5 M_J
    return [planet(5.0, 9.0, 0.95, a_initial=5.0), planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)]


def _miss(i):
    # survivors outside: low e, or right e at the wrong a, or the wrong mass
    kind = i % 3
    if kind == 0:
        return [planet(5.0, 9.0, 0.3, a_initial=5.0), planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)]
    if kind == 1:
        return [planet(5.0, 3.0, 0.95, a_initial=5.0), planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)]
    return [planet(0.5, 9.0, 0.95, a_initial=5.0), planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)]


def _ensemble(n, k, **kw):
    return dataset([system(i, _match() if i < k else _miss(i)) for i in range(n)], 2, **kw)


# --------------------------------------------------------------------------- counts and intervals
@pytest.mark.parametrize("n, k", [(250, 9), (40, 1), (1000, 37)])
def test_known_fraction_and_clopper_pearson_interval(n, k):
    # the target's mass is taken as a true mass, so the count does not depend on sin i draws
    res = judge(_ensemble(n, k), _target(true_mass=True)).ensembles[0]
    assert (res.systems.k, res.systems.n) == (k, n)
    assert res.systems.fraction == k / n
    # reference library: scipy.stats.binomtest, exact (Clopper & Pearson 1934, Biometrika 26, 404)
    ci = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")
    assert (res.systems.low, res.systems.high) == (ci.low, ci.high)
    # the same interval from its definition through Beta quantiles (Clopper & Pearson 1934)
    assert res.systems.low == pytest.approx(scipy.stats.beta.ppf(0.025, k, n - k + 1), rel=1e-9)
    assert res.systems.high == pytest.approx(scipy.stats.beta.ppf(0.975, k + 1, n - k), rel=1e-9)
    # one survivor per system here
    assert (res.survivors.k, res.survivors.n) == (k, n)


def test_wilson_interval_matches_closed_form():
    # Wilson (1927), JASA 22, 209: centre (k + z^2/2)/(n + z^2), half-width
    # z sqrt(k(n-k)/n + z^2/4)/(n + z^2)
    n, k = 300, 12
    res = judge(_ensemble(n, k), _target(true_mass=True), method="wilson").ensembles[0]
    z = scipy.stats.norm.ppf(0.975)
    centre = (k + z * z / 2) / (n + z * z)
    half = z * math.sqrt(k * (n - k) / n + z * z / 4) / (n + z * z)
    assert res.systems.low == pytest.approx(centre - half, rel=1e-9)
    assert res.systems.high == pytest.approx(centre + half, rel=1e-9)


@pytest.mark.parametrize("n", [30, 250, 1000])
def test_zero_matches_give_exact_one_sided_upper_limit(n):
    res = judge(_ensemble(n, 0), _target(true_mass=True)).ensembles[0]
    assert res.systems.k == 0
    # (1 - p)^n = 0.05: the exact one-sided 95 % limit (Clopper & Pearson 1934)
    assert res.systems.upper_limit == pytest.approx(1 - 0.05 ** (1 / n), rel=1e-9)
    # rule of three, 3/n (Hanley & Lippman-Hand 1983, JAMA 249, 1743), is its approximation
    assert res.systems.rule_of_three == pytest.approx(3 / n)
    assert abs(res.systems.upper_limit - 3 / n) < 0.1 * 3 / n
    text = render_text(judge(_ensemble(n, 0), _target(true_mass=True)))
    assert "None of the" in text and "upper limit" in text and "rule of three" in text


def test_upper_limit_function():
    # 1 - 0.05^(1/n) for n = 100: 0.029513 (derived from the formula)
    assert upper_limit(100) == pytest.approx(1 - 0.05**0.01, rel=1e-12)
    assert proportion(0, 100).upper_limit == upper_limit(100)
    assert proportion(3, 100).upper_limit is None


def test_survivor_fraction_counts_planets_not_systems():
    # systems with two survivors: the match is one planet of two
    recs = []
    for i in range(60):
        inner = planet(5.0, 9.0, 0.95 if i < 6 else 0.2, a_initial=5.0)
        recs.append(system(i, [inner, planet(1.0, 30.0, 0.5, a_initial=7.0)], reason=EndReason.HILL_STABLE))
    res = judge(dataset(recs, 2), _target(true_mass=True)).ensembles[0]
    assert (res.systems.k, res.systems.n) == (6, 60)
    assert (res.survivors.k, res.survivors.n) == (6, 120)


def test_left_out_systems_are_counted_not_used():
    recs = [system(i, _match() if i < 5 else _miss(i)) for i in range(50)]
    recs[0] = system(0, _match(), reason=EndReason.FAILED)
    recs[1] = system(1, _match(), reason=EndReason.CAPPED)
    recs[2] = system(2, _match(), energy=1e-2)
    res = judge(dataset(recs, 2), _target(true_mass=True)).ensembles[0]
    assert res.excluded == {"failed": 1, "capped": 1, "energy": 1}
    assert (res.systems.k, res.systems.n) == (2, 47)
    kept = judge(dataset(recs, 2), _target(true_mass=True), quality=QualityCuts(include_capped=True)).ensembles[0]
    assert (kept.systems.k, kept.systems.n) == (3, 48)
    assert "left out" in render_text(judge(dataset(recs, 2), _target(true_mass=True)))


# --------------------------------------------------------------------------- projection
def test_projected_matches_follow_isotropic_orientation():
    # 4000 systems whose survivor matches in e and a and has a true mass of 6 M_J; the
    # m sin i window 4-6 M_J then holds it with P = sqrt(1 - (4/6)^2) - 0 (isotropic
    # orientation, cos i uniform: P(sin i <= s) = 1 - sqrt(1 - s^2); common practice)
    n = 4000
    recs = [
        system(i, [planet(6.0, 9.0, 0.95, a_initial=5.0), planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)])
        for i in range(n)
    ]
    t = _target(msini=5.0, msini_err=0.5)
    res = judge(dataset(recs, 2), t, seed=7).ensembles[0]
    p = math.sqrt(1 - (4 / 6) ** 2)
    lo, hi = scipy.stats.binom.interval(0.999, n, p)
    assert lo <= res.systems.k <= hi
    assert sin_i_cdf(4 / 6) == pytest.approx(1 - math.sqrt(1 - (4 / 6) ** 2))
    # seeded: the same seed gives the same count, another seed (almost surely) another
    assert judge(dataset(recs, 2), t, seed=7).ensembles[0].systems.k == res.systems.k


def test_msini_kernel_against_quadrature():
    # E over cos i ~ U(0,1) of exp(-((m sin i - x)/s)^2 / 2), by scipy.integrate.quad
    for m, x, s in [(6.0, 5.0, 0.5), (5.2, 5.0, 0.3), (12.0, 5.0, 0.6), (3.0, 5.0, 0.5)]:
        ref, _ = scipy.integrate.quad(
            lambda c, m=m, x=x, s=s: math.exp(-0.5 * ((m * math.sqrt(1 - c * c) - x) / s) ** 2),
            0.0,
            1.0,
            limit=200,
            points=[math.sqrt(max(0.0, 1 - (x / m) ** 2))] if m > x else None,
        )
        assert msini_kernel(np.array([m]), x, s)[0] == pytest.approx(ref, abs=2e-4)


def test_soft_weight_factors():
    t = Target(0.9, 0.02, 9.0, 1.5, 5.0 * MJUP_MSUN, 0.5 * MJUP_MSUN, true_mass=True)
    w = soft_weight([0.9, 0.94, 0.95], [9.0, 9.0, 10.5], [5.0 * MJUP_MSUN] * 3, t, Windows())
    # e factor Phi((e - 0.9)/0.02): 0.5 at e = 0.9, Phi(2) at 0.94; a factor exp(-1/2) at 1 sigma
    assert w[0] == pytest.approx(0.5)
    assert w[1] == pytest.approx(scipy.stats.norm.cdf(2.0))
    assert w[2] == pytest.approx(scipy.stats.norm.cdf(2.5) * math.exp(-0.5))


def test_weighted_fraction_tends_to_hard_count_for_tiny_uncertainties():
    # with e_err -> 0 and the windows' widths the weight is still Gaussian in a and m, so use
    # survivors exactly at the target: weight 1 each; others far away: weight ~0
    recs = [
        system(
            i,
            [
                planet(5.0, 9.0, 0.95 if i < 8 else 0.1, a_initial=5.0),
                planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED),
            ],
        )
        for i in range(100)
    ]
    t = _target(e_err=1e-6, true_mass=True)
    res = judge(dataset(recs, 2), t).ensembles[0]
    assert res.weighted_systems.value == pytest.approx(0.08, abs=1e-9)
    assert res.weighted_systems.expected == pytest.approx(8.0, abs=1e-7)
    assert res.weighted_systems.low < 0.08 < res.weighted_systems.high


# --------------------------------------------------------------------------- pathways and configurations
def test_pathways_of_matching_systems():
    recs = []
    for i in range(40):
        if i < 4:  # matching, the other planet ejected; one is a tidal candidate
            recs.append(
                system(
                    i,
                    [
                        planet(5.0, 9.0, 0.95, a_initial=5.0, tidal=(i == 0)),
                        planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED),
                    ],
                    t_enc=100.0 + i,
                )
            )
        elif i < 6:  # matching, the other planet merged
            recs.append(
                system(
                    i,
                    [planet(5.0, 9.0, 0.95, a_initial=5.0), planet(1.0, 6.5, 0.2, a_initial=6.5, fate=Fate.MERGED)],
                    t_enc=200.0,
                )
            )
        else:  # not matching: lost to the star
            recs.append(
                system(
                    i,
                    [planet(5.0, 4.0, 0.3, a_initial=5.0), planet(1.0, 0.1, 0.99, a_initial=6.5, fate=Fate.HIT_STAR)],
                    t_enc=5e3,
                )
            )
    res = judge(dataset(recs, 2), _target(true_mass=True)).ensembles[0]
    pw = res.pathways
    assert (pw.n_matching, pw.n_all, pw.n_planets) == (6, 40, 6)
    assert pw.lost_matching == {"ejected": 4, "merged": 2, "star": 0}
    assert pw.lost_all == {"ejected": 4, "merged": 2, "star": 34}
    assert dict((b, (k, n)) for b, k, n in pw.branches)["star"] == (0, 34)
    assert pw.survivors_left == ((1, 6, 40),)
    assert pw.tidal_candidates == 1
    assert pw.instability_matching.median == pytest.approx(np.median([100, 101, 102, 103, 200, 200]))


def test_configurations_that_favour_the_target():
    # matching systems start with unequal masses (ratio 0.2), the others with equal masses
    recs = []
    for i in range(60):
        if i < 10:
            recs.append(
                system(
                    i,
                    [planet(5.0, 9.0, 0.95, a_initial=5.0), planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)],
                )
            )
        else:
            recs.append(
                system(
                    i, [planet(5.0, 4.0, 0.2, a_initial=5.0), planet(5.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)]
                )
            )
    res = judge(dataset(recs, 2), _target(true_mass=True)).ensembles[0]
    mr = {c.key: c for c in res.configurations}["mass_ratio"]
    assert mr.median_matching == pytest.approx(0.2)
    assert mr.n_matching == 10 and mr.n_rest == 50
    # complete separation: Cliff's delta = -1 (Cliff 1993, Psychol. Bull. 114, 494, definition)
    assert mr.cliffs_delta == pytest.approx(-1.0)
    assert mr.ks_pvalue == pytest.approx(scipy.stats.ks_2samp([0.2] * 10, [1.0] * 50).pvalue)
    assert mr.ks_pvalue < 1e-6


def test_pooled_ensembles_compare_planet_count():
    two = dataset([system(i, _miss(i)) for i in range(30)], 2)
    three = dataset(
        [system(i, _match() + [planet(1.0, -30.0, 1.2, a_initial=8.0, fate=Fate.EJECTED)]) for i in range(20)], 3
    )
    res = judge([two, three], _target(true_mass=True), labels=["two", "three"])
    assert [r.systems.k for r in res.ensembles] == [0, 20]
    count = {c.key: c for c in res.pooled.configurations}["count"]
    assert (count.median_matching, count.cliffs_delta) == (3.0, 1.0)
    assert res.pooled.systems.k == 20 and res.pooled.systems.n == 50


def test_spacing_in_mutual_hill_radii_against_gladman():
    # Gladman 1993, Icarus 106, 247: the critical separation for mu1 = mu2 = 1e-6 is
    # Delta/a1 = 0.030723, i.e. 3.464 mutual Hill radii with a-bar = (a1 + a2)/2 (derived
    # values from REFERENCES.md); 1e-3: Delta/a1 = 0.352233 -> 3.428
    assert hill_spacing(1.0, 1e-6, 1e-6, 1.0, 1.030723) == pytest.approx(3.464, abs=2e-3)
    assert hill_spacing(1.0, 1e-3, 1e-3, 1.0, 1.352233) == pytest.approx(3.428, abs=2e-3)
    ds = dataset([system(0, [planet(1.0, 1.0, 0.1, a_initial=1.352233), planet(1.0, 1.0, 0.1, a_initial=1.0)])], 2)
    ds["mass_initial"][:] = 1e-3
    assert min_spacing(ds, 1.0)[0] == pytest.approx(3.428, abs=2e-3)  # order by a, not by index
    assert ensemble_star_mass(ds) == 1.0


def test_mass_scaling_with_the_targets_star():
    # planets of 2.5 M_J around a 1 M_sun star are like 5 M_J planets around 2 M_sun (same mu)
    recs = [
        system(i, [planet(2.5, 9.0, 0.95, a_initial=5.0), planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)])
        for i in range(20)
    ]
    unscaled = judge(dataset(recs, 2), _target(true_mass=True)).ensembles[0]
    scaled = judge(dataset(recs, 2), _target(true_mass=True, mstar=2.0)).ensembles[0]
    assert unscaled.systems.k == 0 and scaled.systems.k == 20
    assert scaled.mass_scale == pytest.approx(2.0)
    assert any(
        "M*_target / M*_ensemble" in c
        for c in to_dict(judge(dataset(recs, 2), _target(true_mass=True, mstar=2.0)))["ensembles"][0]["caveats"]
    )


def test_json_is_valid_and_carries_the_verdict():
    doc = json.loads(json.dumps(to_dict(judge(_ensemble(100, 3), _target(true_mass=True)))))
    e = doc["ensembles"][0]
    assert e["systems"]["k"] == 3 and e["systems"]["n"] == 100
    assert "3 of 100 settled or likely-stable systems" in e["verdict"]
    assert doc["units"]["a"] == "au" and doc["target"]["msini_mjup"] == pytest.approx(5.0)


# --------------------------------------------------------------------------- command line
def _run(argv, capsys):
    code = cli.main(argv)
    out = capsys.readouterr()
    return code, out.out, out.err


def test_cli_judge_text_and_files(tmp_path, capsys):
    run = write_run(tmp_path / "runA", [system(i, _match() if i < 4 else _miss(i)) for i in range(80)], 2)
    out = tmp_path / "verdict"
    code, stdout, err = _run(
        [
            "judge",
            str(run),
            *TARGET_FLAGS,
            "--true-mass",
            "--out",
            str(out),
        ],
        capsys,
    )
    assert code == 0, err
    assert "4 / 80" in stdout and "verdict:" in stdout
    doc = json.loads((out / "verdict.json").read_text())
    assert doc["ensembles"][0]["systems"]["k"] == 4
    assert (out / "verdict.txt").read_text() == stdout


BAD = [
    (["--e", "1.0"], "--e"),
    (["--e", "-0.1"], "--e"),
    (["--e", "nan"], "--e"),
    (["--e", "abc"], "--e"),
    (["--e-err", "-0.01"], "--e-err"),
    (["--a", "0"], "--a"),
    (["--a", "-3"], "--a"),
    (["--a-err", "-1"], "--a-err"),
    (["--msini", "0"], "--msini"),
    (["--msini", "-2"], "--msini"),
    (["--msini-err", "-0.5"], "--msini-err"),
    (["--star-mass", "0"], "--star-mass"),
    (["--a-factor", "1"], "--a-factor"),
    (["--a-window", "0"], "--a-window"),
    (["--a-err", "0"], "--a-err"),
    (["--confidence", "1.5"], "--confidence"),
    (["--seed", "-1"], "--seed"),
]


@pytest.mark.parametrize("change, flag", BAD)
def test_cli_bad_target_values(tmp_path, capsys, change, flag):
    run = write_run(tmp_path / "run", [system(i, _miss(i)) for i in range(5)], 2)
    out = tmp_path / "verdict"
    out.mkdir()
    (out / "verdict.txt").write_text("earlier result\n")
    argv = {"--e": "0.9", "--e-err": "0.02", "--a": "9", "--a-err": "1.5", "--msini": "5", "--msini-err": "0.5"}
    argv.update(dict(zip(change[::2], change[1::2])))
    code, stdout, err = _run(
        ["judge", str(run), *sum(([k, v] for k, v in argv.items()), []), "--out", str(out)], capsys
    )
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and flag in lines[0] and "Traceback" not in err
    assert lines[0].startswith("scatter-pop judge: error: ")
    assert (out / "verdict.txt").read_text() == "earlier result\n"  # nothing overwritten


def test_cli_missing_run_folder(tmp_path, capsys):
    code, _, err = _run(
        [
            "judge",
            str(tmp_path / "nowhere"),
            *TARGET_FLAGS,
        ],
        capsys,
    )
    assert code == 2 and "DIR" in err and len(err.strip().splitlines()) == 1


def test_ensemble_with_no_usable_system_says_so():
    ds = dataset([system(i, _match(), reason=EndReason.FAILED) for i in range(3)], 2)
    res = judge(ds, _target(true_mass=True))
    r = res.ensembles[0]
    assert (r.systems.n, r.excluded["failed"]) == (0, 3) and math.isnan(r.systems.fraction)
    text = render_text(res)
    assert "nothing can be said" in text and "No bound survivors" in text
    json.dumps(to_dict(res))  # NaN rendered as null: valid JSON

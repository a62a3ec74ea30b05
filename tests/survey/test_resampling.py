"""Tests of scatter_pop.survey.resampling: error-bar redraws and the simulated-sample bootstrap."""

import numpy as np
import pytest
import scipy.stats

from scatter_pop.survey import resampling as rs


def test_split_normal_symmetric_matches_truncated_normal():
    # with equal errors the split normal is a normal; truncated to [0, 1) it must follow
    # scipy.stats.truncnorm (reference library): KS test on 4000 draws
    rng = np.random.default_rng(1)
    mode, sigma = 0.05, 0.1
    x = rs.split_normal_truncated(np.full(4000, mode), sigma, sigma, rng)
    ref = scipy.stats.truncnorm((0 - mode) / sigma, (1 - mode) / sigma, loc=mode, scale=sigma)
    assert scipy.stats.kstest(x, ref.cdf).pvalue > 0.01
    assert x.min() >= 0.0 and x.max() < 1.0


def test_split_normal_asymmetric_halves():
    # split normal (common practice for asymmetric error bars): P(x < mode) = s_lo/(s_lo+s_hi),
    # each side a half-normal of its own width
    rng = np.random.default_rng(2)
    mode, s_lo, s_hi = 0.5, 0.02, 0.06
    x = rs.split_normal_truncated(np.full(20000, mode), s_lo, s_hi, rng)
    below = x < mode
    assert below.mean() == pytest.approx(0.25, abs=0.01)
    assert np.sqrt(np.mean((x[below] - mode) ** 2)) == pytest.approx(s_lo, rel=0.03)
    assert np.sqrt(np.mean((x[~below] - mode) ** 2)) == pytest.approx(s_hi, rel=0.03)


def test_split_normal_keeps_unknown_errors_and_range():
    rng = np.random.default_rng(3)
    mode = np.array([0.0, 0.3, 0.95, 0.2])
    lo = np.array([0.05, np.nan, 0.3, 0.0])
    hi = np.array([0.05, np.nan, 0.3, 0.0])
    draws = np.array([rs.split_normal_truncated(mode, lo, hi, rng) for _ in range(2000)])
    assert np.all(draws[:, 1] == 0.3) and np.all(draws[:, 3] == 0.2)  # no error: fixed
    assert draws[:, 0].min() >= 0.0 and draws[:, 2].max() < 1.0
    assert draws[:, 2].std() > 0.05


def test_observed_uncertainty_spread_deterministic_and_collapses_without_errors():
    rng = np.random.default_rng(4)
    sim, obs = rng.beta(1, 3, 300), rng.beta(1, 3, 80)
    err = np.full(obs.size, 0.05)
    a = rs.observed_uncertainty_spread(sim, obs, err, err, draws=20, permutations=50, rng=7)
    b = rs.observed_uncertainty_spread(sim, obs, err, err, draws=20, permutations=50, rng=7)
    assert a == b and a.draws == 20 and a.n_varied == 80
    assert a.ks_statistic.p84 > a.ks_statistic.p16
    none = rs.observed_uncertainty_spread(
        sim, obs, np.full(80, np.nan), np.full(80, np.nan), draws=10, permutations=20, rng=7
    )
    assert none.ks_statistic.p16 == none.ks_statistic.p84 and none.n_varied == 0


def test_bootstrap_spread_brackets_full_sample_statistic():
    rng = np.random.default_rng(5)
    sim, obs = rng.beta(1, 3, 400), rng.beta(1.3, 3, 120)
    from scatter_pop.survey.statistics import two_sample

    full = two_sample(sim, obs, permutations=50, rng=0)
    boot = rs.simulated_bootstrap_spread(sim, obs, draws=40, permutations=30, rng=8)
    assert boot.kind == "simulated_bootstrap" and boot.n_varied == 400
    assert boot.ks_statistic.p16 - 0.03 <= full.ks_statistic <= boot.ks_statistic.p84 + 0.03
    assert boot.ks_pvalue.p16 < boot.ks_pvalue.p84

"""Tests of scatter_pop.survey.statistics against published values and known distributions."""

import math

import numpy as np
import pytest
import scipy.stats

from scatter_pop.survey import statistics as st

# Scholz, F. W. & Stephens, M. A. 1987, JASA 82, 918, worked example (paper smoothness,
# four laboratories x eight measurements); data as quoted in ../shared/REFERENCES.md.
SS87 = [
    [38.7, 41.5, 43.8, 44.5, 45.5, 46.0, 47.7, 58.0],
    [39.2, 39.3, 39.7, 41.4, 41.8, 42.9, 43.3, 45.8],
    [34.0, 35.0, 39.0, 40.0, 43.0, 43.0, 44.0, 45.0],
    [34.0, 34.8, 34.8, 35.4, 37.2, 37.8, 41.2, 42.8],
]


# --------------------------------------------------------------------------- KS critical values
@pytest.mark.parametrize("alpha, c", [(0.10, 1.2239), (0.05, 1.3581), (0.01, 1.6276), (0.001, 1.9495)])
def test_ks_critical_coefficient(alpha, c):
    # c(alpha) = sqrt(-1/2 ln(alpha/2)), asymptotic two-sample KS (Smirnov 1948; tabulated in
    # standard references, values as listed in REFERENCES.md)
    assert st.ks_critical_coefficient(alpha) == pytest.approx(c, abs=5e-5)


def test_ks_critical_value_worked_example():
    # worked example: alpha = 0.01, n1 = 15, n2 = 28 -> D = 0.5216 (REFERENCES.md, standard
    # table).  The example multiplies the two-decimal table value c = 1.63 by sqrt(43/420);
    # the unrounded c = 1.62762 gives 0.52079, so agreement is to the table's rounding (1e-3).
    d = st.ks_critical_value(0.01, 15, 28)
    assert d == pytest.approx(0.5216, abs=1e-3)
    assert d == pytest.approx(1.6276 * math.sqrt(43 / 420), abs=5e-5)


def test_ks_critical_value_matches_scipy_asymptotic_distribution():
    # cross-check against scipy.stats.kstwobign (the Kolmogorov limiting distribution):
    # its upper alpha-quantile agrees with c(alpha) to the accuracy of the one-term series
    for alpha in (0.1, 0.05, 0.01):
        assert st.ks_critical_coefficient(alpha) == pytest.approx(scipy.stats.kstwobign.isf(alpha), rel=2e-3)


# --------------------------------------------------------------------------- Anderson-Darling
def test_ad_scholz_stephens_example():
    # Scholz & Stephens 1987: A2_kN = 8.3559, T = 4.4492 (no tie adjustment);
    # A2_akN = 8.3926, T = 4.4797 (midrank, ties adjusted)
    right = st.ad_ksamp(SS87, variant="right")
    mid = st.ad_ksamp(SS87, variant="midrank")
    assert right.a2 == pytest.approx(8.3559, abs=5e-4)
    assert right.t == pytest.approx(4.4492, abs=5e-4)
    assert mid.a2 == pytest.approx(8.3926, abs=5e-4)
    assert mid.t == pytest.approx(4.4797, abs=5e-4)


def test_ad_sigma_formula_against_null_simulation():
    # sigma_N from Scholz & Stephens 1987 eq. 4 agrees with the spread of A2 under H0
    rng = np.random.default_rng(7)
    sizes = [10, 15, 20]
    a2 = [st.ad_ksamp([rng.random(s) for s in sizes]).a2 for _ in range(1500)]
    sigma = st.ad_sigma(sizes)
    # mean of A2 under H0 is k-1 (Scholz & Stephens 1987, eq. 3 discussion)
    assert np.mean(a2) == pytest.approx(2.0, abs=0.1)
    assert np.std(a2) == pytest.approx(sigma, rel=0.08)


def test_two_sample_permutation_pvalue_for_ss87_pair():
    # two of the SS87 laboratories: the permutation p-value is close to scipy's
    # interpolated one when the latter lies inside its unclipped range (0.001, 0.25)
    x, y = SS87[0], SS87[3]
    r = st.two_sample(x, y, permutations=3000, rng=1)
    interp = scipy.stats.anderson_ksamp([x, y], variant="midrank")
    assert 0.001 < interp.pvalue < 0.25
    assert r.ad_statistic == pytest.approx(interp.statistic)
    assert r.ad_pvalue == pytest.approx(interp.pvalue, abs=0.01)
    assert r.ks_statistic == pytest.approx(scipy.stats.ks_2samp(x, y).statistic)
    assert (r.n_x, r.n_y, r.permutations) == (8, 8, 3000)


@pytest.mark.parametrize("ties", [False, True])
def test_vectorised_ad_permutation_equals_scipy(ties):
    # the vectorised statistic must reproduce scipy.stats.anderson_ksamp (midrank,
    # PermutationMethod) exactly: same T, and the same p-value from the same permutations
    rng = np.random.default_rng(21)
    x, y = rng.beta(1, 3, 70), rng.beta(1.4, 3, 55)
    if ties:
        x, y = np.round(x, 2), np.round(y, 2)
    r = st.two_sample(x, y, permutations=300, rng=np.random.default_rng(8))
    ref = scipy.stats.anderson_ksamp(
        [x, y], variant="midrank", method=scipy.stats.PermutationMethod(n_resamples=300, rng=np.random.default_rng(8))
    )
    assert r.ad_statistic == pytest.approx(ref.statistic, rel=1e-12, abs=1e-12)
    assert r.ad_pvalue == ref.pvalue


def test_two_sample_pvalue_not_floored_at_scipy_limit():
    # scipy's interpolated AD p-value is floored at 0.001 (scipy docs); with permutations the
    # p-value is limited only by the resolution 1/(permutations+1)
    rng = np.random.default_rng(3)
    x = rng.beta(0.867, 3.03, 300)
    y = 0.3 * np.sqrt(-2 * np.log(rng.random(300)))
    r = st.two_sample(x, y, permutations=499, rng=rng)
    assert r.ad_pvalue == pytest.approx(1 / 500)
    assert r.ks_pvalue < 1e-6  # asymptotic KS p is not clipped either


def test_two_sample_not_rejected_for_identical_distributions_and_deterministic():
    rng = np.random.default_rng(11)
    x, y = rng.beta(1, 3, 200), rng.beta(1, 3, 150)
    a = st.two_sample(x, y, permutations=200, rng=5)
    b = st.two_sample(x, y, permutations=200, rng=5)
    assert a == b
    assert a.ad_pvalue > 0.01 and a.ks_pvalue > 0.01


def test_two_sample_drops_nan_and_rejects_tiny_samples():
    r = st.two_sample([0.1, 0.2, np.nan, 0.3], [0.15, 0.25, 0.35], permutations=50, rng=0)
    assert r.n_x == 3
    with pytest.raises(ValueError, match="x needs"):
        st.two_sample([0.1, np.nan], [0.1, 0.2])
    with pytest.raises(ValueError, match="permutations"):
        st.two_sample([0.1, 0.2], [0.1, 0.2], permutations=0)


# --------------------------------------------------------------------------- calibration, power
def test_two_sample_calibration_rejection_rate_at_5_percent():
    # Under H0 (both samples from one Beta law) a valid test rejects at alpha = 0.05 in 5 % of
    # pairs; with 300 pairs the count must lie in the binomial 99 % interval (common practice).
    rng = np.random.default_rng(2024)
    pairs, alpha = 300, 0.05
    rej_ks = rej_ad = 0
    for _ in range(pairs):
        x, y = rng.beta(0.867, 3.03, 60), rng.beta(0.867, 3.03, 45)
        r = st.two_sample(x, y, permutations=99, rng=rng)
        rej_ks += r.ks_pvalue <= alpha
        rej_ad += r.ad_pvalue <= alpha
    lo, hi = scipy.stats.binom.interval(0.99, pairs, alpha)
    assert lo <= rej_ks <= hi
    assert lo <= rej_ad <= hi


def test_two_sample_power_beta_vs_rayleigh():
    # Kipping 2013 Beta(0.867, 3.03) against Juric & Tremaine 2008 Rayleigh(0.3) at n = 300:
    # the laws differ (means 0.22 vs 0.37), both tests must reject at alpha = 0.01
    rng = np.random.default_rng(5)
    x = st.reference_distribution("beta_kipping2013").rvs(300, random_state=rng)
    y = st.reference_distribution("rayleigh_jt2008").rvs(300, random_state=rng)
    r = st.two_sample(x, y, permutations=999, rng=rng)
    assert r.ks_pvalue < 0.01 and r.ad_pvalue < 0.01
    assert r.ks_statistic > st.ks_critical_value(0.01, 300, 300)


# --------------------------------------------------------------------------- reference laws
def test_kipping_beta_derived_values():
    # Kipping 2013 (MNRAS 434, L51) Beta(0.867, 3.03); derived values from REFERENCES.md
    d = st.reference_distribution("beta_kipping2013")
    assert d.mean() == pytest.approx(0.2225, abs=1e-4)
    assert d.median() == pytest.approx(0.1734, abs=1e-4)
    assert d.sf(0.5) == pytest.approx(0.1009, abs=1e-4)
    assert d.sf(0.8) == pytest.approx(0.00602, abs=1e-5)


def test_rayleigh_truncated_on_unit_interval():
    # Juric & Tremaine 2008 (ApJ 686, 603): dn ∝ e exp(-e^2/2 sigma^2), sigma = 0.3.
    # REFERENCES.md quotes mean 0.3760, median 0.3532, P(e>0.5) = 0.2494, P(e>0.8) = 0.0286;
    # these are the values of the law on [0, inf) (sigma sqrt(pi/2), sigma sqrt(2 ln 2), ...).
    # On [0, 1) the law is renormalised by F(1) = 1 - exp(-1/(2 sigma^2)):
    d = st.reference_distribution("rayleigh_jt2008")
    f1 = 1.0 - math.exp(-1.0 / 0.18)
    for x, sf_untruncated in ((0.5, 0.2494), (0.8, 0.0286)):
        assert d.sf(x) == pytest.approx((sf_untruncated - (1 - f1)) / f1, abs=1e-4)
    assert d.median() == pytest.approx(0.3 * math.sqrt(-2 * math.log(1 - 0.5 * f1)), abs=1e-6)
    assert d.cdf(1.0) == pytest.approx(1.0) and d.cdf(0.0) == 0.0
    # untruncated cross-check with scipy.stats.rayleigh (scale = sigma)
    assert scipy.stats.rayleigh(scale=0.3).mean() == pytest.approx(0.3760, abs=1e-4)
    assert scipy.stats.rayleigh(scale=0.3).median() == pytest.approx(0.3532, abs=1e-4)
    with pytest.raises(ValueError, match="allowed"):
        st.reference_distribution("uniform")


def test_one_sample_accepts_own_law_and_rejects_other():
    rng = np.random.default_rng(9)
    x = st.reference_distribution("beta_kipping2013").rvs(300, random_state=rng)
    own = st.one_sample(x, "beta_kipping2013", samples=500, rng=1)
    other = st.one_sample(x, "rayleigh_jt2008", samples=500, rng=1)
    assert own.ks_pvalue > 0.01 and own.ad_pvalue > 0.01
    assert other.ks_pvalue < 1e-6 and other.ad_pvalue == pytest.approx(1 / 501)
    # KS statistic equals scipy's one-sample KS against the same CDF (reference library)
    ref = scipy.stats.kstest(x, scipy.stats.beta(0.867, 3.03).cdf)
    assert own.ks_statistic == pytest.approx(ref.statistic)
    assert own.n == 300


def test_fit_beta_recovers_parameters_and_refuses_zeros():
    rng = np.random.default_rng(4)
    a, b = st.fit_beta(rng.beta(0.867, 3.03, 20000))
    assert a == pytest.approx(0.867, rel=0.03) and b == pytest.approx(3.03, rel=0.04)
    with pytest.raises(ValueError, match="zeros"):
        st.fit_beta([0.0, 0.1, 0.2])

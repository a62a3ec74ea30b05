"""Tests of scatter_pop.statistics against published values and known distributions."""

import math

import numpy as np
import pytest
import scipy.stats

from scatter_pop import statistics as st

# Scholz, F. W. & Stephens, M. A. 1987, JASA 82, 918, worked example (paper smoothness,
# four laboratories x eight measurements); data as quoted in /work/shared/REFERENCES.md.
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
        assert st.ks_critical_coefficient(alpha) == pytest.approx(
            scipy.stats.kstwobign.isf(alpha), rel=2e-3)


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
    sigma = st._ad_sigma(sizes)
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


def test_two_sample_pvalue_not_floored_at_scipy_limit():
    # scipy's interpolated AD p-value is floored at 0.001 (scipy docs); with permutations the
    # p-value is limited only by the resolution 1/(permutations+1)
    rng = np.random.default_rng(3)
    x = rng.beta(0.867, 3.03, 300)
    y = 0.3 * np.sqrt(-2 * np.log(rng.random(300)))
    r = st.two_sample(x, y, permutations=499, rng=rng)
    assert r.ad_pvalue == pytest.approx(1 / 500)
    assert r.ks_pvalue < 1e-6            # asymptotic KS p is not clipped either


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

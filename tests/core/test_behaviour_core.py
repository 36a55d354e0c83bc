"""Domains, bootstrap intervals, tests and verdicts of the behaviour check."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import binom, ks_2samp, mannwhitneyu

from probewise.core import behaviour as b


def test_classify_depths_by_hand():
    # band 1.5-4.0 m at the probe: 1.0 fill, both ends and 3.0 band, 4.5 natural; no bound: out
    got = b.classify_depths(
        [1.0, 1.5, 3.0, 4.0, 4.5, 2.0],
        [1.5, 1.5, 1.5, 1.5, 1.5, np.nan],
        [4.0, 4.0, 4.0, 4.0, 4.0, np.nan],
    )
    assert got.tolist() == [b.FILL, b.BAND, b.BAND, b.BAND, b.NATURAL, b.LEFT_OUT]


def test_exact_tests_by_hand():
    # Fully separated samples of 3 and 3: U = 0, and both exact two-sided p-values are
    # 2 / C(6, 3) = 0.1 (hand count of the 20 equally likely orderings).
    values = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 10.0, 11.0, 12.0])
    domain = np.array([b.BAND] * 3 + [b.FILL] * 3 + [b.NATURAL] * 3)
    got = b.compare_domains(values, domain, b.seed_for(0, "x"), n_boot=50)
    assert got.mannwhitney_p[0] == pytest.approx(0.1)
    assert got.ks_p[0] == pytest.approx(0.1)


def test_tests_equal_scipy_on_fixed_samples():
    # scipy.stats.mannwhitneyu and ks_2samp, two-sided, defaults: the contract's p-values
    rng = np.random.default_rng(11)
    fill, band, nat = rng.normal(5, 1, 12), rng.normal(3, 1, 9), rng.normal(1, 1, 15)
    values = np.concatenate([fill, band, nat])
    domain = np.array([b.FILL] * 12 + [b.BAND] * 9 + [b.NATURAL] * 15)
    got = b.compare_domains(values, domain, b.seed_for(0, "x"), n_boot=50)
    assert got.mannwhitney_p == (
        pytest.approx(mannwhitneyu(band, fill, alternative="two-sided").pvalue),
        pytest.approx(mannwhitneyu(band, nat, alternative="two-sided").pvalue),
    )
    assert got.ks_p == (
        pytest.approx(ks_2samp(band, fill).pvalue),
        pytest.approx(ks_2samp(band, nat).pvalue),
    )
    assert got.n == (12, 9, 15)
    assert got.median == (
        pytest.approx(np.median(fill)),
        pytest.approx(np.median(band)),
        pytest.approx(np.median(nat)),
    )


def test_no_test_below_three_readings():
    values = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0])
    domain = np.array([b.BAND] * 3 + [b.FILL] * 2 + [b.NATURAL])
    got = b.compare_domains(values, domain, b.seed_for(0, "x"), n_boot=50)
    assert got.mannwhitney_p == (None, None) and got.ks_p == (None, None)
    assert got.verdict == b.CANNOT_TELL


def test_bootstrap_is_reproducible_with_a_seed():
    x = np.random.default_rng(3).lognormal(0, 1, 40)
    one = b.bootstrap_median_ci(x, b.seed_for(7, "qc"))
    two = b.bootstrap_median_ci(x, b.seed_for(7, "qc"))
    other = b.bootstrap_median_ci(x, b.seed_for(8, "qc"))
    assert one == two
    assert one != other
    assert one[0] <= np.median(x) <= one[1]


@pytest.mark.parametrize("k", [7, 8])
def test_bootstrap_medians_match_resampling(k):
    # The exact bootstrap distribution of the median (binomial form, Efron 1979, Annals of
    # Statistics 7(1), from memory), checked against plain resampling: for k odd, P(median* <=
    # x_(i)) = P(Binomial(k, i / k) >= (k + 1) / 2), the resample holding at least half its
    # values among the i smallest. For k even, against brute-force resampling (scipy-free).
    x = np.arange(1.0, k + 1.0)
    draws = b.bootstrap_medians(x, np.random.default_rng(1), 200_000)
    idx = np.random.default_rng(2).integers(0, k, size=(200_000, k))
    brute = np.median(x[idx], axis=1)
    for i in range(1, k + 1):
        got = np.mean(draws <= x[i - 1])
        assert got == pytest.approx(np.mean(brute <= x[i - 1]), abs=0.006)
        if k % 2:
            exact = binom.sf((k + 1) // 2 - 1, k, i / k)
            assert got == pytest.approx(exact, abs=0.006)


def test_bootstrap_of_a_constant_sample_is_that_value():
    assert b.bootstrap_median_ci(np.full(9, 2.5), b.seed_for(0, "c")) == (2.5, 2.5)


@pytest.mark.parametrize(
    "median, p, verdict",
    [
        ((10.0, 9.0, 1.0), (0.4, 0.001), b.LIKE_FILL),
        ((10.0, 2.0, 1.0), (0.001, 0.4), b.LIKE_NATURAL),
        ((10.0, 5.0, 1.0), (0.001, 0.001), b.IN_BETWEEN),
        ((10.0, 20.0, 1.0), (0.001, 0.001), b.UNLIKE_EITHER),
        ((10.0, 5.0, 1.0), (0.4, 0.4), b.CANNOT_TELL),
        # differs from the natural soil but lies nearer it: a weak fill sample is no likeness
        ((10.0, 2.0, 4.0), (0.07, 0.01), b.CANNOT_TELL),
        ((10.0, 5.0, 1.0), (None, 0.001), b.CANNOT_TELL),
    ],
)
def test_verdict_rule(median, p, verdict):
    assert b.verdict_of(median, p) == verdict


def test_overall_verdict():
    assert b.overall_verdict([b.LIKE_FILL, b.CANNOT_TELL, b.LIKE_FILL]) == b.LIKE_FILL
    assert b.overall_verdict([b.LIKE_FILL, b.LIKE_NATURAL]) == "mixed"
    assert b.overall_verdict([b.CANNOT_TELL]) == b.CANNOT_TELL

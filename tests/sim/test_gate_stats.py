"""The gate's statistics (sim.gate.stats): the success-rate lower bound, percentiles with
unmeasured values counted as the worst, two-sample tests and the regression test. Every check
names its source; random samples are test fixtures drawn from known distributions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats as st

from sim.gate.stats import limit_statistic, percentile_value, regression, success_lower_bound, two_sample


@pytest.mark.parametrize("n", [1, 10, 30, 100, 459])
def test_lower_bound_without_failures_is_alpha_to_the_1_over_n(n):
    # Clopper and Pearson, Biometrika 26(4), 1934: with k = n the one-sided bound solves
    # p^n = alpha, so p_L = alpha^(1/n)
    assert success_lower_bound(n, n, 0.95) == pytest.approx(0.05 ** (1.0 / n), rel=1e-12)


@pytest.mark.parametrize("n", [30, 100, 300])
def test_rule_of_three(n):
    # Hanley and Lippman-Hand, "If nothing goes wrong, is everything all right?", JAMA 249(13),
    # 1983: with no event in n trials the 95 % upper bound on the event rate is about 3/n
    # (exactly -ln(0.05)/n = 2.996/n to first order)
    lb = success_lower_bound(n, n, 0.95)
    assert abs((1.0 - lb) - 3.0 / n) < 0.2 / n


@pytest.mark.parametrize("k, n, conf", [(0, 10, 0.95), (7, 10, 0.95), (29, 30, 0.9), (95, 100, 0.99),
                                        (480, 500, 0.95)])
def test_lower_bound_against_scipy_exact_interval(k, n, conf):
    # reference library: scipy.stats.binomtest(...).proportion_ci(method="exact") (Clopper-Pearson);
    # and the definition: P(X >= k | n, p_L) = 1 - conf
    lb = success_lower_bound(k, n, conf)
    ref = st.binomtest(k, n, alternative="greater").proportion_ci(conf, method="exact").low
    assert lb == pytest.approx(ref, abs=1e-12)
    if k > 0:
        assert st.binom.sf(k - 1, n, lb) == pytest.approx(1.0 - conf, rel=1e-9)


def test_percentiles_and_unmeasured_values():
    x = np.arange(1.0, 101.0)
    # Hyndman and Fan, The American Statistician 50(4), 1996, type 7 (numpy's "linear"):
    # h = (N - 1) p + 1 = 99.01 -> x[99] + 0.01 (x[100] - x[99]) = 99.01
    assert limit_statistic(x, "max", "percentile", 99) == pytest.approx(99.01)
    # a lower limit met by 99 % of the runs is checked at the 1st percentile: 1 + 0.99 = 1.99
    assert limit_statistic(x, "min", "percentile", 99) == pytest.approx(1.99)
    assert limit_statistic(x, "max", "percentile", 99, "higher") == 100.0  # numpy's method
    assert limit_statistic(x, "max") == 100.0 and limit_statistic(x, "min") == 1.0
    assert limit_statistic(x, "max", "mean") == 50.5 and limit_statistic(x, "max", "median") == 50.5
    # unmeasured (NaN) counts as the worst (common practice, no source)
    y = np.array([1.0, 2.0, 3.0, np.nan])
    assert limit_statistic(y, "max") == math.inf and limit_statistic(y, "min") == -math.inf
    assert limit_statistic(y, "max", "percentile", 50) == 2.5  # [1, 2, 3, inf], h = 2.5
    assert limit_statistic(y, "max", "percentile", 90) == math.inf
    assert limit_statistic(y, "min", "percentile", 50) == 1.5  # [-inf, 1, 2, 3]
    assert percentile_value(np.array([1.0, np.inf]), 0.0) == 1.0


def test_two_sample_worked_values():
    # Darwin's Zea mays pairs (Fisher, The Design of Experiments, 1935), as in the
    # scipy.stats.wilcoxon documentation: two-sided exact p = 0.04125976...
    d = np.array([6, 8, 14, 16, 23, 24, 28, 29, 41, -48, 49, 56, 60, -67, 75], float)
    t = two_sample(np.zeros_like(d), d, paired=True)
    assert t.method == "wilcoxon" and t.p == pytest.approx(0.041259765625) and t.shift == 24.0
    # Mann and Whitney, Ann. Math. Statist. 18(1), 1947: every b above every a, n = m = 3: the
    # exact one-sided p is 1 / C(6, 3) = 0.05, two-sided 0.1
    r = two_sample([1.0, 2.0, 3.0], [4.0, 5.0, 6.0], paired=False)
    assert r.method == "mannwhitney" and r.p == pytest.approx(0.1) and r.shift == 3.0
    assert two_sample([1.0, 2.0, 3.0], [4.0, 5.0, 6.0], False, alternative="greater").p == \
        pytest.approx(0.05)
    # KS: disjoint samples of 3 each, exact two-sided p = 2 / C(6, 3) = 0.1 (scipy's exact
    # distribution; the statistic is 1)
    assert two_sample([1.0, 2.0, 3.0], [4.0, 5.0, 6.0], False, "ks").p == pytest.approx(0.1)
    # identical samples: no difference (p = 1), NaN dropped
    same = two_sample([1.0, 2.0, np.nan], [1.0, 2.0, np.nan], paired=True)
    assert same.p == 1.0 and same.n_a == 2
    assert two_sample([2.0, 2.0], [2.0, 2.0], paired=False).p == 1.0


def test_false_alarm_rate_is_the_significance_level():
    """Under no difference a level-alpha test rejects with probability alpha (the definition of
    a test's size; e.g. Lehmann and Romano, Testing Statistical Hypotheses, 3rd ed., 2005,
    ch. 3 [memory]). 250 null replicates at alpha = 0.05: the rejection count must lie in the
    99.9 % binomial range."""
    rng = np.random.default_rng(20250601)
    n_rep, alpha = 250, 0.05
    lo, hi = st.binom.ppf(0.0005, n_rep, alpha), st.binom.ppf(0.9995, n_rep, alpha)
    hits = {"paired": 0, "mannwhitney": 0, "ks": 0}
    for _ in range(n_rep):
        shared = rng.lognormal(0.0, 0.5, 30)  # the runs' common draws
        a = shared + rng.normal(0, 0.05, 30)
        b = shared + rng.normal(0, 0.05, 30)
        hits["paired"] += two_sample(a, b, paired=True).p < alpha
        c, d = rng.lognormal(0.0, 0.5, 40), rng.lognormal(0.0, 0.5, 40)
        hits["mannwhitney"] += two_sample(c, d, paired=False).p < alpha
        hits["ks"] += two_sample(c, d, paired=False, unpaired_test="ks").p < alpha
    for k, v in hits.items():
        if k == "ks":  # the exact KS test is conservative (size at most alpha)
            assert v <= hi, (k, v)
        else:
            assert lo <= v <= hi, (k, v, lo, hi)


def test_pairing_is_far_more_sensitive():
    """A small shift hidden in a large run-to-run spread: the paired test finds it, the unpaired
    one cannot (common practice, no source; the fixture's numbers: spread 1, shift 0.05, paired
    noise 0.01)."""
    rng = np.random.default_rng(7)
    x = rng.normal(10.0, 1.0, 50)
    a = x + rng.normal(0, 0.01, 50)
    b = x + 0.05 + rng.normal(0, 0.01, 50)
    assert two_sample(a, b, paired=True).p < 1e-6
    assert two_sample(a, b, paired=False).p > 0.5


def test_regression_one_run_each():
    r = regression([1.2], [1.0], "lower", tolerance=0.1)
    assert r.worse and r.worsening == pytest.approx(0.2) and r.allowance == 0.1 and r.method == "difference"
    assert not regression([1.2], [1.0], "lower", tolerance=0.1, tolerance_rel=0.15).worse  # 0.1 + 0.15
    assert not regression([0.8], [1.0], "lower").worse  # better
    assert regression([80.0], [100.0], "higher", tolerance=5.0).worse  # a separation that shrank
    assert regression([np.nan], [1.0], "lower").worse  # unmeasured counts as the worst
    assert not regression([np.nan], [np.nan], "lower").worse


def test_regression_campaigns():
    """Shifted-null one-sided tests: 2 % worse with a 5 % allowance passes, 10 % worse fails,
    paired and unpaired (fixture draws; the p-values are far from the level either way)."""
    rng = np.random.default_rng(11)
    base = rng.lognormal(np.log(0.2), 0.2, 60)
    for factor, worse in ((1.0, False), (1.02, False), (1.10, True)):
        cand = base * factor * (1 + rng.normal(0, 0.002, 60))
        r = regression(cand, base, "lower", tolerance_rel=0.05, paired=True, significance=0.01)
        assert r.worse == worse and r.method == "wilcoxon", (factor, r)
    other = rng.lognormal(np.log(0.2), 0.05, 300)
    assert not regression(other * 1.02, rng.lognormal(np.log(0.2), 0.05, 300), "lower",
                          tolerance_rel=0.05).worse
    r = regression(other * 1.10, rng.lognormal(np.log(0.2), 0.05, 300), "lower", tolerance_rel=0.05)
    assert r.worse and r.method == "mannwhitney" and r.p < 1e-6

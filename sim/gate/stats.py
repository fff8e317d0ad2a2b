"""The statistics of the gate (numpy and scipy.stats only): percentiles with NaN taken as the
worst value, the one-sided Clopper-Pearson lower bound of a success rate, two-sample tests
(Wilcoxon signed-rank for paired runs, Mann-Whitney U or Kolmogorov-Smirnov for unpaired ones)
and the one-sided regression test "worse than the baseline by more than a tolerance".
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats as _st

__all__ = ["PERCENTILE_METHODS", "success_lower_bound", "fill_worst", "percentile_value", "limit_statistic",
           "TestResult", "two_sample", "RegressionResult", "regression"]

PERCENTILE_METHODS = ("linear", "lower", "higher", "nearest", "midpoint", "inverted_cdf",
                      "averaged_inverted_cdf", "closest_observation", "interpolated_inverted_cdf",
                      "hazen", "weibull", "median_unbiased", "normal_unbiased")
"""The ``method`` values of ``numpy.percentile`` (numpy >= 1.22); ``linear`` (numpy's default,
type 7 of Hyndman and Fan, The American Statistician 50(4), 1996) is the gate's default."""

_HUGE = 1e300


def success_lower_bound(k: int, n: int, confidence: float = 0.95) -> float:
    """One-sided lower confidence bound of a success probability (Clopper-Pearson, exact).

    The bound p_L solves P(X >= k | n, p_L) = 1 - confidence for X ~ Binomial(n, p_L), i.e.
    p_L = Beta quantile (1 - confidence; k, n - k + 1) (Clopper and Pearson, Biometrika 26(4),
    1934). With no failure (k = n) it is (1 - confidence)^(1/n).

    Parameters
    ----------
    k : int
        Successes, 0 <= k <= n.
    n : int
        Runs, >= 1.
    confidence : float
        In (0, 1), e.g. 0.95.

    Returns
    -------
    float
        In [0, 1); 0 when k = 0, NaN when n = 0.
    """
    if n <= 0:
        return float("nan")
    if k <= 0:
        return 0.0
    return float(_st.beta.ppf(1.0 - confidence, k, n - k + 1))


def fill_worst(values, side: str) -> np.ndarray:
    """NaN (an unmeasured value: e.g. never inside the tolerance box, or a failed run) replaced
    by the worst value for a limit of this ``side`` (``"max"``: +inf, ``"min"``: -inf)."""
    x = np.asarray(values, float).copy()
    x[np.isnan(x)] = np.inf if side == "max" else -np.inf
    return x


def percentile_value(x, q: float, method: str = "linear") -> float:
    """``numpy.percentile`` of ``x`` with +-inf kept in order (numpy alone interpolates inf into
    NaN); +-inf when an infinite value carries weight."""
    x = np.asarray(x, float)
    # numpy interpolates inf into NaN; a huge finite stand-in keeps the order, then maps back
    y = np.clip(x, -_HUGE, _HUGE)
    r = float(np.percentile(y, q, method=method))
    return float(np.sign(r) * np.inf) if abs(r) >= 1e250 else r


def limit_statistic(values, side: str, statistic: str = "worst", percentile: float | None = None,
                    method: str = "linear") -> float:
    """The statistic a limit is checked against, over the runs.

    Parameters
    ----------
    values : (N,) array
        One value per run (NaN: unmeasured, taken as the worst).
    side : str
        ``"max"`` (upper limit: large is bad) or ``"min"`` (lower limit).
    statistic : str
        ``"worst"`` (largest for an upper limit, smallest for a lower one), ``"mean"``,
        ``"median"`` or ``"percentile"``.
    percentile : float, optional
        For ``"percentile"``: P in [0, 100], the share of runs (percent) that must meet the
        limit: the P-th percentile for an upper limit, the (100 - P)-th for a lower one.
    method : str
        ``numpy.percentile`` method (:data:`PERCENTILE_METHODS`).

    Returns
    -------
    float
        +-inf when unmeasured values decide it; NaN without runs.
    """
    x = fill_worst(values, side)
    if x.size == 0:
        return float("nan")
    if statistic == "worst":
        return float(np.max(x) if side == "max" else np.min(x))
    if statistic == "mean":
        return float(np.mean(x))
    if statistic == "median":
        return percentile_value(x, 50.0, method)
    if statistic == "percentile":
        q = float(percentile) if side == "max" else 100.0 - float(percentile)
        return percentile_value(x, q, method)
    raise ValueError(f"unknown statistic {statistic!r}")


@dataclass
class TestResult:
    """A two-sample comparison of B against A.

    Attributes
    ----------
    method : str
        ``"wilcoxon"`` (paired), ``"mannwhitney"`` or ``"ks"`` (unpaired), ``""`` (none: too
        few values).
    p : float
        p-value (NaN when not computed).
    shift : float
        Median of B - A over the pairs (paired) or median(B) - median(A) (unpaired).
    n_a, n_b : int
        Values used (NaN dropped).
    """

    __test__ = False  # not a pytest test class

    method: str
    p: float
    shift: float
    n_a: int
    n_b: int


def two_sample(a, b, paired: bool, unpaired_test: str = "mannwhitney",
               alternative: str = "two-sided") -> TestResult:
    """Compare the runs of B with those of A (NaN dropped; pairs with a NaN dropped when paired).

    Paired: Wilcoxon signed-rank test on B - A (``scipy.stats.wilcoxon``, zero differences
    dropped); unpaired: Mann-Whitney U (``scipy.stats.mannwhitneyu``) or two-sample
    Kolmogorov-Smirnov (``scipy.stats.ks_2samp``). Identical samples give p = 1.

    Parameters
    ----------
    a, b : (N,) arrays
    paired : bool
        Run k of A and run k of B share their random draws (same length needed).
    unpaired_test : str
        ``"mannwhitney"`` or ``"ks"``.
    alternative : str
        ``"two-sided"``, ``"greater"`` (B larger than A) or ``"less"``.
    """
    a, b = np.asarray(a, float).ravel(), np.asarray(b, float).ravel()
    if paired:
        if a.shape != b.shape:
            raise ValueError("a paired comparison needs as many runs on both sides")
        ok = ~(np.isnan(a) | np.isnan(b))
        d = b[ok] - a[ok]
        n = int(ok.sum())
        if n == 0:
            return TestResult("", float("nan"), float("nan"), 0, 0)
        shift = float(np.median(d))
        if not np.any(d != 0):
            return TestResult("wilcoxon", 1.0, shift, n, n)
        p = float(_st.wilcoxon(d, zero_method="wilcox", alternative=alternative).pvalue)
        return TestResult("wilcoxon", p, shift, n, n)
    a, b = a[~np.isnan(a)], b[~np.isnan(b)]
    if a.size == 0 or b.size == 0:
        return TestResult("", float("nan"), float("nan"), int(a.size), int(b.size))
    shift = float(np.median(b) - np.median(a))
    if np.all(a == a[0]) and np.all(b == a[0]):
        return TestResult(unpaired_test, 1.0, shift, int(a.size), int(b.size))
    if unpaired_test == "ks":
        p = float(_st.ks_2samp(b, a, alternative={"two-sided": "two-sided", "greater": "less",
                                                  "less": "greater"}[alternative]).pvalue)
    elif unpaired_test == "mannwhitney":
        p = float(_st.mannwhitneyu(b, a, alternative=alternative).pvalue)
    else:
        raise ValueError(f"unknown unpaired test {unpaired_test!r}")
    return TestResult(unpaired_test, p, shift, int(a.size), int(b.size))


@dataclass
class RegressionResult:
    """Is the candidate worse than the baseline by more than the allowance?

    Attributes
    ----------
    worsening : float
        How much worse the candidate is, in the quantity's units (> 0: worse): the difference for
        one run each; the median of the paired differences, or the difference of medians.
    allowance : float
        ``tolerance + tolerance_rel * |median of the baseline|``.
    worse : bool
        One run each: ``worsening > allowance``; campaigns: the one-sided test (shifted by the
        allowance) rejects at ``significance``.
    p : float
        p-value of the one-sided test (NaN for one run each).
    method : str
        ``"difference"``, ``"wilcoxon"``, ``"mannwhitney"``.
    n_cand, n_base : int
    """

    worsening: float
    allowance: float
    worse: bool
    p: float
    method: str
    n_cand: int
    n_base: int


def regression(cand, base, better: str, tolerance: float = 0.0, tolerance_rel: float = 0.0,
               paired: bool = False, significance: float = 0.01) -> RegressionResult:
    """One-sided check that the candidate is not worse than the baseline beyond an allowance.

    NaN (unmeasured) counts as the worst value on either side. One run each: a plain difference.
    Campaigns: paired, Wilcoxon signed-rank on (worse-direction difference - allowance) with
    alternative "greater"; unpaired, Mann-Whitney U of the candidate against the baseline shifted
    by the allowance, alternative "greater" (the shifted-null form of both tests, e.g. Hollander,
    Wolfe and Chicken, Nonparametric Statistical Methods, 3rd ed., 2014, ch. 3-4 [memory]).

    Parameters
    ----------
    cand, base : (N,), (M,) arrays
    better : str
        ``"lower"`` or ``"higher"``.
    tolerance : float
        Absolute allowance, the quantity's units.
    tolerance_rel : float
        Relative allowance, times |median of the baseline| (added to ``tolerance``, as in
        ``numpy.isclose``).
    paired : bool
    significance : float
        Level below which a p-value calls the candidate worse.
    """
    s = 1.0 if better == "lower" else -1.0
    c = s * np.asarray(cand, float).ravel()
    b = s * np.asarray(base, float).ravel()
    fb = b[~np.isnan(b)]
    allowance = float(tolerance + tolerance_rel * (abs(np.median(fb)) if fb.size else 0.0))
    finite = np.concatenate([c[np.isfinite(c)], b[np.isfinite(b)] + allowance])
    big = (float(np.max(np.abs(finite))) if finite.size else 0.0) * 2.0 + abs(allowance) + 1.0
    if paired and c.shape == b.shape:
        both = np.isnan(c) & np.isnan(b)
        c, b = c[~both], b[~both]
    c = np.where(np.isnan(c), big, c)
    b = np.where(np.isnan(b), big, b)
    if c.size == 0 or b.size == 0:
        return RegressionResult(0.0, allowance, False, float("nan"), "", int(c.size), int(b.size))
    if c.size == 1 and b.size == 1:
        w = float(c[0] - b[0])
        return RegressionResult(w, allowance, bool(w > allowance), float("nan"), "difference", 1, 1)
    if paired:
        d = c - b
        dd = d - allowance
        if not np.any(dd != 0):
            p = 1.0
        else:
            p = float(_st.wilcoxon(dd, zero_method="wilcox", alternative="greater").pvalue)
        return RegressionResult(float(np.median(d)), allowance, bool(p < significance), p,
                                "wilcoxon", int(c.size), int(b.size))
    w = float(np.median(c) - np.median(b))
    bs = b + allowance
    if np.all(c == c[0]) and np.all(bs == c[0]):
        p = 1.0
    else:
        p = float(_st.mannwhitneyu(c, bs, alternative="greater").pvalue)
    return RegressionResult(w, allowance, bool(p < significance), p, "mannwhitney", int(c.size),
                            int(b.size))

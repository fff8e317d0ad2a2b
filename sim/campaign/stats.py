"""Campaign statistics (pure numpy/scipy): percentiles, success-rate confidence intervals, the
per-axis bounds of the final-error covariance ellipsoid, and error-budget contributions.

Sources: percentiles are numpy's default (linear interpolation between order statistics, type 7
of Hyndman and Fan, "Sample quantiles in statistical packages", The American Statistician 50(4),
1996); the Clopper-Pearson interval (Clopper and Pearson, "The use of confidence or fiducial limits
illustrated in the case of the binomial", Biometrika 26(4), 1934) and the Wilson score interval
(Wilson, "Probable inference, the law of succession, and statistical inference", JASA 22, 1927)
are scipy's ``binomtest(...).proportion_ci``; the ellipsoid bound is the support function of
{x : (x - m)^T P^-1 (x - m) <= c} along a unit vector u, m.u + sqrt(c u^T P u), with c the
chi-square quantile of the confidence level for n dimensions (the n-dimensional confidence region
of a Gaussian; e.g. Mardia, Kent and Bibby, Multivariate Analysis, 1979 [memory for the section]).
"""

from __future__ import annotations

import numpy as np

__all__ = ["PERCENTILES", "percentiles", "success_interval", "support", "axis_bounds",
           "paired_rms", "rss"]

PERCENTILES = (50, 90, 95, 99)


def percentiles(x, qs=PERCENTILES) -> dict:
    """``{"n": finite values, "p50": ..., ..., "max": ...}`` of the finite values of ``x`` (NaN
    without any)."""
    a = np.asarray(x, float).ravel()
    a = a[np.isfinite(a)]
    out: dict = {"n": int(a.size)}
    for q in qs:
        out[f"p{q:g}"] = float(np.percentile(a, q)) if a.size else float("nan")
    out["max"] = float(a.max()) if a.size else float("nan")
    return out


def success_interval(k: int, n: int, confidence: float = 0.95,
                     method: str = "clopper_pearson") -> tuple[float, float]:
    """Two-sided confidence interval on a success probability from ``k`` successes in ``n`` runs.

    Parameters
    ----------
    k, n : int
    confidence : float
        In (0, 1).
    method : str
        ``clopper_pearson`` (exact, conservative) or ``wilson`` (score interval).

    Returns
    -------
    (low, high) : float
        In [0, 1]; (nan, nan) when ``n = 0``.
    """
    if n <= 0:
        return float("nan"), float("nan")
    from scipy.stats import binomtest

    m = {"clopper_pearson": "exact", "wilson": "wilson"}[method]
    ci = binomtest(int(k), int(n)).proportion_ci(confidence_level=float(confidence), method=m)
    return float(ci.low), float(ci.high)


def support(P, c: float, u) -> float:
    """The support function sqrt(c u^T P u) of the ellipsoid {x : x^T P^-1 x <= c} along ``u``
    (the largest u.x over the ellipsoid, for a unit vector u)."""
    u = np.asarray(u, float)
    return float(np.sqrt(c * u @ np.asarray(P, float) @ u))


def axis_bounds(X, confidence: float = 0.95) -> dict:
    """Per-axis bounds of the sample covariance ellipsoid of the rows of ``X``.

    Parameters
    ----------
    X : (N, n) array
        One sample per row (rows with NaN are dropped).
    confidence : float
        Probability content of the ellipsoid for a Gaussian with the sample mean and covariance.

    Returns
    -------
    dict
        ``n`` samples used, ``mean`` (n,), ``cov`` (n, n) (ddof = 1), ``c`` = chi2.ppf(confidence,
        n), ``half`` (n,) = sqrt(c P_ii), ``lower`` = mean - half, ``upper`` = mean + half (NaN
        with fewer than 2 samples).
    """
    from scipy.stats import chi2

    X = np.asarray(X, float)
    X = X[np.all(np.isfinite(X), axis=1)] if X.size else X.reshape(0, X.shape[-1] if X.ndim == 2 else 0)
    n_dim = X.shape[1]
    c = float(chi2.ppf(confidence, n_dim))
    if X.shape[0] < 2:
        nan = np.full(n_dim, np.nan)
        return dict(n=int(X.shape[0]), mean=X.mean(axis=0) if len(X) else nan,
                    cov=np.full((n_dim, n_dim), np.nan), c=c, half=nan, lower=nan, upper=nan)
    mean = X.mean(axis=0)
    P = np.cov(X, rowvar=False, ddof=1).reshape(n_dim, n_dim)
    half = np.sqrt(c * np.clip(np.diag(P), 0.0, None))
    return dict(n=int(X.shape[0]), mean=mean, cov=P, c=c, half=half, lower=mean - half,
                upper=mean + half)


def paired_rms(x, ref) -> float:
    """RMS over runs of ``x - ref`` (same draw, finite pairs only): a source's contribution
    against the all-off case."""
    x, ref = np.asarray(x, float), np.asarray(ref, float)
    d = x - ref
    d = d[np.isfinite(d)]
    return float(np.sqrt(np.mean(d * d))) if d.size else float("nan")


def rss(values) -> float:
    """Root-sum-square of the finite values."""
    a = np.asarray(values, float)
    a = a[np.isfinite(a)]
    return float(np.sqrt(np.sum(a * a))) if a.size else float("nan")

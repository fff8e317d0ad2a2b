"""Statistics of the campaign figures: sample covariance, confidence ellipse and ellipsoid bounds,
empirical CDFs, percentile bands (numpy and scipy.stats only).

The confidence region of a Gaussian of covariance P in n dimensions at probability p is the
ellipsoid ``x^T P^-1 x <= chi2.ppf(p, n)``; its extent along axis i (its support function in the
direction e_i) is ``sqrt(chi2.ppf(p, n) * P_ii)``, the per-axis performance bound.
"""

from __future__ import annotations

import numpy as np
from scipy.stats import chi2

__all__ = ["sample_mean_cov", "axis_bounds", "ellipse_points", "ecdf", "percentile_bands",
           "finite_rows"]


def finite_rows(x: np.ndarray) -> np.ndarray:
    """The rows of ``x`` (N, k) without NaN or inf."""
    x = np.asarray(x, float)
    if x.ndim == 1:
        return x[np.isfinite(x)]
    return x[np.all(np.isfinite(x), axis=1)]


def sample_mean_cov(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sample mean (k,) and unbiased sample covariance (k, k) of the rows of ``x`` (N, k)."""
    x = np.asarray(x, float)
    if x.shape[0] < 2:
        k = x.shape[1]
        return (x.mean(axis=0) if x.shape[0] else np.full(k, np.nan)), np.full((k, k), np.nan)
    return x.mean(axis=0), np.atleast_2d(np.cov(x, rowvar=False, ddof=1))


def axis_bounds(cov: np.ndarray, p: float, n: int | None = None) -> np.ndarray:
    """Per-axis half-extent of the n-dimensional confidence ellipsoid at probability ``p``.

    Parameters
    ----------
    cov : (k, k) covariance.
    p : float in (0, 1).
    n : int, optional
        Dimension of the confidence region (default k).

    Returns
    -------
    (k,) ``sqrt(chi2.ppf(p, n) * diag(cov))``.
    """
    cov = np.atleast_2d(np.asarray(cov, float))
    n = cov.shape[0] if n is None else int(n)
    return np.sqrt(chi2.ppf(p, n) * np.diag(cov))


def ellipse_points(mean: np.ndarray, cov: np.ndarray, p: float, n_points: int = 241) -> np.ndarray:
    """Boundary of the 2-D confidence ellipse ``(x - m)^T P^-1 (x - m) = chi2.ppf(p, 2)``.

    Returns
    -------
    (n_points, 2) closed polygon (first point repeated at the end); NaN for a singular or
    undefined covariance.
    """
    cov = np.asarray(cov, float)
    if not np.all(np.isfinite(cov)):
        return np.full((n_points, 2), np.nan)
    w, v = np.linalg.eigh(cov)
    w = np.clip(w, 0.0, None)
    s = np.sqrt(chi2.ppf(p, 2))
    th = np.linspace(0.0, 2.0 * np.pi, n_points)
    circle = np.stack((np.cos(th), np.sin(th)), axis=1)
    return np.asarray(mean, float)[None, :] + s * (circle * np.sqrt(w)[None, :]) @ v.T


def ecdf(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Empirical CDF of the finite values of ``x``: sorted values and ``k / N`` (k = 1..N)."""
    xs = np.sort(finite_rows(np.asarray(x, float).reshape(-1)))
    return xs, np.arange(1, xs.size + 1) / max(xs.size, 1)


def percentile_bands(values: np.ndarray, groups: np.ndarray, q=(5, 25, 50, 75, 95)
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Percentiles of ``values`` per group.

    Returns
    -------
    (G,) group keys (sorted), (G, len(q)) percentiles (NaN for a group without finite values),
    (G,) number of finite values per group.
    """
    values = np.asarray(values, float)
    groups = np.asarray(groups)
    keys = np.unique(groups)
    out = np.full((keys.size, len(q)), np.nan)
    n = np.zeros(keys.size, int)
    for i, g in enumerate(keys):
        v = values[(groups == g) & np.isfinite(values)]
        n[i] = v.size
        if v.size:
            out[i] = np.percentile(v, q)
    return keys, out, n

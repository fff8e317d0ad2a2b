"""Predicted versus measured final errors: a prediction against a Monte Carlo campaign summary.

For each deputy the campaign's final mean-ROE errors (``/metrics/<deputy>/final_error_m`` of
:mod:`sim.campaign.summary`, the runs with finite values) give a sample mean ``m`` and covariance
``S`` (N - 1 in the denominator). The measured per-axis bound is the same support function the
prediction uses, ``sqrt(chi2_6(p) S_ii)`` about ``m``, so the ratio predicted / measured of the
half-widths equals the ratio of the per-axis standard deviations. A second, distribution-free
measure is also given: the half-width along each axis of the fraction ``p`` of runs nearest the
sample mean in Mahalanobis distance (``empirical_half_width_m``).

Sampling band: if the runs were draws of a Gaussian with the predicted variance ``s^2``, the
sample variance ``S_ii`` follows ``s^2 chi2_{N-1} / (N - 1)`` (the chi-square distribution of the
sample variance of normal samples; Cochran's theorem, e.g. Casella & Berger, Statistical
Inference, 2nd ed., 2002, Thm 5.3.1 [memory for the theorem number]), so the ratio
``s / sqrt(S_ii)`` lies in ``[sqrt((N-1)/chi2.ppf(1-a/2, N-1)), sqrt((N-1)/chi2.ppf(a/2, N-1))]``
with probability ``1 - a``. A ratio outside that band is a finding: the error is not linear, or the
linear model misses a source (e.g. a ``monte_carlo_only`` one) or the truth's model difference.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.stats import chi2

from guidance.interface import ROE_NAMES
from guidance.lincov import support_bounds

__all__ = [
    "DeputyComparison",
    "compare_with_summary",
    "comparison_table",
    "sigma_ratio_band",
    "write_comparison",
]


@dataclass
class DeputyComparison:
    """Predicted versus measured final mean-ROE errors of one deputy (a-scaled m, axis order
    :data:`guidance.interface.ROE_NAMES`).

    Attributes
    ----------
    name : str
    case : str
        The prediction case compared (the deputy's primary case).
    n_runs : int
        Runs with a finite final error.
    predicted_mean_m, predicted_half_width_m, predicted_sigma_m : np.ndarray, shape (6,)
    measured_mean_m, measured_half_width_m, measured_sigma_m : np.ndarray, shape (6,)
    measured_cov_m2 : np.ndarray, shape (6, 6)
    empirical_half_width_m : np.ndarray, shape (6,)
    ratio : np.ndarray, shape (6,)
        ``predicted_half_width_m / measured_half_width_m`` (NaN where the measured is 0).
    band_lo, band_hi : float
        Sampling band of ``ratio`` at ``1 - band_alpha`` (module docstring).
    band_alpha : float
    consistent : np.ndarray, shape (6,) of bool
        ``band_lo <= ratio <= band_hi``.
    """

    name: str
    case: str
    n_runs: int
    predicted_mean_m: np.ndarray
    predicted_half_width_m: np.ndarray
    predicted_sigma_m: np.ndarray
    measured_mean_m: np.ndarray
    measured_cov_m2: np.ndarray
    measured_sigma_m: np.ndarray
    measured_half_width_m: np.ndarray
    empirical_half_width_m: np.ndarray
    ratio: np.ndarray
    band_lo: float
    band_hi: float
    band_alpha: float
    consistent: np.ndarray


def sigma_ratio_band(n_runs: int, alpha: float = 0.01) -> tuple[float, float]:
    """Band of ``true sigma / sample sigma`` holding with probability ``1 - alpha`` for ``n_runs``
    Gaussian samples (chi-square distribution of the sample variance, ``scipy.stats.chi2``)."""
    k = int(n_runs) - 1
    if k < 1:
        return float("nan"), float("nan")
    return (math.sqrt(k / chi2.ppf(1.0 - alpha / 2.0, k)), math.sqrt(k / chi2.ppf(alpha / 2.0, k)))


def _empirical(err, mean, cov, p):
    d = err - mean
    Pinv = np.linalg.pinv(cov)
    m2 = np.einsum("ki,ij,kj->k", d, Pinv, d)
    n_in = max(1, int(math.ceil(p * err.shape[0])))
    inside = np.argsort(m2)[:n_in]
    return np.max(np.abs(d[inside]), axis=0)


def compare_with_summary(pred, summary, band_alpha: float = 0.01) -> dict:
    """Compare a prediction with a campaign summary, deputy by deputy.

    Parameters
    ----------
    pred : sim.lincov.predict.Prediction
    summary : sim.campaign.summary.CampaignSummary
    band_alpha : float
        Two-sided probability outside the sampling band.

    Returns
    -------
    dict
        Deputy name -> :class:`DeputyComparison`, for the deputies in both (a deputy with fewer
        than 2 finite runs is left out).
    """
    out = {}
    p = pred.confidence
    for name, dp in pred.deputies.items():
        if name not in summary.metrics or "final_error_m" not in summary.metrics[name]:
            continue
        err = np.asarray(summary.metrics[name]["final_error_m"], dtype=float).reshape(-1, 6)
        err = err[np.all(np.isfinite(err), axis=1)]
        n = err.shape[0]
        if n < 2:
            continue
        c = dp.case
        mean = err.mean(axis=0)
        S = np.cov(err, rowvar=False, ddof=1)
        meas_hw = support_bounds(S, p, 6)
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = np.where(meas_hw > 0, c.half_width_m / np.where(meas_hw > 0, meas_hw, 1.0), np.nan)
        lo, hi = sigma_ratio_band(n, band_alpha)
        out[name] = DeputyComparison(
            name, c.name, n, c.mean_m.copy(), c.half_width_m.copy(), c.sigma_m, mean, S,
            np.sqrt(np.clip(np.diag(S), 0.0, None)), meas_hw, _empirical(err, mean, S, p), ratio,
            lo, hi, band_alpha, (ratio >= lo) & (ratio <= hi))
    return out


def write_comparison(group, comparison: dict) -> None:
    """Store comparisons under an h5py group (``/comparison/<deputy>/...``, every dataset with
    ``units``; attributes ``case``, ``n_runs``, ``band_lo``, ``band_hi``, ``band_alpha``)."""
    for name, c in comparison.items():
        g = group.create_group(name)
        g.attrs.update(case=c.case, n_runs=c.n_runs, band_lo=c.band_lo, band_hi=c.band_hi,
                       band_alpha=c.band_alpha)
        for key, units in (("predicted_mean_m", "m"), ("predicted_half_width_m", "m"),
                           ("predicted_sigma_m", "m"), ("measured_mean_m", "m"),
                           ("measured_cov_m2", "m^2"), ("measured_sigma_m", "m"),
                           ("measured_half_width_m", "m"), ("empirical_half_width_m", "m"),
                           ("ratio", "1")):
            g.create_dataset(key, data=getattr(c, key)).attrs["units"] = units
        g.create_dataset("consistent", data=c.consistent.astype(np.int8)).attrs["units"] = "1"


def comparison_table(comparison: dict, confidence: float) -> list[str]:
    """Lines of the terminal table: per deputy and axis the predicted and measured half-widths
    and means, the ratio and whether it is inside the sampling band."""
    lines = []
    for name, c in comparison.items():
        lines.append(f"{name}: predicted ({c.case}) vs Monte Carlo ({c.n_runs} runs), "
                     f"{100 * confidence:g} % bounds; ratio band at {100 * (1 - c.band_alpha):g} %: "
                     f"[{c.band_lo:.3f}, {c.band_hi:.3f}]")
        lines.append(f"  {'axis':<8} {'pred +-m':>11} {'meas +-m':>11} {'ratio':>7} {'band':>5} "
                     f"{'pred mean':>11} {'meas mean':>11} {'empir. +-m':>11}")
        for i, ax in enumerate(ROE_NAMES):
            r = c.ratio[i]
            lines.append(f"  {ax:<8} {c.predicted_half_width_m[i]:11.4g} {c.measured_half_width_m[i]:11.4g} "
                         f"{r:7.3f} {'in' if c.consistent[i] else 'OUT':>5} "
                         f"{c.predicted_mean_m[i]:11.4g} {c.measured_mean_m[i]:11.4g} "
                         f"{c.empirical_half_width_m[i]:11.4g}")
    return lines

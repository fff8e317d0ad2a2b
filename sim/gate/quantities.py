"""The quantities the gate compares and checks: every scalar per-deputy metric of
:class:`sim.judge.metrics.DeputyMetrics`, the final-error components derived from
``final_error_m``, and the run-level counts of a run or campaign. Names, units and which
direction is better.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from sim.campaign.summary import scalar_metric_names
from sim.log.recorder import units_for

__all__ = ["Quantity", "ROE_COMPONENTS", "deputy_quantities", "RUN_QUANTITIES", "quantity",
           "all_names", "deputy_value", "summary_values", "DEFAULT_COMPARE"]

ROE_COMPONENTS = ("da", "dlambda", "dex", "dey", "dix", "diy")


@dataclass(frozen=True)
class Quantity:
    """A comparable quantity.

    Attributes
    ----------
    name : str
    units : str
        ``"1"`` dimensionless.
    better : str or None
        ``"lower"``, ``"higher"``, or None (a signed error: neither; use its absolute value).
    text : str
    level : str
        ``"deputy"`` (one value per deputy and run) or ``"run"`` (one per run or campaign).
    """

    name: str
    units: str
    better: str | None
    text: str
    level: str = "deputy"


_BETTER = {
    "dv_total_mps": ("lower", "total executed delta-v"),
    "propellant_used_kg": ("lower", "propellant used"),
    "n_burns": ("lower", "number of executed burns"),
    "n_switches": ("lower", "number of attitude switches"),
    "final_error_norm_m": ("lower", "norm of the final mean-ROE error"),
    "max_error_after_convergence_m": ("lower", "largest error norm after entering the tolerance box"),
    "time_to_tolerance_s": ("lower", "time to enter the tolerance box and stay in it"),
    "reached_deadline": ("higher", "the run reached the deadline (1) or not (0)"),
    "min_distance_m": ("higher", "minimum distance to the chief"),
    "min_rn_separation_m": ("higher", "minimum radial/normal separation from the chief"),
    "min_distance_any_m": ("higher", "minimum distance to any other spacecraft"),
    "t_min_distance_any_s": (None, "time of the closest approach"),
    "t_min_rn_separation_s": (None, "time of the minimum radial/normal separation"),
    "keep_out_violated": ("lower", "keep-out radius violated (1) or not (0)"),
    "rn_separation_violated": ("lower", "radial/normal separation below its threshold (1) or not (0)"),
    "err_de_m": ("lower", "final relative-eccentricity error magnitude, a-scaled"),
    "err_di_m": ("lower", "final relative-inclination error magnitude, a-scaled"),
}


def deputy_quantities() -> dict[str, Quantity]:
    """Per-deputy quantities: the scalar metrics, ``err_<component>_m`` (signed final error per
    ROE component, a-scaled m) and ``err_de_m`` / ``err_di_m`` (magnitudes of the e and i
    vector errors)."""
    out: dict[str, Quantity] = {}
    for n in scalar_metric_names():
        better, text = _BETTER.get(n, (None, n.replace("_", " ")))
        out[n] = Quantity(n, units_for(n) or "1", better, text)
    for c in ROE_COMPONENTS:
        n = f"err_{c}_m"
        out[n] = Quantity(n, "m", None, f"final a {c} error (truth mean ROE minus target), signed")
    for n in ("err_de_m", "err_di_m"):
        out[n] = Quantity(n, "m", _BETTER[n][0], _BETTER[n][1])
    return out


RUN_QUANTITIES = {
    "runs_failed": Quantity("runs_failed", "runs", "lower",
                            "runs with status failed or missing", "run"),
    "runs_not_ok": Quantity("runs_not_ok", "runs", "lower",
                            "runs that did not end ok (failed, missing or stopped by an event)",
                            "run"),
    "success_rate": Quantity("success_rate", "1", "higher",
                             "fraction of runs that succeeded, with its lower confidence bound",
                             "run"),
}
"""Run-level quantities (one per run log or campaign)."""

DEFAULT_COMPARE = ("dv_total_mps", "propellant_used_kg", "n_burns", "n_switches", "err_da_m",
                   "err_dlambda_m", "err_de_m", "err_di_m", "final_error_norm_m",
                   "time_to_tolerance_s", "max_error_after_convergence_m", "min_distance_any_m",
                   "min_rn_separation_m", "keep_out_violated", "rn_separation_violated")
"""What ``covey compare`` shows unless ``--metric`` is given."""


def all_names() -> list[str]:
    return list(deputy_quantities()) + list(RUN_QUANTITIES)


def quantity(name: str) -> Quantity:
    """The quantity called ``name`` (KeyError if none)."""
    q = deputy_quantities()
    if name in q:
        return q[name]
    return RUN_QUANTITIES[name]


def deputy_value(m: Mapping, name: str) -> float:
    """One quantity from a ``DeputyMetrics.as_dict()`` mapping (bools as 0/1, missing as NaN)."""
    fe = m.get("final_error_m")
    if name.startswith("err_") and name.endswith("_m") and name[4:-2] in ROE_COMPONENTS:
        return float(fe[ROE_COMPONENTS.index(name[4:-2])]) if fe is not None else float("nan")
    if name in ("err_de_m", "err_di_m"):
        if fe is None:
            return float("nan")
        j = 2 if name == "err_de_m" else 4
        return float(np.hypot(fe[j], fe[j + 1]))
    v = m.get(name)
    if v is None or isinstance(v, (str, dict, list)):
        return float("nan")
    return float(v)


def summary_values(metrics: Mapping[str, np.ndarray], name: str, n: int) -> np.ndarray:
    """One quantity of one deputy from a campaign summary's ``metrics[deputy]`` arrays, (N,)."""
    fe = metrics.get("final_error_m")
    fe = np.asarray(fe, float).reshape(-1, 6) if fe is not None else np.full((n, 6), np.nan)
    if name.startswith("err_") and name.endswith("_m") and name[4:-2] in ROE_COMPONENTS:
        return fe[:, ROE_COMPONENTS.index(name[4:-2])].copy()
    if name in ("err_de_m", "err_di_m"):
        j = 2 if name == "err_de_m" else 4
        return np.hypot(fe[:, j], fe[:, j + 1])
    if name in metrics:
        return np.asarray(metrics[name], float).reshape(-1)
    return np.full(n, np.nan)

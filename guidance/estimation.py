"""From a navigation estimate to the mean relative state that guidance plans from.

The chief's absolute estimate and each deputy's chief-relative estimate are turned into absolute
osculating states (:func:`guidance.roe.relative_rtn_to_eci`), mapped to mean elements with guidance's
own first-order J2 mapping (:func:`guidance.meanosc.osc_to_mean`), and differenced into mean ROE
(:func:`guidance.roe.oe_to_roe`, Koenig et al. 2017 eq. 2).

The 1-sigma of the ROE is linearised: the Jacobian of the whole chain (relative RTN state ->
deputy mean elements -> ROE) is taken by central differences, and the stated per-axis relative
sigmas are treated as independent. The chief's absolute error is left out: it moves chief and
deputy together and changes the ROE only through the curvature of the mapping (a 10 m chief error
changes a 1 km separation's ROE by about 10 m * 1 km / a, below a millimetre).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .constants import MU_EARTH_M3PS2
from .interface import GuidanceInputError, NavSolution
from .meanosc import osc_to_mean
from .roe import oe_to_roe, relative_rtn_to_eci, rv_to_oe

_FD_STEP_R_M = 1.0
_FD_STEP_V_MPS = 1e-3


@dataclass(frozen=True)
class MeanRelativeState:
    """Mean state of the formation at one time, as guidance believes it.

    Attributes
    ----------
    t_s : float
        Time tag, s since epoch.
    chief_oe : np.ndarray, shape (6,)
        Chief mean quasi-nonsingular elements ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``.
    roe : dict[str, np.ndarray]
        Deputy name -> (6,) dimensionless mean ROE, order ``ROE_NAMES``.
    roe_m : dict[str, np.ndarray]
        Same, scaled by the chief's mean semi-major axis (a-scaled metres).
    sigma_roe_m : dict[str, np.ndarray]
        Deputy name -> (6,) rough 1-sigma of ``roe_m`` from the stated relative-navigation sigmas
        (linearised, axes independent), a-scaled metres.
    valid : bool
        Copy of ``NavSolution.valid`` (False during a navigation outage).
    """

    t_s: float
    chief_oe: np.ndarray
    roe: dict
    roe_m: dict
    sigma_roe_m: dict
    valid: bool = field(default=True)


def _vec3(x, key):
    try:
        v = np.asarray(x, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise GuidanceInputError(key, x, "a 3-vector of finite numbers") from None
    if v.shape != (3,) or not np.all(np.isfinite(v)):
        raise GuidanceInputError(key, x, "a 3-vector of finite numbers")
    return v


def nav_to_mean(nav: NavSolution) -> MeanRelativeState:
    """Mean chief elements and mean ROE of every deputy from a navigation solution.

    Parameters
    ----------
    nav : guidance.interface.NavSolution
        Chief absolute estimate in covey's ECI (TOD) and deputies' relative estimates in the
        chief's RTN frame.

    Returns
    -------
    MeanRelativeState

    Raises
    ------
    GuidanceInputError
        For non-finite or wrongly shaped estimates, or a chief state that is not a bound orbit.
    """
    r_c = _vec3(nav.chief.r_eci_m, "nav.chief.r_eci_m")
    v_c = _vec3(nav.chief.v_eci_mps, "nav.chief.v_eci_mps")
    bound = float(v_c @ v_c) / 2.0 - MU_EARTH_M3PS2 / max(float(np.linalg.norm(r_c)), 1e-3) < 0
    chief_osc = rv_to_oe(r_c, v_c) if bound else np.full(6, np.nan)
    e_c = float(np.hypot(chief_osc[1], chief_osc[2]))
    if not (bound and np.isfinite(chief_osc).all() and e_c < 0.5):
        raise GuidanceInputError("nav.chief", (r_c.tolist(), v_c.tolist()),
                                 "a bound Earth orbit (position m, velocity m/s in TOD) with e < 0.5")
    names = list(nav.deputies)
    if not names:
        chief_mean = osc_to_mean(chief_osc)
        return MeanRelativeState(float(nav.t_s), chief_mean, {}, {}, {}, bool(nav.valid))

    # One vectorised call: per deputy the nominal relative state and 12 perturbed ones.
    steps = np.concatenate([np.full(3, _FD_STEP_R_M), np.full(3, _FD_STEP_V_MPS)])
    pert = np.concatenate([np.zeros((1, 6)), np.diag(steps), -np.diag(steps)])  # (13, 6)
    rel = []
    for name in names:
        d = nav.deputies[name]
        x = np.concatenate([_vec3(d.dr_rtn_m, f"nav.deputies.{name}.dr_rtn_m"),
                            _vec3(d.dv_rtn_mps, f"nav.deputies.{name}.dv_rtn_mps")])
        rel.append(x + pert)
    rel = np.stack(rel)  # (D, 13, 6)
    r_d, v_d = relative_rtn_to_eci(r_c, v_c, rel[..., :3], rel[..., 3:])
    with np.errstate(invalid="ignore", divide="ignore"):  # unbound deputies are reported below
        osc = np.concatenate([chief_osc[None], rv_to_oe(r_d, v_d).reshape(-1, 6)], axis=0)
    dep_e = np.hypot(osc[1:, 1], osc[1:, 2]).reshape(len(names), 13)
    for k, name in enumerate(names):
        if not (np.all(np.isfinite(osc[1 + 13 * k:1 + 13 * (k + 1)])) and np.all(dep_e[k] < 0.5)):
            d = nav.deputies[name]
            raise GuidanceInputError(
                f"nav.deputies.{name}", (np.asarray(d.dr_rtn_m).tolist(),
                                         np.asarray(d.dv_rtn_mps).tolist()),
                "a relative state (m, m/s in the chief's RTN) that puts the deputy on a bound "
                "orbit with e < 0.5")
    try:
        mean = osc_to_mean(osc)  # (1 + 13 D, 6)
    except ArithmeticError as exc:
        raise GuidanceInputError("nav", f"t_s={nav.t_s}", f"states the mean-element mapping "
                                 f"can convert ({exc})") from None
    chief_mean = mean[0]
    dep_mean = mean[1:].reshape(len(names), 13, 6)
    roe_all = oe_to_roe(chief_mean, dep_mean)  # (D, 13, 6)
    a = float(chief_mean[0])
    roe, roe_m, sig = {}, {}, {}
    for k, name in enumerate(names):
        d = nav.deputies[name]
        J = (roe_all[k, 1:7] - roe_all[k, 7:13]).T / (2.0 * steps)  # (6 roe, 6 state)
        s = np.concatenate([_vec3(d.sigma_dr_rtn_m, f"nav.deputies.{name}.sigma_dr_rtn_m"),
                            _vec3(d.sigma_dv_rtn_mps, f"nav.deputies.{name}.sigma_dv_rtn_mps")])
        roe[name] = roe_all[k, 0].copy()
        roe_m[name] = a * roe[name]
        sig[name] = a * np.sqrt((J**2) @ (s**2))
    return MeanRelativeState(float(nav.t_s), chief_mean, roe, roe_m, sig, bool(nav.valid))

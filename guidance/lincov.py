"""Linear covariance analysis of a plan: how each error source maps into the final mean-ROE error.

Pure numpy/scipy, in guidance's own linear model (the J2 STM and control matrices of
:mod:`guidance.dynamics` and :mod:`guidance.planning`), the same model the planner solves in.
Nothing here flies a truth: a plan made once (:class:`LinearPlan`) is perturbed by small errors and
the perturbation is carried to the deadline ``T`` through the planner's linear maps,

``dx(T) = Phi(T, t0) dx0 + sum_j G_j d(dv_j) + sum_s g_s d(w_s)``

with ``G_j`` (6x3) the effect of an impulse at ``t_j`` (:func:`guidance.planning.impulse_matrices`)
and ``g_s`` (6,) the effect of a differential along-track acceleration held over drag segment ``s``
(:func:`guidance.planning.drag_matrices`). Each source is a zero-mean (or fixed-mean) random input
and its covariance at ``T`` follows exactly in closed form. Sources are independent, so the
covariances add.

Error sources (names shared with the campaign error budget, :data:`SOURCE_NAMES`):

- ``navigation``: the relative navigation error the plan starts from. The plan is flown open loop
  from the estimate ``x0 + e``, so the final error is ``-Phi(T, t0) e``. ``e`` is the ROE image of
  the relative RTN state error through guidance's own navigation chain
  (:func:`guidance.estimation.nav_to_mean`), linearised by central differences
  (:func:`relative_nav_jacobian`). A re-solving law re-plans from navigation: after its last
  re-solve at ``t_L`` only that re-solve's navigation error and the errors after ``t_L`` remain
  (:meth:`LinearPlan.after`).
- ``thruster_magnitude``: ``|dv| (1 + s n1) + f n2`` along the commanded direction, per burn
  independent: ``Var(d|dv_j|) = s^2 |dv_j|^2 + f^2``.
- ``density``: the truth density is the model's times ``1 + bias + GM(t)``, GM a stationary
  first-order Gauss-Markov process (sigma, tau), so the planned differential drag is scaled by the
  same factor. The bias gives a fixed mean error ``bias sum_s g_s w_s``; GM gives
  ``sigma^2 sum_{s,r} rho_sr c_s c_r^T`` with ``c_s = g_s w_s`` and ``rho_sr`` the correlation
  ``exp(-|t - t'| / tau)`` averaged over the two segments (closed form below, taking the effect as
  uniform within a segment: exact for ``tau`` much longer than a segment, the usual case).
- ``drag_area``: the realised drag area of each mode of each spacecraft is its nominal area times
  ``1 + sigma n``, one draw per run per spacecraft and mode; the differential acceleration is
  linear in these factors (``LinearPlan.area_sens_mps2``).

Not linear (listed as needing Monte Carlo by the caller): thrust pointing, burn timing, absolute
navigation, the attitude error's area change and solar-activity dispersion.

Performance bounds (:func:`support_bounds`): the extreme of the confidence ellipsoid
``{x : x^T P^-1 x <= chi2_n(p)}`` along axis ``i`` is its support function in direction
``e_i``, ``sqrt(chi2_n(p) P_ii)`` (Boyd & Vandenberghe, Convex Optimization, Cambridge University
Press, 2004, the support function of an ellipsoid [memory for the section]).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from scipy.stats import chi2

from .constants import R_EARTH_M
from .density import relative_wind_speed_mps
from .estimation import nav_to_mean
from .interface import AbsoluteEstimate, NavSolution, RelativeEstimate
from .meanosc import mean_oe_to_rv
from .planning import STM_MODELS, drag_matrices, impulse_matrices, propagate_chief
from .roe import roe_to_oe, rtn_basis

__all__ = [
    "LINEAR_SOURCES",
    "SOURCE_NAMES",
    "LinearPlan",
    "SourceResult",
    "combine",
    "density_cov",
    "dominant_sources",
    "drag_area_cov",
    "last_resolve_time",
    "linear_plan_from_law",
    "navigation_cov",
    "relative_nav_jacobian",
    "segment_correlation",
    "support_bounds",
    "support_factor",
    "thruster_magnitude_cov",
]

SOURCE_NAMES = ("navigation", "thruster_magnitude", "pointing", "timing", "density", "drag_area",
                "attitude", "solar_activity")
"""Every error source, in table order (the campaign error budget uses the same names)."""

LINEAR_SOURCES = ("navigation", "thruster_magnitude", "density", "drag_area")
"""The sources this module propagates linearly."""

_FD_STEP_R_M = 1.0
_FD_STEP_V_MPS = 1e-3


# ------------------------------------------------------------------------------------------
# The plan in the linear model
# ------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class LinearPlan:
    """One deputy's plan as the linear model needs it.

    Attributes
    ----------
    name : str
        Deputy.
    chief_oe : np.ndarray, shape (6,)
        Chief mean elements at ``t0_s`` (``a_m, ex, ey, i_rad, raan_rad, u_rad``).
    t0_s, deadline_s : float
        Start of the window and the deadline, s since epoch.
    roe0 : np.ndarray, shape (6,)
        Mean ROE at ``t0_s`` as planned, dimensionless.
    burn_t_s : np.ndarray, shape (J,)
    dv_rtn_mps : np.ndarray, shape (J, 3)
        Planned impulses at or after ``t0_s``, RTN, m/s.
    seg_t0_s, seg_t1_s : np.ndarray, shape (S,)
        Drag segments inside ``[t0_s, deadline_s]``, time-ordered, not overlapping.
    w_mps2 : np.ndarray, shape (S,)
        Planned deputy-minus-chief along-track acceleration per segment, m/s^2.
    area_sens_mps2 : np.ndarray, shape (S, M)
        ``d w_s / d f_m``: change of ``w_s`` per unit relative error ``f_m`` of the drag area of
        spacecraft-mode ``m``, m/s^2.
    area_labels : tuple of str, length M
        ``"<spacecraft>/<mode>"`` of each column of ``area_sens_mps2``.
    stm : {"j2", "kepler"}
    """

    name: str
    chief_oe: np.ndarray
    t0_s: float
    deadline_s: float
    roe0: np.ndarray
    burn_t_s: np.ndarray
    dv_rtn_mps: np.ndarray
    seg_t0_s: np.ndarray
    seg_t1_s: np.ndarray
    w_mps2: np.ndarray
    area_sens_mps2: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    area_labels: tuple = ()
    stm: str = "j2"

    @property
    def a_m(self) -> float:
        """Chief mean semi-major axis, m (the a-scaling of every covariance in metres)."""
        return float(self.chief_oe[0])

    def phi(self) -> np.ndarray:
        """``Phi(T, t0)``, shape (6, 6)."""
        return STM_MODELS[self.stm](self.chief_oe, self.deadline_s - self.t0_s)

    def impulse_effects(self) -> np.ndarray:
        """``G_j``: effect on the dimensionless ROE at ``T`` per m/s, shape (J, 6, 3)."""
        return impulse_matrices(self.chief_oe, self.burn_t_s, self.deadline_s, self.t0_s, self.stm)

    def drag_effects(self) -> np.ndarray:
        """``g_s``: effect on the dimensionless ROE at ``T`` per m/s^2, shape (S, 6)."""
        return drag_matrices(self.chief_oe, self.seg_t0_s, self.seg_t1_s, self.deadline_s,
                             self.t0_s, self.stm)

    def roe_at_deadline(self) -> np.ndarray:
        """The plan's predicted mean ROE at the deadline, dimensionless (6,)."""
        x = self.phi() @ self.roe0
        if self.seg_t0_s.size:
            x = x + self.drag_effects().T @ self.w_mps2
        if self.burn_t_s.size:
            x = x + np.einsum("jik,jk->i", self.impulse_effects(), self.dv_rtn_mps)
        return x

    def after(self, t_s: float, roe_t: np.ndarray | None = None) -> LinearPlan:
        """The rest of the plan from ``t_s`` on: impulses at or after ``t_s``, segments clipped to
        ``[t_s, T]``, the chief propagated to ``t_s`` (:func:`guidance.planning.propagate_chief`).

        Parameters
        ----------
        t_s : float
            New window start, s since epoch, in ``[t0_s, deadline_s]``.
        roe_t : np.ndarray, shape (6,), optional
            The planned mean ROE at ``t_s`` (dimensionless); default: the free motion of ``roe0``
            (the caller should pass the plan's prediction, e.g. ``Plan.roe_at(t_s)``).
        """
        t = float(t_s)
        if not (self.t0_s - 1e-9 <= t <= self.deadline_s + 1e-9):
            raise ValueError(f"t_s = {t} s: inside the plan's window [{self.t0_s}, {self.deadline_s}] s")
        keep = self.burn_t_s >= t - 1e-9
        s0 = np.maximum(self.seg_t0_s, t)
        segs = self.seg_t1_s > s0 + 1e-9
        if roe_t is None:
            roe_t = STM_MODELS[self.stm](self.chief_oe, t - self.t0_s) @ self.roe0
        sens = self.area_sens_mps2[segs] if self.area_sens_mps2.size else self.area_sens_mps2
        return replace(self, chief_oe=propagate_chief(self.chief_oe, t - self.t0_s), t0_s=t,
                       roe0=np.asarray(roe_t, dtype=float), burn_t_s=self.burn_t_s[keep],
                       dv_rtn_mps=self.dv_rtn_mps[keep], seg_t0_s=s0[segs],
                       seg_t1_s=self.seg_t1_s[segs], w_mps2=self.w_mps2[segs], area_sens_mps2=sens)


def linear_plan_from_law(law, name: str) -> LinearPlan:
    """The :class:`LinearPlan` of deputy ``name`` from a planner law that has planned
    (:class:`guidance.laws.base.PlannerLaw` after its first ``step``).

    The impulses and the realised duty cycles are the law's plan (``law.deputies[name].plan``).
    The differential drag is rebuilt from its physics, ``w = -0.5 rho v^2 (B_deputy - B_chief)``
    (:func:`guidance.density.differential_along_track_accel_mps2`) with the law's density belief
    at the chief's altitude, the deputy's ballistic coefficient mixed between its low- and
    high-drag modes by the duty cycle (or its hold mode when the drag is not planned), and the
    chief in ``chief_mode``: the drag that is flown (it equals the plan's own ``w_mps2`` unless the
    law plans the weak mode with a ``weak_drag_margin`` below 1). Its derivatives with respect to
    each mode's relative area error fill ``area_sens_mps2``.

    Raises
    ------
    ValueError
        The law has no plan for ``name`` (not a planner law, not stepped, or an infeasible plan).
    """
    from .laws.base import HIGH_DRAG_MODE, LOW_DRAG_MODE

    st = getattr(law, "deputies", {}).get(name) if isinstance(getattr(law, "deputies", None), dict) else None
    plan = getattr(st, "plan", None)
    if plan is None or plan.status == "infeasible":
        why = "no plan" if plan is None else f"an infeasible plan ({plan.message})"
        raise ValueError(f"deputy {name!r}: the law has {why}; a linear prediction needs a plan")
    r = plan.request
    s = law.settings
    caps = st.caps
    chief = law.mission.chief
    chief_oe = np.asarray(r.chief_oe, dtype=float)
    a = float(chief_oe[0])
    rho = float(law.density.density_kgpm3(max(a - R_EARTH_M, 0.0)))
    v = float(relative_wind_speed_mps(a, chief_oe[3]))
    k = -0.5 * rho * v * v  # w = k (B_deputy - B_chief)
    mass = float(caps.mass_kg)
    b = {m: caps.cd * float(caps.drag_area_m2[m]) / mass for m in caps.drag_area_m2}
    b_ch = chief.ballistic_coefficient_m2pkg(s["chief_mode"])
    s0 = np.asarray(r.seg_t0_s, dtype=float)
    s1 = np.asarray(r.seg_t1_s, dtype=float)
    S = s0.size
    chief_label = f"{chief.name}/{s['chief_mode']}"
    if law.PLAN_DRAG:
        d = np.clip(np.asarray(plan.duty, dtype=float), 0.0, 1.0)
        b_lo, b_hi = b[LOW_DRAG_MODE], b[HIGH_DRAG_MODE]
        w = k * ((1.0 - d) * b_lo + d * b_hi - b_ch)
        sens = np.column_stack([k * (1.0 - d) * b_lo, k * d * b_hi, np.full(S, -k * b_ch)])
        labels = (f"{name}/{LOW_DRAG_MODE}", f"{name}/{HIGH_DRAG_MODE}", chief_label)
    else:
        hold = s["hold_mode"]
        w = np.full(S, k * (b[hold] - b_ch))
        sens = np.column_stack([np.full(S, k * b[hold]), np.full(S, -k * b_ch)])
        labels = (f"{name}/{hold}", chief_label)
    keep = s1 > s0
    bt = np.asarray(plan.burn_t_s, dtype=float)
    bdv = np.asarray(plan.dv_rtn_mps, dtype=float).reshape(-1, 3)
    fire = (bt >= r.t0_s - 1e-9) & (np.linalg.norm(bdv, axis=1) > 0) if bt.size else np.zeros(0, bool)
    return LinearPlan(name=name, chief_oe=chief_oe, t0_s=float(r.t0_s),
                      deadline_s=float(r.deadline_s), roe0=np.asarray(r.roe0, dtype=float),
                      burn_t_s=bt[fire], dv_rtn_mps=bdv[fire], seg_t0_s=s0[keep], seg_t1_s=s1[keep],
                      w_mps2=w[keep], area_sens_mps2=sens[keep].reshape(-1, len(labels)),
                      area_labels=labels, stm=r.stm)


def last_resolve_time(law, name: str, cycle_times_s, valid=None) -> float | None:
    """Time of the law's last re-solve for deputy ``name`` if it is called at ``cycle_times_s``.

    Asks the law's own cadence rule (``PlannerLaw.wants_plan``) on a copy of its state, from its
    first plan on, with navigation taken as valid at every call unless ``valid(t_s) -> bool`` says
    otherwise. Returns None for a law that does not re-plan (``REPLANS`` false).
    """
    if not getattr(law, "REPLANS", False):
        return None
    st = replace(law.deputies[name])
    t_last = float(st.plan_t_s)
    for t in np.asarray(cycle_times_s, dtype=float):
        if t <= t_last + 1e-9:
            continue
        ok = True if valid is None else bool(valid(float(t)))
        if law.wants_plan(name, st, float(t), _Validity(ok)):
            st.plan_t_s = float(t)
            t_last = float(t)
    return t_last


@dataclass(frozen=True)
class _Validity:
    """What ``wants_plan`` reads of a navigation solution (its ``valid`` flag)."""

    valid: bool


# ------------------------------------------------------------------------------------------
# Navigation
# ------------------------------------------------------------------------------------------


def relative_nav_jacobian(chief_oe, roe) -> np.ndarray:
    """Jacobian of the mean ROE guidance plans from with respect to the relative navigation state.

    The relative state of a deputy at mean ROE ``roe`` from a chief at mean elements ``chief_oe``
    is built with guidance's own mean-to-osculating mapping (:mod:`guidance.meanosc`), and
    :func:`guidance.estimation.nav_to_mean` (the chain a law applies to its navigation) is
    differenced about it (central differences, 1 m and 1 mm/s steps, one vectorised call).

    Parameters
    ----------
    chief_oe : array_like, shape (6,)
        Chief mean elements.
    roe : array_like, shape (6,)
        Deputy mean ROE, dimensionless.

    Returns
    -------
    np.ndarray, shape (6, 6)
        Dimensionless ROE per (m, m, m, m/s, m/s, m/s) of ``(dr_rtn, dv_rtn)`` in the chief's RTN.
    """
    chief_oe = np.asarray(chief_oe, dtype=float)
    rc, vc = mean_oe_to_rv(chief_oe)
    rd, vd = mean_oe_to_rv(roe_to_oe(chief_oe, np.asarray(roe, dtype=float)))
    C = rtn_basis(rc, vc)
    x0 = np.concatenate([C @ (rd - rc), C @ (vd - vc)])
    steps = np.concatenate([np.full(3, _FD_STEP_R_M), np.full(3, _FD_STEP_V_MPS)])
    pert = np.concatenate([np.diag(steps), -np.diag(steps)])
    one = np.ones(3)
    deps = {}
    for k, p in enumerate(pert):
        x = x0 + p
        deps[f"p{k}"] = RelativeEstimate(f"p{k}", 0.0, x[:3], x[3:], one, one, 1.0)
    nav = NavSolution(0.0, AbsoluteEstimate("chief", 0.0, rc, vc, one, one, 1.0), deps)
    st = nav_to_mean(nav)
    plus = np.array([st.roe[f"p{k}"] for k in range(6)])
    minus = np.array([st.roe[f"p{k}"] for k in range(6, 12)])
    return ((plus - minus) / (2.0 * steps[:, None])).T


def navigation_cov(plan: LinearPlan, sigma_r_rtn_m, sigma_v_rtn_mps, jacobian=None) -> np.ndarray:
    """Final mean-ROE covariance of the navigation error the plan starts from, a-scaled m^2.

    ``a^2 Phi J diag(sigma^2) J^T Phi^T`` with ``J`` the :func:`relative_nav_jacobian` at the
    plan's start (or ``jacobian``), the per-axis errors independent.

    Parameters
    ----------
    sigma_r_rtn_m : array_like, shape (3,)
        1-sigma of the relative position error at a fix, chief RTN, m.
    sigma_v_rtn_mps : array_like, shape (3,)
        1-sigma of the relative velocity error, m/s.

    Returns
    -------
    np.ndarray, shape (6, 6)
    """
    J = relative_nav_jacobian(plan.chief_oe, plan.roe0) if jacobian is None else np.asarray(jacobian)
    s2 = np.concatenate([np.broadcast_to(np.asarray(sigma_r_rtn_m, float), 3),
                         np.broadcast_to(np.asarray(sigma_v_rtn_mps, float), 3)]) ** 2
    M = plan.a_m * (plan.phi() @ J)
    return _sym((M * s2) @ M.T)


# ------------------------------------------------------------------------------------------
# Thruster magnitude
# ------------------------------------------------------------------------------------------


def thruster_magnitude_cov(plan: LinearPlan, scale_sigma: float, fixed_sigma_mps: float) -> np.ndarray:
    """Final mean-ROE covariance of the impulse magnitude errors, a-scaled m^2, shape (6, 6).

    Each burn's executed magnitude is ``|dv| (1 + scale_sigma n1) + fixed_sigma_mps n2`` along the
    commanded direction ``u`` (independent per burn), so its ROE effect at ``T`` is
    ``G_j u_j`` times a zero-mean error of variance ``scale_sigma^2 |dv_j|^2 + fixed_sigma^2``.
    The thruster's range clamp (minimum bit, per-burn maximum) is not modelled.
    """
    if plan.burn_t_s.size == 0:
        return np.zeros((6, 6))
    mag = np.linalg.norm(plan.dv_rtn_mps, axis=1)
    u = plan.dv_rtn_mps / mag[:, None]
    col = plan.a_m * np.einsum("jik,jk->ji", plan.impulse_effects(), u)  # (J, 6) m per m/s
    var = float(scale_sigma) ** 2 * mag**2 + float(fixed_sigma_mps) ** 2
    return _sym((col * var[:, None]).T @ col)


# ------------------------------------------------------------------------------------------
# Density (Gauss-Markov scale on the differential drag)
# ------------------------------------------------------------------------------------------


def _one_minus_exp_over_x(x):
    """``(1 - exp(-x)) / x`` for x >= 0 (1 at 0)."""
    x = np.asarray(x, dtype=float)
    small = x < 1e-4
    xs = np.where(small, 1.0, x)
    return np.where(small, 1.0 - x / 2.0 + x * x / 6.0, -np.expm1(-xs) / xs)


def segment_correlation(s0_s, s1_s, tau_s) -> np.ndarray:
    """Mean correlation of a first-order Gauss-Markov process over pairs of segments.

    ``rho_sr = (1 / (L_s L_r)) int_s int_r exp(-|t - t'| / tau) dt dt'``: on the diagonal
    ``(2 / x)(1 - (1 - exp(-x)) / x)`` with ``x = L / tau``; for ``s`` before ``r`` it factors as
    ``alpha_s alpha_r exp(-(t0_r - t1_s) / tau)`` with ``alpha = (1 - exp(-x)) / x``
    (integration of the exponential kernel, common practice, no source). For tests and small
    problems: :func:`density_cov` uses the factored form in O(S) instead of this (S, S) matrix.

    Parameters
    ----------
    s0_s, s1_s : array_like, shape (S,)
        Time-ordered, non-overlapping segments, s.
    tau_s : float

    Returns
    -------
    np.ndarray, shape (S, S)
    """
    s0 = np.asarray(s0_s, dtype=float)
    s1 = np.asarray(s1_s, dtype=float)
    x = (s1 - s0) / float(tau_s)
    alpha = _one_minus_exp_over_x(x)
    # the gap between two disjoint segments: t0_r - t1_s for s before r, t0_s - t1_r after
    gap = np.maximum(s0[None, :] - s1[:, None], s0[:, None] - s1[None, :])
    R = alpha[:, None] * alpha[None, :] * np.exp(-np.maximum(gap, 0.0) / float(tau_s))
    np.fill_diagonal(R, _diag_corr(x))
    return R


def _diag_corr(x):
    x = np.asarray(x, dtype=float)
    small = x < 1e-3
    xs = np.where(small, 1.0, x)
    return np.where(small, 1.0 - x / 3.0 + x * x / 12.0, 2.0 / xs * (1.0 - (-np.expm1(-xs)) / xs))


def density_cov(plan: LinearPlan, bias: float, sigma: float, tau_s: float) -> tuple[np.ndarray, np.ndarray]:
    """Final mean-ROE error of the density scale error ``bias + GM(t)`` on the planned drag.

    Parameters
    ----------
    bias : float
        Fixed relative density error (gives a mean, no covariance).
    sigma, tau_s : float
        1-sigma and time constant (s) of the stationary first-order Gauss-Markov part.

    Returns
    -------
    mean_m : np.ndarray, shape (6,)
        ``a bias sum_s g_s w_s``, a-scaled m.
    cov_m2 : np.ndarray, shape (6, 6)
        ``a^2 sigma^2 sum_{s,r} rho_sr c_s c_r^T``, ``c_s = g_s w_s``, a-scaled m^2.
    """
    if plan.seg_t0_s.size == 0:
        return np.zeros(6), np.zeros((6, 6))
    c = plan.a_m * plan.drag_effects() * plan.w_mps2[:, None]  # (S, 6) m per unit scale error
    mean = float(bias) * c.sum(axis=0)
    if float(sigma) == 0.0:
        return mean, np.zeros((6, 6))
    tau = float(tau_s)
    s0, s1 = plan.seg_t0_s, plan.seg_t1_s
    x = (s1 - s0) / tau
    alpha = _one_minus_exp_over_x(x)
    P = (c * _diag_corr(x)[:, None]).T @ c
    # cross terms s < r: sum_r alpha_r E_r c_r^T with E_r = sum_{s<r} alpha_s c_s exp(-(t0_r - t1_s)/tau)
    decay = np.exp(-np.diff(s0) / tau)  # E_{r+1} = decay_r E_r + alpha_r c_r exp(-(t0_{r+1} - t1_r)/tau)
    inject = alpha[:-1, None] * c[:-1] * np.exp(-(s0[1:] - s1[:-1]) / tau)[:, None]
    E = np.zeros_like(c)
    e = np.zeros(6)
    for r in range(1, c.shape[0]):
        e = decay[r - 1] * e + inject[r - 1]
        E[r] = e
    O = (E * alpha[:, None]).T @ c
    return mean, _sym(float(sigma) ** 2 * (P + O + O.T))


# ------------------------------------------------------------------------------------------
# Drag area
# ------------------------------------------------------------------------------------------


def drag_area_cov(plan: LinearPlan, sigma: float) -> np.ndarray:
    """Final mean-ROE covariance of the per-mode drag-area errors, a-scaled m^2, shape (6, 6).

    The area factor of every spacecraft-mode ``m`` is ``1 + sigma n_m`` (independent, constant
    over the run), so the ROE error is ``A n`` with ``A = sigma a sum_s g_s (dw_s/df_m)`` (6, M).
    The factor's clamp at 0.01 is not modelled.
    """
    if plan.seg_t0_s.size == 0 or plan.area_sens_mps2.size == 0:
        return np.zeros((6, 6))
    A = float(sigma) * plan.a_m * plan.drag_effects().T @ plan.area_sens_mps2  # (6, M)
    return _sym(A @ A.T)


# ------------------------------------------------------------------------------------------
# Bounds and bookkeeping
# ------------------------------------------------------------------------------------------


def support_factor(confidence: float, n_dim: int = 6) -> float:
    """``sqrt(chi2_n(p))``: the radius of the confidence ellipsoid in Mahalanobis units
    (``scipy.stats.chi2.ppf``)."""
    p = float(confidence)
    if not (0.0 < p < 1.0):
        raise ValueError(f"confidence = {confidence!r}: a probability strictly between 0 and 1")
    return float(np.sqrt(chi2.ppf(p, int(n_dim))))


def support_bounds(cov, confidence: float, n_dim: int | None = None) -> np.ndarray:
    """Per-axis half-widths of the confidence ellipsoid of a covariance, same units as sqrt(cov).

    The extreme of ``{x : x^T P^-1 x <= chi2_n(p)}`` along axis ``i`` is its support function in
    the direction ``e_i``, ``sqrt(chi2_n(p) e_i^T P e_i) = sqrt(chi2_n(p) P_ii)`` (valid for a
    singular ``P`` too, as the limit of the ellipsoid). Larger than the one-dimensional bound
    ``sqrt(chi2_1(p) P_ii)`` at the same ``p`` for ``n > 1``: the whole ellipsoid holds ``p`` of
    the probability, not each axis separately.

    Parameters
    ----------
    cov : array_like, shape (n, n)
    confidence : float
        ``p`` in (0, 1).
    n_dim : int, optional
        Dimension of the ellipsoid (default ``n``).

    Returns
    -------
    np.ndarray, shape (n,)
    """
    P = np.asarray(cov, dtype=float)
    n = P.shape[0] if n_dim is None else int(n_dim)
    return support_factor(confidence, n) * np.sqrt(np.clip(np.diag(P), 0.0, None))


@dataclass(frozen=True)
class SourceResult:
    """One error source's part of the final mean-ROE error.

    Attributes
    ----------
    name : str
        One of :data:`SOURCE_NAMES`.
    status : str
        ``"linear"`` (propagated here), ``"monte_carlo_only"`` (not linear: needs Monte Carlo) or
        ``"off"`` (its sigma is 0 in the scenario).
    cov_m2 : np.ndarray, shape (6, 6)
        Covariance at the deadline, a-scaled m^2 (zeros unless linear).
    mean_m : np.ndarray, shape (6,)
        Fixed (mean) error at the deadline, a-scaled m (the density bias; zeros otherwise).
    note : str
        What the sigmas are, or why the source needs Monte Carlo.
    """

    name: str
    status: str
    cov_m2: np.ndarray = field(default_factory=lambda: np.zeros((6, 6)))
    mean_m: np.ndarray = field(default_factory=lambda: np.zeros(6))
    note: str = ""


def combine(results) -> tuple[np.ndarray, np.ndarray]:
    """Total covariance and mean of independent sources: ``(sum cov_m2, sum mean_m)``."""
    cov = np.zeros((6, 6))
    mean = np.zeros(6)
    for r in results:
        cov = cov + r.cov_m2
        mean = mean + r.mean_m
    return cov, mean


def dominant_sources(results) -> tuple[list[str], np.ndarray]:
    """Per axis the source with the largest variance and its share of the total variance.

    Returns
    -------
    names : list of str, length 6
        ``""`` for an axis with no variance.
    share : np.ndarray, shape (6,)
        In [0, 1] (NaN for an axis with no variance).
    """
    results = list(results)
    if not results:
        return [""] * 6, np.full(6, np.nan)
    var = np.array([np.diag(r.cov_m2) for r in results])  # (K, 6)
    tot = var.sum(axis=0)
    k = np.argmax(var, axis=0)
    names = [results[k[i]].name if tot[i] > 0 else "" for i in range(6)]
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(tot > 0, var[k, np.arange(6)] / np.where(tot > 0, tot, 1.0), np.nan)
    return names, share


def _sym(P):
    return 0.5 * (P + P.T)

"""The planner's request and answer in physical units (:class:`PlanRequest`, :class:`Plan`)
and the impulse-size conventions every part of the planner shares.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .matrices import STM_MODELS, drag_matrices, impulse_matrices

TINY_DV_MPS = 1e-9
"""Impulses below this (m/s) are numerical noise of the LP and are removed without re-solving."""


def sub_bit(mag_mps, dv_min_mps):
    """Mask of impulse magnitudes (m/s) that are real impulses (above :data:`TINY_DV_MPS`) but
    below the minimum impulse bit ``dv_min_mps``: the ones the minimum-bit logic must handle."""
    mag_mps = np.asarray(mag_mps, dtype=float)
    return (mag_mps > TINY_DV_MPS) & (mag_mps < dv_min_mps)


@dataclass(frozen=True)
class PlanRequest:
    """One deputy's planning problem in physical units.

    Attributes
    ----------
    chief_oe : np.ndarray, shape (6,)
        Chief mean elements at ``t0_s`` (``a_m, ex, ey, i_rad, raan_rad, u_rad``).
    t0_s, deadline_s : float
        Solve time and deadline, s since epoch.
    roe0 : np.ndarray, shape (6,)
        Mean ROE at ``t0_s``, dimensionless.
    roe_target : np.ndarray, shape (6,)
        Target mean ROE at the deadline, dimensionless.
    burn_t_s : np.ndarray, shape (J,)
        Candidate burn times in ``[t0_s, deadline_s]``.
    dv_max_mps : float
        Per-burn maximum delta-v, m/s.
    dv_min_mps : float
        Smallest deliverable delta-v (minimum impulse bit / mass), m/s.
    seg_t0_s, seg_t1_s : np.ndarray, shape (S,)
        Drag segments (may be empty).
    w_low_mps2, w_high_mps2 : np.ndarray, shape (S,)
        Differential along-track acceleration in the low- and high-drag mode per segment, m/s^2.
    fixed_duty : np.ndarray, shape (S,), optional
        High-drag fractions fixed in advance; NaN entries stay free (planned). None: all free.
    fixed_burns_t_s : np.ndarray, shape (F,)
    fixed_burns_dv_rtn_mps : np.ndarray, shape (F, 3)
        Impulses that are already decided (kept as they are, counted in the cost).
    soft_weight_mps_per_m : np.ndarray, shape (6,), optional
        Make rows soft: price of a miss, m/s per a-scaled metre (None: hit the target exactly).
    stm : {"j2", "kepler"}
    warm_columns : tuple
        ``(time_s, unit direction (3,))`` of burns to start from.
    """

    chief_oe: np.ndarray
    t0_s: float
    deadline_s: float
    roe0: np.ndarray
    roe_target: np.ndarray
    burn_t_s: np.ndarray
    dv_max_mps: float
    dv_min_mps: float = 0.0
    seg_t0_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    seg_t1_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    w_low_mps2: np.ndarray = field(default_factory=lambda: np.zeros(0))
    w_high_mps2: np.ndarray = field(default_factory=lambda: np.zeros(0))
    fixed_duty: np.ndarray | None = None
    fixed_burns_t_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    fixed_burns_dv_rtn_mps: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    soft_weight_mps_per_m: np.ndarray | None = None
    stm: str = "j2"
    warm_columns: tuple = ()


@dataclass
class Plan:
    """A deputy's plan and its prediction in the planner's own model.

    Attributes
    ----------
    status : str
        ``"ok"``, ``"degraded"`` (a plan, but the target is missed; ``message`` says why) or
        ``"infeasible"`` (no plan; the commands hold).
    message : str
    request : PlanRequest
    burn_t_s : np.ndarray, shape (K,)
        Times of the impulses (fixed and new), sorted, s.
    dv_rtn_mps : np.ndarray, shape (K, 3)
        The impulses, RTN, m/s.
    duty : np.ndarray, shape (S,)
        High-drag fraction per segment (0 when the segment is not planned).
    w_mps2 : np.ndarray, shape (S,)
        Planned mean differential along-track acceleration per segment, m/s^2.
    cost_mps : float
        Sum of the impulse norms from ``t0`` on, m/s.
    lower_bound_mps : float
        Certified lower bound of the optimal cost of the last solve, m/s (includes fixed burns).
    roe_final : np.ndarray, shape (6,)
        Predicted mean ROE at the deadline, dimensionless.
    miss_m : np.ndarray, shape (6,)
        ``a (roe_final - roe_target)``, a-scaled metres.
    solve_time_s : float
    rounds : int
        Column-generation rounds used.
    dropped_small : int
        Impulses excluded for being below the minimum impulse bit.
    """

    status: str
    message: str
    request: PlanRequest
    burn_t_s: np.ndarray
    dv_rtn_mps: np.ndarray
    duty: np.ndarray
    w_mps2: np.ndarray
    cost_mps: float
    lower_bound_mps: float
    roe_final: np.ndarray
    miss_m: np.ndarray
    solve_time_s: float = 0.0
    rounds: int = 0
    dropped_small: int = 0
    program: Any = field(default=None, repr=False, compare=False)
    """The solved program (internal to :mod:`guidance.planning.deputy`, None for a plan that was
    not solved): :func:`~guidance.planning.plan_deputy` ``(..., reuse=plan)`` re-solves it warm
    for a request that differs only in ``fixed_duty`` / ``warm_columns``."""

    def cost_after(self, t_s: float) -> float:
        """Delta-v of the impulses at or after ``t_s``, m/s."""
        keep = self.burn_t_s >= t_s - 1e-9
        return float(np.sum(np.linalg.norm(self.dv_rtn_mps[keep], axis=1)))

    def roe_at(self, t_s) -> np.ndarray:
        """Predicted mean ROE at times ``t_s`` (in ``[t0, deadline]``), dimensionless.

        The free motion and the impulses are propagated in one step from ``t0``, exactly as the
        planner does; the drag is accumulated between consecutive sample times (the same STM
        applied piecewise: for a circular chief the same model, otherwise different at second
        order in ``kappa e tau``).

        Returns
        -------
        np.ndarray, shape (K, 6) (or (6,) for a scalar time)
        """
        r = self.request
        ts = np.atleast_1d(np.asarray(t_s, dtype=float))
        stm = STM_MODELS[r.stm]
        out = stm(r.chief_oe, ts - r.t0_s).reshape(-1, 6, 6) @ np.asarray(r.roe0, dtype=float)
        if self.burn_t_s.size:
            kk, jj = np.nonzero(self.burn_t_s[None, :] <= ts[:, None] + 1e-9)
            if kk.size:
                Gm = impulse_matrices(r.chief_oe, self.burn_t_s[jj], ts[kk], r.t0_s, r.stm)
                np.add.at(out, kk, np.einsum("pik,pk->pi", Gm, self.dv_rtn_mps[jj]))
        s0 = np.asarray(r.seg_t0_s, dtype=float)
        s1 = np.asarray(r.seg_t1_s, dtype=float)
        if s0.size and np.any(self.w_mps2 != 0):
            order = np.argsort(ts)
            tso = ts[order]
            prev = np.concatenate([[r.t0_s], tso[:-1]])
            # pieces: every segment clipped to every sample interval it overlaps
            lo = np.maximum(s0[None, :], prev[:, None])
            hi = np.minimum(s1[None, :], tso[:, None])
            kk, ss = np.nonzero((hi > lo) & (self.w_mps2 != 0)[None, :])
            inc = np.zeros((tso.size, 6))
            if kk.size:
                g = drag_matrices(r.chief_oe, lo[kk, ss], hi[kk, ss], tso[kk], r.t0_s, r.stm)
                np.add.at(inc, kk, g * self.w_mps2[ss, None])
            steps = stm(r.chief_oe, tso - prev).reshape(-1, 6, 6)
            y = np.zeros(6)
            acc = np.zeros((tso.size, 6))
            for k in range(tso.size):
                y = steps[k] @ y + inc[k]
                acc[k] = y
            out[order] += acc
        return out[0] if np.ndim(t_s) == 0 else out

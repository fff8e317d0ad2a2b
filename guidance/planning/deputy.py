"""One deputy's plan in physical units: a :class:`~guidance.planning.types.PlanRequest` made
into the scaled program of :mod:`guidance.planning.minfuel`, solved, and held to the minimum
impulse bit (:func:`plan_deputy`); and the prediction of given impulses (:func:`predict_plan`).

The problem (one deputy; deputies are independent given the chief's plan)
------------------------------------------------------------------------
Mean ROE ``x`` (dimensionless) at the solve time ``t0``, target ``x_target`` at the deadline ``T``.
In the linear model of :mod:`guidance.dynamics`

``x(T) = Phi(T, t0) x0 + sum_j G_j dv_j + sum_s g_s w_s``

with ``G_j`` (6x3) the effect of an impulse ``dv_j`` (RTN, m/s) at candidate burn time ``t_j``
(:func:`guidance.dynamics.impulse_input`) and ``g_s`` (6,) the effect of a constant differential
along-track acceleration ``w_s`` (m/s^2) held over drag segment ``s``
(:func:`guidance.dynamics.drag_segment_input`). On each segment the deputy spends a fraction
``d_s`` of the time in its high-drag mode and the rest in its low-drag mode, so
``w_s = w_low_s + d_s (w_high_s - w_low_s)`` with ``0 <= d_s <= 1`` (``w_high = w_low`` makes the
drag a known disturbance). The program is

``minimise sum_j ||dv_j||_2  s.t.  x(T) = x_target,  ||dv_j|| <= dv_max,  0 <= d_s <= 1``

with exact Euclidean norms (one steerable thruster). Optionally rows are *soft*: their miss is
allowed at a price, which drag-only re-planning uses.

Minimum impulse bit (:func:`plan_deputy`): impulses of the solution below ``dv_min`` are excluded
(their columns fixed at zero) and the program re-solved from its warm basis, so their delta-v
moves to (merges into) other burns; a few rounds at most. It is never silently violated: when no
plan without small impulses reaches the target, the small ones are dropped and the plan is
returned as ``"degraded"`` with the miss they cause.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from ..dynamics import mean_motion
from .matrices import STM_MODELS, drag_matrices, impulse_matrices
from .minfuel import MinFuelProgram
from .types import TINY_DV_MPS, Plan, PlanRequest, sub_bit

_BIT_UP = 1.0 + 1e-12
"""An impulse raised to the minimum bit is scaled to ``dv_min * _BIT_UP`` (never one ulp below)."""


def _infeasible_plan(req, message, t_solve=0.0, lower_bound=np.inf):
    S = np.asarray(req.seg_t0_s).size
    a = float(req.chief_oe[0])
    roe_free = np.full(6, np.nan)
    try:
        roe_free = STM_MODELS[req.stm](req.chief_oe, req.deadline_s - req.t0_s) @ req.roe0
    except Exception:  # noqa: BLE001 - the message already says what is wrong
        pass
    miss = a * (roe_free - req.roe_target) if np.all(np.isfinite(roe_free)) else np.full(6, np.nan)
    return Plan("infeasible", message, req, np.zeros(0), np.zeros((0, 3)), np.zeros(S), np.zeros(S),
                0.0, lower_bound, roe_free, miss, t_solve)


_REQ_ARRAYS = ("chief_oe", "roe0", "roe_target", "burn_t_s", "seg_t0_s", "seg_t1_s", "w_low_mps2",
               "w_high_mps2", "fixed_burns_t_s", "fixed_burns_dv_rtn_mps")


@dataclass
class _Formulation:
    """A request's program in scaled form, every drag-eligible segment a column (fixed duty
    cycles are column bounds), so a request that differs only in ``fixed_duty`` re-solves the
    same LP warm (columns and basis kept)."""

    req: PlanRequest
    tb: np.ndarray  # candidate burn times used, s
    elig: np.ndarray  # (S,) bool, segments whose two modes differ
    w_lo: np.ndarray
    span: np.ndarray
    delta: np.ndarray  # scaled right-hand side with every segment at its low-drag value, m/s
    Hcols: np.ndarray  # (n_elig, 6)
    soft: np.ndarray | None
    fdv: np.ndarray
    prog: "MinFuelProgram | None" = None
    warm: list = field(default_factory=list)

    def matches(self, req: PlanRequest) -> bool:
        r = self.req
        if r is req:
            return True
        if (r.t0_s, r.deadline_s, r.dv_max_mps, r.dv_min_mps, r.stm) != \
                (req.t0_s, req.deadline_s, req.dv_max_mps, req.dv_min_mps, req.stm):
            return False
        if (r.soft_weight_mps_per_m is None) != (req.soft_weight_mps_per_m is None):
            return False
        if r.soft_weight_mps_per_m is not None and not np.array_equal(r.soft_weight_mps_per_m,
                                                                      req.soft_weight_mps_per_m):
            return False
        return all(getattr(r, k) is getattr(req, k) or np.array_equal(getattr(r, k), getattr(req, k))
                   for k in _REQ_ARRAYS)


def _formulate(req: PlanRequest) -> _Formulation:
    chief = np.asarray(req.chief_oe, dtype=float)
    a = float(chief[0])
    na = float(mean_motion(a)) * a
    T = float(req.deadline_s)
    stm = STM_MODELS[req.stm]
    # --- right-hand side: free motion, low-drag baseline, fixed impulses
    x_free = stm(chief, T - req.t0_s) @ np.asarray(req.roe0, dtype=float)
    s0 = np.asarray(req.seg_t0_s, dtype=float)
    s1 = np.asarray(req.seg_t1_s, dtype=float)
    w_lo = np.asarray(req.w_low_mps2, dtype=float)
    w_hi = np.asarray(req.w_high_mps2, dtype=float)
    g = drag_matrices(chief, s0, s1, T, req.t0_s, req.stm)  # (S,6)
    span = w_hi - w_lo
    elig = np.abs(span) > 0
    x_known = x_free + g.T @ w_lo
    ft = np.asarray(req.fixed_burns_t_s, dtype=float)
    fdv = np.asarray(req.fixed_burns_dv_rtn_mps, dtype=float).reshape(-1, 3)
    if ft.size:
        x_known = x_known + np.einsum("jik,jk->i", impulse_matrices(chief, ft, T, req.t0_s, req.stm), fdv)
    delta = na * (np.asarray(req.roe_target, dtype=float) - x_known)
    # --- columns
    tb = np.asarray(req.burn_t_s, dtype=float)
    tb = tb[(tb >= req.t0_s - 1e-9) & (tb <= T + 1e-9)]
    if req.dv_max_mps <= 0:
        tb = np.zeros(0)
    soft = None
    if req.soft_weight_mps_per_m is not None:
        # price per m/s-equivalent = price per metre / n (rows are n a times dimensionless ROE)
        soft = np.asarray(req.soft_weight_mps_per_m, dtype=float) / float(mean_motion(a))
    warm = []
    for t_w, d_w in req.warm_columns:
        j = int(np.argmin(np.abs(tb - t_w))) if tb.size else -1
        if j >= 0 and abs(tb[j] - t_w) < 1e-3:
            warm.append((j, np.asarray(d_w, dtype=float)))
    return _Formulation(req, tb, elig, w_lo, span, delta, na * g[elig] * span[elig, None], soft, fdv,
                        warm=warm)


def plan_deputy(req: PlanRequest, *, tol_rel=1e-5, max_min_bit_rounds=5, target_tol_m=0.01,
                reuse: Plan | None = None, min_bit: bool = True) -> Plan:
    """Plan one deputy: build the program, solve it, enforce the minimum impulse bit.

    Parameters
    ----------
    req : PlanRequest
    tol_rel : float
        Relative optimality gap of each solve.
    max_min_bit_rounds : int
        Rounds of excluding impulses below the minimum impulse bit and re-solving.
    target_tol_m : float
        A plan whose predicted miss exceeds this (a-scaled metres, any component) is
        ``"degraded"``.
    reuse : Plan, optional
        A plan of a request that differs from ``req`` only in ``fixed_duty`` and
        ``warm_columns``: its program is re-solved warm (same columns, duty bounds changed),
        which gives the same optimum as a fresh solve at a fraction of the cost. Anything else
        is ignored (a fresh program is built).
    min_bit : bool
        Enforce the minimum impulse bit (default). False skips it: for intermediate plans whose
        impulses are re-planned anyway (the duty realisation rounds of the hybrid laws).

    Returns
    -------
    Plan
        Never raises for infeasible or non-finite input: the status and message say why.
    """
    t_start = time.perf_counter()
    vals = [req.chief_oe, req.roe0, req.roe_target, req.burn_t_s, req.seg_t0_s, req.seg_t1_s,
            req.w_low_mps2, req.w_high_mps2, req.fixed_burns_dv_rtn_mps, req.fixed_burns_t_s,
            [req.t0_s, req.deadline_s, req.dv_max_mps, req.dv_min_mps]]
    if not all(np.all(np.isfinite(np.asarray(v, dtype=float))) for v in vals):
        return _infeasible_plan(req, "non-finite planner input (NaN or inf in the navigation "
                                     "state, target or spacecraft data)")
    if req.deadline_s <= req.t0_s:
        return _infeasible_plan(req, f"deadline {req.deadline_s:.1f} s is not after the solve time "
                                     f"{req.t0_s:.1f} s")
    form = reuse.program if reuse is not None else None
    if form is None or not form.matches(req):
        form = _formulate(req)
    a = float(req.chief_oe[0])
    S = np.asarray(req.seg_t0_s).size
    tb, elig, span, fdv, soft = form.tb, form.elig, form.span, form.fdv, form.soft
    free = np.ones(S, dtype=bool)
    fixed_vals = np.zeros(S)
    if req.fixed_duty is not None:
        fd = np.asarray(req.fixed_duty, dtype=float)
        free = np.isnan(fd)
        fixed_vals = np.where(free, 0.0, np.clip(np.nan_to_num(fd), 0.0, 1.0))
    if tb.size == 0 and not np.any(elig & free) and soft is None:
        w_base = form.w_lo + fixed_vals * span
        delta = form.delta - form.Hcols.T @ fixed_vals[elig]
        if np.max(np.abs(delta)) / float(mean_motion(a)) <= target_tol_m:
            return _finish(req, tb, np.zeros((0, 3)), np.zeros(S, dtype=bool), np.zeros(0), w_base,
                           span, 0.0, 0, 0, t_start, "ok", "", target_tol_m)
        what = "no candidate burn before the deadline"
        if S and not np.any(elig):
            what += " and zero drag authority (the deputy's drag modes do not differ)"
        elif S == 0:
            what += " and no drag segment"
        return _infeasible_plan(req, what + "; the target differs from the free drift",
                                time.perf_counter() - t_start)
    if form.prog is None:
        G = (float(mean_motion(a)) * a) * impulse_matrices(req.chief_oe, tb, float(req.deadline_s),
                                                           req.t0_s, req.stm)
        form.prog = MinFuelProgram(G, form.Hcols, form.delta, req.dv_max_mps, soft_weight=soft,
                                   warm_columns=form.warm)
    prog = form.prog
    prog.include_all()
    prog.set_delta(form.delta)
    prog.set_duty_bounds(np.where(free, 0.0, fixed_vals)[elig], np.where(free, 1.0, fixed_vals)[elig])
    var = elig
    w_base = form.w_lo
    rounds0 = prog.rounds
    sol = prog.solve(tol_rel=tol_rel)
    if sol.status != "ok":
        msg = sol.message
        if sol.shortfall > 0 and np.isfinite(sol.shortfall):
            msg += f" (short by about {sol.shortfall / float(mean_motion(a)):.3g} m in a-scaled ROE)"
        if S and not np.any(elig) and tb.size == 0:
            msg += "; the drag authority is zero (the deputy's drag modes do not differ)"
        return _infeasible_plan(req, msg, time.perf_counter() - t_start, sol.lower_bound)
    # --- minimum impulse bit: exclude small impulses and re-solve (their dv merges elsewhere)
    dropped = 0
    status, message = "ok", ""
    dv_min = max(float(req.dv_min_mps), 0.0) if min_bit else 0.0
    if tb.size and TINY_DV_MPS < sol.cost < dv_min:
        # even the optimum is below one minimum impulse bit: no deliverable impulse can help
        # (unless the drag alone can do it)
        n_small = int(np.sum(np.linalg.norm(sol.dv, axis=1) > TINY_DV_MPS))
        prog.exclude(np.arange(tb.size))
        trial = prog.solve(tol_rel=tol_rel) if np.any(elig & free) or soft is not None else None
        dropped += n_small
        if trial is not None and trial.status == "ok":
            sol = trial
        else:
            sol.dv[:] = 0.0
            status = "degraded"
            message = (f"the whole correction ({sol.cost:.3g} m/s) is below the minimum impulse "
                       f"bit ({dv_min:.3g} m/s): no impulse planned")
    restricted = False
    rounded = None  # the first solution with small impulses, each raised to one minimum bit
    raised = None  # indices of those raised impulses
    for k in range(max_min_bit_rounds):
        mag = np.linalg.norm(sol.dv, axis=1)
        small = np.nonzero(sub_bit(mag, dv_min))[0]
        if small.size == 0:
            break
        if rounded is None:
            rounded = (sol.dv.copy(), np.copy(sol.duty))
            rounded[0][small] *= (dv_min * _BIT_UP / mag[small])[:, None]
            raised = small.copy()
        if k >= 2 and not restricted:
            # the small correction keeps moving to other candidates: allow only the burns that
            # are already large (their directions and sizes re-optimised), then shrink that set
            big = mag >= dv_min
            if np.any(big):
                restricted = True
                small = np.nonzero(~big)[0]
        prog.exclude(small)
        dropped += int(np.sum((mag[small] > TINY_DV_MPS)))
        trial = prog.solve(tol_rel=tol_rel)
        if trial.status != "ok":
            # no plan without them: drop them and report the miss
            gone = sub_bit(mag, dv_min)
            sol.dv[gone] = 0.0
            status = "degraded"
            message = (f"{int(gone.sum())} impulse(s) below the minimum impulse bit "
                       f"({dv_min:.3g} m/s) dropped; no plan without them reaches the target")
            break
        sol = trial
    if rounded is not None:
        # three candidates: the re-solved plan (if it hits with no small impulse), the small
        # impulses flown as one minimum bit each with the rest re-planned around them (hits),
        # and those raised impulses alone (a small predicted miss). A plan that hits is taken
        # when it costs about what the rounded plan costs; a hit at a much higher price (the
        # correction pushed onto few burns) is worse than the rounded plan's small miss.
        mag = np.linalg.norm(sol.dv, axis=1)
        clean = status == "ok" and not np.any(sub_bit(mag, dv_min))
        hits = [(float(np.sum(mag)), (sol.dv, sol.duty))] if clean else []
        if status == "ok":
            corrected = _round_and_correct(prog, form.delta, rounded[0], raised, dv_min, tol_rel)
            prog.set_delta(form.delta)
            if corrected is not None:
                hits.append((float(np.sum(np.linalg.norm(corrected[0], axis=1))), corrected))
        cost_rounded = float(np.sum(np.linalg.norm(rounded[0], axis=1)))
        best = min(hits, key=lambda h: h[0]) if hits else None
        if best is not None and best[0] <= 1.05 * cost_rounded + 2.0 * dv_min:
            sol.dv, sol.duty = best[1]
        elif best is not None or float(np.sum(mag)) > cost_rounded:
            sol.dv, sol.duty = rounded
            if status == "ok":
                status, message = "degraded", (f"impulse(s) below the minimum impulse bit "
                                               f"({dv_min:.3g} m/s) raised to it")
    mag = np.linalg.norm(sol.dv, axis=1)
    bad = sub_bit(mag, dv_min)
    if np.any(bad):
        sol.dv[bad] = 0.0
        status = "degraded"
        message = message or (f"{int(bad.sum())} impulse(s) below the minimum impulse bit "
                              f"({dv_min:.3g} m/s) dropped after {max_min_bit_rounds} re-solves")
    sol.dv[np.linalg.norm(sol.dv, axis=1) <= TINY_DV_MPS] = 0.0
    duty_var = sol.duty
    plan = _finish(req, tb, sol.dv, var, duty_var, w_base, span,
                   sol.lower_bound + float(np.sum(np.linalg.norm(fdv, axis=1))), prog.rounds - rounds0,
                   dropped, t_start, status, message, target_tol_m)
    plan.program = form
    return plan


def _round_and_correct(prog: MinFuelProgram, delta0, dv_rounded, raised, dv_min, tol_rel, passes=3):
    """Fly every impulse below the minimum bit as exactly one minimum bit (committed) and re-plan
    the other burns and the drag around them; repeat for new small impulses (a few passes).

    ``dv_rounded`` (J, 3): the solution with the impulses ``raised`` (indices) already raised to
    one bit. Returns ``(dv (J, 3), duty)`` of a plan that reaches the target with no impulse
    below ``dv_min``, or None. Leaves ``prog`` with changed exclusions and right-hand side (the
    caller restores them)."""
    if raised is None or len(raised) == 0:
        return None
    dv_fixed = np.zeros_like(dv_rounded)
    dv_fixed[raised] = dv_rounded[raised]
    prog.include_all()
    for _ in range(passes):
        idx = np.nonzero(np.linalg.norm(dv_fixed, axis=1) > 0)[0]
        prog.exclude(idx)
        prog.set_delta(delta0 - np.einsum("jik,jk->i", prog.G[idx], dv_fixed[idx]))
        trial = prog.solve(tol_rel=tol_rel)
        if trial.status != "ok":
            return None
        m = np.linalg.norm(trial.dv, axis=1)
        new_small = sub_bit(m, dv_min)
        if not np.any(new_small):
            dv = trial.dv.copy()
            dv[m <= TINY_DV_MPS] = 0.0
            dv[idx] = dv_fixed[idx]
            return dv, np.copy(trial.duty)
        dv_fixed[new_small] = trial.dv[new_small] * (dv_min * _BIT_UP / m[new_small])[:, None]
    return None


def predict_plan(req: PlanRequest, burn_t_s, dv_rtn_mps, duty=None, *, target_tol_m=0.01,
                 status="ok", message="") -> Plan:
    """A :class:`Plan` for given impulses and duty cycles (no optimisation), with its prediction.

    The impulses given are taken in addition to ``req.fixed_burns_*``; ``duty`` (shape (S,)) is the
    high-drag fraction per segment (default: ``req.fixed_duty`` or zero). The status is ``"ok"``
    unless the predicted miss exceeds ``target_tol_m`` (then ``"degraded"``).
    """
    S = np.asarray(req.seg_t0_s).size
    if duty is None:
        duty = np.zeros(S) if req.fixed_duty is None else req.fixed_duty
    w_lo = np.asarray(req.w_low_mps2, dtype=float)
    span = np.asarray(req.w_high_mps2, dtype=float) - w_lo
    r2 = PlanRequest(**{**req.__dict__,
                        "fixed_duty": np.clip(np.nan_to_num(np.asarray(duty, float)), 0.0, 1.0)})
    tb = np.asarray(burn_t_s, dtype=float).reshape(-1)
    dv = np.asarray(dv_rtn_mps, dtype=float).reshape(-1, 3)
    return _finish(r2, tb, dv, np.zeros(S, dtype=bool), np.zeros(0), w_lo + r2.fixed_duty * span,
                   span, 0.0, 0, 0, time.perf_counter(), status, message, target_tol_m)


def _finish(req, tb, dv, var, duty_var, w_base, span, lower_bound, rounds, dropped, t_start,
            status, message, target_tol_m):
    S = np.asarray(req.seg_t0_s).size
    if req.fixed_duty is None:
        duty = np.zeros(S)
    else:
        fd = np.asarray(req.fixed_duty, dtype=float)
        duty = np.where(np.isnan(fd), 0.0, np.clip(np.nan_to_num(fd), 0.0, 1.0))
    if S and np.any(var):
        duty[var] = duty_var
    # w_base already holds the fixed part; add the planned part
    w = w_base + np.where(var, duty, 0.0) * span
    used = np.linalg.norm(dv, axis=1) > 0 if dv.size else np.zeros(0, dtype=bool)
    ft = np.asarray(req.fixed_burns_t_s, dtype=float)
    fdv = np.asarray(req.fixed_burns_dv_rtn_mps, dtype=float).reshape(-1, 3)
    bt = np.concatenate([ft, tb[used]])
    bdv = np.concatenate([fdv, dv[used]]) if bt.size else np.zeros((0, 3))
    order = np.argsort(bt, kind="stable")
    bt, bdv = bt[order], bdv[order]
    cost = float(np.sum(np.linalg.norm(bdv, axis=1)))
    chief = np.asarray(req.chief_oe, dtype=float)
    a = float(chief[0])
    T = float(req.deadline_s)
    xf = STM_MODELS[req.stm](chief, T - req.t0_s) @ np.asarray(req.roe0, dtype=float)
    if S:
        xf = xf + drag_matrices(chief, req.seg_t0_s, req.seg_t1_s, T, req.t0_s, req.stm).T @ w
    if bt.size:
        xf = xf + np.einsum("jik,jk->i", impulse_matrices(chief, bt, T, req.t0_s, req.stm), bdv)
    miss = a * (xf - np.asarray(req.roe_target, dtype=float))
    if status == "ok" and np.max(np.abs(miss)) > target_tol_m:
        if req.soft_weight_mps_per_m is not None:
            status = "degraded"
            worst = int(np.argmax(np.abs(miss)))
            message = (f"target missed by up to {np.max(np.abs(miss)):.3g} m (a-scaled, component "
                       f"{worst}) with the controls allowed")
        else:
            status = "degraded"
            message = f"target missed by up to {np.max(np.abs(miss)):.3g} m (a-scaled)"
    elif status == "degraded" and not message.endswith("m (a-scaled)"):
        message += f"; predicted miss up to {np.max(np.abs(miss)):.3g} m (a-scaled)"
    return Plan(status, message, req, bt, bdv, duty, w, cost, min(lower_bound, cost), xf, miss,
                time.perf_counter() - t_start, rounds, dropped)

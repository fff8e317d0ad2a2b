"""Minimum-fuel reconfiguration planning in mean ROE: the convex program behind covey's laws.

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

How it is solved (:class:`MinFuelProgram`)
-----------------------------------------
Rows are scaled by ``n a`` so that the columns are O(1) and the right-hand side ``delta`` is in
m/s. With six terminal constraints the dual has six variables and reads

``max q(lambda) = lambda.delta - sum_j dv_max (||G_j^T lambda|| - 1)_+ - sum_s (lambda.h_s)_+``

(``h_s = g_s (w_high - w_low)``, scaled). An optimal plan uses at most six free columns, so the
primal is solved by *column generation*: a restricted LP (HiGHS through its own Python bindings,
warm-started from the previous basis after every change) over the drag columns, the burn
directions found so far and six pairs of artificial columns; its row duals ``lambda`` price every
candidate burn at once (``||G_j^T lambda||`` for all ``j``, one numpy pass), and each burn whose best
direction ``G_j^T lambda / ||G_j^T lambda||`` has a negative reduced cost enters with that exact
Euclidean direction (at most ``n_add`` per round, local minima in time first). A burn whose
directions together exceed its maximum in an LP solution gets a capacity row ``sum mu <= dv_max``
(added lazily, then the LP is re-run) so that its resulting impulse
``sum mu c`` never exceeds the per-burn maximum. The restricted LP's cost is an upper bound and
``q(lambda)`` (weak duality) a certified lower bound on the optimum; rounds stop when the gap is
below ``tol_rel``. No polygonal approximation of the norm is involved: the only approximation is
the reported, bounded gap.

Infeasibility is certified, not guessed: for any ``lambda``,
``lambda.delta > dv_max sum_j ||G_j^T lambda|| + sum_s (lambda.h_s)_+`` proves that no plan
reaches the target (the right side is the support function of the reachable set); an LP that
still needs its artificial columns when pricing finds nothing is reported infeasible with the
residual.

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

from .dynamics import (control_impulse, gauss_legendre, j2_coefficients, mean_arg_latitude, mean_motion,
                       stm_j2, stm_kepler)

try:  # HiGHS's own bindings (a dependency of covey); imported lazily for a clear error
    import highspy as _highspy
except ImportError:  # pragma: no cover - exercised only on a broken install
    _highspy = None

_HIGHS_GREETED = False


def _new_highs():
    """A HiGHS instance; the first one of the process is built with file descriptor 1 muted,
    because HiGHS prints its copyright banner from C++ on first construction (before any option
    can be set) and guidance must not write to the user's standard output."""
    global _HIGHS_GREETED
    if _HIGHS_GREETED:
        return _highspy.Highs()
    import os
    import sys
    sys.stdout.flush()
    saved = os.dup(1)
    try:
        with open(os.devnull, "w") as null:
            os.dup2(null.fileno(), 1)
            h = _highspy.Highs()
            h.setOptionValue("output_flag", False)
    finally:
        os.dup2(saved, 1)
        os.close(saved)
        _HIGHS_GREETED = True
    return h


STM_MODELS = {"j2": stm_j2, "kepler": stm_kepler}
"""Dynamics models a plan may use (names -> STM functions of :mod:`guidance.dynamics`)."""

_BIT_UP = 1.0 + 1e-12
"""An impulse raised to the minimum bit is scaled to ``dv_min * _BIT_UP`` (never one ulp below)."""

TINY_DV_MPS = 1e-9
"""Impulses below this (m/s) are numerical noise of the LP and are removed without re-solving."""


def sub_bit(mag_mps, dv_min_mps):
    """Mask of impulse magnitudes (m/s) that are real impulses (above :data:`TINY_DV_MPS`) but
    below the minimum impulse bit ``dv_min_mps``: the ones the minimum-bit logic must handle."""
    mag_mps = np.asarray(mag_mps, dtype=float)
    return (mag_mps > TINY_DV_MPS) & (mag_mps < dv_min_mps)


# --------------------------------------------------------------------------------------------
# Time grids and chief motion
# --------------------------------------------------------------------------------------------


def chief_period_s(chief_oe) -> float:
    """Period of the chief's mean argument of latitude under J2 (``2 pi / u_dot``), s."""
    return float(2.0 * np.pi / j2_coefficients(chief_oe)["u_dot"])


def propagate_chief(chief_oe, tau_s):
    """Chief mean elements after ``tau_s`` under secular J2 drift (guidance's own model).

    Parameters
    ----------
    chief_oe : array_like, shape (6,)
        ``(a_m, ex, ey, i_rad, raan_rad, u_rad)`` at the start.
    tau_s : float
        Interval, s.

    Returns
    -------
    np.ndarray, shape (6,)
        Elements at the end (``u`` not wrapped; ``a`` and ``i`` unchanged).
    """
    oe = np.array(chief_oe, dtype=float)
    c = j2_coefficients(oe)
    wt = c["w_dot"] * tau_s
    ex, ey = oe[1], oe[2]
    oe[1] = ex * np.cos(wt) - ey * np.sin(wt)
    oe[2] = ex * np.sin(wt) + ey * np.cos(wt)
    oe[4] = oe[4] + c["raan_dot"] * tau_s
    oe[5] = oe[5] + c["u_dot"] * tau_s
    return oe


def burn_grid(t_anchor_s, t_from_s, t_to_s, period_s, per_orbit, margin_s=0.0):
    """Candidate burn times on a fixed grid ``t_anchor + margin + k period / per_orbit``.

    The grid is anchored (not restarted at every solve) so that a re-solve keeps every candidate of
    the original plan that is still ahead: the rest of the original plan stays feasible, and the
    remaining cost cannot grow (Bellman's principle).

    Returns
    -------
    np.ndarray, shape (J,)
        Grid times in ``[t_from_s + margin_s, t_to_s]`` (the end included to 1 microsecond), s.
    """
    step = period_s / float(per_orbit)
    first = t_from_s + margin_s
    k0 = int(np.ceil((first - t_anchor_s - margin_s) / step - 1e-9))
    k1 = int(np.floor((t_to_s - t_anchor_s - margin_s) / step + 1e-9))
    if k1 < k0:
        return np.zeros(0)
    t = t_anchor_s + margin_s + step * np.arange(k0, k1 + 1)
    return t[(t >= first - 1e-6) & (t <= t_to_s + 1e-6)]


def segment_grid(t_anchor_s, t_from_s, t_to_s, period_s, per_orbit):
    """Drag segments with boundaries on ``t_anchor + k period / per_orbit``, clipped to [from, to].

    Returns
    -------
    s0_s, s1_s : np.ndarray, shape (S,)
        Start and end of each segment, s (the first and the last may be partial).
    """
    if t_to_s <= t_from_s:
        return np.zeros(0), np.zeros(0)
    step = period_s / float(per_orbit)
    k0 = int(np.floor((t_from_s - t_anchor_s) / step + 1e-9)) + 1
    k1 = int(np.ceil((t_to_s - t_anchor_s) / step - 1e-9)) - 1
    inner = t_anchor_s + step * np.arange(k0, k1 + 1)
    inner = inner[(inner > t_from_s + 1e-6) & (inner < t_to_s - 1e-6)]
    b = np.concatenate([[t_from_s], inner, [t_to_s]])
    return b[:-1], b[1:]


# --------------------------------------------------------------------------------------------
# Control-effect matrices (vectorised forms of guidance.dynamics.impulse_input and
# drag_segment_input; a test checks that they agree)
# --------------------------------------------------------------------------------------------


_MEMO: dict = {}
_MEMO_SIZE = 16


def _memo_key(name, chief_oe, arrays, *scalars):
    parts = [name, np.asarray(chief_oe, dtype=float).tobytes()]
    for a in arrays:
        a = np.asarray(a, dtype=float)
        parts.append((a.shape, a.tobytes()))
    return tuple(parts) + scalars


def _memo(key, compute):
    """The last few results of the matrix builders below, by exact input (a re-plan and its
    realisation rounds ask for the same matrices several times). Returned read-only."""
    hit = _MEMO.get(key)
    if hit is None:
        hit = compute()
        hit.flags.writeable = False
        if len(_MEMO) >= _MEMO_SIZE:
            _MEMO.pop(next(iter(_MEMO)))
        _MEMO[key] = hit
    return hit


def impulse_matrices(chief_oe, t_burn_s, tf_s, t_ref_s, stm="j2"):
    """Effect on the dimensionless ROE at ``tf_s`` of unit RTN impulses at ``t_burn_s``.

    Parameters
    ----------
    chief_oe : array_like, shape (6,)
        Chief mean elements at ``t_ref_s``.
    t_burn_s : array_like, shape (J,)
    tf_s : float or array_like, shape (J,)
        Evaluation time(s).
    t_ref_s : float
    stm : {"j2", "kepler"}

    Returns
    -------
    np.ndarray, shape (J, 6, 3)
        :func:`guidance.dynamics.impulse_input` for each burn, per m/s.
    """
    t = np.atleast_1d(np.asarray(t_burn_s, dtype=float))
    if t.size == 0:
        return np.zeros((0, 6, 3))
    key = _memo_key("imp", chief_oe, (t, tf_s), float(t_ref_s), stm)
    return _memo(key, lambda: _impulse_matrices(chief_oe, t, tf_s, t_ref_s, stm))


def _impulse_matrices(chief_oe, t, tf_s, t_ref_s, stm):
    a = float(chief_oe[0])
    u = mean_arg_latitude(chief_oe, t, t_ref_s)
    Phi = STM_MODELS[stm](chief_oe, np.broadcast_to(np.asarray(tf_s, dtype=float), t.shape) - t)
    return np.einsum("kij,kjl->kil", Phi.reshape(-1, 6, 6), control_impulse(a, u).reshape(-1, 6, 3))


def drag_matrices(chief_oe, s0_s, s1_s, tf_s, t_ref_s, stm="j2", n_quad=8):
    """Effect on the dimensionless ROE at ``tf_s`` of 1 m/s^2 of differential along-track
    acceleration held over each segment ``[s0, s1]``.

    Gauss-Legendre quadrature with ``max(n_quad, ceil(n_quad * span / period))`` nodes, the rule of
    :func:`guidance.dynamics.drag_segment_input`, vectorised over segments.

    Parameters
    ----------
    s0_s, s1_s : array_like, shape (S,)
    tf_s : float or array_like, shape (S,)

    Returns
    -------
    np.ndarray, shape (S, 6)
        Dimensionless ROE per m/s^2, one row per segment.
    """
    s0 = np.atleast_1d(np.asarray(s0_s, dtype=float))
    s1 = np.atleast_1d(np.asarray(s1_s, dtype=float))
    if s0.size == 0:
        return np.zeros((0, 6))
    key = _memo_key("drag", chief_oe, (s0, s1, tf_s), float(t_ref_s), stm, int(n_quad))
    return _memo(key, lambda: _drag_matrices(chief_oe, s0, s1, tf_s, t_ref_s, stm, n_quad))


def _drag_matrices(chief_oe, s0, s1, tf_s, t_ref_s, stm, n_quad):
    tf = np.broadcast_to(np.asarray(tf_s, dtype=float), s0.shape)
    out = np.zeros((s0.size, 6))
    a = float(chief_oe[0])
    period = 2 * np.pi / float(mean_motion(a))
    span = s1 - s0
    m_nodes = np.maximum(n_quad, np.ceil(n_quad * span / period).astype(int))
    for m in np.unique(m_nodes):
        sel = np.nonzero((m_nodes == m) & (span > 0))[0]
        if sel.size == 0:
            continue
        x, w = gauss_legendre(int(m))
        tau = s0[sel, None] + 0.5 * (x + 1.0)[None, :] * span[sel, None]  # (k, m)
        u = mean_arg_latitude(chief_oe, tau.ravel(), t_ref_s)
        bT = control_impulse(a, u).reshape(-1, 6, 3)[:, :, 1]  # (k*m, 6)
        Phi = STM_MODELS[stm](chief_oe, (tf[sel, None] - tau).ravel()).reshape(-1, 6, 6)
        val = np.einsum("kij,kj->ki", Phi, bT).reshape(sel.size, int(m), 6)
        out[sel] = 0.5 * span[sel, None] * np.einsum("q,kqi->ki", w, val)
    return out


# --------------------------------------------------------------------------------------------
# The convex program on scaled arrays: column generation over exact Euclidean directions
# --------------------------------------------------------------------------------------------


@dataclass
class MinFuelSolution:
    """Result of :meth:`MinFuelProgram.solve` (scaled problem).

    Attributes
    ----------
    status : str
        ``"ok"`` or ``"infeasible"`` (``message`` says why).
    dv : np.ndarray, shape (J, 3)
        Impulses, m/s (zero rows for unused candidates).
    duty : np.ndarray, shape (S,)
        High-drag fraction per drag column, in [0, 1].
    slack : np.ndarray, shape (6,)
        Miss of each row, m/s-equivalent (zero on hard rows).
    cost : float
        ``sum_j ||dv_j||``, m/s.
    lower_bound : float
        Certified lower bound on the optimal cost (including the price of soft-row misses), m/s.
    lam : np.ndarray, shape (6,)
        Dual variables.
    residual : float
        Largest error of the equality rows (soft misses counted as allowed), m/s-equivalent.
    rounds : int
        Column-generation rounds.
    shortfall : float
        For an infeasible problem, the distance from the reachable set certified along ``lam``
        (m/s-equivalent), or the LP residual; 0 otherwise.
    """

    status: str
    dv: np.ndarray
    duty: np.ndarray
    slack: np.ndarray
    cost: float
    lower_bound: float
    lam: np.ndarray
    residual: float
    rounds: int
    message: str = ""
    shortfall: float = 0.0


class MinFuelProgram:
    """The min-fuel program on scaled arrays, solved by column generation (module docstring).

    Parameters
    ----------
    G : np.ndarray, shape (J, 6, 3)
        Impulse columns, scaled (m/s of right-hand side per m/s of impulse).
    H : np.ndarray, shape (S, 6)
        Drag duty columns (m/s of right-hand side per unit high-drag fraction).
    delta : np.ndarray, shape (6,)
        Required change beyond the free motion and the low-drag baseline, m/s.
    dv_max : float or np.ndarray, shape (J,)
        Largest impulse per candidate burn, m/s.
    soft_weight : np.ndarray, shape (6,), optional
        Price per m/s-equivalent of miss of each row; None makes every row exact.
    warm_columns : sequence of (int, np.ndarray (3,)), optional
        Burn directions to start from (e.g. the active burns of a previous plan).
    """

    BIG_M = 1e6
    """Price of the artificial columns of hard rows (m/s per m/s-equivalent of residual)."""

    def __init__(self, G, H, delta, dv_max, *, soft_weight=None, warm_columns=(), n_init=40):
        if _highspy is None:  # pragma: no cover
            raise ImportError("guidance.planning needs the 'highspy' package (HiGHS); "
                              "pip install highspy")
        self.G = np.asarray(G, dtype=float).reshape(-1, 6, 3)
        self.H = np.asarray(H, dtype=float).reshape(-1, 6)
        self.delta = np.asarray(delta, dtype=float).reshape(6)
        self.J, self.S = self.G.shape[0], self.H.shape[0]
        self.D = np.broadcast_to(np.asarray(dv_max, dtype=float), (self.J,)).astype(float)
        self.soft = None if soft_weight is None else np.asarray(soft_weight, dtype=float).reshape(6)
        self.excluded = np.zeros(self.J, dtype=bool)
        self.duty_lo = np.zeros(self.S)
        self.duty_hi = np.ones(self.S)
        self.rounds = 0
        self._finite = bool(np.all(np.isfinite(self.G)) and np.all(np.isfinite(self.H))
                            and np.all(np.isfinite(self.delta)) and np.all(np.isfinite(self.D)))
        if not self._finite:
            return
        h = _new_highs()
        for k, v in (("output_flag", False), ("presolve", "off"),
                     ("primal_feasibility_tolerance", 1e-10), ("dual_feasibility_tolerance", 1e-10)):
            h.setOptionValue(k, v)
        inf = _highspy.kHighsInf
        e = np.array([], dtype=np.int32)
        h.addRows(6, self.delta, self.delta, 0, e, e, np.array([]))
        art_cost = self.soft if self.soft is not None else np.full(6, self.BIG_M)
        rows6 = np.arange(6, dtype=np.int32)
        for sgn in (1.0, -1.0):
            h.addCols(6, art_cost, np.zeros(6), np.full(6, inf), 6, rows6, rows6, np.full(6, sgn))
        if self.S:
            h.addCols(self.S, np.zeros(self.S), np.zeros(self.S), np.ones(self.S), 6 * self.S,
                      np.arange(self.S, dtype=np.int32) * 6, np.tile(rows6, self.S),
                      self.H.ravel())
        self._h = h
        self._inf = inf
        self._first_burn_col = 12 + self.S
        self._nrow = 6
        self._burn = np.zeros(0, dtype=np.int64)  # candidate burn of each burn column
        self._dirs = np.zeros((0, 3))  # unit RTN direction of each burn column
        self._cap_row = -np.ones(self.J, dtype=np.int64)
        # starting columns: warm ones, then +-R, +-T, +-N at a few burns spread over the horizon
        cols = [(int(j), np.asarray(d, dtype=float) / np.linalg.norm(d))
                for j, d in warm_columns if 0 <= j < self.J and np.linalg.norm(d) > 0]
        if self.J:
            spread = np.unique(np.linspace(0, self.J - 1, min(self.J, 16)).astype(int))
            axes = np.vstack([np.eye(3), -np.eye(3)])
            cols += [(int(j), d) for j in spread for d in axes]
            cols += self._energy_columns(n_init)
        if cols:
            self._add_columns(np.array([j for j, _ in cols]), np.array([d for _, d in cols]))

    def _energy_columns(self, k):
        """Starting directions from the minimum-energy plan's multiplier.

        The plan minimising ``sum ||dv_j||^2`` has ``dv_j = G_j^T lam0`` with
        ``lam0 = (sum G_j G_j^T + sum h_s h_s^T)^-1 delta``; the burns where ``||G_j^T lam0||`` peaks
        (local maxima in time) are good first guesses of the min-fuel burns.
        """
        W = np.einsum("jik,jlk->il", self.G, self.G) + self.H.T @ self.H
        try:
            lam0 = np.linalg.solve(W + 1e-12 * np.trace(W) * np.eye(6), self.delta)
        except np.linalg.LinAlgError:
            return []
        A, f, _ = self._prices(lam0)
        if not np.all(np.isfinite(f)) or f.max(initial=0.0) <= 0:
            return []
        fp = np.concatenate([[-np.inf], f, [-np.inf]])
        loc = np.nonzero((f >= fp[:-2]) & (f >= fp[2:]) & (f > 0))[0]
        sel = loc[np.argsort(-f[loc])[:k]]
        return [(int(j), A[j] / f[j]) for j in sel]

    # ---- LP bookkeeping ---------------------------------------------------------------------
    def _add_columns(self, js, dirs):
        """Burn columns: candidate burns ``js`` (m,) with unit RTN directions ``dirs`` (m, 3)."""
        js = np.asarray(js, dtype=np.int64).reshape(-1)
        dirs = np.asarray(dirs, dtype=float).reshape(-1, 3)
        vals = np.einsum("mik,mk->mi", self.G[js], dirs)
        # column k: rows 0..5 with vals[k], then its capacity row (if any) with 1
        cap = self._cap_row[js]
        has = cap >= 0
        m = js.size
        if np.any(has):
            width = 6 + has.astype(np.int64)
            starts = np.concatenate([[0], np.cumsum(width)[:-1]]).astype(np.int32)
            ind = np.empty((m, 7), dtype=np.int32)
            val = np.empty((m, 7))
            ind[:, :6] = np.arange(6, dtype=np.int32)
            val[:, :6] = vals
            ind[:, 6] = cap
            val[:, 6] = 1.0
            keep = np.ones((m, 7), dtype=bool)
            keep[:, 6] = has
            ind, val = ind[keep], val[keep]
        else:
            starts = np.arange(0, 6 * m, 6, dtype=np.int32)
            ind = np.tile(np.arange(6, dtype=np.int32), m)
            val = vals.ravel()
        ub = np.where(self.excluded[js], 0.0, self.D[js])
        self._h.addCols(m, np.ones(m), np.zeros(m), ub, int(ind.size), starts, ind, val)
        self._burn = np.concatenate([self._burn, js])
        self._dirs = np.concatenate([self._dirs, dirs])

    def _columns_of(self, burns):
        """LP column indices of the burn columns of candidate burns ``burns``, ascending."""
        return (np.nonzero(np.isin(self._burn, burns))[0] + self._first_burn_col).astype(np.int32)

    def _burn_x(self, x):
        """Magnitudes of the burn columns in the LP solution ``x`` (clipped at zero)."""
        return np.clip(x[self._first_burn_col:self._first_burn_col + self._burn.size], 0.0, None)

    def _add_capacity_rows(self, x, xb=None) -> int:
        """Capacity rows ``sum mu <= dv_max`` for the burns whose columns together exceed their
        maximum in the LP solution ``x`` (added lazily: most burns never need one, and every row
        makes each LP run dearer). ``xb``: :meth:`_burn_x` of ``x`` if already computed.
        Returns how many were added."""
        if not self._burn.size:
            return 0
        xb = self._burn_x(x) if xb is None else xb
        total = np.bincount(self._burn, weights=xb, minlength=self.J)
        over = np.nonzero((total > self.D * (1.0 + 1e-9) + 1e-15) & (self._cap_row < 0))[0]
        for j in over:
            idx = self._columns_of(j)
            self._h.addRow(-self._inf, float(self.D[j]), idx.size, idx, np.ones(idx.size))
            self._cap_row[j] = self._nrow
            self._nrow += 1
        return int(over.size)

    def set_duty_bounds(self, lo, hi):
        """Bounds of the drag duty columns (shape (S,) each, within [0, 1]); equal bounds fix a
        column at that value. The LP keeps its columns and basis (a warm re-solve)."""
        lo = np.clip(np.asarray(lo, dtype=float).reshape(self.S), 0.0, 1.0)
        hi = np.clip(np.asarray(hi, dtype=float).reshape(self.S), 0.0, 1.0)
        hi = np.maximum(hi, lo)
        if self.S and self._finite and (np.any(lo != self.duty_lo) or np.any(hi != self.duty_hi)):
            idx = np.arange(12, 12 + self.S, dtype=np.int32)
            self._h.changeColsBounds(idx.size, idx, lo, hi)
        self.duty_lo, self.duty_hi = lo, hi

    def set_delta(self, delta):
        """Change the right-hand side (shape (6,), m/s); the LP keeps its columns and basis."""
        delta = np.asarray(delta, dtype=float).reshape(6)
        if self._finite and np.any(delta != self.delta):
            rows = np.arange(6, dtype=np.int32)
            self._h.changeRowsBounds(6, rows, delta, delta)
        self.delta = delta.copy()

    def include_all(self):
        """Undo :meth:`exclude`: every candidate burn may be used again (up to its maximum)."""
        if not np.any(self.excluded):
            return
        self.excluded[:] = False
        if self._finite and self._burn.size:
            idx = np.arange(self._first_burn_col, self._first_burn_col + self._burn.size, dtype=np.int32)
            self._h.changeColsBounds(idx.size, idx, np.zeros(idx.size), self.D[self._burn])

    def exclude(self, burns):
        """Forbid candidate burns (fix their columns at zero and stop pricing them)."""
        burns = np.atleast_1d(np.asarray(burns, dtype=int))
        self.excluded[burns] = True
        idx = self._columns_of(burns)
        if idx.size and self._finite:
            self._h.changeColsBounds(idx.size, idx, np.zeros(idx.size), np.zeros(idx.size))

    # ---- certificates -----------------------------------------------------------------------
    def _prices(self, lam):
        A = np.einsum("jik,i->jk", self.G, lam)
        f = np.sqrt(np.einsum("jk,jk->j", A, A))
        c = self.H @ lam
        return A, f, c

    def lower_bound(self, lam, _prices=None):
        """Dual value ``q(lam)`` (clipped to the soft-row box): a certified lower bound, m/s."""
        lam = np.asarray(lam, dtype=float)
        if self.soft is not None:
            lam = np.clip(lam, -self.soft, self.soft)
            _prices = None
        _, f, c = self._prices(lam) if _prices is None else _prices
        D = np.where(self.excluded, 0.0, self.D)
        # an excluded burn has no capacity: its term is -0 * (f - 1)_+ ... but a zero-capacity
        # column still constrains nothing, so the bound stays valid
        return float(lam @ self.delta - np.sum(D * np.maximum(f - 1.0, 0.0)) - self._drag_support(c))

    def _drag_support(self, c):
        """``sum_s max(c_s lo_s, c_s hi_s)``: the drag columns' part of the support function
        (``sum (c_s)_+`` for the default bounds [0, 1])."""
        return float(np.sum(np.maximum(c * self.duty_lo, c * self.duty_hi)))

    def shortfall(self, lam):
        """``lam.delta - support(lam)`` for unit ``lam``: positive proves the target unreachable."""
        if self.soft is not None:
            return 0.0
        nrm = float(np.linalg.norm(lam))
        if not np.isfinite(nrm) or nrm == 0.0:
            return 0.0
        _, f, c = self._prices(lam / nrm)
        D = np.where(self.excluded, 0.0, self.D)
        return float(self.delta @ (lam / nrm) - np.sum(D * f) - self._drag_support(c))

    # ---- solve --------------------------------------------------------------------------------
    def solve(self, tol_rel=1e-5, tol_abs=1e-10, max_rounds=120, n_add=40):
        """Run column-generation rounds to the gap tolerance.

        Returns
        -------
        MinFuelSolution
        """
        J, S = self.J, self.S
        empty = MinFuelSolution("ok", np.zeros((J, 3)), np.zeros(S), np.zeros(6), 0.0, 0.0,
                                np.zeros(6), 0.0, self.rounds)
        if not self._finite:
            empty.status = "infeasible"
            empty.message = "non-finite input to the planner (NaN or inf)"
            return empty
        scale = 1.0 + float(np.linalg.norm(self.delta))
        best_lb, best_lam = -np.inf, np.zeros(6)
        last = None
        stall = 0
        for _ in range(max_rounds):
            self._h.run()
            self.rounds += 1
            sol = self._h.getSolution()
            x = np.asarray(sol.col_value)
            xb = self._burn_x(x)
            if self._add_capacity_rows(x, xb):
                continue  # a burn's directions together exceeded its maximum: re-run with the row
            y = np.asarray(sol.row_dual)
            lam = y[:6].copy()
            A, f, c = self._prices(lam)
            lb = self.lower_bound(lam, (A, f, c))
            if lb > best_lb:
                best_lb, best_lam = lb, lam
            art = x[:6] + x[6:12]
            dv, ub = self._primal(x, xb)
            if self.soft is not None:
                ub += float(np.sum(self.soft * art))
                feasible = True
            else:
                feasible = float(np.max(art)) <= 1e-9 * scale
            if feasible and ub - best_lb <= tol_abs + tol_rel * max(ub, 0.0):
                break
            if not feasible and self.shortfall(lam) > 1e-9 * scale:
                break  # certified unreachable: no need to price further
            ycap = np.where(self._cap_row >= 0, y[np.maximum(self._cap_row, 0)], 0.0) if J else np.zeros(0)
            red = 1.0 - f - ycap
            red[self.excluded] = np.inf
            viol = np.nonzero(red < -1e-9)[0]
            if viol.size == 0:
                break
            key = (round(ub, 12), round(best_lb, 12))
            stall = stall + 1 if key == last else 0
            last = key
            if stall >= 3:
                break
            rp = np.concatenate([[np.inf], red, [np.inf]])
            loc = viol[(red[viol] <= rp[viol]) & (red[viol] <= rp[viol + 2])]
            sel = loc[np.argsort(red[loc])[:n_add]]
            if sel.size < min(8, viol.size):
                sel = np.union1d(sel, viol[np.argsort(red[viol])[:8]])
            self._add_columns(sel, A[sel] / f[sel, None])
        sol = self._h.getSolution()
        x = np.asarray(sol.col_value)
        for _ in range(5):  # the loop may end right after adding capacity rows: honour them
            if not self._add_capacity_rows(x):
                break
            self._h.run()
            self.rounds += 1
            sol = self._h.getSolution()
            x = np.asarray(sol.col_value)
        dv, cost = self._primal(x)
        duty = np.clip(x[12:12 + S], 0.0, 1.0)
        slack = x[:6] - x[6:12]
        resid_vec = self.delta - np.einsum("jik,jk->i", self.G, dv) - self.H.T @ duty
        if self.soft is None:
            residual = float(np.max(np.abs(resid_vec)))
            if residual > 1e-8 * scale:
                cert = self.shortfall(best_lam)
                msg = ("target unreachable with the candidate burns (each at most its per-burn "
                       "maximum) and the drag authority before the deadline")
                return MinFuelSolution("infeasible", np.zeros((J, 3)), np.zeros(S), np.zeros(6),
                                       np.inf, best_lb, best_lam, residual, self.rounds, msg,
                                       shortfall=max(cert, residual))
            slack = np.zeros(6)
        else:
            residual = float(np.max(np.abs(resid_vec - slack)))
        return MinFuelSolution("ok", dv, duty, slack, cost, min(best_lb, cost + (
            0.0 if self.soft is None else float(np.sum(self.soft * np.abs(slack))))),
            best_lam, residual, self.rounds)

    def _primal(self, x, xb=None):
        """Impulses (J, 3) of the LP solution ``x`` and their cost (sum of norms), m/s."""
        dv = np.zeros((self.J, 3))
        if not self._burn.size:
            return dv, 0.0
        xb = self._burn_x(x) if xb is None else xb
        w = xb[:, None] * self._dirs
        for k in range(3):  # the columns' sum per burn (bincount adds in column order)
            dv[:, k] = np.bincount(self._burn, weights=w[:, k], minlength=self.J)
        # the capacity rows guarantee sum(mu) <= D; clip round-off so |dv| <= D exactly
        nrm = np.linalg.norm(dv, axis=1)
        over = nrm > self.D
        if np.any(over):
            dv[over] *= (self.D[over] / nrm[over])[:, None]
            nrm = np.linalg.norm(dv, axis=1)
        return dv, float(np.sum(nrm))


# --------------------------------------------------------------------------------------------
# Plans in physical units
# --------------------------------------------------------------------------------------------


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
    program: "_Formulation | None" = field(default=None, repr=False, compare=False)
    """The solved program (internal): :func:`plan_deputy` ``(..., reuse=plan)`` re-solves it warm
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


# --------------------------------------------------------------------------------------------
# Duty cycles -> time-tagged attitude-mode switches
# --------------------------------------------------------------------------------------------


def realise_duty_schedule(seg_t0_s, seg_t1_s, duty, t_now_s, *, slew_s=0.0, min_dwell_s=0.0,
                          high_mode="max_drag", low_mode="min_drag", current_mode=None,
                          end_mode=None):
    """Turn per-segment high-drag fractions into time-tagged mode switches.

    In segment ``s`` the high-drag mode is held for ``duty[s]`` of its length ``L``, centred in the
    segment (so the mean acceleration and its first moment over the segment match the planner's
    constant-acceleration model). With ``dwell = max(min_dwell_s, slew_s)`` each duty is first
    quantised on its own: a spell shorter than ``dwell`` is dropped (``duty L < dwell`` -> 0) and a
    low-drag remainder shorter than twice ``dwell`` is filled (``(1 - duty) L < 2 dwell`` -> 1).
    Then every high-drag spell and every low-drag gap between spells lasts at least ``dwell``
    (a gap between two centred spells is the sum of two half-remainders), and the realised duty of
    a segment depends on that segment only. A slew is modelled as an instantaneous change at its
    midpoint, so a switch is commanded ``slew_s / 2`` before the instant it should take effect, and
    never before ``t_now_s`` (then it takes effect half a slew after ``t_now_s``).

    Parameters
    ----------
    seg_t0_s, seg_t1_s, duty : np.ndarray, shape (S,)
    t_now_s : float
        Earliest allowed command time, s.
    slew_s, min_dwell_s : float
        Slew duration and shortest dwell, s.
    high_mode, low_mode : str
    current_mode : str, optional
        Mode the spacecraft is commanded to now (no switch is emitted into it).
    end_mode : str, optional
        Mode to take effect at the end of the last segment (e.g. the formation-keeping mode).

    Returns
    -------
    switches : list of (float, str)
        Time-ordered ``(t_s, mode)`` commands, all ``>= t_now_s``, no two equal modes in a row.
    realised_duty : np.ndarray, shape (S,)
        High-drag fraction per segment that the switches produce (at their effective times).
    """
    s0 = np.asarray(seg_t0_s, dtype=float)
    s1 = np.asarray(seg_t1_s, dtype=float)
    d = np.clip(np.asarray(duty, dtype=float), 0.0, 1.0)
    S = s0.size
    if S == 0:
        sw = [] if end_mode is None or end_mode == current_mode else [(float(t_now_s), end_mode)]
        return sw, np.zeros(0)
    dwell = max(float(min_dwell_s), float(slew_s), 0.0)
    L = s1 - s0
    q = np.where(d * L < max(dwell, 1e-9), 0.0, d)
    q = np.where((1.0 - q) * L < 2.0 * dwell, np.where(q > 0, 1.0, 0.0), q)
    q = np.where(q > 1.0 - 1e-12, 1.0, q)
    mid = 0.5 * (s0 + s1)
    half = 0.5 * q * L
    a0s, a1s = (mid - half)[q > 0], (mid + half)[q > 0]
    if a1s.size < 2 or np.all(np.diff(a1s) >= 0):
        # spells in time order (segments do not overlap): a spell joins the previous one when it
        # starts within 1e-6 s of its end, and a merged spell ends where its last member ends
        first = np.ones(a1s.size, dtype=bool)
        first[1:] = ~(a0s[1:] - a1s[:-1] < 1e-6)
        starts = np.nonzero(first)[0]
        ends = np.concatenate([starts[1:] - 1, [a1s.size - 1]]).astype(int) if a1s.size else starts
        m0, m1 = a0s[starts], a1s[ends]
    else:  # overlapping segments (not from segment_grid): merge one spell at a time
        merged = []
        for a0, a1 in zip(a0s, a1s):
            if merged and a0 - merged[-1][1] < 1e-6:
                merged[-1][1] = max(merged[-1][1], a1)
            else:
                merged.append([a0, a1])
        m0 = np.array([m[0] for m in merged])
        m1 = np.array([m[1] for m in merged])
    t_start, t_end = float(s0[0]), float(s1[-1])
    # effective (time, mode) events: [low at the start], then per spell high (and low after it
    # unless it runs to the end), [end mode]
    names = [low_mode, high_mode] + ([] if end_mode is None else [end_mode])
    ids = {}
    code = np.array([ids.setdefault(n, len(ids)) for n in names])
    pair_t = np.column_stack([np.maximum(m0, t_start), m1]).ravel()
    pair_c = np.tile(code[[1, 0]], m0.size)
    pair_keep = np.ones(pair_t.size, dtype=bool)
    pair_keep[1::2] = m1 < t_end - 1e-9
    lead = m0.size == 0 or m0[0] > t_start + 1e-9
    ev_t = np.concatenate([[t_start] if lead else [], pair_t[pair_keep],
                           [] if end_mode is None else [t_end]])
    ev_c = np.concatenate([code[:1] if lead else [], pair_c[pair_keep],
                           [] if end_mode is None else code[2:]]).astype(int)
    # an event into the mode already commanded is no switch
    prev = np.concatenate([[ids.get(current_mode, -1)], ev_c[:-1]])
    keep = ev_c != prev
    ev_t, ev_c = ev_t[keep], ev_c[keep]
    tc_all = np.maximum(ev_t - 0.5 * slew_s, float(t_now_s))
    te_all = np.where(tc_all > ev_t - 0.5 * slew_s + 1e-9, tc_all + 0.5 * slew_s, ev_t)
    mode_of = {i: n for n, i in ids.items()}
    if tc_all.size < 2 or not np.any(tc_all[1:] <= tc_all[:-1] + 1e-9):
        # no two commands at one instant: every kept event is a switch, modes alternate
        ms = [mode_of[c] for c in ev_c.tolist()]
        clean = list(zip(tc_all.tolist(), ms))
        eff = list(zip(te_all.tolist(), ms))
    else:
        switches, eff = [], []
        for tc, te_real, c in zip(tc_all.tolist(), te_all.tolist(), ev_c.tolist()):
            m = mode_of[c]
            if switches and tc <= switches[-1][0] + 1e-9:
                switches[-1] = (switches[-1][0], m)  # two commands at one instant: the later wins
                eff[-1] = (eff[-1][0], m)
            else:
                switches.append((tc, m))
                eff.append((te_real, m))
        clean, last = [], current_mode
        for tc, m in switches:
            if m != last:
                clean.append((tc, m))
                last = m
    # high-drag time per segment: the cumulative high-drag time H(t) is piecewise linear with
    # breaks at the (time-ordered) effective switches, so each segment's is H(s1) - H(s0)
    timeline = [(t_start, current_mode)] + eff
    te = np.maximum.accumulate(np.array([t for t, _ in timeline] + [t_end]))
    high = np.array([m == high_mode for _, m in timeline], dtype=float)
    H = np.concatenate([[0.0], np.cumsum(high * np.diff(te))])
    realised = np.interp(s1, te, H) - np.interp(s0, te, H)
    realised = np.where(L > 0, realised / np.maximum(L, 1e-300), 0.0)
    return clean, np.clip(realised, 0.0, 1.0)

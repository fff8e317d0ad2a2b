"""The min-fuel program on scaled arrays, solved by column generation over exact Euclidean
directions (:class:`MinFuelProgram`).

It needs only the control matrices: impulse columns ``G`` (J, 6, 3), drag duty columns ``H``
(S, 6) and the right-hand side ``delta`` (6,), all scaled to m/s (the problem in physical units
and its scaling are in :mod:`guidance.planning.deputy`).

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
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

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

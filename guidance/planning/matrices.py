"""Control-effect matrices of the planner: vectorised forms of
:func:`guidance.dynamics.impulse_input` and :func:`guidance.dynamics.drag_segment_input` (a test
checks that they agree), with a small memo of the last results.

All are in the chief's mean elements and the dimensionless mean ROE of :mod:`guidance.roe`;
impulses are RTN (m/s), drag is a differential along-track acceleration (m/s^2).
"""

from __future__ import annotations

import numpy as np

from ..dynamics import control_impulse, gauss_legendre, mean_arg_latitude, mean_motion, stm_j2, stm_kepler

STM_MODELS = {"j2": stm_j2, "kepler": stm_kepler}
"""Dynamics models a plan may use (names -> STM functions of :mod:`guidance.dynamics`)."""


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

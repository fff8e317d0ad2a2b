"""Time grids of the planner and the chief's own motion (guidance's secular J2 model).

Candidate burn times and drag segments lie on grids anchored once (at a law's first plan), so
that a re-plan keeps every candidate of the original plan that is still ahead.
"""

from __future__ import annotations

import numpy as np

from ..dynamics import j2_coefficients


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

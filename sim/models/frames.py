"""The one RTN frame helper of sim/ (numpy only).

RTN (radial, transverse, normal; Orekit's ``LOFType.QSW``): R along the position, N along the
orbital angular momentum ``r x v``, T = N x R. Which way a matrix is laid out is in its name:
:func:`rtn_rows` has the unit vectors as rows (``x_rtn = M @ x_eci``), :func:`rtn_columns` as
columns (``x_eci = M @ x_rtn``). sim/ keeps its own copy, apart from guidance's, so that what
judges guidance shares no code with it.
"""

from __future__ import annotations

import numpy as np

__all__ = ["rtn_rows", "rtn_columns", "relative_rtn"]


def _unit(x: np.ndarray) -> np.ndarray:
    if x.ndim == 1:
        return x / np.linalg.norm(x)
    return x / np.linalg.norm(x, axis=-1, keepdims=True)


def rtn_rows(r_eci_m, v_eci_mps) -> np.ndarray:
    """Rotation from ECI to the RTN frame of a state: rows R, T, N.

    Parameters
    ----------
    r_eci_m, v_eci_mps : array_like, shape (3,) or (K, 3)
        Position (m) and velocity (m/s) in ECI.

    Returns
    -------
    np.ndarray, shape (3, 3) or (K, 3, 3)
        Rows are the R, T, N unit vectors in ECI: ``x_rtn = M @ x_eci``.
    """
    r = np.asarray(r_eci_m, dtype=float)
    h = np.cross(r, np.asarray(v_eci_mps, dtype=float))
    ur = _unit(r)
    un = _unit(h)
    ut = np.cross(un, ur)
    return np.stack((ur, ut, un), axis=-2)


def rtn_columns(r_eci_m, v_eci_mps) -> np.ndarray:
    """Rotation from the RTN frame of a state to ECI: columns R, T, N (``x_eci = M @ x_rtn``).

    Shapes as :func:`rtn_rows` (the transpose of it).
    """
    # a C-contiguous copy: matrix products with it then round as they did with column_stack
    return np.ascontiguousarray(np.swapaxes(rtn_rows(r_eci_m, v_eci_mps), -1, -2))


def relative_rtn(r_chief_eci_m, v_chief_eci_mps, x_eci) -> np.ndarray:
    """A deputy's position minus the chief's, in the chief's RTN axes.

    Parameters
    ----------
    r_chief_eci_m, v_chief_eci_mps : np.ndarray, shape (K, 3)
        Chief state, ECI, m and m/s.
    x_eci : np.ndarray, shape (K, 3)
        Deputy position, ECI, m.

    Returns
    -------
    np.ndarray, shape (K, 3)
        (R, T, N) components of ``x_eci - r_chief_eci_m``, m.
    """
    M = rtn_rows(r_chief_eci_m, v_chief_eci_mps)
    d = np.asarray(x_eci, dtype=float) - np.asarray(r_chief_eci_m, dtype=float)
    return np.stack([np.sum(d * M[..., k, :], -1) for k in range(3)], axis=-1)

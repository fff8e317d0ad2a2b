"""Quasi-nonsingular orbital elements and relative orbital elements (ROE), vectorised numpy.

Element set used throughout guidance (``oe``), shape (..., 6):
``(a_m, ex, ey, i_rad, raan_rad, u_rad)`` with ``ex = e cos(w)``, ``ey = e sin(w)`` and
``u = w + M`` the *mean* argument of latitude.

ROE (Koenig, Guffanti et al., "New State Transition Matrices for Spacecraft Relative Motion in
Perturbed Orbits", JGCD 40(7):1749-1768, 2017, eq. 2), shape (..., 6), dimensionless:
``da = (a_d - a_c)/a_c``, ``dlambda = (u_d - u_c) + (raan_d - raan_c) cos i_c``,
``dex = ex_d - ex_c``, ``dey = ey_d - ey_c``, ``dix = i_d - i_c``, ``diy = (raan_d - raan_c) sin i_c``.
Multiply by the chief's ``a`` for a-scaled metres.
"""

from __future__ import annotations

import numpy as np

from .constants import MU_EARTH_M3PS2


def wrap_pi(x):
    """Wrap angles to [-pi, pi)."""
    return (np.asarray(x) + np.pi) % (2.0 * np.pi) - np.pi


def oe_to_roe(chief_oe, deputy_oe):
    """ROE of a deputy with respect to a chief.

    Parameters
    ----------
    chief_oe, deputy_oe : array_like, shape (..., 6)
        Quasi-nonsingular elements ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``; broadcast together.

    Returns
    -------
    np.ndarray, shape (..., 6)
        Dimensionless ROE ``(da, dlambda, dex, dey, dix, diy)``.
    """
    c = np.asarray(chief_oe, dtype=float)
    d = np.asarray(deputy_oe, dtype=float)
    c, d = np.broadcast_arrays(c, d)
    draan = wrap_pi(d[..., 4] - c[..., 4])
    out = np.empty(c.shape)
    out[..., 0] = (d[..., 0] - c[..., 0]) / c[..., 0]
    out[..., 1] = wrap_pi(d[..., 5] - c[..., 5]) + draan * np.cos(c[..., 3])
    out[..., 2] = d[..., 1] - c[..., 1]
    out[..., 3] = d[..., 2] - c[..., 2]
    out[..., 4] = d[..., 3] - c[..., 3]
    out[..., 5] = draan * np.sin(c[..., 3])
    return out


def roe_to_oe(chief_oe, roe):
    """Deputy elements from the chief's elements and dimensionless ROE (inverse of :func:`oe_to_roe`).

    Parameters
    ----------
    chief_oe : array_like, shape (..., 6)
    roe : array_like, shape (..., 6)
        Dimensionless ROE.

    Returns
    -------
    np.ndarray, shape (..., 6)
        Deputy quasi-nonsingular elements.
    """
    c = np.asarray(chief_oe, dtype=float)
    r = np.asarray(roe, dtype=float)
    c, r = np.broadcast_arrays(c, r)
    out = np.empty(c.shape)
    draan = r[..., 5] / np.sin(c[..., 3])
    out[..., 0] = c[..., 0] * (1.0 + r[..., 0])
    out[..., 1] = c[..., 1] + r[..., 2]
    out[..., 2] = c[..., 2] + r[..., 3]
    out[..., 3] = c[..., 3] + r[..., 4]
    out[..., 4] = c[..., 4] + draan
    out[..., 5] = c[..., 5] + r[..., 1] - draan * np.cos(c[..., 3])
    return out


def solve_kepler(M, e, tol=1e-14, iters=30):
    """Eccentric anomaly from Kepler's equation ``E - e sin E = M`` by Newton iteration.

    Parameters
    ----------
    M : array_like, shape (...)
        Mean anomaly, rad.
    e : array_like, shape (...) or scalar
        Eccentricity, below 1.
    tol : float
        Stop when every Newton step is below this, rad.
    iters : int
        Largest number of Newton steps.

    Returns
    -------
    np.ndarray, shape (...)
        Eccentric anomaly, rad (starting from ``E = M``; not wrapped).
    """
    E = np.array(M, dtype=float, copy=True)
    for _ in range(iters):
        f = E - e * np.sin(E) - M
        dE = f / (1.0 - e * np.cos(E))
        E = E - dE
        if np.all(np.abs(dE) < tol):
            break
    return E


def rv_to_oe(r_eci_m, v_eci_mps, mu=MU_EARTH_M3PS2):
    """Osculating quasi-nonsingular elements from Cartesian state (two-body).

    Parameters
    ----------
    r_eci_m : array_like, shape (..., 3)
        Position in an equator-aligned inertial frame (covey: TOD), m.
    v_eci_mps : array_like, shape (..., 3)
        Velocity, m/s.
    mu : float
        Gravitational parameter, m^3/s^2.

    Returns
    -------
    np.ndarray, shape (..., 6)
        ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``, u the mean argument of latitude.
        Undefined for equatorial orbits (i = 0).
    """
    r = np.asarray(r_eci_m, dtype=float)
    v = np.asarray(v_eci_mps, dtype=float)
    rn = np.linalg.norm(r, axis=-1)
    v2 = np.sum(v * v, axis=-1)
    h = np.cross(r, v)
    hn = np.linalg.norm(h, axis=-1)
    a = 1.0 / (2.0 / rn - v2 / mu)
    i = np.arccos(np.clip(h[..., 2] / hn, -1.0, 1.0))
    raan = np.arctan2(h[..., 0], -h[..., 1])
    # unit vectors: node line and its in-plane normal
    nvec = np.stack([np.cos(raan), np.sin(raan), np.zeros_like(raan)], axis=-1)
    w_hat = h / hn[..., None]
    mvec = np.cross(w_hat, nvec)
    evec = np.cross(v, h) / mu - r / rn[..., None]
    ex = np.sum(evec * nvec, axis=-1)
    ey = np.sum(evec * mvec, axis=-1)
    u_true = np.arctan2(np.sum(r * mvec, axis=-1), np.sum(r * nvec, axis=-1))
    e = np.hypot(ex, ey)
    w = np.arctan2(ey, ex)
    nu = u_true - w
    E = np.arctan2(np.sqrt(1.0 - e * e) * np.sin(nu), e + np.cos(nu))
    M = E - e * np.sin(E)
    u = wrap_pi(w + M) % (2.0 * np.pi)
    return np.stack([a, ex, ey, i, raan % (2 * np.pi), u], axis=-1)


def oe_to_rv(oe, mu=MU_EARTH_M3PS2):
    """Cartesian state from quasi-nonsingular elements (two-body); inverse of :func:`rv_to_oe`.

    Parameters
    ----------
    oe : array_like, shape (..., 6)
        ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``, u the mean argument of latitude.

    Returns
    -------
    r_eci_m, v_eci_mps : np.ndarray, shape (..., 3)
    """
    oe = np.asarray(oe, dtype=float)
    a, ex, ey, i, raan, u = (oe[..., k] for k in range(6))
    e = np.hypot(ex, ey)
    w = np.arctan2(ey, ex)
    M = u - w
    E = solve_kepler(M, e)
    nu = 2.0 * np.arctan2(np.sqrt(1 + e) * np.sin(E / 2), np.sqrt(1 - e) * np.cos(E / 2))
    p = a * (1 - e * e)
    rn = a * (1 - e * np.cos(E))
    th = w + nu  # true argument of latitude
    # position / velocity in the (node, in-plane normal, orbit normal) frame
    x = rn * np.cos(th)
    y = rn * np.sin(th)
    sq = np.sqrt(mu / p)
    vx = -sq * (np.sin(th) + ey)
    vy = sq * (np.cos(th) + ex)
    cO, sO, ci, si = np.cos(raan), np.sin(raan), np.cos(i), np.sin(i)
    P = np.stack([cO, sO, np.zeros_like(cO)], axis=-1)
    Q = np.stack([-sO * ci, cO * ci, si], axis=-1)
    r = x[..., None] * P + y[..., None] * Q
    v = vx[..., None] * P + vy[..., None] * Q
    return r, v


def rtn_basis(r_eci_m, v_eci_mps):
    """Rows R, T, N of the RTN frame, shape (..., 3, 3): ``x_rtn = C @ x_eci``."""
    r = np.asarray(r_eci_m, dtype=float)
    v = np.asarray(v_eci_mps, dtype=float)
    R = r / np.linalg.norm(r, axis=-1, keepdims=True)
    h = np.cross(r, v)
    N = h / np.linalg.norm(h, axis=-1, keepdims=True)
    T = np.cross(N, R)
    return np.stack([R, T, N], axis=-2)


def relative_rtn_to_eci(r_chief_eci_m, v_chief_eci_mps, dr_rtn_m, dv_rtn_mps):
    """Deputy absolute state from the chief state and a relative state in the chief's RTN frame.

    ``dv_rtn_mps`` is the inertial velocity difference expressed in RTN axes (see
    :class:`guidance.interface.RelativeEstimate`).

    Returns
    -------
    r_eci_m, v_eci_mps : np.ndarray, shape (..., 3)
    """
    C = rtn_basis(r_chief_eci_m, v_chief_eci_mps)
    Ct = np.swapaxes(C, -1, -2)
    r = np.asarray(r_chief_eci_m) + np.einsum("...ij,...j->...i", Ct, dr_rtn_m)
    v = np.asarray(v_chief_eci_mps) + np.einsum("...ij,...j->...i", Ct, dv_rtn_mps)
    return r, v

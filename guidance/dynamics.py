"""Mean relative dynamics for near-circular orbits: J2 state transition matrix, impulsive and
differential-drag control inputs. Pure numpy.

References
----------
- Koenig, Guffanti et al., "New State Transition Matrices for Spacecraft Relative Motion in
  Perturbed Orbits", JGCD 40(7):1749-1768, 2017: the J2 STM of quasi-nonsingular mean ROE
  (eqs. 14-16 define kappa, E..T; the matrix below is their J2 STM in those symbols).
- Gaias et al., "Impulsive Maneuvers for Formation Reconfiguration Using Relative
  Orbital Elements", JGCD 38(6), 2015: the near-circular impulsive input matrix (Gauss variational
  equations).

All ROE here are dimensionless; the same matrices act on a-scaled ROE unchanged.
"""

from __future__ import annotations

import numpy as np

from .constants import J2, MU_EARTH_M3PS2, R_EARTH_M


def mean_motion(a_m, mu=MU_EARTH_M3PS2):
    """Keplerian mean motion sqrt(mu/a^3), rad/s."""
    return np.sqrt(mu / np.asarray(a_m, dtype=float) ** 3)


def j2_coefficients(chief_oe, mu=MU_EARTH_M3PS2, re=R_EARTH_M, j2=J2):
    """The J2 coefficients of Koenig et al. (2017, eqs. 14-16) for a chief's mean elements.

    Parameters
    ----------
    chief_oe : array_like, shape (6,)
        Chief mean quasi-nonsingular elements ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``.

    Returns
    -------
    dict
        ``n, kappa, eta, E, F, G, P, Q, R, S, T`` and the secular rates ``w_dot`` (argument of
        perigee), ``raan_dot`` and ``u_dot`` (mean argument of latitude), rad/s.
    """
    a, ex, ey, i = (float(chief_oe[k]) for k in range(4))
    e2 = ex * ex + ey * ey
    eta = np.sqrt(1.0 - e2)
    n = float(mean_motion(a, mu))
    kappa = 0.75 * j2 * re**2 * np.sqrt(mu) / (a**3.5 * eta**4)
    ci, si = np.cos(i), np.sin(i)
    P = 3 * ci**2 - 1
    Q = 5 * ci**2 - 1
    c = dict(n=n, kappa=kappa, eta=eta, E=1 + eta, F=4 + 3 * eta, G=1 / eta**2, P=P, Q=Q, R=ci,
             S=np.sin(2 * i), T=si**2)
    c["w_dot"] = kappa * Q
    c["raan_dot"] = -2 * kappa * ci
    c["u_dot"] = n + kappa * (eta * P + Q)
    return c


def stm_j2(chief_oe, tau_s, mu=MU_EARTH_M3PS2, re=R_EARTH_M, j2=J2):
    """J2 state transition matrix of mean quasi-nonsingular ROE (Koenig et al. 2017).

    Parameters
    ----------
    chief_oe : array_like, shape (6,)
        Chief mean elements at the start of the interval.
    tau_s : float or array_like, shape (K,)
        Propagation interval(s), s (may be negative).

    Returns
    -------
    np.ndarray, shape (6, 6) or (K, 6, 6)
        ``roe(t0 + tau) = Phi(tau) @ roe(t0)``.
    """
    c = j2_coefficients(chief_oe, mu, re, j2)
    tau = np.atleast_1d(np.asarray(tau_s, dtype=float))
    k, E, F, G, P, Q, S, T = (c[x] for x in ("kappa", "E", "F", "G", "P", "Q", "S", "T"))
    n = c["n"]
    exi, eyi = float(chief_oe[1]), float(chief_oe[2])
    wdt = c["w_dot"] * tau
    cw, sw = np.cos(wdt), np.sin(wdt)
    exf = exi * cw - eyi * sw
    eyf = exi * sw + eyi * cw
    Phi = np.zeros((tau.size, 6, 6))
    Phi[:, 0, 0] = 1.0
    Phi[:, 1, 0] = -(1.5 * n + 3.5 * k * E * P) * tau
    Phi[:, 1, 1] = 1.0
    Phi[:, 1, 2] = k * exi * F * G * P * tau
    Phi[:, 1, 3] = k * eyi * F * G * P * tau
    Phi[:, 1, 4] = -k * F * S * tau
    Phi[:, 2, 0] = 3.5 * k * eyf * Q * tau
    Phi[:, 2, 2] = cw - 4 * k * exi * eyf * G * Q * tau
    Phi[:, 2, 3] = -sw - 4 * k * eyi * eyf * G * Q * tau
    Phi[:, 2, 4] = 5 * k * eyf * S * tau  # d(w_dot)/di = -5 kappa S (sign fixed, see tests)
    Phi[:, 3, 0] = -3.5 * k * exf * Q * tau
    Phi[:, 3, 2] = sw + 4 * k * exi * exf * G * Q * tau
    Phi[:, 3, 3] = cw + 4 * k * eyi * exf * G * Q * tau
    Phi[:, 3, 4] = -5 * k * exf * S * tau
    Phi[:, 4, 4] = 1.0
    Phi[:, 5, 0] = 3.5 * k * S * tau
    Phi[:, 5, 2] = -4 * k * exi * G * S * tau
    Phi[:, 5, 3] = -4 * k * eyi * G * S * tau
    Phi[:, 5, 4] = 2 * k * T * tau
    Phi[:, 5, 5] = 1.0
    return Phi[0] if np.ndim(tau_s) == 0 else Phi


def stm_kepler(chief_oe, tau_s, mu=MU_EARTH_M3PS2):
    """Keplerian STM of ROE (only dlambda drifts with da), shape (6, 6) or (K, 6, 6)."""
    n = float(mean_motion(chief_oe[0], mu))
    tau = np.atleast_1d(np.asarray(tau_s, dtype=float))
    Phi = np.tile(np.eye(6), (tau.size, 1, 1))
    Phi[:, 1, 0] = -1.5 * n * tau
    return Phi[0] if np.ndim(tau_s) == 0 else Phi


def mean_arg_latitude(chief_oe, t_s, t0_s=0.0, mu=MU_EARTH_M3PS2, re=R_EARTH_M, j2=J2):
    """Chief mean argument of latitude at ``t_s`` under J2 secular drift, rad (not wrapped)."""
    c = j2_coefficients(chief_oe, mu, re, j2)
    return float(chief_oe[5]) + c["u_dot"] * (np.asarray(t_s, dtype=float) - t0_s)


def control_impulse(a_m, u_rad, mu=MU_EARTH_M3PS2):
    """Impulsive input matrix, near-circular (Gaias et al. 2015).

    Parameters
    ----------
    a_m : float
        Chief semi-major axis, m.
    u_rad : float or array_like, shape (K,)
        Mean argument of latitude at the burn, rad.

    Returns
    -------
    np.ndarray, shape (6, 3) or (K, 6, 3)
        Change of dimensionless ROE per unit delta-v ``[dv_R, dv_T, dv_N]`` in m/s, i.e.
        ``B / (n a)``. Multiply by ``a`` for a-scaled metres per m/s.
    """
    u = np.atleast_1d(np.asarray(u_rad, dtype=float))
    su, cu = np.sin(u), np.cos(u)
    B = np.zeros((u.size, 6, 3))
    B[:, 0, 1] = 2.0
    B[:, 1, 0] = -2.0
    B[:, 2, 0] = su
    B[:, 2, 1] = 2 * cu
    B[:, 3, 0] = -cu
    B[:, 3, 1] = 2 * su
    B[:, 4, 2] = cu
    B[:, 5, 2] = su
    B /= float(mean_motion(a_m, mu)) * float(a_m)
    return B[0] if np.ndim(u_rad) == 0 else B


def drag_segment_input(chief_oe, t0_s, t1_s, tf_s, t_ref_s=0.0, n_quad=8, stm=stm_j2):
    """Effect on the final ROE of a constant differential along-track acceleration on a segment.

    The deputy-minus-chief differential acceleration ``a_T`` (m/s^2, along the chief's T axis;
    negative when the deputy has more drag) acts from ``t0_s`` to ``t1_s``; its effect on the
    dimensionless ROE at ``tf_s`` is ``g * a_T`` with

    ``g = integral_{t0}^{t1} Phi(tf - tau) B(u(tau))[:, T] dtau``

    computed with composite Gauss-Legendre quadrature: the segment is cut into panels of at most
    one orbit, each with ``n_quad`` nodes (8 nodes per orbit integrate the once-per-orbit terms
    to about 1e-11 relative against adaptive quadrature). ``u(tau)`` follows the chief's J2 mean rate
    (:func:`mean_arg_latitude`) whatever ``stm`` is.

    Parameters
    ----------
    chief_oe : array_like, shape (6,)
        Chief mean elements at ``t_ref_s``.
    t0_s, t1_s, tf_s : float
        Segment start, end and the evaluation time (``tf_s >= t1_s``), s since epoch.
    t_ref_s : float
        Epoch of ``chief_oe``, s since epoch.
    n_quad : int
        Gauss-Legendre nodes per panel (per orbit).
    stm : callable
        ``stm(chief_oe, tau_s)`` returning (K, 6, 6) for an array ``tau_s``; :func:`stm_j2` or
        :func:`stm_kepler`.

    Returns
    -------
    np.ndarray, shape (6,)
        Dimensionless ROE at ``tf_s`` per m/s^2 of differential along-track acceleration.
        Zero for an empty segment (``t1_s <= t0_s``).
    """
    a = float(chief_oe[0])
    period = 2 * np.pi / float(mean_motion(a))
    span = float(t1_s) - float(t0_s)
    if span <= 0:
        return np.zeros(6)
    panels = max(1, int(np.ceil(span / period - 1e-9)))
    x, w = gauss_legendre(int(n_quad))
    h = span / panels
    starts = float(t0_s) + h * np.arange(panels)
    tau = (starts[:, None] + 0.5 * (x[None, :] + 1.0) * h).ravel()
    wt = np.tile(0.5 * h * w, panels)
    u = mean_arg_latitude(chief_oe, tau, t_ref_s)
    B = control_impulse(a, u)[:, :, 1]  # (m, 6)
    Phi = stm(chief_oe, float(tf_s) - tau)  # (m, 6, 6)
    return np.einsum("k,kij,kj->i", wt, Phi, B)


_LEGGAUSS_CACHE = {}


def gauss_legendre(n):
    """Gauss-Legendre nodes and weights on [-1, 1] (``numpy.polynomial.legendre.leggauss``),
    cached by ``n``.

    Parameters
    ----------
    n : int
        Number of nodes.

    Returns
    -------
    x, w : np.ndarray, shape (n,)
        Nodes and weights (shared by every caller: do not modify them).
    """
    if n not in _LEGGAUSS_CACHE:
        _LEGGAUSS_CACHE[n] = np.polynomial.legendre.leggauss(n)
    return _LEGGAUSS_CACHE[n]


def impulse_input(chief_oe, t_burn_s, tf_s, t_ref_s=0.0, stm=stm_j2):
    """Effect on the final dimensionless ROE of a unit impulse at ``t_burn_s``, shape (6, 3)."""
    a = float(chief_oe[0])
    u = mean_arg_latitude(chief_oe, t_burn_s, t_ref_s)
    return stm(chief_oe, tf_s - t_burn_s) @ control_impulse(a, u)

"""First-order J2 (plus J3 long-period) mapping between osculating and mean elements (numpy).

Element set (``oe``), shape (..., 6): ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``, ``ex = e cos w``,
``ey = e sin w``, ``u = w + M`` the *mean* argument of latitude (as in :mod:`guidance.roe`).

Theory
------
Mean to osculating is the first-order J2 short- and long-period correction of Brouwer's theory in
the form given by Schaub & Junkins, *Analytical Mechanics of Space Systems*, AIAA, appendix F
("Brouwer-Lyddane" first-order mapping, J2 only, ``gamma2 = J2/2 (Re/a)^2``). That appendix is in
classical elements; it is made non-singular at e -> 0 here by never forming ``w`` or ``M`` of the
result separately:

- the corrections to ``a``, ``i``, ``raan`` and to the mean longitude ``lambda = M + w + raan`` are
  used as given (their ``sin 2w`` long-period terms cancel at e = 0), with the ``lambda``
  correction completed by ``X eta^2 e / (1 + eta)``: Brouwer's short-period corrections of l and
  g share one bracket X (``e dM = -eta^3 X``, ``e dg = eta^2 X + ...``), so l + g keeps
  ``X (eta^2 - eta^3) / e`` (Brouwer, "Solution of the problem of artificial satellite theory
  without drag", AJ 64, 1959 [memory]); a J2 numerical-integration test shows it is needed;
- the appendix forms ``e' exp(i M') = (e + de + i e dM) exp(i M)`` (its ``d1, d2``) and
  ``w' = lambda' - M' - raan'``; so the eccentricity vector is
  ``ex' + i ey' = (e + de - i e dM) exp(i (u' - M))``, where ``de`` and ``e dM`` stay finite and
  their e-independent parts combine into functions of ``u = w + f`` only (checked by a test that
  turns ``w`` at e = 0).

J3 long-period terms (on by default, ``j3=0`` turns them off): for near-circular orbits the
averaged J3 potential, to first order in e, is ``R3 = n^2 a^2 g3 s (1 - 5/4 s^2) ey`` with
``g3 = 3/2 J3 (Re/a)^3``, ``s = sin i`` (derived here from ``-(mu/r) J3 (Re/r)^3 P3(sin phi)``
averaged over the mean anomaly). Lagrange's planetary equations give rates of ``lambda``, ``raan``
and ``i`` proportional to ``ey`` and ``ex``; integrated over the J2 rotation of the e-vector
(rate ``w_dot = 3 n J2 (Re/a)^2 (1 - 5/4 s^2)``) they give, with ``k3 = J3/(2 J2) Re/a``,

- ``d lambda = -k3 [8.5 s (1 - 5/4 s^2) + tan(i/2) c (1 - 15/4 s^2)] / (1 - 5/4 s^2) ex``
- ``d raan = -k3 (c/s) (1 - 15/4 s^2) / (1 - 5/4 s^2) ex``
- ``d i = k3 c (ey + k3 s)``  (``-k3 s`` is the frozen ey, about which the e-vector turns)

(c = cos i). The e-vector itself is left as is: its J3 part is the frozen-eccentricity offset,
which the mean e-vector keeps (it turns about that point) and which cancels in ROE. Without
these terms a 1 km separation in ex shows up as about 9 m of dlambda against Orekit's
Eckstein-Hechler mean elements (which remove them); with them the difference is below 0.1 m
(tests/guidance/test_meanosc.py). These rates are the classical ones that make the frozen
eccentricity ``-J3/(2 J2) (Re/a) sin i`` (e.g. Vallado, Fundamentals of Astrodynamics and
Applications, 4th ed., frozen orbits [memory]).

Osculating to mean inverts that map by fixed-point iteration to a tolerance of 1e-13 (relative
in ``a``, absolute in the others), so ``osc_to_mean(mean_to_osc(x)) == x`` to round-off; the
sign-flipped appendix formula would agree with it only to O(J2^2).

Valid for near-circular and moderately eccentric LEO orbits away from the critical inclination
(63.43 deg, where the long-period terms divide by ``1 - 5 cos^2 i``) and away from i = 0.
Covey's ECI is TOD, whose z axis is the true pole: J2 needs no frame tilt.
"""

from __future__ import annotations

import numpy as np

from .constants import J2, J3, MU_EARTH_M3PS2, R_EARTH_M
from .roe import oe_to_rv, rv_to_oe, solve_kepler, wrap_pi

_TOL = 1e-13
_MAX_ITER = 30


def _check_oe(oe, name):
    x = np.asarray(oe, dtype=float)
    if x.shape[-1:] != (6,):
        from .interface import GuidanceInputError
        raise GuidanceInputError(name, x.shape, "an array of shape (..., 6): (a_m, ex, ey, i_rad, "
                                 "raan_rad, u_rad)")
    return x


def mean_to_osc(oe_mean, mu=MU_EARTH_M3PS2, re=R_EARTH_M, j2=J2, j3=J3):
    """Osculating elements from mean elements (first-order J2, Schaub & Junkins appendix F,
    plus the J3 long-period terms of the module docstring; ``j3=0`` for J2 only).

    Parameters
    ----------
    oe_mean : array_like, shape (..., 6)
        Mean ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``, u the mean argument of latitude.

    Returns
    -------
    np.ndarray, shape (..., 6)
        Osculating elements, same layout; angles ``raan`` and ``u`` in [0, 2 pi).
    """
    x = _check_oe(oe_mean, "oe_mean")
    return _mean_to_osc(x, j2, j3, re)


def _mean_to_osc(x, j2, j3, re):
    """The appendix-F map with ``gamma2 = J2/2 (Re/a)^2`` plus J3 long-period terms."""
    half_j2 = 0.5 * j2
    a, ex, ey, i, raan, u = (x[..., k] for k in range(6))
    e = np.hypot(ex, ey)
    w = np.arctan2(ey, ex)
    M = u - w
    g2 = half_j2 * (re / a) ** 2
    eta2 = 1.0 - e * e
    eta = np.sqrt(eta2)
    g2p = g2 / eta2**2
    E = solve_kepler(np.mod(M, 2 * np.pi), e)
    f = 2.0 * np.arctan2(np.sqrt(1 + e) * np.sin(E / 2), np.sqrt(1 - e) * np.cos(E / 2))
    aor = (1.0 + e * np.cos(f)) / eta2  # a / r
    c = np.cos(i)
    c2 = c * c
    s2 = 1.0 - c2
    k5 = 1.0 - 5.0 * c2
    cf = np.cos(f)
    fmM = wrap_pi(f - np.mod(M, 2 * np.pi))
    w2 = 2.0 * w
    c2wf, c2w2f, c2w3f = np.cos(w2 + f), np.cos(w2 + 2 * f), np.cos(w2 + 3 * f)
    s2wf, s2w2f, s2w3f = np.sin(w2 + f), np.sin(w2 + 2 * f), np.sin(w2 + 3 * f)
    lp = 1.0 - 11.0 * c2 - 40.0 * c2 * c2 / k5  # long-period factor

    da = a * g2 * ((3 * c2 - 1) * (aor**3 - 1 / eta**3) + 3 * s2 * aor**3 * c2w2f)
    de1 = g2p / 8.0 * e * eta2 * lp * np.cos(w2)
    de = de1 + 0.5 * eta2 * (
        g2 * ((3 * c2 - 1) / eta2**3 * (e * eta + e / (1 + eta) + 3 * cf + 3 * e * cf**2
                                        + e * e * cf**3)
              + 3 * s2 / eta2**3 * (e + 3 * cf + 3 * e * cf**2 + e * e * cf**3) * c2w2f)
        - g2p * s2 * (3 * c2wf + np.cos(w2 + 3 * f)))
    di = (-e * de1 / (eta2 * np.tan(i))
          + 0.5 * g2p * c * np.sqrt(s2) * (3 * c2w2f + 3 * e * c2wf + e * c2w3f))
    short_u = 3 * s2w2f + 3 * e * s2wf + e * s2w3f
    draan = (-g2p / 8.0 * e * e * c * (11 + 80 * c2 / k5 + 200 * c2 * c2 / k5**2) * np.sin(w2)
             - 0.5 * g2p * c * (6 * (fmM + e * np.sin(f)) - short_u))
    dlam = (g2p / 8.0 * eta**3 * lp * np.sin(w2)
            - g2p / 16.0 * (2 + e * e - 11 * (2 + 3 * e * e) * c2 - 40 * (2 + 5 * e * e) * c2 * c2 / k5
                            - 400 * e * e * c2**3 / k5**2) * np.sin(w2)
            + g2p / 4.0 * (-6 * k5 * (fmM + e * np.sin(f)) + (3 - 5 * c2) * short_u)
            + draan)
    # Brouwer's short-period l and g corrections share one bracket X: dl = -eta^3 X / e,
    # dg = eta^2 X / e + (...); so e dM = -eta^3 X and d(l + g) keeps X eta^2 e / (1 + eta).
    X = g2p / 4.0 * (2 * (3 * c2 - 1) * (aor**2 * eta2 + aor + 1) * np.sin(f)
                     + 3 * s2 * ((-aor**2 * eta2 - aor + 1) * s2wf
                                 + (aor**2 * eta2 + aor + 1.0 / 3.0) * s2w3f))
    dlam = dlam + X * eta2 * e / (1.0 + eta)
    edM = g2p / 8.0 * e * eta**3 * lp * np.sin(w2) - eta**3 * X
    if j3 != 0.0:
        k3 = j3 / (2.0 * j2) * re / a
        s = np.sqrt(s2)
        kc = 1.0 - 1.25 * s2
        lam3 = -k3 * (8.5 * s * kc + np.tan(0.5 * i) * c * (1.0 - 3.75 * s2)) / kc * ex
        raan3 = -k3 * (c / s) * (1.0 - 3.75 * s2) / kc * ex
        di = di + k3 * c * (ey + k3 * s)
        dlam = dlam + lam3
        draan = draan + raan3
    u_new = u + dlam - draan
    z = (e + de - 1j * edM) * np.exp(1j * (u_new - M))
    out = np.empty(x.shape)
    out[..., 0] = a + da
    out[..., 1] = z.real
    out[..., 2] = z.imag
    out[..., 3] = i + di
    out[..., 4] = np.mod(raan + draan, 2 * np.pi)
    out[..., 5] = np.mod(u_new, 2 * np.pi)
    return out


def osc_to_mean(oe_osc, mu=MU_EARTH_M3PS2, re=R_EARTH_M, j2=J2, j3=J3, tol=_TOL,
                max_iter=_MAX_ITER):
    """Mean elements from osculating elements: the inverse of :func:`mean_to_osc`.

    Solved by fixed-point iteration ``mean += osc - mean_to_osc(mean)`` (angles wrapped), which
    contracts by a factor of order J2 per step (about five steps to 1e-13).

    Parameters
    ----------
    oe_osc : array_like, shape (..., 6)
        Osculating ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``.

    Returns
    -------
    np.ndarray, shape (..., 6)
        Mean elements; ``raan`` and ``u`` in [0, 2 pi).
    """
    osc = _check_oe(oe_osc, "oe_osc")
    mean = osc.copy()
    for _ in range(max_iter):
        d = osc - _mean_to_osc(mean, j2, j3, re)
        d[..., 4:] = wrap_pi(d[..., 4:])
        mean = mean + d
        err = np.max(np.abs(np.concatenate([d[..., :1] / osc[..., :1], d[..., 1:]], axis=-1)),
                     initial=0.0)
        if err < tol:
            break
    else:
        raise ArithmeticError(
            f"osc_to_mean did not converge in {max_iter} iterations (last step {err:.3g}); "
            "elements outside the mapping's domain (e.g. critical inclination)?")
    mean[..., 4:] = np.mod(mean[..., 4:], 2 * np.pi)
    return mean


def rv_to_mean_oe(r_eci_m, v_eci_mps, mu=MU_EARTH_M3PS2, re=R_EARTH_M, j2=J2, j3=J3):
    """Mean quasi-nonsingular elements from a Cartesian state in covey's ECI (TOD).

    Parameters
    ----------
    r_eci_m, v_eci_mps : array_like, shape (..., 3)
        Position (m) and velocity (m/s) in TOD.

    Returns
    -------
    np.ndarray, shape (..., 6)
    """
    return osc_to_mean(rv_to_oe(r_eci_m, v_eci_mps, mu), mu, re, j2, j3)


def mean_oe_to_rv(oe_mean, mu=MU_EARTH_M3PS2, re=R_EARTH_M, j2=J2, j3=J3):
    """Cartesian state in covey's ECI (TOD) from mean elements.

    Returns
    -------
    r_eci_m, v_eci_mps : np.ndarray, shape (..., 3)
    """
    return oe_to_rv(mean_to_osc(oe_mean, mu, re, j2, j3), mu)

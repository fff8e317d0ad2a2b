"""The independent judge: mean elements and mean ROE of truth samples, by Orekit's
Eckstein-Hechler mean theory.

This module never imports guidance code: the ROE formulas below are written here on purpose,
independently of ``guidance.roe``, so that what judges a guidance law is not the law's own
arithmetic.

Element set, shape (..., 6): ``(a_m, ex, ey, i_rad, raan_rad, u_rad)`` with ``ex = e cos w``,
``ey = e sin w`` and ``u = w + M`` the mean argument of latitude, all Eckstein-Hechler *mean*
elements in covey's ECI (TOD, IERS 2010), gravity field J2..J6 of the Orekit data
(:data:`sim.orekit.forces.EH_DEGREE`).

ROE (Koenig, Guffanti et al., "New State Transition Matrices for Spacecraft Relative Motion in
Perturbed Orbits", JGCD 40(7):1749-1768, 2017, eq. 2), a-scaled by the chief's mean ``a``::

    da      = (a_d - a_c) / a_c
    dlambda = (u_d - u_c) + (raan_d - raan_c) cos i_c
    dex     = ex_d - ex_c
    dey     = ey_d - ey_c
    dix     = i_d - i_c
    diy     = (raan_d - raan_c) sin i_c
"""

from __future__ import annotations

import numpy as np


def _wrap(x):
    return (np.asarray(x, dtype=float) + np.pi) % (2.0 * np.pi) - np.pi


def mean_roe_m(chief_mean, deputy_mean) -> np.ndarray:
    """Mean ROE of a deputy relative to a chief, a-scaled metres.

    Parameters
    ----------
    chief_mean, deputy_mean : array_like, shape (K, 6) or (6,)
        Mean elements ``(a_m, ex, ey, i_rad, raan_rad, u_rad)``.

    Returns
    -------
    np.ndarray, shape like the inputs
        ``a_c * (da, dlambda, dex, dey, dix, diy)``, metres.
    """
    c = np.asarray(chief_mean, dtype=float)
    d = np.asarray(deputy_mean, dtype=float)
    c, d = np.broadcast_arrays(c, d)
    a_c = c[..., 0]
    d_raan = _wrap(d[..., 4] - c[..., 4])
    roe = np.stack([
        (d[..., 0] - a_c) / a_c,
        _wrap(d[..., 5] - c[..., 5]) + d_raan * np.cos(c[..., 3]),
        d[..., 1] - c[..., 1],
        d[..., 2] - c[..., 2],
        d[..., 3] - c[..., 3],
        d_raan * np.sin(c[..., 3]),
    ], axis=-1)
    return roe * a_c[..., None]


def deputy_mean_from_roe(chief_mean, roe_m) -> np.ndarray:
    """Deputy mean elements from the chief's and a-scaled mean ROE (exact inverse of
    :func:`mean_roe_m`).

    Parameters
    ----------
    chief_mean : array_like, shape (6,) or (K, 6)
    roe_m : array_like, shape (6,) or (K, 6)
        a-scaled ROE, metres, order (da, dlambda, dex, dey, dix, diy).

    Returns
    -------
    np.ndarray
        Deputy mean elements, same shape.
    """
    c = np.asarray(chief_mean, dtype=float)
    r = np.asarray(roe_m, dtype=float)
    c, r = np.broadcast_arrays(c, r)
    a_c = c[..., 0]
    x = r / a_c[..., None]
    d_raan = x[..., 5] / np.sin(c[..., 3])
    return np.stack([
        a_c * (1.0 + x[..., 0]),
        c[..., 1] + x[..., 2],
        c[..., 2] + x[..., 3],
        c[..., 3] + x[..., 4],
        c[..., 4] + d_raan,
        c[..., 5] + x[..., 1] - d_raan * np.cos(c[..., 3]),
    ], axis=-1)


class _Theory:
    """Orekit objects for the mean conversion, created once per process."""

    _instance = None

    def __init__(self):
        from sim.orekit.boot import boot

        boot()
        from org.orekit.forces.gravity.potential import GravityFieldFactory
        from org.orekit.frames import FramesFactory
        from org.orekit.utils import IERSConventions

        from sim.orekit.forces import EH_DEGREE

        self.provider = GravityFieldFactory.getUnnormalizedProvider(EH_DEGREE, EH_DEGREE)
        self.mu = float(self.provider.getMu())
        self.tod = FramesFactory.getTOD(IERSConventions.IERS_2010, True)

    @classmethod
    def get(cls) -> "_Theory":
        if cls._instance is None:
            cls._instance = _Theory()
        return cls._instance


def mean_elements(t_s, r_eci_m, v_eci_mps, epoch_utc: str) -> np.ndarray:
    """Eckstein-Hechler mean elements of osculating states.

    Parameters
    ----------
    t_s : array_like, shape (K,)
        Seconds since ``epoch_utc``.
    r_eci_m, v_eci_mps : array_like, shape (K, 3)
        Osculating position and velocity in covey's ECI (TOD), m and m/s.
    epoch_utc : str
        ISO 8601 UTC epoch.

    Returns
    -------
    np.ndarray, shape (K, 6)
        Mean ``(a_m, ex, ey, i_rad, raan_rad, u_rad)`` in TOD; ``raan`` and ``u`` are not
        unwrapped (use ``np.unwrap``). Rows whose conversion fails (Orekit does not converge,
        e.g. a hyperbolic or equatorial state) are NaN.
    """
    import jpype
    from org.orekit.orbits import OrbitType, PositionAngleType
    from org.orekit.propagation.analytical import EcksteinHechlerPropagator

    from sim.orekit.forces import absolute_date

    th = _Theory.get()
    t = np.atleast_1d(np.asarray(t_s, dtype=float))
    r = np.asarray(r_eci_m, dtype=float).reshape(-1, 3)
    v = np.asarray(v_eci_mps, dtype=float).reshape(-1, 3)
    if not (len(t) == len(r) == len(v)):
        raise ValueError(f"t_s, r_eci_m, v_eci_mps must have the same length K: {len(t)}, {len(r)}, {len(v)}")
    epoch = absolute_date(epoch_utc)
    out = np.full((len(t), 6), np.nan)
    rv = np.hstack([r, v])
    # Orekit's array mappings: one call in and one out per sample (the state goes in as a
    # Cartesian array, the mean orbit comes out as (a, ex, ey, i, raan, alpha_M) of a circular
    # orbit with the mean position angle): the same numbers as building a CartesianOrbit from
    # Vector3Ds and reading the six getters, with about a third fewer Java calls
    cart, circ, mean_pa = OrbitType.CARTESIAN, OrbitType.CIRCULAR, PositionAngleType.MEAN
    compute = EcksteinHechlerPropagator.computeMeanOrbit
    jin = jpype.JArray(jpype.JDouble)(6)
    jout = jpype.JArray(jpype.JDouble)(6)
    for k in range(len(t)):
        date = epoch.shiftedBy(float(t[k]))
        jin[:] = rv[k]
        try:
            osc = cart.mapArrayToOrbit(jin, None, mean_pa, date, th.mu, th.tod)
            circ.mapOrbitToArray(compute(osc, th.provider, th.provider.onDate(date)), mean_pa, jout, None)
        except Exception:
            continue
        out[k] = np.asarray(jout)
    return out

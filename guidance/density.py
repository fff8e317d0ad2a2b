"""Guidance's own atmospheric density belief and the differential-drag acceleration it implies.

This is *guidance's* model, like one a flight computer would carry: a function of altitude only,
driven by a forecast F10.7 from the law's settings and multiplied by a tunable density
coefficient. It is never the truth model (the truth world uses NRLMSISE-00 or similar in sim/).

Models
------
``"exponential"`` (default)
    Piecewise exponential atmosphere with tabulated base densities and scale heights, Vallado,
    *Fundamentals of Astrodynamics and Applications*, 4th ed., 2013, table 8-4 (values from
    CIRA-72) [memory; checked row by row against several independent public copies of the
    table, and continuous at every base altitude within 0.14 %, as the published table is].
``"harris_priester"``
    Harris-Priester minimum/maximum density table for mean solar activity, Montenbruck & Gill,
    *Satellite Orbits*, Springer 2000, table 3.8 [memory; identical to the table in Orekit's
    ``HarrisPriester`` class]. Guidance has no Sun ephemeris and wants a function of altitude
    only, so the diurnal bulge ``rho_min + (rho_max - rho_min) cos^n(psi/2)`` is replaced by its
    average over the sphere of directions, ``rho_min + (rho_max - rho_min) / (n/2 + 1)``, with
    n = 4 (Orekit's default exponent; Montenbruck & Gill give n = 2 for low and n = 6 for polar
    orbits).

Solar-flux dependence (both models)
-----------------------------------
Both tables stand for moderate activity; covey takes them as F10.7 = F10.7A = 150 sfu (common
practice, no source). Other forecasts scale the density by a power law,

    rho(h, F) = c * rho_table(h) * (F / 150) ** p(h),

i.e. ln(rho) linear in ln(F10.7), with the altitude-dependent exponent p(h) of
:data:`FLUX_EXPONENT`. p(h) was calibrated once (``scripts/calibrate_density_flux.py``) from
NRLMSISE-00 (Picone et al., JGR 107(A12):1468, 2002, through pymsis ``version=0``) global,
diurnal averages at equinox, Ap = 4, as ``ln(rho_250 / rho_70) / ln(250 / 70)`` with
F10.7 = F10.7A. Between 70 and 250 sfu the power law reproduces those averages within about 15 %
at 300-600 km; the full solar-cycle swing (a factor 15 at 400 km, 30 at 500 km) is the effect that
matters for drag planning, and it is captured.
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from .constants import MU_EARTH_M3PS2, OMEGA_EARTH_RADPS, R_EARTH_M
from .settings import check_number
from .interface import GuidanceInputError, SpacecraftCaps

DENSITY_MODELS = ("exponential", "harris_priester")
F107_REFERENCE_SFU = 150.0
F107_RANGE_SFU = (50.0, 400.0)
DENSITY_COEFFICIENT_RANGE = (1e-3, 1e3)

# Vallado (2013) table 8-4 [memory]: base altitude km, base density kg/m^3, scale height km.
_EXP_TABLE = np.array([
    (0, 1.225, 7.249), (25, 3.899e-2, 6.349), (30, 1.774e-2, 6.682), (40, 3.972e-3, 7.554),
    (50, 1.057e-3, 8.382), (60, 3.206e-4, 7.714), (70, 8.770e-5, 6.549), (80, 1.905e-5, 5.799),
    (90, 3.396e-6, 5.382), (100, 5.297e-7, 5.877), (110, 9.661e-8, 7.263),
    (120, 2.438e-8, 9.473), (130, 8.484e-9, 12.636), (140, 3.845e-9, 16.149),
    (150, 2.070e-9, 22.523), (180, 5.464e-10, 29.740), (200, 2.789e-10, 37.105),
    (250, 7.248e-11, 45.546), (300, 2.418e-11, 53.628), (350, 9.518e-12, 53.298),
    (400, 3.725e-12, 58.515), (450, 1.585e-12, 60.828), (500, 6.967e-13, 63.822),
    (600, 1.454e-13, 71.835), (700, 3.614e-14, 88.667), (800, 1.170e-14, 124.64),
    (900, 5.245e-15, 181.05), (1000, 3.019e-15, 268.00),
])

# Montenbruck & Gill (2000) table 3.8 [memory]: altitude km, rho_min, rho_max in kg/m^3 (the
# book gives g/km^3 = 1e-12 kg/m^3).
_HP_TABLE = np.array([
    (100, 497400.0, 497400.0), (120, 24900.0, 24900.0), (130, 8377.0, 8710.0),
    (140, 3899.0, 4059.0), (150, 2122.0, 2215.0), (160, 1263.0, 1344.0), (170, 800.8, 875.8),
    (180, 528.3, 601.0), (190, 361.7, 429.7), (200, 255.7, 316.2), (210, 183.9, 239.6),
    (220, 134.1, 185.3), (230, 99.49, 145.5), (240, 74.88, 115.7), (250, 57.09, 93.08),
    (260, 44.03, 75.55), (270, 34.30, 61.82), (280, 26.97, 50.95), (290, 21.39, 42.26),
    (300, 17.08, 35.26), (320, 10.99, 25.11), (340, 7.214, 18.19), (360, 4.824, 13.37),
    (380, 3.274, 9.955), (400, 2.249, 7.492), (420, 1.558, 5.684), (440, 1.091, 4.355),
    (460, 0.7701, 3.362), (480, 0.5474, 2.612), (500, 0.3916, 2.042), (520, 0.2819, 1.605),
    (540, 0.2042, 1.267), (560, 0.1488, 1.005), (580, 0.1092, 0.7997), (600, 0.08070, 0.6390),
    (620, 0.06012, 0.5123), (640, 0.04519, 0.4121), (660, 0.03430, 0.3325),
    (680, 0.02632, 0.2691), (700, 0.02043, 0.2185), (720, 0.01607, 0.1779),
    (740, 0.01281, 0.1452), (760, 0.01036, 0.1190), (780, 0.008496, 0.09776),
    (800, 0.007069, 0.08059), (840, 0.004680, 0.05741), (880, 0.003200, 0.04210),
    (920, 0.002210, 0.03130), (960, 0.001560, 0.02360), (1000, 0.001150, 0.01810),
])
_HP_COS_EXPONENT = 4

FLUX_EXPONENT = np.array([
    # altitude km, p = d ln(rho) / d ln(F10.7); calibrated to NRLMSISE-00 (see module docstring);
    # 100 km set to 0 (density there barely follows solar activity; common practice, no source).
    (100, 0.00), (150, 0.20), (200, 0.65), (250, 1.08), (300, 1.45), (350, 1.79), (400, 2.11),
    (450, 2.41), (500, 2.68), (550, 2.89), (600, 3.03), (700, 3.00), (800, 2.71), (900, 2.36),
    (1000, 2.05),
])
"""Altitude (km) and exponent p(h) of the power-law F10.7 factor ``(F/150)**p``."""


def _hp_mean_table():
    w = 1.0 / (_HP_COS_EXPONENT / 2.0 + 1.0)
    rho = (_HP_TABLE[:, 1] + w * (_HP_TABLE[:, 2] - _HP_TABLE[:, 1])) * 1e-12
    return _HP_TABLE[:, 0], np.log(rho)


_HP_ALT_KM, _HP_LNRHO = _hp_mean_table()


def exponential_table_density_kgpm3(h_km):
    """Density of the exponential atmosphere table (Vallado 2013, table 8-4) at altitudes ``h_km``
    (array_like, km; below the first base altitude as at it), kg/m^3."""
    h_km = np.asarray(h_km, dtype=float)
    base = _EXP_TABLE[:, 0]
    k = np.clip(np.searchsorted(base, h_km, side="right") - 1, 0, base.size - 1)
    return _EXP_TABLE[k, 1] * np.exp(-(h_km - base[k]) / _EXP_TABLE[k, 2])


def _harris_priester_table_density(h_km):
    alt = _HP_ALT_KM
    k = np.clip(np.searchsorted(alt, h_km, side="right") - 1, 0, alt.size - 2)
    # exponential interpolation between nodes, as in Montenbruck & Gill sec. 3.5.2; above the
    # last node the last interval's scale height continues.
    slope = (_HP_LNRHO[k + 1] - _HP_LNRHO[k]) / (alt[k + 1] - alt[k])
    return np.exp(_HP_LNRHO[k] + slope * (h_km - alt[k]))


def flux_factor(altitude_km, f107_sfu):
    """Power-law solar-flux factor ``(F/150)**p(h)`` (see the module docstring), array like h."""
    p = np.interp(altitude_km, FLUX_EXPONENT[:, 0], FLUX_EXPONENT[:, 1])
    return (float(f107_sfu) / F107_REFERENCE_SFU) ** p


class DensityModel:
    """Guidance's density belief: a function of altitude only.

    Parameters
    ----------
    model : str
        ``"exponential"`` or ``"harris_priester"`` (see the module docstring).
    f107_forecast_sfu : float
        Forecast F10.7 (solar flux units, 1e-22 W m^-2 Hz^-1), 50 to 400.
    density_coefficient : float
        Multiplies the density (guidance's tuning knob), 1e-3 to 1e3.
    """

    def __init__(self, model: str = "exponential", f107_forecast_sfu: float = 150.0,
                 density_coefficient: float = 1.0):
        self.model = _check_model(model)
        self.f107_forecast_sfu = _check_range("f107_forecast_sfu", f107_forecast_sfu,
                                              F107_RANGE_SFU, "sfu")
        self.density_coefficient = _check_range("density_coefficient", density_coefficient,
                                                DENSITY_COEFFICIENT_RANGE, "(dimensionless)")
        self._min_alt_km = 0.0 if self.model == "exponential" else float(_HP_ALT_KM[0])

    @classmethod
    def from_settings(cls, settings: Mapping[str, Any]) -> "DensityModel":
        """Build from a law's settings table.

        Keys read (others are ignored): ``density_model`` (default ``"exponential"``),
        ``f107_forecast_sfu`` (default 150), ``density_coefficient`` (default 1.0).

        Raises
        ------
        GuidanceInputError
            Naming the key, for an unknown model or a value out of range.
        """
        if settings is None:
            settings = {}
        if not isinstance(settings, Mapping):
            raise GuidanceInputError("settings", settings, "a table (mapping) of settings")
        return cls(model=settings.get("density_model", "exponential"),
                   f107_forecast_sfu=settings.get("f107_forecast_sfu", F107_REFERENCE_SFU),
                   density_coefficient=settings.get("density_coefficient", 1.0))

    def density_kgpm3(self, altitude_m) -> np.ndarray:
        """Density at geometric altitude(s), kg/m^3.

        Parameters
        ----------
        altitude_m : float or array_like, shape (...)
            Altitude above the Earth's surface, m. Exponential model: from 0 m; Harris-Priester:
            from 100 km. Above 1000 km both extrapolate with their last scale height.

        Returns
        -------
        np.ndarray, shape (...)
        """
        h_km = np.asarray(altitude_m, dtype=float) / 1000.0
        if not np.all(np.isfinite(h_km)) or np.any(h_km < self._min_alt_km):
            bad = h_km[~(np.isfinite(h_km) & (h_km >= self._min_alt_km))].ravel()[0] * 1000.0
            raise GuidanceInputError(
                "altitude_m", float(bad),
                f"a finite altitude of at least {self._min_alt_km * 1000.0:.0f} m for the "
                f"{self.model!r} density model")
        if self.model == "exponential":
            rho = exponential_table_density_kgpm3(h_km)
        else:
            rho = _harris_priester_table_density(h_km)
        return self.density_coefficient * rho * flux_factor(h_km, self.f107_forecast_sfu)

    def density_at_eci_kgpm3(self, r_eci_m) -> np.ndarray:
        """Density at positions, kg/m^3, with the altitude taken above a spherical Earth
        (``|r| - R_EARTH_M``, the altitude guidance uses for the chief's orbit).

        Parameters
        ----------
        r_eci_m : array_like, shape (K, 3)
            Positions in covey's ECI (TOD), m.

        Returns
        -------
        np.ndarray, shape (K,)

        Raises
        ------
        GuidanceInputError
            As :meth:`density_kgpm3`, for a non-finite position or one below the model's range.
        """
        alt = np.linalg.norm(np.asarray(r_eci_m, float), axis=1) - R_EARTH_M
        return np.asarray(self.density_kgpm3(alt), float)

    def __repr__(self) -> str:
        return (f"DensityModel(model={self.model!r}, f107_forecast_sfu={self.f107_forecast_sfu}, "
                f"density_coefficient={self.density_coefficient})")


def _check_model(model):
    if not isinstance(model, str) or model not in DENSITY_MODELS:
        raise GuidanceInputError("density_model", model,
                                 "one of " + ", ".join(repr(m) for m in DENSITY_MODELS))
    return model


def _check_range(key, value, bounds, unit):
    try:
        return check_number(value, lo=bounds[0], hi=bounds[1], unit=unit)
    except ValueError as exc:
        raise GuidanceInputError(key, value, str(exc)) from None


def relative_wind_speed_mps(a_m, i_rad, mu=MU_EARTH_M3PS2):
    """Along-track speed of a circular orbit relative to a co-rotating atmosphere, m/s.

    ``sqrt(mu/a) - omega_E a cos(i)``: the along-track component of the atmosphere's co-rotation
    velocity ``omega_E x r`` is ``omega_E r cos(i)`` at every point of a circular orbit
    (common practice, no source).
    """
    a = np.asarray(a_m, dtype=float)
    return np.sqrt(mu / a) - OMEGA_EARTH_RADPS * a * np.cos(i_rad)


def differential_along_track_accel_mps2(density_kgpm3, v_rel_mps, bc_deputy_m2pkg,
                                        bc_chief_m2pkg):
    """Deputy-minus-chief drag acceleration along the chief's T axis, m/s^2.

    ``-0.5 rho v^2 (B_deputy - B_chief)`` with ``B = Cd A / m``: negative when the deputy has more
    drag. Arguments broadcast; a scalar result is returned as float.

    Parameters
    ----------
    density_kgpm3 : float or array_like
        Density, kg/m^3.
    v_rel_mps : float or array_like
        Speed relative to the atmosphere, m/s.
    bc_deputy_m2pkg, bc_chief_m2pkg : float or array_like
        Ballistic coefficients Cd A / m, m^2/kg.
    """
    out = -0.5 * np.asarray(density_kgpm3, dtype=float) * np.asarray(v_rel_mps, dtype=float) ** 2 \
        * (np.asarray(bc_deputy_m2pkg, dtype=float) - np.asarray(bc_chief_m2pkg, dtype=float))
    return float(out) if out.ndim == 0 else out


def drag_accel_bounds_mps2(mission_chief: SpacecraftCaps, deputy: SpacecraftCaps, chief_mode: str,
                           density_kgpm3, v_rel_mps):
    """Range of the differential along-track acceleration over the deputy's attitude modes.

    The chief holds ``chief_mode``; the deputy may be in any of its modes.

    Returns
    -------
    a_min, a_max : float
        Smallest (most negative: deputy at its highest drag) and largest differential
        acceleration along the chief's T axis, m/s^2.

    Raises
    ------
    GuidanceInputError
        If ``chief_mode`` is not one of the chief's modes or the deputy has no modes.
    """
    if chief_mode not in mission_chief.drag_area_m2:
        raise GuidanceInputError(
            "chief_mode", chief_mode,
            f"one of the chief's attitude modes {sorted(mission_chief.drag_area_m2)}")
    if not deputy.drag_area_m2:
        raise GuidanceInputError(f"{deputy.name}.drag_area_m2", dict(deputy.drag_area_m2),
                                 "at least one attitude mode with an area in m^2")
    b_chief = mission_chief.ballistic_coefficient_m2pkg(chief_mode)
    acc = [differential_along_track_accel_mps2(density_kgpm3, v_rel_mps,
                                               deputy.ballistic_coefficient_m2pkg(m), b_chief)
           for m in deputy.drag_area_m2]
    return float(np.min(acc)), float(np.max(acc))

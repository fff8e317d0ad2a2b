"""The truth's logged density: NRLMSISE-00 by its reference code (pymsis) in batch, with the
inputs Orekit's model builds, and the geodetic coordinates it needs.

The density *error* (the Gauss-Markov factor on the truth density) is :class:`DensityError`.
"""

from __future__ import annotations

import numpy as np

from sim.truth.frames import TOD_GRID_S, grid_cached, rotation_matrix

__all__ = ["EARTH_ROTATION_RADPS", "geodetic_from_ecef", "MsisBatch"]

EARTH_ROTATION_RADPS = 7.292115146706979e-5
"""Earth rotation rate used between exact TOD -> ITRF transforms, rad/s: the rate of the Earth
rotation angle, 2 pi x 1.00273781191135448 / 86400 s (IERS Conventions 2010, eq. 5.15 [memory]).
Over the 900 s to the nearest grid node the neglected precession in right ascension (7e-12 rad/s),
UT1 - UTC drift and polar-motion change move a LEO position by millimetres (a test checks < 1 m)."""


def geodetic_from_ecef(r_m: np.ndarray, a_m: float, f: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Geodetic latitude, longitude (rad) and height (m) of Earth-fixed positions on an ellipsoid.

    Closed form of Vermeille, "Direct transformation from geocentric coordinates to geodetic
    coordinates", Journal of Geodesy 76, 451-454 (2002); valid outside the evolute of the meridian
    ellipse (|r| above about 43 km for the Earth), so everywhere a spacecraft flies.

    Parameters
    ----------
    r_m : np.ndarray, shape (K, 3)
        Positions in the ellipsoid's body frame (ITRF), m.
    a_m, f : float
        Equatorial radius (m) and flattening.

    Returns
    -------
    lat_rad, lon_rad, h_m : np.ndarray, shape (K,)
    """
    e2 = f * (2.0 - f)
    e4 = e2 * e2
    x, y, z = r_m[:, 0], r_m[:, 1], r_m[:, 2]
    w2 = x * x + y * y
    p = w2 / (a_m * a_m)
    q = (1.0 - e2) * z * z / (a_m * a_m)
    r = (p + q - e4) / 6.0
    s = e4 * p * q / (4.0 * r ** 3)
    t = np.cbrt(1.0 + s + np.sqrt(s * (2.0 + s)))
    u = r * (1.0 + t + 1.0 / t)
    v = np.sqrt(u * u + e4 * q)
    w = e2 * (u + v - q) / (2.0 * v)
    k = np.sqrt(u + v + w * w) - w
    d = k * np.sqrt(w2) / (k + e2)
    dz = np.sqrt(d * d + z * z)
    return 2.0 * np.arctan2(z, d + dz), np.arctan2(y, x), (k + e2 - 1.0) / k * dz


class MsisBatch:
    """Logged NRLMSISE-00 density of many samples in one pymsis call.

    Inputs as Orekit's ``NRLMSISE00.getDensity`` in mean local solar time builds them (read from
    its byte code, Orekit 13.1): day of year and seconds of day in **UT1** (the time scale of the
    ``NRLMSISE00(parameters, sun, earth)`` constructor: IERS 2010, simple EOP; at a UTC midnight
    the day of year is still the previous one while UT1 - UTC < 0, a 0.5 % density step), local
    solar time ``sec / 3600 + lon / 15``, geodetic latitude, longitude and altitude on
    ``forces.earth``, and ``getDailyFlux``, ``getAverageFlux`` and ``getAp(date)[0]`` of
    ``forces.space_weather`` with the default switches (switch 9 = 1: only the daily Ap is used;
    pymsis ``geomagnetic_activity=1``). Orekit's CSSI reader holds the solar inputs constant over a
    UTC day, or interpolates them linearly between file lines dated at midnight (after the daily
    predictions), so two queries per UTC day (00:00 and 12:00) give the exact value at any time of
    the day; they are cached per day.
    """

    def __init__(self, world, pymsis_module):
        from sim.orekit.forces import parse_epoch

        f = world.forces
        self.world = world
        self.calculate = pymsis_module.calculate
        self.a_m = float(f.earth.getEquatorialRadius())
        self.flattening = float(f.earth.getFlattening())
        self.sw = f.space_weather
        ep = parse_epoch(world.run.epoch_utc).replace(tzinfo=None)
        self.epoch_day = np.datetime64(ep.date(), "D")
        self.epoch_sod = ep.hour * 3600.0 + ep.minute * 60.0 + ep.second + ep.microsecond * 1e-6
        self._days: dict[int, np.ndarray] = {}
        self._nodes: dict[int, tuple[np.ndarray, float]] = {}
        from org.orekit.time import TimeScalesFactory
        from org.orekit.utils import IERSConventions

        self.eop = TimeScalesFactory.getUT1(IERSConventions.IERS_2010, True).getEOPHistory()

    def _day_inputs(self, n: int) -> np.ndarray:
        """(2, 3): F10.7 (previous day), F10.7A, daily Ap at 00:00 and 12:00 UTC of day ``n``
        (days after the epoch's UTC day)."""
        hit = self._days.get(n)
        if hit is None:
            from org.orekit.time import AbsoluteDate, TimeScalesFactory

            utc = TimeScalesFactory.getUTC()
            day = (self.epoch_day + np.timedelta64(n, "D")).astype(object)
            rows = []
            for hour in (0, 12):
                date = AbsoluteDate(day.year, day.month, day.day, hour, 0, 0.0, utc)
                try:
                    rows.append((float(self.sw.getDailyFlux(date)), float(self.sw.getAverageFlux(date)),
                                 float(self.sw.getAp(date)[0])))
                except Exception:  # Orekit: no data at 12:00, so the data end at 00:00, the only
                    if not rows:   # time of that day a sample can have: the 00:00 values are exact
                        raise
                    rows.append(rows[0])
            hit = np.array(rows)
            self._days[n] = hit
        return hit

    def _node(self, j: int) -> tuple[np.ndarray, float]:
        """At ``j * TOD_GRID_S``: Orekit's exact TOD -> ITRF rotation matrix (r_itrf = M r_tod) and
        UT1 - UTC, s."""
        def exact():
            f = self.world.forces
            date = f.epoch.shiftedBy(float(j * TOD_GRID_S))
            return rotation_matrix(f.tod.getStaticTransformTo(f.itrf, date)), float(self.eop.getUT1MinusUTC(date))

        return grid_cached(self._nodes, j, exact)

    def tod_to_itrf(self, t: np.ndarray, r_tod: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """TOD positions (K, 3) at times ``t`` (K,) -> ITRF (K, 3), m; also UT1 - UTC (K,), s.

        ``M(t) = M(t_j) R3(omega (t - t_j))`` with ``M(t_j)`` Orekit's exact TOD -> ITRF rotation
        at the nearest grid node (polar motion and Greenwich apparent sidereal time at ``t_j``) and
        ``R3`` the rotation about the true pole by the Earth rotation since then. UT1 - UTC is the
        node's (it drifts by about 2 ms a day).
        """
        j = np.rint(t / TOD_GRID_S).astype(int)
        ang = EARTH_ROTATION_RADPS * (t - j * TOD_GRID_S)
        c, sn = np.cos(ang), np.sin(ang)
        x, y = r_tod[:, 0], r_tod[:, 1]
        r1 = np.column_stack([c * x + sn * y, c * y - sn * x, r_tod[:, 2]])
        uj, inv = np.unique(j, return_inverse=True)
        nodes = [self._node(int(jj)) for jj in uj]
        inv = inv.reshape(-1)
        mats = np.stack([n[0] for n in nodes])[inv]
        dut1 = np.array([n[1] for n in nodes])[inv]
        return np.einsum("kij,kj->ki", mats, r1), dut1

    def density(self, t: np.ndarray, r_tod: np.ndarray) -> np.ndarray:
        """Model density (no truth density error) at TOD positions (K, 3) and times ``t`` (K,), kg/m^3."""
        t = np.asarray(t, dtype=float)
        if t.size == 0:
            return np.zeros(0)
        r_itrf, dut1 = self.tod_to_itrf(t, r_tod)
        lat, lon, h = geodetic_from_ecef(r_itrf, self.a_m, self.flattening)
        lon_deg = np.degrees(lon)
        # solar inputs: by UTC day (Orekit's CSSI lines are dated in UTC)
        sod_utc = self.epoch_sod + t
        n = np.floor(sod_utc / 86400.0).astype(int)
        un, inv = np.unique(n, return_inverse=True)
        tab = np.stack([self._day_inputs(int(d)) for d in un])[inv.reshape(-1)]  # (K, 2, 3)
        sw = tab[:, 0, :] + (tab[:, 1, :] - tab[:, 0, :]) * ((sod_utc - 86400.0 * n) / 43200.0)[:, None]
        # model time: Orekit's NRLMSISE00 takes day of year and seconds of day in UT1
        # (NRLMSISE00(parameters, sun, earth) uses UT1, IERS 2010, simple EOP)
        sod_ut1 = sod_utc + dut1
        n1 = np.floor(sod_ut1 / 86400.0).astype(int)
        sec = sod_ut1 - 86400.0 * n1
        # pymsis reads whole seconds (datetime64[s]): round within the same day, and move the
        # longitude by the remainder so that the local solar time sec/3600 + lon/15 stays exact
        # (only the small UT-longitude terms then see the <= 1 s offset)
        sec_i = np.minimum(np.rint(sec), 86399.0)
        lon_deg = lon_deg + (sec - sec_i) * (360.0 / 86400.0)
        dates = (self.epoch_day + n1.astype("timedelta64[D]")).astype("datetime64[s]") \
            + sec_i.astype(np.int64).astype("timedelta64[s]")
        out = self.calculate(dates, lon_deg, np.degrees(lat), h / 1e3, f107s=sw[:, 0], f107as=sw[:, 1],
                             aps=np.repeat(sw[:, 2:3], 7, axis=1), version=0, geomagnetic_activity=1)
        return np.asarray(out, dtype=float).reshape(t.size, -1)[:, 0]  # mass density, kg/m^3

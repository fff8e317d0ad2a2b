"""Force models of the truth world (gravity, atmosphere and drag, Sun, Moon, SRP) and the
space-weather data they read.

The top of this module imports no Java: the pure-Python helpers (:func:`resolve_environment`,
:func:`write_constant_cssi`) can be used before the JVM exists; the data folder and the
solar-activity spans are :mod:`sim.orekit.data`. The
Orekit objects are built by :class:`ForceEnvironment`, which boots the JVM through
:mod:`sim.orekit.boot`.

Everything that runs inside a force evaluation is Orekit's Java: solar activity "constant" is a
CSSI-format file written with constant values and read by ``CssiSpaceWeatherData``; attitude-mode
drag areas and the truth density error are drag-parameter-driver spans set before each
``propagate()`` (see :mod:`sim.truth.world`).

How to add a force model: see DEVELOPERS.md (in short: add the config
field in ``sim.scenario.config.EnvironmentConfig``, build the Orekit object in
:meth:`ForceEnvironment.static_forces`, and add a check against an outside reference in
``tests/sim/test_truth_physics.py``).
"""

from __future__ import annotations

import atexit
import dataclasses
import datetime as _dt
import os
import shutil
import tempfile
from typing import Any

from sim.scenario.config import EnvironmentConfig, SolarActivityConfig
from sim.errors import EnvironmentSetupError, ScenarioError
from sim.orekit.data import parse_epoch, solar_activity_span

MAX_STEP_S = 300.0
"""Largest integrator step, s. With 1 m position tolerance and no step cap, DormandPrince853 in
equinoctial elements drifted 11 km/day absolute and 39 m/day between two spacecraft 280 m apart
(full force model, 500 km); capped at 300 s: 12 m/day absolute, 0.02 m/day relative (measured,
see benchmarks/RESULTS.md)."""

EH_DEGREE = 6
"""Degree/order of the gravity field given to the Eckstein-Hechler mean theory (J2..J6)."""


# ------------------------------------------------------------------------------------------
# Presets
# ------------------------------------------------------------------------------------------


def resolve_environment(env: EnvironmentConfig) -> EnvironmentConfig:
    """Apply the preset: ``"full"`` keeps every field as given; ``"ideal"`` forces J2 only
    (degree 2, order 0) and switches off Sun, Moon and SRP (drag as configured).

    Raises
    ------
    ScenarioError
        Unknown preset.
    """
    if env.preset == "full":
        return env
    if env.preset == "ideal":
        return dataclasses.replace(env, gravity_degree=2, gravity_order=0, sun=False, moon=False, srp=False)
    raise ScenarioError("environment.preset", env.preset, "'full' or 'ideal'")


# Standard Kp (thirds) <-> ap conversion table (Bartels' 3-hourly equivalent amplitude; the
# IAGA/GFZ definition of ap, common practice).
_KP_TENTHS = (0, 3, 7, 10, 13, 17, 20, 23, 27, 30, 33, 37, 40, 43, 47, 50, 53, 57, 60, 63, 67, 70, 73, 77,
              80, 83, 87, 90)
_AP_OF_KP = (0, 2, 3, 4, 5, 6, 7, 9, 12, 15, 18, 22, 27, 32, 39, 48, 56, 67, 80, 94, 111, 132, 154, 179,
             207, 236, 300, 400)


def ap_to_kp_tenths(ap: float) -> int:
    """Kp in tenths (CSSI file convention, e.g. 23 = 2+) for an ap value, by linear interpolation
    in the standard ap/Kp table."""
    import numpy as np

    return int(round(float(np.interp(ap, _AP_OF_KP, _KP_TENTHS))))


def _cssi_line(day: _dt.date, f107: float, f107a: float, ap: int, kp10: int) -> str:
    kps = "".join(f"{kp10:3d}" for _ in range(8))
    aps = "".join(f"{ap:4d}" for _ in range(8))
    line = (f"{day.year:4d} {day.month:02d} {day.day:02d}{2600:5d}{1:3d}" + kps + f"{8 * kp10:4d}" + aps
            + f"{ap:4d}" + f"{0.0:4.1f}{0:2d}{0:4d}" + f"{f107:6.1f}{0:2d}"
            + "".join(f"{x:6.1f}" for x in (f107a, f107a, f107, f107a, f107a)))
    assert len(line) == 130, len(line)
    return line


def write_constant_cssi(path: str, first_day: _dt.date, last_day: _dt.date, sa: SolarActivityConfig) -> str:
    """Write a CSSI-format file holding constant solar and geomagnetic activity.

    Every day carries F10.7 (observed and adjusted) = ``sa.f107_sfu``, the 81-day averages =
    ``sa.f107a_sfu``, the eight 3-hourly ap and the daily Ap = ``round(sa.ap)`` (the format holds
    integers) and Kp from the standard ap/Kp table. Orekit's loader needs the ``BEGIN
    DAILY_PREDICTED`` and ``BEGIN MONTHLY_FIT`` markers, so the last two days are written there.

    Returns
    -------
    str
        ``path``.
    """
    ap = int(round(sa.ap))
    kp10 = ap_to_kp_tenths(ap)
    n = (last_day - first_day).days + 1
    lines = [_cssi_line(first_day + _dt.timedelta(days=k), sa.f107_sfu, sa.f107a_sfu, ap, kp10) for k in range(n)]
    txt = ["DATATYPE CssiSpaceWeather", "VERSION 1.2",
           f"# covey constant solar activity: F10.7 {sa.f107_sfu} sfu, F10.7A {sa.f107a_sfu} sfu, Ap {ap}",
           f"NUM_OBSERVED_POINTS {n - 2}", "BEGIN OBSERVED", *lines[:-2], "END OBSERVED", "",
           "NUM_DAILY_PREDICTED_POINTS 1", "BEGIN DAILY_PREDICTED", lines[-2], "END DAILY_PREDICTED", "",
           "NUM_MONTHLY_FIT_POINTS 1", "BEGIN MONTHLY_FIT", lines[-1], "END MONTHLY_FIT", ""]
    with open(path, "w", encoding="utf-8") as f:
        f.write("\n".join(txt))
    return path


_TMP_DIRS: list[str] = []


def _tmp_dir() -> str:
    d = tempfile.mkdtemp(prefix="covey-sw-")
    _TMP_DIRS.append(d)
    return d


@atexit.register
def _cleanup_tmp() -> None:  # pragma: no cover - process exit
    for d in _TMP_DIRS:
        shutil.rmtree(d, ignore_errors=True)


# ------------------------------------------------------------------------------------------
# Orekit side
# ------------------------------------------------------------------------------------------


def absolute_date(epoch_utc: str):
    """Orekit ``AbsoluteDate`` (UTC) of an ISO 8601 UTC string. Needs :func:`sim.orekit.boot.boot`."""
    from org.orekit.time import AbsoluteDate, TimeScalesFactory

    t = parse_epoch(epoch_utc)
    sec = t.second + t.microsecond * 1e-6
    return AbsoluteDate(t.year, t.month, t.day, t.hour, t.minute, float(sec), TimeScalesFactory.getUTC())


class ForceEnvironment:
    """Orekit objects shared by all spacecraft of one truth world.

    Parameters
    ----------
    env : EnvironmentConfig
        Preset applied by :func:`resolve_environment`.
    epoch_utc : str
        Scenario epoch (used for the span of a constant-activity file).
    duration_s : float
        Run duration, s (same use).
    data_path : str or None
        Orekit data (see :func:`sim.orekit.boot.boot`).

    Attributes
    ----------
    env : EnvironmentConfig
        The resolved environment.
    epoch : AbsoluteDate
    gcrf, tod, itrf : Frame
        Integration frame (GCRF), covey's ECI (TOD, IERS 2010), Earth-fixed (ITRF, IERS 2010).
    earth : OneAxisEllipsoid
        WGS-84 ellipsoid in ITRF.
    sun, moon : CelestialBody
    mu_m3ps2 : float
        Central-body gravitational parameter of the gravity field file.
    atmosphere : Atmosphere or None
    space_weather : CssiSpaceWeatherData or JB2008SpaceEnvironmentData or None
    eh_provider : UnnormalizedSphericalHarmonicsProvider
        Zonal field for the Eckstein-Hechler mean theory (degree :data:`EH_DEGREE`).
    """

    def __init__(self, env: EnvironmentConfig, epoch_utc: str, duration_s: float = 0.0,
                 data_path: str | None = None):
        from sim.orekit.boot import boot

        boot(data_path)
        from org.orekit.bodies import CelestialBodyFactory, OneAxisEllipsoid
        from org.orekit.forces.gravity.potential import GravityFieldFactory
        from org.orekit.frames import FramesFactory
        from org.orekit.utils import Constants, IERSConventions

        self.env = resolve_environment(env)
        self.epoch_utc = epoch_utc
        self.duration_s = float(duration_s)
        self.epoch = absolute_date(epoch_utc)
        self.gcrf = FramesFactory.getGCRF()
        self.tod = FramesFactory.getTOD(IERSConventions.IERS_2010, True)
        self.itrf = FramesFactory.getITRF(IERSConventions.IERS_2010, True)
        self.earth = OneAxisEllipsoid(Constants.WGS84_EARTH_EQUATORIAL_RADIUS, Constants.WGS84_EARTH_FLATTENING,
                                      self.itrf)
        self.earth_rotation_radps = float(Constants.WGS84_EARTH_ANGULAR_VELOCITY)
        self.sun = CelestialBodyFactory.getSun()
        self.moon = CelestialBodyFactory.getMoon()
        deg, order = int(self.env.gravity_degree), int(self.env.gravity_order)
        if deg < 0 or order < 0 or order > deg:
            raise ScenarioError("environment.gravity_degree/gravity_order", (deg, order),
                                "integers with 0 <= order <= degree (0 or 1 = central term only)")
        try:
            self.gravity_provider = GravityFieldFactory.getNormalizedProvider(max(deg, 2), order if deg >= 2 else 0)
            self.eh_provider = GravityFieldFactory.getUnnormalizedProvider(EH_DEGREE, EH_DEGREE)
        except Exception as exc:
            raise EnvironmentSetupError(f"Orekit could not load a {deg}x{order} gravity field: {exc}",
                                        "use an Orekit data set with Potential/ (e.g. eigen-6s.gfc)") from exc
        self.mu_m3ps2 = float(self.gravity_provider.getMu())
        self.space_weather = None
        self.atmosphere = self._build_atmosphere()

    # -- atmosphere ---------------------------------------------------------------------
    def _cssi_data(self):
        from java.io import File
        from org.orekit.data import DataSource
        from org.orekit.models.earth.atmosphere.data import CssiSpaceWeatherData

        sa = self.env.solar_activity
        if sa.source == "cssi":
            return CssiSpaceWeatherData(CssiSpaceWeatherData.DEFAULT_SUPPORTED_NAMES)
        if sa.source == "file":
            if not sa.path or not os.path.isfile(sa.path):
                raise ScenarioError("environment.solar_activity.path", sa.path,
                                    "an existing CSSI-format space-weather file for source = 'file'")
            solar_activity_span(self.env)  # clear error for a file without data lines
            return CssiSpaceWeatherData(DataSource(File(os.path.abspath(sa.path))))
        if sa.source == "constant":
            for key in ("f107_sfu", "f107a_sfu", "ap"):
                v = getattr(sa, key)
                if not (0.0 <= float(v) < 1000.0):
                    raise ScenarioError(f"environment.solar_activity.{key}", v, "a value in [0, 1000)")
            start = parse_epoch(self.epoch_utc).date() - _dt.timedelta(days=100)
            end = parse_epoch(self.epoch_utc).date() + _dt.timedelta(days=int(self.duration_s // 86400) + 100)
            path = write_constant_cssi(os.path.join(_tmp_dir(), "SpaceWeather-covey-constant.txt"), start, end, sa)
            return CssiSpaceWeatherData(DataSource(File(path)))
        raise ScenarioError("environment.solar_activity.source", sa.source, "'cssi', 'file' or 'constant'")

    def _build_atmosphere(self):
        name = self.env.atmosphere
        if name == "none":
            return None
        from org.orekit.models.earth.atmosphere import DTM2000, JB2008, NRLMSISE00, HarrisPriester

        if name == "nrlmsise00":
            self.space_weather = self._cssi_data()
            # sim.truth.world's batched logged density (pymsis) reproduces this constructor: UT1 (IERS
            # 2010, simple EOP) for the model time, default switches
            atm = NRLMSISE00(self.space_weather, self.sun, self.earth)
            lst = self.env.local_solar_time
            if lst == "mean":
                atm = atm.withLocalSolarTimeMode(NRLMSISE00.LocalSolarTimeMode.MEAN)
            elif lst == "apparent":
                atm = atm.withLocalSolarTimeMode(NRLMSISE00.LocalSolarTimeMode.APPARENT)
            else:
                raise ScenarioError("environment.local_solar_time", lst, "'mean' or 'apparent'")
            return atm
        if name == "dtm2000":
            self.space_weather = self._cssi_data()
            return DTM2000(self.space_weather, self.sun, self.earth)
        if name == "jb2008":
            if self.env.solar_activity.source != "cssi":
                raise ScenarioError("environment.solar_activity.source", self.env.solar_activity.source,
                                    "'cssi' for atmosphere = 'jb2008' (JB2008 reads the SOLFSMY/DTC files of "
                                    "the Orekit data; it has no constant or CSSI-file input)")
            from org.orekit.models.earth.atmosphere.data import JB2008SpaceEnvironmentData

            self.space_weather = JB2008SpaceEnvironmentData(JB2008SpaceEnvironmentData.DEFAULT_SUPPORTED_NAMES_SOLFSMY,
                                                            JB2008SpaceEnvironmentData.DEFAULT_SUPPORTED_NAMES_DTC)
            return JB2008(self.space_weather, self.sun, self.earth)
        if name == "harris_priester":
            return HarrisPriester(self.sun, self.earth)
        raise ScenarioError("environment.atmosphere", name,
                            "one of 'nrlmsise00', 'dtm2000', 'jb2008', 'harris_priester', 'none'")

    # -- forces -------------------------------------------------------------------------
    def static_forces(self, srp_area_m2: float, cr: float) -> list[Any]:
        """Force models that do not change during a run (gravity, Sun, Moon, SRP).

        The central attraction is not in the list: the propagator adds it from ``setMu``.
        """
        from org.orekit.forces.gravity import HolmesFeatherstoneAttractionModel, ThirdBodyAttraction
        from org.orekit.forces.radiation import IsotropicRadiationSingleCoefficient, SolarRadiationPressure
        from org.orekit.utils import Constants

        out: list[Any] = []
        if self.env.gravity_degree >= 2:
            out.append(HolmesFeatherstoneAttractionModel(self.itrf, self.gravity_provider))
        if self.env.sun:
            out.append(ThirdBodyAttraction(self.sun))
        if self.env.moon:
            out.append(ThirdBodyAttraction(self.moon))
        if self.env.srp and srp_area_m2 > 0.0:
            srp = SolarRadiationPressure(self.sun, self.earth, IsotropicRadiationSingleCoefficient(float(srp_area_m2),
                                                                                                  float(cr)))
            if self.env.moon:
                srp.addOccultingBody(self.moon, Constants.MOON_EQUATORIAL_RADIUS)
            out.append(srp)
        return out

    def density_kgpm3(self, date, position_frame, frame) -> float:
        """Model density (no truth density error) at a position, kg/m^3; 0 without atmosphere."""
        if self.atmosphere is None:
            return 0.0
        return float(self.atmosphere.getDensity(date, position_frame, frame))

"""Force models of the truth world (gravity, atmosphere and drag, Sun, Moon, SRP) and the
space-weather data they read.

The top of this module imports no Java: the pure-Python helpers (:func:`cssi_span`,
:func:`cssi_sections`, :func:`solar_activity_span`, :func:`resolve_environment`,
:func:`write_constant_cssi`) can be used by a scenario validator before the JVM exists. The
Orekit objects are built by :class:`ForceEnvironment`, which boots the JVM through
:mod:`sim.orekit.boot`.

Everything that runs inside a force evaluation is Orekit's Java: solar activity "constant" is a
CSSI-format file written with constant values and read by ``CssiSpaceWeatherData``; attitude-mode
drag areas and the truth density error are drag-parameter-driver spans set before each
``propagate()`` (see :mod:`sim.truth.world`).

How to add a force model: see the ``truth`` section of DEVELOPERS.md (in short: add the config
field in ``sim.scenario.config.EnvironmentConfig``, build the Orekit object in
:meth:`ForceEnvironment.static_forces`, and add a check against an outside reference in
``tests/sim/test_truth_physics.py``).
"""

from __future__ import annotations

import atexit
import dataclasses
import datetime as _dt
import os
import re
import shutil
import tempfile
import zipfile
from typing import Any

from sim.scenario.config import EnvironmentConfig, SolarActivityConfig
from sim.errors import EnvironmentSetupError, ScenarioError

CSSI_FILE_PATTERN = re.compile(r"^S(?:pace)?W(?:eather)?-(?:All)?.*\.txt$")
"""File-name pattern Orekit uses for CSSI space-weather files (its DEFAULT_SUPPORTED_NAMES)."""

MAX_STEP_S = 300.0
"""Largest integrator step, s. With 1 m position tolerance and no step cap, DormandPrince853 in
equinoctial elements drifted 11 km/day absolute and 39 m/day between two spacecraft 280 m apart
(full force model, 500 km); capped at 300 s: 12 m/day absolute, 0.02 m/day relative (measured,
see DEVELOPERS.md)."""

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


# ------------------------------------------------------------------------------------------
# CSSI space-weather files, pure Python
# ------------------------------------------------------------------------------------------


def _read_text(location: str) -> str:
    """Text of a file; ``location`` may be ``archive.zip!member``."""
    if "!" in location:
        archive, member = location.split("!", 1)
        with zipfile.ZipFile(archive) as z:
            return z.read(member).decode("utf-8", errors="replace")
    with open(location, encoding="utf-8", errors="replace") as f:
        return f.read()


def _is_cssi_data_line(line: str) -> bool:
    s = line.strip()
    return len(s) == 130 and s[:4].isdigit()


def cssi_sections(path: str) -> dict[str, tuple[str, str]]:
    """Date span of each section of a CSSI space-weather file (pure Python).

    Parameters
    ----------
    path : str
        File path, or ``archive.zip!member``.

    Returns
    -------
    dict
        Section name (``"OBSERVED"``, ``"DAILY_PREDICTED"``, ``"MONTHLY_PREDICTED"``,
        ``"MONTHLY_FIT"``) -> ``(first ISO date, last ISO date)``; sections without data lines are
        left out.
    """
    out: dict[str, tuple[str, str]] = {}
    section = None
    first = last = None
    for line in _read_text(path).splitlines():
        s = line.strip()
        if s.startswith("BEGIN "):
            section, first, last = s[6:].strip(), None, None
        elif s.startswith("END "):
            if section and first:
                out[section] = (first, last)
            section = None
        elif section and _is_cssi_data_line(s):
            d = f"{s[0:4]}-{s[5:7]}-{s[8:10]}"
            first = first or d
            last = d
    return out


def cssi_span(path: str) -> tuple[str, str]:
    """First and last date (ISO ``YYYY-MM-DD``) of the data lines of a CSSI file, all sections.

    Orekit's ``CssiSpaceWeatherData`` accepts dates in this span; it reads the previous day's
    F10.7 and up to about 3 days of ap history, so an epoch should be a few days after the first.

    Raises
    ------
    ScenarioError
        The file does not exist or holds no CSSI data line.
    """
    try:
        dates = [f"{s[0:4]}-{s[5:7]}-{s[8:10]}" for s in (ln.strip() for ln in _read_text(path).splitlines())
                 if _is_cssi_data_line(s)]
    except OSError as exc:
        raise ScenarioError("environment.solar_activity.path", path, "a readable CSSI space-weather file",
                            str(exc)) from exc
    if not dates:
        raise ScenarioError("environment.solar_activity.path", path,
                            "a CSSI-format space-weather file (130-character daily lines between BEGIN/END markers)")
    return min(dates), max(dates)


def find_cssi_file(data_path: str) -> str:
    """Location of the CSSI space-weather file inside an Orekit data folder or zip.

    Returns a file path, or ``archive.zip!member`` for a zip.

    Raises
    ------
    EnvironmentSetupError
        No file matching Orekit's CSSI name pattern.
    """
    hits: list[str] = []
    if os.path.isdir(data_path):
        for root, _dirs, files in os.walk(data_path):
            hits += [os.path.join(root, f) for f in files if CSSI_FILE_PATTERN.match(f)]
    elif zipfile.is_zipfile(data_path):
        with zipfile.ZipFile(data_path) as z:
            hits += [f"{data_path}!{n}" for n in z.namelist() if CSSI_FILE_PATTERN.match(n.rsplit("/", 1)[-1])]
    if not hits:
        raise EnvironmentSetupError(f"no CSSI space-weather file (e.g. SpaceWeather-All-v1.2.txt) in {data_path!r}",
                                    "use an Orekit data set with CSSI-Space-Weather-Data, or set "
                                    "environment.solar_activity.source = 'file' or 'constant'")
    return sorted(hits)[0]


def _jb2008_span(data_path: str) -> tuple[str, str]:
    """Common span of the JB2008 input files (SOLFSMY and DTC) in an Orekit data folder."""
    spans = []
    for name, rx in (("SOLFSMY", re.compile(r"^\s*(\d{4})\s+(\d{1,3})\s+\d+\.\d")),
                     ("DTCFILE", re.compile(r"^DTC\s+(\d{4})\s+(\d{1,3})\s"))):
        loc = None
        if os.path.isdir(data_path):
            for root, _d, files in os.walk(data_path):
                for f in files:
                    if f.upper().startswith(name):
                        loc = os.path.join(root, f)
        if loc is None:
            raise EnvironmentSetupError(f"no JB2008 input file {name}* in {data_path!r}",
                                        "use an Orekit data folder with Space-Environment-Data, or another atmosphere")
        days = []
        for line in _read_text(loc).splitlines():
            m = rx.match(line)
            if m:
                days.append(_dt.date(int(m.group(1)), 1, 1) + _dt.timedelta(days=int(m.group(2)) - 1))
        spans.append((min(days), max(days)))
    first, last = max(s[0] for s in spans), min(s[1] for s in spans)
    return first.isoformat(), last.isoformat()


def solar_activity_span(env: EnvironmentConfig, data_path: str | None = None) -> tuple[str | None, str | None]:
    """Dates the truth atmosphere's solar-activity data cover (pure Python, no JVM).

    Parameters
    ----------
    env : EnvironmentConfig
    data_path : str or None
        Orekit data folder or zip (``None``: same resolution as :func:`sim.orekit.boot.boot`).

    Returns
    -------
    (str or None, str or None)
        First and last ISO date; ``(None, None)`` when unbounded (``"constant"`` source, or an
        atmosphere that reads no data: ``"harris_priester"``, ``"none"``).
    """
    if env.atmosphere in ("none", "harris_priester"):
        return None, None
    src = env.solar_activity.source
    if src == "constant":
        return None, None
    if src == "file":
        if not env.solar_activity.path:
            raise ScenarioError("environment.solar_activity.path", None, "a CSSI-format file path for source = 'file'")
        return cssi_span(env.solar_activity.path)
    if src != "cssi":
        raise ScenarioError("environment.solar_activity.source", src, "'cssi', 'file' or 'constant'")
    from sim.orekit.boot import resolve_data_path

    path, _ = resolve_data_path(data_path)
    if env.atmosphere == "jb2008":
        return _jb2008_span(path)
    return cssi_span(find_cssi_file(path))


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


def parse_epoch(epoch_utc: str) -> _dt.datetime:
    """ISO 8601 UTC string -> aware datetime (``Z`` or ``+00:00`` suffix, or none)."""
    s = epoch_utc.strip()
    if s.endswith(("Z", "z")):
        s = s[:-1] + "+00:00"
    try:
        t = _dt.datetime.fromisoformat(s)
    except ValueError as exc:
        raise ScenarioError("epoch_utc", epoch_utc, "an ISO 8601 UTC time, e.g. 2025-03-01T00:00:00Z") from exc
    if t.tzinfo is None:
        t = t.replace(tzinfo=_dt.timezone.utc)
    return t.astimezone(_dt.timezone.utc)


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
            cssi_span(sa.path)  # clear error for a file without data lines
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

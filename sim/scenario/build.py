"""Build a validated :class:`sim.scenario.config.RunConfig` from the raw TOML tables, section by
section (``[run]``, ``[environment]``, ``[bus.*]``, ``[chief]``, ``[[deputies]]``, ``[events]``,
``[guidance]``, ``[navigation]``, ``[actuators]``), and check the run against the solar-activity
data span. Pure Python.
"""

from __future__ import annotations

import datetime as _dt
import difflib
import math
import os
import re
from pathlib import Path
from typing import Any, Mapping

from guidance.constants import J2, MU_EARTH_M3PS2, R_EARTH_M
from guidance.interface import MODE_NAMES_REQUIRED

from sim.scenario.config import (
    ATMOSPHERE_MODELS,
    PRESETS,
    SOLAR_ACTIVITY_SOURCES,
    ActuatorConfig,
    AttitudeModeConfig,
    BusConfig,
    DensityErrorConfig,
    MetricsConfig,
    EnvironmentConfig,
    ErrorAxesConfig,
    EventsConfig,
    GeometryConfig,
    GuidanceConfig,
    MeanOrbitConfig,
    NavErrorConfig,
    NavigationConfig,
    PanelConfig,
    RunConfig,
    SolarActivityConfig,
    SpacecraftConfig,
    ThrusterConfig,
)
from guidance.settings import type_name
from sim.errors import EnvironmentSetupError, ScenarioError
from sim.orekit.data import (BUNDLED_LABEL, check_data_folder, parse_epoch, resolve_orekit_data,
                             solar_activity_span)


from sim.scenario.tables import MISSING, Table

__all__ = ['build', 'sun_synchronous_inclination_deg', 'check_solar_span', 'PRESET_DEFAULTS', 'law_settings',
           'mean_theory_inclination_problem', 'EH_EQUATORIAL_SIN', 'EH_CRITICAL_SIN2_BAND',
           'initial_deceleration_mps2', 'MAX_INITIAL_DECELERATION_MPS2']


SOLAR_YEAR_DAYS = 365.2422
"""Mean solar (tropical) year, days: the sun-synchronous RAAN rate is 360 deg per this (common
practice, no source)."""

AP_HISTORY_DAYS = 3.0
"""NRLMSISE-00 needs the ap history of the 57 h before a date (Picone et al. 2002, the ap array);
a run must start at least this many days after the first day of solar-activity data."""

PRESET_DEFAULTS: dict[str, dict[str, Any]] = {
    "full": dict(gravity_degree=20, gravity_order=20, atmosphere="nrlmsise00", sun=True, moon=True,
                 srp=True),
    "ideal": dict(gravity_degree=2, gravity_order=0, atmosphere="nrlmsise00", sun=False,
                  moon=False, srp=False),
}
"""Environment defaults per preset; keys given in ``[environment]`` win over the preset."""

JB2008_LAG_DAYS = 5.0
"""JB2008 uses solar indices lagged by up to 5 days (the SOLFSMY.TXT header)."""

EH_EQUATORIAL_SIN = 1.0e-5
"""Orekit's Eckstein-Hechler mean theory refuses a mean inclination with sin i below this
("almost equatorial orbit"): i within 1e-5 rad (0.000573 deg) of 0 or 180 deg. Measured on
Orekit 13 (``EcksteinHechlerTheory.meanToOsculating``, bisection to 1e-15 deg)."""

EH_CRITICAL_SIN2_BAND = 1.0e-3
"""... and a mean inclination with |sin^2 i - 4/5| below this ("almost critically inclined
orbit"): i in [63.3634, 63.5066] or [116.4934, 116.6366] deg around the critical inclinations
63.4349 and 116.5651 deg (measured as above)."""

MAX_INITIAL_DECELERATION_MPS2 = 1.0
"""Refused: a spacecraft whose drag or radiation-pressure deceleration at its initial perigee
exceeds this (m/s^2). Orekit's integrator fails at t = 0 ("hyperbolic orbits cannot be
handled") at about 10 m/s^2 (measured: a 4 kg, 0.034 m^2 bus at 80 km, or a 1e-6 kg one at
475 km); at 1 m/s^2 an orbit loses over 5 km/s per revolution."""

LOW_PERIGEE_KM = 120.0
"""Below this initial perigee altitude a too-large deceleration is reported against the orbit's
key, above it against the bus mass."""

SOLAR_PRESSURE_NPM2 = 4.56e-6
"""Solar radiation pressure at 1 AU on an absorbing surface, N/m^2 (1361 W/m^2 / c; Vallado
2013, section 8.6.4 [memory])."""


def mean_theory_inclination_problem(i_deg: float) -> str | None:
    """Why Orekit's Eckstein-Hechler mean theory refuses a mean inclination, or None.

    The bands are :data:`EH_EQUATORIAL_SIN` and :data:`EH_CRITICAL_SIN2_BAND`.
    """
    s = math.sin(math.radians(i_deg))
    if abs(s) < EH_EQUATORIAL_SIN:
        return ("near-equatorial: the Eckstein-Hechler mean theory needs i at least 0.000573 deg "
                "(1e-5 rad) away from 0 and 180 deg")
    if abs(s * s - 0.8) < EH_CRITICAL_SIN2_BAND:
        return ("near the critical inclination: the Eckstein-Hechler mean theory refuses i in "
                "[63.3634, 63.5066] and [116.4934, 116.6366] deg")
    return None


def _density_kgpm3(alt_km: float) -> float:
    """Exponential-atmosphere density (guidance's table, Vallado 2013 table 8-4), kg/m^3; below
    0 km as at 0 km (a bound for the deceleration check, not the truth's model)."""
    from guidance.density import exponential_table_density_kgpm3

    return float(exponential_table_density_kgpm3(max(0.0, alt_km)))


def _largest_area_m2(bus: BusConfig) -> float:
    """An upper bound of the bus's cross-section over its modes, m^2 (box: the largest projected
    area of the box, sqrt((yz)^2 + (xz)^2 + (xy)^2), plus every panel)."""
    g = bus.geometry
    if g.kind == "table":
        return max([*g.area_by_mode_m2.values(), g.srp_area_m2 or 0.0, 0.0])
    x, y, z = g.box_x_m, g.box_y_m, g.box_z_m
    return math.sqrt((y * z) ** 2 + (x * z) ** 2 + (x * y) ** 2) + sum(p.area_m2 for p in g.panels)


def initial_deceleration_mps2(bus: BusConfig, perigee_km: float, a_m: float,
                              env: EnvironmentConfig) -> tuple[float, str]:
    """The larger of the drag and radiation-pressure decelerations at the initial perigee, m/s^2,
    and which it is: drag with the exponential atmosphere (mean solar activity), the bus's ``cd``
    and largest area, the circular speed at that radius; SRP with :data:`SOLAR_PRESSURE_NPM2`,
    ``cr`` and the same area. A screening estimate against
    :data:`MAX_INITIAL_DECELERATION_MPS2`, not the truth's force model."""
    area = _largest_area_m2(bus)
    r = R_EARTH_M + perigee_km * 1000.0
    drag = 0.0
    if env.atmosphere != "none":
        v2 = MU_EARTH_M3PS2 / max(r, 1.0) * max(0.0, 2.0 - r / a_m)  # vis-viva at perigee
        drag = 0.5 * _density_kgpm3(perigee_km) * v2 * bus.cd * area / bus.mass_kg
    srp = SOLAR_PRESSURE_NPM2 * bus.cr * area / bus.mass_kg if env.srp else 0.0
    return (drag, "drag") if drag >= srp else (srp, "solar radiation pressure")


_NAME_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_-]{0,63}$")
_RUN_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,127}$")


def sun_synchronous_inclination_deg(a_m: float, e: float = 0.0) -> float:
    """Inclination whose J2 RAAN rate is 360 deg per mean solar year (sun-synchronous).

    cos i = -(2/3) rate a^3.5 (1 - e^2)^2 / (J2 Re^2 sqrt(mu)), from the secular J2 nodal rate
    dRAAN/dt = -(3/2) n J2 (Re/p)^2 cos i (Vallado, Fundamentals of Astrodynamics and
    Applications, 4th ed., section on perturbations [memory for the section]), with mu, Re, J2
    of ``guidance.constants``.

    Parameters
    ----------
    a_m : float
        Mean semi-major axis, m.
    e : float
        Mean eccentricity.

    Returns
    -------
    float
        Inclination, deg (retrograde, about 97.4 deg at 500 km).

    Raises
    ------
    ValueError
        Above about 5970 km altitude, where no sun-synchronous inclination exists.
    """
    rate = 2.0 * math.pi / (SOLAR_YEAR_DAYS * 86400.0)
    c = -(2.0 / 3.0) * rate * a_m**3.5 * (1.0 - e * e) ** 2 / (J2 * R_EARTH_M**2 * math.sqrt(MU_EARTH_M3PS2))
    if c < -1.0:
        raise ValueError(f"no sun-synchronous inclination for a = {a_m:.0f} m, e = {e}")
    return math.degrees(math.acos(c))


# ------------------------------------------------------------------------------------------
# Building the RunConfig
# ------------------------------------------------------------------------------------------

_TOP = ("run", "environment", "bus", "chief", "deputies", "events", "guidance", "navigation",
        "actuators", "metrics")


def build(raw: dict, src: str, base_dir: Path, stem: str) -> RunConfig:
    top = Table(raw, "", _TOP, src)
    run = top.table("run", ("name", "epoch_utc", "duration_days", "duration_s", "log_step_s",
                            "seed", "orekit_data"), required=True)
    default_name = stem if _RUN_NAME_RE.match(stem or "") else "scenario"
    name = run.string("name", default_name, pattern=_RUN_NAME_RE,
                      what="a name of letters, digits, '_', '-', '.' (used for the log file name)")
    epoch = _epoch(run)
    dk = run.exclusive("duration_days", "duration_s")
    duration_s = (run.num("duration_days", lo=0, hi=3650, lo_open=True) * 86400.0
                  if dk == "duration_days" else run.num("duration_s", lo=0, hi=3650 * 86400.0,
                                                        lo_open=True))
    log_step_s = run.num("log_step_s", 60.0, lo=0.1, hi=duration_s)
    seed = run.num("seed", 0, lo=0, hi=2**63 - 1, integer=True)
    orekit_data = None
    if run.has("orekit_data"):
        od = run.string("orekit_data", what="a path to an Orekit data folder or zip")
        p = (base_dir / od).resolve() if not os.path.isabs(od) else Path(od)
        if not p.exists():
            raise run.err("orekit_data", od, "no such folder or zip file",
                          f"looked at {str(p)!r}")
        orekit_data = str(p)

    environment = _environment(top.table("environment", _ENV_KEYS) or Table({}, "environment",
                                                                          _ENV_KEYS, src), base_dir)
    events = _events(top.table("events", ("min_altitude_km", "keep_out_radius_m",
                                          "min_rn_separation_m")))

    buses = _buses(top, src)
    chief_t = top.table("chief", ("name", "bus", "initial_mode", "orbit"), required=True)
    chief = _spacecraft(chief_t, buses, is_chief=True, duration_s=duration_s)
    deputies = []
    dep_raw = raw.get("deputies", [])
    if not isinstance(dep_raw, list):
        raise top.err("deputies", dep_raw, "must be an array of tables ([[deputies]] sections)")
    names = {chief.name: "chief.name"}
    for k, d in enumerate(dep_raw):
        t = Table(d, f"deputies[{k}]", ("name", "bus", "initial_mode", "orbit", "roe_m",
                                          "target_roe_m", "deadline_days", "deadline_s"), src)
        dep = _spacecraft(t, buses, is_chief=False, duration_s=duration_s, chief=chief)
        if dep.name in names:
            raise t.err("name", dep.name, "spacecraft names must be unique",
                        f"{names[dep.name]} has the same name")
        names[dep.name] = t.key("name")
        deputies.append(dep)

    # every spacecraft must start above the altitude floor
    for sc, key in [(chief, "chief.orbit")] + [
            (d, f"deputies[{k}].{'orbit' if d.orbit else 'roe_m'}") for k, d in enumerate(deputies)]:
        a_m, e = _sc_a_e(sc, chief)
        perigee_km = (a_m * (1 - e) - R_EARTH_M) / 1000.0
        if perigee_km <= events.min_altitude_km:
            raise ScenarioError(key, round(perigee_km, 3),
                                f"perigee altitude must be above events.min_altitude_km = "
                                f"{events.min_altitude_km:g} km", path=src)
        acc, what = initial_deceleration_mps2(sc.bus, perigee_km, a_m, environment)
        if not acc <= MAX_INITIAL_DECELERATION_MPS2:
            low = perigee_km < LOW_PERIGEE_KM  # name the orbit when it is the cause
            raise ScenarioError(
                key if low else f"bus.{sc.bus.name}.mass_kg",
                round(perigee_km, 3) if low else sc.bus.mass_kg,
                f"{sc.name}'s {what} deceleration at its initial perigee ({perigee_km:.1f} km) "
                f"would be about {acc:.3g} m/s^2, over {MAX_INITIAL_DECELERATION_MPS2:g} m/s^2 "
                "(the truth propagation fails at t = 0): raise the orbit, raise "
                f"bus.{sc.bus.name}.mass_kg or lower the bus's areas", path=src)
        i_deg, ikey = _sc_inclination(sc, chief, key)
        why = mean_theory_inclination_problem(i_deg)
        if why:
            raise ScenarioError(ikey, round(i_deg, 9), f"mean inclination {why}", path=src)

    guidance = _guidance(top.table("guidance", ("law", "cycle_s", "settings")))
    navigation = _navigation(top.table("navigation", ("perfect", "absolute", "relative")))
    actuators = _actuators(top.table("actuators", _ACT_KEYS))
    metrics = _metrics(top.table("metrics", ("tolerance_m",)))
    return RunConfig(
        name=name, epoch_utc=epoch, duration_s=duration_s, log_step_s=log_step_s, seed=seed,
        environment=environment, chief=chief, deputies=tuple(deputies), events=events,
        guidance=guidance, navigation=navigation, actuators=actuators, metrics=metrics,
        orekit_data=orekit_data,
    )


def _epoch(run: Table) -> str:
    what = "an ISO 8601 UTC date-time such as 2025-03-01T00:00:00Z"
    v = run._get("epoch_utc", MISSING, what)
    if isinstance(v, _dt.datetime):
        dt = v
    elif isinstance(v, _dt.date):
        dt = _dt.datetime(v.year, v.month, v.day)
    elif isinstance(v, str):
        s = v.strip()
        if s.endswith(("Z", "z")):
            s = s[:-1] + "+00:00"
        try:
            dt = _dt.datetime.fromisoformat(s)
        except ValueError:
            raise run.err("epoch_utc", v, f"must be {what}") from None
    else:
        raise run.err("epoch_utc", v, f"must be {what}, got {type_name(v)}")
    if dt.tzinfo is not None:
        dt = dt.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    if not 1900 <= dt.year <= 2200:
        raise run.err("epoch_utc", v if isinstance(v, str) else v.isoformat(),
                      "year must be in [1900, 2200] (and inside the solar-activity data)")
    out = dt.strftime("%Y-%m-%dT%H:%M:%S")
    if dt.microsecond:
        out += f".{dt.microsecond:06d}".rstrip("0")
    return out + "Z"


_ENV_KEYS = ("preset", "gravity_degree", "gravity_order", "atmosphere", "local_solar_time",
             "solar_activity", "sun", "moon", "srp", "position_tolerance_m", "density_error")


def _environment(t: Table, base_dir: Path) -> EnvironmentConfig:
    preset = t.string("preset", "full", choices=PRESETS)
    dflt = PRESET_DEFAULTS[preset]
    if preset == "ideal":  # J2 + drag only: the truth (sim.orekit.forces.resolve_environment) enforces it
        for k in ("gravity_degree", "gravity_order", "sun", "moon", "srp"):
            if t.has(k) and t.d[k] != dflt[k]:
                raise t.err(k, t.d[k], f"preset \"ideal\" is J2 + drag only ({k} = "
                            f"{str(dflt[k]).lower()})", "use preset = \"full\" and set the "
                            "force-model switches there")
    degree = t.num("gravity_degree", dflt["gravity_degree"], lo=0, hi=120, integer=True, unit="")
    order = t.num("gravity_order", min(dflt["gravity_order"], degree), lo=0, hi=degree,
                  integer=True, unit="")
    atmosphere = t.string("atmosphere", dflt["atmosphere"], choices=ATMOSPHERE_MODELS)
    lst = t.string("local_solar_time", "mean", choices=("mean", "apparent"))
    sa = t.table("solar_activity", ("source", "path", "f107_sfu", "f107a_sfu", "ap"))
    solar = SolarActivityConfig()
    if sa is not None:
        source = sa.string("source", "cssi", choices=SOLAR_ACTIVITY_SOURCES)
        path = None
        if source == "file":
            ps = sa.string("path", what="a path to a CSSI-format space-weather file")
            p = Path(ps) if os.path.isabs(ps) else (base_dir / ps).resolve()
            if not p.is_file():
                raise sa.err("path", ps, "no such file", f"looked at {str(p)!r}")
            path = str(p)
        elif sa.has("path"):
            raise sa.err("path", sa.d["path"], "only used with source = \"file\"")
        consts = {}
        for k, lo, hi, dv in (("f107_sfu", 0.0, 500.0, 150.0), ("f107a_sfu", 0.0, 500.0, 150.0),
                              ("ap", 0.0, 400.0, 15.0)):
            if source != "constant" and sa.has(k):
                raise sa.err(k, sa.d[k], "only used with source = \"constant\"")
            consts[k] = sa.num(k, dv, lo=lo, hi=hi, lo_open=(k != "ap"),
                               unit="" if k == "ap" else "sfu")
        if atmosphere == "jb2008" and source == "file":
            raise sa.err("source", source, "JB2008 reads its own SOLFSMY/DTCFILE files from the "
                         "Orekit data; use \"cssi\" (the data's files) or \"constant\"")
        solar = SolarActivityConfig(source=source, path=path, **consts)
    de = t.table("density_error", ("bias", "sigma", "tau_s"))
    dens = DensityErrorConfig()
    if de is not None:
        dens = DensityErrorConfig(bias=de.num("bias", 0.0, lo=-1.0, hi=10.0, lo_open=True, unit="1"),
                                  sigma=de.num("sigma", 0.0, lo=0.0, hi=10.0, unit="1"),
                                  tau_s=de.num("tau_s", 86400.0, lo=0.0, lo_open=True))
    return EnvironmentConfig(
        preset=preset, gravity_degree=degree, gravity_order=order, atmosphere=atmosphere,
        local_solar_time=lst, solar_activity=solar,
        sun=t.boolean("sun", dflt["sun"]), moon=t.boolean("moon", dflt["moon"]),
        srp=t.boolean("srp", dflt["srp"]),
        position_tolerance_m=t.num("position_tolerance_m", 1.0, lo=1e-4, hi=1000.0),
        density_error=dens,
    )


def _events(t: Table | None) -> EventsConfig:
    if t is None:
        return EventsConfig()
    return EventsConfig(
        min_altitude_km=t.num("min_altitude_km", 150.0, lo=0.0, hi=2000.0),
        keep_out_radius_m=t.num("keep_out_radius_m", 0.0, lo=0.0),
        min_rn_separation_m=t.num("min_rn_separation_m", 0.0, lo=0.0),
    )


_BUS_KEYS = ("mass_kg", "cd", "cr", "slew_time_s", "geometry", "modes", "thruster")


def _buses(top: Table, src: str) -> dict[str, BusConfig]:
    bt = top.table("bus", (), required=True, open_keys=True)
    if not bt.d:
        raise top.err("bus", {}, "define at least one spacecraft type, e.g. [bus.cube6]")
    out = {}
    for bname, body in bt.d.items():
        if not _NAME_RE.match(bname):
            raise bt.err(bname, body, "bus names are letters, digits, '_' or '-', starting with a letter")
        out[bname] = _bus(Table(body, bt.key(bname), _BUS_KEYS, src), bname)
    return out


def _bus(t: Table, name: str) -> BusConfig:
    mass = t.num("mass_kg", lo=0.0, hi=10000.0, lo_open=True)
    if not t.has("modes"):
        raise t.err("modes", ScenarioError.MISSING,
                    "required table missing: every bus defines the attitude modes "
                    + ", ".join(MODE_NAMES_REQUIRED) + "; add the tables "
                    + ", ".join(f"[{t.key('modes')}.{m}]" for m in MODE_NAMES_REQUIRED)
                    + " (an empty table means zero rotation)")
    modes_t = t.table("modes", (), required=True, open_keys=True)
    modes = {}
    for mname, body in modes_t.d.items():
        if not _NAME_RE.match(mname):
            raise modes_t.err(mname, body, "mode names are letters, digits, '_' or '-'")
        mt = Table(body, modes_t.key(mname), ("rotation_xyz_deg",), t.src)
        rot = mt.vec("rotation_xyz_deg", 3, (0.0, 0.0, 0.0), lo=-360.0, hi=360.0)
        modes[mname] = AttitudeModeConfig(name=mname, rotation_xyz_deg=rot)
    for req in MODE_NAMES_REQUIRED:
        if req not in modes:
            close = difflib.get_close_matches(req, list(modes), n=1, cutoff=0.6)
            raise modes_t.err(req, ScenarioError.MISSING,
                              "required attitude mode missing; every bus defines "
                              + ", ".join(MODE_NAMES_REQUIRED) + f" (add [{modes_t.key(req)}])",
                              f"found {close[0]!r}" if close else "")
    geometry = _geometry(t.table("geometry", ("kind", "box_x_m", "box_y_m", "box_z_m", "panels",
                                             "area_by_mode_m2", "srp_area_m2")), modes)
    thr = None
    th = t.table("thruster", ("dv_max_per_burn_mps", "min_impulse_bit_Ns", "isp_s", "propellant_kg"))
    if th is not None:
        d = ThrusterConfig()
        thr = ThrusterConfig(
            dv_max_per_burn_mps=th.num("dv_max_per_burn_mps", d.dv_max_per_burn_mps, lo=0.0,
                                       hi=100.0, lo_open=True),
            min_impulse_bit_Ns=th.num("min_impulse_bit_Ns", d.min_impulse_bit_Ns, lo=0.0),
            isp_s=th.num("isp_s", d.isp_s, lo=0.0, hi=10000.0, lo_open=True),
            propellant_kg=th.num("propellant_kg", d.propellant_kg, lo=0.0, hi=mass, hi_open=True),
        )
    return BusConfig(
        name=name, mass_kg=mass, cd=t.num("cd", 2.2, lo=0.0, hi=10.0, lo_open=True, unit=""),
        cr=t.num("cr", 1.3, lo=0.0, hi=2.0, unit=""),
        slew_time_s=t.num("slew_time_s", 120.0, lo=0.0, hi=86400.0),
        geometry=geometry, modes=modes, thruster=thr,
    )


def _geometry(t: Table | None, modes: Mapping[str, AttitudeModeConfig]) -> GeometryConfig:
    if t is None:
        return GeometryConfig()
    kind = t.string("kind", "box", choices=("box", "table"))
    d = GeometryConfig()
    if kind == "box":
        for k in ("area_by_mode_m2", "srp_area_m2"):
            if t.has(k):
                raise t.err(k, t.d[k], "only used with kind = \"table\"")
        panels = []
        praw = t.d.get("panels", [])
        if not isinstance(praw, list):
            raise t.err("panels", praw, "must be an array of tables ([[...geometry.panels]])")
        for k, p in enumerate(praw):
            pt = Table(p, f"{t.key('panels')}[{k}]", ("area_m2", "normal_body", "double_sided"), t.src)
            normal = pt.vec("normal_body", 3, lo=-1e6, hi=1e6, unit="a direction, body axes")
            if not 1e-9 <= math.hypot(*normal) < math.inf:
                raise pt.err("normal_body", list(normal), "must be a non-zero vector of finite "
                             "length (body axes)")
            panels.append(PanelConfig(area_m2=pt.num("area_m2", lo=0.0, hi=1000.0, lo_open=True),
                                      normal_body=normal,
                                      double_sided=pt.boolean("double_sided", True)))
        return GeometryConfig(
            kind="box",
            box_x_m=t.num("box_x_m", d.box_x_m, lo=0.0, hi=100.0, lo_open=True),
            box_y_m=t.num("box_y_m", d.box_y_m, lo=0.0, hi=100.0, lo_open=True),
            box_z_m=t.num("box_z_m", d.box_z_m, lo=0.0, hi=100.0, lo_open=True),
            panels=tuple(panels),
        )
    for k in ("box_x_m", "box_y_m", "box_z_m", "panels"):
        if t.has(k):
            raise t.err(k, t.d[k], "only used with kind = \"box\"")
    at = t.table("area_by_mode_m2", tuple(modes), required=True)
    areas = {m: at.num(m, lo=0.0, hi=1000.0, lo_open=True, unit="m^2") for m in modes}
    srp = t.num("srp_area_m2", None, lo=0.0, hi=1000.0, lo_open=True)
    return GeometryConfig(kind="table", area_by_mode_m2=areas, srp_area_m2=srp)


_ORBIT_KEYS = ("altitude_km", "a_km", "e", "i_deg", "sun_synchronous", "raan_deg", "argp_deg",
               "mean_anomaly_deg", "u_deg")


def _orbit(t: Table) -> MeanOrbitConfig:
    ak = t.exclusive("altitude_km", "a_km")
    if ak == "altitude_km":
        a_m = R_EARTH_M + 1000.0 * t.num("altitude_km", lo=0.0, hi=5000.0, lo_open=True)
    else:
        a_m = 1000.0 * t.num("a_km", lo=R_EARTH_M / 1000.0, hi=R_EARTH_M / 1000.0 + 5000.0,
                             lo_open=True)
    e = t.num("e", 0.0, lo=0.0, hi=0.1, hi_open=True, unit="1 (Eckstein-Hechler mean theory is "
              "for near-circular orbits)")
    sso = t.boolean("sun_synchronous", False)
    if sso and t.has("i_deg"):
        raise t.err("i_deg", t.d["i_deg"], "give either i_deg or sun_synchronous = true",
                    "sun_synchronous = true computes the inclination")
    if sso:
        try:
            i_deg = sun_synchronous_inclination_deg(a_m, e)
        except ValueError:
            raise t.err("sun_synchronous", True, "no sun-synchronous inclination exists at this "
                        f"a = {a_m / 1000:.1f} km; give i_deg") from None
    else:
        i_deg = t.num("i_deg", lo=0.0, hi=180.0, lo_open=True, hi_open=True,
                      unit="deg (equatorial orbits are singular for the mean theory)")
    raan = t.num("raan_deg", 0.0, lo=-360.0, hi=360.0)
    argp = t.num("argp_deg", 0.0, lo=-360.0, hi=360.0)
    mk = t.exclusive("mean_anomaly_deg", "u_deg", required=False)
    if mk == "mean_anomaly_deg":
        u = argp + t.num("mean_anomaly_deg", lo=-360.0, hi=360.0)
    else:
        u = t.num("u_deg", 0.0, lo=-360.0, hi=360.0)
    return MeanOrbitConfig(a_m=a_m, e=e, i_deg=i_deg, raan_deg=raan, argp_deg=argp, u_deg=u,
                           sun_synchronous=sso)


def _sc_a_e(sc: SpacecraftConfig, chief: SpacecraftConfig) -> tuple[float, float]:
    if sc.orbit is not None:
        return sc.orbit.a_m, sc.orbit.e
    o = chief.orbit
    assert o is not None and sc.roe_m is not None
    a = o.a_m
    ex = o.e * math.cos(math.radians(o.argp_deg)) + sc.roe_m[2] / a
    ey = o.e * math.sin(math.radians(o.argp_deg)) + sc.roe_m[3] / a
    return a + sc.roe_m[0], math.hypot(ex, ey)


def _sc_inclination(sc: SpacecraftConfig, chief: SpacecraftConfig, key: str) -> tuple[float, str]:
    """Mean inclination of a spacecraft, deg, and the key that sets it."""
    if sc.orbit is not None:
        o = sc.orbit
        return o.i_deg, (f"{key}.i_deg" if not o.sun_synchronous else f"{key}.sun_synchronous")
    assert chief.orbit is not None and sc.roe_m is not None
    return chief.orbit.i_deg + math.degrees(sc.roe_m[4] / chief.orbit.a_m), f"{key}[4] (dix)"


def _spacecraft(t: Table, buses: Mapping[str, BusConfig], *, is_chief: bool, duration_s: float,
                chief: SpacecraftConfig | None = None) -> SpacecraftConfig:
    name = t.string("name", pattern=_NAME_RE,
                    what="a name of letters, digits, '_' or '-', starting with a letter")
    bname = t.string("bus", choices=tuple(buses))
    bus = buses[bname]
    mode = t.string("initial_mode", "nominal", choices=tuple(bus.modes))
    if is_chief:
        ot = t.table("orbit", _ORBIT_KEYS, required=True)
        return SpacecraftConfig(name=name, bus=bus, initial_mode=mode, orbit=_orbit(ot))
    assert chief is not None and chief.orbit is not None
    which = t.exclusive("roe_m", "orbit")
    orbit = roe = None
    if which == "orbit":
        orbit = _orbit(t.table("orbit", _ORBIT_KEYS))
    else:
        roe = t.vec("roe_m", 6, lo=-1e6, hi=1e6,
                    unit="m, a-scaled (a da, a dlambda, a dex, a dey, a dix, a diy)")
        a = chief.orbit.a_m
        ex = chief.orbit.e * math.cos(math.radians(chief.orbit.argp_deg)) + roe[2] / a
        ey = chief.orbit.e * math.sin(math.radians(chief.orbit.argp_deg)) + roe[3] / a
        i_d = chief.orbit.i_deg + math.degrees(roe[4] / a)
        if math.hypot(ex, ey) >= 0.1:
            raise t.err("roe_m", list(roe), "the deputy's eccentricity |e_chief + de| must stay "
                        "below 0.1 (near-circular mean theory)")
        if not 0.0 < i_d < 180.0:
            raise t.err("roe_m", list(roe), "the deputy's inclination i_chief + dix must stay in "
                        "(0, 180) deg")
    target = t.vec("target_roe_m", 6, None, lo=-1e6, hi=1e6, unit="m, a-scaled")
    dk = t.exclusive("deadline_days", "deadline_s", required=False)
    deadline = None
    if dk == "deadline_days":
        deadline = t.num("deadline_days", lo=0.0, lo_open=True) * 86400.0
    elif dk == "deadline_s":
        deadline = t.num("deadline_s", lo=0.0, lo_open=True)
    return SpacecraftConfig(name=name, bus=bus, initial_mode=mode, orbit=orbit, roe_m=roe,
                            target_roe_m=target, deadline_s=deadline)


def law_settings(law: str, settings: Mapping[str, Any]) -> dict:
    """The settings the flown law gets from ``[guidance.settings]``.

    A sub-table whose key is a built-in law name (``[guidance.settings.hybrid_resolve]``) or a
    user law's import path (a key with ``":"``) holds settings for that law only: the flown law's
    table is merged over the common keys, the other laws' tables are dropped. So one file can be
    flown with every law (``--set guidance.law=...``) and still tune each. Any other value passes
    through unchanged (the law checks it).
    """
    from guidance.registry import LAWS

    common, own = {}, {}
    for k, v in settings.items():
        if isinstance(v, dict) and (k in LAWS or ":" in str(k)):
            if k == law:
                own = dict(v)
        else:
            common[k] = v
    common.update(own)
    return common


def _guidance(t: Table | None) -> GuidanceConfig:
    if t is None:
        return GuidanceConfig()
    law = t.string("law", "none", what="a built-in law name, \"package.module:ClassName\" or "
                   "\"none\" (free drift)")
    if not law.strip():
        raise t.err("law", law, "must not be empty; \"none\" means free drift")
    settings = {}
    if t.has("settings"):
        if not isinstance(t.d["settings"], dict):
            raise t.err("settings", t.d["settings"], "must be a table ([guidance.settings])")
        settings = law_settings(law, t.d["settings"])
    return GuidanceConfig(law=law, cycle_s=t.num("cycle_s", 5400.0, lo=1.0, hi=30 * 86400.0),
                          settings=settings)


def _metrics(t: Table | None) -> MetricsConfig:
    if t is None:
        return MetricsConfig()
    tol = t.vec("tolerance_m", 6, MetricsConfig().tolerance_m, lo=0.0, lo_open=True, scalar_ok=True,
                unit="a-scaled m, da dlambda dex dey dix diy")
    return MetricsConfig(tolerance_m=tuple(float(x) for x in tol))


def _axes(t: Table | None) -> ErrorAxesConfig:
    if t is None:
        return ErrorAxesConfig()
    d = ErrorAxesConfig()
    unit = "same units as the table name, R, T, N"
    return ErrorAxesConfig(
        white_sigma=t.vec("white_sigma", 3, d.white_sigma, lo=0.0, scalar_ok=True, unit=unit),
        bias_sigma=t.vec("bias_sigma", 3, d.bias_sigma, lo=0.0, scalar_ok=True, unit=unit),
        gm_sigma=t.vec("gm_sigma", 3, d.gm_sigma, lo=0.0, scalar_ok=True, unit=unit),
        gm_tau_s=t.vec("gm_tau_s", 3, d.gm_tau_s, lo=0.0, lo_open=True, scalar_ok=True),
    )


_AXES_KEYS = ("white_sigma", "bias_sigma", "gm_sigma", "gm_tau_s")


def _nav_error(t: Table | None) -> NavErrorConfig:
    if t is None:
        return NavErrorConfig()
    outages = []
    if t.has("outages_s"):
        v = t.d["outages_s"]
        what = "an array of [start_s, end_s] pairs with 0 <= start_s < end_s (s)"
        if not isinstance(v, list):
            raise t.err("outages_s", v, f"must be {what}")
        for pair in v:
            if (not isinstance(pair, list) or len(pair) != 2
                    or any(isinstance(x, bool) or not isinstance(x, (int, float)) for x in pair)
                    or not 0 <= pair[0] < pair[1]):
                raise t.err("outages_s", v, f"must be {what}", f"bad element {pair!r}")
            outages.append((float(pair[0]), float(pair[1])))
    return NavErrorConfig(
        position_m=_axes(t.table("position_m", _AXES_KEYS)),
        velocity_mps=_axes(t.table("velocity_mps", _AXES_KEYS)),
        update_s=t.num("update_s", 10.0, lo=0.0, lo_open=True),
        outages_s=tuple(outages),
    )


def _navigation(t: Table | None) -> NavigationConfig:
    if t is None:
        return NavigationConfig()
    keys = ("position_m", "velocity_mps", "update_s", "outages_s")
    return NavigationConfig(perfect=t.boolean("perfect", True),
                            absolute=_nav_error(t.table("absolute", keys)),
                            relative=_nav_error(t.table("relative", keys)))


_ACT_KEYS = ("perfect", "dv_scale_sigma", "dv_fixed_sigma_mps", "pointing_sigma_deg",
             "time_sigma_s", "drag_area_sigma", "attitude_sigma_deg")


def _actuators(t: Table | None) -> ActuatorConfig:
    if t is None:
        return ActuatorConfig()
    return ActuatorConfig(
        perfect=t.boolean("perfect", True),
        dv_scale_sigma=t.num("dv_scale_sigma", 0.0, lo=0.0, hi=1.0, unit="1 (relative)"),
        dv_fixed_sigma_mps=t.num("dv_fixed_sigma_mps", 0.0, lo=0.0),
        pointing_sigma_deg=t.num("pointing_sigma_deg", 0.0, lo=0.0, hi=180.0),
        time_sigma_s=t.num("time_sigma_s", 0.0, lo=0.0),
        drag_area_sigma=t.num("drag_area_sigma", 0.0, lo=0.0, hi=1.0, unit="1 (relative)"),
        attitude_sigma_deg=t.num("attitude_sigma_deg", 0.0, lo=0.0, hi=180.0),
    )


# ------------------------------------------------------------------------------------------
# Orekit data and the solar-activity span (pure Python, no JVM)
# ------------------------------------------------------------------------------------------


def _iso(t: _dt.datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def check_orekit_data(data, src: str) -> None:
    """Refuse an Orekit data path that is not an Orekit data folder or zip (no leap-second file),
    as the run's boot would, naming ``run.orekit_data`` when the scenario gave it."""
    if data.label == BUNDLED_LABEL:
        return
    try:
        check_data_folder(data.path, data.label)
    except EnvironmentSetupError as exc:
        if data.label != "[run] orekit_data":
            raise
        raise ScenarioError("run.orekit_data", data.path, exc.what, path=src) from None


def check_solar_span(cfg: RunConfig, raw: dict, src: str, base_dir: Path, orekit_data) -> None:
    """Refuse an epoch or an end outside what Orekit serves of the solar-activity data.

    Orekit's CSSI data (``CssiSpaceWeatherData.getMaxDate``) end at 00:00 UTC of the file's last
    day, its JB2008 data (``JB2008SpaceEnvironmentData.getMaxDate``) at 12:00 UTC of the last day
    (the files' Julian dates); one second later the density model raises "no solar activity
    available" (measured with Orekit 13 on the bundled files). The Orekit data path itself must
    be an Orekit data folder (:func:`check_orekit_data`).
    """
    data = resolve_orekit_data(orekit_data, cfg.orekit_data)
    check_orekit_data(data, src)
    span = solar_activity_span(cfg.environment, data.path)
    if span is None:
        return
    first, last, _obs, label = span
    t0 = parse_epoch(cfg.epoch_utc)
    t1 = t0 + _dt.timedelta(seconds=cfg.duration_s)
    history = JB2008_LAG_DAYS if cfg.environment.atmosphere == "jb2008" else AP_HISTORY_DAYS
    earliest = _dt.datetime.combine(first, _dt.time(tzinfo=_dt.timezone.utc)) + _dt.timedelta(days=history)
    latest = _dt.datetime.combine(last, _dt.time(tzinfo=_dt.timezone.utc)) + _dt.timedelta(
        hours=12 if cfg.environment.atmosphere == "jb2008" else 0)  # what Orekit serves
    span_txt = (f"the solar-activity data ({label}) cover {first.isoformat()} to "
                f"{last.isoformat()}")
    if t0 < earliest or t0 >= latest:  # (a run has a positive duration: it must end by latest)
        raise ScenarioError("run.epoch_utc", cfg.epoch_utc,
                            f"{span_txt}; the epoch must be in [{_iso(earliest)}, "
                            f"{_iso(latest)}) ({history:g} days of history needed "
                            "before it)", path=src)
    if t1 > latest:
        dkey = "run.duration_days" if "duration_days" in raw.get("run", {}) else "run.duration_s"
        raise ScenarioError(f"run.epoch_utc + {dkey}", f"{cfg.epoch_utc} + "
                            f"{cfg.duration_s / 86400.0:g} days",
                            f"{span_txt}; the run must end by {_iso(latest)}", path=src)

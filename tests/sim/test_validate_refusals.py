"""`covey validate` refuses what the run would refuse at t = 0, naming the key; Orekit's known
failures reach the user in covey's words; parser edges of ``--set`` are input errors.

Sources: the inclination bands and the solar-activity end dates are Orekit 13's own behaviour
(``EcksteinHechlerTheory.meanToOsculating``, ``CssiSpaceWeatherData.getMaxDate``,
``JB2008SpaceEnvironmentData.getMaxDate``), measured on this machine and re-checked against
Orekit in the ``orekit`` tests below; the deceleration screen uses the exponential atmosphere of
Vallado, Fundamentals of Astrodynamics and Applications, 4th ed. (2013), Table 8-4 [memory]; the
failing cases (80 km, 1e-6 kg, 1e-300 kg, 0.5 km) and passing ones (100 km, 1e-3 kg) were flown
with the real truth (exit 1 "hyperbolic orbits cannot be handled" / exit 0). The rest is covey's
own contract (common practice, no source).
"""

from __future__ import annotations

import math

import pytest

from sim.cli.main import main
from sim.errors import EnvironmentSetupError, PropagationError, ScenarioError
from sim.orekit import messages
from sim.scenario.build import mean_theory_inclination_problem
from sim.scenario.reader import load_scenario


def _refusal(repo_root, name="ideal_pair.toml", **over) -> ScenarioError:
    with pytest.raises(ScenarioError) as ei:
        load_scenario(repo_root / "scenarios" / name, over)
    return ei.value


# ------------------------------------------------------------------------------------------
# the mean theory's singular inclinations
# ------------------------------------------------------------------------------------------

# (i_deg, refused): just inside / outside each measured band edge
_EDGES = [(1e-12, True), (0.000572, True), (0.000574, False), (63.3633, False), (63.3635, True),
          (63.4349, True), (63.5066, True), (63.5067, False), (116.4933, False),
          (116.4935, True), (116.6366, True), (116.6367, False), (179.99942, False),
          (179.99943, True)]


@pytest.mark.parametrize("i_deg, refused", _EDGES)
def test_inclination_bands(i_deg, refused):
    assert (mean_theory_inclination_problem(i_deg) is not None) == refused


def test_validate_refuses_chief_and_deputy_inclinations(repo_root):
    e = _refusal(repo_root, **{"chief.orbit.i_deg": 1e-12})
    assert e.key == "chief.orbit.i_deg" and "near-equatorial" in str(e)
    e = _refusal(repo_root, **{"chief.orbit.i_deg": 63.4})
    assert e.key == "chief.orbit.i_deg" and "[63.3634, 63.5066]" in str(e)
    # a chief just outside the band, a deputy pushed into it by its dix
    a_m = load_scenario(repo_root / "scenarios/ideal_pair.toml").chief.orbit.a_m
    dix = math.radians(0.05) * a_m
    e = _refusal(repo_root, **{"chief.orbit.i_deg": 63.33,
                               "deputies[0].roe_m": [0.0, 0.0, 0.0, 0.0, dix, 0.0]})
    assert e.key == "deputies[0].roe_m[4] (dix)"
    load_scenario(repo_root / "scenarios/ideal_pair.toml", {"chief.orbit.i_deg": 63.3})


@pytest.mark.orekit
def test_bands_match_orekit():
    """The refusal is exactly where Orekit's Eckstein-Hechler conversion raises."""
    from sim.orekit.boot import boot

    boot()
    from org.orekit.forces.gravity.potential import GravityFieldFactory
    from org.orekit.frames import FramesFactory
    from org.orekit.orbits import CircularOrbit, PositionAngleType
    from org.orekit.propagation.conversion.osc2mean import EcksteinHechlerTheory
    from org.orekit.time import AbsoluteDate, TimeScalesFactory

    prov = GravityFieldFactory.getUnnormalizedProvider(6, 6)
    date = AbsoluteDate(2025, 3, 1, 0, 0, 0.0, TimeScalesFactory.getUTC())
    for i_deg, refused in _EDGES:
        o = CircularOrbit(6878137.0, 0.001, 0.0, math.radians(i_deg), 0.0, 0.0,
                          PositionAngleType.MEAN, FramesFactory.getGCRF(), date, prov.getMu())
        try:
            EcksteinHechlerTheory(prov).meanToOsculating(o)
            raised = False
        except Exception:  # noqa: BLE001 - Orekit's exception
            raised = True
        assert raised == refused, i_deg


# ------------------------------------------------------------------------------------------
# decelerations the truth cannot integrate
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("over, key", [
    ({"chief.orbit.altitude_km": 0.5, "events.min_altitude_km": 0.0}, "chief.orbit"),
    ({"chief.orbit.altitude_km": 80.0, "events.min_altitude_km": 0.0}, "chief.orbit"),
    ({"bus.threeu.mass_kg": 1e-300}, "bus.threeu.mass_kg"),
    ({"bus.threeu.mass_kg": 1e-6}, "bus.threeu.mass_kg"),
])
def test_validate_refuses_what_fails_at_t0(repo_root, over, key):
    e = _refusal(repo_root, **over)
    assert e.key == key and "deceleration" in str(e) and "fails at t = 0" in str(e)


@pytest.mark.parametrize("over", [{"chief.orbit.altitude_km": 100.0, "events.min_altitude_km": 0.0},
                                  {"bus.threeu.mass_kg": 1e-3}])
def test_what_the_truth_flies_is_accepted(repo_root, over):
    load_scenario(repo_root / "scenarios/ideal_pair.toml", over)


# ------------------------------------------------------------------------------------------
# Orekit data and the solar-activity span
# ------------------------------------------------------------------------------------------


def test_orekit_data_that_is_no_data_folder(repo_root, tmp_path, monkeypatch):
    (tmp_path / "notes.txt").write_text("not Orekit data")
    e = _refusal(repo_root, **{"run.orekit_data": str(tmp_path)})
    assert e.key == "run.orekit_data" and "leap-second" in str(e)
    with pytest.raises(EnvironmentSetupError, match="--orekit-data"):
        load_scenario(repo_root / "scenarios/ideal_pair.toml", orekit_data=str(tmp_path))
    # a big folder is not crawled: the search stops after MAX_SCAN_ENTRIES entries
    import sim.orekit.data as data

    monkeypatch.setattr(data, "MAX_SCAN_ENTRIES", 50)
    for k in range(60):
        (tmp_path / f"f{k}.txt").write_text("")
    e = _refusal(repo_root, **{"run.orekit_data": str(tmp_path)})
    assert "among its first 50 entries" in str(e)


def test_solar_span_ends_where_orekit_data_end(repo_root):
    # bundled CSSI file: Orekit serves up to 2096-10-01T00:00:00Z (getMaxDate)
    ok = {"run.epoch_utc": "2096-09-30T00:00:00Z", "run.duration_days": 1.0}
    load_scenario(repo_root / "scenarios/ideal_pair.toml", ok)
    e = _refusal(repo_root, **{**ok, "run.duration_s": 86401.0})
    assert "must end by 2096-10-01T00:00:00Z" in str(e)
    e = _refusal(repo_root, **{"run.epoch_utc": "2096-10-01T00:00:00Z"})
    assert e.key == "run.epoch_utc"
    # bundled JB2008 files: up to 2026-01-29T12:00:00Z
    jb = {"run.epoch_utc": "2026-01-28T12:00:00Z", "run.duration_days": 1.0}
    load_scenario(repo_root / "scenarios/decay_jb2008.toml", jb)
    e = _refusal(repo_root, "decay_jb2008.toml", **{**jb, "run.duration_s": 86401.0})
    assert "must end by 2026-01-29T12:00:00Z" in str(e)


@pytest.mark.orekit
def test_solar_span_end_matches_orekit():
    from sim.orekit.boot import boot

    boot()
    from org.orekit.models.earth.atmosphere.data import (CssiSpaceWeatherData,
                                                         JB2008SpaceEnvironmentData)

    cssi = CssiSpaceWeatherData(CssiSpaceWeatherData.DEFAULT_SUPPORTED_NAMES)
    assert str(cssi.getMaxDate()) == "2096-10-01T00:00:00.000Z"
    jb = JB2008SpaceEnvironmentData(JB2008SpaceEnvironmentData.DEFAULT_SUPPORTED_NAMES_SOLFSMY,
                                    JB2008SpaceEnvironmentData.DEFAULT_SUPPORTED_NAMES_DTC)
    assert str(jb.getMaxDate()) == "2026-01-29T12:00:00.000Z"


# ------------------------------------------------------------------------------------------
# Orekit's messages in covey's words
# ------------------------------------------------------------------------------------------

# verbatim from Orekit 13 on this machine
_HYPERBOLIC = ("org.orekit.errors.OrekitIllegalArgumentException: hyperbolic orbits cannot be "
               "handled as org.orekit.orbits.EquinoctialOrbit instances")
_NO_SOLAR = ("org.orekit.errors.OrekitException: no solar activity available at "
             "2096-10-01T00:00:01.000Z, data available only in range [1957-10-01T00:00:00.000Z, "
             "2096-10-01T00:00:00.000Z]")


def test_known_orekit_messages_translated():
    e = messages.translate(PropagationError(0.0, "alpha", _HYPERBOLIC), 0.0, "alpha")
    assert isinstance(e, PropagationError) and "bus.<name>.mass_kg" in str(e)
    assert "Orekit" not in str(e) and str(e).startswith("truth propagation of 'alpha' failed at")
    e = messages.translate(RuntimeError(_NO_SOLAR), 3600.0, "alpha,beta")
    assert "end at 2096-10-01T00:00:00.000Z" in str(e) and "run.duration_days" in str(e)
    e = messages.translate(RuntimeError("org.orekit.errors.OrekitException: almost critically "
                                        "inclined orbit (i = 63.4 degrees)"), 0.0, "alpha")
    assert "63.4 deg" in str(e) and "chief.orbit.i_deg" in str(e)
    assert messages.translate(RuntimeError("something else"), 0.0, "alpha") is None


def test_run_reports_a_known_orekit_failure_in_covey_words(repo_root, tmp_path, fake_truth,
                                                           capsys):
    def advance_to(self, t_s):
        raise RuntimeError(f"{_HYPERBOLIC}\n\tat org.orekit.orbits.EquinoctialOrbit.<init>")

    fake_truth.advance_to = advance_to
    code = main(["run", str(repo_root / "scenarios/demo_drift.toml"), "-o", str(tmp_path / "x.h5")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 1 and len(err) == 1
    assert err[0].startswith("covey: truth propagation of 'alpha,beta,gamma' failed at t = 0.0 s: "
                             "the orbit became unbound")
    from sim.log.reader import read_log

    log = read_log(tmp_path / "x.h5")
    assert log.status == "failed" and "OrekitIllegalArgumentException" in log.get("meta/traceback")


# ------------------------------------------------------------------------------------------
# --set and file parser edges: exit 2 and one line, never "unexpected error"
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("item, words", [
    ("[0]=1", "override key must be a dotted key path"),
    ("chief.orbit.u_deg.x.y=1", "goes through chief.orbit.u_deg = 0.0, which is a number"),
    ("run.duration_days=" + "9" * 400, "run.duration_days"),
    ("deputies[0].roe_m=" + "[" * 5000 + "]" * 5000, "nested too deeply"),
    ("a..b=1", "override key must be a dotted key path"),
    ("run[0]=1", "run is a table, not an array"),
    ("deputies.name=x", "deputies is an array: address an element with [i]"),
    ("deputies[0][1]=1", "deputies[0] is a table, not an array"),
    ("deputies[7].name='x'", "index [7] is out of range: deputies has 1 element"),
    ("newtable[0]=1", "newtable is not in the file"),
])
def test_set_edges_are_input_errors(repo_root, capsys, item, words):
    code = main(["validate", str(repo_root / "scenarios/ideal_pair.toml"), "--set", item])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "unexpected error" not in err[0]
    assert words in err[0]


def test_deeply_nested_file_is_an_input_error(tmp_path, repo_root, capsys):
    text = (repo_root / "scenarios/ideal_pair.toml").read_text()
    p = tmp_path / "deep.toml"
    p.write_text(text + "\n[zz_deep]\nx = " + "[" * 5000 + "]" * 5000 + "\n")
    code = main(["validate", str(p)])
    err = capsys.readouterr().err
    assert code == 2 and "nested too deeply" in err

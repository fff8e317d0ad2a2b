"""Re-judging a run log without re-flying it (sim.gate.judge, ``covey judge``).

The logs are flown with the fake (Keplerian, no JVM) truth of tests/conftest.py, except one
short real run (marked orekit). The checks are covey's own contract: judging the same arrays with
the same code gives the same numbers, and judging a log with a changed threshold gives what flying
with that threshold gives (common practice, no source).
"""

from __future__ import annotations

import json
import math

import h5py
import numpy as np
import pytest

from sim.cli.main import main
from sim.errors import LogFormatError, ScenarioError
from sim.gate.judge import JUDGE_KEYS, judge_log, rejudge
from sim.loop.run import run_scenario
from sim.scenario.reader import load_scenario

FAST = {"run.duration_s": 10800.0, "guidance.law": "hybrid_single",
        "deputies[0].deadline_s": 10800.0, "deputies[1].deadline_s": 10800.0}
"""The demo formation flown 3 h (two guidance cycles) with the fake truth: about a second."""


def _same(a, b) -> bool:
    """Two DeputyMetrics equal field by field (NaN equal to NaN)."""
    da, db = a.as_dict(), b.as_dict()
    if da.keys() != db.keys():
        return False
    for k in da:
        x, y = da[k], db[k]
        if isinstance(x, float) and isinstance(y, float) and math.isnan(x) and math.isnan(y):
            continue
        if isinstance(x, list):
            if not np.array_equal(np.asarray(x, float), np.asarray(y, float), equal_nan=True):
                return False
        elif x != y:
            return False
    return True


def fly(tmp_path, repo_root, name="run", **extra):
    cfg = load_scenario(repo_root / "scenarios/demo_formation.toml", {**FAST, **extra})
    s = run_scenario(cfg, tmp_path / f"{name}.h5")
    assert s.status == "ok", s.reason
    return s


@pytest.fixture(scope="module")
def flown(tmp_path_factory):
    """The demo formation flown once per module with the fake truth (RunSummary)."""
    import sim.loop.run
    from conftest import REPO, FakeTruthWorld, fake_truth_api

    with pytest.MonkeyPatch.context() as mp:
        api = fake_truth_api(type("World", (FakeTruthWorld,), {}))
        mp.setattr(sim.loop.run, "truth_backend", lambda: api)
        return fly(tmp_path_factory.mktemp("judge"), REPO)


@pytest.fixture
def s(flown, tmp_path):
    """A copy of the module's run log (tests may modify it): the RunSummary with its path."""
    import dataclasses
    import shutil

    p = tmp_path / "run.h5"
    shutil.copy(flown.path, p)
    return dataclasses.replace(flown, path=p)


def test_judge_without_overrides_equals_the_stored_metrics(s):
    j = rejudge(s.path)
    assert j.rejudged and [m.name for m in j.metrics] == ["beta", "gamma"]
    assert all(_same(a, b) for a, b in zip(j.metrics, s.metrics))
    assert all(_same(a, b) for a, b in zip(j.stored, s.metrics))  # stored == what the run judged


def test_judge_with_changed_thresholds_equals_flying_with_them(s, tmp_path, repo_root, fake_truth):
    base = s
    beta = base.metrics[0]
    # a radial/normal threshold above the flown minimum, a keep-out radius above the closest
    # approach (the fake truth does not stop on keep-out) and a wider tolerance box
    ov = {"events.min_rn_separation_m": beta.min_rn_separation_m + 1.0,
          "events.keep_out_radius_m": beta.min_distance_any_m + 1.0,
          "metrics.tolerance_m": 5000.0}
    judged = judge_log(base.path, ov)
    again = fly(tmp_path, repo_root, "flown", **ov).metrics
    assert all(_same(a, b) for a, b in zip(judged, again))
    assert judged[0].rn_separation_violated and judged[0].keep_out_violated
    assert not beta.rn_separation_violated and not beta.keep_out_violated
    assert math.isnan(beta.time_to_tolerance_s) and judged[0].time_to_tolerance_s == 0.0


def test_judge_with_another_target_and_deadline(s):
    # the fake truth keeps the initial mean ROE, so with the initial ROE as target the error is 0
    j = rejudge(s.path, {"deputies[0].target_roe_m": [0.0, 2000.0, 0.0, 100.0, 0.0, 100.0],
                         "deputies[1].deadline_s": 3600.0})
    beta, gamma = j.metrics
    assert beta.final_error_norm_m < 1e-6 and s.metrics[0].final_error_norm_m > 3000.0
    assert gamma.reached_deadline and any("target_roe_m" in n for n in j.notes)
    assert any("deadline_s" in n for n in j.notes)  # the caution: these keys steer guidance


def test_flight_keys_are_refused_with_the_allowed_keys(s):
    with pytest.raises(ScenarioError) as e:
        judge_log(s.path, {"guidance.law": "propulsion_only"})
    assert e.value.key == "guidance.law" and all(k in e.value.allowed for k in JUDGE_KEYS)
    with pytest.raises(ScenarioError, match="did you mean 'events.keep_out_radius_m'"):
        judge_log(s.path, {"events.keep_out_radius": 50.0})
    with pytest.raises(ScenarioError, match="2 deputies"):
        judge_log(s.path, {"deputies[2].deadline_s": 50.0})
    with pytest.raises(ScenarioError) as e:  # a bad value: the scenario reader's own message
        judge_log(s.path, {"events.keep_out_radius_m": -1.0})
    assert e.value.key == "events.keep_out_radius_m"


def test_older_log_is_judged_by_todays_code(s):
    with h5py.File(s.path, "r+") as f:  # make it look like a 1.0 log: attributes added later gone
        f.attrs["schema_version"] = "1.0"
        for k in ("truth_density_method", "truth_sampler", "truth_threads"):
            if k in f["spacecraft"].attrs:
                del f["spacecraft"].attrs[k]
        del f["metrics"]
    j = rejudge(s.path)
    assert j.rejudged and j.stored == [] and j.meta["schema_version"] == "1.0"
    assert all(_same(a, b) for a, b in zip(j.metrics, s.metrics))
    with h5py.File(s.path, "r+") as f:
        f.attrs["schema_version"] = "2.0"
    with pytest.raises(LogFormatError, match="not readable"):
        judge_log(s.path)


def test_log_without_scenario_text_falls_back_to_stored_metrics(s):
    with h5py.File(s.path, "r+") as f:
        del f["meta/scenario_toml"]
    with pytest.raises(LogFormatError, match="no scenario text"):
        judge_log(s.path)
    j = rejudge(s.path, fallback=True)
    assert not j.rejudged and "stored metrics are used" in j.notes[0]
    assert all(_same(a, b) for a, b in zip(j.metrics, s.metrics))


def test_cli_judge(s, tmp_path, capsys):
    capsys.readouterr()
    assert main(["judge", str(s.path)]) == 0
    out = capsys.readouterr().out
    assert "same as the metrics stored in the log" in out and "a dlambda err [m]" in out
    assert main(["judge", str(s.path), "--set", "events.min_rn_separation_m=1e6",
                 "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert [m["rn_separation_violated"] for m in doc["metrics"]] == [True, True]
    assert "beta.rn_separation_violated (False -> True)" in doc["notes"][-1]
    assert main(["judge", str(s.path), "--format", "csv"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[0].startswith("name,") and ",dv_total_mps," in lines[0] and len(lines) == 3
    # bad input: a flight key, a file that is not a log -> exit 2, one line
    assert main(["judge", str(s.path), "--set", "run.seed=3"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "run.seed" in err[0] and "events.keep_out_radius_m" in err[0]
    (tmp_path / "junk.h5").write_bytes(b"not hdf5")
    assert main(["judge", str(tmp_path / "junk.h5")]) == 2
    assert len(capsys.readouterr().err.strip().splitlines()) == 1


@pytest.mark.orekit
def test_real_run_judge_equals_flying_with_the_threshold(tmp_path, repo_root, monkeypatch):
    """The issue's check on a real (Orekit) run: 0.2 day of the ideal e/i pair, flown closed-loop,
    re-judged with three changed thresholds, equals the same flight flown with them."""
    monkeypatch.setenv("COVEY_TRUTH_THREADS", "1")
    ov0 = {"run.duration_days": 0.2}
    base = run_scenario(load_scenario(repo_root / "scenarios/ei_pair_ideal.toml", ov0),
                        tmp_path / "base.h5")
    assert base.status == "ok" and base.metrics
    m0 = base.metrics[0]
    ov = {"events.min_rn_separation_m": m0.min_rn_separation_m + 5.0,  # flag flips on
          "events.keep_out_radius_m": 0.5 * m0.min_distance_any_m,  # active, does not stop
          "metrics.tolerance_m": 1e5}  # inside the box from the start
    judged = judge_log(base.path, ov)
    flown = run_scenario(load_scenario(repo_root / "scenarios/ei_pair_ideal.toml", {**ov0, **ov}),
                         tmp_path / "flown.h5")
    assert flown.status == "ok"
    assert all(_same(a, b) for a, b in zip(judged, flown.metrics))
    assert judged[0].rn_separation_violated and not m0.rn_separation_violated
    assert judged[0].time_to_tolerance_s == 0.0

"""``covey compare`` on run logs: values side by side with absolute and relative differences per
deputy; logs of different schema versions, scenarios or deputies compared where they can be, the
difference said in one line. Logs flown with the fake (no JVM) truth of tests/conftest.py; the
expected numbers are the logs' own metrics (covey's contract, common practice, no source).
"""

from __future__ import annotations

import json
import shutil

import h5py
import pytest

from sim.cli.main import main
from sim.gate.compare import compare
from sim.loop.run import run_scenario
from sim.scenario.reader import load_scenario

FAST = {"run.duration_s": 10800.0, "deputies[0].deadline_s": 10800.0,
        "deputies[1].deadline_s": 10800.0}


@pytest.fixture(scope="module")
def logs(tmp_path_factory):
    """Two laws on the demo formation, and the e/i pair (other spacecraft), flown once."""
    import sim.loop.run
    from conftest import REPO, FakeTruthWorld, fake_truth_api

    tmp = tmp_path_factory.mktemp("compare")
    out = {}
    with pytest.MonkeyPatch.context() as mp:
        api = fake_truth_api(type("World", (FakeTruthWorld,), {}))
        mp.setattr(sim.loop.run, "truth_backend", lambda: api)
        for law in ("propulsion_only", "hybrid_single"):
            cfg = load_scenario(REPO / "scenarios/demo_formation.toml", {**FAST, "guidance.law": law})
            out[law] = run_scenario(cfg, tmp / f"{law}.h5")
        cfg = load_scenario(REPO / "scenarios/ei_pair_ideal.toml", {"run.duration_s": 10800.0})
        out["pair"] = run_scenario(cfg, tmp / "pair.h5")
    return out


def test_two_runs_side_by_side(logs):
    a, b = logs["propulsion_only"], logs["hybrid_single"]
    c = compare([a.path, b.path])
    assert c.mode == "runs" and c.labels == ["A", "B"]
    ma = {m.name: m for m in a.metrics}
    mb = {m.name: m for m in b.metrics}
    for r in c.rows:
        if r["metric"] == "dv_total_mps":
            x, y = ma[r["deputy"]].dv_total_mps, mb[r["deputy"]].dv_total_mps
            assert r["A"] == x and r["B"] == y
            assert r["B_diff"] == pytest.approx(y - x) and r["B_rel"] == pytest.approx((y - x) / x)
            assert r["B_change"] == ("lower, better" if y < x else "higher, worse" if y > x else "")
        if r["metric"] == "n_switches":
            assert r["B_diff"] == mb[r["deputy"]].n_switches - ma[r["deputy"]].n_switches
    assert {r["deputy"] for r in c.rows} == {"beta", "gamma"}
    assert any("scenario settings differ from A in guidance.law" in n for n in c.notes)
    assert c.text("table").splitlines()[0].startswith("A = propulsion_only.h5 vs B = hybrid_single.h5")


def test_itself_no_difference(logs):
    p = logs["hybrid_single"].path
    c = compare([p, p, p])
    assert c.flagged() == [] and c.labels == ["A", "B", "C"]
    assert all(r["B_diff"] == 0 and r["C_diff"] == 0 for r in c.rows)
    assert not any("differ" in n for n in c.notes)


def test_different_scenarios_deputies_and_schema(logs, tmp_path):
    older = tmp_path / "older.h5"
    shutil.copy(logs["hybrid_single"].path, older)
    with h5py.File(older, "r+") as f:
        f.attrs["schema_version"] = "1.1"
    c = compare([logs["propulsion_only"].path, older])
    from sim.log.recorder import SCHEMA_VERSION

    assert any(f"schema covey.runlog 1.1 vs covey.runlog {SCHEMA_VERSION}" in n for n in c.notes)
    d = compare([logs["propulsion_only"].path, logs["pair"].path])
    line = [n for n in d.notes if "deputies differ" in n]
    assert len(line) == 1 and "only in A: beta, gamma" in line[0] and "only in B: d1" in line[0]
    assert d.rows == []  # nothing in common to compare


def test_run_against_a_campaign_is_a_sample_of_one(logs, tmp_path):
    from sim.campaign.summary import RunRow, write_summary

    s = logs["hybrid_single"]
    rows = [RunRow(index=k, seed=k, status="ok", metrics={m.name: m.as_dict() for m in s.metrics})
            for k in range(5)]  # fixture: the run's metrics five times
    write_summary(tmp_path / "summary.h5", rows, name="five", kind="monte_carlo", master_seed=0,
                  campaign_toml="")
    c = compare([s.path, tmp_path])
    assert c.mode == "campaigns" and any("sample of one" in n for n in c.notes)
    r = next(r for r in c.rows if r["deputy"] == "beta" and r["metric"] == "dv_total_mps")
    assert r["A_p50"] == r["B_p50"] == s.metrics[0].dv_total_mps and r["B_p"] == 1.0


def test_cli_compare_runs(logs, capsys):
    a, b = str(logs["propulsion_only"].path), str(logs["hybrid_single"].path)
    assert main(["compare", a, b, "--format", "json", "--metric", "dv_total_mps",
                 "--metric", "n_switches"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["mode"] == "runs" and len(doc["rows"]) == 4
    assert main(["compare", a, b, "--format", "markdown"]) == 0
    md = capsys.readouterr().out.splitlines()
    assert md[2].startswith("| deputy | metric | units | A | B | B-A |")
    assert main(["compare", a, b, "--format", "csv"]) == 0
    assert capsys.readouterr().out.startswith("deputy,metric,units,A,B,B_diff")
    assert main(["compare", a, b, "--set", "events.min_rn_separation_m=1e6",
                 "--metric", "rn_separation_violated"]) == 0
    out = capsys.readouterr().out
    assert out.count("rn_separation_violated") == 2

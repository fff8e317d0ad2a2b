"""Compare and check campaigns (sim.gate on campaign summaries).

The campaigns here are TEST FIXTURES: synthetic summaries written with
sim.campaign.summary.write_summary from known distributions (below), not flown campaigns. A
"master seed" fixes the per-run draws (the dispersions and each run's draw-driven spread), a
separate noise seed the run-to-run noise that is not shared between two campaigns. The "worse
law" fixture has every deputy's delta-v (and so propellant) 15 % higher on the same draws and
everything else drawn alike; the gate must call out exactly those two metrics.
"""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from sim.campaign.summary import RunRow, scalar_metric_names, write_summary
from sim.cli.main import main
from sim.gate.check import check
from sim.gate.compare import compare
from sim.gate.sources import load_source, pairing
from sim.gate.stats import limit_statistic, success_lower_bound

N = 60
DEPUTIES = ("beta", "gamma")


def synthetic_campaign(folder, master_seed: int, noise_seed: int, dv_factor: float = 1.0,
                       failed=(), n: int = N):
    """Write a synthetic campaign summary (a test fixture; the distributions are in the code)."""
    folder.mkdir(parents=True, exist_ok=True)
    draws = np.random.default_rng(master_seed)
    noise = np.random.default_rng(noise_seed)
    bias = draws.uniform(-0.2, 0.3, n)  # the dispersed density bias, shared by the deputies
    rows = []
    per_dep = {d: draws.normal(size=(n, 8)) for d in DEPUTIES}
    for k in range(n):
        metrics = {}
        for d in DEPUTIES:
            z = per_dep[d][k]
            e = noise.normal(size=8)
            dv = dv_factor * (0.20 + 0.1 * bias[k] + 0.02 * z[0]) * (1 + 0.002 * e[0])
            fe = [2.0 * z[1] + 0.2 * e[1], 20.0 * z[2] + 1.0 * e[2], 3 * z[3] + 0.3 * e[3],
                  3 * z[4] + 0.3 * e[4], 3 * z[5] + 0.3 * e[5], 3 * z[6] + 0.3 * e[6]]
            m = {name: 0.0 for name in scalar_metric_names()}
            m.update(dv_total_mps=dv, propellant_used_kg=10.0 * dv / (60.0 * 9.80665),
                     n_burns=6, n_switches=8 + int(3 * abs(z[7])),
                     final_error_norm_m=float(np.linalg.norm(fe)),
                     max_error_after_convergence_m=30 + 5 * abs(z[1]) + 0.5 * e[7],
                     time_to_tolerance_s=1.5e5 + 1e4 * z[3] + 100 * e[4], reached_deadline=True,
                     min_distance_m=1500 + 100 * z[5], min_distance_any_m=1500 + 100 * z[5],
                     min_rn_separation_m=90 + 8 * z[6] + 0.5 * e[5], keep_out_violated=False,
                     rn_separation_violated=False, final_error_m=fe)
            metrics[d] = m
        bad = k in failed
        rows.append(RunRow(index=k, seed=1000 + k, status="failed" if bad else "ok",
                           reason="fixture failure" if bad else "", log=f"runs/run_{k:04d}.h5",
                           draw_index=k, params={"environment.density_error.bias": bias[k]},
                           metrics={} if bad else metrics))
    write_summary(folder / "summary.h5", rows, name=folder.name, kind="monte_carlo",
                  master_seed=master_seed, campaign_toml=f"# fixture {folder.name}\n")
    return folder


@pytest.fixture(scope="module")
def camps(tmp_path_factory):
    t = tmp_path_factory.mktemp("camps")
    return {
        "base": synthetic_campaign(t / "base", 7, 100),
        "rerun": synthetic_campaign(t / "rerun", 7, 101),  # same law, same draws, other noise
        "worse": synthetic_campaign(t / "worse", 7, 102, dv_factor=1.15),
        "other_seed": synthetic_campaign(t / "other_seed", 8, 103),
        "flaky": synthetic_campaign(t / "flaky", 7, 100, failed=(3, 40)),
    }


def test_pairing_needs_same_seed_and_dispersions(camps):
    base, worse, other = (load_source(camps[k]) for k in ("base", "worse", "other_seed"))
    assert pairing(base, worse)[0] and "same master seed 7" in pairing(base, worse)[1]
    ok, why = pairing(base, other)
    assert not ok and "master seeds differ (7, 8)" in why


def test_campaign_against_itself_and_a_rerun_shows_no_difference(camps):
    c = compare([camps["base"], camps["base"]])
    assert c.mode == "campaigns" and c.flagged() == []
    assert all(r["B_p"] == 1.0 for r in c.rows)  # identical runs: every paired difference is 0
    # the same draws with fresh run noise: nothing beyond the noise (26 tests at 0.001: the
    # family's false-call chance is about 2.6 %; the test size itself is checked in
    # test_gate_stats.py::test_false_alarm_rate_is_the_significance_level)
    assert compare([camps["base"], camps["rerun"]], significance=0.001).flagged() == []


def test_worse_law_flags_only_the_worse_metrics(camps):
    c = compare([camps["base"], camps["worse"]], significance=0.001)
    flagged = {(d, m): ch for d, m, ch in c.flagged()}
    assert set(flagged) == {(d, m) for d in DEPUTIES for m in ("dv_total_mps", "propellant_used_kg")}
    assert all(ch == "higher, worse" for ch in flagged.values())
    row = next(r for r in c.rows if r["deputy"] == "beta" and r["metric"] == "dv_total_mps")
    base = load_source(camps["base"]).values("beta", "dv_total_mps")
    worse = load_source(camps["worse"]).values("beta", "dv_total_mps")
    assert row["A_p50"] == pytest.approx(np.percentile(base, 50))  # numpy, method linear
    assert row["B_p95"] == pytest.approx(np.percentile(worse, 95))
    assert row["B_shift"] == pytest.approx(np.median(worse - base)) and row["B_test"] == "wilcoxon"
    assert any("paired: same master seed 7" in n for n in c.notes)


def test_unpaired_comparison(camps):
    # another master seed: Mann-Whitney U; the 15 % delta-v increase is still found, with the
    # larger spread of unpaired samples (fixture: delta-v spread about 10 % of its mean)
    c = compare([camps["other_seed"], camps["worse"]], metrics=["dv_total_mps", "err_dlambda_m"])
    assert any("unpaired: master seeds differ" in n and "Mann-Whitney U" in n for n in c.notes)
    assert {m for _, m, _ in c.flagged()} <= {"dv_total_mps"}
    assert all(r["B_test"] == "mannwhitney" for r in c.rows)
    ks = compare([camps["other_seed"], camps["worse"]], metrics=["dv_total_mps"], unpaired_test="ks")
    assert all(r["B_test"] == "ks" for r in ks.rows)


def test_compare_cli_formats_and_fail_on_worse(camps, capsys):
    a, b = str(camps["base"]), str(camps["worse"])
    assert main(["compare", a, b, "--format", "json", "--percentiles", "50,99"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["mode"] == "campaigns" and "A_p99" in doc["rows"][0]
    assert main(["compare", a, b, "--fail-on-worse"]) == 1
    out = capsys.readouterr().out
    assert "higher, worse" in out and "paired" in out
    assert main(["compare", a, a, "--fail-on-worse"]) == 0
    capsys.readouterr()
    assert main(["compare", a, b, "--metric", "dv_totl_mps"]) == 2
    assert "did you mean 'dv_total_mps'" in capsys.readouterr().err
    assert main(["compare", a]) == 2
    assert main(["compare", a, b, "--percentiles", "50,150"]) == 2


REQS = """
[gate]
name = "campaign"

[[requirement]]
id = "C-ACC-01"
text = "Final along-track error within 60 m for 95 % of the runs"
metric = "err_dlambda_m"
abs = true
max = 60.0
percentile = 95

[[requirement]]
id = "C-SAF-01"
text = "Radial/normal separation at least 60 m in every run"
metric = "min_rn_separation_m"
min = 60.0

[[requirement]]
id = "C-RUN-01"
text = "No run failed"
metric = "runs_failed"
max = 0

[[requirement]]
id = "C-RUN-02"
text = "Success rate at least 0.9 at 95 % confidence"
metric = "success_rate"
min = 0.9
success_requires = ["C-ACC-01"]

[[requirement]]
id = "C-REG-01"
text = "Delta-v no worse than the baseline by more than 5 %"
metric = "dv_total_mps"
kind = "regression"
tolerance_rel = 0.05

[[requirement]]
id = "C-REG-02"
text = "Along-track error no worse than the baseline by more than 2 m"
metric = "err_dlambda_m"
abs = true
kind = "regression"
tolerance = 2.0
"""


@pytest.fixture(scope="module")
def reqs(tmp_path_factory):
    p = tmp_path_factory.mktemp("reqs") / "campaign_requirements.toml"
    p.write_text(REQS)
    return p


def test_check_campaign_values(camps, reqs):
    v = check(camps["base"], reqs, camps["base"])
    rows = {r.id: r for r in v.rows}
    src = load_source(camps["base"])
    # C-ACC-01: the larger of the deputies' 95th percentiles of |a dlambda error| (numpy linear)
    want = max(np.percentile(np.abs(src.values(d, "err_dlambda_m")), 95) for d in DEPUTIES)
    assert rows["C-ACC-01"].measured == pytest.approx(want)
    assert rows["C-ACC-01"].verdict == ("pass" if want <= 60 else "fail")
    worst = min(np.min(src.values(d, "min_rn_separation_m")) for d in DEPUTIES)
    assert rows["C-SAF-01"].measured == pytest.approx(worst)
    # C-RUN-02: success = run ok and both deputies within C-ACC-01's limit in that run
    ok = np.ones(N, bool)
    for d in DEPUTIES:
        ok &= np.abs(src.values(d, "err_dlambda_m")) <= 60.0
    k = int(ok.sum())
    assert rows["C-RUN-02"].measured == pytest.approx(success_lower_bound(k, N, 0.95))
    assert f"({k}/{N}" in rows["C-RUN-02"].measured_text
    assert rows["C-REG-01"].verdict == "pass" and rows["C-REG-02"].verdict == "pass"
    assert rows["C-REG-01"].measured == 0.0  # the baseline against itself


def test_check_worse_campaign_fails_the_delta_v_regression_only(camps, reqs, tmp_path, capsys):
    v = check(camps["worse"], reqs, camps["base"])
    rows = {r.id: r for r in v.rows}
    assert rows["C-REG-01"].verdict == "fail" and "wilcoxon" in rows["C-REG-01"].detail
    assert rows["C-REG-02"].verdict == "pass"  # same draws, noise only
    assert rows["C-REG-01"].measured == pytest.approx(
        np.median(load_source(camps["worse"]).values(rows["C-REG-01"].deputy, "dv_total_mps")
                  - load_source(camps["base"]).values(rows["C-REG-01"].deputy, "dv_total_mps")))
    code = main(["check", str(camps["worse"]), "-r", str(reqs), "-b", str(camps["base"]),
                 "--junit", str(tmp_path / "c.xml")])
    assert code == 1
    root = ET.parse(tmp_path / "c.xml").getroot()
    failed = {c.get("name") for c in root.findall("testcase") if c.find("failure") is not None}
    assert "C-REG-01" in failed and "C-REG-02" not in failed
    assert len(root.findall("testcase")) == 6


def test_check_campaign_with_failed_runs(camps, reqs):
    v = check(camps["flaky"], reqs)
    rows = {r.id: r for r in v.rows}
    assert rows["C-RUN-01"].verdict == "fail" and rows["C-RUN-01"].measured == 2
    assert "2 failed, 58 ok" in rows["C-RUN-01"].detail
    # the failed runs have no metrics: unmeasured, counted as the worst
    assert rows["C-SAF-01"].verdict == "fail" and rows["C-SAF-01"].measured == -np.inf
    assert "2 unmeasured" in rows["C-SAF-01"].detail
    assert rows["C-REG-01"].verdict == "n/a"  # no baseline
    src = load_source(camps["flaky"])
    ok = np.array([s == "ok" for s in src.statuses])
    for d in DEPUTIES:
        ok &= np.abs(src.values(d, "err_dlambda_m")) <= 60.0
    assert rows["C-RUN-02"].measured == pytest.approx(success_lower_bound(int(ok.sum()), N, 0.95))


def test_percentile_requirement_on_a_run_against_a_campaign_baseline(camps, reqs, tmp_path):
    """A single run is a sample of one: a limit is its value; against a campaign baseline the
    regression test is Mann-Whitney U with one candidate value (n/a-free, unpaired)."""
    one = synthetic_campaign(tmp_path / "one", 9, 9, n=1)
    v = check(one, reqs, camps["base"])
    reg = {r.id: r for r in v.rows}["C-REG-01"]
    assert "mannwhitney" in reg.detail and reg.verdict == "pass"


def test_rejudge_campaign_run_logs(tmp_path, repo_root, fake_truth):
    """With judging overrides a campaign's own run logs are re-judged (here three fake-truth
    runs gathered into a summary by hand, standing in for a flown campaign)."""
    from sim.loop.run import run_scenario
    from sim.scenario.reader import load_scenario

    folder = tmp_path / "camp"
    rows = []
    for k in range(3):
        cfg = load_scenario(repo_root / "scenarios/demo_formation.toml",
                            {"run.duration_s": 5400.0, "run.seed": k, "guidance.law": "hybrid_single",
                             "deputies[0].deadline_s": 5400.0, "deputies[1].deadline_s": 5400.0})
        s = run_scenario(cfg, folder / "runs" / f"run_{k:04d}.h5")
        rows.append(RunRow(index=k, seed=k, status=s.status, log=f"runs/run_{k:04d}.h5",
                           params={"run.seed": float(k)},
                           metrics={m.name: m.as_dict() for m in s.metrics}))
    write_summary(folder / "summary.h5", rows, name="camp", kind="monte_carlo", master_seed=1,
                  campaign_toml="")
    as_run = load_source(folder)
    assert list(as_run.values("beta", "rn_separation_violated")) == [0.0, 0.0, 0.0]
    again = load_source(folder, {"events.min_rn_separation_m": 1e6})
    assert list(again.values("beta", "rn_separation_violated")) == [1.0, 1.0, 1.0]
    np.testing.assert_array_equal(again.values("beta", "dv_total_mps"),
                                  as_run.values("beta", "dv_total_mps"))


def test_limit_statistic_matches_numpy_on_a_campaign(camps):
    src = load_source(camps["base"])
    v = src.values("gamma", "dv_total_mps")
    assert limit_statistic(v, "max", "percentile", 95) == pytest.approx(np.percentile(v, 95))
    assert limit_statistic(v, "max", "percentile", 95, "higher") == np.percentile(v, 95,
                                                                                  method="higher")

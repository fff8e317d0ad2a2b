"""Campaigns flown against the real truth (Orekit in every worker process): the same run logs from
1 worker and from a Dask LocalCluster of 2; a campaign killed with SIGKILL (process group) after
its first run (2 workers) and again mid-run (1 worker), then resumed (2 workers), ends with the
same logs and summary as the uninterrupted 1-worker campaign; an error budget. (The fast
1-vs-2-workers-vs-Dask checks on the fake truth are in test_campaign_run.py.)

Short runs of the demo formation (0.1 day, cycle 5400 s, propulsion-only law, one truth thread).
The checks are covey's own contract (run logs equal apart from wall-clock fields,
sim.log.diff.diff_logs; a deterministic truth gives zero spread when every random source is off:
common practice, no source).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from sim.campaign.execute import log_state, run_campaign
from sim.campaign.plan import plan_campaign
from sim.campaign.report import build_report
from sim.campaign.spec import load_campaign
from sim.campaign.summary import read_summary
from sim.log.diff import diff_logs

pytestmark = [pytest.mark.orekit, pytest.mark.slow]

REPO = Path(__file__).resolve().parents[2]
SHORT = """
[campaign.set]
"run.duration_days" = 0.1
"deputies[0].deadline_days" = 0.1
"deputies[1].deadline_days" = 0.1
"guidance.law" = "propulsion_only"
"guidance.cycle_s" = 5400.0
"""


def write(path: Path, text: str) -> Path:
    path.write_text(textwrap.dedent(text))
    return path


@pytest.fixture(scope="module")
def mc(tmp_path_factory):
    """A 4-run Monte Carlo and its uninterrupted reference flown with 1 worker."""
    d = tmp_path_factory.mktemp("mc")
    f = write(d / "mc.toml", f"""
        [campaign]
        name = "mc"
        scenario = "{REPO / 'scenarios' / 'demo_formation.toml'}"
        runs = 4
        master_seed = 42
        {textwrap.dedent(SHORT)}
        [[dispersions]]
        key = "deputies[0].roe_m[1]"
        distribution = "normal"
        mean = 2000.0
        sigma = 20.0
        [[dispersions]]
        key = "environment.density_error.bias"
        distribution = "uniform"
        low = 0.0
        high = 0.2
        """)
    plan = plan_campaign(load_campaign(f))
    r = run_campaign(plan, d / "w1", workers=1)
    assert r.counts == {"ok": 4}, r.failed
    assert len({w["pid"] for w in r.worker_runs}) == 1  # one JVM flew the four runs
    import h5py

    with h5py.File(d / "w1" / plan.jobs[0].log, "r") as h:  # the worker's JVM options, as run
        assert "-XX:+UseSerialGC" in json.loads(h["meta"].attrs["jvm_options_json"])
    return f, plan, d / "w1"


def same(plan, a: Path, b: Path) -> None:
    for j in plan.jobs:
        assert log_state(b / j.log) is not None, j.log
        assert diff_logs(a / j.log, b / j.log) == [], j.log
    sa, sb = read_summary(a), read_summary(b)
    for k in sa.runs:
        assert np.array_equal(np.asarray(sa.runs[k]), np.asarray(sb.runs[k])), k
    for k in sa.params:
        assert np.array_equal(sa.params[k], sb.params[k], equal_nan=True), k
    for dep in sa.metrics:
        for k in sa.metrics[dep]:
            assert np.array_equal(sa.metrics[dep][k], sb.metrics[dep][k], equal_nan=True), (dep, k)


def test_dask_gives_the_same_logs_as_one_worker(mc):
    f, plan, ref = mc
    out = ref.parent
    r = run_campaign(plan, out / "dask", workers=2, scheduler="local")
    assert r.counts == {"ok": 4} and "Dask" in r.executor
    assert len({w["pid"] for w in r.worker_runs}) == 2
    same(plan, ref, out / "dask")
    log = read_summary(ref)
    assert np.all(np.isfinite(log.metric("beta", "dv_total_mps")))
    assert len(set(log.metric("beta", "err_dlambda_m").tolist())) == 4  # the draws differ


def _start(f: Path, out: Path, workers: int) -> subprocess.Popen:
    env = dict(os.environ, COVEY_TRUTH_THREADS="1", PYTHONPATH=str(REPO))
    return subprocess.Popen([sys.executable, "-m", "sim.cli", "campaign", str(f), "-o", str(out),
                             "--workers", str(workers), "-q"], cwd=REPO, env=env,
                            start_new_session=True, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)


def _wait_for(cond, proc, timeout_s=240.0):
    t0 = time.monotonic()
    while not cond():
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() - t0 < timeout_s, "timed out"
        time.sleep(0.05)


def _kill(proc) -> None:
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)
    time.sleep(0.5)  # the group's workers die with it


def _complete(runs: Path) -> list[str]:
    return sorted(p.name for p in runs.glob("*.h5") if log_state(p) is not None)


def _no_corrupt_file(out: Path) -> None:
    for p in (out / "runs").glob("*.h5"):
        assert log_state(p) is not None, f"{p} is under a final name but not a complete log"
    if (out / "summary.h5").exists():
        read_summary(out)


def test_sigkill_of_the_process_group_then_resume(mc):
    f, plan, ref = mc
    out = ref.parent / "killed"
    runs = out / "runs"
    # 1: killed right after its first run log appears
    p = _start(f, out, workers=2)
    _wait_for(lambda: len(_complete(runs)) >= 1 if runs.is_dir() else False, p)
    _kill(p)
    _no_corrupt_file(out)
    n1 = len(_complete(runs))
    assert 1 <= n1 <= 2
    # 2: resumed with one worker, killed while a run is being written
    p = _start(f, out, workers=1)
    _wait_for(lambda: len(_complete(runs)) > n1 and any(runs.glob("*.part")), p)
    _kill(p)
    _no_corrupt_file(out)
    assert any(runs.glob("*.part"))  # a run was cut mid-way
    n2 = len(_complete(runs))
    assert n1 < n2 < 4
    # 3: resumed to the end
    env = dict(os.environ, COVEY_TRUTH_THREADS="1", PYTHONPATH=str(REPO))
    done = subprocess.run([sys.executable, "-m", "sim.cli", "campaign", str(f), "-o", str(out),
                           "--workers", "2", "-q"], cwd=REPO, env=env, capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert f"{4 - n2} flown now" in done.stdout and "removed 1 partial run log" in done.stderr
    assert not list(runs.glob("*.part")) and len(_complete(runs)) == 4
    same(plan, ref, out)


def test_error_budget_zero_spread_when_off_and_a_contribution_where_on(tmp_path):
    f = write(tmp_path / "eb.toml", f"""
        [campaign]
        name = "eb"
        scenario = "{REPO / 'scenarios' / 'demo_formation.toml'}"
        runs = 2
        master_seed = 9
        {textwrap.dedent(SHORT)}
        [error_budget]
        sources = ["navigation", "thruster_magnitude", "density"]
        """)
    plan = plan_campaign(load_campaign(f))
    assert plan.cases == ("all_off", "navigation", "thruster_magnitude", "density", "all_on")
    r = run_campaign(plan, tmp_path / "out", workers=2)
    assert r.counts == {"ok": 10}, r.failed
    s = read_summary(tmp_path / "out")
    case = np.asarray(s.runs["case"], dtype=object)
    for dep in ("beta", "gamma"):
        fe = s.metrics[dep]["final_error_m"]
        dv = s.metrics[dep]["dv_total_mps"]
        off = case == "all_off"
        assert np.array_equal(fe[off][0], fe[off][1]) and dv[off][0] == dv[off][1]  # zero spread
        for c in plan.sources + ("all_on",):
            sel = case == c
            assert np.any(fe[sel][0] != fe[sel][1]), (dep, c)  # the source spreads the runs
            assert np.any(fe[sel] != fe[off]), (dep, c)  # and moves them from all_off
    rep = build_report(s)
    rows = {(r["deputy"], r["case"]): r for r in rep["budget"]}
    for dep in ("beta", "gamma"):
        assert all(rows[(dep, "all_off")][f"contribution_err_{c}_m"] == 0.0
                   for c in ("da", "dlambda", "dex", "dey", "dix", "diy"))
        assert rows[(dep, "all_off")]["std_err_dlambda_m"] == 0.0
        for c in plan.sources:
            assert rows[(dep, c)]["contribution_err_dlambda_m"] > 0.0, (dep, c)
        assert rows[(dep, "thruster_magnitude")]["contribution_dv_total_mps"] > 0.0
        rss = rows[(dep, "rss_of_sources")]["contribution_err_dlambda_m"]
        assert rss == pytest.approx(np.sqrt(sum(rows[(dep, c)]["contribution_err_dlambda_m"] ** 2
                                                for c in plan.sources)))

"""Flying campaigns: executors, resume, failed runs, dead workers, the summary rebuilt from the logs.

Fast tests fly the Keplerian stand-in of tests/conftest.py (FakeTruthWorld), also inside spawned
worker processes and Dask workers (the worker function below installs it there). The checks are
covey's own contract: run k's log is the same whatever the executor (sim.log.diff.diff_logs, apart
from wall-clock fields), a resumed campaign flies only what is missing (common practice, no
source).
"""

from __future__ import annotations

import contextlib
import os
import textwrap
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from sim.campaign.execute import log_state, run_campaign
from sim.campaign.plan import plan_campaign
from sim.campaign.spec import parse_campaign
from sim.campaign.summary import read_summary
from sim.cli.main import main
from sim.errors import EnvironmentSetupError
from sim.log.diff import diff_logs

REPO = Path(__file__).resolve().parents[2]


def campaign_text(runs=4, name="fk", extra=""):
    return textwrap.dedent(f"""
        [campaign]
        name = "{name}"
        scenario = "{REPO / 'scenarios' / 'demo_formation.toml'}"
        runs = {runs}
        master_seed = 3
        [campaign.set]
        "run.duration_s" = 5400.0
        "guidance.law" = "propulsion_only"
        "deputies[0].deadline_s" = 5400.0
        "deputies[1].deadline_s" = 5400.0
        [[dispersions]]
        key = "deputies[0].roe_m[1]"
        distribution = "normal"
        mean = 2000.0
        sigma = 30.0
        [summary]
        tolerance_m = 4050.0
        """) + textwrap.dedent(extra)


def plan_of(text, tmp_path, name="c.toml"):
    f = tmp_path / name
    f.write_text(text)
    c = parse_campaign(text, str(f))
    return plan_campaign(c)


# -- the fake truth in worker processes ---------------------------------------------------------


@contextlib.contextmanager
def _fake_truth():
    """sim.loop.run flies FakeTruthWorld inside the block (restored after, so a run flown in
    the test process leaves nothing behind)."""
    import sim.loop.run
    from guidance.roe import oe_to_roe, rv_to_oe

    from conftest import FakeTruthWorld

    info = SimpleNamespace(data_path="/fake", data_source="fake", orekit_version="fake",
                           java_version="fake", jpype_version="fake", data_files=())
    api = SimpleNamespace(boot=lambda data_path=None, jvm_options=None: info, TruthWorld=FakeTruthWorld,
                          mean_elements=lambda t, r, v, epoch: rv_to_oe(r, v),
                          mean_roe_m=lambda c, d: oe_to_roe(c, d) * np.asarray(c)[..., :1])
    old = sim.loop.run.truth_backend
    sim.loop.run.truth_backend = lambda: api
    try:
        yield FakeTruthWorld
    finally:
        sim.loop.run.truth_backend = old
        FakeTruthWorld.fail_at_s = None


def fake_fly(task):
    """sim.campaign.worker.fly_job on the fake truth (importable by spawned workers)."""
    from sim.campaign.worker import fly_job

    with _fake_truth():
        return fly_job(task)


def dying_fly(task):
    """Kills its worker process on run 1 (as a crash of the JVM would), flies the others."""
    if task.job.index == 1:
        os._exit(3)
    return fake_fly(task)


def failing_fly(task):
    """Run 2 fails inside the truth propagation (its log is written with status failed)."""
    from sim.campaign.worker import fly_job

    with _fake_truth() as world:
        world.fail_at_s = 1800.0 if task.job.index == 2 else None
        return fly_job(task)


def same_summary(a, b):
    sa, sb = read_summary(a), read_summary(b)
    assert sa.n_runs == sb.n_runs
    for k in sa.runs:
        assert np.array_equal(np.asarray(sa.runs[k]), np.asarray(sb.runs[k])), k
    assert sa.params.keys() == sb.params.keys()
    for k in sa.params:
        assert np.array_equal(sa.params[k], sb.params[k], equal_nan=True), k
    assert sa.metrics.keys() == sb.metrics.keys()
    for d in sa.metrics:
        for k in sa.metrics[d]:
            assert np.array_equal(sa.metrics[d][k], sb.metrics[d][k], equal_nan=True), (d, k)
    skip = {"created_utc"}
    assert {k: str(v) for k, v in sa.attrs.items() if k not in skip} == \
           {k: str(v) for k, v in sb.attrs.items() if k not in skip}


def same_logs(plan, a, b):
    for j in plan.jobs:
        assert diff_logs(Path(a) / j.log, Path(b) / j.log) == [], j.log


# ------------------------------------------------------------------------------------------


def test_inline_campaign_resumes_only_what_is_missing(tmp_path):
    plan = plan_of(campaign_text(), tmp_path)
    out = tmp_path / "out"
    states = []
    r = run_campaign(plan, out, workers=0, fly=fake_fly, progress=states.append)
    assert r.flown == 4 and r.skipped == 0 and r.counts == {"ok": 4} and r.exit_code == 0
    assert states[0]["done"] == 0 and states[-1]["done"] == 4 and states[-1].get("final")
    s = read_summary(out)
    assert s.runs["status"] == ["ok"] * 4 and list(s.runs["index"]) == [0, 1, 2, 3]
    assert list(s.runs["seed"]) == [j.seed for j in plan.jobs]
    np.testing.assert_array_equal(s.params["deputies[0].roe_m[1]"],
                                  [dict(j.params)["deputies[0].roe_m[1]"] for j in plan.jobs])
    # the final along-track error follows the dispersed initial along-track offset (the fake
    # truth drifts nothing in 1.5 h and the fake world executes no burns)
    np.testing.assert_allclose(s.metric("beta", "err_dlambda_m"),
                               s.params["deputies[0].roe_m[1]"] - 6000.0, atol=1e-3)
    ref = tmp_path / "ref"
    ref.mkdir()
    (ref / "summary.h5").write_bytes((out / "summary.h5").read_bytes())
    # again: nothing to fly
    r = run_campaign(plan, out, workers=0, fly=fake_fly)
    assert r.flown == 0 and r.skipped == 4
    # a missing log, a leftover of a killed run and a damaged log are flown again
    runs = out / "runs"
    (runs / "fk_0001.h5").unlink()
    (runs / "fk_0001.h5.part").write_bytes(b"half a file")
    (runs / "fk_0002.h5.1234.part").write_bytes(b"other temp name")
    (runs / "fk_0003.h5").write_bytes(b"damaged")
    assert log_state(runs / "fk_0003.h5") is None
    r = run_campaign(plan, out, workers=0, fly=fake_fly)
    assert r.flown == 2 and r.skipped == 2 and r.counts == {"ok": 4}
    assert sorted(p.name for p in runs.iterdir()) == [f"fk_000{k}.h5" for k in range(4)]
    same_summary(out, ref)


def test_changed_campaign_is_refused_unless_fresh(tmp_path, capsys):
    plan = plan_of(campaign_text(runs=2), tmp_path)
    out = tmp_path / "out"
    run_campaign(plan, out, workers=0, fly=fake_fly)
    changed = plan_of(campaign_text(runs=2).replace("sigma = 30.0", "sigma = 40.0"), tmp_path)
    with pytest.raises(EnvironmentSetupError) as ei:
        run_campaign(changed, out, workers=0, fly=fake_fly)
    msg = str(ei.value)
    assert "different campaign" in msg and "-sigma = 30.0" in msg and "+sigma = 40.0" in msg
    assert "--fresh" in msg
    r = run_campaign(changed, out, workers=0, fly=fake_fly, fresh=True)
    assert r.flown == 2 and (out / "campaign.toml").read_text() == changed.campaign.text
    # the CLI says the same in one line, exit 2
    f = tmp_path / "c.toml"
    f.write_text(campaign_text(runs=2))
    assert main(["campaign", str(f), "-o", str(out), "--workers", "0", "-q"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "different campaign" in err


def test_a_failed_run_is_counted_and_the_campaign_goes_on(tmp_path):
    plan = plan_of(campaign_text(), tmp_path)
    r = run_campaign(plan, tmp_path / "out", workers=0, fly=failing_fly)
    assert r.counts == {"ok": 3, "failed": 1} and r.exit_code == 1
    (idx, reason, log), = r.failed
    assert idx == 2 and "PropagationError" in reason and log == "runs/fk_0002.h5"
    s = read_summary(tmp_path / "out")
    assert s.runs["status"][2] == "failed" and "fake failure" in s.runs["reason"][2]
    assert np.isnan(s.metric("beta", "dv_total_mps")[2])
    # a failed run's log is complete: resuming does not fly it again
    assert run_campaign(plan, tmp_path / "out", workers=0, fly=fake_fly).flown == 0


def test_one_and_two_local_workers_give_the_same_logs(tmp_path):
    plan = plan_of(campaign_text(), tmp_path)
    r1 = run_campaign(plan, tmp_path / "w1", workers=1, fly=fake_fly)
    r2 = run_campaign(plan, tmp_path / "w2", workers=2, fly=fake_fly)
    assert r1.counts == r2.counts == {"ok": 4}
    assert len({w["pid"] for w in r1.worker_runs}) == 1  # one process flew all four
    assert len({w["pid"] for w in r2.worker_runs}) == 2
    assert all(w["pid"] != os.getpid() for w in r2.worker_runs)
    same_logs(plan, tmp_path / "w1", tmp_path / "w2")
    same_summary(tmp_path / "w1", tmp_path / "w2")


def test_a_dead_worker_is_replaced_and_its_run_counted_failed(tmp_path):
    plan = plan_of(campaign_text(), tmp_path)
    out = tmp_path / "out"
    r = run_campaign(plan, out, workers=2, fly=dying_fly)
    assert r.replaced_workers == 1 and r.counts == {"ok": 3, "failed": 1}
    (idx, reason, log), = r.failed
    assert idx == 1 and "worker process died" in reason and "exit code 3" in reason and log == ""
    s = read_summary(out)
    assert s.runs["status"][1] == "failed" and "worker process died" in s.runs["reason"][1]
    assert not list((out / "runs").glob("*.part"))
    r = run_campaign(plan, out, workers=0, fly=fake_fly)  # resumed: only the lost run
    assert r.flown == 1 and r.counts == {"ok": 4}


def test_dask_local_cluster_gives_the_same_logs(tmp_path):
    pytest.importorskip("distributed")
    plan = plan_of(campaign_text(), tmp_path)
    run_campaign(plan, tmp_path / "ref", workers=0, fly=fake_fly)
    r = run_campaign(plan, tmp_path / "dask", workers=2, scheduler="local", fly=fake_fly)
    assert r.counts == {"ok": 4} and "Dask" in r.executor
    assert len({w["pid"] for w in r.worker_runs}) == 2
    same_logs(plan, tmp_path / "ref", tmp_path / "dask")
    same_summary(tmp_path / "ref", tmp_path / "dask")


def test_a_running_dask_scheduler_by_address_gives_the_same_logs(tmp_path):
    """--scheduler ADDRESS: covey connects a Client to a scheduler it did not start (here one
    started beside the test, reached by its tcp:// address as a remote one would be)."""
    distributed = pytest.importorskip("distributed")
    import logging

    plan = plan_of(campaign_text(), tmp_path)
    run_campaign(plan, tmp_path / "ref", workers=0, fly=fake_fly)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None, silence_logs=logging.ERROR) as cluster:
        address = cluster.scheduler_address
        assert address.startswith("tcp://")
        r = run_campaign(plan, tmp_path / "remote", scheduler=address, fly=fake_fly)
        assert cluster.scheduler_address == address  # covey left the cluster running
    assert r.counts == {"ok": 4} and address in r.executor and "2 worker threads" in r.executor
    assert len({w["pid"] for w in r.worker_runs}) == 2
    same_logs(plan, tmp_path / "ref", tmp_path / "remote")
    same_summary(tmp_path / "ref", tmp_path / "remote")


def test_cli_campaign_and_summary(tmp_path, fake_truth, capsys):
    import json

    f = tmp_path / "c.toml"
    f.write_text(campaign_text(runs=3))
    out = tmp_path / "out"
    assert main(["campaign", str(f), "-o", str(out), "--workers", "0"]) == 0
    cap = capsys.readouterr()
    assert "campaign fk: monte_carlo, 3 runs (0 complete already)" in cap.out
    assert "done: 3 runs (3 ok, 0 failed)" in cap.out and str(out / "summary.h5") in cap.out
    assert "3/3 runs done" in cap.err  # plain progress lines (stderr is not a terminal)
    assert main(["summary", str(out)]) == 0
    text = capsys.readouterr().out
    assert "beta, all runs:" in text and "p95" in text and "per-axis bounds" in text
    assert main(["summary", str(out), "--format", "json", "--tolerance-m", "1"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["campaign"]["tolerance_m"] == [1.0] * 6
    assert {r["successes"] for r in rep["success"]} == {0}
    assert main(["summary", str(out), "--format", "csv"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "section,group,deputy,quantity,statistic,value"
    assert any(ln.startswith("success,all runs,beta,success,rate,") for ln in lines)
    assert main(["summary", str(out), "--format", "markdown"]) == 0
    assert "| quantity | units | n |" in capsys.readouterr().out
    assert main(["summary", str(tmp_path)]) == 2  # no summary.h5 there
    assert main(["campaign", str(f), "--workers", "-1"]) == 2
    assert main(["summary", str(out), "--tolerance-m", "1,2"]) == 2
    capsys.readouterr()


def test_progress_on_a_terminal_and_in_a_log():
    import io

    from sim.cli.campaign import CampaignProgress

    class Tty(io.StringIO):
        def isatty(self):
            return True

    st = dict(total=8, done=3, failed=1, running=2, skipped=1, eta_s=75.0,
              last=dict(index=2, status="failed", reason="boom", log=""))
    t = Tty()
    bar = CampaignProgress(t)
    bar(st)
    bar(dict(st, done=8, running=0, eta_s=0.0, final=True))
    out = t.getvalue()
    assert out.startswith("\r[#########") and "3/8 runs done (1 already), 1 failed, 2 running, ETA 1m15s" in out
    assert out.endswith("\n") and "8/8 runs done" in out
    plain = io.StringIO()
    bar = CampaignProgress(plain, interval_s=3600.0)
    bar(st)
    bar(dict(st, done=4))  # within the interval: no line
    bar(dict(st, done=8, running=0, eta_s=0.0, final=True))
    lines = plain.getvalue().splitlines()
    assert lines == ["run 2 failed: boom", "3/8 runs done (1 already), 1 failed, 2 running, ETA 1m15s",
                     "8/8 runs done (1 already), 1 failed, 0 running, ETA 0s"]

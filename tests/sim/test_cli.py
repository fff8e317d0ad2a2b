"""The covey command: help, exit codes (0 ok, 1 run failed, 2 bad input), one-line errors, default
output location, and (with the JVM) end-to-end runs whose logs are checked.

The end-to-end checks compare the logged mean ROE at t = 0 with the scenario's initial mean ROE
(the issue's acceptance check: within 1 m; Orekit's Eckstein-Hechler mean theory both ways), and
the logged sample grid with the scenario's log_step_s; the rest is covey's own contract (common
practice, no source).
"""

from __future__ import annotations

import io

import numpy as np
import pytest

import sim.cli.demo
import sim.cli.main
import sim.scenario.reader
from sim.cli.common import Progress as _Progress
from sim.cli.main import main
from sim.log.reader import read_log


@pytest.mark.parametrize("argv", [["--help"], ["-h"], ["run", "-h"], ["validate", "--help"],
                                  ["demo", "-h"]])
def test_help(argv, capsys):
    assert main(argv) == 0
    out = capsys.readouterr().out
    assert out.startswith("usage: covey")


def test_usage_errors_exit_2(capsys, repo_root):
    assert main([]) == 2
    assert main(["fly"]) == 2
    assert main(["run"]) == 2
    assert main(["validate", str(repo_root / "scenarios/demo_drift.toml"), "--set", "novalue"]) == 2
    assert "expected KEY=VALUE" in capsys.readouterr().err


def test_run_with_fake_truth(tmp_path, repo_root, fake_truth, capsys):
    out = tmp_path / "a" / "run.h5"
    code = main(["run", str(repo_root / "scenarios/ideal_pair.toml"), "-o", str(out),
                 "--set", "run.duration_s=3600"])
    cap = capsys.readouterr()
    assert code == 0, cap.err
    lines = cap.out.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("ok: ideal_pair") and str(out) in lines[0]
    log = read_log(out)
    assert log.status == "ok" and len(log.spacecraft.alpha.truth.t_s) == 3600 // 30 + 1
    assert log.meta["overrides_json"] == '{"run.duration_s": 3600}'


def test_demo_default_output_in_results(tmp_path, monkeypatch, fake_truth, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "--set", "run.duration_s=5400", "--law", "hybrid_single"]) == 0
    out = capsys.readouterr().out
    log_path = tmp_path / "results" / "demo_formation_hybrid_single.h5"
    assert log_path.exists() and str(log_path.relative_to(tmp_path)) in out
    assert "hybrid_single" in out and "a dlambda err [m]" in out  # the comparison table
    assert read_log(log_path).spacecraft_names == ["alpha", "beta", "gamma"]
    (tmp_path / "logs").mkdir()
    assert main(["demo", "-o", "logs", "--set", "run.duration_s=600", "--law", "propulsion_only"]) == 0
    assert (tmp_path / "logs" / "demo_formation_propulsion_only.h5").exists()


def test_failed_run_exit_1_one_line(tmp_path, repo_root, fake_truth, capsys):
    fake_truth.fail_at_s = 600.0
    code = main(["run", str(repo_root / "scenarios/ideal_pair.toml"), "-o", str(tmp_path / "f.h5")])
    err = capsys.readouterr().err
    assert code == 1 and "Traceback" not in err
    assert err.strip().splitlines() == ["covey: truth propagation of 'alpha' failed at t = 600.0 s: "
                                        "fake failure"]
    assert read_log(tmp_path / "f.h5").status == "failed"


def test_unexpected_error_one_line_and_debug(tmp_path, repo_root, fake_truth, capsys, monkeypatch):
    def broken(self, t_s):
        raise ZeroDivisionError("division by zero in a fake")

    monkeypatch.setattr(fake_truth, "advance_to", broken)
    argv = ["run", str(repo_root / "scenarios/ideal_pair.toml"), "-o", str(tmp_path / "u.h5")]
    assert main(argv) == 1
    err = capsys.readouterr().err
    assert "Traceback" not in err and "COVEY_DEBUG=1" in err and "ZeroDivisionError" in err
    assert len(err.strip().splitlines()) == 1
    monkeypatch.setenv("COVEY_DEBUG", "1")
    assert main(argv) == 1
    assert "Traceback" in capsys.readouterr().err

    def boom(*a, **k):
        raise RuntimeError("unexpected")

    monkeypatch.delenv("COVEY_DEBUG")
    monkeypatch.setattr("sim.scenario.reader.load_scenario", boom)
    assert main(argv) == 1
    err = capsys.readouterr().err
    assert "unexpected error: RuntimeError" in err and "Traceback" not in err


def test_bad_orekit_data_and_unwritable_output_exit_2(tmp_path, repo_root, fake_truth, capsys,
                                                      monkeypatch):
    sc = str(repo_root / "scenarios/ideal_pair.toml")
    assert main(["run", sc, "--orekit-data", str(tmp_path / "none")]) == 2
    assert "not found" in capsys.readouterr().err
    monkeypatch.setenv("COVEY_OREKIT_DATA", str(tmp_path / "none"))
    assert main(["validate", sc]) == 2
    monkeypatch.delenv("COVEY_OREKIT_DATA")
    blocker = tmp_path / "file"
    blocker.write_text("x")
    assert main(["run", sc, "-o", str(blocker / "sub" / "x.h5")]) == 2
    assert "cannot write the run log" in capsys.readouterr().err


def test_progress_bar_text():
    buf = io.StringIO()
    p = _Progress(stream=buf, width=10)
    p.start()
    p(0.0, 86400.0)
    p(43200.0, 86400.0)
    p(86400.0, 86400.0)
    p.done()
    text = buf.getvalue()
    assert "[#####.....]  50.0 %" in text and "[##########] 100.0 %" in text
    assert text.endswith("\n")


# ------------------------------------------------------------------------------------------
# End to end with the real truth world (JVM)
# ------------------------------------------------------------------------------------------


@pytest.mark.orekit
def test_covey_demo_short_end_to_end(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    code = main(["demo", "--set", "run.duration_days=0.2", "--law", "hybrid_resolve"])
    cap = capsys.readouterr()
    assert code == 0, cap.err
    path = tmp_path / "results" / "demo_formation_hybrid_resolve.h5"
    assert str(path.relative_to(tmp_path)) in cap.out and path.exists()
    log = read_log(path)
    assert log.status == "ok" and log.meta["orekit_version"] not in ("", "unknown")
    assert log.meta["java_version"] and len(log.get("meta/data_files/path")) > 0
    cfg = sim.scenario.reader.load_scenario(sim.cli.demo.demo_scenario_path())
    for sc in cfg.spacecraft:
        tr = log[f"spacecraft/{sc.name}/truth"]
        t = tr.t_s
        assert np.allclose(np.diff(t), cfg.log_step_s) and t[0] == 0.0
        assert t[-1] == pytest.approx(0.2 * 86400.0)
        assert tr.r_eci_m.shape == (len(t), 3) and tr.v_eci_mps.shape == (len(t), 3)
        r = np.linalg.norm(tr.r_eci_m, axis=1)
        assert np.all((r > 6.7e6) & (r < 7.0e6))
        assert np.all(tr.density_kgpm3 > 0) and np.all(tr.drag_area_m2 > 0)
        modes = log.attrs(f"spacecraft/{sc.name}/truth/mode_index")["mode_names"]
        if sc.name == cfg.chief.name:  # deputies may be commanded to switch at t = 0
            assert modes[int(tr.mode_index[0])] == sc.initial_mode
        a = log.get(f"spacecraft/{sc.name}/mean_oe/a_m")
        assert abs(a[0] - cfg.chief.orbit.a_m) < 50.0 + (abs(sc.roe_m[0]) if sc.roe_m else 0)
        if sc.roe_m is not None:
            roe = log.get(f"spacecraft/{sc.name}/mean_roe_m")
            # initial mean ROE read back within 1 m (the scenario contract: orbits are mean elements)
            assert np.all(np.abs(roe[0] - np.array(sc.roe_m)) < 1.0), roe[0]


@pytest.mark.orekit
def test_covey_run_ideal_pair_short(tmp_path, repo_root, capsys):
    out = tmp_path / "pair.h5"
    code = main(["run", str(repo_root / "scenarios/ideal_pair.toml"), "-o", str(out),
                 "--set", "run.duration_days=0.1"])
    cap = capsys.readouterr()
    assert code == 0, cap.err
    assert cap.out.startswith("ok: ideal_pair") and len(cap.out.strip().splitlines()) == 1
    log = read_log(out)
    assert log.get("spacecraft/beta/mean_roe_m").shape == (len(log.spacecraft.beta.truth.t_s), 6)
    # max-drag beta carries a larger area than min-drag alpha (ideal_pair.toml table)
    assert np.all(log.spacecraft.beta.truth.drag_area_m2 > log.spacecraft.alpha.truth.drag_area_m2)


@pytest.mark.orekit
def test_every_scenario_file_flies(tmp_path, scenario_paths, capsys):
    """Each example flies a short stretch (one partial guidance cycle) with the real truth."""
    for p in scenario_paths:
        out = tmp_path / f"{p.stem}.h5"
        code = main(["run", str(p), "-o", str(out), "--set", "run.duration_days=0.02", "-q"])
        cap = capsys.readouterr()
        assert code == 0, (p, cap.err)
        log = read_log(out)
        cfg = sim.scenario.reader.load_scenario(p)
        assert log.status == "ok" and log.spacecraft_names == [sc.name for sc in cfg.spacecraft]
        t = log.get(f"spacecraft/{cfg.chief.name}/truth/t_s")
        T = 0.02 * 86400.0
        assert t[-1] == pytest.approx(np.floor(T / cfg.log_step_s + 1e-9) * cfg.log_step_s)
        assert np.allclose(np.diff(t), cfg.log_step_s)
        for d in cfg.deputies:
            roe = log.get(f"spacecraft/{d.name}/mean_roe_m")
            assert np.all(np.isfinite(roe))
            if d.roe_m is not None:
                assert np.all(np.abs(roe[0] - np.array(d.roe_m)) < 1.0), (p, d.name, roe[0])


def test_guidance_input_error_during_run_is_bad_input(tmp_path, repo_root, fake_truth, capsys,
                                                      monkeypatch):
    from guidance.interface import GuidanceInputError

    def refuse(self, t_s):
        raise GuidanceInputError("guidance.settings.tolerance_m", -1.0, "a number > 0 (m)")

    monkeypatch.setattr(fake_truth, "advance_to", refuse)
    code = main(["run", str(repo_root / "scenarios/ideal_pair.toml"), "-o", str(tmp_path / "g.h5")])
    err = capsys.readouterr().err
    assert code == 2 and err.strip().splitlines() == [
        "covey: guidance.settings.tolerance_m = -1.0: a number > 0 (m)"]
    assert read_log(tmp_path / "g.h5").status == "failed"


def test_a_user_law_that_fails_to_import_keeps_its_traceback_under_debug(tmp_path, repo_root, monkeypatch, capsys):
    # covey's own contract (common practice, no source): one line without COVEY_DEBUG, the
    # law module's own traceback with it
    (tmp_path / "broken_law_mod.py").write_text("import numpy\nraise RuntimeError('law module broke here')\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    args = ["validate", str(repo_root / "scenarios" / "demo_formation.toml"),
            "--set", "guidance.law=broken_law_mod:Law"]
    monkeypatch.delenv("COVEY_DEBUG", raising=False)
    assert sim.cli.main.main(args) == 2
    err = capsys.readouterr().err
    assert "law module broke here" in err and "Traceback" not in err
    monkeypatch.setenv("COVEY_DEBUG", "1")
    assert sim.cli.main.main(args) == 2
    err = capsys.readouterr().err
    assert "Traceback" in err and "broken_law_mod.py" in err

"""What covey prints tells the truth: guidance failures and missed targets are visible (summary
line, table, log fields, ``--strict``), the metrics table matches the log's own datasets,
``covey validate`` says what will fly and warns about what cannot, ``covey demo -o DIR`` keeps
one log per law, and a closed stdout does not turn a run into a failure.

Sources: the target verdict, the table and the exit codes are covey's own contract (common
practice, no source). The initial along-track separation of a deputy with mean ROE
(0, a dlambda, 0, 0, 0, 0) on a circular chief orbit is a dlambda to first order (linear mapping
of quasi-nonsingular ROE to RTN position, "Autonomous Formation Flying in Low Earth Orbit",
PhD thesis, TU Delft, 2010, eq. for delta r_T [memory]). Differential drag acts in the orbit plane and cannot change the relative inclination
(common practice, no source). A write to a pipe whose reader has closed fails with EPIPE (POSIX
write(2)); Python ignores SIGPIPE and raises BrokenPipeError (Python docs, signal module notes).
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import h5py
import numpy as np
import pytest

from sim.cli.main import main
from sim.judge.metrics import (ROE_LABELS, cycle_outcomes, cycles_text, index_ranges,
                               target_verdict)
from sim.log.reader import read_log
from sim.scenario.feasibility import feasibility_warnings
from sim.scenario.reader import parse_scenario

# A deputy without a thruster whose drag modes have the same area, asked for a 150 m e/i change:
# nothing can make it (the case of the issue).
NO_THRUSTER = textwrap.dedent("""
    [run]
    name = "no_thruster"
    epoch_utc = 2025-01-20T00:00:00Z
    duration_days = 0.125
    log_step_s = 60.0

    [environment]
    preset = "ideal"

    [bus.plain]
    mass_kg = 10.0
    [bus.plain.geometry]
    kind = "table"
    [bus.plain.geometry.area_by_mode_m2]
    max_drag = 0.03
    min_drag = 0.03
    nominal = 0.03
    [bus.plain.modes.max_drag]
    [bus.plain.modes.min_drag]
    [bus.plain.modes.nominal]

    [chief]
    name = "c0"
    bus = "plain"
    [chief.orbit]
    altitude_km = 500.0
    sun_synchronous = true

    [[deputies]]
    name = "d1"
    bus = "plain"
    roe_m = [0.0, 500.0, 0.0, 100.0, 0.0, 100.0]
    target_roe_m = [0.0, 500.0, 0.0, 250.0, 0.0, 250.0]
    deadline_days = 0.125

    [guidance]
    law = "hybrid_resolve"
    cycle_s = 1800.0
""")


def _no_thruster(tmp_path, text=NO_THRUSTER):
    p = tmp_path / "no_thruster.toml"
    p.write_text(text)
    return p


def _text(a):
    return [x.decode() if isinstance(x, bytes) else str(x) for x in a]


# ------------------------------------------------------------------------------------------
# The verdict and the counts
# ------------------------------------------------------------------------------------------


def test_target_verdict_names_what_failed():
    tol = [5.0, 50.0, 5.0, 5.0, 5.0, 5.0]
    assert target_verdict([4.9, -49.0, 0, 0, 0, -5.0], tol, True) == (True, "yes")
    met, txt = target_verdict([0, -60.0, 0, 30.0, 0, 0], tol, True)
    # worst (error / half-width) first: a dey 30/5 = 6 before a dlambda 60/50 = 1.2
    assert not met and txt == ("no: a dey +30.0 m outside +-5 m, "
                               "a dlambda -60.0 m outside +-50 m")
    met, txt = target_verdict([0.0] * 6, tol, False, 0.05 * 86400, 2.75 * 86400)
    assert not met and "before the deadline" in txt and "0.05 d" in txt and "2.75 d" in txt
    assert target_verdict([np.nan] * 6, tol, True) == (False, "no: no truth samples to judge")


def test_time_to_box_counts_up_to_the_deadline():
    """Inside the box from sample 5 through the deadline (sample 8), out again after it: the
    target is met and 't to box' is t[5], not 'never' (a deputy may drift after its deadline)."""
    from sim.judge.metrics import deputy_metrics

    t = np.arange(11) * 600.0
    roe = np.zeros((11, 6))
    roe[:5, 1] = 100.0  # a dlambda error 100 m before sample 5
    roe[9:, 1] = 30.0  # and 30 m after the deadline
    tol = np.full(6, 10.0)
    w = 2 * np.pi / 5400.0
    rc = np.c_[7e6 * np.cos(w * t), 7e6 * np.sin(w * t), np.zeros(11)]
    vc = np.c_[-7e6 * w * np.sin(w * t), 7e6 * w * np.cos(w * t), np.zeros(11)]
    m = deputy_metrics("d1", t, roe, np.zeros(6), 4800.0, tol, np.zeros((0, 3)), 0.0, 0,
                       np.zeros(11, int), ["nominal"], rc, vc, rc + [0.0, 0.0, 100.0])
    assert m.target_met and m.t_final_s == 4800.0 and m.time_to_tolerance_s == 3000.0
    assert m.max_error_after_convergence_m == 0.0


def test_cycle_counts_text():
    c = cycle_outcomes(["ok"] * 2 + ["hold"] * 9 + ["infeasible"] * 23)
    assert c["infeasible"] == 23 and c["hold"] == 9 and sum(c.values()) == 34
    assert cycles_text(c) == "23 infeasible, 9 hold / 34"
    assert cycles_text(cycle_outcomes(["ok"] * 4)) == "4/4 ok"
    assert cycles_text({}) == "none"
    assert cycles_text(c, "cycles") == "23 infeasible, 9 hold / 34 cycles"
    assert cycles_text(cycle_outcomes(["ok"] * 4), "cycles") == "4/4 cycles ok"
    assert index_ranges([8, 0, 1, 2, 5, 7]) == "0-2, 5, 7-8"


# ------------------------------------------------------------------------------------------
# covey validate
# ------------------------------------------------------------------------------------------


def test_validate_warns_when_no_actuator_can_make_the_change(tmp_path, capsys):
    p = _no_thruster(tmp_path)
    assert main(["validate", str(p)]) == 0  # warnings do not fail validation
    out = capsys.readouterr().out
    assert out.startswith(f"ok: {p} is a valid scenario (1 warning below)")
    warn = [ln for ln in out.splitlines() if ln.startswith("warning: ")]
    assert len(warn) == 1
    assert ("deputy 'd1'" in warn[0] and "a dey by +150.0 m" in warn[0]
            and "a diy by +150.0 m" in warn[0] and "no thruster" in warn[0]
            and "no drag authority" in warn[0])
    # one line each for what flies ideal by default, and the deputy's target and deadline
    for fragment in ("navigation: perfect", "actuators: perfect", "truth density error: none",
                     "events: altitude floor 150 km (stops the run), keep-out off",
                     "metrics: tolerance box +-10 m", "thruster: none",
                     "target roe_m [0.0, 500.0, 0.0, 250.0, 0.0, 250.0], deadline 0.125 days"):
        assert fragment in out, fragment


def test_feasibility_warnings_out_of_plane_keep_out_and_deadline():
    base = NO_THRUSTER.replace("min_drag = 0.03", "min_drag = 0.01")  # drag authority now
    cfg = parse_scenario(base, "x.toml")
    w = feasibility_warnings(cfg)
    # in-plane e change is possible with drag; the out-of-plane diy change is not
    assert len(w) == 1 and "a diy by +150.0 m out of plane" in w[0] and "a dey" not in w[0]
    # the same change with a thruster: nothing to warn about
    thr = base.replace("[bus.plain.modes.max_drag]",
                       "[bus.plain.thruster]\n[bus.plain.modes.max_drag]")
    assert feasibility_warnings(parse_scenario(thr, "x.toml")) == []
    # a thruster without propellant counts as none
    dry = thr.replace("[bus.plain.thruster]", "[bus.plain.thruster]\npropellant_kg = 0.0")
    w = feasibility_warnings(parse_scenario(dry, "x.toml"))
    assert len(w) == 1 and "without propellant" in w[0]
    # a deadline after the end of the run
    late = thr.replace("deadline_days = 0.125", "deadline_days = 0.5")
    w = feasibility_warnings(parse_scenario(late, "x.toml"))
    assert len(w) == 1 and "deadline 0.5 days is after the end of the run (0.125 days)" in w[0]
    # a deputy 30 m along-track of the chief (pure a dlambda) inside a 50 m keep-out radius
    close = thr.replace("roe_m = [0.0, 500.0, 0.0, 100.0, 0.0, 100.0]",
                        "roe_m = [0.0, 30.0, 0.0, 0.0, 0.0, 0.0]").replace(
        "[guidance]", "[events]\nkeep_out_radius_m = 50.0\n[guidance]")
    w = feasibility_warnings(parse_scenario(close, "x.toml"))
    ko = [x for x in w if "keep_out_radius_m" in x]
    assert len(ko) == 1 and "'c0' and 'd1' start 30.0 m apart" in ko[0]
    far = close.replace("keep_out_radius_m = 50.0", "keep_out_radius_m = 20.0")
    assert not [x for x in feasibility_warnings(parse_scenario(far, "x.toml"))
                if "keep_out_radius_m" in x]


def test_initial_separation_along_track():
    """A pure along-track offset a dlambda = 30 m on a circular chief is 30 m apart (linear ROE
    mapping, the thesis cited above [memory]; second-order terms are ~ (30 m)^2 / a, far below 0.1 m)."""
    from sim.scenario.feasibility import initial_positions_eci_m

    txt = NO_THRUSTER.replace("roe_m = [0.0, 500.0, 0.0, 100.0, 0.0, 100.0]",
                              "roe_m = [0.0, 30.0, 0.0, 0.0, 0.0, 0.0]")
    r = initial_positions_eci_m(parse_scenario(txt, "x.toml"))
    assert abs(np.linalg.norm(r["d1"] - r["c0"]) - 30.0) < 0.1


def test_validate_notes_default_geometry_and_missing_modes_message(tmp_path, capsys):
    txt = NO_THRUSTER.replace('[bus.plain.geometry]\nkind = "table"\n', "").replace(
        "[bus.plain.geometry.area_by_mode_m2]\nmax_drag = 0.03\nmin_drag = 0.03\nnominal = 0.03\n",
        "")
    p = tmp_path / "box.toml"
    p.write_text(txt)
    assert main(["validate", str(p)]) == 0
    out = capsys.readouterr().out
    assert "note: bus 'plain' has the default geometry: a box 0.1 x 0.2 x 0.3405 m" in out
    # no modes at all: the message lists the tables to add, and no "= None"
    p.write_text(txt.replace("[bus.plain.modes.max_drag]\n[bus.plain.modes.min_drag]\n"
                             "[bus.plain.modes.nominal]\n", ""))
    assert main(["validate", str(p)]) == 2
    err = capsys.readouterr().err
    assert "bus.plain.modes: required table missing" in err and "= None" not in err
    for m in ("max_drag", "min_drag", "nominal"):
        assert f"[bus.plain.modes.{m}]" in err


# ------------------------------------------------------------------------------------------
# Runs with the fake truth (no JVM)
# ------------------------------------------------------------------------------------------


def test_missed_target_is_visible_and_strict_fails(tmp_path, fake_truth, capsys):
    p = _no_thruster(tmp_path)
    out = tmp_path / "nt.h5"
    assert main(["run", str(p), "-o", str(out), "-q"]) == 0  # flew to the end: exit 0 as before
    cap = capsys.readouterr()
    line = cap.out.splitlines()[0]
    assert line.startswith("ok: no_thruster") and "target met: no (d1: a d" in line
    assert "warning: deputy 'd1'" in cap.err
    with h5py.File(out, "r") as f:
        status = _text(f["guidance/cycles/status"][...])
        assert f["meta"].attrs["targets_met"] == np.False_
        assert bool(f["metrics/d1"].attrs["target_met"]) is False
        assert f["metrics/d1"].attrs["target_verdict"].startswith("no: a d")
        assert f.attrs["schema_version"] == "1.4"
    n_bad = status.count("infeasible")
    assert n_bad > 0  # the law reports the missing authority
    assert f"guidance: {cycles_text(cycle_outcomes(status), 'cycles')}" in line
    assert f"guidance infeasible in {n_bad} of {len(status)} cycles" in cap.out
    assert main(["run", str(p), "-o", str(out), "-q", "--strict"]) == 1
    assert "target met: no" in capsys.readouterr().out


def test_met_target_reads_yes_and_strict_passes(tmp_path, fake_truth, capsys):
    # free drift in the fake (Keplerian) truth keeps the mean ROE: the target is the start
    txt = NO_THRUSTER.replace('law = "hybrid_resolve"', 'law = "none"').replace(
        "target_roe_m = [0.0, 500.0, 0.0, 250.0, 0.0, 250.0]",
        "target_roe_m = [0.0, 500.0, 0.0, 100.0, 0.0, 100.0]")
    p = _no_thruster(tmp_path, txt)
    out = tmp_path / "m.h5"
    assert main(["run", str(p), "-o", str(out), "-q", "--strict"]) == 0
    cap = capsys.readouterr()
    assert "target met: yes" in cap.out.splitlines()[0] and "guidance:" not in cap.out
    assert cap.err == ""  # no warnings
    assert read_log(out).meta["targets_met"] == np.True_


def _parse_table(out: str, first_header: str):
    lines = out.splitlines()
    k = next(i for i, ln in enumerate(lines) if ln.lstrip().startswith(first_header))
    header, rule = lines[k], lines[k + 1]
    spans, start = [], None  # column spans from the dashed rule
    for i, ch in enumerate(rule + " "):
        if ch == "-" and start is None:
            start = i
        elif ch != "-" and start is not None:
            spans.append((start, i))
            start = None
    names = [header[a:b].strip() for a, b in spans]
    rows = []
    for ln in lines[k + 2:]:
        if not ln.strip() or set(ln.strip()) <= {"-"} or ":" in ln:
            break
        rows.append({n: ln[a:b].strip() for n, (a, b) in zip(names, spans)})
    return rows


def test_demo_writes_one_log_per_law_and_its_table_matches_the_logs(tmp_path, monkeypatch,
                                                                    fake_truth, capsys):
    monkeypatch.chdir(tmp_path)
    # two cycles; deputy 0 judged at its (moved) deadline, deputy 1 early (deadline 2.75 d)
    code = main(["demo", "-o", "logs", "-q", "--set", "run.duration_s=10800",
                 "--set", "deputies[0].deadline_s=10800"])
    cap = capsys.readouterr()
    assert code == 0, cap.err
    laws = ("propulsion_only", "hybrid_single", "hybrid_resolve")
    paths = [tmp_path / "logs" / f"demo_formation_{law}.h5" for law in laws]
    assert all(p.exists() for p in paths), sorted((tmp_path / "logs").iterdir())
    assert f"run logs: {', '.join(str(p.relative_to(tmp_path)) for p in paths)}" in cap.out
    rows = _parse_table(cap.out, "law")
    assert len(rows) == 6
    for law, path in zip(laws, paths):
        log = read_log(path)
        cfg = parse_scenario(log.scenario_text, "demo.toml")
        tol = np.asarray(cfg.metrics.tolerance_m)
        status = log.get("guidance/cycles/status")
        for d in cfg.deputies:
            row = next(r for r in rows if r["law"] == law and r["deputy"] == d.name)
            t = log.get(f"spacecraft/{d.name}/truth/t_s")
            roe = log.get(f"spacecraft/{d.name}/mean_roe_m")
            deadline = 10800.0 if d.name == cfg.deputies[0].name else d.deadline_s
            early = t[-1] < deadline - 1e-6
            k = len(t) - 1 if early else int(np.searchsorted(t, deadline - 1e-6))
            err = roe[k] - np.asarray(d.target_roe_m)
            cells = {"a da err [m]": err[0], "a dlambda err [m]": err[1],
                     "|a de err| [m]": np.hypot(err[2], err[3]),
                     "|a di err| [m]": np.hypot(err[4], err[5]), "|err| [m]": np.linalg.norm(err)}
            for head, v in cells.items():
                assert row[head].endswith("*") == early, (law, d.name, head)
                assert abs(float(row[head].rstrip("*")) - v) <= 0.05 + 1e-9, (law, d.name, head)
            met = (not early) and bool(np.all(np.abs(err) <= tol))
            assert row["target met"].startswith("yes" if met else "no")
            if early:
                assert row["target met"] == "no (ended early)"
            if not met and not early:
                bad = [ROE_LABELS[i] for i in range(6) if abs(err[i]) > tol[i]]
                assert sorted(row["target met"][4:-1].split(", ")) == sorted(bad)
            assert row["guidance cycles"] == cycles_text(cycle_outcomes(status))
            assert row["status"] == log.status == "ok"
            names = log.get("commands/impulses/name")
            st = log.get("commands/impulses/status")
            sel = [(n == d.name and s in ("executed", "clipped_max")) for n, s in zip(names, st)]
            dv = log.get("commands/impulses/dv_exec_rtn_mps")
            dv = dv[np.asarray(sel, bool)] if len(sel) else np.zeros((0, 3))
            assert int(row["burns"]) == len(dv)
            assert abs(float(row["dv [m/s]"]) - np.sum(np.linalg.norm(dv, axis=1))) <= 5e-5
            sw = log.get("commands/switches/name")
            assert int(row["switches"]) == sum(1 for n in sw if n == d.name)
    assert "*: taken before the deadline" in cap.out
    assert "no conjunction assessment" in cap.out and "log_step_s = 60 s" in cap.out


def test_demo_output_file_gets_the_law_name(tmp_path, monkeypatch, fake_truth, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "-o", "out/demo.h5", "-q", "--set", "run.duration_s=600",
                 "--law", "propulsion_only", "--law", "hybrid_single"]) == 0
    capsys.readouterr()
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == [
        "demo_hybrid_single.h5", "demo_propulsion_only.h5"]


# ------------------------------------------------------------------------------------------
# A closed stdout (| head -1)
# ------------------------------------------------------------------------------------------


def _closed_pipe_run(argv, cwd, env=None):
    """Run ``python -m sim.cli ARGV`` with its stdout a pipe whose read end is closed before the
    child writes anything; returns (returncode, stderr)."""
    r, w = os.pipe()
    os.close(r)  # no reader: every write to w fails with EPIPE
    try:
        p = subprocess.run([sys.executable, *argv], cwd=cwd, stdout=w, stderr=subprocess.PIPE,
                           text=True, timeout=300, env=env)
    finally:
        os.close(w)
    return p.returncode, p.stderr


def test_closed_stdout_keeps_the_exit_code_validate(repo_root):
    # control: the set-up really is a closed pipe (a plain print fails in it)
    code, err = _closed_pipe_run(["-c", "print('x', flush=True)"], repo_root)
    assert code != 0 and "BrokenPipeError" in err
    code, err = _closed_pipe_run(["-m", "sim.cli", "validate", "scenarios/demo_formation.toml"],
                                 repo_root)
    assert code == 0 and "BrokenPipeError" not in err and err == "", err
    code, err = _closed_pipe_run(["-m", "sim.cli", "--help"], repo_root)
    assert code == 0 and err == "", err


def test_head_one_gets_the_first_line_and_the_exit_code(repo_root):
    p = subprocess.Popen([sys.executable, "-m", "sim.cli", "validate",
                          "scenarios/demo_formation.toml"], cwd=repo_root, stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True)
    first = p.stdout.readline()
    p.stdout.close()  # as head -1 does
    err = p.stderr.read()
    assert p.wait(timeout=120) == 0 and "BrokenPipeError" not in err, err
    assert first.startswith("ok: scenarios/demo_formation.toml is a valid scenario")


@pytest.mark.orekit
def test_closed_stdout_keeps_the_exit_code_of_a_run(repo_root, tmp_path):
    env = dict(os.environ, COVEY_TRUTH_THREADS="1")
    code, err = _closed_pipe_run(["-m", "sim.cli", "run", "scenarios/demo_drift.toml", "-q",
                                  "-o", str(tmp_path / "d.h5"),
                                  "--set", "run.duration_days=0.02"], repo_root, env)
    assert code == 0 and "BrokenPipeError" not in err and "unexpected" not in err, err
    assert read_log(tmp_path / "d.h5").status == "ok"


# ------------------------------------------------------------------------------------------
# The no-thruster scenario end to end (JVM)
# ------------------------------------------------------------------------------------------


@pytest.mark.orekit
def test_no_thruster_end_to_end(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("COVEY_TRUTH_THREADS", "1")
    p = _no_thruster(tmp_path)
    assert main(["validate", str(p)]) == 0
    assert "warning: deputy 'd1'" in capsys.readouterr().out
    out = tmp_path / "nt.h5"
    code = main(["run", str(p), "-o", str(out), "-q", "--strict"])
    cap = capsys.readouterr()
    assert code == 1, cap.err
    log = read_log(out)
    assert log.status == "ok"  # flew to the end; the target is what failed
    status = list(log.get("guidance/cycles/status"))
    n_bad = status.count("infeasible")
    assert n_bad > 0
    line = cap.out.splitlines()[0]
    assert f"guidance: {cycles_text(cycle_outcomes(status), 'cycles')}" in line
    assert "target met: no (d1: " in line
    assert f"guidance infeasible in {n_bad} of {len(status)} cycles" in cap.out
    assert log.attrs("metrics/d1")["target_met"] == np.False_

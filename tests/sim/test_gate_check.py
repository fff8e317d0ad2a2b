"""The regression gate on single run logs: the requirements file (bad files exit 2 naming the
key and the allowed values), ``covey check`` (exit 0 all pass, 1 any fail), the JUnit XML (parsed
back with xml.etree), the output formats and the pytest helper.

Run logs are flown with the fake (Keplerian, no JVM) truth of tests/conftest.py: it keeps every
spacecraft on its initial mean ROE, so a deputy whose target is its initial ROE ends with a
zero final error, and one whose target is 100 m further along-track with a 100 m error (common
practice, no source: the expected values follow from the fake's construction).
"""

from __future__ import annotations

import csv
import io
import json
import shutil
import xml.etree.ElementTree as ET

import h5py
import numpy as np
import pytest

from sim.api import assert_requirements
from sim.cli.main import main
from sim.errors import ScenarioError
from sim.gate.check import check
from sim.gate.requirements import load_requirements, parse_requirements
from sim.loop.run import run_scenario
from sim.scenario.reader import load_scenario

BETA0 = [0.0, 2000.0, 0.0, 100.0, 0.0, 100.0]
GAMMA0 = [0.0, -1500.0, 0.0, -100.0, 0.0, -100.0]
FAST = {"run.duration_s": 10800.0, "guidance.law": "hybrid_single",
        "deputies[0].deadline_s": 10800.0, "deputies[1].deadline_s": 10800.0,
        "deputies[1].target_roe_m": GAMMA0}

REQS = """
[gate]
name = "unit"

[[requirement]]
id = "U-ACC-01"
text = "Final along-track error within 50 m"
metric = "err_dlambda_m"
abs = true
max = 50.0
percentile = 99

[[requirement]]
id = "U-SAF-01"
text = "Radial/normal separation at least 50 m in every run"
metric = "min_rn_separation_m"
min = 50.0

[[requirement]]
id = "U-PROP-01"
text = "Delta-v at most 2 m/s per deputy"
metric = "dv_total_mps"
max = 2.0

[[requirement]]
id = "U-RUN-01"
text = "No run failed"
metric = "runs_failed"
max = 0

[[requirement]]
id = "U-REG-01"
text = "Delta-v no worse than the baseline by more than 10 %"
metric = "dv_total_mps"
kind = "regression"
tolerance_rel = 0.1
"""


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """A run meeting every requirement and one built to miss the along-track accuracy only
    (flown once per module with the fake truth; tests must not modify these files)."""
    import sim.loop.run
    from conftest import REPO, FakeTruthWorld, fake_truth_api

    tmp = tmp_path_factory.mktemp("gate_runs")
    out = {}
    with pytest.MonkeyPatch.context() as mp:
        api = fake_truth_api(type("World", (FakeTruthWorld,), {}))
        mp.setattr(sim.loop.run, "truth_backend", lambda: api)
        for name, dl in (("good", 0.0), ("bad", 100.0)):
            target = list(BETA0)
            target[1] += dl
            cfg = load_scenario(REPO / "scenarios/demo_formation.toml",
                                {**FAST, "deputies[0].target_roe_m": target})
            s = run_scenario(cfg, tmp / f"{name}.h5")
            assert s.status == "ok"
            out[name] = s
    (tmp / "reqs.toml").write_text(REQS)
    out["reqs"] = tmp / "reqs.toml"
    return out


def test_check_exit_codes_and_junit(runs, tmp_path, capsys):
    good, bad, reqs = str(runs["good"].path), str(runs["bad"].path), str(runs["reqs"])
    assert main(["check", good, "--requirements", reqs, "--junit", str(tmp_path / "g.xml")]) == 0
    out = capsys.readouterr().out
    assert out.startswith("PASS:") and "U-REG-01" in out and "n/a" in out  # no baseline
    assert main(["check", bad, "-r", reqs, "--junit", str(tmp_path / "b.xml")]) == 1
    out = capsys.readouterr().out
    assert out.startswith("FAIL:") and "1 fail" in out, out
    # JUnit: one testsuite, one testcase per requirement, a failure on the violated one only
    for name, failed, skipped in (("g.xml", set(), {"U-REG-01"}), ("b.xml", {"U-ACC-01"}, {"U-REG-01"})):
        root = ET.parse(tmp_path / name).getroot()
        assert root.tag == "testsuite" and root.get("tests") == "5"
        cases = root.findall("testcase")
        assert [c.get("name") for c in cases] == ["U-ACC-01", "U-SAF-01", "U-PROP-01",
                                                 "U-RUN-01", "U-REG-01"]
        assert {c.get("name") for c in cases if c.find("failure") is not None} == failed
        assert {c.get("name") for c in cases if c.find("skipped") is not None} == skipped
        assert root.get("failures") == str(len(failed)) and root.get("skipped") == str(len(skipped))
    fail = ET.parse(tmp_path / "b.xml").getroot().find("testcase/failure")
    assert "100 m" in fail.get("message") and "<= 50 m" in fail.get("message")


def test_matrix_values(runs):
    v = check(runs["bad"].path, runs["reqs"])
    rows = {r.id: r for r in v.rows}
    acc = rows["U-ACC-01"]
    m = runs["bad"].metrics[0]
    assert acc.verdict == "fail" and acc.deputy == "beta"
    assert acc.measured == pytest.approx(abs(m.final_error_m[1])) and acc.measured == pytest.approx(100.0, abs=1e-3)
    assert acc.margin == pytest.approx(50.0 - acc.measured)
    saf = rows["U-SAF-01"]
    want = min(x.min_rn_separation_m for x in runs["bad"].metrics)
    assert saf.verdict == "pass" and saf.measured == want and saf.margin == pytest.approx(want - 50.0)
    assert rows["U-RUN-01"].measured == 0 and rows["U-RUN-01"].verdict == "pass"
    assert rows["U-REG-01"].verdict == "n/a" and "--baseline" in rows["U-REG-01"].detail
    assert v.exit_code == 1 and not v.passed


def test_regression_against_a_baseline(runs, tmp_path):
    """A candidate built worse than its baseline: the log's executed impulses doubled (a doctored
    copy), so the re-judged delta-v doubles and the 10 % regression requirement fails."""
    good = runs["good"].path
    worse = tmp_path / "worse.h5"
    shutil.copy(good, worse)
    with h5py.File(worse, "r+") as f:
        f["commands/impulses/dv_exec_rtn_mps"][...] *= 2.0
    same = check(good, runs["reqs"], good)
    assert {r.id: r.verdict for r in same.rows}["U-REG-01"] == "pass"
    v = check(worse, runs["reqs"], good)
    reg = {r.id: r for r in v.rows}["U-REG-01"]
    dv = {m.name: m.dv_total_mps for m in runs["good"].metrics}
    assert reg.verdict == "fail"
    assert reg.measured == pytest.approx(dv[reg.deputy])  # worse by the baseline's delta-v
    assert reg.limit == pytest.approx(0.1 * dv[reg.deputy])


def test_output_formats(runs, capsys):
    args = ["check", str(runs["bad"].path), "-r", str(runs["reqs"])]
    assert main(args + ["--format", "csv"]) == 1
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert [r["id"] for r in rows] == ["U-ACC-01", "U-SAF-01", "U-PROP-01", "U-RUN-01", "U-REG-01"]
    assert rows[0]["verdict"] == "fail" and float(rows[0]["measured"]) == pytest.approx(100.0, abs=1e-3)
    assert main(args + ["--format", "json"]) == 1
    doc = json.loads(capsys.readouterr().out)
    assert doc["passed"] is False and doc["counts"] == {"pass": 3, "fail": 1, "n/a": 1}
    assert main(args + ["--format", "markdown"]) == 1
    md = capsys.readouterr().out
    assert "| id | requirement | measured | limit | margin | verdict |" in md and "**FAIL**" in md
    assert "not flight certification" in md


def test_assert_requirements(runs):
    v = assert_requirements(runs["good"], runs["reqs"])  # a RunSummary or a path
    assert v.passed and len(v.rows) == 5
    with pytest.raises(AssertionError) as e:
        assert_requirements(str(runs["bad"].path), runs["reqs"])
    assert "U-ACC-01" in str(e.value) and "FAIL" in str(e.value)


def test_deputy_filter_and_unknown_deputy(runs, tmp_path):
    p = tmp_path / "r.toml"
    p.write_text('[[requirement]]\nid = "A"\ntext = "t"\nmetric = "err_dlambda_m"\nabs = true\n'
                 'max = 50.0\ndeputies = ["gamma"]\n')
    v = check(runs["bad"].path, p)
    assert v.passed and v.rows[0].deputy == "gamma"  # beta's 100 m not asked for
    p.write_text('[[requirement]]\nid = "A"\ntext = "t"\nmetric = "dv_total_mps"\nmax = 1.0\n'
                 'deputies = ["delta"]\n')
    with pytest.raises(ScenarioError) as e:
        check(runs["bad"].path, p)
    assert e.value.key == "requirement[0].deputies" and "beta, gamma" in e.value.allowed


def test_the_example_requirements_file_reads(repo_root):
    rs = load_requirements(repo_root / "scenarios/demo_formation_requirements.toml")
    assert rs.gate.name == "demo_formation" and len(rs.requirements) >= 8
    assert {r.kind for r in rs.requirements} == {"limit", "regression"}


# ------------------------------------------------------------------------------------------
# Bad requirements files: exit 2, one line naming the key and what is allowed
# ------------------------------------------------------------------------------------------

BASE = '[[requirement]]\nid = "R1"\ntext = "t"\n'


@pytest.mark.parametrize("body, key, allowed", [
    (BASE + 'metric = "dv_totl_mps"\nmax = 1.0\n', "requirement[0].metric",
     ["did you mean 'dv_total_mps'", "min_rn_separation_m", "success_rate"]),
    (BASE + 'metric = "dv_total_mps"\nmax = 1.0\npercentile = 150\n', "requirement[0].percentile",
     ["a number in [0, 100]"]),
    (BASE + 'metric = "dv_total_mps"\nmax = 1.0\npercentile = "high"\n', "requirement[0].percentile",
     ["a number in [0, 100]"]),
    (BASE + 'metric = "dv_total_mps"\n', "requirement[0].max", ["a limit is required", "m/s"]),
    (BASE + 'metric = "dv_total_mps"\nmax = 1.0\nmin = 0.0\n', "requirement[0].min",
     ["give one limit"]),
    (BASE + 'metric = "dv_total_mps"\nmax = 1.0\npercentil = 95\n', "requirement[0].percentil",
     ["unknown key", "did you mean 'percentile'"]),
    (BASE + 'metric = "dv_total_mps"\nmax = 1.0\nstatistic = "p95"\n', "requirement[0].statistic",
     ["'worst', 'mean', 'median', 'percentile'"]),
    (BASE + 'metric = "success_rate"\nmin = 1.5\n', "requirement[0].min", ["[0, 1]"]),
    (BASE + 'metric = "success_rate"\nmin = 0.9\nsuccess_requires = ["X"]\n',
     "requirement[0].success_requires", ["per-deputy limit requirements"]),
    (BASE + 'metric = "err_dlambda_m"\nkind = "regression"\n', "requirement[0].better",
     ["\"lower\" or \"higher\"", "abs = true"]),
    (BASE + 'metric = "runs_failed"\nmax = 0\npercentile = 90\n', "requirement[0].percentile",
     ["only for per-deputy metrics"]),
    ('[[requirement]]\ntext = "t"\nmetric = "dv_total_mps"\nmax = 1.0\n', "requirement[0].id",
     ["required"]),
    (BASE + 'metric = "dv_total_mps"\nmax = 1.0\n' + BASE + 'metric = "n_burns"\nmax = 3\n',
     "requirement[1].id", ["unique"]),
    ('[gate]\nsignificance = 2.0\n' + BASE + 'metric = "n_burns"\nmax = 3\n', "gate.significance",
     ["(0, 1)"]),
    ('[gate]\npercentile_method = "linar"\n' + BASE + 'metric = "n_burns"\nmax = 3\n',
     "gate.percentile_method", ["did you mean 'linear'"]),
    ('[gates]\n' + BASE + 'metric = "n_burns"\nmax = 3\n', "gates", ["did you mean 'gate'"]),
    ('[gate]\nname = "x"\n', "requirement", ["at least one [[requirement]]"]),
    ('[gate]\nname = ' + "[" * 5000 + "]" * 5000 + '\n', "(file)", ["nested too deeply"]),
])
def test_bad_requirements_exit_2_naming_key_and_allowed(body, key, allowed, runs, tmp_path, capsys):
    with pytest.raises(ScenarioError) as e:
        parse_requirements(body, "r.toml")
    assert e.value.key == key
    for a in allowed:
        assert a in str(e.value), (a, str(e.value))
    p = tmp_path / "bad.toml"
    p.write_text(body)
    assert main(["check", str(runs["good"].path), "-r", str(p)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and key in err[0] and str(p) in err[0]


def test_bad_inputs_exit_2(runs, tmp_path, capsys):
    good = str(runs["good"].path)
    assert main(["check", good, "-r", str(tmp_path / "none.toml")]) == 2
    assert "not found" in capsys.readouterr().err
    (tmp_path / "x.toml").write_text("[[requirement]\n")
    assert main(["check", good, "-r", str(tmp_path / "x.toml")]) == 2
    assert "not valid TOML" in capsys.readouterr().err
    assert main(["check", str(tmp_path / "missing.h5"), "-r", str(runs["reqs"])]) == 2
    assert "no such file" in capsys.readouterr().err
    assert main(["check", str(tmp_path), "-r", str(runs["reqs"])]) == 2  # folder without summary
    assert "no campaign summary" in capsys.readouterr().err
    assert main(["check", good]) == 2  # --requirements is required


def test_unmeasured_counts_as_worst(runs, tmp_path):
    """time_to_tolerance_s is NaN when the error never settles in the box: an upper limit on it
    fails (common practice, no source: an unmeasured value is not a pass)."""
    p = tmp_path / "t.toml"
    p.write_text('[[requirement]]\nid = "T"\ntext = "in the box within 1 h"\n'
                 'metric = "time_to_tolerance_s"\nmax = 3600.0\n')
    m = runs["bad"].metrics
    assert any(np.isnan(x.time_to_tolerance_s) for x in m)
    row = check(runs["bad"].path, p).rows[0]
    assert row.verdict == "fail" and row.measured_text.endswith("unmeasured")


def test_check_in_a_fresh_process_exit_code_and_no_jvm(runs, repo_root):
    """Real process exit codes (0 pass, 1 fail); judging and checking never load JPype/Orekit
    (the issue: no propagation, no Java)."""
    import subprocess
    import sys

    code = ("import sys; from sim.cli.main import main; rc = main(sys.argv[1:]); "
            "print('jpype' in sys.modules, 'orekit_jpype' in sys.modules); sys.exit(rc)")
    for cand, rc in ((runs["good"].path, 0), (runs["bad"].path, 1)):
        out = subprocess.run([sys.executable, "-c", code, "check", str(cand), "-r",
                              str(runs["reqs"]), "-b", str(runs["good"].path)], cwd=repo_root,
                             capture_output=True, text=True, timeout=120)
        assert out.returncode == rc, out.stderr
        assert out.stdout.strip().endswith("False False") and "Traceback" not in out.stderr

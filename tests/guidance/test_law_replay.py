"""benchmarks/law_replay.py: recorded law inputs replayed through two checkouts give the same
answers, and a changed answer is reported (no JVM: guidance only)."""

from __future__ import annotations

import copy
import importlib.util
import pickle
import subprocess
import sys
from pathlib import Path

import numpy as np

from guidance.registry import load_law
from guidance_builders import mission, nav  # tests/guidance/guidance_builders.py

ROOT = Path(__file__).resolve().parents[2]
SCRIPT = ROOT / "benchmarks" / "law_replay.py"


def _capture(path: Path) -> None:
    m = mission({"resolve_s": 5400.0}, target=(0.0, -3000.0, 0.0, 0.0, 20.0, 0.0), deadline=86400.0)
    roe = np.array([0.0, 0.0, 0.0, 0.0, 0.0, 0.0])
    steps = [pickle.dumps((5400.0 * k, nav(5400.0 * k, roe + [0.0, -400.0 * k, 1.0 * k, 0, 5.0 * k, 0])))
             for k in range(3)]
    with open(path, "wb") as fh:
        pickle.dump({"law": "hybrid_resolve", "mission": m, "steps": steps, "scenario": "test", "days": 1.0}, fh)


def _module():
    spec = importlib.util.spec_from_file_location("law_replay", SCRIPT)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_replay_against_the_same_checkout_is_identical(tmp_path):
    cap = tmp_path / "inputs.pkl"
    _capture(cap)
    p = subprocess.run([sys.executable, str(SCRIPT), "replay", str(cap), "--against", str(ROOT), "--repeat", "1"],
                       capture_output=True, text=True, timeout=300)
    assert p.returncode == 0, p.stderr
    assert "answers: identical at all 3 cycles (bitwise)" in p.stdout
    assert "RATIO this /" in p.stdout


def test_compare_reports_the_first_cycle_that_differs(tmp_path):
    mod = _module()
    cap = tmp_path / "inputs.pkl"
    _capture(cap)
    with open(cap, "rb") as fh:
        rec = pickle.load(fh)
    law = load_law(rec["law"])
    law.setup(rec["mission"])
    rows = [mod._summary(law.step(*pickle.loads(b))) for b in rec["steps"]]
    assert mod._compare(rows, copy.deepcopy(rows)).startswith("identical at all 3 cycles")
    other = copy.deepcopy(rows)
    name = next(n for n, c in other[1]["commands"].items() if c[0].size)  # a spacecraft with impulses
    other[1]["commands"][name][0][0, 1] += 1e-6  # one delta-v component, m/s
    assert mod._compare(rows, other).startswith("differ from cycle 1 on (of 3)")
    assert "1e-06" in mod._compare(rows, other)


def test_replay_names_a_missing_or_foreign_file_and_a_bad_revision(tmp_path):
    p = subprocess.run([sys.executable, str(SCRIPT), "replay", str(tmp_path / "nope.pkl")],
                       capture_output=True, text=True, timeout=60)
    assert p.returncode != 0 and "no capture file" in p.stderr and "Traceback" not in p.stderr
    junk = tmp_path / "junk.pkl"
    junk.write_text("not a capture")
    p = subprocess.run([sys.executable, str(SCRIPT), "replay", str(junk)], capture_output=True, text=True,
                       timeout=60)
    assert p.returncode != 0 and "is not a capture file" in p.stderr and "Traceback" not in p.stderr
    cap = tmp_path / "inputs.pkl"
    _capture(cap)
    p = subprocess.run([sys.executable, str(SCRIPT), "replay", str(cap), "--against", "no-such-rev-xyz"],
                       capture_output=True, text=True, timeout=60)
    assert p.returncode != 0 and "--against 'no-such-rev-xyz'" in p.stderr and "Traceback" not in p.stderr

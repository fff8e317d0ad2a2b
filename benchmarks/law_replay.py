"""Replay a guidance law on recorded inputs: its own cost, and two versions compared on the same inputs.

A closed loop's guidance cost is hard to compare between controller versions: the machine's speed
drifts by tens of per cent within minutes, and a changed law flies another path, so the next cycle
sees other navigation. This script takes the truth out of it.

``capture`` flies a scenario once through :func:`sim.loop.run.run_scenario` (default: the closed-loop
benchmark's, ``benchmarks/loop_overhead.py``: ``demo_formation`` with ``hybrid_resolve`` at one
cycle per orbit, ``--days`` long) and records what the law is given: the mission of its
``setup()`` and the time and navigation estimate of every ``step()``. The file is a Python pickle
(a developer's artefact, not a run log: load only files you made).

``replay FILE`` feeds those inputs to the law of this checkout, each replay in a fresh process
(no JVM: guidance is pure Python), and prints the CPU time of the law's ``step()`` calls. With
``--against REV`` (a git revision, checked out into a temporary worktree) or ``--against PATH``
(another checkout) the two versions are replayed alternately ``--repeat`` times, and the script
prints every time, the median ratio (this / other) and whether the two gave the same commands and
diagnostics at every cycle, bitwise (impulse times and RTN delta-v, switch times and modes,
statuses, predicted remaining delta-v), or else the first cycle that differs and the largest
difference. ``--callgrind N`` also counts the instructions of both replays of the first N cycles
under valgrind's callgrind (repeatable whatever else the machine does; about 50 x slower than a
plain replay), with the start-up (imports, set-up: a replay of 0 cycles) counted apart.

Usage::

    python benchmarks/law_replay.py capture [--days 10] [--scenario FILE] [--out FILE]
    python benchmarks/law_replay.py replay FILE [--against REV|PATH] [--repeat 3] [--callgrind N]
"""

from __future__ import annotations

import argparse
import os
import pickle
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent

# ----------------------------------------------------------------------------------------------
# the replay worker (run as "law_replay.py _worker TREE FILE OUT N"): no import from this tree
# before sys.path points at TREE, so each version replays with its own guidance package
# ----------------------------------------------------------------------------------------------


def _worker(tree: str, capture: str, out: str, n_cycles: int) -> None:
    sys.path.insert(0, tree)
    import guidance
    from guidance.registry import load_law

    if not Path(guidance.__file__).resolve().is_relative_to(Path(tree).resolve()):
        sys.exit(f"replay worker: guidance imported from {guidance.__file__}, not from {tree}")
    with open(capture, "rb") as fh:
        cap = pickle.load(fh)
    steps = [pickle.loads(b) for b in cap["steps"]]
    if n_cycles >= 0:
        steps = steps[:n_cycles]
    law = load_law(cap["law"])
    law.setup(cap["mission"])
    rows, cpu = [], 0.0
    for t, nav in steps:
        c0 = time.process_time()
        res = law.step(t, nav)
        cpu += time.process_time() - c0
        rows.append(_summary(res))
    with open(out, "wb") as fh:
        pickle.dump({"cpu_s": cpu, "rows": rows}, fh)


def _summary(res) -> dict:
    """One cycle's answer as plain arrays and strings (comparable across versions)."""
    cmds = {}
    for name, c in sorted(res.commands.items()):
        imp = np.array([[i.t_s, *np.asarray(i.dv_rtn_mps, float)] for i in c.impulses], float).reshape(-1, 4)
        sw_t = np.array([s.t_s for s in c.mode_switches], float)
        cmds[name] = (imp, sw_t, tuple(s.mode for s in c.mode_switches))
    d = res.diagnostics
    dvr = {k: float(v) for k, v in sorted(dict(d.dv_remaining_mps or {}).items())}
    return {"commands": cmds, "status": str(d.status), "dv_remaining_mps": dvr}


def _compare(a: list, b: list) -> str:
    if len(a) != len(b):
        return f"different numbers of cycles ({len(a)} and {len(b)})"
    first, worst = None, 0.0
    for k, (x, y) in enumerate(zip(a, b)):
        same = x["status"] == y["status"] and x["dv_remaining_mps"].keys() == y["dv_remaining_mps"].keys()
        same = same and x["commands"].keys() == y["commands"].keys()
        if same:
            for n in x["commands"]:
                (ix, sx, mx), (iy, sy, my) = x["commands"][n], y["commands"][n]
                if mx != my or ix.shape != iy.shape or sx.shape != sy.shape:
                    same = False
                    break
                d = max(float(np.max(np.abs(ix - iy), initial=0.0)), float(np.max(np.abs(sx - sy), initial=0.0)))
                worst = max(worst, d)
                same = same and d == 0.0
            dv = [abs(x["dv_remaining_mps"][n] - y["dv_remaining_mps"][n]) for n in x["dv_remaining_mps"]]
            worst = max([worst] + dv)
            same = same and not any(dv)
        if not same and first is None:
            first = k
    if first is None:
        return f"identical at all {len(a)} cycles (bitwise)"
    return (f"differ from cycle {first} on (of {len(a)}); largest difference of a time, a delta-v or "
            f"a remaining delta-v where the structure matches: {worst:.3g}")


def _worker_cmd(tree: Path, capture: Path, out: Path, n_cycles: int) -> list[str]:
    """The command line of one replay process (see :func:`_worker`)."""
    return [sys.executable, str(Path(__file__).resolve()), "_worker", str(tree), str(capture), str(out),
            str(n_cycles)]


def _replay(tree: Path, capture: Path, n_cycles: int = -1) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "replay.pkl"
        subprocess.run(_worker_cmd(tree, capture, out, n_cycles), check=True)
        with open(out, "rb") as fh:
            return pickle.load(fh)


def _instructions(tree: Path, capture: Path, n_cycles: int) -> float | None:
    """Instructions (millions) of a replay of the first ``n_cycles`` under callgrind, or None."""
    if shutil.which("valgrind") is None:
        return None
    with tempfile.TemporaryDirectory() as tmp:
        p = subprocess.run(["valgrind", "--tool=callgrind", "--callgrind-out-file=/dev/null",
                            *_worker_cmd(tree, capture, Path(tmp) / "r.pkl", n_cycles)],
                           capture_output=True, text=True)
    for line in p.stderr.splitlines():
        if "Collected :" in line:
            return int(line.split(":")[-1]) / 1e6
    return None


# ----------------------------------------------------------------------------------------------
# capture
# ----------------------------------------------------------------------------------------------


def capture(days: float, scenario: str | None, out: Path) -> None:
    sys.path.insert(0, str(ROOT))
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import guidance.registry as registry
    from sim.scenario.reader import load_scenario

    if scenario is None:
        from loop_overhead import make_cfg

        cfg = make_cfg(days)
    else:
        from sim.errors import CoveyError

        try:
            cfg = load_scenario(scenario, {"run.duration_days": float(days)})
        except CoveyError as exc:
            sys.exit(f"capture: {exc}")
    rec = {"law": cfg.guidance.law, "mission": None, "steps": [], "scenario": scenario or "loop_overhead",
           "days": float(days)}
    load = registry.load_law

    def recording_load(spec):
        law = load(spec)
        setup, step = law.setup, law.step

        def rec_setup(mission):
            rec["mission"] = mission
            return setup(mission)

        def rec_step(t_s, nav):
            rec["steps"].append(pickle.dumps((t_s, nav)))  # as given, before the law sees it
            return step(t_s, nav)

        law.setup, law.step = rec_setup, rec_step
        return law

    registry.load_law = recording_load
    from sim.loop.run import run_scenario

    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        summary = run_scenario(cfg, Path(tmp) / "capture.h5")
        wall = time.perf_counter() - t0
    if summary.status == "failed":
        sys.exit(f"capture: the run failed ({summary.reason}); nothing saved")
    if rec["mission"] is None or not rec["steps"]:
        sys.exit(f"capture: the run recorded no guidance cycle (status {summary.status}); nothing saved")
    out.parent.mkdir(parents=True, exist_ok=True)
    with open(out, "wb") as fh:
        pickle.dump(rec, fh)
    print(f"captured {len(rec['steps'])} cycles of law {rec['law']!r} ({days:g} days, closed loop "
          f"{wall:.1f} s) -> {out}")
    sys.stdout.flush()
    os._exit(0)  # the JVM's teardown is slow and not needed (as covey's own command line)


# ----------------------------------------------------------------------------------------------
# replay
# ----------------------------------------------------------------------------------------------


def _other_tree(spec: str, stack: list) -> Path:
    p = Path(spec)
    if p.is_dir() and (p / "guidance").is_dir():
        return p.resolve()
    tmp = Path(tempfile.mkdtemp(prefix="covey-replay-"))
    try:
        r = subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", str(tmp / "tree"), spec],
                           capture_output=True, text=True)
    except FileNotFoundError:
        r = subprocess.CompletedProcess([], 1, "", "git not found")
    if r.returncode != 0:
        shutil.rmtree(tmp, ignore_errors=True)
        sys.exit(f"--against {spec!r}: neither a checkout with a guidance/ folder nor a git revision "
                 f"of {ROOT} ({r.stderr.strip().splitlines()[-1] if r.stderr.strip() else 'git failed'})")
    stack.append(tmp)
    return tmp / "tree"


def replay(capture_path: Path, against: str | None, repeat: int, callgrind: int) -> None:
    if not capture_path.is_file():
        sys.exit(f"replay: no capture file {capture_path} (make one with: python {Path(__file__).name} capture)")
    try:
        with open(capture_path, "rb") as fh:
            head = pickle.load(fh)
        head["law"], head["mission"], head["steps"]
    except Exception as exc:  # noqa: BLE001 - anything but a capture file
        sys.exit(f"replay: {capture_path} is not a capture file of this script ({type(exc).__name__}); "
                 f"make one with: python {Path(__file__).name} capture")
    print(f"inputs: {capture_path} ({len(head['steps'])} cycles of law {head['law']!r}, "
          f"{head.get('scenario')}, {head.get('days', 0):g} days)")
    cleanup: list[Path] = []
    try:
        trees = [("this", ROOT)]
        if against:
            trees.append((against, _other_tree(against, cleanup)))
        times = {k: [] for k, _ in trees}
        rows = {}
        for _ in range(max(int(repeat), 1)):
            for key, tree in trees:
                r = _replay(tree, capture_path)
                times[key].append(r["cpu_s"])
                rows.setdefault(key, r["rows"])
        for key, _ in trees:
            ts = times[key]
            print(f"law step() CPU time, {key:>10}: " + ", ".join(f"{t:.2f}" for t in ts)
                  + f" s; median {statistics.median(ts):.2f} s = "
                  f"{1e3 * statistics.median(ts) / max(len(rows[key]), 1):.1f} ms per cycle")
        if against:
            ratios = [a / b for a, b in zip(times["this"], times[against])]
            print(f"RATIO this / {against}: " + ", ".join(f"{x:.3f}" for x in ratios)
                  + f"; median {statistics.median(ratios):.3f} (each pair run one after the other)")
            print(f"answers: {_compare(rows['this'], rows[against])}")
        if callgrind > 0:
            base = {k: _instructions(t, capture_path, 0) for k, t in trees}
            if any(v is None for v in base.values()):
                print("callgrind: valgrind not found or no count; skipped")
            else:
                n = {k: _instructions(t, capture_path, callgrind) for k, t in trees}
                for key, _ in trees:
                    print(f"instructions, first {callgrind} cycles, {key:>10}: {n[key] - base[key]:.1f} M "
                          f"(start-up {base[key]:.1f} M apart)")
                if against:
                    print(f"RATIO instructions this / {against}: "
                          f"{(n['this'] - base['this']) / (n[against] - base[against]):.4f}")
    finally:
        for tmp in cleanup:
            subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force", str(tmp / "tree")],
                           capture_output=True)
            shutil.rmtree(tmp, ignore_errors=True)


def main(argv=None) -> None:
    argv = sys.argv[1:] if argv is None else argv
    if argv[:1] == ["_worker"]:
        _worker(argv[1], argv[2], argv[3], int(argv[4]))
        return
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    c = sub.add_parser("capture", help="fly a scenario once and record the law's inputs")
    c.add_argument("--days", type=float, default=10.0)
    c.add_argument("--scenario", default=None, help="a scenario file (default: the closed-loop benchmark's)")
    c.add_argument("--out", type=Path, default=None,
                   help="capture file (default results/law_inputs_<days>d.pkl)")
    r = sub.add_parser("replay", help="replay recorded inputs through this checkout's law (and another's)")
    r.add_argument("file", type=Path)
    r.add_argument("--against", default=None, help="a git revision or another checkout's path")
    r.add_argument("--repeat", type=int, default=3)
    r.add_argument("--callgrind", type=int, default=0, metavar="N",
                   help="also count instructions of the first N cycles under valgrind")
    a = ap.parse_args(argv)
    if a.cmd == "capture":
        if not a.days > 0:
            ap.error(f"--days {a.days}: a duration in days > 0")
        capture(a.days, a.scenario, a.out or ROOT / "results" / f"law_inputs_{a.days:g}d.pkl")
    else:
        if a.repeat < 1:
            ap.error(f"--repeat {a.repeat}: a number of replays >= 1")
        if a.callgrind < 0:
            ap.error(f"--callgrind {a.callgrind}: a number of cycles >= 0")
        replay(a.file, a.against, a.repeat, a.callgrind)


if __name__ == "__main__":
    main()

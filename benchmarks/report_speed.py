"""How long ``covey report`` takes: the report of a 1-day run, and of a 100-run campaign.

Usage::

    python benchmarks/report_speed.py                 # fly the demo for 1 day first (about a minute)
    python benchmarks/report_speed.py --log RUN.h5    # report an existing run log instead
    python benchmarks/report_speed.py --runs 100 --keep DIR

Prints one line per measurement: wall time of the ``covey report`` command (``python -m sim.cli``,
a fresh process: imports included) and the CPU time of the report itself (in-process
``build_report``, its own timings). The campaign is a synthetic summary of ``--runs`` runs (the
test fixture of tests/sim/report_fixtures.py: invented numbers) with the run log as its one
readable log, so the campaign report reads what a real one reads. The run is flown with one truth
thread (``COVEY_TRUTH_THREADS=1``).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(REPO / "tests" / "sim"))


def _cli(args: list[str]) -> float:
    env = dict(os.environ, COVEY_TRUTH_THREADS="1")
    t0 = time.perf_counter()
    res = subprocess.run([sys.executable, "-m", "sim.cli", *args], cwd=REPO, env=env,
                         capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if res.returncode != 0:
        raise SystemExit(f"covey {' '.join(args)} failed ({res.returncode}): {res.stderr.strip()}")
    return wall


def _in_process(source: Path, out: Path) -> tuple[float, float, dict]:
    from sim.report.build import build_report

    c0, w0 = time.process_time(), time.perf_counter()
    res = build_report(source, out)
    return time.perf_counter() - w0, time.process_time() - c0, res


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--log", help="a run log to report (default: fly the demo for 1 day)")
    ap.add_argument("--runs", type=int, default=100, help="runs of the synthetic campaign (100)")
    ap.add_argument("--keep", help="folder to keep the outputs in (default: a temporary folder)")
    args = ap.parse_args(argv)
    work = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="covey-report-speed-"))
    work.mkdir(parents=True, exist_ok=True)
    log = Path(args.log) if args.log else work / "demo_1day.h5"
    if not args.log:
        w = _cli(["run", str(REPO / "scenarios" / "demo_formation.toml"), "-q", "-o", str(log),
                  "--set", "run.duration_days=1", "--set", "deputies[0].deadline_days=1",
                  "--set", "deputies[1].deadline_days=1"])
        print(f"flew the demo for 1 day in {w:.1f} s -> {log}")
    from sim.log.reader import read_log

    meta = read_log(log).meta
    days = float(meta.get("t_end_s", 0.0)) / 86400.0
    w = _cli(["report", str(log), "-o", str(work / "report_run")])
    wi, ci, res = _in_process(log, work / "report_run_inproc")
    print(f"run report ({days:.3g}-day run, {len(res.figures)} figures PNG+PDF, {len(res.tables)} "
          f"tables): covey report {w:.2f} s wall; build_report {wi:.2f} s wall, {ci:.2f} s CPU "
          f"(figures built {res.timings_s['build_figures_s']:.2f} s, saved "
          f"{res.timings_s['save_figures_s']:.2f} s)")
    from report_fixtures import synthetic_campaign

    camp = work / "campaign"
    synthetic_campaign(camp, "monte_carlo", n_runs=args.runs, seed=5, run_log=log)
    w = _cli(["report", str(camp), "-o", str(work / "report_campaign")])
    wi, ci, res = _in_process(camp, work / "report_campaign_inproc")
    print(f"campaign report ({args.runs} runs, Monte Carlo, {len(res.figures)} figures PNG+PDF): "
          f"covey report {w:.2f} s wall; build_report {wi:.2f} s wall, {ci:.2f} s CPU")
    w = _cli(["export", str(log), "-o", str(work / "export")])
    print(f"export (OEM of every spacecraft, impulses and modes CSV): covey export {w:.2f} s wall "
          "(JVM start included)")
    print(f"outputs in {work}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

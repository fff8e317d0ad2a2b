"""Campaign scaling on this machine: throughput with 1 and 2 workers, the per-run overhead of a
campaign over the same run flown alone with ``covey run``, and a worker's resident memory over 20
runs.

1. The same campaign of ``--runs`` (8) runs of ``--days`` (1) day each: the demo formation
   (``scenarios/demo_formation.toml``: chief + 2 deputies, full force model, the hybrid_resolve law,
   realistic navigation and actuator errors, a truth density error), deadlines at the end of the
   run, the initial along-track offset of each deputy dispersed (normal, 20 m), one truth thread
   per run. Flown as a user flies it (``python -m sim.cli campaign FILE --workers N -q`` in a new
   process, whole command timed), with 1 worker and with 2 workers; the throughput ratio is
   wall(1 worker) / wall(2 workers) (target >= 1.8 on 2 cores).
2. The first ``--alone`` (2) runs of that campaign flown alone, each with ``python -m sim.cli run
   BASE --set ...`` (the run's own overrides from the campaign plan, COVEY_TRUTH_THREADS=1), whole
   command timed (interpreter, imports, JVM boot, run). The per-run overhead of the campaign is
   (wall(1 worker) / runs) / mean(wall of ``covey run``) - 1 (target <= 5 %; the JVM reuse is what
   buys it). Also printed: the campaign's own bookkeeping, wall(1 worker) over the sum of its runs'
   ``run_scenario`` wall times (``/meta@wall_time_s`` of the logs).
   The steady-state ratio leaves out each worker's first run (JVM boot and first JIT
   compilation, which keep about 2 cores busy per worker): 2 x (mean run_scenario wall of the later
   runs with 1 worker) / (the same with 2 workers).
3. One worker flies ``--memory-runs`` (20) runs of ``--memory-days`` (0.25) day of the same
   campaign (``run_campaign``, 1 worker); the worker reports its ``VmRSS`` (``/proc/self/status``)
   after each run: printed after run 1 and after the last, and the largest growth between runs 2 and
   the last.

4. Unless ``--no-threads-line``: the same campaign with 1 worker and 2 truth threads per run
   (``--truth-threads 2``: one JVM, so one boot and one JIT compilation, the spacecraft of each
   run propagated two at a time between guidance cycles), its throughput against 1 worker with 1.

Also printed: the CPU time (user + system, every process of the command) of each campaign, the
cores it kept busy and the ceiling they put on the ratio.

Usage: ``python benchmarks/campaign_scaling.py [--runs 8] [--days 1] [--alone 2]
[--memory-runs 20] [--memory-days 0.25] [--jvm-options TEXT] [--no-threads-line]
[--keep DIR]``. Run nothing else heavy meanwhile: the
machine's 2 cores are the resource measured. Takes a few minutes.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

import h5py  # noqa: E402

from sim.campaign.execute import run_campaign  # noqa: E402
from sim.campaign.plan import plan_campaign  # noqa: E402
from sim.campaign.spec import load_campaign  # noqa: E402


def campaign_file(folder: Path, name: str, runs: int, days: float) -> Path:
    f = folder / f"{name}.toml"
    f.write_text(textwrap.dedent(f"""
        [campaign]
        name = "{name}"
        scenario = "{REPO / 'scenarios' / 'demo_formation.toml'}"
        runs = {runs}
        master_seed = 20261204
        [campaign.set]
        "run.duration_days" = {days}
        "deputies[0].deadline_days" = {days}
        "deputies[1].deadline_days" = {days}
        [[dispersions]]
        key = "deputies[0].roe_m[1]"
        distribution = "normal"
        mean = 2000.0
        sigma = 20.0
        [[dispersions]]
        key = "deputies[1].roe_m[1]"
        distribution = "normal"
        mean = -1500.0
        sigma = 20.0
        """))
    return f


def env() -> dict:
    return dict(os.environ, COVEY_TRUTH_THREADS="1", PYTHONPATH=str(REPO))


CPU: list[float] = []  # CPU seconds (user + system) of each timed command and its processes


def timed(cmd: list[str]) -> float:
    r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    p = subprocess.run(cmd, cwd=REPO, env=env(), capture_output=True, text=True)
    wall = time.perf_counter() - t0
    r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    CPU.append(r1.ru_utime + r1.ru_stime - r0.ru_utime - r0.ru_stime)
    if p.returncode != 0:
        sys.exit(f"failed ({p.returncode}): {' '.join(cmd)}\n{p.stdout}\n{p.stderr}")
    return wall


def fly_campaign(f: Path, out: Path, workers: int, jvm: str | None,
                 truth_threads: int = 1) -> float:
    extra = ["--jvm-options", jvm] if jvm is not None else []
    return timed([sys.executable, "-m", "sim.cli", "campaign", str(f), "-o", str(out),
                  "--workers", str(workers), "--truth-threads", str(truth_threads), "--fresh",
                  "-q", *extra])


def run_walls(out: Path) -> list[float]:
    walls = []
    for p in sorted((out / "runs").glob("*.h5")):
        with h5py.File(p, "r") as h:
            walls.append(float(h["meta"].attrs["wall_time_s"]))
    return walls


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=8)
    ap.add_argument("--days", type=float, default=1.0)
    ap.add_argument("--alone", type=int, default=2)
    ap.add_argument("--memory-runs", type=int, default=20)
    ap.add_argument("--memory-days", type=float, default=0.25)
    ap.add_argument("--no-threads-line", dest="threads_line", action="store_false",
                    help="skip the third campaign: 1 worker with 2 truth threads per run")
    ap.add_argument("--keep", metavar="DIR", help="keep the campaign folders here")
    ap.add_argument("--jvm-options", metavar="TEXT", default=None,
                    help="the workers' JVM options (default: the campaign's own, "
                         "sim.campaign.worker.WORKER_JVM_OPTIONS; '' the JVM's defaults)")
    a = ap.parse_args()
    work = Path(a.keep) if a.keep else Path(tempfile.mkdtemp(prefix="covey-campaign-bench-"))
    work.mkdir(parents=True, exist_ok=True)
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}; "
          f"{os.cpu_count()} CPUs", flush=True)
    try:
        f = campaign_file(work, "scaling", a.runs, a.days)
        plan = plan_campaign(load_campaign(f))
        w1 = fly_campaign(f, work / "w1", 1, a.jvm_options)
        c1 = CPU[-1]
        print(f"1 worker : {a.runs} runs of {a.days:g} day in {w1:.1f} s "
              f"({w1 / a.runs:.2f} s per run), {c1:.1f} CPU-s: {c1 / w1:.2f} cores busy",
              flush=True)
        w2 = fly_campaign(f, work / "w2", 2, a.jvm_options)
        c2 = CPU[-1]
        print(f"2 workers: {a.runs} runs of {a.days:g} day in {w2:.1f} s "
              f"({w2 / a.runs:.2f} s per run), {c2:.1f} CPU-s: {c2 / w2:.2f} cores busy",
              flush=True)
        w1t2 = c1t2 = None
        if a.threads_line:
            w1t2 = fly_campaign(f, work / "w1t2", 1, a.jvm_options, truth_threads=2)
            c1t2 = CPU[-1]
            print(f"1 worker, 2 truth threads: {a.runs} runs in {w1t2:.1f} s ({w1t2 / a.runs:.2f} s "
                  f"per run), {c1t2:.1f} CPU-s: {c1t2 / w1t2:.2f} cores busy", flush=True)
        inside = run_walls(work / "w1")
        inside2 = run_walls(work / "w2")
        print("run_scenario wall per run (s), 1 worker : " + " ".join(f"{x:.1f}" for x in inside))
        print("run_scenario wall per run (s), 2 workers: " + " ".join(f"{x:.1f}" for x in inside2),
              flush=True)
        alone = []
        base = REPO / "scenarios" / "demo_formation.toml"
        for j in plan.jobs[:a.alone]:
            sets = []
            for k, v in j.overrides:
                sets += ["--set", f"{k}={v!r}" if not isinstance(v, str) else f'{k}="{v}"']
            wall = timed([sys.executable, "-m", "sim.cli", "run", str(base), "-o",
                          str(work / "alone" / f"{j.name}.h5"), "-q", *sets])
            alone.append(wall)
            print(f"covey run alone, run {j.index}: {wall:.1f} s (the same run inside the "
                  f"campaign: {inside[j.index]:.1f} s of run_scenario)", flush=True)
        # memory: one worker, many runs
        fm = campaign_file(work, "memory", a.memory_runs, a.memory_days)
        pm = plan_campaign(load_campaign(fm))
        res = run_campaign(pm, work / "memory", workers=1, fresh=True, jvm_options=a.jvm_options)
        rss = [w["rss_kb"] for w in sorted(res.worker_runs, key=lambda w: w["index"])]
        pids = {w["pid"] for w in res.worker_runs}
    finally:
        if not a.keep:
            shutil.rmtree(work, ignore_errors=True)
    ratio = w1 / w2
    per_run = w1 / a.runs
    mean_alone = sum(alone) / len(alone)
    overhead = per_run / mean_alone - 1.0
    harness = w1 / sum(inside) - 1.0
    growth = max(rss[1:]) - rss[1] if len(rss) > 1 else 0
    # steady state: leave out each worker's first run (JVM boot and the first JIT compilation;
    # runs are handed out in index order, so those are runs 0 and 0, 1)
    s1 = sum(inside[1:]) / max(1, len(inside) - 1)
    s2 = sum(inside2[2:]) / max(1, len(inside2) - 2)
    print()
    print(f"throughput ratio 2 workers / 1 worker: {ratio:.2f} (target >= 1.8)")
    print(f"CPU: 1 worker {c1:.1f} CPU-s in {w1:.1f} s ({c1 / w1:.2f} cores busy), 2 workers "
          f"{c2:.1f} CPU-s ({c2 / c1:.2f} x the work of 1 worker: each worker's JVM boots, loads "
          f"its data and compiles the same code); 2 cores need at least {c2 / 2:.1f} s for "
          f"{c2:.1f} CPU-s, so the ratio cannot exceed {w1:.1f} / {c2 / 2:.1f} = {2 * w1 / c2:.2f}")
    if w1t2 is not None:
        print(f"1 worker with 2 truth threads per run (one JVM, its spacecraft propagated two at "
              f"a time) / 1 worker with 1: throughput ratio {w1 / w1t2:.2f} "
              f"({c1t2:.1f} CPU-s against {c1:.1f})")
    print(f"steady state (each worker's first run left out): run_scenario {s1:.2f} s per run with "
          f"1 worker, {s2:.2f} s with 2 side by side: throughput ratio {2 * s1 / s2:.2f}")
    print(f"per-run wall in a 1-worker campaign {per_run:.2f} s vs covey run alone "
          f"{mean_alone:.2f} s (mean of {len(alone)}): overhead {100 * overhead:+.1f} % "
          f"(target <= 5 %)")
    print(f"campaign command vs the sum of its runs' run_scenario wall times "
          f"({sum(inside):.1f} s): {100 * harness:+.1f} % (interpreter, JVM boot, planning, "
          f"summary)")
    print(f"worker resident memory ({len(pids)} process, {len(rss)} runs of {a.memory_days:g} "
          f"day): after run 1 {rss[0] / 1024:.0f} MB, after run {len(rss)} {rss[-1] / 1024:.0f} MB; "
          f"largest growth over runs 2..{len(rss)}: {growth / 1024:+.0f} MB")
    print("RSS per run (MB): " + " ".join(f"{x / 1024:.0f}" for x in rss))
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()

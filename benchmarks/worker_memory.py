"""Memory of one process that flies many runs (as a campaign worker does): after each run, the
process's resident memory and the JVM heap in use after a full collection.

Usage::

    python benchmarks/worker_memory.py [--runs 8] [--days 0.25]

Prints one line per run. A JVM heap that grows run after run means finished truth worlds are kept
alive (``TruthWorld.close`` frees them); the resident memory is noisier (the JVM's committed heap,
code cache and native arenas).
"""

from __future__ import annotations

import argparse
import gc
import os
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent


def rss_mb() -> float:
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmRSS"):
                return int(line.split()[1]) / 1024.0
    return float("nan")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--runs", type=int, default=8)
    ap.add_argument("--days", type=float, default=0.25)
    args = ap.parse_args()
    sys.path.insert(0, str(REPO))
    from sim.api import RunOptions, load_scenario, run_scenario

    d = args.days
    cfg = load_scenario(REPO / "scenarios" / "demo_formation.toml",
                        {"run.duration_days": d, "deputies[0].deadline_days": d,
                         "deputies[1].deadline_days": d})
    tmp = Path(tempfile.mkdtemp(prefix="covey_mem_"))
    for k in range(args.runs):
        s = run_scenario(cfg, tmp / f"run_{k % 2}.h5", options=RunOptions(truth_threads=1))
        gc.collect()
        from java.lang import Runtime, System

        System.gc()
        System.gc()
        rt = Runtime.getRuntime()
        used = (rt.totalMemory() - rt.freeMemory()) / 1e6
        print(f"run {k}: {s.status}, RSS {rss_mb():.0f} MB, JVM heap used after GC {used:.1f} MB, "
              f"committed {rt.totalMemory() / 1e6:.0f} MB", flush=True)
    os._exit(0)  # as covey's own command line: skip the JVM teardown


if __name__ == "__main__":
    sys.exit(main())

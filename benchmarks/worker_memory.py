"""Memory of one process that flies many runs (as a campaign worker does): after each run, the
process's resident memory and the JVM heap in use after a full collection.

Usage::

    python benchmarks/worker_memory.py [--runs 8] [--days 0.25] [--jvm-options TEXT] [--python]

The JVM starts with a campaign worker's options unless told otherwise. Prints one line per run:
resident memory, the JVM heap (in use after a full collection, committed), the JVM's code cache
and metaspace (committed), and with ``--python`` the memory of Python's live objects. A JVM heap that grows run after run means finished truth worlds are kept
alive (``TruthWorld.close`` frees them); the resident memory is noisier (the JVM's committed heap,
code cache and native arenas).
"""

from __future__ import annotations

import argparse
import gc
import os
import sys
import tempfile
import tracemalloc
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
    ap.add_argument("--jvm-options", default=None,
                    help="JVM options (default: a campaign worker's, "
                         "sim.campaign.worker.WORKER_JVM_OPTIONS; '' the JVM's defaults)")
    ap.add_argument("--python", action="store_true",
                    help="also trace Python's own allocations (tracemalloc; slows the runs)")
    args = ap.parse_args()
    if args.python:
        tracemalloc.start()
    sys.path.insert(0, str(REPO))
    from sim.api import RunOptions, load_scenario, run_scenario
    from sim.campaign.worker import WORKER_JVM_OPTIONS
    from sim.orekit.boot import boot

    boot(jvm_options=WORKER_JVM_OPTIONS if args.jvm_options is None else args.jvm_options)

    d = args.days
    cfg = load_scenario(REPO / "scenarios" / "demo_formation.toml",
                        {"run.duration_days": d, "deputies[0].deadline_days": d,
                         "deputies[1].deadline_days": d})
    tmp = Path(tempfile.mkdtemp(prefix="covey_mem_"))
    for k in range(args.runs):
        s = run_scenario(cfg, tmp / f"run_{k % 2}.h5", options=RunOptions(truth_threads=1))
        gc.collect()
        from java.lang import Runtime, System
        from java.lang.management import ManagementFactory

        System.gc()
        System.gc()
        rt = Runtime.getRuntime()
        used = (rt.totalMemory() - rt.freeMemory()) / 1e6
        pools = {str(p.getName()): p.getUsage().getCommitted() / 1e6
                 for p in ManagementFactory.getMemoryPoolMXBeans()
                 if str(p.getType()) == "Non-heap memory"}
        code = sum(v for n, v in pools.items() if "CodeHeap" in n or "Code Cache" in n)
        meta = pools.get("Metaspace", float("nan")) + pools.get("Compressed Class Space", 0.0)
        py = tracemalloc.get_traced_memory()[0] / 1e6 if args.python else float("nan")
        print(f"run {k}: {s.status}, RSS {rss_mb():.0f} MB, JVM heap used after GC {used:.1f} MB, "
              f"committed {rt.totalMemory() / 1e6:.0f} MB, code cache {code:.0f} MB, "
              f"metaspace {meta:.0f} MB, Python objects {py:.0f} MB", flush=True)
    os._exit(0)  # as covey's own command line: skip the JVM teardown


if __name__ == "__main__":
    sys.exit(main())

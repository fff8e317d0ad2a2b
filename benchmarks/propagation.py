"""Cost of covey's truth propagation against a bare Orekit propagation of the same force model.

Prints seconds per spacecraft-day for the ``full`` preset (20x20 gravity, NRLMSISE-00 with CSSI
data, Sun, Moon, SRP), a 500 km sun-synchronous orbit, 60 s truth sampling, and the ratio
covey / bare measured in this one run:

- covey: ``TruthWorld.advance_to`` (samples every 60 s, altitude event, drag driver spans), in one
  call per day and in one call per 5400 s guidance cycle, then ``drain_samples`` (which computes
  the logged NRLMSISE-00 density of all samples in one pymsis call); once per day with one sample
  per day, to separate the cost of the 60 s samples; and once per day with the logged density from
  Orekit's ``getDensity`` per sample (``TruthWorld(batched_density=False)``, the method before the
  batch), to show what the batch saves;
- bare: the same Orekit force models and integrator settings (``TruthWorld.bare_propagator``:
  DormandPrince853, same tolerances and step cap, equinoctial elements, initial step set), one
  ``propagate()`` per day, no step handler, no event detector.

Runs are interleaved and repeated (the machine is shared, single timings vary by 20 % or more);
reported: the ratio of the minima, the median of the paired ratios (each covey run against the
bare run just before it, so under about the same load; also in main-thread CPU time, where Orekit
and covey run, which leaves out waiting for a core but not the slow-down of a busy one), and the
ratio of the medians.

Usage: ``python benchmarks/propagation.py [--days N] [--repeats R]``
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from sim.scenario.config import (AttitudeModeConfig, BusConfig, EnvironmentConfig, MeanOrbitConfig,  # noqa: E402
                        RunConfig, SpacecraftConfig, ThrusterConfig)
from sim.orekit.forces import MAX_STEP_S  # noqa: E402
from sim.truth.world import TruthWorld  # noqa: E402

R_E_M = 6378137.0
EPOCH = "2024-06-01T00:00:00Z"


def make_run(days: float, log_step_s: float = 60.0) -> RunConfig:
    modes = {"nominal": AttitudeModeConfig("nominal"), "max_drag": AttitudeModeConfig("max_drag", (0.0, 0.0, 90.0)),
             "min_drag": AttitudeModeConfig("min_drag", (0.0, 90.0, 0.0))}
    bus = BusConfig(name="bench6u", mass_kg=10.0, modes=modes, thruster=ThrusterConfig())
    chief = SpacecraftConfig("chief", bus, orbit=MeanOrbitConfig(R_E_M + 500e3, 1e-4, 97.4, 30.0, 0.0, 0.0))
    return RunConfig("bench", EPOCH, days * 86400.0, log_step_s, 1, EnvironmentConfig(preset="full"), chief, ())


def covey_seconds_per_day(days: int, chunk_s: float, log_step_s: float = 60.0,
                          batched: bool | None = None) -> tuple[float, float]:
    """(wall-clock, main-thread CPU) seconds per simulated day."""
    w = TruthWorld(make_run(days, log_step_s), batched_density=batched)
    t0, c0 = time.perf_counter(), time.thread_time()
    t = 0.0
    while t < days * 86400.0 - 1e-6:
        t = min(t + chunk_s, days * 86400.0)
        w.advance_to(t)
    w.drain_samples()
    return (time.perf_counter() - t0) / days, (time.thread_time() - c0) / days


def bare_seconds_per_day(days: int) -> tuple[float, float]:
    """(wall-clock, main-thread CPU) seconds per simulated day."""
    w = TruthWorld(make_run(days))  # boots the JVM; gives the same initial state and force objects
    f = w.forces
    p, integ = w.bare_propagator("chief")  # the truth's integrator settings and force model, nothing else
    t0, c0 = time.perf_counter(), time.thread_time()
    for d in range(days):
        integ.setInitialStepSize(MAX_STEP_S)
        p.propagate(f.epoch.shiftedBy(86400.0 * (d + 1)))
    return (time.perf_counter() - t0) / days, (time.thread_time() - c0) / days


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--days", type=int, default=2)
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--warmup-days", type=int, default=6)
    args = ap.parse_args()
    # warm-up: the JVM's optimising compiler needs several simulated days before timings settle
    bare_seconds_per_day(args.warmup_days)
    covey_seconds_per_day(max(1, args.warmup_days // 2), 86400.0)
    covey_seconds_per_day(max(1, args.warmup_days // 2), 5400.0)
    keys = ("bare", "covey_day", "covey_day_nolog", "covey_cycle", "covey_day_rho_orekit")
    runs = {k: [] for k in keys}
    for _ in range(args.repeats):
        runs["bare"].append(bare_seconds_per_day(args.days))
        runs["covey_day"].append(covey_seconds_per_day(args.days, 86400.0))
        runs["covey_day_nolog"].append(covey_seconds_per_day(args.days, 86400.0, 86400.0))
        runs["covey_cycle"].append(covey_seconds_per_day(args.days, 5400.0))
        runs["covey_day_rho_orekit"].append(covey_seconds_per_day(args.days, 86400.0, batched=False))
    res = {k: [r[0] for r in v] for k, v in runs.items()}  # wall-clock
    cpu = {k: [r[1] for r in v] for k, v in runs.items()}  # main-thread CPU
    med = {k: statistics.median(v) for k, v in res.items()}
    low = {k: min(v) for k, v in res.items()}
    # paired: each repeat's covey run against the bare run just before it (same load on the machine)
    pair = {k: statistics.median([x / b for x, b in zip(res[k], res["bare"])]) for k in keys}
    pair_cpu = {k: statistics.median([x / b for x, b in zip(cpu[k], cpu["bare"])]) for k in keys}
    print(f"full preset, 500 km SSO, 60 s sampling, {args.days} day(s) x {args.repeats} interleaved repeats, "
          f"wall-clock, s per spacecraft-day; all runs:")
    for k, v in res.items():
        print(f"  {k:20s} {[round(x, 3) for x in v]}")
    print(f"ratio of the minima: one call per day {low['covey_day'] / low['bare']:.3f}, "
          f"same without 60 s samples {low['covey_day_nolog'] / low['bare']:.3f}, "
          f"5400 s cycle {low['covey_cycle'] / low['bare']:.3f}, "
          f"per-sample Orekit density {low['covey_day_rho_orekit'] / low['bare']:.3f}")
    print("median of the paired ratios (covey run / the bare run just before it), wall-clock [main-thread CPU]:")
    for k, label in (("covey_day", "one call per day"), ("covey_day_nolog", "same without 60 s samples"),
                     ("covey_cycle", "5400 s cycle"), ("covey_day_rho_orekit", "per-sample Orekit density")):
        print(f"  {label:27s} {pair[k]:.3f} [{pair_cpu[k]:.3f}]")
    print("medians:")
    print(f"bare Orekit, one propagate() per day       : {med['bare']:.3f} s per spacecraft-day")
    print(f"covey TruthWorld, advance_to once per day  : {med['covey_day']:.3f} s per spacecraft-day")
    print(f"  same, one sample per day (no 60 s log)   : {med['covey_day_nolog']:.3f} s per spacecraft-day")
    print(f"  same, per-sample Orekit density          : {med['covey_day_rho_orekit']:.3f} s per spacecraft-day")
    print(f"covey TruthWorld, advance_to every 5400 s  : {med['covey_cycle']:.3f} s per spacecraft-day")
    print(f"ratio covey/bare (one call per day)        : {med['covey_day'] / med['bare']:.3f}  (target <= 1.1)")
    print(f"ratio covey/bare (5400 s guidance cycle)   : {med['covey_cycle'] / med['bare']:.3f}")
    print(f"ratio covey/bare, per-sample Orekit density: {med['covey_day_rho_orekit'] / med['bare']:.3f}")

if __name__ == "__main__":
    main()

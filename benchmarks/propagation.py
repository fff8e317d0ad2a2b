"""Cost of covey's truth propagation against a bare Orekit propagation of the same force model.

Prints seconds per spacecraft-day for the ``full`` preset (20x20 gravity, NRLMSISE-00 with CSSI
data, Sun, Moon, SRP), a 500 km sun-synchronous orbit, 60 s truth sampling, and the ratio
covey / bare measured in this one run:

- covey: ``TruthWorld.advance_to`` (samples every 60 s with density, altitude event, drag driver
  spans), in one call per day and in one call per 5400 s guidance cycle, then ``drain_samples``;
  and once per day with one sample per day, to separate the cost of the 60 s samples;
- bare: the same Orekit force models and integrator settings (DormandPrince853, same tolerances
  and step cap, equinoctial elements, initial step set), one ``propagate()`` per day, no step
  handler, no event detector.

Runs are interleaved and repeated; the median of the repeats is reported (the machine is shared,
single timings vary by 20 % or more).

Usage: ``python benchmarks/propagation.py [--days N] [--repeats R]``
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from sim.config import (AttitudeModeConfig, BusConfig, EnvironmentConfig, MeanOrbitConfig,  # noqa: E402
                        RunConfig, SpacecraftConfig, ThrusterConfig)
from sim.forces import MAX_STEP_S  # noqa: E402
from sim.truth import TruthWorld  # noqa: E402

R_E_M = 6378137.0
EPOCH = "2024-06-01T00:00:00Z"


def make_run(days: float, log_step_s: float = 60.0) -> RunConfig:
    modes = {"nominal": AttitudeModeConfig("nominal"), "max_drag": AttitudeModeConfig("max_drag", (0.0, 0.0, 90.0)),
             "min_drag": AttitudeModeConfig("min_drag", (0.0, 90.0, 0.0))}
    bus = BusConfig(name="bench6u", mass_kg=10.0, modes=modes, thruster=ThrusterConfig())
    chief = SpacecraftConfig("chief", bus, orbit=MeanOrbitConfig(R_E_M + 500e3, 1e-4, 97.4, 30.0, 0.0, 0.0))
    return RunConfig("bench", EPOCH, days * 86400.0, log_step_s, 1, EnvironmentConfig(preset="full"), chief, ())


def covey_seconds_per_day(days: int, chunk_s: float, log_step_s: float = 60.0) -> float:
    w = TruthWorld(make_run(days, log_step_s))
    t0 = time.perf_counter()
    t = 0.0
    while t < days * 86400.0 - 1e-6:
        t = min(t + chunk_s, days * 86400.0)
        w.advance_to(t)
    w.drain_samples()
    return (time.perf_counter() - t0) / days


def bare_seconds_per_day(days: int) -> float:
    w = TruthWorld(make_run(days))  # boots the JVM; gives the same initial state and force objects
    from org.hipparchus.ode.nonstiff import DormandPrince853Integrator
    from org.orekit.forces.drag import DragForce, IsotropicDrag
    from org.orekit.orbits import OrbitType
    from org.orekit.propagation.numerical import NumericalPropagator

    c = w._crafts["chief"]
    f = w.forces
    state = c.state
    tol = NumericalPropagator.tolerances(float(f.env.position_tolerance_m), state.getOrbit(), OrbitType.EQUINOCTIAL)
    integ = DormandPrince853Integrator(1e-3, MAX_STEP_S, tol[0], tol[1])
    p = NumericalPropagator(integ)
    p.setOrbitType(OrbitType.EQUINOCTIAL)
    p.setMu(f.mu_m3ps2)
    for fm in c.static_forces:
        p.addForceModel(fm)
    p.addForceModel(DragForce(f.atmosphere, IsotropicDrag(float(c.area_ref), float(c.bus.cd) * c.area_at(0.0) / c.area_ref)))
    p.setInitialState(state)
    t0 = time.perf_counter()
    for d in range(days):
        integ.setInitialStepSize(MAX_STEP_S)
        p.propagate(f.epoch.shiftedBy(86400.0 * (d + 1)))
    return (time.perf_counter() - t0) / days


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
    res = {"bare": [], "covey_day": [], "covey_day_nolog": [], "covey_cycle": []}
    for _ in range(args.repeats):
        res["bare"].append(bare_seconds_per_day(args.days))
        res["covey_day"].append(covey_seconds_per_day(args.days, 86400.0))
        res["covey_day_nolog"].append(covey_seconds_per_day(args.days, 86400.0, 86400.0))
        res["covey_cycle"].append(covey_seconds_per_day(args.days, 5400.0))
    med = {k: statistics.median(v) for k, v in res.items()}
    low = {k: min(v) for k, v in res.items()}
    print(f"full preset, 500 km SSO, 60 s sampling, {args.days} day(s) x {args.repeats} interleaved repeats, "
          f"wall-clock; all runs:")
    for k, v in res.items():
        print(f"  {k:12s} {[round(x, 3) for x in v]}")
    print(f"ratio of the minima: one call per day {low['covey_day'] / low['bare']:.3f}, "
          f"same without 60 s samples {low['covey_day_nolog'] / low['bare']:.3f}, "
          f"5400 s cycle {low['covey_cycle'] / low['bare']:.3f}")
    print("medians:")
    print(f"bare Orekit, one propagate() per day       : {med['bare']:.3f} s per spacecraft-day")
    print(f"covey TruthWorld, advance_to once per day  : {med['covey_day']:.3f} s per spacecraft-day")
    print(f"  same, one sample per day (no 60 s log)   : {med['covey_day_nolog']:.3f} s per spacecraft-day")
    print(f"covey TruthWorld, advance_to every 5400 s  : {med['covey_cycle']:.3f} s per spacecraft-day")
    print(f"ratio covey/bare (one call per day)        : {med['covey_day'] / med['bare']:.3f}  (target <= 1.1)")
    print(f"ratio covey/bare (5400 s guidance cycle)   : {med['covey_cycle'] / med['bare']:.3f}")


if __name__ == "__main__":
    main()

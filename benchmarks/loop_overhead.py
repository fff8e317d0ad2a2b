"""Cost of covey's closed loop against a bare Orekit propagation of the same spacecraft.

Closed loop: ``scenarios/demo_formation.toml`` (chief + 2 deputies, 500 km sun-synchronous,
``full`` preset: 20x20 gravity, NRLMSISE-00 with CSSI data, Sun, Moon, SRP, a Gauss-Markov truth
density error; realistic navigation and actuator errors), with the duration set to ``--days``
(default 10), both deadlines to ``--days - 1`` and law ``hybrid_resolve`` re-solving every
``cycle_s = resolve_s = 5400 s`` (0.95 of the chief's 5677 s orbit), flown through
:func:`sim.loop.run.run_scenario` exactly as ``covey run`` flies it (60 s truth samples, Eckstein-Hechler
mean elements and mean ROE, HDF5 log, metrics). The wall time is the whole ``run_scenario`` call
(truth set-up and metrics included; the JVM is already booted).

Bare: the same three spacecraft with the same force model, built by covey's own builders
(``TruthWorld.bare_propagator``: the initial osculating states, ``ForceEnvironment.static_forces``
and the drag over the whole run, which carries the density-error spans and the initial mode's
drag area; the attitude-mode switches commanded by guidance are not in it), the same integrator settings
(DormandPrince853, Orekit tolerances for ``position_tolerance_m`` in equinoctial elements, step
cap ``MAX_STEP_S``, initial step set), and ONE ``propagate()`` per spacecraft over the whole
duration: no step handler, no event detector, no guidance.

Both are warmed up first (the JIT needs several simulated days, benchmarks/RESULTS.md [orekit]). The bare
propagation is timed before and after the closed loop; the ratio is closed loop / mean of the two.
The breakdown times covey's own functions from outside (wrappers installed by this script, not by
covey): truth propagation (``TruthWorld.advance_to``; the step handler's own Python time is shown
inside it), sample draining, mean elements, navigation, guidance, actuators, HDF5 logging (work on
the log-writer thread shown as ``[worker]``, overlapped with the loop), metrics. Also printed: the
ratio without the law's own ``step()`` time (the harness alone) and the law time that leaves
within the 1.2 target, the process CPU-time ratio, and a reference that is not the target: a
bare *replay* of what the loop flew (the flown mode
switches as drag-coefficient spans, the executed impulses as Orekit ImpulseManeuvers, one
``propagate()`` per spacecraft, no Python in the loop), which prices the physics the guidance
asked for (events, integrator resets) apart from covey's harness; its end positions are compared
with the closed loop's as a sanity check.

The closed loop propagates its spacecraft on ``COVEY_TRUTH_THREADS`` threads (default: the
cores); the target's bare reference is sequential, and a bare run on the same threads is printed
as a further reference line.

Usage: ``python benchmarks/loop_overhead.py [--days 10] [--warmup-days 3] [--no-thread]
[--no-early-start] [--repeat N] [--profile FILE] [--keep-log PATH]``

``--repeat N`` flies the closed loop N times in all, each followed by a bare run, and prints
every ratio (each closed loop over the mean of the bare runs either side) and their median: the
machine's speed drifts by tens of per cent within minutes, and one ratio is one sample.

``--no-early-start`` turns off :meth:`sim.truth.world.TruthWorld.start_early` (the chief's segment run
while the law works) to price it: it saves the chief's propagation from the critical path but
slows the law's Python while a Java propagation runs beside it (benchmarks/RESULTS.md [two-threads]).
"""

from __future__ import annotations

import argparse
import functools
import sys
import tempfile
import threading
import time
from collections import defaultdict
from concurrent.futures import Future
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from sim.scenario.reader import load_scenario  # noqa: E402

SCENARIO = ROOT / "scenarios" / "demo_formation.toml"
CYCLE_S = 5400.0

TIMERS: dict[str, float] = defaultdict(float)
BARE_CPU: list[float] = []
CALLS: dict[str, int] = defaultdict(int)


def make_cfg(days: float, scenario: Path = SCENARIO):
    ov = {"run.duration_days": float(days), "guidance.law": "hybrid_resolve",
          "guidance.cycle_s": CYCLE_S, "guidance.settings.resolve_s": CYCLE_S}
    for k in range(2):
        ov[f"deputies[{k}].deadline_days"] = max(float(days) - 1.0, 0.5 * float(days))
    return load_scenario(scenario, ov)


_DEPTH = threading.local()


def _timed(key: str, fn):
    """Wrap ``fn``: wall time per key, outermost call only (a nested call of the same key is
    not counted twice); calls from another thread than the main one go under "[worker] key"."""
    @functools.wraps(fn)
    def wrapper(*a, **kw):
        k = key if threading.current_thread() is threading.main_thread() else "[worker] " + key.strip()
        depth = getattr(_DEPTH, k, 0)
        setattr(_DEPTH, k, depth + 1)
        t0 = time.perf_counter()
        try:
            return fn(*a, **kw)
        finally:
            setattr(_DEPTH, k, depth)
            if depth == 0:
                TIMERS[k] += time.perf_counter() - t0
                CALLS[k] += 1

    wrapper.__wrapped_original__ = fn
    return wrapper


def install_timers() -> None:
    """Wrap covey's functions with timers (class attributes, so every instance is timed)."""
    import sim.models.actuators as act
    import sim.loop.engine as eng
    import sim.orekit.meanroe as meanroe
    import sim.models.navigation as nav
    import sim.log.buffer as buffer
    import sim.log.recorder as recorder
    import sim.loop.run as run
    import sim.truth.world as truth
    from guidance.registry import LAWS

    T = truth.TruthWorld
    for name, key in (("advance_to", "truth propagation (advance_to)"),
                      ("drain_samples", "drain samples (modes, areas, density scale)"),
                      ("states", "truth states"),
                      ("set_impulses", "actuators + loading"), ("set_mode_schedule", "actuators + loading")):
        setattr(T, name, _timed(key, getattr(T, name)))
    T.__init__ = _timed("truth set-up (TruthWorld())", T.__init__)
    meanroe.mean_elements = _timed("mean elements (Eckstein-Hechler)", meanroe.mean_elements)
    nav.NavigationModel.estimate = _timed("navigation", nav.NavigationModel.estimate)
    for name in ("execute_impulses", "realise_switches"):
        setattr(act.ActuatorModel, name, _timed("actuators + loading", getattr(act.ActuatorModel, name)))
    law = LAWS["hybrid_resolve"]
    law.step = _timed("guidance (law.step)", law.step)
    for name in ("append", "flush", "write_dataset", "write_attrs"):
        setattr(recorder.RunRecorder, name, _timed("logging (HDF5)", getattr(recorder.RunRecorder, name)))
    for name in ("append", "write"):
        setattr(buffer.BufferedLog, name, _timed("logging (HDF5)", getattr(buffer.BufferedLog, name)))
    wait = _timed("waiting for the log-writer thread", Future.result)
    plain = Future.result

    @functools.wraps(plain)
    def result(self, *a, **kw):  # the truth's propagation threads are waited for inside advance_to
        if getattr(_DEPTH, "truth propagation (advance_to)", 0):
            return plain(self, *a, **kw)
        return wait(self, *a, **kw)

    Future.result = result
    run.run_metrics = _timed("metrics", run.run_metrics)
    eng.ClosedLoopEngine.finish = _timed("finish (believed density)", eng.ClosedLoopEngine.finish)


def time_sampler() -> None:
    """Wrap the truth step handler's Python method (the proxy class exists after a first world)."""
    from sim.truth.sampling import sampler_class

    cls = sampler_class()
    if cls is None or hasattr(cls.handleStep, "__wrapped_original__"):
        return
    cls.handleStep = _timed("  of which step handler (Python)", cls.handleStep)


def bare_seconds(cfg) -> tuple[float, list[float]]:
    """One propagate() per spacecraft over the whole run, same force model, no handler."""
    w = fresh_world(cfg)  # covey's own builders: initial states, static forces, drag with its spans
    f = w.forces
    T = float(cfg.duration_s)
    props = [w.bare_propagator(name)[0] for name in w.names]
    each = []
    c0 = time.process_time()
    t0 = time.perf_counter()
    for p in props:
        t1 = time.perf_counter()
        p.propagate(f.epoch.shiftedBy(T))
        each.append(time.perf_counter() - t1)
    BARE_CPU.append(time.process_time() - c0)
    return time.perf_counter() - t0, each


def bare_threaded_seconds(cfg, threads: int) -> float:
    """The bare reference on ``threads`` threads (the closed loop's truth threads): a reference
    line, not the target's definition (one propagate() per spacecraft, one after the other)."""
    from sim.truth.world import thread_pool

    w = fresh_world(cfg)
    T = float(cfg.duration_s)
    props = [w.bare_propagator(name)[0] for name in w.names]
    t0 = time.perf_counter()
    futures = [thread_pool(threads).submit(p.propagate, w.forces.epoch.shiftedBy(T)) for p in props]
    for f in futures:
        f.result()
    return time.perf_counter() - t0


WORLDS: list = []


def capture_worlds() -> None:
    """Keep every TruthWorld built from now on (the replay below needs the flown timelines)."""
    from sim.truth.world import TruthWorld

    init = TruthWorld.__init__

    @functools.wraps(init)
    def keep(self, *a, **kw):
        init(self, *a, **kw)
        WORLDS.append(self)

    TruthWorld.__init__ = keep


def replay_seconds(cfg, world, log_path: Path) -> float:
    """Bare propagation of what the closed loop flew: one propagate() per spacecraft over the
    whole run with the flown attitude-mode drag spans (``TruthWorld._drag_force`` over the
    whole timeline, realised areas included) and the executed impulses as Orekit
    ImpulseManeuvers on DateDetectors (RTN = Orekit's QSW local orbital frame). No Python
    step handler or event handler: the cost of the physics the loop asked for, without covey.
    """
    from org.hipparchus.geometry.euclidean.threed import Vector3D
    from org.orekit.attitudes import LofOffset
    from org.orekit.forces.maneuvers import ImpulseManeuver
    from org.orekit.frames import LOFType
    from org.orekit.propagation.events import DateDetector

    from sim.log.reader import read_log

    log = read_log(log_path)
    names = [x.decode() if isinstance(x, bytes) else str(x) for x in log.get("maneuvers/name")]
    t_b = np.asarray(log.get("maneuvers/t_s"), dtype=float)
    dv_b = np.asarray(log.get("maneuvers/dv_rtn_mps"), dtype=float).reshape(-1, 3)
    w0 = fresh_world(cfg)  # initial states as the run had them
    f = world.forces
    T = float(cfg.duration_s)
    props = []
    lof = LofOffset(f.gcrf, LOFType.QSW)
    isp = {sc.name: (sc.bus.thruster.isp_s if sc.bus.thruster else 0.0) for sc in cfg.spacecraft}
    for name in world.names:
        p, _ = world.bare_propagator(name, T, state=w0.orekit_state(name))  # the flown drag spans
        for tk, dk, nk in zip(t_b, dv_b, names):
            if nk == name:
                p.addEventDetector(ImpulseManeuver(DateDetector(f.epoch.shiftedBy(float(tk))), lof,
                                                   Vector3D(float(dk[0]), float(dk[1]), float(dk[2])),
                                                   float(isp[name])))
        props.append(p)
    t0 = time.perf_counter()
    ends = [p.propagate(f.epoch.shiftedBy(T)) for p in props]
    wall = time.perf_counter() - t0
    gap = []
    for s_end, name in zip(ends, world.names):
        d = s_end.getPosition(f.gcrf).subtract(world.orekit_state(name).getPosition(f.gcrf))
        gap.append(float(d.getNorm()))
    REPLAY_GAP_M[:] = gap
    return wall


REPLAY_GAP_M: list = []


from sim.loop.options import RunOptions  # noqa: E402

OPTIONS = RunOptions()
"""How the timed closed loop is computed (``--no-thread`` changes it)."""


def fresh_world(cfg):
    """A TruthWorld built by the original constructor (not timed, not captured by this script)."""
    from sim.truth.world import TruthWorld

    init = TruthWorld.__init__
    while hasattr(init, "__wrapped__"):
        init = init.__wrapped__
    w = TruthWorld.__new__(TruthWorld)
    init(w, cfg)
    return w


def closed_loop_seconds(cfg, out: Path, profile: str | None = None):
    from sim.loop.run import run_scenario

    if profile:
        import cProfile

        pr = cProfile.Profile()
        t0 = time.perf_counter()
        pr.enable()
        summary = run_scenario(cfg, out, options=OPTIONS)
        pr.disable()
        wall = time.perf_counter() - t0
        pr.dump_stats(profile)
    else:
        t0 = time.perf_counter()
        summary = run_scenario(cfg, out, options=OPTIONS)
        wall = time.perf_counter() - t0
    if summary.status != "ok":
        raise SystemExit(f"closed loop did not finish: {summary.status} {summary.reason}")
    return wall, summary


def closed_loop_cpu(cfg, out: Path, profile: str | None = None):
    c0 = time.process_time()
    wall, summary = closed_loop_seconds(cfg, out, profile)
    return wall, time.process_time() - c0, summary


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--days", type=float, default=10.0)
    ap.add_argument("--warmup-days", type=float, default=3.0)
    ap.add_argument("--profile", default=None, help="write a cProfile of the closed loop here")
    ap.add_argument("--keep-log", default=None, help="keep the closed-loop run log at this path")
    ap.add_argument("--no-thread", action="store_true",
                    help="write the log on the main thread (RunOptions(log_thread=False))")
    ap.add_argument("--repeat", type=int, default=1,
                    help="closed-loop runs in all (each followed by a bare run); prints the median ratio")
    ap.add_argument("--no-early-start", action="store_true",
                    help="no early start of the chief's segments (TruthWorld.start_early off)")
    args = ap.parse_args()
    if args.repeat < 1:
        ap.error(f"--repeat {args.repeat}: a whole number of runs, 1 or more")
    if args.no_early_start:
        import sim.truth.world

        sim.truth.world.TruthWorld.start_early = lambda self, t_s, names: []
    if args.no_thread:
        global OPTIONS
        OPTIONS = OPTIONS.replace(log_thread=False)

    from sim.orekit.boot import boot

    boot()
    cfg = make_cfg(args.days)
    warm = make_cfg(args.warmup_days)
    tmp = Path(tempfile.mkdtemp(prefix="covey_loop_bench_"))
    # warm-up (not timed): the JIT needs several simulated days before timings settle
    t0 = time.perf_counter()
    bare_seconds(warm)
    closed_loop_seconds(warm, tmp / "warm.h5")
    warm_s = time.perf_counter() - t0

    bare_before, each_before = bare_seconds(cfg)
    capture_worlds()
    install_timers()
    time_sampler()
    TIMERS.clear()
    CALLS.clear()
    out = Path(args.keep_log) if args.keep_log else tmp / "loop.h5"
    wall, cpu, summary = closed_loop_cpu(cfg, out, args.profile)
    timers = dict(TIMERS)
    calls = dict(CALLS)
    flown = WORLDS[-1]  # the closed loop's truth
    bare_after, each_after = bare_seconds(cfg)
    replay = replay_seconds(cfg, flown, out)
    threads = int(getattr(flown, "threads", 1))
    bare_par = bare_threaded_seconds(cfg, threads) if threads > 1 else None
    bare = 0.5 * (bare_before + bare_after)
    bare_cpu = 0.5 * (BARE_CPU[-2] + BARE_CPU[-1])

    n_sc = len(summary.spacecraft)
    n_cyc = int(round(cfg.duration_s / CYCLE_S))
    print(f"{cfg.name}: {n_sc} spacecraft, {args.days:g} days, law hybrid_resolve, cycle_s = resolve_s = "
          f"{CYCLE_S:g} s ({n_cyc} cycles), log_step_s = {cfg.log_step_s:g} s, full force model, "
          f"realistic navigation and actuators; warm-up {args.warmup_days:g} days ({warm_s:.1f} s)")
    print(f"bare Orekit, one propagate() per spacecraft : before {bare_before:.2f} s "
          f"({', '.join(f'{x:.2f}' for x in each_before)}), after {bare_after:.2f} s "
          f"({', '.join(f'{x:.2f}' for x in each_after)}), mean {bare:.2f} s "
          f"= {bare / (n_sc * args.days):.3f} s per spacecraft-day")
    guid = timers.get("guidance (law.step)", 0.0)
    print(f"closed loop, run_scenario wall time          : {wall:.2f} s "
          f"= {wall / (n_sc * args.days):.3f} s per spacecraft-day "
          f"(log-writer thread: {'on' if OPTIONS.log_thread else 'off'})")
    print(f"RATIO closed loop / bare                     : {wall / bare:.3f}  (target <= 1.2)")
    harness = (wall - guid) / bare  # the loop without the law's own time, x bare
    print(f"  without the guidance law's own time         : {harness:.3f}  "
          f"(law.step {guid:.2f} s = {guid / bare:.3f} x bare)")
    budget = (1.2 - harness) * bare
    print(f"  the law's time the 1.2 target leaves         : {budget:.2f} s (it took {guid:.2f} s: "
          f"{guid / budget:.2f} x that)" if budget > 0 else
          f"  the law's time the 1.2 target leaves         : none (the loop without it is already "
          f"{harness:.3f} x bare)")
    print(f"  reference: bare replay of what was flown     : {replay:.2f} s (same switches as drag "
          f"spans, same executed impulses, one propagate() each) = {replay / bare:.3f} x bare; closed loop / "
          f"replay {wall / replay:.3f}; replay end position - closed-loop truth end position "
          f"{', '.join(f'{g:.1f}' for g in REPLAY_GAP_M)} m")
    print(f"  process CPU time, closed loop / bare        : {cpu:.2f} / {bare_cpu:.2f} s = {cpu / bare_cpu:.3f} "
          f"(all threads, JVM included)")
    print(f"  truth threads in the closed loop            : {threads} (COVEY_TRUTH_THREADS; the bare "
          f"reference above is one propagate() after the other)")
    if bare_par is not None:
        print(f"  reference: bare on {threads} threads             : {bare_par:.2f} s; closed loop / "
              f"that {wall / bare_par:.3f}")
    print("where the closed-loop wall time goes (s, share, calls; [worker] = on the log-writer "
          "thread, overlapped with the main thread):")
    main_keys = [k for k in timers if not k.startswith("  ") and not k.startswith("[worker]")]
    top = sum(timers[k] for k in main_keys)
    order = ["truth propagation (advance_to)", "  of which step handler (Python)"]
    order += [k for k in sorted(main_keys, key=lambda k: -timers[k]) if k not in order]
    order += sorted((k for k in timers if k.startswith("[worker]")), key=lambda k: -timers[k])
    for k in order:
        if k in timers:
            print(f"  {k:46s} {timers[k]:8.2f}  {100 * timers[k] / wall:5.1f} %  {calls.get(k, 0):7d}")
    print(f"  {'other (engine loop, checks, run set-up)':46s} {wall - top:8.2f}  "
          f"{100 * (wall - top) / wall:5.1f} %")
    print(f"  truth propagation minus bare                 {timers.get('truth propagation (advance_to)', 0) - bare:8.2f}")
    if args.repeat > 1:
        ratios = [wall / bare]
        b_prev = bare_after
        for k in range(1, args.repeat):
            w_k, _, _ = closed_loop_cpu(cfg, tmp / f"loop{k}.h5", None)
            b_k, _ = bare_seconds(cfg)
            ratios.append(w_k / (0.5 * (b_prev + b_k)))
            b_prev = b_k
        print(f"RATIO over {args.repeat} runs (each closed loop / mean of the bare runs either side): "
              f"{', '.join(f'{r:.3f}' for r in ratios)}; median {float(np.median(ratios)):.3f}  "
              f"(target <= 1.2)")
    m = {d.name: d for d in summary.metrics}
    print("run result: " + "; ".join(
        f"{n}: dv {d.dv_total_mps:.4f} m/s, final |err| {d.final_error_norm_m:.1f} m"
        for n, d in m.items()))
    if args.profile:
        import pstats

        print(f"cProfile written to {args.profile} (profiling slows the closed loop: ratio above not comparable)")
        pstats.Stats(args.profile).sort_stats("tottime").print_stats(25)


if __name__ == "__main__":
    main()

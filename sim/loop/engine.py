"""The closed loop: truth -> navigation -> guidance law -> actuators -> truth, cycle by cycle.

:class:`Engine` is the free-drift cycle loop (advance the truth cycle by cycle, record what it
produced); :class:`ClosedLoopEngine` extends it with the guidance cycle.
At each cycle time ``t`` it

1. reads the truth states and makes navigation estimates (:mod:`sim.models.navigation`);
2. calls the law (``step(t, nav)``) and checks its answer (types, finite numbers, known modes,
   times not in the past); a law that raises or answers badly ends the run as ``failed``
   with the reason and traceback in the log, everything recorded so far kept;
3. keeps each spacecraft's latest plan and passes the items that fall in ``[t, t_next)``
   through the actuator models (:mod:`sim.models.actuators`): burns with execution errors and limits,
   mode switches with slew and realised drag-area factors;
4. loads those into the truth world and advances it continuously to ``t_next`` (burns and
   switches are events inside the integration, not restarts).

Everything goes to the run log next to the truth: navigation errors, commands versus executed,
per-cycle guidance diagnostics (status, solve time, predicted remaining delta-v, predicted mean
ROE), guidance-believed density at each spacecraft.
"""

from __future__ import annotations

import dataclasses
import time
from concurrent.futures import ThreadPoolExecutor
from types import SimpleNamespace
from typing import Any, Callable

import numpy as np

from guidance.interface import ROE_NAMES, GuidanceInputError, GuidanceOutput, SpacecraftCommand

from sim.models.actuators import ActuatorModel
from sim.scenario.config import RunConfig
from sim.loop.mission import build_mission
from sim.models.navigation import NavigationModel
from sim.log.recorder import RunRecorder
from sim.errors import PropagationError
from sim.log.buffer import BufferedLog
from sim.loop.checks import EPS_T as _EPS_T, GuidanceFailure, check_output
from sim.loop.options import RunOptions


__all__ = ["Engine", "ClosedLoopEngine", "GuidanceFailure", "check_output", "MEAN_OE_NAMES",
           "ProgressFn"]

MEAN_OE_NAMES = ("a_m", "ex", "ey", "i_deg", "raan_deg", "u_deg")
"""Datasets of ``/spacecraft/<name>/mean_oe`` (Eckstein-Hechler mean elements, TOD)."""

ProgressFn = Callable[[float, float], None]


class Engine:
    """The cycle loop of one run.

    Parameters
    ----------
    cfg : RunConfig
    rec : RunRecorder
    world : TruthWorld
        The truth (``sim.truth.world.TruthWorld`` or anything with its interface).
    api : namespace
        ``mean_elements`` and ``mean_roe_m`` (``sim.orekit.meanroe``).
    progress : callable, optional
        ``progress(t_s, duration_s)`` once at the start and after every cycle.
    options : RunOptions, optional
        Log-writer thread and write intervals (:class:`sim.loop.options.RunOptions`).
    """

    def __init__(self, cfg: RunConfig, rec: RunRecorder, world: Any, api: SimpleNamespace,
                 progress: ProgressFn | None = None, options: RunOptions | None = None):
        self.cfg, self.world, self.api = cfg, world, api
        self.options = options if options is not None else RunOptions()
        self.rec = rec if isinstance(rec, BufferedLog) else BufferedLog(rec)
        self._log_written_t_s = 0.0
        self._log_written_wall = time.perf_counter()
        self._checkpoint_wall = -np.inf  # the first recorded cycle is checkpointed
        self._cycles_since_checkpoint = 0
        self._t_logged_s = 0.0
        # HDF5 compression and writing of the buffered rows on a thread of its own
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="covey-log") \
            if self.options.log_thread else None
        self.progress = progress
        self.names: tuple[str, ...] = tuple(world.names)
        self.chief = self.names[0]
        self.t_s = 0.0
        self.n_samples = 0
        self.final_roe: dict[str, np.ndarray] = {}
        self.dv_total: dict[str, float] = {n: 0.0 for n in self.names}
        # truth samples the judge's mean theory could not convert (NaN rows of mean_oe)
        self.n_unconverted: dict[str, int] = {n: 0 for n in self.names}
        self._declare()

    # -- set-up ------------------------------------------------------------------------------
    def _declare(self) -> None:
        """Spacecraft attributes and empty tables, so every log has the same layout."""
        rec = self.rec
        sc_cfg = {sc.name: sc for sc in self.cfg.spacecraft}
        rec.write_attrs("spacecraft", names=list(self.names), chief=self.chief,
                        truth_density_method=str(getattr(self.world, "density_method", "unknown")),
                        truth_sampler=("orekit_oem_writer" if getattr(self.world, "java_sampler", False)
                                       else "python_step_handler"),
                        truth_threads=int(getattr(self.world, "threads", 1)))
        for name in self.names:
            sc = sc_cfg.get(name)
            modes = list(self.world.mode_names(name))
            areas = self.world.mode_area_m2(name)
            rec.write_attrs(f"spacecraft/{name}", role="chief" if name == self.chief else "deputy",
                            bus=sc.bus.name if sc else "", initial_mode=sc.initial_mode if sc else "",
                            mode_names=modes,
                            mode_area_m2=np.array([float(areas.get(m, np.nan)) for m in modes]))
        rec.append("maneuvers", t_s=np.zeros(0), name=np.array([], dtype=str),
                   dv_rtn_mps=np.zeros((0, 3)), dv_eci_mps=np.zeros((0, 3)),
                   mass_before_kg=np.zeros(0), mass_after_kg=np.zeros(0))
        rec.append("events", t_s=np.zeros(0), name=np.array([], dtype=str),
                   kind=np.array([], dtype=str), detail=np.array([], dtype=str))

    # -- the loop ----------------------------------------------------------------------------
    def plan(self, t_s: float, t_next_s: float) -> None:
        """Load mode schedules and impulses for the interval [t_s, t_next_s).

        Free drift: nothing. The closed loop (navigation -> guidance -> actuators) goes here:
        read ``self.world.states()``, build estimates, call the law, then
        ``self.world.set_mode_schedule(...)`` / ``set_impulses(...)``, and log with
        ``self.rec.append("guidance/...", t_s=..., ...)``.
        """

    def finish(self) -> None:
        """Called once after the loop ended normally (ok or stopped), before the log is closed:
        summary datasets of later engines go here. Free drift: nothing."""

    def run(self) -> tuple[str, str]:
        """Fly to the end (or to a stop event). Returns (status, reason)."""
        T = self.cfg.duration_s
        cycle = self.cfg.guidance.cycle_s
        k = 0
        if self.progress is not None:
            self.progress(self.t_s, T)
        while self.t_s < T - 1e-9:
            t_next = min((k + 1) * cycle, T)
            self.plan(self.t_s, t_next)
            res = self.world.advance_to(t_next)
            self.record_interval()
            if not res.stopped and res.t_s < t_next - 1e-6:
                raise PropagationError(res.t_s, ",".join(self.names),
                                       f"truth stopped short of t = {t_next:.1f} s without a reason")
            self.t_s = float(res.t_s)
            k += 1
            if self.progress is not None:
                self.progress(self.t_s, T)
            if res.stopped:
                return "stopped", str(res.reason or "stopped by an event")
        return "ok", ""

    # -- recording ---------------------------------------------------------------------------
    def record_interval(self) -> None:
        """Drain the truth world's buffers into the log: samples (+ mean elements and mean ROE),
        executed impulses, events; write the buffered rows and checkpoint the log when due
        (:class:`sim.loop.options.RunOptions` ``log_write_*``, ``checkpoint_*``)."""
        self.rec.check()  # a failed background write (disk full, ...) ends the run here
        samples = self.world.drain_samples()
        chief_mean = None
        chief_t = None
        for name in self.names:
            s = samples.get(name)
            if not s or len(s["t_s"]) == 0:
                continue
            modes = list(self.world.mode_names(name))
            self.rec.append(f"spacecraft/{name}/truth",
                            attrs={"mode_index": {"mode_names": modes}}, **s)
            t = np.asarray(s["t_s"], dtype=float)
            mean = np.asarray(self.api.mean_elements(t, s["r_eci_m"], s["v_eci_mps"],
                                                     self.cfg.epoch_utc), dtype=float)
            self.n_unconverted[name] = self.n_unconverted.get(name, 0) + int(
                np.count_nonzero(np.isnan(mean).any(axis=1)))
            oe = {"a_m": mean[:, 0], "ex": mean[:, 1], "ey": mean[:, 2],
                  "i_deg": np.degrees(mean[:, 3]), "raan_deg": np.degrees(mean[:, 4]) % 360.0,
                  "u_deg": np.degrees(mean[:, 5]) % 360.0}
            self.rec.append(f"spacecraft/{name}/mean_oe", units={"ex": "1", "ey": "1"}, **oe)
            if name == self.chief:
                chief_mean, chief_t = mean, t
                self.n_samples += len(t)
                self._t_logged_s = float(t[-1])
                continue
            roe = np.full((len(t), 6), np.nan)
            if chief_mean is not None:
                idx = np.searchsorted(chief_t, t)
                idx = np.clip(idx, 0, len(chief_t) - 1)
                ok = np.abs(chief_t[idx] - t) < 1e-6
                if ok.any():
                    roe[ok] = self.api.mean_roe_m(chief_mean[idx[ok]], mean[ok])
            self.rec.append(f"spacecraft/{name}", units={"mean_roe_m": "m"},
                            attrs={"mean_roe_m": {"columns": list(ROE_NAMES),
                                                  "reference": self.chief}},
                            mean_roe_m=roe)
            self.final_roe[name] = roe[-1]

        imps = self.world.drain_executed_impulses()
        if imps:
            cols = {k: [] for k in imps[0]}
            for imp in imps:
                for k in cols:
                    cols[k].append(imp.get(k))
                self.dv_total[imp["name"]] = self.dv_total.get(imp["name"], 0.0) + float(
                    np.linalg.norm(imp["dv_rtn_mps"]))
            self.rec.append("maneuvers", **{k: np.asarray(v) for k, v in cols.items()})
        events = self.world.drain_events()
        if events:
            self.rec.append("events", t_s=[float(e["t_s"]) for e in events],
                            name=[str(e.get("name", "")) for e in events],
                            kind=[str(e.get("kind", "")) for e in events],
                            detail=[str(e.get("detail", "")) for e in events])
        now = time.perf_counter()
        opts = self.options
        self._cycles_since_checkpoint += 1
        checkpoint = (now - self._checkpoint_wall >= opts.checkpoint_wall_s
                      or (opts.checkpoint_cycles > 0
                          and self._cycles_since_checkpoint >= opts.checkpoint_cycles))
        if (checkpoint or self.t_s - self._log_written_t_s >= opts.log_write_sim_s - 1e-6
                or now - self._log_written_wall >= opts.log_write_wall_s):
            progress = (self._t_logged_s, self.n_samples)
            if self._pool is None:
                if checkpoint:
                    self.rec.checkpoint(*progress)
                else:
                    self.rec.flush()
            else:  # compressed and written on the writer thread
                self.rec.write_async(self._pool, checkpoint=progress if checkpoint else None)
            self._log_written_t_s = self.t_s
            self._log_written_wall = now
            if checkpoint:
                self._checkpoint_wall = now
                self._cycles_since_checkpoint = 0

    def write_judge_counts(self) -> None:
        """``/spacecraft/<name>/mean_oe@n_unconverted``: truth samples the judge's mean theory
        could not convert (their mean elements and mean ROE are NaN), so a gap is counted, not
        silent."""
        for name in self.names:
            if f"spacecraft/{name}/mean_oe/a_m" in self.rec.file:
                self.rec.write_attrs(f"spacecraft/{name}/mean_oe",
                                     n_unconverted=int(self.n_unconverted.get(name, 0)))

    def flush_log(self) -> None:
        """Write the buffered log rows to the file and flush it (also done at least every
        ``options.log_write_sim_s`` simulated or ``options.log_write_wall_s`` wall-clock seconds)."""
        self.rec.flush()
        self._log_written_t_s = self.t_s
        self._log_written_wall = time.perf_counter()

    def close(self) -> None:
        """Stop the log-writer thread (after its queued work; idempotent)."""
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None
            try:
                self.rec.wait()
            except Exception:  # noqa: BLE001 - raised already by flush_log, or the run failed
                pass


class ClosedLoopEngine(Engine):
    """Free-drift engine plus navigation, a guidance law and actuators (see module docstring).

    Parameters
    ----------
    cfg, rec, world, api, progress
        As :class:`Engine`.
    law : GuidanceLaw
        A constructed law (not yet set up).
    """

    def __init__(self, cfg: RunConfig, rec: RunRecorder, world: Any, api: SimpleNamespace,
                 progress: ProgressFn | None, law: Any, options: RunOptions | None = None):
        super().__init__(cfg, rec, world, api, progress, options)
        self.law = law
        self.law_name = cfg.guidance.law
        self.deputy_names = self.names[1:]
        self.modes = {n: tuple(world.mode_names(n)) for n in self.names}
        self.mission = build_mission(cfg, world.mode_area_m2)
        buses = {sc.name: sc.bus for sc in cfg.spacecraft}
        self.nav = NavigationModel(cfg.navigation, cfg.seed, self.chief, self.deputy_names)
        self.act = ActuatorModel(cfg.actuators, cfg.seed, buses,
                                 {n: b.mass_kg for n, b in buses.items()},
                                 {n: (b.thruster.propellant_kg if b.thruster else 0.0)
                                  for n, b in buses.items()})
        self.plans: dict[str, SpacecraftCommand] = {}
        self.commanded: set[str] = set(self.names)  # spacecraft the law answered for last cycle
        self.cycle = 0
        self.belief = None
        self._setup_law()
        # initial modes: realised area factors of the starting attitude
        # realised per-run drag-area factor of every mode (the attitude pointing error of the
        # initial hold is not modelled; every later switch draws its own)
        for sc in cfg.spacecraft:
            world.set_mode_schedule(sc.name, [], area_factor_by_mode=self.act.area_factor_by_mode(sc.name))

    # -- set-up ------------------------------------------------------------------------------
    def _setup_law(self) -> None:
        try:
            self.law.setup(self.mission)
        except GuidanceInputError:
            raise
        except Exception as exc:  # noqa: BLE001
            raise GuidanceFailure(self.law_name, 0.0, f"setup() raised {type(exc).__name__}: "
                                  + " ".join(str(exc).split())) from exc
        # guidance's own density belief, logged next to the truth density: the law reports it
        # (optional GuidanceLaw method; a law without it has no belief, logged as NaN)
        self.belief = getattr(self.law, "believed_density_kgpm3", None)

    # -- the cycle ---------------------------------------------------------------------------
    def plan(self, t_s: float, t_next_s: float) -> None:
        states = self.world.states()
        truth = {n: (s.r_eci_m, s.v_eci_mps, s.mass_kg) for n, s in states.items()}
        nav, nav_rec = self.nav.estimate(t_s, truth)
        self._log_nav(t_s, nav_rec)
        start_early = getattr(self.world, "start_early", None)
        if start_early is not None:
            # spacecraft the law did not command last cycle and with nothing planned in this
            # interval (typically the chief) start propagating while the law thinks; if the law
            # does change one of them, the truth discards that early segment (same result)
            start_early(t_next_s, [n for n in self.names if n not in self.commanded
                                   and not self._items_in(n, t_s, t_next_s)])
        wall0 = time.perf_counter()
        try:
            try:
                out = self.law.step(t_s, nav)
            except Exception as exc:  # noqa: BLE001
                # one-line reason; the law's traceback reaches /meta/traceback through the chain
                raise GuidanceFailure(self.law_name, t_s,
                                      f"step() raised {type(exc).__name__}: "
                                      + " ".join(str(exc).split())) from exc
            wall = time.perf_counter() - wall0
            cmds = check_output(out, t_s, self.modes, self.law_name)
        except BaseException:
            if start_early is not None:
                self.world.cancel_early()
            raise
        self.commanded = set(cmds)
        self.plans.update(cmds)
        self._log_diagnostics(t_s, out, wall)
        for name in self.names:
            plan = self.plans.get(name)
            if plan is None:
                continue
            imps = [i for i in plan.impulses if t_s - _EPS_T <= i.t_s < t_next_s - _EPS_T]
            sws = [s for s in plan.mode_switches if t_s - _EPS_T <= s.t_s < t_next_s - _EPS_T]
            # a time error cannot move a burn out of its cycle: the truth flies it at the held
            # time, and the log records that time as executed
            executed = [dataclasses.replace(e, t_exec_s=min(max(e.t_exec_s, t_s), t_next_s - 1e-3))
                        for e in self.act.execute_impulses(name, imps, t_not_before_s=t_s)]
            fired = [(e.t_exec_s, np.asarray(e.dv_exec_rtn_mps, float)) for e in executed if e.fired]
            self.world.set_impulses(name, fired)
            realised = self.act.realise_switches(name, sws)
            if realised or name in cmds:
                att = {(round(r.t_start_s, 6), r.mode): float(r.attitude_factor) for r in realised}
                self.world.set_mode_schedule(
                    name, [(r.t_start_s, r.mode) for r in realised],
                    area_factor_fn=lambda m, t, att=att: att.get((round(float(t), 6), m), 1.0))
            self._log_commands(t_s, executed, realised)
        self.cycle += 1

    def _items_in(self, name: str, t_s: float, t_next_s: float) -> bool:
        """Whether the kept plan of ``name`` has a burn or a switch in ``[t_s, t_next_s)``."""
        plan = self.plans.get(name)
        if plan is None:
            return False
        return any(t_s - _EPS_T <= x.t_s < t_next_s - _EPS_T
                   for x in (*plan.impulses, *plan.mode_switches))

    # -- logging -----------------------------------------------------------------------------
    def _log_nav(self, t_s: float, rec: dict) -> None:
        for n, a in rec["abs"].items():
            self.rec.append(f"navigation/absolute/{n}", t_s=[t_s], t_fix_s=[a["t_fix_s"]],
                            err_r_rtn_m=a["dr_rtn_m"][None], err_v_rtn_mps=a["dv_rtn_mps"][None],
                            sigma_r_rtn_m=a["sigma_r_rtn_m"][None],
                            sigma_v_rtn_mps=a["sigma_v_rtn_mps"][None],
                            r_eci_m=a["r_eci_m"][None], v_eci_mps=a["v_eci_mps"][None],
                            valid=[not rec["abs_outage"]], units={"valid": "1"})
        for n, a in rec["rel"].items():
            self.rec.append(f"navigation/relative/{n}", t_s=[t_s], t_fix_s=[a["t_fix_s"]],
                            err_dr_rtn_m=a["ddr_rtn_m"][None], err_dv_rtn_mps=a["ddv_rtn_mps"][None],
                            sigma_dr_rtn_m=a["sigma_dr_rtn_m"][None],
                            sigma_dv_rtn_mps=a["sigma_dv_rtn_mps"][None],
                            valid=[not rec["rel_outage"]], units={"valid": "1"})

    def _log_diagnostics(self, t_s: float, out: GuidanceOutput, wall_s: float) -> None:
        d = out.diagnostics
        dvr = dict(d.dv_remaining_mps or {})
        self.rec.append("guidance/cycles", t_s=[t_s], status=[str(d.status)],
                        message=[str(d.message)[:2000]], solve_time_s=[float(d.solve_time_s)],
                        step_wall_s=[wall_s], cycle_index=[self.cycle],
                        units={"cycle_index": "1"})
        for n in self.deputy_names:
            v = float(dvr.get(n, np.nan))
            self.rec.append(f"guidance/deputies/{n}", t_s=[t_s], dv_remaining_mps=[v])
            roe = (d.predicted_roe_m or {}).get(n)
            tp = np.asarray(d.predicted_t_s, float).reshape(-1)
            if roe is not None and tp.size and np.shape(roe) == (tp.size, 6):
                self.rec.append(f"guidance/predicted/{n}", cycle_t_s=np.full(tp.size, t_s),
                                t_s=tp, roe_m=np.asarray(roe, float))

    def _log_commands(self, t_s: float, executed, realised) -> None:
        if executed:
            self.rec.append(
                "commands/impulses", cycle_t_s=np.full(len(executed), t_s),
                name=[e.name for e in executed], t_cmd_s=[e.t_cmd_s for e in executed],
                dv_cmd_rtn_mps=np.array([e.dv_cmd_rtn_mps for e in executed], float),
                t_exec_s=[e.t_exec_s for e in executed],
                dv_exec_rtn_mps=np.array([e.dv_exec_rtn_mps for e in executed], float),
                status=[e.status for e in executed],
                propellant_used_kg=[e.propellant_used_kg for e in executed],
                mass_before_kg=[e.mass_before_kg for e in executed])
        if realised:
            self.rec.append(
                "commands/switches", cycle_t_s=np.full(len(realised), t_s),
                name=[r.name for r in realised], t_cmd_s=[r.t_cmd_s for r in realised],
                mode=[r.mode for r in realised], t_start_s=[r.t_start_s for r in realised],
                t_end_s=[r.t_end_s for r in realised],
                area_factor=[r.area_factor for r in realised],
                units={"area_factor": "1"})

    def believed_density(self, r_eci_m: np.ndarray) -> np.ndarray:
        """Guidance's density belief at the given positions (K, 3), ECI, m, as the law reports it
        (``law.believed_density_kgpm3``), kg/m^3; NaN for a law without that method."""
        if self.belief is None:
            return np.full(len(r_eci_m), np.nan)
        return np.asarray(self.belief(np.asarray(r_eci_m, float)), float)

    def finish(self) -> None:
        """Empty tables for groups a log always has, and the believed density."""
        if "commands/impulses" not in self.rec.file:
            self.rec.append("commands/impulses", cycle_t_s=np.zeros(0), name=np.array([], dtype=str),
                            t_cmd_s=np.zeros(0), dv_cmd_rtn_mps=np.zeros((0, 3)),
                            t_exec_s=np.zeros(0), dv_exec_rtn_mps=np.zeros((0, 3)),
                            status=np.array([], dtype=str), propellant_used_kg=np.zeros(0),
                            mass_before_kg=np.zeros(0))
        if "commands/switches" not in self.rec.file:
            self.rec.append("commands/switches", cycle_t_s=np.zeros(0), name=np.array([], dtype=str),
                            t_cmd_s=np.zeros(0), mode=np.array([], dtype=str), t_start_s=np.zeros(0),
                            t_end_s=np.zeros(0), area_factor=np.zeros(0), units={"area_factor": "1"})
        f = self.rec.file
        for n in self.names:
            p = f"spacecraft/{n}/truth/r_eci_m"
            if p in f:
                self.rec.write_dataset(f"spacecraft/{n}/believed_density_kgpm3",
                                       self.believed_density(f[p][...]), units="kg/m^3",
                                       source="the guidance law's believed_density_kgpm3")

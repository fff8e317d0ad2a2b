"""The closed loop: truth -> navigation -> guidance law -> actuators -> truth, cycle by cycle.

:class:`ClosedLoopEngine` extends the free-drift :class:`sim.run.Engine` with the guidance cycle.
At each cycle time ``t`` it

1. reads the truth states and makes navigation estimates (:mod:`sim.navigation`);
2. calls the law (``step(t, nav)``) and checks its answer (types, finite numbers, known modes,
   times not in the past); a law that raises or answers badly ends the run as ``failed``
   with the reason and traceback in the log, everything recorded so far kept;
3. keeps each spacecraft's latest plan and passes the items that fall in ``[t, t_next)``
   through the actuator models (:mod:`sim.actuators`): burns with execution errors and limits,
   mode switches with slew and realised drag-area factors;
4. loads those into the truth world and advances it continuously to ``t_next`` (burns and
   switches are events inside the integration, not restarts).

Everything goes to the run log next to the truth: navigation errors, commands versus executed,
per-cycle guidance diagnostics (status, solve time, predicted remaining delta-v, predicted mean
ROE), guidance-believed density at each spacecraft.
"""

from __future__ import annotations

import dataclasses
import math
import time
from types import SimpleNamespace
from typing import Any, Mapping

import numpy as np

from guidance.interface import (
    Diagnostics,
    GuidanceInputError,
    GuidanceOutput,
    Impulse,
    ModeSwitch,
    SpacecraftCommand,
)

from .actuators import ActuatorModel
from .config import RunConfig
from .errors import CoveyError
from .mission import build_mission
from .navigation import NavigationModel
from .recorder import RunRecorder
from .run import Engine, ProgressFn

_EPS_T = 1e-6


class GuidanceFailure(CoveyError):
    """The guidance law raised, or answered with something the harness cannot fly.

    Attributes
    ----------
    law : str
        The law's name or import path.
    t_s : float
        Cycle time, s since epoch.
    detail : str
        What was wrong.
    """

    exit_code = 1

    def __init__(self, law: str, t_s: float, detail: str):
        self.law, self.t_s, self.detail = law, t_s, detail
        super().__init__(f"guidance law {law!r} at t = {t_s:.1f} s: {detail}")


def _finite(x) -> bool:
    try:
        return bool(np.all(np.isfinite(np.asarray(x, dtype=float))))
    except (TypeError, ValueError):
        return False


def _time(x) -> bool:
    """A finite real number (a time in s); strings and booleans are not."""
    return isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, bool) \
        and math.isfinite(float(x))


def check_output(out: Any, t_s: float, known_modes: Mapping[str, tuple[str, ...]], law: str
                 ) -> dict[str, SpacecraftCommand]:
    """Validate a law's answer; returns its commands by spacecraft name.

    Raises
    ------
    GuidanceFailure
        Wrong type, unknown spacecraft or mode, non-finite numbers, times before ``t_s``.
    """
    if not isinstance(out, GuidanceOutput):
        raise GuidanceFailure(law, t_s, f"step() returned {type(out).__name__}, expected GuidanceOutput")
    cmds = out.commands
    if not isinstance(cmds, Mapping):
        raise GuidanceFailure(law, t_s, "GuidanceOutput.commands must map spacecraft names to SpacecraftCommand")
    result = {}
    for name, c in cmds.items():
        if name not in known_modes:
            raise GuidanceFailure(law, t_s, f"command for unknown spacecraft {name!r}; known: {sorted(known_modes)}")
        if not isinstance(c, SpacecraftCommand):
            raise GuidanceFailure(law, t_s, f"commands[{name!r}] is {type(c).__name__}, expected SpacecraftCommand")
        for field in ("mode_switches", "impulses"):
            if not isinstance(getattr(c, field), (tuple, list)):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].{field} is "
                                      f"{type(getattr(c, field)).__name__}, expected a tuple")
        for k, sw in enumerate(c.mode_switches):
            if not isinstance(sw, ModeSwitch) or not _time(sw.t_s):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].mode_switches[{k}] = {sw!r}: a ModeSwitch with finite t_s")
            if sw.mode not in known_modes[name]:
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].mode_switches[{k}].mode = {sw.mode!r}: one of {list(known_modes[name])}")
            if sw.t_s < t_s - _EPS_T:
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].mode_switches[{k}].t_s = {sw.t_s:.3f} s is before the cycle time")
        for k, imp in enumerate(c.impulses):
            if not isinstance(imp, Impulse) or not _time(imp.t_s):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].impulses[{k}] = {imp!r}: an Impulse with finite t_s")
            dv = np.asarray(imp.dv_rtn_mps, dtype=float) if _finite(imp.dv_rtn_mps) else None
            if dv is None or dv.shape != (3,):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].impulses[{k}].dv_rtn_mps = {imp.dv_rtn_mps!r}: 3 finite numbers in m/s")
            if imp.t_s < t_s - _EPS_T:
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].impulses[{k}].t_s = {imp.t_s:.3f} s is before the cycle time")
        result[name] = c
    d = out.diagnostics
    if not isinstance(d, Diagnostics):
        raise GuidanceFailure(law, t_s, f"GuidanceOutput.diagnostics is {type(d).__name__}, expected Diagnostics")
    if not _time(d.solve_time_s):
        raise GuidanceFailure(law, t_s, f"diagnostics.solve_time_s = {d.solve_time_s!r}: a finite number in s")
    for k, v in dict(getattr(d, "dv_remaining_mps", {}) or {}).items():
        if not _finite(v):
            raise GuidanceFailure(law, t_s, f"diagnostics.dv_remaining_mps[{k!r}] = {v!r}: a finite number in m/s")
    return result


class ClosedLoopEngine(Engine):
    """Free-drift engine plus navigation, a guidance law and actuators (see module docstring).

    Parameters
    ----------
    cfg, rec, world, api, progress
        As :class:`sim.run.Engine`.
    law : GuidanceLaw
        A constructed law (not yet set up).
    """

    def __init__(self, cfg: RunConfig, rec: RunRecorder, world: Any, api: SimpleNamespace,
                 progress: ProgressFn | None, law: Any):
        super().__init__(cfg, rec, world, api, progress)
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
                                       source="guidance.density.DensityModel from the law's settings")

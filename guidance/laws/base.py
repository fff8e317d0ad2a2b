"""Shared machinery of covey's planner-based laws: settings, navigation, requests, commands.

A law built on :class:`PlannerLaw` declares these class attributes:

- ``NAME``: its registry name;
- ``PLAN_DRAG``: whether the deputies' drag duty cycles are planned (hybrid) or the deputies hold
  ``hold_mode`` with the differential drag as a known disturbance (propulsion only);
- ``REPLANS``: whether it re-plans from navigation (then the common setting
  ``weak_drag_margin`` applies to its plans; default False);
- ``EXTRA_SETTINGS``: its own settings (name -> (default, checker, description)).

and may override :meth:`PlannerLaw.wants_plan` (when to re-plan) and
:meth:`PlannerLaw.request_hook` (how a re-plan differs from the first plan).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from typing import Any, Callable, Mapping

import numpy as np

from ..density import DensityModel, differential_along_track_accel_mps2, relative_wind_speed_mps
from ..constants import R_EARTH_M
from ..estimation import nav_to_mean
from ..settings import check_number, closest
from ..interface import (Diagnostics, GuidanceInputError, GuidanceOutput, Impulse, Mission,
                         ModeSwitch, NavSolution, SpacecraftCaps, SpacecraftCommand)
from ..planning import (STM_MODELS, Plan, PlanRequest, burn_grid, chief_period_s, plan_deputy,
                        predict_plan, propagate_chief, realise_duty_schedule, segment_grid,
                        sub_bit)

HIGH_DRAG_MODE = "max_drag"
LOW_DRAG_MODE = "min_drag"

# ------------------------------------------------------------------------------------------
# Settings
# ------------------------------------------------------------------------------------------


def setting_number(lo=None, hi=None, integer=False, unit=""):
    """Checker of a setting that is a finite number (optionally an integer) in ``[lo, hi]``.

    Parameters
    ----------
    lo, hi : float, optional
        Bounds, inclusive (None: unbounded on that side), in the setting's unit.
    integer : bool
        Require a whole number (then the checked value is an int).
    unit : str
        Unit named in the error message.

    Returns
    -------
    callable
        ``check(key, value) -> float or int``: the value converted; raises
        :class:`~guidance.interface.GuidanceInputError` naming ``key`` and the allowed range.
        The checker of a settings table entry ``name -> (default, checker, description)``
        (:func:`parse_settings`).
    """

    def check(key, v):
        try:
            return check_number(v, lo=lo, hi=hi, integer=integer, unit=unit, whole_float_ok=True)
        except ValueError as exc:
            raise GuidanceInputError(key, v, str(exc)) from None

    return check


def setting_choice(*options):
    """Checker of a setting that must be one of ``options`` (compared with ``in``).

    Returns
    -------
    callable
        ``check(key, value) -> value``; raises :class:`~guidance.interface.GuidanceInputError`
        listing the options.
    """

    def check(key, v):
        if v not in options:
            raise GuidanceInputError(key, v, "one of " + ", ".join(repr(o) for o in options))
        return v

    return check


def setting_string(key, v):
    """Checker of a setting that is a non-empty string (an attitude mode name).

    Returns
    -------
    str
        ``v``; raises :class:`~guidance.interface.GuidanceInputError` naming ``key`` otherwise.
    """
    if not isinstance(v, str) or not v:
        raise GuidanceInputError(key, v, "a non-empty string (an attitude mode name)")
    return v


def setting_optional(check):
    """Checker that accepts None (returned as is) and checks anything else with ``check``.

    Returns
    -------
    callable
        ``check(key, value) -> None or the checked value``.
    """

    def inner(key, v):
        return None if v is None else check(key, v)

    return inner


COMMON_SETTINGS: dict[str, tuple[Any, Callable, str]] = {
    "burns_per_orbit": (8, setting_number(1, 720, integer=True), "candidate burn times per chief orbit"),
    "segments_per_orbit": (4, setting_number(1, 360, integer=True), "drag segments per chief orbit"),
    "chief_mode": ("nominal", setting_string, "attitude mode the chief holds"),
    "hold_mode": (None, setting_optional(setting_string),
                  "mode a deputy holds when its drag is not planned and after its deadline "
                  "(default: chief_mode)"),
    "min_dwell_s": (0.0, setting_number(0.0, unit="s"),
                    "shortest time in a mode; shorter high- or low-drag spells are removed "
                    "(the slew time is always a floor), s"),
    "burn_margin_s": (60.0, setting_number(0.0, unit="s"),
                      "no new burn earlier than this after the solve time, s"),
    "stm": ("j2", setting_choice(*STM_MODELS), "relative dynamics model of the planner"),
    "predict_step_s": (None, setting_optional(setting_number(1.0, unit="s")),
                       "spacing of the predicted trajectory in the diagnostics (default: cycle), s"),
    "optimality_gap": (1e-3, setting_number(1e-9, 0.1),
                       "relative optimality gap at which each plan's solve stops (a plan costs at "
                       "most this fraction more than the optimum; guidance.planning.plan_deputy "
                       "tol_rel)"),
    "target_tol_m": (0.01, setting_number(0.0, unit="m"),
                     "a plan missing the target by more (a-scaled ROE) is reported degraded, m"),
    "density_model": ("exponential", setting_choice("exponential", "harris_priester"),
                      "guidance's density model (guidance.density)"),
    "f107_forecast_sfu": (150.0, setting_number(50.0, 400.0, unit="sfu"), "forecast F10.7, sfu"),
    "density_coefficient": (1.0, setting_number(1e-3, 1e3), "multiplies guidance's density estimate"),
    "weak_drag_margin": (1.0, setting_number(0.01, 1.0),
                         "re-planning hybrid laws (hybrid_resolve): fraction of the believed "
                         "differential drag of the weaker drag mode (smaller |acceleration| against "
                         "the chief) the planner counts on; below 1 the plan keeps drag authority in "
                         "reserve in the direction drag is weakest, for the re-plans to use; laws "
                         "that plan once accept and ignore it (a reserve nobody uses only misses)"),
}


def parse_settings(settings: Mapping[str, Any] | None, spec: Mapping[str, tuple]) -> dict:
    """Validate a law's settings table against ``spec`` and fill the defaults.

    Raises
    ------
    GuidanceInputError
        ``guidance.settings.<key>`` for an unknown key (with the closest allowed key, as
        :func:`guidance.settings.closest` finds it, and the list of allowed ones) or a bad value.
    """
    settings = {} if settings is None else settings
    if not isinstance(settings, Mapping):
        raise GuidanceInputError("guidance.settings", settings, "a table of settings")
    out = {}
    for k in settings:
        if k not in spec:
            close = closest(k, list(spec))
            hint = f" (did you mean {close!r}?)" if close else ""
            raise GuidanceInputError(f"guidance.settings.{k}", settings[k],
                                     f"an unknown setting{hint}; allowed: " + ", ".join(sorted(spec)))
    for k, (default, check, _doc) in spec.items():
        v = settings.get(k, default)
        out[k] = check(f"guidance.settings.{k}", v) if (k in settings or default is not None) else None
    return out


# ------------------------------------------------------------------------------------------
# Per-deputy state
# ------------------------------------------------------------------------------------------


@dataclass
class DeputyState:
    """What a law remembers about one deputy between calls."""

    caps: SpacecraftCaps
    target_roe_m: np.ndarray
    deadline_s: float
    plan: Plan | None = None
    plan_t_s: float = -np.inf
    switches: list = field(default_factory=list)  # [(t_s, mode)] all commanded, time-ordered
    impulses: list = field(default_factory=list)  # [(t_s, dv (3,))] of the current plan
    status: str = "ok"
    message: str = ""

    def mode_at(self, t_s: float) -> str:
        mode = self.caps.initial_mode
        for t, m in self.switches:
            if t < t_s - 1e-9:
                mode = m
        return mode


# ------------------------------------------------------------------------------------------
# The law
# ------------------------------------------------------------------------------------------


class PlannerLaw:
    """Base of the built-in planner laws (see the module docstring)."""

    NAME = "planner"
    PLAN_DRAG = False
    REPLANS = False  # re-plans from navigation (then weak_drag_margin applies)
    EXTRA_SETTINGS: dict[str, tuple[Any, Callable, str]] = {}

    def __init__(self):
        self.mission: Mission | None = None
        self.settings: dict = {}
        self.density: DensityModel | None = None
        self.deputies: dict[str, DeputyState] = {}
        self.anchor_t_s: float | None = None
        self.period_s: float | None = None
        self._chief_done = False

    @classmethod
    def settings_spec(cls) -> dict:
        """All settings of this law: name -> (default, checker, description)."""
        return {**COMMON_SETTINGS, **cls.EXTRA_SETTINGS}

    # ---- set-up ---------------------------------------------------------------------------
    def setup(self, mission: Mission) -> None:
        """Validate the mission and settings; raises GuidanceInputError naming the bad key."""
        if not isinstance(mission, Mission):
            raise GuidanceInputError("mission", type(mission).__name__, "a guidance.interface.Mission")
        s = parse_settings(mission.settings, self.settings_spec())
        if s["hold_mode"] is None:
            s["hold_mode"] = s["chief_mode"]
        if s["predict_step_s"] is None:
            s["predict_step_s"] = float(mission.cycle_s)
        self.density = DensityModel.from_settings(
            {k: s[k] for k in ("density_model", "f107_forecast_sfu", "density_coefficient")})
        chief = mission.chief
        if s["chief_mode"] not in chief.drag_area_m2:
            raise GuidanceInputError("guidance.settings.chief_mode", s["chief_mode"],
                                     f"one of the chief's modes {sorted(chief.drag_area_m2)}")
        self.deputies = {}
        if len(mission.targets) != len(mission.deputies):
            raise GuidanceInputError("mission.targets", len(mission.targets),
                                     f"one target per deputy ({len(mission.deputies)})")
        for dep in mission.deputies:
            try:
                tgt = mission.target_for(dep.name)
            except KeyError:
                raise GuidanceInputError(f"deputies.{dep.name}.target_roe_m", None,
                                         "a target for every deputy") from None
            roe_t = np.asarray(tgt.target_roe_m, dtype=float).reshape(-1)
            if roe_t.shape != (6,) or not np.all(np.isfinite(roe_t)):
                raise GuidanceInputError(f"deputies.{dep.name}.target_roe_m", tgt.target_roe_m,
                                         "six finite numbers, a-scaled metres")
            if not math.isfinite(float(tgt.deadline_s)):
                raise GuidanceInputError(f"deputies.{dep.name}.deadline_s", tgt.deadline_s,
                                         "a finite time, s since epoch")
            need = {s["hold_mode"]} | ({HIGH_DRAG_MODE, LOW_DRAG_MODE} if self.PLAN_DRAG else set())
            missing = sorted(need - set(dep.drag_area_m2))
            if missing:
                raise GuidanceInputError(f"deputies.{dep.name}.modes", sorted(dep.drag_area_m2),
                                         f"modes including {missing} (needed by this law)")
            if not (dep.mass_kg > 0):
                raise GuidanceInputError(f"deputies.{dep.name}.mass_kg", dep.mass_kg, "> 0 kg")
            self.deputies[dep.name] = DeputyState(dep, roe_t, float(tgt.deadline_s))
        self.mission = mission
        self.settings = s
        self.anchor_t_s = None
        self.period_s = None
        self._chief_done = False
        self.extra_setup()

    def extra_setup(self) -> None:
        """Hook for subclasses (after the common set-up)."""

    def believed_density_kgpm3(self, r_eci_m: np.ndarray, t_s: np.ndarray | None = None) -> np.ndarray:
        """This law's density belief at given positions (its settings' density model), kg/m^3.

        The optional method of :class:`guidance.interface.GuidanceLaw`, valid after :meth:`setup`.

        Parameters
        ----------
        r_eci_m : np.ndarray, shape (K, 3)
            Positions in covey's ECI (TOD), m.
        t_s : np.ndarray, shape (K,), optional
            Their times, s since epoch; ignored (the belief depends on altitude only).

        Returns
        -------
        np.ndarray, shape (K,)
            :meth:`guidance.density.DensityModel.density_at_eci_kgpm3` of the model built from
            ``density_model``, ``f107_forecast_sfu`` and ``density_coefficient``, kg/m^3.
        """
        if self.density is None:
            raise GuidanceInputError("setup", None, "call setup(mission) before believed_density_kgpm3()")
        return self.density.density_at_eci_kgpm3(r_eci_m)

    # ---- per step -------------------------------------------------------------------------
    def wants_plan(self, name: str, st: DeputyState, t_s: float, nav: NavSolution) -> bool:
        """Whether to (re)plan deputy ``name`` at ``t_s`` (default: only at the first call)."""
        return st.plan is None

    def request_hook(self, name: str, st: DeputyState, req: PlanRequest, t_s: float) -> PlanRequest:
        """Change the request of a re-plan (default: unchanged)."""
        return req

    def step(self, t_s: float, nav: NavSolution) -> GuidanceOutput:
        """Plan from ``t_s`` on (see guidance.interface.GuidanceLaw)."""
        if self.mission is None:
            raise GuidanceInputError("setup", None, "call setup(mission) before step()")
        t0 = time.perf_counter()
        commands: dict[str, SpacecraftCommand] = {}
        if not self._chief_done:
            ch = self.mission.chief
            sw = () if ch.initial_mode == self.settings["chief_mode"] else (
                ModeSwitch(float(t_s), self.settings["chief_mode"]),)
            commands[ch.name] = SpacecraftCommand(ch.name, mode_switches=sw)
        t_s = float(t_s)
        want = {n: self.wants_plan(n, st, t_s, nav) for n, st in self.deputies.items()}
        state = None
        if any(want.values()):
            try:
                if not math.isfinite(t_s):
                    raise GuidanceInputError("t_s", t_s, "a finite time, s since epoch")
                state = nav_to_mean(nav)
                missing = [n for n in self.deputies if n not in state.roe]
                if missing:
                    raise GuidanceInputError("nav.deputies", sorted(state.roe),
                                             f"estimates for every deputy (missing {missing})")
            except GuidanceInputError as exc:
                # bad navigation: keep every pending plan, report why (never a NaN command)
                self._chief_done = True
                return self._output(t_s, commands, {n: False for n in self.deputies}, t0,
                                    forced=("infeasible", f"bad navigation input: {exc}"))
            if self.anchor_t_s is None:
                self.anchor_t_s = t_s
                self.period_s = chief_period_s(state.chief_oe)
        planned = {}
        for name, st in self.deputies.items():
            if not want[name]:
                planned[name] = False
                continue
            planned[name] = True
            self._plan_one(name, st, t_s, nav, state)
        self._chief_done = True
        for name, st in self.deputies.items():
            commands[name] = self._command(name, st, t_s)
        return self._output(t_s, commands, planned, t0)

    # ---- planning one deputy --------------------------------------------------------------
    def _plan_one(self, name, st: DeputyState, t_s, nav, state):
        s = self.settings
        req = self._base_request(name, st, t_s, nav, state)
        if req is None:
            return
        req = self.request_hook(name, st, req, t_s)
        realise = bool(self.PLAN_DRAG and req.fixed_duty is None and req.seg_t0_s.size)
        # with drag to realise, this plan only proposes duty cycles: the minimum impulse bit is
        # enforced on the final plan of _realise (whose impulses are re-planned anyway)
        plan = self._solve(req, min_bit=not realise)
        if plan.status == "infeasible":
            if st.plan is not None and st.plan.status != "infeasible":
                st.status = "degraded"
                st.message = f"re-plan infeasible ({plan.message}); previous plan kept"
                return
            # nothing to fly: hold the hold mode, no impulse
            st.status, st.message = "infeasible", plan.message
            st.switches = [(t, m) for t, m in st.switches if t < t_s] + (
                [] if st.mode_at(t_s) == s["hold_mode"] else [(t_s, s["hold_mode"])])
            st.impulses = []
            st.plan, st.plan_t_s = plan, t_s
            return
        current = st.mode_at(t_s)
        slew = float(st.caps.slew_time_s)
        if realise:
            plan, sw = self._realise(req, plan, t_s, current, slew)
        else:
            sw = [] if current == s["hold_mode"] else [(t_s, s["hold_mode"])]
        st.switches = [(t, m) for t, m in st.switches if t < t_s] + [(float(t), m) for t, m in sw]
        st.impulses = [(float(t), np.array(d, dtype=float)) for t, d in zip(plan.burn_t_s, plan.dv_rtn_mps)
                       if t >= t_s - 1e-9]
        st.plan, st.plan_t_s = plan, t_s
        st.status, st.message = plan.status, plan.message

    def _solve(self, req: PlanRequest, **kw) -> Plan:
        """:func:`guidance.planning.plan_deputy` with this law's target tolerance and optimality
        gap (``kw``: ``reuse``, ``min_bit``)."""
        s = self.settings
        return plan_deputy(req, target_tol_m=s["target_tol_m"], tol_rel=s["optimality_gap"], **kw)

    def _realise(self, req, plan, t_s, current, slew, rounds=4):
        """Duty cycles -> mode switches; re-plan until the realised drag is the planned drag.

        Realisation removes spells shorter than the dwell (or slew) time. The segments it changed
        are fixed to their realised duty and the rest re-planned (free drag absorbs the change at
        no propulsive cost), a few rounds, each a warm re-solve of the same LP and without the
        minimum impulse bit (these plans only propose duty cycles). Then the whole realised
        schedule is fixed and only the impulses are re-planned, with the minimum impulse bit, so
        the plan hits the target in the planner's model with the schedule that is flown.
        """
        s = self.settings
        kw = dict(slew_s=slew, min_dwell_s=s["min_dwell_s"], high_mode=HIGH_DRAG_MODE,
                  low_mode=LOW_DRAG_MODE, current_mode=current, end_mode=s["hold_mode"])
        fixed = np.full(req.seg_t0_s.size, np.nan)
        solve_time = plan.solve_time_s
        for k in range(rounds + 1):
            # the realisation of the current plan; after the loop, sw and realised belong to plan
            sw, realised = realise_duty_schedule(req.seg_t0_s, req.seg_t1_s, plan.duty, t_s, **kw)
            changed = np.abs(realised - plan.duty) > 1e-9
            if not np.any(changed) or k == rounds:
                break
            fixed[changed] = realised[changed]
            warm = warm_directions(zip(plan.burn_t_s, plan.dv_rtn_mps))
            p2 = self._solve(replace(req, fixed_duty=fixed.copy(), warm_columns=warm), reuse=plan,
                             min_bit=False)
            if p2.status == "infeasible":
                break
            solve_time += p2.solve_time_s
            plan = p2
        r2 = replace(req, fixed_duty=realised,
                     warm_columns=warm_directions(zip(plan.burn_t_s, plan.dv_rtn_mps)))
        if plan.status == "ok" and not np.any(changed) \
                and not _has_sub_bit(_beyond_fixed(plan, req)[1], float(req.dv_min_mps)):
            # the plan's duty cycles are already the realised schedule and no impulse is below
            # the minimum bit: the all-fixed re-plan would return this very plan (its optimum
            # stays feasible, so optimal, with the duty fixed there), so it is not run
            final = replace(plan, request=r2, solve_time_s=0.0)  # its time is counted already
        elif r2.soft_weight_mps_per_m is not None or r2.burn_t_s.size == 0:
            final = predict_plan(r2, np.zeros(0), np.zeros((0, 3)), realised, target_tol_m=s["target_tol_m"])
        else:
            final = self._solve(r2, reuse=plan)
        if final.status == "infeasible":
            # no impulse plan for the realised schedule: fly the last plan's impulses with it and
            # report the predicted miss
            bt, bdv = _beyond_fixed(plan, req)
            final = predict_plan(r2, bt, bdv, realised, target_tol_m=s["target_tol_m"])
            if final.status == "ok" and plan.status != "ok":
                final.status, final.message = plan.status, plan.message
        solve_time += final.solve_time_s
        final.solve_time_s = solve_time
        return final, sw

    def _base_request(self, name, st: DeputyState, t_s, nav, state) -> PlanRequest | None:
        s = self.settings
        caps = st.caps
        chief_oe = np.asarray(state.chief_oe, dtype=float)
        roe0 = np.asarray(state.roe[name], dtype=float)
        dt = t_s - float(state.t_s)
        if abs(dt) > 1e-6:  # navigation time tag differs from the cycle time: free drift
            roe0 = STM_MODELS[s["stm"]](chief_oe, dt) @ roe0
            chief_oe = propagate_chief(chief_oe, dt)
        a = float(chief_oe[0])
        T = st.deadline_s
        mass = caps.mass_kg
        est = nav.deputies.get(name)
        if est is not None and np.isfinite(est.mass_kg) and est.mass_kg > 0:
            mass = float(est.mass_kg)
        thr = caps.thruster
        dv_max = 0.0 if thr is None else float(thr.dv_max_per_burn_mps)
        dv_min = 0.0 if thr is None else float(thr.min_impulse_bit_Ns) / mass
        P = self.period_s
        tb = burn_grid(self.anchor_t_s, t_s, T, P, s["burns_per_orbit"], s["burn_margin_s"]) \
            if (thr is not None and T > t_s) else np.zeros(0)
        s0, s1 = segment_grid(self.anchor_t_s, t_s, T, P, s["segments_per_orbit"])
        rho = float(self.density.density_kgpm3(max(a - R_EARTH_M, 0.0)))
        v = float(relative_wind_speed_mps(a, chief_oe[3]))
        chief = self.mission.chief
        b_chief = chief.ballistic_coefficient_m2pkg(s["chief_mode"])

        def accel(mode):
            b = caps.cd * float(caps.drag_area_m2[mode]) / mass
            return differential_along_track_accel_mps2(rho, v, b, b_chief)

        if self.PLAN_DRAG:
            w_lo, w_hi = accel(LOW_DRAG_MODE), accel(HIGH_DRAG_MODE)
            k = s["weak_drag_margin"] if self.REPLANS else 1.0
            if abs(w_lo) < abs(w_hi):  # plan the weaker direction with margin
                w_lo *= k
            else:
                w_hi *= k
        else:
            w_lo = w_hi = accel(s["hold_mode"])
        return PlanRequest(
            chief_oe=chief_oe, t0_s=t_s, deadline_s=T, roe0=roe0, roe_target=st.target_roe_m / a,
            burn_t_s=tb, dv_max_mps=dv_max, dv_min_mps=dv_min, seg_t0_s=s0, seg_t1_s=s1,
            w_low_mps2=np.full(s0.size, w_lo), w_high_mps2=np.full(s0.size, w_hi), stm=s["stm"])

    # ---- output -----------------------------------------------------------------------------
    def _command(self, name, st: DeputyState, t_s) -> SpacecraftCommand:
        sw = tuple(ModeSwitch(float(t), m) for t, m in st.switches if t >= t_s - 1e-9)
        imp = tuple(Impulse(float(t), np.array(d, dtype=float)) for t, d in st.impulses
                    if t >= t_s - 1e-9)
        return SpacecraftCommand(name, mode_switches=sw, impulses=imp)

    def _output(self, t_s, commands, planned, t0, forced=None) -> GuidanceOutput:
        s = self.settings
        statuses, msgs, dv_rem, pred = [], [], {}, {}
        deadlines = [st.deadline_s for st in self.deputies.values()]
        t_end = max(deadlines + [t_s])
        step = s["predict_step_s"]
        n = int(min(max(math.ceil((t_end - t_s) / step), 1), 2000)) if t_end > t_s else 0
        times = np.unique(np.concatenate([t_s + step * np.arange(n + 1) if n else [t_s], [t_end],
                                          [d for d in deadlines if d > t_s]]))
        times = times[times <= t_end + 1e-9]
        for name, st in self.deputies.items():
            statuses.append(st.status if planned.get(name) else "hold")
            if st.message and planned.get(name):
                msgs.append(f"{name}: {st.message}")
            dv_rem[name] = float(sum(np.linalg.norm(d) for t, d in st.impulses if t >= t_s - 1e-9))
            pred[name] = self._predict(st, times)
        if forced:
            status, message = forced
        else:
            rank = {"infeasible": 3, "degraded": 2, "ok": 1, "hold": 0}
            status = max(statuses, key=lambda x: rank[x]) if statuses else "hold"
            message = "; ".join(msgs)
        diag = Diagnostics(status=status, message=message, solve_time_s=time.perf_counter() - t0,
                           dv_remaining_mps=dv_rem, predicted_t_s=times, predicted_roe_m=pred)
        return GuidanceOutput(commands=commands, diagnostics=diag)

    def _predict(self, st: DeputyState, times) -> np.ndarray:
        plan = st.plan
        if plan is None or plan.status == "infeasible":
            return np.full((times.size, 6), np.nan) if plan is None else self._free(plan, times)
        r = plan.request
        a = float(r.chief_oe[0])
        inside = np.clip(times, r.t0_s, r.deadline_s)
        x = plan.roe_at(inside)
        after = times > r.deadline_s
        if np.any(after):
            x[after] = STM_MODELS[r.stm](r.chief_oe, times[after] - r.deadline_s) @ plan.roe_final
        before = times < r.t0_s
        x[before] = np.nan
        return a * x

    @staticmethod
    def _free(plan, times):
        r = plan.request
        x = STM_MODELS[r.stm](r.chief_oe, np.maximum(times - r.t0_s, 0.0)).reshape(-1, 6, 6) @ r.roe0
        return float(r.chief_oe[0]) * x


def _beyond_fixed(plan: Plan, req: PlanRequest) -> tuple[np.ndarray, np.ndarray]:
    """The plan's impulses other than the request's fixed ones (a plan lists both), as
    ``(t_s (K,), dv_rtn_mps (K, 3))``: what :func:`predict_plan` takes besides the fixed ones."""
    bt = np.asarray(plan.burn_t_s, dtype=float)
    bdv = np.asarray(plan.dv_rtn_mps, dtype=float).reshape(-1, 3)
    keep = np.ones(bt.size, dtype=bool)
    for t, d in zip(np.asarray(req.fixed_burns_t_s, dtype=float),
                    np.asarray(req.fixed_burns_dv_rtn_mps, dtype=float).reshape(-1, 3)):
        hit = np.nonzero(keep & (np.abs(bt - t) <= 1e-9) & np.all(np.abs(bdv - d) <= 1e-15, axis=1))[0]
        if hit.size:
            keep[hit[0]] = False
    return bt[keep], bdv[keep]


def _has_sub_bit(dv_rtn_mps, dv_min_mps: float) -> bool:
    """Whether any impulse (rows of ``dv_rtn_mps``, m/s) is below the minimum impulse bit
    (:func:`guidance.planning.sub_bit`)."""
    return bool(np.any(sub_bit(np.linalg.norm(np.asarray(dv_rtn_mps, dtype=float).reshape(-1, 3), axis=1),
                               dv_min_mps)))


def warm_directions(impulses) -> tuple:
    """``(t_s, unit direction)`` of every non-zero impulse ``(t_s, dv (3,))``: the starting columns
    (``PlanRequest.warm_columns``) a re-plan takes from impulses planned before."""
    return tuple((t, d / np.linalg.norm(d)) for t, d in impulses if np.linalg.norm(d) > 0)

"""The linear prediction of a scenario's final mean-ROE errors (no truth flown, no Java).

:func:`plan_at_start` sets the scenario's law up with the mission (as :func:`sim.loop.mission.
check_guidance` does) and calls it once at t = 0 with a navigation solution built from the
scenario's initial mean elements (guidance's own mean-to-osculating mapping, the stated sigmas of
``[navigation.relative]`` and ``[navigation.absolute]``). :func:`predict_scenario` takes that plan
and each error source of the scenario and asks the linear model of :mod:`guidance.lincov` for the
covariance each one leaves at the deputy's deadline:

============================ ================= =====================================================
source                       status            scenario keys
============================ ================= =====================================================
``navigation``               linear            ``[navigation.relative]`` position / velocity
                                               ``white_sigma``, ``bias_sigma``, ``gm_sigma`` (RSS per
                                               axis: the error at a fix); the absolute (chief) part
                                               needs Monte Carlo (note)
``thruster_magnitude``       linear            ``[actuators] dv_scale_sigma``, ``dv_fixed_sigma_mps``
``pointing``                 monte_carlo_only  ``pointing_sigma_deg``
``timing``                   monte_carlo_only  ``time_sigma_s``
``density``                  linear            ``[environment.density_error] bias, sigma, tau_s``
``drag_area``                linear            ``[actuators] drag_area_sigma``
``attitude``                 monte_carlo_only  ``attitude_sigma_deg``
``solar_activity``           monte_carlo_only  ``[environment.solar_activity]`` (dispersed by a
                                               campaign)
============================ ================= =====================================================

A source whose sigma is 0 (or navigation / actuators ``perfect = true``) is ``off``. For a law that
re-solves from navigation (``REPLANS``: ``hybrid_resolve``) a second case is predicted, the error
left after its last re-solve: that re-solve's navigation error plus the errors of the rest of the
plan (the plan made at t = 0 stands for the re-solves' remainders: a re-solve from a perfect state
keeps it, Bellman's principle, which guidance's own tests check).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from guidance import lincov as lc
from guidance.interface import AbsoluteEstimate, NavSolution, RelativeEstimate
from guidance.meanosc import mean_oe_to_rv
from guidance.planning import propagate_chief
from guidance.roe import oe_to_roe, roe_to_oe, rtn_basis

from sim.errors import ScenarioError
from sim.scenario.config import ErrorAxesConfig, RunConfig

__all__ = [
    "DEFAULT_CONFIDENCE",
    "PRIMARY_OPEN_LOOP",
    "PRIMARY_RESOLVE",
    "CasePrediction",
    "DeputyPrediction",
    "Prediction",
    "StartPlan",
    "initial_mean_state",
    "initial_nav",
    "plan_at_start",
    "predict_scenario",
]

DEFAULT_CONFIDENCE = 0.95
PRIMARY_OPEN_LOOP = "open_loop"
PRIMARY_RESOLVE = "after_last_resolve"

_NOTES_MC = {
    "pointing": "thrust pointing error: a rotation of each impulse; left to Monte Carlo",
    "timing": "burn execution time error: moves each impulse in time; left to Monte Carlo",
    "attitude": ("attitude error of each held mode: the projected area about a face-on attitude "
                 "changes with |error| in either direction (box: a kink, table: cos of the tilt), "
                 "a one-signed area change, not linear: Monte Carlo"),
    "solar_activity": ("solar-activity dispersion (F10.7, Ap) of a campaign: the thermosphere's "
                       "response is not linear; Monte Carlo"),
}


# ------------------------------------------------------------------------------------------
# The state at t = 0 and the law's first plan
# ------------------------------------------------------------------------------------------


def _oe_of(orbit) -> np.ndarray:
    """Quasi-nonsingular mean elements (a, ex, ey, i, raan, u), rad, of a MeanOrbitConfig."""
    w = math.radians(orbit.argp_deg)
    return np.array([orbit.a_m, orbit.e * math.cos(w), orbit.e * math.sin(w),
                     math.radians(orbit.i_deg), math.radians(orbit.raan_deg),
                     math.radians(orbit.u_deg)])


def initial_mean_state(cfg: RunConfig) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """The chief's mean elements and every deputy's mean ROE (dimensionless) at t = 0.

    Returns
    -------
    chief_oe : np.ndarray, shape (6,)
    roe : dict
        Deputy name -> (6,) dimensionless mean ROE (from ``roe_m`` / a, or from the deputy's
        absolute mean elements with :func:`guidance.roe.oe_to_roe`).
    """
    chief = _oe_of(cfg.chief.orbit)
    out = {}
    for d in cfg.deputies:
        if d.roe_m is not None:
            out[d.name] = np.asarray(d.roe_m, dtype=float) / chief[0]
        else:
            out[d.name] = np.asarray(oe_to_roe(chief, _oe_of(d.orbit)), dtype=float)
    return chief, out


def _rss(axes: ErrorAxesConfig) -> np.ndarray:
    """Per-axis 1-sigma of the error at a fix: RSS of white, bias and Gauss-Markov sigmas."""
    return np.sqrt(np.asarray(axes.white_sigma, float) ** 2 + np.asarray(axes.bias_sigma, float) ** 2
                   + np.asarray(axes.gm_sigma, float) ** 2)


def relative_sigmas(cfg: RunConfig) -> tuple[np.ndarray, np.ndarray]:
    """1-sigma of the relative navigation error at a fix (chief RTN): position m, velocity m/s."""
    if cfg.navigation.perfect:
        return np.zeros(3), np.zeros(3)
    rel = cfg.navigation.relative
    return _rss(rel.position_m), _rss(rel.velocity_mps)


def initial_nav(cfg: RunConfig, t_s: float = 0.0) -> NavSolution:
    """The navigation solution a law sees at ``t_s``, error-free: built from the scenario's initial
    mean state (the chief and the ROE propagated to ``t_s`` by free J2 drift) with guidance's own
    mean-to-osculating mapping; the stated sigmas are the scenario's (zero when perfect)."""
    from guidance.dynamics import stm_j2

    chief0, roe0 = initial_mean_state(cfg)
    chief = propagate_chief(chief0, t_s)
    rc, vc = mean_oe_to_rv(chief)
    C = rtn_basis(rc, vc)
    sr, sv = relative_sigmas(cfg)
    if cfg.navigation.perfect:
        ar, av = np.zeros(3), np.zeros(3)
    else:
        ar, av = _rss(cfg.navigation.absolute.position_m), _rss(cfg.navigation.absolute.velocity_mps)
    masses = {sc.name: sc.bus.mass_kg for sc in cfg.spacecraft}
    deps = {}
    for name, x in roe0.items():
        rd, vd = mean_oe_to_rv(roe_to_oe(chief, stm_j2(chief0, t_s) @ x))
        deps[name] = RelativeEstimate(name, t_s, C @ (rd - rc), C @ (vd - vc), sr, sv, masses[name])
    return NavSolution(t_s, AbsoluteEstimate(cfg.chief.name, t_s, rc, vc, ar, av, masses[cfg.chief.name]),
                       deps, True)


@dataclass
class StartPlan:
    """The scenario's law after its first call (t = 0).

    Attributes
    ----------
    law : object
        The set-up law that has planned.
    plans : dict
        Deputy name -> :class:`guidance.lincov.LinearPlan`.
    cycle_times_s : np.ndarray
        The times the engine would call the law at (``k * cycle_s`` before the run's end), s.
    solve_time_s : float
        Wall time of the law's set-up and first step, s.
    """

    law: object
    plans: dict
    cycle_times_s: np.ndarray
    solve_time_s: float


def plan_at_start(cfg: RunConfig) -> StartPlan:
    """Set up the scenario's law and let it plan once at t = 0 (no truth, no Java).

    Raises
    ------
    ScenarioError
        ``guidance.law`` is ``"none"`` or a law that does not plan to the deadline at the start
        (e.g. a feedback law), or a deputy without a feasible plan.
    """
    from guidance.laws.base import PlannerLaw
    from guidance.registry import load_law
    from sim.loop.mission import build_mission
    from sim.models.geometry import mode_areas_m2

    if cfg.guidance.law == "none":
        raise ScenarioError("guidance.law", "none", "a guidance law that plans (propulsion_only, "
                            "hybrid_single, hybrid_resolve or a PlannerLaw of your own): free drift "
                            "has no plan to predict")
    t0 = time.perf_counter()
    law = load_law(cfg.guidance.law)
    if not isinstance(law, PlannerLaw):
        raise ScenarioError("guidance.law", cfg.guidance.law,
                            "a law that plans to the deadline at the start (a guidance.laws.base."
                            "PlannerLaw: propulsion_only, hybrid_single, hybrid_resolve); a law that "
                            "decides at every cycle has no plan to propagate: use a Monte Carlo "
                            "campaign")
    buses = {sc.name: sc.bus for sc in cfg.spacecraft}
    law.setup(build_mission(cfg, lambda name: mode_areas_m2(buses[name])))
    law.step(0.0, initial_nav(cfg, 0.0))
    plans = {}
    for k, d in enumerate(cfg.deputies):
        try:
            plans[d.name] = lc.linear_plan_from_law(law, d.name)
        except ValueError as exc:
            raise ScenarioError(f"deputies[{k}].target_roe_m", d.target_roe_m,
                                f"a target the law can plan for ({exc})") from None
    cyc = float(cfg.guidance.cycle_s)
    n = int(math.ceil(cfg.duration_s / cyc - 1e-9))
    times = cyc * np.arange(n)
    return StartPlan(law, plans, times[times < cfg.duration_s - 1e-9], time.perf_counter() - t0)


# ------------------------------------------------------------------------------------------
# The prediction
# ------------------------------------------------------------------------------------------


@dataclass
class CasePrediction:
    """The predicted final error of one deputy in one case (open loop, or after the last re-solve).

    Attributes
    ----------
    name : str
        ``"open_loop"`` or ``"after_last_resolve"``.
    t_from_s : float
        Start of the window the errors act in (0, or the last re-solve), s since epoch.
    sources : list of guidance.lincov.SourceResult
        In :data:`guidance.lincov.SOURCE_NAMES` order.
    cov_m2 : np.ndarray, shape (6, 6)
        Total covariance, a-scaled m^2.
    mean_m : np.ndarray, shape (6,)
        Total fixed error (density bias), a-scaled m.
    half_width_m : np.ndarray, shape (6,)
        Per-axis support of the confidence ellipsoid, ``sqrt(chi2_6(p) P_ii)``, m.
    dominant : list of str
        Per axis the source with the largest variance.
    dominant_share : np.ndarray, shape (6,)
    note : str
    """

    name: str
    t_from_s: float
    sources: list
    cov_m2: np.ndarray
    mean_m: np.ndarray
    half_width_m: np.ndarray
    dominant: list
    dominant_share: np.ndarray
    note: str = ""

    @property
    def sigma_m(self) -> np.ndarray:
        """Per-axis 1-sigma of the total, m."""
        return np.sqrt(np.clip(np.diag(self.cov_m2), 0.0, None))

    @property
    def bound_lo_m(self) -> np.ndarray:
        return self.mean_m - self.half_width_m

    @property
    def bound_hi_m(self) -> np.ndarray:
        return self.mean_m + self.half_width_m

    def source(self, name: str):
        for s in self.sources:
            if s.name == name:
                return s
        raise KeyError(f"no source {name!r}; sources: {[s.name for s in self.sources]}")


@dataclass
class DeputyPrediction:
    """Every case of one deputy; ``primary`` is the one that describes the law as flown."""

    name: str
    deadline_s: float
    cases: dict
    primary: str
    n_burns: int
    dv_total_mps: float

    @property
    def case(self) -> CasePrediction:
        return self.cases[self.primary]


@dataclass
class Prediction:
    """A scenario's linear prediction.

    Attributes
    ----------
    scenario : str
        Run name.
    law : str
    confidence : float
    chi2_quantile : float
        ``chi2_6(p)``.
    deputies : dict
        Name -> :class:`DeputyPrediction`.
    statuses : dict
        Source name -> status (the same for every deputy).
    notes : dict
        Source name -> note.
    plan_time_s, predict_time_s : float
        Wall time of the law's first plan and of the linear propagation, s.
    scenario_toml : str
    """

    scenario: str
    law: str
    confidence: float
    chi2_quantile: float
    deputies: dict
    statuses: dict
    notes: dict
    plan_time_s: float = 0.0
    predict_time_s: float = 0.0
    scenario_toml: str = ""
    attrs: dict = field(default_factory=dict)


def _statuses(cfg: RunConfig) -> tuple[dict, dict]:
    nav, act, de = cfg.navigation, cfg.actuators, cfg.environment.density_error
    sr, sv = relative_sigmas(cfg)
    a_on = not act.perfect
    st, notes = {}, {}

    def put(name, on, note):
        st[name] = "off" if not on else ("linear" if name in lc.LINEAR_SOURCES else "monte_carlo_only")
        notes[name] = note

    abs_on = not nav.perfect and (np.any(_rss(nav.absolute.position_m) > 0)
                                  or np.any(_rss(nav.absolute.velocity_mps) > 0))
    nav_note = (f"relative navigation at a fix, 1-sigma RTN position {_fmt(sr)} m, velocity "
                f"{_fmt(sv)} m/s, mapped to mean ROE")
    if abs_on:
        nav_note += "; the absolute (chief) navigation part is monte_carlo_only"
    put("navigation", bool(np.any(sr > 0) or np.any(sv > 0)), nav_note)
    put("thruster_magnitude", a_on and (act.dv_scale_sigma > 0 or act.dv_fixed_sigma_mps > 0),
        f"dv_scale_sigma {act.dv_scale_sigma:g}, dv_fixed_sigma_mps {act.dv_fixed_sigma_mps:g} m/s "
        "(per burn, independent)")
    put("pointing", a_on and act.pointing_sigma_deg > 0,
        f"pointing_sigma_deg {act.pointing_sigma_deg:g}: " + _NOTES_MC["pointing"])
    put("timing", a_on and act.time_sigma_s > 0, f"time_sigma_s {act.time_sigma_s:g}: " + _NOTES_MC["timing"])
    put("density", de.sigma > 0 or de.bias != 0,
        f"density scale bias {de.bias:g} (a mean), Gauss-Markov sigma {de.sigma:g}, tau {de.tau_s:g} s "
        "on the planned differential drag")
    put("drag_area", a_on and act.drag_area_sigma > 0,
        f"drag_area_sigma {act.drag_area_sigma:g} per spacecraft and mode, constant per run")
    put("attitude", a_on and act.attitude_sigma_deg > 0,
        f"attitude_sigma_deg {act.attitude_sigma_deg:g}: " + _NOTES_MC["attitude"])
    put("solar_activity", True, _NOTES_MC["solar_activity"])
    return st, notes


def _fmt(v) -> str:
    return "[" + ", ".join(f"{x:g}" for x in np.asarray(v, float)) + "]"


def _case(cfg, plan: lc.LinearPlan, name, statuses, notes, confidence, t_from, note="") -> CasePrediction:
    act, de = cfg.actuators, cfg.environment.density_error
    out = []
    for src in lc.SOURCE_NAMES:
        status = statuses[src]
        cov, mean = np.zeros((6, 6)), np.zeros(6)
        if status == "linear":
            if src == "navigation":
                sr, sv = relative_sigmas(cfg)
                cov = lc.navigation_cov(plan, sr, sv)
            elif src == "thruster_magnitude":
                cov = lc.thruster_magnitude_cov(plan, act.dv_scale_sigma, act.dv_fixed_sigma_mps)
            elif src == "density":
                mean, cov = lc.density_cov(plan, de.bias, de.sigma, de.tau_s)
            elif src == "drag_area":
                cov = lc.drag_area_cov(plan, act.drag_area_sigma)
        out.append(lc.SourceResult(src, status, cov, mean, notes[src]))
    P, m = lc.combine(out)
    dom, share = lc.dominant_sources(out)
    return CasePrediction(name, float(t_from), out, P, m, lc.support_bounds(P, confidence, 6), dom, share, note)


def _nav_valid(cfg: RunConfig):
    """``valid(t)``: False inside an outage of the relative or absolute navigation."""
    if cfg.navigation.perfect:
        return None
    spans = list(cfg.navigation.relative.outages_s) + list(cfg.navigation.absolute.outages_s)
    if not spans:
        return None
    return lambda t: not any(a <= t < b for a, b in spans)


def predict_scenario(cfg: RunConfig, confidence: float = DEFAULT_CONFIDENCE,
                     start: StartPlan | None = None) -> Prediction:
    """The linear prediction of every deputy's final mean-ROE error (see the module docstring).

    Parameters
    ----------
    cfg : RunConfig
    confidence : float
        Probability ``p`` of the confidence ellipsoid the bounds are taken on, in (0, 1).
    start : StartPlan, optional
        A plan already made (:func:`plan_at_start`); made here otherwise.

    Raises
    ------
    ScenarioError
        A confidence outside (0, 1), or a scenario :func:`plan_at_start` refuses.
    """
    if not (isinstance(confidence, (int, float)) and 0.0 < float(confidence) < 1.0):
        raise ScenarioError("confidence", confidence, "a probability strictly between 0 and 1")
    start = plan_at_start(cfg) if start is None else start
    t0 = time.perf_counter()
    statuses, notes = _statuses(cfg)
    law = start.law
    deps = {}
    valid = _nav_valid(cfg)
    for name, plan in start.plans.items():
        cases = {PRIMARY_OPEN_LOOP: _case(cfg, plan, PRIMARY_OPEN_LOOP, statuses, notes,
                                          confidence, plan.t0_s)}
        primary = PRIMARY_OPEN_LOOP
        t_last = lc.last_resolve_time(law, name, start.cycle_times_s, valid)
        if t_last is not None:
            st_plan = law.deputies[name].plan
            t_last = min(max(t_last, plan.t0_s), plan.deadline_s)
            rest = plan.after(t_last, st_plan.roe_at(t_last))
            note = (f"last re-solve at t = {t_last:.1f} s: its navigation error plus the errors after "
                    f"it; the remainder of the t = 0 plan stands for the re-solves' plans")
            if law.settings.get("resolve_mode") == "drag_only":
                note += ("; resolve_mode drag_only re-plans only the drag with soft targets, so the "
                         "components drag cannot move (dix, diy) keep their earlier errors: the "
                         "open-loop case bounds those")
            cases[PRIMARY_RESOLVE] = _case(cfg, rest, PRIMARY_RESOLVE, statuses, notes, confidence,
                                           t_last, note)
            primary = PRIMARY_RESOLVE
        dv = float(np.sum(np.linalg.norm(plan.dv_rtn_mps, axis=1))) if plan.burn_t_s.size else 0.0
        deps[name] = DeputyPrediction(name, plan.deadline_s, cases, primary, int(plan.burn_t_s.size), dv)
    return Prediction(cfg.name, cfg.guidance.law, float(confidence),
                      float(lc.support_factor(confidence, 6) ** 2), deps, statuses, notes,
                      start.solve_time_s, time.perf_counter() - t0, cfg.source_text)


def prediction_table(pred: Prediction) -> list[str]:
    """Lines of the terminal table: per deputy (its primary case) each source's status and 1-sigma
    per axis, then the total 1-sigma, the fixed error, the bound and the dominant source per axis."""
    from guidance.interface import ROE_NAMES

    lines = []
    head = f"  {'source':<20} {'status':<17}" + "".join(f" {ax:>10}" for ax in ROE_NAMES)

    def row(label, xs):
        return f"  {label:<38}" + "".join(f" {x:10.4g}" for x in xs)

    for name, dp in pred.deputies.items():
        c = dp.case
        when = "open loop from t = 0" if c.name == PRIMARY_OPEN_LOOP else \
            f"after the last re-solve at t = {c.t_from_s / 86400.0:.3f} d"
        lines.append(f"{name}: final mean-ROE error at the deadline (t = {dp.deadline_s / 86400.0:.3f} d), "
                     f"{when}; {dp.n_burns} burns, {dp.dv_total_mps:.4g} m/s planned")
        lines.append(head + "   (1-sigma, a-scaled m)")
        for s in c.sources:
            vals = "".join(f" {x:10.4g}" for x in np.sqrt(np.clip(np.diag(s.cov_m2), 0, None))) \
                if s.status == "linear" else "".join(f" {'-':>10}" for _ in range(6))
            lines.append(f"  {s.name:<20} {s.status:<17}{vals}")
        lines.append(row("total 1-sigma", c.sigma_m))
        if np.any(c.mean_m != 0):
            lines.append(row("fixed error (mean)", c.mean_m))
        lines.append(row(f"bound +- ({100 * pred.confidence:g} %, 6-D ellipsoid)", c.half_width_m))
        lines.append("  dominant source per axis (share of the axis variance): " + ", ".join(
            f"{ax} {d} ({100 * x:.0f} %)" if d else f"{ax} -"
            for ax, d, x in zip(ROE_NAMES, c.dominant, c.dominant_share)))
        if c.note:
            lines.append(f"  note: {c.note}")
    mc = [s for s in lc.SOURCE_NAMES if pred.statuses[s] == "monte_carlo_only"]
    if mc:
        lines.append("needs Monte Carlo (not linear): " + ", ".join(mc))
    if "monte_carlo_only" in pred.notes.get("navigation", ""):
        lines.append("  and the absolute (chief) navigation error")
    return lines

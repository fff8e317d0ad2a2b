"""A campaign checked against its base scenario, and its runs (:func:`plan_campaign`).

Everything is checked here, before anything runs (no Java):

- the base scenario, with ``[campaign.set]`` applied, validates (and its guidance law accepts it);
- every dispersed or swept key resolves in the base scenario to a number (or is a key the
  scenario accepts with its default), else the error names the key and the closest valid one;
- every value a distribution can produce is one the scenario accepts: the base scenario is
  validated with the extreme values of each distribution (uniform and truncated-normal bounds,
  every listed choice; the unbounded normal and log-normal at their 1e-9 and 1 - 1e-9 quantiles,
  and the message says so), one key at a time, so the scenario's own range checks name the key
  and what is allowed;
- every sweep value, and every error-budget case, validates;
- every run, with all its drawn and swept values together, validates (limits that bind several
  keys, such as a perigee from a dispersed semi-major axis and eccentricity).

Run ``k`` of a Monte Carlo is draw ``k``; a sweep flies every grid point with the same draws
(``k = grid_index * runs + draw``); an error budget flies every case with the same draws
(``k = case_index * runs + draw``). Seeds and draws: :mod:`sim.campaign.sampler`.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from typing import Any

from guidance.interface import GuidanceInputError
from guidance.settings import closest, type_name
from sim.campaign.sampler import draw, run_seed
from sim.campaign.spec import QUANTILE, SOURCES, Campaign
from sim.errors import ScenarioError
from sim.scenario.overrides import apply_override, join_key, split_key
from sim.scenario.reader import _toml, parse_scenario

__all__ = ["RunJob", "Plan", "plan_campaign", "source_state", "numeric_keys"]

_ACT = {"thruster_magnitude": ("dv_scale_sigma", "dv_fixed_sigma_mps"),
        "pointing": ("pointing_sigma_deg",), "timing": ("time_sigma_s",),
        "attitude": ("attitude_sigma_deg",), "drag_area": ("drag_area_sigma",)}
"""Actuator error sources and the ``[actuators]`` keys each one owns."""


@dataclass(frozen=True)
class RunJob:
    """One run of a campaign (picklable: sent to the workers).

    Attributes
    ----------
    index : int
        Run index k.
    draw_index : int
        Dispersion draw (seeds and sampled values depend on it only).
    grid_index : int
        Sweep grid point, -1 when none.
    case : str
        Error-budget case (``all_off``, a source, ``all_on``), or the grid point's values, or "".
    seed : int
        The run's ``run.seed``.
    name : str
        The run name (``run.name``), also the log file's stem.
    log : str
        The run log, relative to the campaign folder (``runs/<name>.h5``).
    params : tuple of (key, value)
        The sampled and swept values.
    overrides : tuple of (key, value)
        Everything applied to the base scenario, in order (as ``--set``).
    """

    index: int
    draw_index: int
    grid_index: int
    case: str
    seed: int
    name: str
    log: str
    params: tuple
    overrides: tuple


@dataclass
class Plan:
    """A checked campaign and its runs.

    Attributes
    ----------
    campaign : Campaign
    base_cfg : RunConfig
        The base scenario with ``[campaign.set]`` applied.
    jobs : tuple of RunJob
        In run-index order.
    cases : tuple of str
        Error-budget cases in order (empty for other kinds).
    grid : tuple of tuple
        Sweep grid points (one value per sweep), empty for other kinds.
    sources : tuple of str
        Error-budget sources flown.
    skipped : dict
        Error-budget sources not flown -> why (off in the base scenario, no model).
    checks : list of str
        One line per dispersion and sweep: what it can produce and that the scenario accepts it.
    tolerance_m : tuple
        The success box (the campaign's ``[summary]``, else the base scenario's).
    """

    campaign: Campaign
    base_cfg: Any
    jobs: tuple
    cases: tuple = ()
    grid: tuple = ()
    sources: tuple = ()
    skipped: dict = field(default_factory=dict)
    checks: list = field(default_factory=list)
    tolerance_m: tuple = ()
    solar_activity_off: dict = field(default_factory=dict)

    @property
    def n_runs(self) -> int:
        return len(self.jobs)


# ------------------------------------------------------------------------------------------
# Keys of the base scenario
# ------------------------------------------------------------------------------------------

_MISSING = object()
_Q = f"{QUANTILE:.0e} and 1 - {QUANTILE:.0e}".replace("e-0", "e-")


def _is_num(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def numeric_keys(raw: Any, prefix: list | None = None) -> list[str]:
    """Every numeric leaf of raw TOML tables as a key path (array elements indexed:
    ``deputies[0].roe_m[1]``)."""
    prefix = prefix or []
    out: list[str] = []
    if isinstance(raw, dict):
        for k, v in raw.items():
            out += numeric_keys(v, prefix + [k])
    elif isinstance(raw, list):
        for i, v in enumerate(raw):
            out += numeric_keys(v, prefix + [i])
    elif _is_num(raw):
        out.append(join_key(prefix))
    return out


def _lookup(raw: dict, key: str, where: str, src: str) -> Any:
    """The base scenario's value at ``key``; ``_MISSING`` when a table on the way (or the last key)
    is not in the file; ScenarioError (naming the closest numeric key) for a path that cannot
    exist: an index out of range, an index on a table, a name on an array, a path through a
    number or string."""
    node: Any = raw
    walked: list = []
    parts = split_key(key)
    for n, p in enumerate(parts):
        bad = None
        if isinstance(node, dict) and isinstance(p, str):
            if p not in node:
                if any(isinstance(q, int) for q in parts[n + 1:]):  # arrays have no defaults
                    raise _no_key(raw, key, where, src,
                                  f"{join_key(walked + [p])} is not in the base scenario")
                return _MISSING
            node = node[p]
        elif isinstance(node, list) and isinstance(p, int):
            if p >= len(node):
                bad = f"index [{p}] is out of range: {join_key(walked)} has {len(node)} elements"
            else:
                node = node[p]
        elif isinstance(node, list):
            bad = f"{join_key(walked)} is an array: address an element with [i]"
        elif isinstance(node, dict):
            bad = f"{join_key(walked) or '(file)'} is a table, not an array"
        else:
            bad = f"{join_key(walked)} is {type_name(node)}, not a table or an array"
        if bad:
            raise _no_key(raw, key, where, src, bad)
        walked.append(p)
    return node


def _no_key(raw: dict, key: str, where: str, src: str, why: str, hint: str = "") -> ScenarioError:
    near = closest(key, numeric_keys(raw), cutoff=0.5)
    return ScenarioError(f"{where}.key", key, f"does not resolve in the base scenario: {why}",
                         f"closest valid key: {near}" if near else hint, path=src)


def _short(v):
    return float(f"{v:.6g}") if isinstance(v, float) else v


# ------------------------------------------------------------------------------------------
# Checking values against the base scenario
# ------------------------------------------------------------------------------------------


def _try(c: Campaign, overrides: dict, orekit_data, law_check: bool, span: bool = True):
    """Validate the base scenario with ``overrides`` (and the law's setup); the RunConfig, or the
    error (ScenarioError or GuidanceInputError). ``span``: also check the solar-activity data span
    (it reads the space-weather file: only for keys that can move it)."""
    from sim.loop.mission import check_guidance

    try:
        cfg = parse_scenario(c.base_text, c.base_path, overrides=overrides, orekit_data=orekit_data,
                             check_solar_span=span)
        if law_check:
            check_guidance(cfg)
        return cfg, None
    except (ScenarioError, GuidanceInputError) as exc:
        return None, exc


def _refusal(exc) -> str:
    if isinstance(exc, ScenarioError):
        allowed = f"{exc.key} {exc.allowed}" if exc.key else exc.allowed
        return allowed + (f" ({exc.hint})" if exc.hint else "")
    return f"the guidance law refuses it: {exc}"


def _unknown(exc, key: str) -> bool:
    return isinstance(exc, ScenarioError) and exc.allowed == "unknown key"


def _fmt(v) -> str:
    return f"{v:g}" if isinstance(v, float) else repr(v)


def _check_values(c: Campaign, raw: dict, key: str, where: str, values: list, exact: bool,
                  what: str, units: str, orekit_data, integer_ok: bool) -> None:
    src = c.path or "<campaign>"
    base = _lookup(raw, key, where, src)
    if base is not _MISSING:
        if isinstance(base, list):
            hint = f"e.g. {key}[0]" if base and all(_is_num(x) for x in base) else ""
            raise ScenarioError(f"{where}.key", key, f"is an array of {len(base)} in the base "
                                "scenario; disperse or sweep one element", hint, path=src)
        if not _is_num(base):
            raise ScenarioError(f"{where}.key", key, f"is not numeric in the base scenario "
                                f"({key} = {base!r}, {type_name(base)}); dispersions and sweeps "
                                "take numeric keys", path=src)
        if isinstance(base, int) and not integer_ok:
            raise ScenarioError(f"{where}.key", key, f"is an integer in the base scenario "
                                f"({key} = {base}); {what} draws real numbers",
                                "use distribution = \"choice\" with integer values", path=src)
    lo, hi = min(values, key=float), max(values, key=float)
    rng = f"from {_fmt(lo)} to {_fmt(hi)}" if lo != hi else f"{_fmt(lo)}"
    how = "" if exact else f" (an unbounded distribution, checked at its {_Q} quantiles)"
    span = key.startswith(("run.", "environment."))
    for v in values:
        _cfg, exc = _try(c, {**c.fixed, key: v}, orekit_data, law_check=True, span=span)
        if exc is None:
            continue
        if base is _MISSING and _unknown(exc, key):
            raise _no_key(raw, key, where, src, f"{exc.key} is not a scenario key", exc.hint)
        raise ScenarioError(f"{where}: {key}", _short(v), f"{what} can produce {key} values {rng} "
                            f"({units}){how}; the scenario refuses {_fmt(v)}: {_refusal(exc)}",
                            path=src)
    # a defaulted key of the law's settings: the law names unknown settings itself (above)


# ------------------------------------------------------------------------------------------
# Error-budget sources
# ------------------------------------------------------------------------------------------


def source_state(cfg, name: str, nominal: dict) -> tuple[bool, str]:
    """Whether error source ``name`` is on in scenario ``cfg``, and why not when it is off."""
    act = cfg.actuators
    if name == "navigation":
        return (not cfg.navigation.perfect,
                "navigation.perfect = true in the base scenario")
    if name in _ACT:
        if act.perfect:
            return False, "actuators.perfect = true in the base scenario"
        on = any(getattr(act, k) > 0 for k in _ACT[name])
        return on, " and ".join(f"actuators.{k}" for k in _ACT[name]) + " = 0 in the base scenario"
    if name == "density":
        de = cfg.environment.density_error
        return (de.bias != 0 or de.sigma != 0,
                "environment.density_error bias = sigma = 0 in the base scenario")
    if name == "solar_activity":
        atm = cfg.environment.atmosphere
        if atm == "jb2008":
            return False, ("JB2008 reads its own solar-activity files: no nominal off state to "
                           "compare with")
        if atm not in ("nrlmsise00", "dtm2000"):
            return False, f"the {atm} atmosphere has no solar-activity input"
        sa = cfg.environment.solar_activity
        same = sa.source == "constant" and all(getattr(sa, k) == nominal[k] for k in nominal)
        return not same, "the base scenario's solar activity is the nominal one already"
    raise KeyError(name)


def _off(name: str, nominal: dict) -> dict:
    if name == "navigation":
        return {"navigation.perfect": True}
    if name in _ACT:
        return {f"actuators.{k}": 0.0 for k in _ACT[name]}
    if name == "density":
        return {"environment.density_error.bias": 0.0, "environment.density_error.sigma": 0.0}
    if name == "solar_activity":
        return {"environment.solar_activity": {"source": "constant", **nominal}}
    return {}


def _case_overrides(on: set, sources: tuple, nominal: dict) -> dict:
    out: dict = {}
    for s in sources:
        if s not in on and s != "dispersions":
            out.update(_off(s, nominal))
    if not any(s in on for s in _ACT):
        out["actuators.perfect"] = True
    return out


# ------------------------------------------------------------------------------------------
# The plan
# ------------------------------------------------------------------------------------------


def plan_campaign(c: Campaign, orekit_data=None) -> Plan:
    """Check ``c`` against its base scenario and list its runs.

    Parameters
    ----------
    c : Campaign
        From :func:`sim.campaign.spec.load_campaign`.
    orekit_data : path, optional
        Orekit data folder or zip (for the solar-activity span check).

    Raises
    ------
    ScenarioError
        Naming the campaign key (``dispersions[1].key``, ``sweeps[0]: <key>``) or the scenario key
        at fault, the value and what is allowed.
    GuidanceInputError
        The base scenario's guidance law refuses its settings or the mission.
    """
    from sim.loop.mission import check_guidance

    src = c.path or "<campaign>"
    base_cfg = parse_scenario(c.base_text, c.base_path, overrides=c.fixed or None,
                              orekit_data=orekit_data)
    check_guidance(base_cfg)
    raw = _toml.loads(c.base_text)
    for k, v in c.fixed.items():
        apply_override(raw, k, v, c.base_path)
    checks = []
    for d in c.dispersions:
        vals, exact = d.dist.extremes()
        integer_ok = d.dist.kind == "choice" and all(isinstance(v, int) for v in d.dist.values)
        _check_values(c, raw, d.key, d.where, vals, exact, d.dist.describe(), d.units,
                      orekit_data, integer_ok)
        lo, hi = min(vals, key=float), max(vals, key=float)
        checks.append(f"{d.where}: {d.key} ~ {d.dist.describe()} ({d.units}), values "
                      f"{_fmt(lo)} .. {_fmt(hi)}" + ("" if exact else f" (at its {_Q} quantiles)"))
    for s in c.sweeps:
        integer_ok = all(isinstance(v, int) for v in s.values)
        _check_values(c, raw, s.key, s.where, list(s.values), True, f"the sweep over "
                      f"{len(s.values)} values", _units(s.key),
                      orekit_data, integer_ok)
        checks.append(f"{s.where}: {s.key} = {', '.join(_fmt(v) for v in s.values)} "
                      f"({_units(s.key)})")

    runs = c.runs
    cases: tuple = ()
    grid: tuple = ()
    sources: tuple = ()
    skipped: dict = {}
    nominal: dict = {}
    blocks: list[tuple[int, str, dict, dict, bool]] = []  # (grid_index, case, overrides, params, disperse)
    if c.kind == "error_budget":
        f107 = float(base_cfg.guidance.settings.get("f107_forecast_sfu", 150.0)) \
            if base_cfg.guidance.law != "none" else 150.0
        nominal = {"f107_sfu": f107, "f107a_sfu": f107, "ap": 15.0}
        nominal.update(c.budget.solar_activity_off)
        asked = c.budget.sources
        for s in SOURCES:
            on, why = source_state(base_cfg, s, nominal)
            if on and (not asked or s in asked):
                sources += (s,)
            elif not on:
                if s in asked:
                    raise ScenarioError("error_budget.sources", list(asked), f"{s!r} is off: {why}",
                                        path=src)
                skipped[s] = why
            else:
                skipped[s] = "not asked for in error_budget.sources"
        if c.dispersions and (not asked or "dispersions" in asked):
            sources += ("dispersions",)
        elif "dispersions" in asked:
            raise ScenarioError("error_budget.sources", list(asked), "'dispersions' needs "
                                "[[dispersions]] entries in the campaign file", path=src)
        if not sources:
            raise ScenarioError("error_budget", None, "no error source is on in the base scenario "
                                "(" + "; ".join(f"{k}: {v}" for k, v in skipped.items()) + ")",
                                path=src)
        cases = ("all_off",) + sources + ("all_on",)
        for case in cases:
            on = set() if case == "all_off" else (set(sources) if case == "all_on" else {case})
            ov = _case_overrides(on, sources, nominal) if case != "all_on" else {}
            _cfg, exc = _try(c, {**c.fixed, **ov}, orekit_data, law_check=True)
            if exc is not None:
                raise ScenarioError(f"error_budget case {case}", None, _refusal(exc), path=src)
            blocks.append((-1, case, ov, {}, "dispersions" in on))
    elif c.kind == "sweep":
        grid = tuple(itertools.product(*(s.values for s in c.sweeps)))
        for g, point in enumerate(grid):
            ov = {s.key: v for s, v in zip(c.sweeps, point)}
            label = ", ".join(f"{k}={_fmt(v)}" for k, v in ov.items())
            blocks.append((g, label, ov, dict(ov), True))
    else:
        blocks.append((-1, "", {}, {}, True))

    n_total = len(blocks) * runs
    width = max(4, len(str(n_total - 1)))
    jobs = []
    for b, (g, case, ov, params, disperse) in enumerate(blocks):
        for d in range(runs):
            k = b * runs + d
            seed = run_seed(c.master_seed, d)
            name = f"{c.name}_{k:0{width}d}"
            pv = dict(params)
            overrides = {**c.fixed, **ov}
            if disperse:
                for disp in c.dispersions:
                    v = draw(disp, c.master_seed, d)
                    overrides[disp.key] = v
                    pv[disp.key] = v
            overrides["run.seed"] = seed
            overrides["run.name"] = name
            jobs.append(RunJob(index=k, draw_index=d, grid_index=g, case=case, seed=seed,
                               name=name, log=f"runs/{name}.h5", params=tuple(pv.items()),
                               overrides=tuple(overrides.items())))
    _check_jobs(c, jobs, orekit_data)
    tol = c.summary.tolerance_m or tuple(base_cfg.metrics.tolerance_m)
    return Plan(campaign=c, base_cfg=base_cfg, jobs=tuple(jobs), cases=cases, grid=grid,
                sources=sources, skipped=skipped, checks=checks, tolerance_m=tuple(tol),
                solar_activity_off=nominal)


def _check_jobs(c: Campaign, jobs, orekit_data) -> None:
    """Every run's scenario, with all its drawn and swept values together, validates: the
    one-key-at-a-time extremes above cannot see limits that bind values of several keys (a
    perigee from a dispersed semi-major axis and eccentricity, say). About 2 ms a run."""
    if not (c.dispersions or c.sweeps):
        return
    src = c.path or "<campaign>"
    for j in jobs:
        _cfg, exc = _try(c, dict(j.overrides), orekit_data, law_check=True, span=False)
        if exc is None:
            continue
        drawn = ", ".join(f"{k} = {_fmt(v)}" for k, v in j.params) or "its base values"
        raise ScenarioError(f"run {j.index} ({j.name})", None,
                            f"each value is allowed alone, but together ({drawn}) the scenario "
                            f"refuses them: {_refusal(exc)}",
                            "narrow the distributions (or the sweep) so that the values that "
                            "bind each other stay valid together", path=src)


def _units(key: str) -> str:
    from sim.campaign.spec import key_units

    return key_units(key)


def describe_plan(p: Plan) -> list[str]:
    """What ``covey validate`` prints for a campaign: the base, the runs, each check."""
    c = p.campaign
    lines = [f"base scenario: {c.base_label} (run {p.base_cfg.name!r}, law "
             f"{p.base_cfg.guidance.law!r}, {p.base_cfg.duration_s / 86400.0:g} days)"]
    if c.fixed:
        lines.append("fixed: " + ", ".join(f"{k} = {_fmt(v)}" for k, v in c.fixed.items()))
    if c.kind == "sweep":
        lines.append(f"{len(p.grid)} grid points x {c.runs} draws = {p.n_runs} runs")
    elif c.kind == "error_budget":
        lines.append(f"{len(p.cases)} cases ({', '.join(p.cases)}) x {c.runs} draws = "
                     f"{p.n_runs} runs")
        for s, why in p.skipped.items():
            lines.append(f"source {s} not flown: {why}")
        if "solar_activity" in p.sources:
            n = p.solar_activity_off
            lines.append(f"solar_activity off = constant F10.7 {n['f107_sfu']:g} sfu, 81-day mean "
                         f"{n['f107a_sfu']:g} sfu, Ap {n['ap']:g}")
    else:
        lines.append(f"{p.n_runs} runs")
    lines += p.checks
    lines.append(f"master seed {c.master_seed}: run seeds and draws from numpy SeedSequence("
                 "master_seed, spawn_key=(draw, ...))")
    lines.append("success box (|final mean-ROE error| per component, m): "
                 + ", ".join(f"{x:g}" for x in p.tolerance_m)
                 + (f"; dv <= {c.summary.dv_max_mps:g} m/s" if c.summary.dv_max_mps else ""))
    return lines


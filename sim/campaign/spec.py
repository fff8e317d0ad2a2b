"""Campaign files (TOML): read and check the file's own tables into a :class:`Campaign`.

This module checks the campaign file by itself (names, numbers, distribution parameters); whether
its keys and values fit the base scenario is :mod:`sim.campaign.plan`'s job. Pure Python.

File layout (the README's "Campaigns" section lists every key with units and defaults)::

    [campaign]       name, scenario (a path) | [scenario] (inline tables), runs, master_seed,
                     kind, [campaign.set] (fixed overrides, as --set)
    [[dispersions]]  key, distribution (normal | uniform | truncated_normal | lognormal | choice),
                     mean, sigma, low, high, median, sigma_ln, offset, values, weights, units
    [[sweeps]]       key, values | start, stop, num
    [error_budget]   sources, [error_budget.solar_activity_off] f107_sfu, f107a_sfu, ap
    [summary]        tolerance_m, dv_max_mps, confidence, interval
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from guidance.settings import closest, type_name
from sim.errors import ScenarioError
from sim.scenario.overrides import split_key
from sim.scenario.reader import _toml, parse_toml  # noqa: F401 - _toml: tomllib or tomli
from sim.scenario.tables import Table, unit_of

__all__ = ["KINDS", "DISTRIBUTIONS", "SOURCES", "INTERVALS", "Distribution", "Dispersion", "Sweep",
           "ErrorBudget", "SummarySpec", "Campaign", "load_campaign", "parse_campaign",
           "is_campaign", "key_units"]

KINDS = ("monte_carlo", "sweep", "error_budget")
"""Campaign kinds: dispersions only, a grid crossed with the dispersions, an error budget."""

DISTRIBUTIONS = ("normal", "uniform", "truncated_normal", "lognormal", "choice")

SOURCES = ("navigation", "thruster_magnitude", "pointing", "timing", "attitude", "drag_area",
           "density", "solar_activity")
"""Error sources of an error budget, in the order the cases are flown (the campaign's dispersions,
when it has any, are one more source, ``dispersions``, flown after these)."""

INTERVALS = ("clopper_pearson", "wilson")
"""Confidence intervals on a success rate."""

_TOP = ("campaign", "scenario", "dispersions", "sweeps", "error_budget", "summary")
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,95}$")
_DIST_KEYS = ("key", "distribution", "mean", "sigma", "low", "high", "median", "sigma_ln", "offset",
              "values", "weights", "units")
_NEEDS = {"normal": ("mean", "sigma"), "uniform": ("low", "high"),
          "truncated_normal": ("mean", "sigma", "low", "high"), "lognormal": ("median", "sigma_ln"),
          "choice": ("values",)}
_OPTIONAL = {"lognormal": ("offset",), "choice": ("weights",)}
QUANTILE = 1e-9
"""Unbounded distributions (normal, log-normal) are checked against the scenario at their
``QUANTILE`` and ``1 - QUANTILE`` quantiles (mean -+ 6.0 sigma for the normal)."""


def key_units(key: str) -> str:
    """Units of a scenario key path, from its last name's suffix (``deputies[0].roe_m[1]`` ->
    ``"m"``), ``"1"`` when the name has no unit suffix."""
    names = [p for p in split_key(key) if isinstance(p, str)]
    return (unit_of(names[-1]) if names else "") or "1"


def _is_num(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


@dataclass(frozen=True)
class Distribution:
    """One parameter's distribution; every parameter in the units of the dispersed key.

    Attributes
    ----------
    kind : str
        ``normal`` (mean, sigma), ``uniform`` (low, high), ``truncated_normal`` (mean, sigma of the
        parent normal, cut at low and high), ``lognormal`` (value = offset + median exp(sigma_ln z),
        z standard normal; ``sigma_ln`` is dimensionless), ``choice`` (values, optional weights).
    """

    kind: str
    mean: float = 0.0
    sigma: float = 0.0
    low: float = 0.0
    high: float = 0.0
    median: float = 1.0
    sigma_ln: float = 0.0
    offset: float = 0.0
    values: tuple = ()
    weights: tuple = ()

    def ppf(self, u):
        """The value at cumulative probability ``u`` (array or float in (0, 1)): the sampler maps
        one uniform draw per run through this inverse CDF."""
        from scipy import special, stats

        u = np.asarray(u, float)
        if self.kind == "normal":
            return self.mean + self.sigma * special.ndtri(u)
        if self.kind == "uniform":
            return self.low + (self.high - self.low) * u
        if self.kind == "truncated_normal":
            a, b = (self.low - self.mean) / self.sigma, (self.high - self.mean) / self.sigma
            return np.clip(stats.truncnorm.ppf(u, a, b, loc=self.mean, scale=self.sigma),
                           self.low, self.high)
        if self.kind == "lognormal":
            return self.offset + self.median * np.exp(self.sigma_ln * special.ndtri(u))
        w = np.asarray(self.weights or [1.0] * len(self.values), float)
        cdf = np.cumsum(w) / w.sum()
        idx = np.minimum(np.searchsorted(cdf, u, side="right"), len(self.values) - 1)
        return np.asarray(self.values, dtype=object)[idx]

    def reference(self):
        """The same distribution as a frozen ``scipy.stats`` distribution (continuous kinds; None
        for ``choice``): what the sampler is tested against."""
        from scipy import stats

        if self.kind == "normal":
            return stats.norm(loc=self.mean, scale=self.sigma)
        if self.kind == "uniform":
            return stats.uniform(loc=self.low, scale=self.high - self.low)
        if self.kind == "truncated_normal":
            return stats.truncnorm((self.low - self.mean) / self.sigma,
                                   (self.high - self.mean) / self.sigma, loc=self.mean,
                                   scale=self.sigma)
        if self.kind == "lognormal":
            return stats.lognorm(s=self.sigma_ln, loc=self.offset, scale=self.median)
        return None

    def extremes(self) -> tuple[list, bool]:
        """The values to check against the scenario, and whether they bound every draw (False
        for the unbounded normal and log-normal: their ``QUANTILE`` quantiles)."""
        if self.kind == "choice":
            return sorted(set(self.values), key=float), True
        if self.kind in ("uniform", "truncated_normal"):
            return [self.low, self.high], True
        if (self.kind == "normal" and self.sigma == 0) or (self.kind == "lognormal"
                                                          and self.sigma_ln == 0):
            return [float(self.ppf(0.5))], True
        return [float(self.ppf(QUANTILE)), float(self.ppf(1.0 - QUANTILE))], False

    def describe(self) -> str:
        if self.kind == "normal":
            return f"normal(mean={self.mean:g}, sigma={self.sigma:g})"
        if self.kind == "uniform":
            return f"uniform(low={self.low:g}, high={self.high:g})"
        if self.kind == "truncated_normal":
            return (f"truncated_normal(mean={self.mean:g}, sigma={self.sigma:g}, low={self.low:g}, "
                    f"high={self.high:g})")
        if self.kind == "lognormal":
            off = f"{self.offset:g} + " if self.offset else ""
            return f"lognormal({off}{self.median:g} exp({self.sigma_ln:g} z))"
        w = f", weights={list(self.weights)}" if self.weights else ""
        return f"choice({list(self.values)}{w})"


@dataclass(frozen=True)
class Dispersion:
    """``[[dispersions]]`` entry ``index``: a scenario key path and its distribution."""

    index: int
    key: str
    dist: Distribution
    units: str

    @property
    def where(self) -> str:
        return f"dispersions[{self.index}]"


@dataclass(frozen=True)
class Sweep:
    """``[[sweeps]]`` entry ``index``: a scenario key path and its grid values."""

    index: int
    key: str
    values: tuple

    @property
    def where(self) -> str:
        return f"sweeps[{self.index}]"


@dataclass(frozen=True)
class ErrorBudget:
    """``[error_budget]``: the sources asked for (empty: every source the base scenario has on)
    and the nominal solar activity of the ``solar_activity`` source's off state."""

    sources: tuple = ()
    solar_activity_off: dict = field(default_factory=dict)


@dataclass(frozen=True)
class SummarySpec:
    """``[summary]``: the success box (None: the base scenario's ``[metrics] tolerance_m``), an
    optional delta-v limit per deputy, the confidence level and the interval method."""

    tolerance_m: tuple | None = None
    dv_max_mps: float | None = None
    confidence: float = 0.95
    interval: str = "clopper_pearson"


@dataclass(frozen=True)
class Campaign:
    """A campaign file, checked by itself (:func:`parse_campaign`).

    Attributes
    ----------
    path : str
        The campaign file (absolute), or "" for text.
    text : str
        The file verbatim.
    name, kind : str
    runs : int
        Dispersion draws: the runs of a Monte Carlo, per grid point of a sweep, per error-budget
        case.
    master_seed : int
    base_text : str
        The base scenario's TOML text (the file's, or the inline ``[scenario]`` written out).
    base_path : str
        The scenario path given to ``parse_scenario`` (relative paths inside resolve from it);
        the campaign file itself for an inline scenario.
    base_label : str
        How messages name the base scenario.
    fixed : dict
        ``[campaign.set]``: key path -> value applied to every run.
    """

    path: str
    text: str
    name: str
    kind: str
    runs: int
    master_seed: int
    base_text: str
    base_path: str
    base_label: str
    fixed: dict
    dispersions: tuple
    sweeps: tuple
    budget: ErrorBudget | None
    summary: SummarySpec

    @property
    def inline(self) -> bool:
        return self.base_path == self.path


def is_campaign(raw: Any) -> bool:
    """Whether parsed TOML tables are a campaign file (it has a top ``[campaign]`` table)."""
    return isinstance(raw, dict) and isinstance(raw.get("campaign"), dict)


def load_campaign(path) -> Campaign:
    """Read a campaign file (see :func:`parse_campaign`).

    Raises
    ------
    EnvironmentSetupError
        The file (or its base scenario file) cannot be read.
    ScenarioError
        A problem in the file, naming the key (``dispersions[1].sigma``), the value and what is
        allowed.
    """
    from sim.scenario.reader import read_input_file

    p = Path(path)
    text = read_input_file(p, "campaign", "give the path of a campaign .toml (see scenarios/)")
    return parse_campaign(text, str(p.resolve()))


def parse_campaign(text: str, path: str = "") -> Campaign:
    """Check a campaign file's own tables (not yet against the base scenario: that is
    :func:`sim.campaign.plan.plan_campaign`)."""
    src = path or "<campaign>"
    raw = parse_toml(text, src, "a campaign file")
    if not is_campaign(raw):
        raise ScenarioError("campaign", raw.get("campaign"), "a campaign file needs a [campaign] "
                            "table (name, scenario, runs, master_seed)", path=src)
    top = Table(raw, "", _TOP, src)
    c = top.table("campaign", ("name", "scenario", "runs", "master_seed", "kind", "set"),
                  required=True)
    base_dir = Path(path).parent if path else Path.cwd()
    stem = Path(path).stem if path else "campaign"
    name = c.string("name", stem if _NAME_RE.match(stem) else "campaign", pattern=_NAME_RE,
                    what="a name of letters, digits, '_', '-', '.' (names the folder and the runs)")
    runs = c.num("runs", lo=1, hi=10**6, integer=True, unit="")
    master_seed = c.num("master_seed", lo=0, hi=2**63 - 1, integer=True, unit="")
    base_text, base_path, base_label = _base(c, top, raw, base_dir, path, src)
    fixed = {}
    if c.has("set"):
        st = c.table("set", (), open_keys=True)
        for k, v in _flatten(st.d).items():
            _check_key_syntax(k, f'campaign.set."{k}"', v, src)
            fixed[k] = v
    dispersions = tuple(_dispersion(k, d, src) for k, d in enumerate(_array(top, "dispersions")))
    sweeps = tuple(_sweep(k, d, src) for k, d in enumerate(_array(top, "sweeps")))
    budget = None
    if top.has("error_budget"):
        budget = _budget(top.table("error_budget", ("sources", "solar_activity_off")))
    kind = "error_budget" if budget is not None else ("sweep" if sweeps else "monte_carlo")
    if c.has("kind"):
        given = c.string("kind", choices=KINDS)
        if given != kind:
            why = {"error_budget": "an [error_budget] table", "sweep": "[[sweeps]] entries",
                   "monte_carlo": "no [[sweeps]] and no [error_budget]"}[kind]
            raise c.err("kind", given, f"the file has {why}, so it is a {kind!r} campaign",
                        "leave kind out or make the tables match it")
    if budget is not None and sweeps:
        raise top.err("sweeps", raw["sweeps"], "an error budget cannot be crossed with a sweep",
                      "make two campaign files")
    keys: dict[str, str] = {}
    for item in (*dispersions, *sweeps):
        if item.key in keys:
            raise ScenarioError(f"{item.where}.key", item.key, "each key may be dispersed or swept "
                                "only once", f"{keys[item.key]} has it too", path=src)
        if item.key in fixed:
            raise ScenarioError(f"{item.where}.key", item.key, "a key fixed in [campaign.set] "
                                "cannot also be dispersed or swept", path=src)
        keys[item.key] = item.where
    summary = _summary(top.table("summary", ("tolerance_m", "dv_max_mps", "confidence", "interval")))
    return Campaign(path=path, text=text, name=name, kind=kind, runs=runs, master_seed=master_seed,
                    base_text=base_text, base_path=base_path, base_label=base_label, fixed=fixed,
                    dispersions=dispersions, sweeps=sweeps, budget=budget, summary=summary)


def _array(top: Table, name: str) -> list:
    v = top.d.get(name, [])
    if not isinstance(v, list) or not all(isinstance(x, dict) for x in v):
        raise top.err(name, v, f"must be an array of tables ([[{name}]] sections)")
    return v


def _base(c: Table, top: Table, raw: dict, base_dir: Path, path: str, src: str):
    from sim.campaign.tomltext import dumps

    inline = top.has("scenario")
    if inline and c.has("scenario"):
        raise c.err("scenario", c.d["scenario"], "give the base scenario either as a path "
                    "(campaign.scenario) or inline ([scenario] tables), not both")
    if inline:
        if not isinstance(raw["scenario"], dict):
            raise top.err("scenario", raw["scenario"], "must be a table holding the scenario's "
                          "tables ([scenario.run], [scenario.chief], ...)")
        return dumps(raw["scenario"]), path, "the inline [scenario]"
    if not c.has("scenario"):
        raise c.err("scenario", None, "required key missing; give the base scenario file (relative "
                    "to this file) or its tables inline as [scenario.run], [scenario.chief], ...")
    s = c.string("scenario", what="a path to the base scenario file")
    p = Path(s) if Path(s).is_absolute() else (base_dir / s)
    if not p.is_file():
        here = p.parent if p.parent.is_dir() else base_dir
        near = closest(p.name, [q.name for q in here.glob("*.toml")], cutoff=0.5) if here.is_dir() else None
        raise c.err("scenario", s, f"no such scenario file (looked at {str(p.resolve())!r})",
                    f"did you mean {str(Path(s).parent / near)!r}?" if near else "")
    try:
        text = p.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise c.err("scenario", s, f"cannot read the file: {exc}") from None
    return text, str(p.resolve()), s


_KEY_RE = re.compile(r"^[A-Za-z0-9_-]+(\[\d+\])*(\.[A-Za-z0-9_-]+(\[\d+\])*)*$")


def _check_key_syntax(key: Any, where: str, value: Any, src: str) -> None:
    if not isinstance(key, str) or not _KEY_RE.match(key):
        raise ScenarioError(where, key, "must be a scenario key path as --set takes it, e.g. "
                            "run.duration_days, bus.sixu.mass_kg or deputies[0].roe_m[1]", path=src)


def _flatten(d: dict, prefix: str = "") -> dict:
    """``[campaign.set]`` written with TOML dotted keys (``run.duration_days = 0.2`` is a nested
    table) or quoted ones (``"run.duration_days" = 0.2``): key path -> value either way."""
    out = {}
    for k, v in d.items():
        path = f"{prefix}.{k}" if prefix else k
        if isinstance(v, dict):
            out.update(_flatten(v, path))
        else:
            out[path] = v
    return out


def _num(t: Table, k: str, *default, **kw):
    return t.num(k, *default, unit=kw.pop("unit", ""), **kw)


def _dispersion(index: int, d: dict, src: str) -> Dispersion:
    t = Table(d, f"dispersions[{index}]", _DIST_KEYS, src)
    key = t.string("key", what="a scenario key path, e.g. deputies[0].roe_m[1]")
    _check_key_syntax(key, t.key("key"), key, src)
    kind = t.string("distribution", choices=DISTRIBUTIONS)
    allowed = set(_NEEDS[kind]) | set(_OPTIONAL.get(kind, ())) | {"key", "distribution", "units"}
    for k in d:
        if k not in allowed:
            raise t.err(k, d[k], f"not a parameter of the {kind} distribution (it takes "
                        f"{', '.join(_NEEDS[kind] + _OPTIONAL.get(kind, ()))})")
    units = key_units(key)
    if t.has("units"):
        given = t.string("units", what="the key's units")
        if given.strip() not in (units, "" if units == "1" else units):
            raise t.err("units", given, f"the key {key} is in {units!r} (from its name's suffix); "
                        "every parameter is in the key's units")
    u = f"{units}, the key's units" if units != "1" else "1"
    if kind == "normal":
        dist = Distribution(kind, mean=_num(t, "mean", unit=u), sigma=_num(t, "sigma", lo=0.0, unit=u))
    elif kind == "uniform":
        low, high = _num(t, "low", unit=u), _num(t, "high", unit=u)
        if not high > low:
            raise t.err("high", high, f"must be > low = {low:g}")
        dist = Distribution(kind, low=low, high=high)
    elif kind == "truncated_normal":
        mean, sigma = _num(t, "mean", unit=u), _num(t, "sigma", lo=0.0, lo_open=True, unit=u)
        low, high = _num(t, "low", unit=u), _num(t, "high", unit=u)
        if not high > low:
            raise t.err("high", high, f"must be > low = {low:g}")
        dist = Distribution(kind, mean=mean, sigma=sigma, low=low, high=high)
    elif kind == "lognormal":
        dist = Distribution(kind, median=_num(t, "median", lo=0.0, lo_open=True, unit=u),
                            sigma_ln=_num(t, "sigma_ln", lo=0.0, hi=10.0, unit="1, of ln(value - offset)"),
                            offset=_num(t, "offset", 0.0, unit=u))
    else:
        vals = d["values"]
        if (not isinstance(vals, list) or not vals or not all(_is_num(v) for v in vals)
                or not all(math.isfinite(float(v)) for v in vals)):
            raise t.err("values", vals, f"must be a non-empty array of numbers ({u})")
        weights = ()
        if t.has("weights"):
            w = d["weights"]
            if (not isinstance(w, list) or len(w) != len(vals) or not all(_is_num(x) for x in w)
                    or any(x < 0 or not math.isfinite(float(x)) for x in w) or sum(w) <= 0):
                raise t.err("weights", w, f"must be {len(vals)} numbers >= 0 (one per value), not "
                            "all zero")
            weights = tuple(float(x) for x in w)
        dist = Distribution(kind, values=tuple(vals), weights=weights)
    return Dispersion(index=index, key=key, dist=dist, units=units)


def _sweep(index: int, d: dict, src: str) -> Sweep:
    t = Table(d, f"sweeps[{index}]", ("key", "values", "start", "stop", "num"), src)
    key = t.string("key", what="a scenario key path, e.g. guidance.settings.density_coefficient")
    _check_key_syntax(key, t.key("key"), key, src)
    u = key_units(key)
    if t.has("values"):
        for k in ("start", "stop", "num"):
            if t.has(k):
                raise t.err(k, d[k], "give either values or start, stop, num")
        vals = d["values"]
        if not isinstance(vals, list) or not vals:
            raise t.err("values", vals, f"must be a non-empty array of numbers ({u})")
        for v in vals:
            if not _is_num(v) or not math.isfinite(float(v)):
                raise t.err("values", vals, f"must be an array of numbers ({u}): a sweep is over a "
                            f"numeric key", f"{v!r} is {type_name(v)}")
        if len(set(vals)) != len(vals):
            raise t.err("values", vals, "grid values must be distinct")
        return Sweep(index, key, tuple(vals))
    if not (t.has("start") or t.has("stop") or t.has("num")):
        raise t.err("values", None, "required key missing; give values = [...] or start, stop, num")
    start, stop = _num(t, "start", unit=u), _num(t, "stop", unit=u)
    num = t.num("num", lo=2, hi=10000, integer=True, unit="")
    if stop == start:
        raise t.err("stop", stop, f"must differ from start = {start:g}")
    return Sweep(index, key, tuple(float(x) for x in np.linspace(start, stop, num)))


def _budget(t: Table) -> ErrorBudget:
    sources: tuple = ()
    if t.has("sources"):
        v = t.d["sources"]
        allowed = SOURCES + ("dispersions",)
        if not isinstance(v, list) or not v or not all(isinstance(x, str) for x in v):
            raise t.err("sources", v, "must be a non-empty array of source names: "
                        + ", ".join(allowed))
        for s in v:
            if s not in allowed:
                near = closest(s, allowed, cutoff=0.5)
                raise t.err("sources", v, f"{s!r} is not an error source; sources: "
                            + ", ".join(allowed), f"did you mean {near!r}?" if near else "")
        if len(set(v)) != len(v):
            raise t.err("sources", v, "each source once")
        sources = tuple(s for s in allowed if s in v)  # flown in the standard order
    off: dict = {}
    sa = t.table("solar_activity_off", ("f107_sfu", "f107a_sfu", "ap"))
    if sa is not None:
        for k in ("f107_sfu", "f107a_sfu"):
            if sa.has(k):
                off[k] = sa.num(k, lo=0.0, hi=500.0, lo_open=True, unit="sfu")
        if sa.has("ap"):
            off["ap"] = sa.num("ap", lo=0.0, hi=400.0, unit="")
    return ErrorBudget(sources=sources, solar_activity_off=off)


def _summary(t: Table | None) -> SummarySpec:
    if t is None:
        return SummarySpec()
    tol = t.vec("tolerance_m", 6, None, lo=0.0, lo_open=True, scalar_ok=True,
                unit="a-scaled m, da dlambda dex dey dix diy")
    dv = t.num("dv_max_mps", None, lo=0.0, lo_open=True)
    conf = t.num("confidence", 0.95, lo=0.0, hi=1.0, lo_open=True, hi_open=True, unit="")
    interval = t.string("interval", "clopper_pearson", choices=INTERVALS)
    return SummarySpec(tolerance_m=tuple(float(x) for x in tol) if tol is not None else None,
                       dv_max_mps=dv, confidence=conf, interval=interval)

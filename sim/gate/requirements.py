"""The requirements file of the regression gate (TOML, covey's own format ``covey.requirements``
version 1): a ``[gate]`` table of settings and one ``[[requirement]]`` table per requirement,
each with an ``id`` and free ``text`` so the verification matrix traces to the user's list.
The README section "Gate a controller change in CI" documents every key.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from sim.errors import ScenarioError
from sim.gate.quantities import RUN_QUANTITIES, deputy_quantities
from sim.gate.stats import PERCENTILE_METHODS

__all__ = ["FORMAT", "GATE_KEYS", "REQUIREMENT_KEYS", "GateSettings", "Requirement",
           "RequirementSet", "load_requirements", "parse_requirements"]

FORMAT = "covey.requirements"
FORMAT_VERSION = "1"

GATE_KEYS = ("format", "name", "significance", "confidence", "percentile_method")
REQUIREMENT_KEYS = ("id", "text", "metric", "kind", "max", "min", "abs", "statistic", "percentile",
                    "deputies", "applies_to", "confidence", "judge_by", "success_requires",
                    "tolerance", "tolerance_rel", "better", "significance")
STATISTICS = ("worst", "mean", "median", "percentile")
KINDS = ("limit", "regression")
APPLIES_TO = ("any", "run", "campaign")
JUDGE_BY = ("lower_bound", "estimate")
_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.:/-]*$")


@dataclass(frozen=True)
class GateSettings:
    """``[gate]``: name, significance (campaign regression tests, default 0.01), confidence
    (success-rate lower bounds, default 0.95), percentile_method (numpy's, default linear)."""

    name: str = ""
    significance: float = 0.01
    confidence: float = 0.95
    percentile_method: str = "linear"


@dataclass(frozen=True)
class Requirement:
    """One ``[[requirement]]`` (see the README for the meaning of each key).

    ``side`` is ``"max"`` or ``"min"`` for a limit (``limit`` its value), ``""`` for a regression.
    """

    id: str
    text: str
    metric: str
    kind: str = "limit"
    side: str = ""
    limit: float = float("nan")
    abs: bool = False
    statistic: str = "worst"
    percentile: float | None = None
    deputies: tuple = ()
    applies_to: str = "any"
    confidence: float | None = None
    judge_by: str = "lower_bound"
    success_requires: tuple = ()
    tolerance: float = 0.0
    tolerance_rel: float = 0.0
    better: str = ""
    significance: float | None = None
    index: int = 0

    @property
    def level(self) -> str:
        return "run" if self.metric in RUN_QUANTITIES else "deputy"

    @property
    def units(self) -> str:
        q = RUN_QUANTITIES.get(self.metric) or deputy_quantities()[self.metric]
        return q.units


@dataclass
class RequirementSet:
    """A requirements file read and checked."""

    path: str
    gate: GateSettings
    requirements: list = field(default_factory=list)

    def by_id(self, rid: str) -> Requirement:
        for r in self.requirements:
            if r.id == rid:
                return r
        raise KeyError(rid)


class _T:
    """A table of the file: refuses unknown keys (closest suggested), typed getters."""

    def __init__(self, d: dict, prefix: str, allowed, src: str):
        self.d, self.prefix, self.allowed, self.src = d, prefix, tuple(allowed), src
        for k in d:
            if k not in self.allowed:
                close = difflib.get_close_matches(k, list(self.allowed), n=1, cutoff=0.6)
                hint = f"did you mean {close[0]!r}?" if close else "valid keys: " + ", ".join(self.allowed)
                raise ScenarioError(self.key(k), d[k], "unknown key", hint, path=src)

    def key(self, k: str) -> str:
        return f"{self.prefix}.{k}" if self.prefix else k

    def err(self, k: str, v: Any, allowed: str, hint: str = "") -> ScenarioError:
        return ScenarioError(self.key(k), v, allowed, hint, path=self.src)

    def has(self, k: str) -> bool:
        return k in self.d

    def num(self, k: str, default=None, lo=None, hi=None, lo_open=False, hi_open=False,
            what: str = "") -> float | None:
        if k not in self.d:
            return default
        v = self.d[k]
        rng = (("(" if lo_open else "[") + ("-inf" if lo is None else f"{lo:g}") + ", "
               + ("inf" if hi is None else f"{hi:g}") + (")" if hi_open else "]"))
        allowed = f"a number in {rng}" + (f" ({what})" if what else "")
        if isinstance(v, bool) or not isinstance(v, (int, float)) or math.isnan(float(v)):
            raise self.err(k, v, allowed)
        x = float(v)
        if (lo is not None and (x < lo or (lo_open and x == lo))) or (
                hi is not None and (x > hi or (hi_open and x == hi))):
            raise self.err(k, v, allowed)
        return x

    def string(self, k: str, default=None, choices=None, what: str = "") -> str | None:
        if k not in self.d:
            return default
        v = self.d[k]
        allowed = ("one of " + ", ".join(repr(c) for c in choices)) if choices else (what or "a string")
        if not isinstance(v, str):
            raise self.err(k, v, allowed)
        if choices and v not in choices:
            close = difflib.get_close_matches(v, list(choices), n=1, cutoff=0.5)
            raise self.err(k, v, allowed, f"did you mean {close[0]!r}?" if close else "")
        return v

    def boolean(self, k: str, default: bool) -> bool:
        if k not in self.d:
            return default
        v = self.d[k]
        if not isinstance(v, bool):
            raise self.err(k, v, "true or false")
        return v

    def strings(self, k: str, what: str) -> tuple:
        if k not in self.d:
            return ()
        v = self.d[k]
        if isinstance(v, str):
            v = [v]
        if not isinstance(v, list) or not all(isinstance(x, str) and x for x in v):
            raise self.err(k, self.d[k], f"a list of {what}")
        return tuple(v)

    def refuse(self, keys, why: str) -> None:
        for k in keys:
            if k in self.d:
                raise self.err(k, self.d[k], why)


def _metric(t: _T) -> str:
    names = list(deputy_quantities()) + list(RUN_QUANTITIES)
    if not t.has("metric"):
        raise t.err("metric", None, "required: one of " + ", ".join(names))
    v = t.d["metric"]
    if not isinstance(v, str) or v not in names:
        close = difflib.get_close_matches(str(v), names, n=1, cutoff=0.5)
        raise t.err("metric", v, "unknown metric; one of " + ", ".join(names),
                    f"did you mean {close[0]!r}?" if close else "")
    return v


def _requirement(d: Any, i: int, src: str, gate: GateSettings) -> Requirement:
    prefix = f"requirement[{i}]"
    if not isinstance(d, dict):
        raise ScenarioError(prefix, d, "a table: [[requirement]] with id, text, metric and a "
                                       "limit", path=src)
    t = _T(d, prefix, REQUIREMENT_KEYS, src)
    rid = t.string("id", what="an id of letters, digits and _ . : / -")
    if rid is None:
        raise t.err("id", None, "required: the requirement's id in your requirement list, "
                                "e.g. \"FF-ACC-01\" (letters, digits, _ . : / -)")
    if not _ID.match(rid):
        raise t.err("id", rid, "letters, digits and _ . : / -, starting with a letter or digit")
    text = t.string("text", what="the requirement's wording")
    if not text or not text.strip():
        raise t.err("text", d.get("text"), "required: the requirement's wording (free text)")
    metric = _metric(t)
    q = RUN_QUANTITIES.get(metric) or deputy_quantities()[metric]
    kind = t.string("kind", "limit", choices=KINDS)
    applies_to = t.string("applies_to", "any", choices=APPLIES_TO)
    deputies = t.strings("deputies", "deputy names")
    common = dict(id=rid, text=text.strip(), metric=metric, kind=kind, applies_to=applies_to,
                  index=i)
    if kind == "regression":
        t.refuse(("max", "min", "statistic", "percentile", "confidence", "judge_by",
                  "success_requires"), "not used by kind = \"regression\" (it takes tolerance, "
                                      "tolerance_rel, better, significance, abs, deputies)")
        if q.level == "run":
            raise t.err("metric", metric, "kind = \"regression\" takes a per-deputy metric; "
                                          "check run counts with a limit (e.g. runs_failed, max = 0)")
        absolute = t.boolean("abs", False)
        better = t.string("better", None, choices=("lower", "higher"))
        if better is None:
            better = "lower" if absolute else q.better
        if better is None:
            raise t.err("better", None, f"required for {metric} ({q.text}): \"lower\" or "
                                        "\"higher\"", "or give abs = true (then lower is better)")
        return Requirement(
            **common, abs=absolute, deputies=deputies, better=better,
            tolerance=t.num("tolerance", 0.0, lo=0.0, what=q.units),
            tolerance_rel=t.num("tolerance_rel", 0.0, lo=0.0, what="fraction of the baseline"),
            significance=t.num("significance", None, lo=0.0, hi=1.0, lo_open=True, hi_open=True))
    t.refuse(("tolerance", "tolerance_rel", "better", "significance"),
             "only used by kind = \"regression\"")
    has_max, has_min = t.has("max"), t.has("min")
    if has_max and has_min:
        raise t.err("min", d["min"], "give one limit, max or min (for a two-sided bound on a "
                                     "signed error use abs = true with max)")
    if not (has_max or has_min):
        want = ("min = <number>" if metric == "success_rate" else "max = <number>" if
                q.level == "run" else "max = <number> (upper limit) or min = <number> (lower limit)")
        raise t.err("max", None, f"a limit is required: {want}, in {q.units}")
    side = "max" if has_max else "min"
    if q.level == "run":
        t.refuse(("abs", "statistic", "percentile", "deputies"),
                 f"only for per-deputy metrics ({metric} is one number per campaign or run)")
        if metric == "success_rate":
            if side != "min":
                raise t.err("max", d["max"], "success_rate takes a lower limit: min = <number in "
                                             "[0, 1]>")
            limit = t.num("min", lo=0.0, hi=1.0, what="fraction of runs")
            conf = t.num("confidence", gate.confidence, lo=0.0, hi=1.0, lo_open=True, hi_open=True)
            return Requirement(**common, side="min", limit=limit, confidence=conf,
                               judge_by=t.string("judge_by", "lower_bound", choices=JUDGE_BY),
                               success_requires=t.strings("success_requires", "requirement ids"))
        if side != "max":
            raise t.err("min", d["min"], f"{metric} takes an upper limit: max = <number of runs>")
        t.refuse(("confidence", "judge_by", "success_requires"), "only for success_rate")
        return Requirement(**common, side="max", limit=t.num("max", lo=0.0, what="runs"))
    t.refuse(("confidence", "judge_by", "success_requires"), "only for success_rate")
    limit = t.num(side, what=q.units)
    pct = t.num("percentile", None, lo=0.0, hi=100.0,
                what="percent of runs that must meet the limit")
    stat = t.string("statistic", "percentile" if pct is not None else "worst", choices=STATISTICS)
    if stat == "percentile" and pct is None:
        raise t.err("percentile", None, "required with statistic = \"percentile\": a number in "
                                        "[0, 100]")
    if pct is not None and stat != "percentile":
        raise t.err("percentile", pct, f"only with statistic = \"percentile\" (given {stat!r})")
    return Requirement(**common, side=side, limit=limit, abs=t.boolean("abs", False),
                       statistic=stat, percentile=pct, deputies=deputies)


def parse_requirements(text: str, path: str = "") -> RequirementSet:
    """Read and check requirements TOML text.

    Raises
    ------
    ScenarioError
        Naming the key path (``requirement[2].percentile``), the value and what is allowed, with
        the closest valid name for a misspelt key or metric.
    """
    from sim.scenario.reader import parse_toml

    src = path or "<requirements>"
    raw = parse_toml(text, src, "a requirements file")
    top = _T(raw, "", ("gate", "requirement"), src)
    g = raw.get("gate", {})
    if not isinstance(g, dict):
        raise top.err("gate", g, "a table [gate]")
    gt = _T(g, "gate", GATE_KEYS, src)
    fmt = gt.string("format", FORMAT, what=f"{FORMAT!r}")
    if fmt not in (FORMAT, f"{FORMAT} {FORMAT_VERSION}"):
        raise gt.err("format", fmt, f"{FORMAT!r} (version {FORMAT_VERSION}) or leave it out")
    gate = GateSettings(
        name=gt.string("name", "") or (Path(path).stem if path else ""),
        significance=gt.num("significance", 0.01, lo=0.0, hi=1.0, lo_open=True, hi_open=True),
        confidence=gt.num("confidence", 0.95, lo=0.0, hi=1.0, lo_open=True, hi_open=True),
        percentile_method=gt.string("percentile_method", "linear", choices=PERCENTILE_METHODS))
    items = raw.get("requirement")
    if items is None or (isinstance(items, list) and not items):
        raise top.err("requirement", None, "at least one [[requirement]] table with id, text, "
                                           "metric and a limit")
    if not isinstance(items, list):
        raise top.err("requirement", items, "an array of tables: [[requirement]]")
    reqs = [_requirement(d, i, src, gate) for i, d in enumerate(items)]
    seen: dict = {}
    for r in reqs:
        if r.id in seen:
            raise ScenarioError(f"requirement[{r.index}].id", r.id,
                                f"ids must be unique (also requirement[{seen[r.id]}].id)", path=src)
        seen[r.id] = r.index
    for r in reqs:
        for ref in r.success_requires:
            ok = [x for x in reqs if x.id == ref and x.kind == "limit" and x.level == "deputy"]
            if not ok:
                cands = [x.id for x in reqs if x.kind == "limit" and x.level == "deputy"]
                close = difflib.get_close_matches(ref, cands, n=1, cutoff=0.5)
                raise ScenarioError(f"requirement[{r.index}].success_requires", ref,
                                    "ids of per-deputy limit requirements of this file: "
                                    + (", ".join(cands) or "(none)"),
                                    f"did you mean {close[0]!r}?" if close else "", path=src)
    return RequirementSet(str(path), gate, reqs)


def load_requirements(path) -> RequirementSet:
    """Read a requirements file (:func:`parse_requirements`).

    Raises
    ------
    EnvironmentSetupError
        The file cannot be read.
    ScenarioError
        Its content is refused.
    """
    from sim.scenario.reader import read_input_file

    p = Path(path)
    text = read_input_file(p, "requirements", "give the path of a requirements TOML file (example: "
                           "scenarios/demo_formation_requirements.toml)")
    return parse_requirements(text, str(p))

"""The regression gate: a candidate (run log or campaign) checked against a requirements file
and, optionally, a baseline, giving a verification matrix (requirement id, text, measured value,
limit, margin, verdict). ``covey check`` prints it; :func:`assert_requirements` asserts it in a
user's own test suite.
"""

from __future__ import annotations

import os
from dataclasses import asdict, dataclass, field
from typing import Any, Mapping

import numpy as np

from sim.errors import ScenarioError
from sim.gate.quantities import RUN_QUANTITIES
from sim.gate.requirements import Requirement, RequirementSet, load_requirements
from sim.gate.sources import Source, load_source, pairing
from sim.gate.stats import limit_statistic, regression, success_lower_bound

__all__ = ["MatrixRow", "Verification", "evaluate", "check", "assert_requirements", "fmt_num"]

PASS, FAIL, NA = "pass", "fail", "n/a"


def fmt_num(x: float, units: str = "") -> str:
    """A number for the matrix: 4 significant digits, +-inf as ``unmeasured``."""
    if x is None or np.isnan(x):
        return "nan"
    if np.isinf(x):
        return "unmeasured"
    s = str(int(x)) if float(x).is_integer() and abs(x) < 1e6 else format(float(x), ".4g")
    return f"{s} {units}" if units and units != "1" else s


@dataclass
class MatrixRow:
    """One row of the verification matrix.

    Attributes
    ----------
    id, text : str
        From the requirements file.
    metric : str
    deputy : str
        The deputy that decides the row (the worst one), "" for run-level rows.
    measured, limit, margin : float
        In the metric's units; ``margin`` > 0 is on the good side of the limit (for regressions:
        the allowance minus the worsening).
    measured_text, limit_text, margin_text : str
    verdict : str
        ``pass``, ``fail`` or ``n/a`` (not applicable: e.g. no baseline given).
    detail : str
        Every deputy's value, the statistic, the test and its p-value, the counts.
    """

    id: str
    text: str
    metric: str
    deputy: str
    measured: float
    limit: float
    margin: float
    measured_text: str
    limit_text: str
    margin_text: str
    verdict: str
    detail: str = ""

    def as_dict(self) -> dict:
        return asdict(self)


@dataclass
class Verification:
    """The verification matrix of one candidate.

    Attributes
    ----------
    candidate, baseline, requirements : str
        Paths (baseline "" when none).
    name : str
        The requirement set's name.
    kind : str
        The candidate's kind (``run`` or ``campaign``) and ``n_runs`` its number of runs.
    rows : list of MatrixRow
    notes : list of str
    """

    candidate: str
    baseline: str
    requirements: str
    name: str
    kind: str
    n_runs: int
    rows: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    @property
    def passed(self) -> bool:
        return not any(r.verdict == FAIL for r in self.rows)

    @property
    def exit_code(self) -> int:
        return 0 if self.passed else 1

    def counts(self) -> dict:
        return {v: sum(r.verdict == v for r in self.rows) for v in (PASS, FAIL, NA)}

    def headline(self) -> str:
        c = self.counts()
        base = f" and baseline {self.baseline}" if self.baseline else ""
        runs = "run log" if self.kind == "run" else f"campaign of {self.n_runs} runs"
        word = "PASS" if self.passed else "FAIL"
        return (f"{word}: {self.candidate} ({runs}) against {self.requirements}{base}: "
                f"{len(self.rows)} requirements, {c[PASS]} pass, {c[FAIL]} fail, {c[NA]} n/a")

    def text(self, fmt: str = "table") -> str:
        from sim.gate.output import render_matrix

        return render_matrix(self, fmt)


def _stat_label(r: Requirement, cand: Source) -> str:
    if cand.n == 1:
        return ""
    if r.statistic == "percentile":
        p = r.percentile if r.side == "max" else 100.0 - r.percentile
        return f"p{p:g}"
    return {"worst": "worst", "mean": "mean", "median": "median"}[r.statistic]


def _deputies(r: Requirement, cand: Source, path: str) -> list:
    if not r.deputies:
        return list(cand.deputies)
    for d in r.deputies:
        if d not in cand.deputies:
            raise ScenarioError(f"requirement[{r.index}].deputies", d,
                                f"a deputy of the candidate {cand.path}: "
                                + (", ".join(cand.deputies) or "(none with metrics)"), path=path)
    return list(r.deputies)


def _values(cand: Source, d: str, r: Requirement) -> np.ndarray:
    v = cand.values(d, r.metric)
    return np.abs(v) if r.abs else v


def _meets(cand: Source, r: Requirement, path: str) -> np.ndarray:
    """(N,) bool: every deputy of limit requirement ``r`` within its limit in run k (NaN fails)."""
    ok = np.ones(cand.n, bool)
    for d in _deputies(r, cand, path):
        v = _values(cand, d, r)
        with np.errstate(invalid="ignore"):
            ok &= (v <= r.limit) if r.side == "max" else (v >= r.limit)
    return ok


def _metric_name(r: Requirement) -> str:
    return f"|{r.metric}|" if r.abs else r.metric


def _row(r: Requirement, deputy: str, measured: float, limit: float, margin: float, mt: str,
         lt: str, verdict: str, detail: str, units: str) -> MatrixRow:
    mtxt = fmt_num(margin, units) if np.isfinite(margin) else ("-inf" if margin < 0 else "")
    if np.isfinite(margin) and margin > 0:
        mtxt = "+" + mtxt
    return MatrixRow(r.id, r.text, _metric_name(r), deputy, float(measured), float(limit),
                     float(margin), mt, lt, mtxt, verdict, detail)


def _na(r: Requirement, why: str) -> MatrixRow:
    return MatrixRow(r.id, r.text, _metric_name(r), "", float("nan"), float("nan"), float("nan"),
                     "", "", "", NA, why)


def _run_level(r: Requirement, cand: Source, rs: RequirementSet) -> MatrixRow:
    st = np.asarray(cand.statuses, dtype=object)
    n = cand.n
    if r.metric == "runs_failed":
        k = int(np.sum((st == "failed") | (st == "missing")))
        v = PASS if k <= r.limit else FAIL
        return _row(r, "", k, r.limit, r.limit - k, f"{k} of {n}", f"<= {fmt_num(r.limit)}", v,
                    f"statuses: {_status_counts(st)}", "")
    if r.metric == "runs_not_ok":
        k = int(np.sum(st != "ok"))
        v = PASS if k <= r.limit else FAIL
        return _row(r, "", k, r.limit, r.limit - k, f"{k} of {n}", f"<= {fmt_num(r.limit)}", v,
                    f"statuses: {_status_counts(st)}", "")
    # success_rate
    ok = st == "ok"
    for ref in r.success_requires:
        ok &= _meets(cand, rs.by_id(ref), rs.path)
    k = int(np.sum(ok))
    est = k / n if n else float("nan")
    lb = success_lower_bound(k, n, r.confidence)
    judged = lb if r.judge_by == "lower_bound" else est
    v = PASS if judged >= r.limit else FAIL
    conf = f"{100 * r.confidence:g} %"
    what = "run ended ok" + (" and met " + ", ".join(r.success_requires) if r.success_requires else "")
    if r.judge_by == "lower_bound":
        mt = f"{conf} lower bound {lb:.4f} ({k}/{n} = {est:.4f})"
    else:
        mt = f"{est:.4f} ({k}/{n}; {conf} lower bound {lb:.4f})"
    need = ""
    if r.judge_by == "lower_bound" and k == n and n and lb < r.limit and r.limit < 1:
        need = (f"; {int(np.ceil(np.log(1 - r.confidence) / np.log(r.limit)))} runs without a "
                f"failure would show {r.limit:g} at {conf}")
    return _row(r, "", judged, r.limit, judged - r.limit, mt, f">= {r.limit:g}", v,
                f"success = {what}; one-sided Clopper-Pearson bound at {conf}{need}", "")


def _status_counts(st) -> str:
    vals, cnt = np.unique(np.asarray(st, dtype=str), return_counts=True)
    return ", ".join(f"{c} {v}" for v, c in zip(vals, cnt)) or "none"


def _limit(r: Requirement, cand: Source, rs: RequirementSet) -> MatrixRow:
    units = r.units
    deps = _deputies(r, cand, rs.path)
    if not deps:
        return _row(r, "", float("nan"), r.limit, float("nan"), "no deputy metrics",
                    f"{'<=' if r.side == 'max' else '>='} {fmt_num(r.limit, units)}", FAIL,
                    "the candidate holds no per-deputy metrics (no deputy has a target)", units)
    label = _stat_label(r, cand)
    parts, worst = [], None
    for d in deps:
        if not cand.has(d, r.metric):
            parts.append(f"{d}: not in the candidate")
            m = (d, float("nan"), -np.inf)
        else:
            v = _values(cand, d, r)
            s = limit_statistic(v, r.side, r.statistic, r.percentile, rs.gate.percentile_method)
            margin = (r.limit - s) if r.side == "max" else (s - r.limit)
            if np.isnan(margin):
                margin = -np.inf
            nn = int(np.sum(np.isnan(v)))
            parts.append(f"{d} {label + ' ' if label else ''}{fmt_num(s, units)}"
                         + (f" ({nn} unmeasured, counted as worst)" if nn else ""))
            m = (d, s, margin)
        if worst is None or m[2] < worst[2]:
            worst = m
    d, s, margin = worst
    verdict = PASS if margin >= 0 else FAIL
    lt = f"{'<=' if r.side == 'max' else '>='} {fmt_num(r.limit, units)}"
    mt = f"{d}: {label + ' ' if label else ''}{fmt_num(s, units)}"
    how = ""
    if cand.n > 1:
        how = f"; {cand.n} runs"
        if r.statistic in ("percentile", "median"):
            how += f", numpy.percentile method {rs.gate.percentile_method!r}"
    return _row(r, d, s, r.limit, margin, mt, lt, verdict, "; ".join(parts) + how, units)


def _worse(w: float, units: str) -> str:
    if w == 0:
        return "same"
    return f"{'worse' if w > 0 else 'better'} by {fmt_num(abs(w), units)}"


def _regression(r: Requirement, cand: Source, base: Source | None, rs: RequirementSet
                ) -> MatrixRow:
    if base is None:
        return _na(r, "no baseline given (covey check --baseline BASELINE)")
    units = r.units
    deps = [d for d in _deputies(r, cand, rs.path)]
    missing = [d for d in deps if d not in base.deputies]
    deps = [d for d in deps if d in base.deputies]
    if not deps:
        return _na(r, "no deputy in both the candidate and the baseline"
                   + (f" (not in the baseline: {', '.join(missing)})" if missing else ""))
    paired, why = pairing(cand, base)
    sig = r.significance if r.significance is not None else rs.gate.significance
    parts, worst = [], None
    for d in deps:
        c, b = cand.values(d, r.metric), base.values(d, r.metric)
        if r.abs:
            c, b = np.abs(c), np.abs(b)
        res = regression(c, b, r.better, r.tolerance, r.tolerance_rel, paired, sig)
        margin = res.allowance - res.worsening
        p = f", p = {res.p:.3g}" if np.isfinite(res.p) else ""
        parts.append(f"{d} {_worse(res.worsening, units)} (allowance "
                     f"{fmt_num(res.allowance, units)}{p})")
        # the deputy that decides: a failing one first, then the smallest margin
        key = (res.worse, -margin if np.isfinite(margin) else np.inf)
        if worst is None or key > worst[0]:
            worst = (key, d, res, margin)
    _, d, res, margin = worst
    verdict = FAIL if res.worse else PASS
    test = (f"; one-sided {res.method} test at significance {sig:g} ({why})"
            if res.method in ("wilcoxon", "mannwhitney") else "")
    mt = f"{d}: {_worse(res.worsening, units)}"
    if np.isfinite(res.p):
        mt += f" (p = {res.p:.3g})"
    lt = (f"worse by <= {fmt_num(res.allowance, units)}" if res.method == "difference"
          else f"not worse than {fmt_num(res.allowance, units)} at p < {sig:g}")
    extra = f"; not in the baseline: {', '.join(missing)}" if missing else ""
    return _row(r, d, res.worsening, res.allowance, margin, mt, lt, verdict,
                f"{'lower' if r.better == 'lower' else 'higher'} is better; " + "; ".join(parts)
                + test + extra, units)


def evaluate(cand: Source, rs: RequirementSet, base: Source | None = None) -> Verification:
    """The verification matrix of a candidate against a requirement set (and a baseline).

    Parameters
    ----------
    cand : Source
        :func:`sim.gate.sources.load_source` of a run log or campaign.
    rs : RequirementSet
    base : Source, optional
        The baseline for ``kind = "regression"`` requirements (n/a without it).

    Raises
    ------
    ScenarioError
        A requirement names a deputy the candidate does not have.
    """
    out = Verification(cand.path, base.path if base else "", rs.path, rs.gate.name, cand.kind,
                       cand.n, notes=list(cand.notes) + (list(base.notes) if base else []))
    for r in rs.requirements:
        if r.applies_to != "any" and r.applies_to != cand.kind:
            out.rows.append(_na(r, f"applies to a {r.applies_to} only; the candidate is a "
                                   f"{'run log' if cand.kind == 'run' else 'campaign'}"))
        elif r.kind == "regression":
            out.rows.append(_regression(r, cand, base, rs))
        elif r.metric in RUN_QUANTITIES:
            out.rows.append(_run_level(r, cand, rs))
        else:
            out.rows.append(_limit(r, cand, rs))
    if base is not None and base.kind != cand.kind:
        out.notes.append(f"the candidate is a {cand.kind} and the baseline a {base.kind}")
    return out


def _path(x: Any) -> str:
    if hasattr(x, "path") and not isinstance(x, (str, os.PathLike)):
        return str(x.path)
    return str(x)


def check(candidate: Any, requirements: Any, baseline: Any = None,
          overrides: Mapping[str, Any] | None = None) -> Verification:
    """Check a candidate against requirements (and a baseline): the verification matrix.

    Parameters
    ----------
    candidate : path-like or object with ``.path``
        A run log, a campaign folder (or its ``summary.h5``), or a ``RunSummary``.
    requirements : path-like or RequirementSet
    baseline : path-like or object with ``.path``, optional
    overrides : mapping, optional
        Judging overrides (:data:`sim.gate.judge.JUDGE_KEYS`) applied to candidate and baseline.

    Raises
    ------
    ScenarioError, LogFormatError, EnvironmentSetupError
        Bad requirements, unreadable candidate or baseline.
    """
    rs = requirements if isinstance(requirements, RequirementSet) else load_requirements(requirements)
    cand = load_source(_path(candidate), overrides)
    base = load_source(_path(baseline), overrides) if baseline is not None else None
    return evaluate(cand, rs, base)


def assert_requirements(candidate: Any, requirements: Any, baseline: Any = None, *,
                        overrides: Mapping[str, Any] | None = None) -> Verification:
    """Assert that a run or campaign meets its requirements, in one call from a test.

    ::

        from sim.api import assert_requirements, load_scenario, run_scenario

        def test_my_law_meets_the_formation_requirements(tmp_path):
            cfg = load_scenario("scenarios/demo_formation.toml", {"run.duration_days": 0.5})
            summary = run_scenario(cfg, tmp_path / "run.h5")
            assert_requirements(summary, "scenarios/demo_formation_requirements.toml")

    Parameters
    ----------
    candidate, requirements, baseline, overrides
        As :func:`check`.

    Returns
    -------
    Verification
        When every requirement passes (or is n/a).

    Raises
    ------
    AssertionError
        With the verification matrix as text when any requirement fails.
    """
    v = check(candidate, requirements, baseline, overrides)
    if not v.passed:
        raise AssertionError(v.headline() + "\n" + v.text("table"))
    return v


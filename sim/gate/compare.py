"""Compare run logs and campaigns side by side, per deputy and metric.

Run logs: the values, B - A and (B - A) / |A|. Campaigns: percentiles side by side and, per
metric, a two-sample test of each source against the first (paired Wilcoxon signed-rank when
both share a master seed and dispersions, else Mann-Whitney U or Kolmogorov-Smirnov), a
difference called out only when its p-value is below the significance level. How the sources
differ (schema, scenario, deputies, pairing) is said in one line each.
"""

from __future__ import annotations

import string
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np

from sim.errors import ScenarioError
from sim.gate.quantities import DEFAULT_COMPARE, deputy_quantities
from sim.gate.sources import Source, load_source, pairing
from sim.gate.stats import percentile_value, two_sample

__all__ = ["Comparison", "compare", "compare_sources"]


@dataclass
class Comparison:
    """The result of :func:`compare`.

    Attributes
    ----------
    sources : list of Source
        Labelled A, B, C, ... (``labels``); the first is the reference.
    labels : list of str
    mode : str
        ``"runs"`` (every source a single run) or ``"campaigns"``.
    columns : list of (key, header, format spec)
    rows : list of dict
        One per deputy and metric: ``deputy``, ``metric``, ``units``, and per source ``<L>`` (a
        run's value) or ``<L>_p<q>`` (percentiles), per compared source ``<L>_diff`` and
        ``<L>_rel`` (runs) or ``<L>_shift``, ``<L>_p``, ``<L>_test`` (campaigns), and
        ``<L>_change`` (``higher``/``lower``, with ``worse``/``better`` when the metric has a
        direction; empty when the same or not significant).
    notes : list of str
    significance : float
    """

    sources: list
    labels: list
    mode: str
    columns: list
    rows: list
    notes: list = field(default_factory=list)
    significance: float = 0.01

    def flagged(self, label: str | None = None) -> list[tuple[str, str, str]]:
        """(deputy, metric, change) of every difference called out (against the first source)."""
        out = []
        for r in self.rows:
            for lab in self.labels[1:]:
                if (label is None or lab == label) and r.get(f"{lab}_change"):
                    out.append((r["deputy"], r["metric"], r[f"{lab}_change"]))
        return out

    def text(self, fmt: str = "table") -> str:
        from sim.gate.output import render_rows

        title = " vs ".join(f"{lab} = {s.label()}" for lab, s in zip(self.labels, self.sources))
        return render_rows(self.columns, self.rows, fmt, title, self.notes,
                           extra={"mode": self.mode, "significance": self.significance,
                                  "sources": {lab: s.path for lab, s in zip(self.labels, self.sources)}})


def _direction(q, diff: float) -> str:
    if diff == 0 or not np.isfinite(diff):
        return ""
    word = "higher" if diff > 0 else "lower"
    if q.better is None:
        return word
    worse = (diff > 0) == (q.better == "lower")
    return f"{word}, {'worse' if worse else 'better'}"


def _setup_diff(a: Source, b: Source) -> list[str]:
    keys = sorted(k for k in set(a.setup) | set(b.setup) if a.setup.get(k) != b.setup.get(k))
    return keys


def _notes(sources: Sequence[Source], labels: Sequence[str], deputies: list) -> list[str]:
    a = sources[0]
    notes = []
    for lab, s in zip(labels, sources):
        kind = "run log" if s.kind == "run" else f"campaign of {s.n} runs"
        st = "" if s.kind == "campaign" else f", status {s.statuses[0]}"
        notes.append(f"{lab} = {s.path} ({kind}, {s.schema}, {s.name or 'unnamed'}{st})")
    for lab, s in zip(labels[1:], sources[1:]):
        if s.schema != a.schema:
            notes.append(f"{lab}: schema {s.schema} vs {a.schema} in {labels[0]}; both judged by "
                         "today's metric code where the files allow")
        if s.kind != a.kind:
            notes.append(f"{lab}: a {s.kind} compared with a {a.kind}: the run is taken as a "
                         "sample of one")
        diff = _setup_diff(a, s)
        if diff == ["campaign_toml"]:
            notes.append(f"{lab}: its campaign file differs from {labels[0]}'s")
        elif diff:
            shown = ", ".join(diff[:5]) + (f" and {len(diff) - 5} more" if len(diff) > 5 else "")
            what = "scenario settings" if a.kind == s.kind == "run" else "settings"
            notes.append(f"{lab}: {what} differ from {labels[0]} in {shown}")
        only_a = sorted(set(a.deputies) - set(s.deputies))
        only_s = sorted(set(s.deputies) - set(a.deputies))
        if only_a or only_s:
            notes.append(f"{lab}: deputies differ (only in {labels[0]}: {', '.join(only_a) or '-'}; "
                         f"only in {lab}: {', '.join(only_s) or '-'}); compared: "
                         f"{', '.join(deputies) or 'none'}")
    return notes


def compare_sources(sources: Sequence[Source], metrics: Sequence[str] | None = None,
                    percentiles: Sequence[float] = (50.0, 95.0), significance: float = 0.01,
                    unpaired_test: str = "mannwhitney", pair: bool = True) -> Comparison:
    """Compare loaded sources (:func:`sim.gate.sources.load_source`); see :func:`compare`."""
    if len(sources) < 2:
        raise ValueError("compare needs at least two sources")
    qs = deputy_quantities()
    names = list(metrics) if metrics else list(DEFAULT_COMPARE)
    for m in names:
        if m not in qs:
            import difflib

            close = difflib.get_close_matches(m, list(qs), n=1, cutoff=0.5)
            raise ScenarioError("--metric", m, "a per-deputy metric: " + ", ".join(qs),
                                f"did you mean {close[0]!r}?" if close else "")
    letters = string.ascii_uppercase
    labels = [letters[i] if i < 26 else f"S{i}" for i in range(len(sources))]
    a = sources[0]
    deputies = [d for d in a.deputies if all(d in s.deputies for s in sources[1:])]
    notes = _notes(sources, labels, deputies)
    mode = "runs" if all(s.n == 1 for s in sources) else "campaigns"
    pairs = {}
    if mode == "campaigns":
        for lab, s in zip(labels[1:], sources[1:]):
            paired, why = pairing(a, s)
            paired = paired and pair
            if not pair and why.startswith("paired"):
                why = "unpaired (--unpaired)"
            pairs[lab] = paired
            test = "Wilcoxon signed-rank" if paired else (
                "Mann-Whitney U" if unpaired_test == "mannwhitney" else "Kolmogorov-Smirnov")
            notes.append(f"{lab} vs {labels[0]}: {why}; {test} test, two-sided, a difference is "
                         f"called out below p = {significance:g}")
    cols: list = [("deputy", "deputy", ""), ("metric", "metric", ""), ("units", "units", "")]
    if mode == "runs":
        cols.append((labels[0], labels[0], ".6g"))
        for lab in labels[1:]:
            cols += [(lab, lab, ".6g"), (f"{lab}_diff", f"{lab}-{labels[0]}", "+.4g"),
                     (f"{lab}_rel", f"rel {lab}", "+.2%"), (f"{lab}_change", "change", "")]
    else:
        for lab in labels:
            cols += [(f"{lab}_p{q:g}", f"{lab} p{q:g}", ".5g") for q in percentiles]
        for lab in labels[1:]:
            cols += [(f"{lab}_shift", f"shift {lab}", "+.4g"), (f"{lab}_p", f"p {lab}", ".2g"),
                     (f"{lab}_change", "change", "")]
    rows = []
    missing = set()
    for d in deputies:
        for m in names:
            q = qs[m]
            r: dict[str, Any] = {"deputy": d, "metric": m, "units": q.units}
            vals = {}
            for lab, s in zip(labels, sources):
                if not s.has(d, m):
                    missing.add((lab, m))
                    vals[lab] = None
                    continue
                vals[lab] = s.values(d, m)
            if mode == "runs":
                va = vals[labels[0]]
                r[labels[0]] = None if va is None else float(va[0])
                for lab in labels[1:]:
                    vb = vals[lab]
                    r[lab] = None if vb is None else float(vb[0])
                    if va is None or vb is None:
                        continue
                    x, y = float(va[0]), float(vb[0])
                    diff = y - x if not (np.isnan(x) and np.isnan(y)) else 0.0
                    r[f"{lab}_diff"] = diff
                    r[f"{lab}_rel"] = diff / abs(x) if x not in (0.0,) and np.isfinite(x) else None
                    r[f"{lab}_change"] = ("now unmeasured" if np.isnan(y) and not np.isnan(x) else
                                          "now measured" if np.isnan(x) and not np.isnan(y) else
                                          _direction(q, diff))
            else:
                for lab in labels:
                    v = vals[lab]
                    for pq in percentiles:
                        fin = None if v is None else v[~np.isnan(v)]
                        r[f"{lab}_p{pq:g}"] = (None if fin is None or fin.size == 0
                                               else percentile_value(fin, float(pq), "linear"))
                va = vals[labels[0]]
                for lab in labels[1:]:
                    vb = vals[lab]
                    if va is None or vb is None:
                        continue
                    t = two_sample(va, vb, pairs[lab], unpaired_test)
                    r[f"{lab}_shift"] = t.shift
                    r[f"{lab}_p"] = t.p
                    r[f"{lab}_test"] = t.method
                    sig = np.isfinite(t.p) and t.p < significance
                    r[f"{lab}_change"] = _direction(q, t.shift if t.shift != 0 else
                                                    float(np.nanmean(vb) - np.nanmean(va))) if sig else ""
            rows.append(r)
    for lab, m in sorted(missing):
        notes.append(f"{lab}: no {m} (an older file); left blank")
    if mode == "campaigns":
        notes.append("percentiles: numpy.percentile, method 'linear', over the runs with a value")
    return Comparison(list(sources), labels, mode, cols, rows, notes, significance)


def compare(paths: Sequence[Any], metrics: Sequence[str] | None = None,
            percentiles: Sequence[float] = (50.0, 95.0), significance: float = 0.01,
            unpaired_test: str = "mannwhitney", pair: bool = True,
            overrides: Mapping[str, Any] | None = None) -> Comparison:
    """Compare run logs and/or campaigns, each against the first.

    Parameters
    ----------
    paths : sequence of path-like
        Two or more run logs or campaign folders.
    metrics : sequence of str, optional
        Per-deputy quantities (:func:`sim.gate.quantities.deputy_quantities`); default
        :data:`sim.gate.quantities.DEFAULT_COMPARE`.
    percentiles : sequence of float
        Shown for campaigns (numpy.percentile, method linear), in [0, 100].
    significance : float
        A campaign difference is called out only when its p-value is below this.
    unpaired_test : str
        ``"mannwhitney"`` or ``"ks"``.
    pair : bool
        Pair runs when the campaigns allow it (same master seed and dispersions).
    overrides : mapping, optional
        Judging overrides applied to every source (:data:`sim.gate.judge.JUDGE_KEYS`).

    Raises
    ------
    LogFormatError, ScenarioError
    """
    sources = [load_source(p, overrides) for p in paths]
    return compare_sources(sources, metrics, percentiles, significance, unpaired_test, pair)

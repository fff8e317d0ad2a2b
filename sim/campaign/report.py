"""What ``covey summary`` prints: statistics of a campaign summary, and their text, markdown, CSV
and JSON forms. Pure numpy/scipy.

Per group of runs (the whole Monte Carlo, each sweep grid point, each error-budget case) and per
deputy:

- ``stats``: percentiles 50/90/95/99 and max of the delta-v, of each |final mean-ROE error|
  component and of the error norm, over the runs that hold metrics;
- ``success``: runs ok or stopped whose |final error| is inside the tolerance box on every component
  (and whose delta-v is within ``dv_max_mps`` when given), over the runs flown (failed runs count
  as failures; missing runs are left out), with a confidence interval on the rate;
- ``bounds``: per-axis bounds of the final error, mean -+ sqrt(chi2.ppf(p, 6) P_ii), P the
  sample covariance over the runs (:func:`sim.campaign.stats.axis_bounds`);
- ``budget`` (error budgets): per case, the spread (std over runs) and the contribution (RMS over
  runs of the change from the all-off case with the same draw) of each final-error component and
  of the delta-v, and the root-sum-square of the single-source contributions next to all_on.
"""

from __future__ import annotations

import csv
import io
import json
import math

import numpy as np

from sim.campaign.stats import PERCENTILES, axis_bounds, paired_rms, percentiles, rss, success_interval
from sim.campaign.summary import CampaignSummary

__all__ = ["COMPONENTS", "build_report", "render", "FORMATS"]

COMPONENTS = ("da", "dlambda", "dex", "dey", "dix", "diy")
FORMATS = ("table", "csv", "json", "markdown")
_FLOWN = ("ok", "stopped", "failed")


def _js(attrs, k, default):
    try:
        return json.loads(attrs.get(k, "")) if attrs.get(k) else default
    except (TypeError, ValueError):
        return default


def _groups(s: CampaignSummary) -> list[tuple[str, np.ndarray]]:
    idx = np.arange(s.n_runs)
    kind = s.attrs.get("kind", "monte_carlo")
    if kind == "sweep":
        g = np.asarray(s.runs["grid_index"])
        out = []
        for gi in sorted(set(g.tolist())):
            sel = idx[g == gi]
            out.append((s.runs["case"][sel[0]] or f"grid point {gi}", sel))
        return out
    if kind == "error_budget":
        cases = _js(s.attrs, "cases_json", []) or list(dict.fromkeys(s.runs["case"]))
        case = np.asarray(s.runs["case"], dtype=object)
        return [(c, idx[case == c]) for c in cases if np.any(case == c)]
    return [("all runs", idx)]


def build_report(s: CampaignSummary, *, tolerance_m=None, dv_max_mps=None, confidence=None,
                 interval=None) -> dict:
    """The statistics of a campaign summary (see the module docstring).

    Parameters
    ----------
    s : CampaignSummary
    tolerance_m : sequence of 6 float, optional
        Success box half-widths, a-scaled m (default: the campaign's, stored in the summary).
    dv_max_mps : float, optional
        Delta-v limit per deputy for success, m/s (default: the campaign's, if any).
    confidence : float, optional
        Of the success interval and of the ellipsoid bounds (default: the campaign's, 0.95).
    interval : str, optional
        ``clopper_pearson`` or ``wilson`` (default: the campaign's).

    Returns
    -------
    dict
        ``campaign`` (name, kind, runs, counts, settings), ``stats``, ``success``, ``bounds``,
        ``budget`` (lists of dict rows), ``failed`` (index, status, reason, log).
    """
    a = s.attrs
    tol = np.asarray(tolerance_m if tolerance_m is not None else a.get("tolerance_m", [10.0] * 6), float)
    if tol.size == 1:
        tol = np.full(6, float(tol))
    dv_max = dv_max_mps if dv_max_mps is not None else a.get("dv_max_mps", float("nan"))
    dv_max = float(dv_max) if dv_max is not None and np.isfinite(float(dv_max)) else None
    conf = float(confidence if confidence is not None else a.get("confidence", 0.95))
    method = interval or a.get("interval", "clopper_pearson")
    status = np.asarray(s.runs["status"], dtype=object)
    counts = {k: int(np.sum(status == k)) for k in ("ok", "stopped", "failed", "missing")}
    report: dict = dict(
        campaign=dict(name=a.get("name", ""), kind=a.get("kind", ""), n_runs=s.n_runs,
                      master_seed=a.get("master_seed"), counts=counts,
                      tolerance_m=tol.tolist(), dv_max_mps=dv_max, confidence=conf,
                      interval=method, base_scenario=a.get("base_scenario", ""),
                      sweep_keys=_js(a, "sweep_keys_json", []),
                      skipped_sources=_js(a, "skipped_sources_json", {})),
        stats=[], success=[], bounds=[], budget=[], grid=[],
        failed=[dict(index=int(s.runs["index"][i]), status=str(status[i]),
                     reason=s.runs["reason"][i], log=s.runs["log"][i])
                for i in range(s.n_runs) if status[i] in ("failed", "missing")])
    groups = _groups(s)
    flown = np.isin(status, _FLOWN)
    for dep in s.deputies:
        fe = np.asarray(s.metrics[dep]["final_error_m"], float).reshape(-1, 6)
        dv = np.asarray(s.metrics[dep]["dv_total_mps"], float)
        norm = np.asarray(s.metrics[dep].get("final_error_norm_m", np.linalg.norm(fe, axis=1)), float)
        inside = np.all(np.abs(fe) <= tol, axis=1) & np.isin(status, ("ok", "stopped"))
        if dv_max is not None:
            inside &= dv <= dv_max
        for label, sel in groups:
            qty = [("dv_total_mps", "m/s", dv[sel])]
            qty += [(f"|err_{c}_m|", "m", np.abs(fe[sel, i])) for i, c in enumerate(COMPONENTS)]
            qty.append(("final_error_norm_m", "m", norm[sel]))
            for name, units, x in qty:
                report["stats"].append(dict(group=label, deputy=dep, quantity=name, units=units,
                                            **percentiles(x)))
            n = int(np.sum(flown[sel]))
            k = int(np.sum(inside[sel] & flown[sel]))
            lo, hi = success_interval(k, n, conf, method)
            report["success"].append(dict(group=label, deputy=dep, n=n, successes=k,
                                          rate=k / n if n else float("nan"), ci_low=lo, ci_high=hi))
            b = axis_bounds(fe[sel], conf)
            for i, c in enumerate(COMPONENTS):
                report["bounds"].append(dict(group=label, deputy=dep, component=f"err_{c}_m",
                                             n=b["n"], mean=float(b["mean"][i]),
                                             lower=float(b["lower"][i]), upper=float(b["upper"][i]),
                                             half=float(b["half"][i])))
            if a.get("kind") == "sweep":
                st = {r["quantity"]: r for r in report["stats"][-len(qty):]}
                report["grid"].append(dict(
                    group=label, deputy=dep, n=n, successes=k,
                    rate=k / n if n else float("nan"), ci_low=lo, ci_high=hi,
                    dv_p50_mps=st["dv_total_mps"]["p50"], dv_p95_mps=st["dv_total_mps"]["p95"],
                    err_norm_p50_m=st["final_error_norm_m"]["p50"],
                    err_norm_p95_m=st["final_error_norm_m"]["p95"],
                    err_norm_max_m=st["final_error_norm_m"]["max"]))
        if a.get("kind") == "error_budget":
            report["budget"] += _budget(s, dep, fe, dv, groups)
    return report


def _budget(s, dep, fe, dv, groups) -> list[dict]:
    draw = np.asarray(s.runs["draw_index"])
    by = {label: sel for label, sel in groups}
    if "all_off" not in by:
        return []

    def aligned(sel):
        """Values of the case's runs by draw index, aligned with all_off's."""
        order = {int(draw[i]): i for i in sel}
        return [order.get(int(draw[i])) for i in by["all_off"]]

    ref = by["all_off"]
    cols = [(f"err_{c}_m", fe[:, i]) for i, c in enumerate(COMPONENTS)] + [("dv_total_mps", dv)]
    rows = []
    singles = {}
    for label, sel in groups:
        al = aligned(sel)
        row = dict(deputy=dep, case=label, n=len(sel))
        for name, x in cols:
            xs = np.array([x[i] if i is not None else np.nan for i in al])
            xr = x[ref]
            fin = xs[np.isfinite(xs)]
            row[f"std_{name}"] = float(np.std(fin, ddof=1)) if fin.size >= 2 else float("nan")
            row[f"contribution_{name}"] = paired_rms(xs, xr)
        rows.append(row)
        if label not in ("all_off", "all_on"):
            singles[label] = row
    if singles:
        row = dict(deputy=dep, case="rss_of_sources", n=0)
        for name, _x in cols:
            row[f"std_{name}"] = rss([r[f"std_{name}"] for r in singles.values()])
            row[f"contribution_{name}"] = rss([r[f"contribution_{name}"] for r in singles.values()])
        rows.append(row)
    return rows


# ------------------------------------------------------------------------------------------
# Rendering
# ------------------------------------------------------------------------------------------


def _num(v, digits: int = 4) -> str:
    if v is None:
        return "-"
    if isinstance(v, (int, np.integer)) and not isinstance(v, bool):
        return str(int(v))
    try:
        x = float(v)
    except (TypeError, ValueError):
        return str(v)
    if not math.isfinite(x):
        return "nan"
    return f"{x:.{digits}g}"


def _table(headers, rows, markdown: bool) -> list[str]:
    cells = [[str(h) for h in headers]] + [[str(c) for c in r] for r in rows]
    if markdown:
        out = ["| " + " | ".join(cells[0]) + " |", "|" + "|".join("---" for _ in headers) + "|"]
        out += ["| " + " | ".join(r) + " |" for r in cells[1:]]
        return out
    w = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    fmt = lambda r: "  ".join(c.rjust(w[i]) if i else c.ljust(w[i]) for i, c in enumerate(r))  # noqa: E731
    return [fmt(cells[0]), "  ".join("-" * x for x in w)] + [fmt(r) for r in cells[1:]]


def _pct(x) -> str:
    return "nan" if x is None or not np.isfinite(x) else f"{100 * x:.1f} %"


def _text(rep: dict, markdown: bool, detail: bool) -> str:
    c = rep["campaign"]
    h = (lambda t: f"### {t}") if markdown else (lambda t: t)
    out = []
    counts = ", ".join(f"{v} {k}" for k, v in c["counts"].items() if v or k in ("ok", "failed"))
    out.append(h(f"campaign {c['name']} ({c['kind']}): {c['n_runs']} runs ({counts}), base "
                 f"{c['base_scenario']}, master seed {c['master_seed']}"))
    box = ", ".join(_num(x) for x in c["tolerance_m"])
    dvs = f", dv <= {_num(c['dv_max_mps'])} m/s" if c["dv_max_mps"] else ""
    method = "Clopper-Pearson" if c["interval"] == "clopper_pearson" else "Wilson"
    out.append(f"success: status ok/stopped and |final mean-ROE error| within [{box}] m "
               f"(da, dlambda, dex, dey, dix, diy){dvs}; {100 * c['confidence']:g} % {method} interval")
    out.append("")
    groups = list(dict.fromkeys(r["group"] for r in rep["stats"]))
    if c["kind"] == "sweep":
        keys = ", ".join(c["sweep_keys"])
        out.append(h(f"sweep over {keys}: one row per grid point"))
        rows = [[r["group"], r["deputy"], r["n"], f"{r['successes']}/{r['n']} = {_pct(r['rate'])}",
                 f"{_pct(r['ci_low'])} .. {_pct(r['ci_high'])}", _num(r["dv_p50_mps"]),
                 _num(r["dv_p95_mps"]), _num(r["err_norm_p50_m"]), _num(r["err_norm_p95_m"]),
                 _num(r["err_norm_max_m"])] for r in rep["grid"]]
        out += _table(["grid point", "deputy", "runs", "success", "interval", "dv p50 [m/s]",
                       "dv p95 [m/s]", "|err| p50 [m]", "|err| p95 [m]", "|err| max [m]"], rows,
                      markdown)
        out.append("")
    if c["kind"] == "error_budget" and rep["budget"]:
        skipped = c.get("skipped_sources") or {}
        for dep in dict.fromkeys(r["deputy"] for r in rep["budget"]):
            rows = [r for r in rep["budget"] if r["deputy"] == dep]
            names = [f"err_{x}_m" for x in COMPONENTS] + ["dv_total_mps"]
            heads = ["case"] + [n.replace("err_", "").replace("_m", " [m]").replace(
                "dv_total_mps", "dv [m/s]") for n in names]
            out.append(h(f"{dep}: error budget, contribution of each source (RMS over runs of the "
                         "change from all_off, same draw)"))
            out += _table(heads, [[r["case"]] + [_num(r[f"contribution_{n}"]) for n in names]
                                  for r in rows], markdown)
            out.append("")
            out.append(h(f"{dep}: spread of each case (std over runs)"))
            out += _table(heads, [[r["case"]] + [_num(r[f"std_{n}"]) for n in names]
                                  for r in rows if r["case"] != "rss_of_sources"], markdown)
            out.append("")
        for s, why in skipped.items():
            out.append(f"source {s} not flown: {why}")
        if skipped:
            out.append("")
    show = groups if (detail or c["kind"] == "monte_carlo") else []
    for g in show:
        for dep in dict.fromkeys(r["deputy"] for r in rep["stats"]):
            st = [r for r in rep["stats"] if r["group"] == g and r["deputy"] == dep]
            if not st:
                continue
            sc = next(r for r in rep["success"] if r["group"] == g and r["deputy"] == dep)
            out.append(h(f"{dep}, {g}: {sc['successes']}/{sc['n']} successful = {_pct(sc['rate'])} "
                         f"({100 * c['confidence']:g} % interval {_pct(sc['ci_low'])} .. "
                         f"{_pct(sc['ci_high'])})"))
            heads = ["quantity", "units", "n"] + [f"p{q}" for q in PERCENTILES] + ["max"]
            out += _table(heads, [[r["quantity"], r["units"], r["n"]]
                                  + [_num(r[f"p{q}"]) for q in PERCENTILES] + [_num(r["max"])]
                                  for r in st], markdown)
            bd = [r for r in rep["bounds"] if r["group"] == g and r["deputy"] == dep]
            out.append("")
            out.append(f"per-axis bounds of the final error at {100 * c['confidence']:g} %: mean -+ "
                       "sqrt(chi2_6(p) P_ii), P the sample covariance")
            out += _table(["component", "n", "mean [m]", "lower [m]", "upper [m]"],
                          [[r["component"], r["n"], _num(r["mean"]), _num(r["lower"]),
                            _num(r["upper"])] for r in bd], markdown)
            out.append("")
    if c["kind"] != "monte_carlo" and not detail:
        rows = [[r["group"], r["deputy"], f"{r['successes']}/{r['n']} = {_pct(r['rate'])}",
                 f"{_pct(r['ci_low'])} .. {_pct(r['ci_high'])}"] for r in rep["success"]]
        if c["kind"] == "error_budget":
            out.append(h("success per case"))
            out += _table(["case", "deputy", "success", "interval"], rows, markdown)
            out.append("")
        out.append("(--detail prints the percentiles and the per-axis bounds of every group)")
    if rep["failed"]:
        out.append(h(f"{len(rep['failed'])} run(s) failed or missing"))
        for r in rep["failed"]:
            out.append(f"  run {r['index']} {r['status']}: {r['reason']}"
                       + (f" ({r['log']})" if r["log"] else ""))
    out.append("Analysis aid, not flight certification: defer to the mission's own V&V.")
    return "\n".join(out).rstrip() + "\n"


def _csv(rep: dict) -> str:
    """Tidy CSV: one value per line (section, group, deputy, quantity, statistic, value)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["section", "group", "deputy", "quantity", "statistic", "value"])
    for r in rep["stats"]:
        for k in ["n"] + [f"p{q}" for q in PERCENTILES] + ["max"]:
            w.writerow(["stats", r["group"], r["deputy"], r["quantity"], k, r[k]])
    for r in rep["success"]:
        for k in ("n", "successes", "rate", "ci_low", "ci_high"):
            w.writerow(["success", r["group"], r["deputy"], "success", k, r[k]])
    for r in rep["bounds"]:
        for k in ("n", "mean", "lower", "upper"):
            w.writerow(["bounds", r["group"], r["deputy"], r["component"], k, r[k]])
    for r in rep["budget"]:
        for k, v in r.items():
            if k.startswith(("std_", "contribution_")):
                stat, _, qty = k.partition("_")
                w.writerow(["budget", r["case"], r["deputy"], qty, stat, v])
    for r in rep["failed"]:
        w.writerow(["failed", "", "", f"run {r['index']}", r["status"], r["reason"]])
    return buf.getvalue()


def _jsonable(v):
    if isinstance(v, dict):
        return {k: _jsonable(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def render(rep: dict, fmt: str = "table", detail: bool = False) -> str:
    """The report as ``table`` (terminal), ``markdown``, ``csv`` (tidy) or ``json``."""
    if fmt == "json":
        return json.dumps(_jsonable(rep), indent=1) + "\n"
    if fmt == "csv":
        return _csv(rep)
    return _text(rep, fmt == "markdown", detail)

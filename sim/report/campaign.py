"""Figures and tables of a campaign (Monte Carlo, sweep or error budget) from its summary file.

Everything is read from ``summary.h5`` (:func:`sim.campaign.summary.read_summary`); one run log of
the campaign, when it is there, supplies the provenance, the scenario summary and the tolerance
box. Runs whose status is not ``ok`` or ``stopped`` are left out of every statistic (the campaign
table counts them). Final errors are truth mean ROE minus target at the deadline, a-scaled m,
chief-relative quasi-nonsingular ROE; delta-v is the sum of executed impulse magnitudes, m/s.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import matplotlib
import numpy as np

from sim.campaign.summary import CampaignSummary, read_summary
from sim.errors import LogFormatError
from sim.report.figures import ROE_LABELS, FigureSpec, Skipped, source_legend, source_line
from sim.report.rundata import RunData, load_run
from sim.report.stats import (axis_bounds, ecdf, ellipse_points, finite_rows, percentile_bands,
                              sample_mean_cov)
from sim.report.style import INK, LIMIT, LIMIT_DASH, PALETTE, RC, colour, new_figure
from sim.report.tables import Column, Table, key_value_table
from sim.report.verification import VerificationRow, limits_for

__all__ = ["CampaignData", "load_campaign", "campaign_figures", "campaign_tables", "CAMPAIGN_FIGURES"]

OK_STATUS = ("ok", "stopped")
_COMPS = ("da", "dlambda", "dex", "dey", "dix", "diy")
_PAIRS = ((1, 0), (2, 3), (4, 5))
_GREY = "#8f99a3"
_TOL = "#b9c2cb"


@dataclass
class CampaignData:
    """A campaign summary for the report.

    Attributes
    ----------
    summary : CampaignSummary
    label : str
        Legend label ("candidate", "baseline" or the campaign name).
    first_run : RunData or None
        The first ok run log that could be read (provenance, scenario), or None.
    first_run_note : str
        Why there is none, or which log it is.
    """

    summary: CampaignSummary
    label: str
    first_run: RunData | None
    first_run_note: str

    @property
    def path(self) -> Path:
        return Path(self.summary.path)

    @property
    def name(self) -> str:
        return str(self.summary.attrs.get("name", self.path.parent.name))

    @property
    def kind(self) -> str:
        return str(self.summary.attrs.get("kind", ""))

    @property
    def deputies(self) -> list[str]:
        return self.summary.deputies

    @property
    def ok(self) -> np.ndarray:
        st = self.summary.runs.get("status", [])
        return np.array([s in OK_STATUS for s in st], bool)

    def values(self, deputy: str, metric: str) -> np.ndarray:
        """(N,) metric of every run (NaN for runs not ok); ``err_<c>_m`` for a component."""
        try:
            v = np.asarray(self.summary.metric(deputy, metric), float).copy()
        except KeyError:
            return np.full(self.summary.n_runs, np.nan)
        v[~self.ok] = np.nan
        return v

    def final_errors(self, deputy: str) -> np.ndarray:
        """(N, 6) final errors, rows of runs not ok set to NaN."""
        fe = np.asarray(self.summary.metrics.get(deputy, {}).get(
            "final_error_m", np.full((self.summary.n_runs, 6), np.nan)), float).reshape(-1, 6).copy()
        fe[~self.ok] = np.nan
        return fe

    def dep_colour(self, deputy: str) -> str:
        """The deputy's colour: its place in the run log's spacecraft list when known (as in the
        single-run figures), else its place among the deputies (chief colour skipped)."""
        if self.first_run is not None and deputy in self.first_run.crafts:
            return colour(self.first_run.crafts[deputy].index)
        return colour(1 + self.deputies.index(deputy)) if deputy in self.deputies else INK

    @property
    def tolerance_m(self) -> np.ndarray | None:
        return None if self.first_run is None else self.first_run.tolerance_m


def load_campaign(path: str | Path, label: str = "") -> CampaignData:
    """Read a campaign folder (or its ``summary.h5``) and the first readable ok run log."""
    s = read_summary(path)
    base = Path(s.path).parent
    first, note = None, "no run log of the campaign could be read"
    logs = s.runs.get("log", [])
    st = s.runs.get("status", [])
    for lg, status in zip(logs, st):
        if status not in OK_STATUS or not lg:
            continue
        p = base / lg
        if not p.is_file():
            note = f"run logs not found beside the summary (e.g. {lg})"
            continue
        try:
            first = load_run(p)
            note = f"provenance and scenario from the run log {lg}"
            break
        except LogFormatError as exc:
            note = f"run log {lg} unreadable: {exc}"
    return CampaignData(s, label or str(s.attrs.get("name", base.name)), first, note)


def _note(camps) -> str:
    if len(camps) < 2:
        return ""
    return f" Solid (and coloured points): {camps[0].label}; dashed (and grey points): {camps[1].label}."


# ------------------------------------------------------------------------------------------
# Final-error scatter with the confidence ellipse and the per-axis bounds
# ------------------------------------------------------------------------------------------


def fig_scatter(camps: Sequence[CampaignData], p: float) -> FigureSpec | Skipped:
    c = camps[0]
    deps = [d for d in c.deputies if finite_rows(c.final_errors(d)).shape[0] >= 3]
    if not deps:
        return Skipped("final_error_scatter", "Final-error scatter",
                       "fewer than 3 runs with a final error")
    data = {}
    fig = new_figure(7.2, 0.6 + 2.45 * len(deps))
    with matplotlib.rc_context(RC):
        axes = fig.subplots(len(deps), 3, squeeze=False)
        for row, d in enumerate(deps):
            for col, (i, j) in enumerate(_PAIRS):
                ax = axes[row, col]
                for k, cp in enumerate(camps):
                    fe = finite_rows(cp.final_errors(d))
                    if fe.shape[0] < 2:
                        continue
                    xy = fe[:, [i, j]]
                    m, cov = sample_mean_cov(xy)
                    ell = ellipse_points(m, cov, p)
                    b = axis_bounds(cov, p, n=2)
                    key = f"{cp.label}/{d}/{_COMPS[i]}-{_COMPS[j]}"
                    data[f"{key}/points_m"] = xy
                    data[f"{key}/mean_m"] = m
                    data[f"{key}/cov_m2"] = cov
                    data[f"{key}/bound_m"] = b
                    data[f"{key}/ellipse_m"] = ell
                    pc = cp.dep_colour(d) if k == 0 else _GREY
                    ax.plot(xy[:, 0], xy[:, 1], "o", ms=2.6 if k == 0 else 2.2, color=pc,
                            alpha=0.75 if k == 0 else 0.55, mew=0, zorder=2 - k)
                    ax.plot(ell[:, 0], ell[:, 1], color=pc if k == 0 else INK, **source_line(k, 1.1), zorder=3)
                    ax.plot(m[0], m[1], "+", color=INK, ms=7, mew=1.0, zorder=4)
                    box_x = [m[0] - b[0], m[0] + b[0], m[0] + b[0], m[0] - b[0], m[0] - b[0]]
                    box_y = [m[1] - b[1], m[1] - b[1], m[1] + b[1], m[1] + b[1], m[1] - b[1]]
                    ax.plot(box_x, box_y, color=pc if k == 0 else INK, lw=0.6,
                            ls=(0, (1, 1.5)), zorder=3)
                tol = c.tolerance_m
                if tol is not None:
                    ax.plot([-tol[i], tol[i], tol[i], -tol[i], -tol[i]],
                            [-tol[j], -tol[j], tol[j], tol[j], -tol[j]], color=_TOL, lw=1.4,
                            zorder=1)
                ax.set_xlabel(f"{ROE_LABELS[i]} error [m]")
                ax.set_ylabel(f"{ROE_LABELS[j]} error [m]")
                if col == 0:
                    ax.set_title(d, fontsize=8)
        from matplotlib.lines import Line2D

        h = [Line2D([], [], ls="none", marker="o", color=PALETTE[7], ms=3, label="run"),
             Line2D([], [], color=PALETTE[7], label=f"{100 * p:g} % sample ellipse"),
             Line2D([], [], color=PALETTE[7], lw=0.6, ls=(0, (1, 1.5)), label="per-axis bounds"),
             Line2D([], [], ls="none", marker="+", color=INK, ms=7, label="sample mean")]
        if c.tolerance_m is not None:
            h.append(Line2D([], [], color=_TOL, lw=1.4, label="tolerance box"))
        fig.legend(handles=h, loc="outside lower center", ncol=len(h))
        source_legend(axes[0, 2], [cp.label for cp in camps])
    n_ok = int(np.sum(c.ok))
    return FigureSpec(
        "final_error_scatter", "Final-error scatter per ROE pair",
        f"Final mean-ROE error of each run (truth mean ROE minus target at the deadline, a-scaled "
        f"m, chief-relative quasi-nonsingular ROE; {n_ok} runs ok of {c.summary.n_runs}), per "
        f"deputy in the (a δλ, a δa), (a δex, a δey) and (a δix, a δiy) planes, with the "
        f"{100 * p:g} % confidence ellipse of the sample mean and covariance (chi-square, 2 "
        f"degrees of freedom) and its per-axis bounds: the dotted box at mean ± "
        f"sqrt(chi2.ppf({p:g}, 2) P_ii)." + (" Light grey box: the [metrics] tolerance_m box."
                                           if c.tolerance_m is not None else "") + _note(camps),
        fig, data)


# ------------------------------------------------------------------------------------------
# CDFs
# ------------------------------------------------------------------------------------------


def _cdf_panel(ax, camps, metric, rows, p, data, scale=1.0):
    for k, cp in enumerate(camps):
        for d in cp.deputies:
            xs, F = ecdf(cp.values(d, metric))
            if not xs.size:
                continue
            data[f"{cp.label}/{d}/{metric}/x"] = xs
            data[f"{cp.label}/{d}/{metric}/F"] = F
            ax.step(np.r_[xs[0], xs] * scale, np.r_[0.0, F], where="post",
                    color=camps[0].dep_colour(d), **source_line(k),
                    label=d if k == 0 else None)
    drawn = set()
    for d in camps[0].deputies:
        for rid, lim in limits_for(rows, metric, d):
            if (rid, lim) in drawn:
                continue
            drawn.add((rid, lim))
            ax.axvline(lim * scale, color=LIMIT, lw=1.0, ls=LIMIT_DASH)
            ax.annotate(rid, (lim * scale, 0.02), xytext=(3, 0), textcoords="offset points",
                        rotation=90, fontsize=6.5, color=LIMIT, va="bottom")
    ax.axhline(p, color="#9aa3ad", lw=0.6)
    ax.set_ylim(0, 1.02)
    return drawn


def fig_cdf(camps: Sequence[CampaignData], rows: Sequence[VerificationRow], p: float
            ) -> FigureSpec | Skipped:
    c = camps[0]
    if not any(np.any(np.isfinite(c.values(d, "dv_total_mps"))) for d in c.deputies):
        return Skipped("cdf", "CDFs of delta-v and final error", "no run with metrics")
    data = {}
    fig = new_figure(7.2, 3.3)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(1, 2)
        d1 = _cdf_panel(axes[0], camps, "dv_total_mps", rows, p, data)
        d2 = _cdf_panel(axes[1], camps, "final_error_norm_m", rows, p, data)
        axes[0].set_xlabel("total Δv [m/s]")
        axes[1].set_xlabel("|final mean-ROE error| [m]")
        axes[0].set_ylabel("fraction of runs ≤ value")
        h, lab = axes[0].get_legend_handles_labels()
        if d1 or d2:
            from matplotlib.lines import Line2D

            h.append(Line2D([], [], color=LIMIT, lw=1.0, ls=LIMIT_DASH))
            lab.append("requirement limit")
        fig.legend(h, lab, loc="outside lower center", ncol=max(1, len(h)))
        source_legend(axes[1], [cp.label for cp in camps], loc="upper left")
    return FigureSpec(
        "cdf", "CDFs of delta-v and final error",
        "Empirical cumulative distribution over the campaign's runs of each deputy's total "
        "executed delta-v (m/s, left) and of the norm of its final mean-ROE error (truth minus "
        "target at the deadline, a-scaled m, right). Dashed vertical lines: requirement limits "
        f"(verification rows naming the metric); grey horizontal line: {p:g}." + _note(camps),
        fig, data)


def fig_cdf_components(camps: Sequence[CampaignData], rows: Sequence[VerificationRow], p: float
                       ) -> FigureSpec | Skipped:
    c = camps[0]
    if not any(np.any(np.isfinite(c.final_errors(d))) for d in c.deputies):
        return Skipped("cdf_components", "CDFs of final error per component", "no final errors")
    data = {}
    fig = new_figure(7.2, 5.6)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(3, 2).ravel()
        for i, ax in enumerate(axes):
            metric = f"err_{_COMPS[i]}_m"
            for k, cp in enumerate(camps):
                for d in cp.deputies:
                    xs, F = ecdf(np.abs(cp.values(d, metric)))
                    if not xs.size:
                        continue
                    data[f"{cp.label}/{d}/abs_{metric}/x"] = xs
                    ax.step(np.r_[xs[0], xs], np.r_[0.0, F], where="post",
                            color=camps[0].dep_colour(d), **source_line(k),
                            label=d if (k == 0 and i == 0) else None)
            for d in c.deputies:
                for rid, lim in limits_for(rows, metric, d):
                    ax.axvline(abs(lim), color=LIMIT, lw=1.0, ls=LIMIT_DASH)
                    ax.annotate(rid, (abs(lim), 0.02), xytext=(3, 0), textcoords="offset points",
                                rotation=90, fontsize=6.5, color=LIMIT, va="bottom")
            tol = c.tolerance_m
            if tol is not None:
                ax.axvline(tol[i], color="#9aa3ad", lw=0.8, ls=(0, (1, 1.5)))
            ax.axhline(p, color="#9aa3ad", lw=0.6)
            ax.set_ylim(0, 1.02)
            ax.set_xlabel(f"|{ROE_LABELS[i]} error| [m]")
            if i % 2 == 0:
                ax.set_ylabel("fraction of runs ≤ value")
        h, lab = axes[0].get_legend_handles_labels()
        fig.legend(h, lab, loc="outside lower center", ncol=max(1, len(h)))
        source_legend(axes[1], [cp.label for cp in camps], loc="upper left")
    return FigureSpec(
        "cdf_components", "CDFs of final error per ROE component",
        "Empirical cumulative distribution over the runs of the absolute final mean-ROE error per "
        "component (a-scaled m, chief-relative quasi-nonsingular ROE). Dashed: requirement limits "
        "naming the component (err_<component>_m); dotted grey: the [metrics] tolerance; grey "
        f"horizontal line: {p:g}." + _note(camps), fig, data)


# ------------------------------------------------------------------------------------------
# Sweep
# ------------------------------------------------------------------------------------------


def sweep_axis(c: CampaignData) -> tuple[np.ndarray, np.ndarray, str, list[str]]:
    """The swept axis of a sweep campaign.

    Returns
    -------
    grid_keys : (G,) grid indices present (sorted).
    x : (G,) the swept value at each grid point (the grid index when several keys vary or none).
    label : axis label.
    ticklabels : text per grid point when several keys vary, else [].
    """
    gi = np.asarray(c.summary.runs.get("grid_index", np.full(c.summary.n_runs, -1)), int)
    keys = np.unique(gi[gi >= 0])
    varying = []
    for k, v in c.summary.params.items():
        vals = []
        for g in keys:
            vv = v[gi == g]
            vv = vv[np.isfinite(vv)]
            if vv.size == 0 or np.ptp(vv) > 1e-12 * max(1.0, float(np.max(np.abs(vv)))):
                vals = None
                break
            vals.append(float(vv[0]))
        if vals is not None and len(set(vals)) > 1:
            varying.append((k, np.array(vals)))
    if len(varying) == 1:
        return keys, varying[0][1], varying[0][0], []
    ticks = [", ".join(f"{k}={v[i]:g}" for k, v in varying) for i in range(keys.size)] if varying else []
    return keys, keys.astype(float), "grid point", ticks


def fig_sweep(camps: Sequence[CampaignData]) -> FigureSpec | Skipped:
    c = camps[0]
    gi = np.asarray(c.summary.runs.get("grid_index", []), int)
    if np.unique(gi[gi >= 0]).size < 2:
        return Skipped("sweep", "Sweep", "fewer than 2 grid points (runs/grid_index)")
    data = {}
    metrics = (("dv_total_mps", "total Δv [m/s]"), ("final_error_norm_m", "|final error| [m]"))
    fig = new_figure(7.2, 5.0)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(len(metrics), 1, sharex=True)
        xlabel = ""
        for ax, (metric, ylab) in zip(axes, metrics):
            for k, cp in enumerate(camps):
                keys, x, xlabel_k, ticks = sweep_axis(cp)
                if k == 0:
                    xlabel, tick_text, x0 = xlabel_k, ticks, x
                g = np.asarray(cp.summary.runs.get("grid_index"), int)
                for d in cp.deputies:
                    v = cp.values(d, metric)
                    sel = g >= 0
                    gk, P, n = percentile_bands(v[sel], g[sel])
                    xx = np.array([x[list(keys).index(q)] for q in gk], float)
                    data[f"{cp.label}/{d}/{metric}/x"] = xx
                    data[f"{cp.label}/{d}/{metric}/percentiles_5_25_50_75_95"] = P
                    col = camps[0].dep_colour(d)
                    if k == 0:
                        ax.fill_between(xx, P[:, 0], P[:, 4], color=col, alpha=0.13, lw=0)
                        ax.fill_between(xx, P[:, 1], P[:, 3], color=col, alpha=0.28, lw=0)
                    else:
                        ax.plot(xx, P[:, 0], color=col, lw=0.6, ls=(0, (1, 1.5)))
                        ax.plot(xx, P[:, 4], color=col, lw=0.6, ls=(0, (1, 1.5)))
                    ax.plot(xx, P[:, 2], marker="o", ms=3.5, color=cp.dep_colour(d) if k == 0 else col,
                            **source_line(k), label=d if (k == 0 and metric == metrics[0][0]) else None)
            ax.set_ylabel(ylab)
        axes[-1].set_xlabel(xlabel)
        if tick_text:
            axes[-1].set_xticks(x0, tick_text, rotation=20, ha="right", fontsize=6.5)
        h, lab = axes[0].get_legend_handles_labels()
        fig.legend(h, lab, loc="outside lower center", ncol=max(1, len(h)))
        source_legend(axes[0], [cp.label for cp in camps], loc="upper right")
    return FigureSpec(
        "sweep", "Metrics across the sweep",
        f"Total delta-v (m/s, top) and final mean-ROE error norm (a-scaled m, bottom) of each "
        f"deputy against the swept value ({xlabel}): median (line), 25-75 % (dark band) and "
        f"5-95 % (light band) of the runs at each grid point." + _note(camps), fig, data)


# ------------------------------------------------------------------------------------------
# Error budget
# ------------------------------------------------------------------------------------------


def budget_cases(c: CampaignData) -> list[str]:
    return [x for x in dict.fromkeys(c.summary.runs.get("case", [])) if x]


def budget_rms(c: CampaignData, deputy: str, cases: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
    """RMS final error per case: (C, 7) (six components and the norm), and runs per case (C,)."""
    case = np.array(c.summary.runs.get("case", [""] * c.summary.n_runs), dtype=object)
    fe = c.final_errors(deputy)
    out = np.full((len(cases), 7), np.nan)
    n = np.zeros(len(cases), int)
    for i, cs in enumerate(cases):
        x = finite_rows(fe[case == cs])
        n[i] = x.shape[0]
        if x.shape[0]:
            out[i, :6] = np.sqrt(np.mean(x ** 2, axis=0))
            out[i, 6] = np.sqrt(np.mean(np.sum(x ** 2, axis=1)))
    return out, n


def fig_budget(camps: Sequence[CampaignData]) -> FigureSpec | Skipped:
    c = camps[0]
    cases = budget_cases(c)
    if not cases:
        return Skipped("error_budget", "Error budget", "no error-budget cases (runs/case empty)")
    data = {}
    deps = c.deputies
    fig = new_figure(7.2, 0.8 + 2.4 * len(deps))
    groups = list(ROE_LABELS) + ["|error|"]
    with matplotlib.rc_context(RC):
        axes = fig.subplots(len(deps), 1, squeeze=False)[:, 0]
        w = 0.8 / len(cases)
        for ax, d in zip(axes, deps):
            for k, cp in enumerate(camps):
                rms, n = budget_rms(cp, d, cases)
                data[f"{cp.label}/{d}/rms_m"] = rms
                data[f"{cp.label}/{d}/n_runs"] = n
                for ci, cs in enumerate(cases):
                    xs = np.arange(7) - 0.4 + w * (ci + 0.5)
                    if k == 0:
                        ax.bar(xs, rms[ci], width=w * 0.92, color=PALETTE[ci % len(PALETTE)],
                               label=cs if d == deps[0] else None)
                    else:
                        ax.bar(xs, rms[ci], width=w * 0.92, fill=False, edgecolor=INK, lw=0.7,
                               ls=(0, (3, 1.5)), label=f"{cp.label}" if (ci == 0 and d == deps[0]) else None)
            ax.set_yscale("log")
            ax.set_xticks(np.arange(7), groups)
            ax.set_ylabel("RMS final error [m]")
            ax.set_title(d, fontsize=8)
            ax.grid(axis="x", visible=False)
        h, lab = axes[0].get_legend_handles_labels()
        fig.legend(h, lab, loc="outside lower center", ncol=min(6, max(1, len(h))))
    return FigureSpec(
        "error_budget", "Error budget per source and component",
        "Root mean square over the runs of each error-budget case (each case a source of error, "
        "runs/case of the summary) of the final mean-ROE error per component and of its norm "
        "(a-scaled m, log scale), per deputy."
        + (f" Outlined dashed bars: {camps[1].label}." if len(camps) > 1 else ""), fig, data)


# ------------------------------------------------------------------------------------------
# The set
# ------------------------------------------------------------------------------------------

CAMPAIGN_FIGURES = {"monte_carlo": ("final_error_scatter", "cdf", "cdf_components"),
                    "sweep": ("sweep",), "error_budget": ("error_budget",)}
"""Figures by campaign kind (an unknown kind gets every figure its data allow)."""


def campaign_figures(camps: Sequence[CampaignData], rows: Sequence[VerificationRow] = (),
                     p: float = 0.95) -> list:
    """The figures of the campaign's kind (:data:`CAMPAIGN_FIGURES`), FigureSpec or Skipped."""
    c = camps[0]
    builders = {"final_error_scatter": lambda: fig_scatter(camps, p),
                "cdf": lambda: fig_cdf(camps, rows, p),
                "cdf_components": lambda: fig_cdf_components(camps, rows, p),
                "sweep": lambda: fig_sweep(camps), "error_budget": lambda: fig_budget(camps)}
    wanted = CAMPAIGN_FIGURES.get(c.kind, tuple(builders))
    return [make() for name, make in builders.items() if name in wanted]


# ------------------------------------------------------------------------------------------
# Tables
# ------------------------------------------------------------------------------------------

STAT_METRICS = (("dv_total_mps", "total Δv", "m/s"), ("final_error_norm_m", "|final error|", "m"),
                ("err_da_m", "a δa error", "m"), ("err_dlambda_m", "a δλ error", "m"),
                ("err_dex_m", "a δex error", "m"), ("err_dey_m", "a δey error", "m"),
                ("err_dix_m", "a δix error", "m"), ("err_diy_m", "a δiy error", "m"),
                ("n_burns", "burns", "1"), ("n_switches", "switches", "1"),
                ("time_to_tolerance_s", "time to tolerance box", "s"),
                ("min_distance_any_m", "min distance", "m"))


def campaign_table(c: CampaignData) -> Table:
    st = c.summary.runs.get("status", [])
    counts = {s: st.count(s) for s in dict.fromkeys(st)}
    items = [("campaign", c.name), ("kind", c.kind), ("summary", str(c.path)),
             ("runs", f"{c.summary.n_runs} (" + ", ".join(f"{k} {v}" for k, v in counts.items()) + ")"),
             ("master seed", c.summary.attrs.get("master_seed", "")),
             ("summary written (UTC)", c.summary.attrs.get("created_utc", "")),
             ("summary schema", f"{c.summary.attrs.get('schema', '')} {c.summary.attrs.get('schema_version', '')}"),
             ("sampled or swept keys", ", ".join(c.summary.params) or "none")]
    if budget_cases(c):
        items.append(("cases", ", ".join(budget_cases(c))))
    items.append(("run log used", c.first_run_note))
    return key_value_table("campaign", f"Campaign summary: {c.name}", items,
                           note="Statistics below use the runs with status ok or stopped.")


def stats_table(c: CampaignData, name: str = "campaign_metrics") -> Table:
    t = Table(name, f"Metric statistics over the runs: {c.name}",
              [Column("deputy", "deputy", "", "l"), Column("metric", "metric", "", "l"),
               Column("units", "units", "", "l"), Column("n", "runs", "d"),
               Column("mean", "mean", ".5g"), Column("std", "std", ".4g"), Column("min", "min", ".5g"),
               Column("p05", "5 %", ".5g"), Column("p50", "median", ".5g"), Column("p95", "95 %", ".5g"),
               Column("max", "max", ".5g")],
              note="Final errors: truth mean ROE minus target at the deadline (a-scaled m); std "
                   "is the sample standard deviation (N - 1).")
    for d in c.deputies:
        for key, lab, u in STAT_METRICS:
            v = c.values(d, key)
            v = v[np.isfinite(v)]
            if not v.size:
                continue
            q = np.percentile(v, [5, 50, 95])
            t.add(d, lab, u, int(v.size), float(v.mean()), float(v.std(ddof=1)) if v.size > 1 else float("nan"),
                  float(v.min()), float(q[0]), float(q[1]), float(q[2]), float(v.max()))
    return t


def bounds_table(c: CampaignData, p: float, name: str = "performance_bounds") -> Table:
    t = Table(name, f"Per-axis performance bounds of the final error at {100 * p:g} %: {c.name}",
              [Column("deputy", "deputy", "", "l"), Column("component", "component", "", "l"),
               Column("n", "runs", "d"), Column("mean_m", "mean [m]", ".3f"), Column("std_m", "std [m]", ".3f"),
               Column("bound_1d_m", "bound 1-D [m]", ".3f"), Column("bound_2d_m", "bound 2-D pair [m]", ".3f"),
               Column("bound_6d_m", "bound 6-D [m]", ".3f"),
               Column("worst_6d_m", "|mean| + bound 6-D [m]", ".3f")],
              note=f"Bound = sqrt(chi2.ppf({p:g}, n) P_ii): the half-extent along the axis of the "
                   f"n-dimensional {100 * p:g} % ellipsoid of the sample covariance P (n = 1: the "
                   "axis alone; 2: its ROE pair, the ellipse of the scatter figure; 6: all six "
                   "components jointly), about the sample mean.")
    for d in c.deputies:
        fe = finite_rows(c.final_errors(d))
        if fe.shape[0] < 2:
            continue
        m, P = sample_mean_cov(fe)
        b1, b6 = axis_bounds(P, p, 1), axis_bounds(P, p, 6)
        b2 = np.zeros(6)
        for i, j in _PAIRS:
            bb = axis_bounds(P[np.ix_([i, j], [i, j])], p, 2)
            b2[i], b2[j] = bb
        for i, lab in enumerate(ROE_LABELS):
            t.add(d, lab, int(fe.shape[0]), float(m[i]), float(np.sqrt(P[i, i])), float(b1[i]),
                  float(b2[i]), float(b6[i]), float(abs(m[i]) + b6[i]))
    return t


def sweep_table(c: CampaignData, name: str = "sweep") -> Table | None:
    gi = np.asarray(c.summary.runs.get("grid_index", []), int)
    if np.unique(gi[gi >= 0]).size < 2:
        return None
    keys, x, xlabel, ticks = sweep_axis(c)
    t = Table(name, f"Sweep: metrics per grid point: {c.name}",
              [Column("grid_index", "grid point", "d"), Column("value", xlabel, ".6g" if not ticks else "", "l" if ticks else "r"),
               Column("deputy", "deputy", "", "l"), Column("n", "runs", "d"),
               Column("dv_p50", "Δv median [m/s]", ".5g"), Column("dv_p95", "Δv 95 % [m/s]", ".5g"),
               Column("err_p50", "|error| median [m]", ".4g"), Column("err_p95", "|error| 95 % [m]", ".4g")])
    for d in c.deputies:
        dv = c.values(d, "dv_total_mps")
        er = c.values(d, "final_error_norm_m")
        for gk, xv, tk in zip(keys, x, ticks or [None] * len(keys)):
            sel = gi == gk
            a, b = dv[sel], er[sel]
            a, b = a[np.isfinite(a)], b[np.isfinite(b)]
            qa = np.percentile(a, [50, 95]) if a.size else [np.nan, np.nan]
            qb = np.percentile(b, [50, 95]) if b.size else [np.nan, np.nan]
            t.add(int(gk), tk if tk else float(xv), d, int(a.size), float(qa[0]), float(qa[1]),
                  float(qb[0]), float(qb[1]))
    return t


def budget_table(c: CampaignData, name: str = "error_budget") -> Table | None:
    cases = budget_cases(c)
    if not cases or (c.kind in CAMPAIGN_FIGURES and c.kind != "error_budget"):
        return None
    t = Table(name, f"Error budget: RMS final error per case: {c.name}",
              [Column("deputy", "deputy", "", "l"), Column("case", "case", "", "l"), Column("n", "runs", "d")]
              + [Column(f"rms_{k}_m", f"{lab} [m]", ".4g") for k, lab in zip(_COMPS, ROE_LABELS)]
              + [Column("rms_norm_m", "|error| [m]", ".4g"), Column("dv_mean_mps", "mean Δv [m/s]", ".5g")],
              note="Root mean square over the runs of each case of the final mean-ROE error "
                   "(truth minus target at the deadline, a-scaled m).")
    case = np.array(c.summary.runs.get("case", []), dtype=object)
    for d in c.deputies:
        rms, n = budget_rms(c, d, cases)
        dv = c.values(d, "dv_total_mps")
        for i, cs in enumerate(cases):
            v = dv[case == cs]
            v = v[np.isfinite(v)]
            t.add(d, cs, int(n[i]), *[float(x) for x in rms[i]], float(v.mean()) if v.size else float("nan"))
    return t


def compare_table(cand: CampaignData, base: CampaignData, name: str = "compare") -> Table:
    t = Table(name, f"Candidate ({cand.label}) versus baseline ({base.label}) campaigns",
              [Column("deputy", "deputy", "", "l"), Column("metric", "metric", "", "l"),
               Column("units", "units", "", "l"), Column("cand_mean", "candidate mean", ".5g"),
               Column("base_mean", "baseline mean", ".5g"), Column("d_mean", "Δ mean", ".4g"),
               Column("cand_p95", "candidate 95 %", ".5g"), Column("base_p95", "baseline 95 %", ".5g"),
               Column("d_p95", "Δ 95 %", ".4g")],
              note="Δ = candidate − baseline, over the runs with status ok or stopped.")
    for d in cand.deputies:
        for key, lab, u in STAT_METRICS:
            a, b = cand.values(d, key), base.values(d, key)
            a, b = a[np.isfinite(a)], b[np.isfinite(b)]
            if not a.size and not b.size:
                continue
            ma = float(a.mean()) if a.size else float("nan")
            mb = float(b.mean()) if b.size else float("nan")
            pa = float(np.percentile(a, 95)) if a.size else float("nan")
            pb = float(np.percentile(b, 95)) if b.size else float("nan")
            t.add(d, lab, u, ma, mb, ma - mb, pa, pb, pa - pb)
    return t


def campaign_tables(camps: Sequence[CampaignData], p: float = 0.95) -> list[Table]:
    from sim.report.single import provenance_table, scenario_table

    c = camps[0]
    out = [campaign_table(c)]
    if len(camps) > 1:
        out.append(compare_table(c, camps[1]))
    out.append(stats_table(c))
    if c.kind in ("monte_carlo", "") or c.kind not in CAMPAIGN_FIGURES:
        out.append(bounds_table(c, p))
    out += [sweep_table(c), budget_table(c)]
    if c.first_run is not None:
        out += [scenario_table(c.first_run, "scenario"), provenance_table(c.first_run, "provenance")]
    return [t for t in out if t is not None]

"""Figures and tables of a single run (optionally overlaid on a baseline run).

Every builder takes ``runs``: the candidate :class:`~sim.report.rundata.RunData` first, then the
baseline (optional), and returns a :class:`~sim.report.figures.FigureSpec` or a
:class:`~sim.report.figures.Skipped` when the log lacks what the figure needs (a free-drift log has
no ``/guidance``, ``/navigation`` or ``/commands``). Lengths are m (km when large), speeds m/s
(mm/s when small), times since the run epoch; ROE are the a-scaled quasi-nonsingular mean ROE
(truth, Orekit Eckstein-Hechler) relative to the chief; RTN is the chief's radial, transverse,
normal frame.
"""

from __future__ import annotations

from typing import Sequence

import matplotlib
import matplotlib.ticker
import numpy as np

from sim.report.figures import ROE_LABELS, FigureSpec, Skipped, source_legend, source_line, unit_scale
from sim.report.rundata import RunData
from sim.report.style import BAND, INK, LIMIT, LIMIT_DASH, RC, colour, mode_colour, new_figure, time_axis
from sim.report.tables import Column, Table, key_value_table

__all__ = ["RUN_FIGURES", "run_figures", "run_tables", "scenario_table", "provenance_table",
           "metrics_table", "compare_table", "solar_activity_text"]


def _taxis(runs: Sequence[RunData]) -> tuple[float, str]:
    return time_axis(max(max(r.duration_s, r.t_end_s) for r in runs), runs[0].epoch_utc)


def _when(runs: Sequence[RunData]) -> str:
    """How the time axis is measured, for captions: "hours since 2025-06-01T00:00:00Z (UTC)"."""
    div, _ = _taxis(runs)
    return f"{'hours' if div == 3600.0 else 'days'} since the run epoch {runs[0].epoch_utc}"


def _labels(runs):
    return [r.label for r in runs]


# ------------------------------------------------------------------------------------------
# Mean ROE
# ------------------------------------------------------------------------------------------

_PAIRS = ((1, 0), (2, 3), (4, 5))
_PLAIN = matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:g}")


def fig_roe_planes(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """Mean ROE trajectories in the (a δλ, a δa), (a δex, a δey), (a δix, a δiy) planes."""
    c = runs[0]
    if not c.deputies:
        return Skipped("roe_planes", "Mean ROE trajectories", "the run has no deputy")
    data = {}
    fig = new_figure(7.2, 3.0)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(1, 3)
        for ax, (i, j) in zip(axes, _PAIRS):
            vals = []
            for r in runs:
                for d in r.deputies:
                    roe = r.crafts[d].mean_roe_m
                    if roe is not None:
                        vals.append(roe[:, [i, j]].ravel())
                    if r.targets.get(d) is not None:
                        vals.append(r.targets[d][[i, j]])
            div, unit = unit_scale(np.concatenate(vals) if vals else [0.0])
            for k, r in enumerate(runs):
                for d in r.deputies:
                    cr = r.crafts[d]
                    roe = cr.mean_roe_m
                    if roe is None or not len(roe):
                        continue
                    col = colour(cr.index)
                    ok = np.all(np.isfinite(roe), axis=1)
                    x, y = roe[ok, i] / div, roe[ok, j] / div
                    data[f"{r.label}/{d}/roe_m"] = roe
                    ax.plot(x, y, color=col, **source_line(k), label=f"{d}" if k == 0 else None)
                    if x.size:
                        ax.plot(x[0], y[0], "o", mfc="white", mec=col, mew=1.0, ms=5)
                        ax.plot(x[-1], y[-1], "s", color=col, ms=3.5, alpha=source_line(k)["alpha"])
                    dl = r.deadlines_s.get(d)
                    t = cr.t_s[ok]
                    if dl is not None and t.size and t[0] <= dl <= t[-1] + 1e-6:
                        kd = min(int(np.searchsorted(t, dl - 1e-6)), t.size - 1)
                        ax.plot(x[kd], y[kd], "D", mfc=col, mec=INK, mew=0.6, ms=5,
                                alpha=source_line(k)["alpha"])
                    tgt = r.targets.get(d)
                    if tgt is not None and (k == 0 or not np.array_equal(tgt, runs[0].targets.get(d))):
                        data[f"{r.label}/{d}/target_roe_m"] = tgt
                        ax.plot(tgt[i] / div, tgt[j] / div, "*", mfc=col, mec=INK, mew=0.6, ms=10)
            ax.set_xlabel(f"{ROE_LABELS[i]} [{unit}]")
            ax.set_ylabel(f"{ROE_LABELS[j]} [{unit}]")
            if (i, j) != (1, 0):
                ax.set_aspect("equal", adjustable="datalim")
        from matplotlib.lines import Line2D

        marks = [Line2D([], [], ls="none", marker="o", mfc="white", mec=INK, label="start"),
                 Line2D([], [], ls="none", marker="s", color=INK, ms=3.5, label="end of run"),
                 Line2D([], [], ls="none", marker="D", mfc="#9aa3ad", mec=INK, label="deadline"),
                 Line2D([], [], ls="none", marker="*", mfc="#9aa3ad", mec=INK, ms=10, label="target")]
        h, lab = axes[0].get_legend_handles_labels()
        fig.legend(h + marks, lab + [m.get_label() for m in marks], loc="outside lower center",
                   ncol=min(8, len(h) + 4))
        source_legend(axes[2], _labels(runs))
    return FigureSpec(
        "roe_planes", "Mean ROE trajectories",
        "Truth mean relative orbital elements of each deputy relative to the chief (a-scaled, in m "
        "or km as each axis says; quasi-nonsingular; Orekit Eckstein-Hechler mean elements in "
        "covey's ECI, true of date), "
        "in the relative mean-motion plane (a δλ, a δa), the relative eccentricity plane "
        "(a δex, a δey) and the relative inclination plane (a δix, a δiy). Open circle: start; "
        "square: end of the run; diamond: the state at the deputy's deadline; star: target."
        + _baseline_note(runs), fig, data)


def _baseline_note(runs) -> str:
    if len(runs) < 2:
        return ""
    return f" Solid: {runs[0].label}; dashed: {runs[1].label}."


def _symlog_ticks(tol: float, big: float) -> list[float]:
    """Ticks of a symmetric-log axis linear within +-tol: 0, +-tol and the powers of ten beyond."""
    pos = [tol]
    if big >= 3.0 * tol:  # decades at least half a decade beyond the band edge, within the data
        k0 = int(np.ceil(np.log10(3.0 * tol)))
        k1 = int(np.floor(np.log10(big)))
        pos += [10.0 ** k for k in range(k0, k1 + 1)]
    return sorted([-p for p in pos] + [0.0] + pos)


def fig_roe_error(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """ROE error (truth mean ROE minus target) time histories with the tolerance band."""
    c = runs[0]
    with_target = [d for d in c.deputies if c.targets.get(d) is not None]
    if not with_target:
        return Skipped("roe_error", "Mean ROE error", "no deputy has a target (target_roe_m)")
    tdiv, tlab = _taxis(runs)
    data = {}
    fig = new_figure(7.2, 6.0)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(3, 2, sharex=True).ravel()
        for comp, ax in enumerate(axes):
            tol = float(c.tolerance_m[comp])
            ax.axhspan(-tol, tol, color=BAND, lw=0, zorder=0)
            ax.axhline(0.0, color="#9aa3ad", lw=0.6, zorder=0.5)
            for k, r in enumerate(runs):
                for d in r.deputies:
                    tgt = r.targets.get(d)
                    cr = r.crafts[d]
                    if tgt is None or cr.mean_roe_m is None:
                        continue
                    err = cr.mean_roe_m[:, comp] - tgt[comp]
                    data[f"{r.label}/{d}/error_m/{comp}"] = err
                    ax.plot(cr.t_s / tdiv, err, color=colour(cr.index), **source_line(k),
                            label=d if (k == 0 and comp == 0) else None)
                    if k == 0 and comp == 0:
                        data[f"{r.label}/{d}/t_s"] = cr.t_s
            for d in with_target:
                ax.axvline(c.deadlines_s[d] / tdiv, color=colour(c.crafts[d].index), lw=0.8,
                           ls=":", zorder=0.6)
            ax.set_yscale("symlog", linthresh=max(tol, 1e-6), linscale=1.0)
            big = [np.nanmax(np.abs(v)) for kk, v in data.items()
                   if kk.endswith(f"/error_m/{comp}") and np.any(np.isfinite(v))]
            ax.set_yticks(_symlog_ticks(tol, max(big) if big else tol))
            ax.yaxis.set_major_formatter(_PLAIN)  # plain numbers (no mathtext: faster, clearer)
            ax.yaxis.set_minor_locator(matplotlib.ticker.NullLocator())
            ax.set_ylabel(f"{ROE_LABELS[comp]} − target [m]")
            ax.set_title(f"{ROE_LABELS[comp]}: band ±{tol:g} m", fontsize=7.5, fontweight="normal")
        for ax in axes[-2:]:
            ax.set_xlabel(tlab)
        h, lab = axes[0].get_legend_handles_labels()
        fig.legend(h, lab, loc="outside lower center", ncol=max(1, len(h)))
        source_legend(axes[1], _labels(runs))
    return FigureSpec(
        "roe_error", "Mean ROE error to target",
        "Truth mean ROE minus the target of each deputy, per component (a-scaled m, chief-relative, "
        f"quasi-nonsingular, Orekit Eckstein-Hechler mean elements), against time ({_when(runs)}). "
        "Shaded: the "
        "tolerance box of [metrics] tolerance_m; dotted vertical line: the deputy's deadline. The "
        "vertical axis is linear within ± the tolerance and logarithmic beyond (symmetric log)."
        + _baseline_note(runs), fig, data)


def fig_roe_history(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """Mean ROE time histories (runs without targets, e.g. free drift)."""
    c = runs[0]
    if not c.deputies:
        return Skipped("roe_history", "Mean ROE histories", "the run has no deputy")
    tdiv, tlab = _taxis(runs)
    data = {}
    fig = new_figure(7.2, 6.0)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(3, 2, sharex=True).ravel()
        for comp, ax in enumerate(axes):
            for k, r in enumerate(runs):
                for d in r.deputies:
                    cr = r.crafts[d]
                    if cr.mean_roe_m is None:
                        continue
                    data[f"{r.label}/{d}/roe_m/{comp}"] = cr.mean_roe_m[:, comp]
                    ax.plot(cr.t_s / tdiv, cr.mean_roe_m[:, comp], color=colour(cr.index),
                            **source_line(k), label=d if (k == 0 and comp == 0) else None)
            ax.set_ylabel(f"{ROE_LABELS[comp]} [m]")
        for ax in axes[-2:]:
            ax.set_xlabel(tlab)
        h, lab = axes[0].get_legend_handles_labels()
        fig.legend(h, lab, loc="outside lower center", ncol=max(1, len(h)))
        source_legend(axes[1], _labels(runs))
    return FigureSpec(
        "roe_history", "Mean ROE histories",
        "Truth mean ROE of each deputy relative to the chief, per component (a-scaled m, "
        f"quasi-nonsingular, Orekit Eckstein-Hechler mean elements), against time ({_when(runs)}; "
        "no deputy has a target)." + _baseline_note(runs), fig, data)


# ------------------------------------------------------------------------------------------
# Delta-v
# ------------------------------------------------------------------------------------------


def fig_delta_v(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """Cumulative executed delta-v per spacecraft, each impulse marked."""
    tdiv, tlab = _taxis(runs)
    series = []
    for k, r in enumerate(runs):
        for n, cr in r.crafts.items():
            t, dv, src = r.executed_impulses(n)
            if t.size:
                series.append((k, r, n, cr, t, np.linalg.norm(dv, axis=1), src))
    if not series:
        return Skipped("delta_v", "Cumulative delta-v",
                       "no impulse was executed (free drift, or no burns)")
    totals = [np.sum(s[5]) for s in series]
    div, unit = unit_scale(totals, metres=False)
    data = {}
    fig = new_figure(7.2, 3.4)
    with matplotlib.rc_context(RC):
        ax = fig.subplots()
        for k, r, n, cr, t, mag, src in series:
            cum = np.cumsum(mag)
            t_end = max(r.t_end_s, float(t[-1]))
            data[f"{r.label}/{n}/t_s"] = t
            data[f"{r.label}/{n}/dv_cum_mps"] = cum
            col = colour(cr.index)
            ax.step(np.r_[0.0, t, t_end] / tdiv, np.r_[0.0, cum, cum[-1]] / div, where="post",
                    color=col, **source_line(k), label=n if k == 0 else None)
            ax.plot(t / tdiv, cum / div, "o", color=col, ms=3.0, alpha=source_line(k)["alpha"])
        ax.set_xlabel(tlab)
        ax.set_ylabel(f"cumulative |Δv| [{unit}]")
        ax.legend(loc="upper left")
        source_legend(ax, _labels(runs), loc="lower right")
    src = series[0][6]
    return FigureSpec(
        "delta_v", "Cumulative delta-v",
        f"Sum of the executed impulse magnitudes |Δv| of each spacecraft ({unit}) against time "
        f"({_when(runs)}); "
        f"each dot is one impulse (from {src}: the impulses the truth executed)."
        + _baseline_note(runs), fig, data)


def fig_dv_remaining(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """Predicted remaining propulsive delta-v at each guidance cycle."""
    if runs[0].guidance is None or not runs[0].guidance["remaining"]:
        return Skipped("dv_remaining", "Predicted remaining delta-v",
                       "no /guidance group (free drift: no guidance law)")
    tdiv, tlab = _taxis(runs)
    vals = [v for r in runs if r.guidance for _, v in r.guidance["remaining"].values()]
    div, unit = unit_scale(np.concatenate(vals) if vals else [0.0], metres=False)
    data = {}
    fig = new_figure(7.2, 3.4)
    with matplotlib.rc_context(RC):
        ax = fig.subplots()
        for k, r in enumerate(runs):
            if r.guidance is None:
                continue
            for d, (t, rem) in r.guidance["remaining"].items():
                if d not in r.crafts:
                    continue
                col = colour(r.crafts[d].index)
                data[f"{r.label}/{d}/cycle_t_s"] = t
                data[f"{r.label}/{d}/dv_remaining_mps"] = rem
                ax.plot(t / tdiv, rem / div, marker="o", ms=3.0, color=col, **source_line(k),
                        label=f"{d}: predicted" if k == 0 else None)
                ti, dv, _ = r.executed_impulses(d)
                mag = np.linalg.norm(dv, axis=1)
                flown_after = np.array([np.sum(mag[ti >= tc - 1e-9]) for tc in t])
                data[f"{r.label}/{d}/dv_flown_after_mps"] = flown_after
                if k == 0:
                    ax.plot(t / tdiv, flown_after / div, color=col, lw=0.8, alpha=0.55,
                            drawstyle="steps-post", label=f"{d}: flown from then on")
        ax.set_xlabel(tlab)
        ax.set_ylabel(f"propulsive Δv [{unit}]")
        h, lab = ax.get_legend_handles_labels()
        fig.legend(h, lab, loc="outside lower center", ncol=max(1, len(h)))
        source_legend(ax, _labels(runs), loc="upper right")
    return FigureSpec(
        "dv_remaining", "Predicted remaining delta-v",
        f"The guidance plan's predicted propulsive delta-v from each guidance cycle to the end "
        f"({unit}, /guidance/deputies), against the cycle time ({_when(runs)}); a re-solving law "
        f"converges when "
        f"its prediction settles. Thin step line: the delta-v the truth actually executed from "
        f"that cycle on." + _baseline_note(runs), fig, data)


# ------------------------------------------------------------------------------------------
# Attitude modes
# ------------------------------------------------------------------------------------------


def _mode_intervals(t: np.ndarray, mi: np.ndarray, t_end: float) -> list[tuple[float, float, int]]:
    if t.size == 0:
        return []
    ch = np.flatnonzero(np.diff(mi)) + 1
    starts = np.r_[0, ch]
    ends_t = np.r_[t[ch], max(t_end, t[-1])]
    return [(float(t[s]), float(e), int(mi[s])) for s, e in zip(starts, ends_t)]


def fig_modes(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """Attitude-mode timeline per spacecraft (mode held, as a band over time)."""
    from matplotlib.patches import Patch

    tdiv, tlab = _taxis(runs)
    rows = []
    for k, r in enumerate(runs):
        for n, cr in r.crafts.items():
            rows.append((k, r, n, cr))
    all_modes = list(dict.fromkeys(m for _, _, _, cr in rows for m in cr.mode_names))
    data = {}
    fig = new_figure(7.2, 1.0 + 0.42 * len(rows))
    with matplotlib.rc_context(RC):
        ax = fig.subplots()
        ticks, labels = [], []
        for y, (k, r, n, cr) in enumerate(reversed(rows)):
            iv = _mode_intervals(cr.t_s, cr.mode_index, r.t_end_s)
            data[f"{r.label}/{n}/mode_intervals"] = np.array(iv, float).reshape(-1, 3)
            for m_idx in sorted({m for _, _, m in iv}):
                name = cr.mode_names[m_idx] if m_idx < len(cr.mode_names) else str(m_idx)
                segs = [(a / tdiv, (b - a) / tdiv) for a, b, m in iv if m == m_idx]
                ax.broken_barh(segs, (y - 0.35, 0.7), facecolors=mode_colour(name, all_modes),
                               edgecolor="none", alpha=1.0 if k == 0 else 0.6)
            sw = r.switches
            if sw is not None and len(sw["t_start_s"]):
                sel = np.array([s == n for s in sw["name"]], bool)
                slews = [(a / tdiv, max(b - a, 0.0) / tdiv)
                         for a, b in zip(sw["t_start_s"][sel], sw["t_end_s"][sel])]
                data[f"{r.label}/{n}/slews_s"] = np.c_[sw["t_start_s"][sel], sw["t_end_s"][sel]]
                if slews:
                    ax.broken_barh(slews, (y + 0.35, 0.12), facecolors=INK, edgecolor="none")
            ticks.append(y)
            labels.append(n + ("" if k == 0 else f" ({r.label})"))
        ax.set_yticks(ticks, labels)
        ax.set_ylim(-0.7, len(rows) - 0.3)
        ax.grid(axis="y", visible=False)
        ax.set_xlabel(tlab)
        handles = [Patch(color=mode_colour(m, all_modes), label=m) for m in all_modes]
        if runs[0].switches is not None:
            handles.append(Patch(color=INK, label="commanded slew"))
        fig.legend(handles=handles, loc="outside lower center", ncol=len(handles))
    return FigureSpec(
        "modes", "Attitude-mode timeline",
        f"Attitude mode held by each spacecraft against time ({_when(runs)}; truth samples, "
        "/spacecraft/<name>/truth/mode_index); the thin dark bars above a band are the commanded "
        "slews (/commands/switches, from slew start to end)."
        + (f" Rows marked ({runs[1].label}) are the baseline." if len(runs) > 1 else ""), fig, data)


# ------------------------------------------------------------------------------------------
# Density
# ------------------------------------------------------------------------------------------


def fig_density(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """Truth density versus the density the guidance believed (candidate only)."""
    r = runs[0]
    crafts = [cr for cr in r.crafts.values()
              if np.any(np.isfinite(cr.density_kgpm3) & (cr.density_kgpm3 > 0))]
    if not crafts:
        return Skipped("density", "Truth and believed density",
                       "no truth density logged (truth_density_method = none)")
    believed = [cr for cr in crafts if cr.believed_density_kgpm3 is not None]
    tdiv, tlab = _taxis(runs)
    data = {}
    fig = new_figure(7.2, 4.6 if believed else 3.0)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(2 if believed else 1, 1, sharex=True, squeeze=False)[:, 0]
        ax = axes[0]
        for cr in crafts:
            col = colour(cr.index)
            data[f"{r.label}/{cr.name}/truth_density_kgpm3"] = cr.density_kgpm3
            ax.plot(cr.t_s / tdiv, cr.density_kgpm3, color=col, lw=0.9, label=cr.name)
            if cr.believed_density_kgpm3 is not None:
                data[f"{r.label}/{cr.name}/believed_density_kgpm3"] = cr.believed_density_kgpm3
                ax.plot(cr.t_s / tdiv, cr.believed_density_kgpm3, color=col, lw=0.9, ls=":")
        ax.set_yscale("log")
        ax.set_ylabel("density [kg/m³]")
        from matplotlib.lines import Line2D

        h, lab = ax.get_legend_handles_labels()
        h += [Line2D([], [], color="#4d5b6a", lw=0.9)]
        lab += ["truth"]
        if believed:
            h += [Line2D([], [], color="#4d5b6a", lw=0.9, ls=":")]
            lab += ["guidance belief"]
        fig.legend(h, lab, loc="outside lower center", ncol=len(h))
        if believed:
            ax2 = axes[1]
            for cr in believed:
                ratio = cr.density_kgpm3 / cr.believed_density_kgpm3
                data[f"{r.label}/{cr.name}/density_ratio"] = ratio
                ax2.plot(cr.t_s / tdiv, ratio, color=colour(cr.index), lw=0.9, label=cr.name)
            ax2.axhline(1.0, color="#9aa3ad", lw=0.7)
            ax2.set_ylabel("truth / belief")
            ax2.set_xlabel(tlab)
        else:
            ax.set_xlabel(tlab)
    method = r.truth_attrs.get("truth_density_method", "")
    return FigureSpec(
        "density", "Truth and believed density",
        f"Local atmospheric density at each spacecraft's truth position (kg/m³, log scale) against time "
        f"({_when(runs)}): the "
        f"truth (model error included; computed by {method or 'the truth world'}) "
        + ("and, dotted, the density the guidance law believed at the same positions "
           "(/spacecraft/<name>/believed_density_kgpm3); lower panel: their ratio."
           if believed else "(the run has no guidance density belief).")
        + (f" Candidate run ({r.label}) only." if len(runs) > 1 else ""), fig, data)


# ------------------------------------------------------------------------------------------
# Navigation
# ------------------------------------------------------------------------------------------

_NAV = {"absolute": ("err_r_rtn_m", "sigma_r_rtn_m", "err_v_rtn_mps", "sigma_v_rtn_mps"),
        "relative": ("err_dr_rtn_m", "sigma_dr_rtn_m", "err_dv_rtn_mps", "sigma_dv_rtn_mps")}


def fig_navigation(runs: Sequence[RunData], kind: str) -> FigureSpec | Skipped:
    """Navigation error versus its stated sigma (candidate only), RTN components."""
    r = runs[0]
    name = f"nav_{kind}"
    title = f"{kind.capitalize()} navigation error"
    if r.navigation is None or not r.navigation.get(kind):
        return Skipped(name, title, "no /navigation group (free drift: no guidance law)")
    ek, sk, evk, svk = _NAV[kind]
    groups = r.navigation[kind]
    tdiv, tlab = _taxis(runs)
    data = {}
    fig = new_figure(7.2, 5.6)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(3, 2, sharex=True)
        for col_i, (e_key, s_key, unit, scale) in enumerate(((ek, sk, "m", 1.0), (evk, svk, "mm/s", 1e3))):
            for ax_i, axis in enumerate("RTN"):
                ax = axes[ax_i, col_i]
                for n, g in groups.items():
                    if e_key not in g:
                        continue
                    col = colour(r.crafts[n].index) if n in r.crafts else INK
                    t = g["t_s"] / tdiv
                    e = g[e_key][:, ax_i] * scale
                    data[f"{r.label}/{kind}/{n}/{e_key}/{axis}"] = g[e_key][:, ax_i]
                    ax.plot(t, e, ".", color=col, ms=3.0, label=n if (ax_i == 0 and col_i == 0) else None)
                    if s_key in g:
                        s3 = 3.0 * g[s_key][:, ax_i] * scale
                        data[f"{r.label}/{kind}/{n}/{s_key}/{axis}"] = g[s_key][:, ax_i]
                        ax.plot(t, s3, color=col, lw=0.7, ls="--")
                        ax.plot(t, -s3, color=col, lw=0.7, ls="--")
                    bad = ~g["valid"] if g["valid"].size == t.size else np.zeros(t.size, bool)
                    if np.any(bad):
                        ax.plot(t[bad], e[bad], "x", color=INK, ms=4.0)
                what = "position" if col_i == 0 else "velocity"
                ax.set_ylabel(f"{axis} {what} [{unit}]")
        axes[0, 0].set_title("position error", fontsize=7.5)
        axes[0, 1].set_title("velocity error", fontsize=7.5)
        for ax in axes[-1]:
            ax.set_xlabel(tlab)
        h, lab = axes[0, 0].get_legend_handles_labels()
        from matplotlib.lines import Line2D

        h += [Line2D([], [], color="#4d5b6a", lw=0.7, ls="--"),
              Line2D([], [], ls="none", marker="x", color=INK)]
        lab += ["± 3 × stated sigma", "no fix (outage)"]
        fig.legend(h, lab, loc="outside lower center", ncol=len(h))
    what = ("each spacecraft's absolute estimate minus its truth, in its own RTN axes"
            if kind == "absolute" else
            "each deputy's relative estimate (deputy minus chief) minus the truth relative state, "
            "in the chief's RTN axes")
    return FigureSpec(
        name, title,
        f"Navigation error at each guidance cycle ({_when(runs)}): {what} (position m, velocity mm/s; "
        f"/navigation/{kind}), with ± 3 times the 1-sigma the estimate states (dashed). "
        "Crosses: estimates made without a fix (outage)."
        + (f" Candidate run ({r.label}) only." if len(runs) > 1 else ""), fig, data)


# ------------------------------------------------------------------------------------------
# Relative motion in the chief's RTN frame
# ------------------------------------------------------------------------------------------


def fig_rtn(runs: Sequence[RunData]) -> FigureSpec | Skipped:
    """Relative motion in the chief's RTN frame (R-T and R-N views) with the keep-out radius."""
    c = runs[0]
    if not c.deputies:
        return Skipped("rtn_motion", "Relative motion (chief RTN)", "the run has no deputy")
    rel = {}
    for k, r in enumerate(runs):
        for d in r.deputies:
            rel[(k, d)] = r.relative_rtn_m(d)
    allv = np.concatenate([x.ravel() for _, x in rel.values()] + [np.zeros(1)])
    div, unit = unit_scale(allv, km_above=5e3)
    data = {}
    fig = new_figure(7.2, 3.6)
    with matplotlib.rc_context(RC):
        axes = fig.subplots(1, 2)
        for (k, d), (t, x) in rel.items():
            r = runs[k]
            col = colour(r.crafts[d].index)
            data[f"{r.label}/{d}/t_s"] = t
            data[f"{r.label}/{d}/rel_rtn_m"] = x
            if not len(x):
                continue
            dist = np.linalg.norm(x, axis=1)
            kmin = int(np.argmin(dist))
            for ax, j in zip(axes, (1, 2)):
                ax.plot(x[:, j] / div, x[:, 0] / div, color=col, **source_line(k, 0.9),
                        label=d if (k == 0 and j == 1) else None)
                ax.plot(x[0, j] / div, x[0, 0] / div, "o", mfc="white", mec=col, ms=4.5)
                ax.plot(x[-1, j] / div, x[-1, 0] / div, "s", color=col, ms=3.5)
                if k == 0:
                    ax.plot(x[kmin, j] / div, x[kmin, 0] / div, "^", mfc=col, mec=INK, mew=0.5, ms=6)
            if k == 0:
                axes[0].annotate(f"closest {dist[kmin]:.0f} m", (x[kmin, 1] / div, x[kmin, 0] / div),
                                 xytext=(4, 4), textcoords="offset points", fontsize=6.5, color=col)
        ko = c.keep_out_radius_m
        th = np.linspace(0, 2 * np.pi, 181)
        for ax, lab in zip(axes, ("T", "N")):
            ax.plot(0, 0, "+", color=INK, ms=7, mew=1.0)
            if ko > 0:
                ax.plot(ko * np.cos(th) / div, ko * np.sin(th) / div, color=LIMIT, lw=1.0, ls=LIMIT_DASH,
                        label=f"keep-out radius {ko:g} m" if lab == "T" else None)
            ax.set_xlabel(f"{lab} [{unit}]")
            ax.set_ylabel(f"R [{unit}]")
        axes[1].set_aspect("equal", adjustable="datalim")
        axes[0].set_title("R-T view (along-track horizontal)", fontsize=7.5)
        axes[1].set_title("R-N view (cross-track horizontal)", fontsize=7.5)
        h, lab = axes[0].get_legend_handles_labels()
        fig.legend(h, lab, loc="outside lower center", ncol=max(1, len(h)))
        source_legend(axes[1], _labels(runs))
    return FigureSpec(
        "rtn_motion", "Relative motion in the chief's RTN frame",
        f"Each deputy's truth position minus the chief's, in the chief's RTN axes (R radial, T "
        f"transverse, N orbit normal; {unit}), at the logged samples: R-T view (left) and R-N "
        f"view (right). Open circle: start; square: end; triangle: closest approach to the chief; "
        f"cross: the chief."
        + (f" Circle: the keep-out radius ({ko:g} m, [events] keep_out_radius_m)." if ko > 0 else
           " No keep-out radius is set.") + _baseline_note(runs), fig, data)


# ------------------------------------------------------------------------------------------
# The set
# ------------------------------------------------------------------------------------------

RUN_FIGURES = ("roe_planes", "roe_error", "delta_v", "modes", "density", "dv_remaining",
               "nav_absolute", "nav_relative", "rtn_motion")
"""Names of the single-run figures, in report order (``roe_history`` replaces ``roe_error`` when no
deputy has a target)."""


def run_figures(runs: Sequence[RunData]) -> list:
    """Every single-run figure (FigureSpec or Skipped), in report order."""
    c = runs[0]
    has_target = any(c.targets.get(d) is not None for d in c.deputies)
    out = [fig_roe_planes(runs), fig_roe_error(runs) if has_target else fig_roe_history(runs),
           fig_delta_v(runs), fig_modes(runs), fig_density(runs), fig_dv_remaining(runs),
           fig_navigation(runs, "absolute"), fig_navigation(runs, "relative"), fig_rtn(runs)]
    return out


# ------------------------------------------------------------------------------------------
# Tables
# ------------------------------------------------------------------------------------------


def _cfg(r: RunData, *keys, default=None):
    v = r.config
    for k in keys:
        if not isinstance(v, dict) or k not in v:
            return default
        v = v[k]
    return v


def solar_activity_text(config: dict) -> str:
    """The solar-activity source of a run's configuration, in words."""
    env = config.get("environment", {})
    sa = env.get("solar_activity", {}) or {}
    atm = env.get("atmosphere", "")
    src = sa.get("source", "")
    if atm == "jb2008":
        return "JB2008 SOLFSMY/DTCFILE files of the Orekit data"
    if atm in ("none", "harris_priester"):
        return f"not used (atmosphere {atm})"
    if src == "constant":
        return (f"constant: F10.7 {sa.get('f107_sfu')} sfu, 81-day mean {sa.get('f107a_sfu')} sfu, "
                f"Ap {sa.get('ap')}")
    if src == "file":
        return f"CSSI-format file {sa.get('path')}"
    if src == "cssi":
        return "CSSI space-weather file of the Orekit data"
    return str(src or "unknown")


def scenario_table(r: RunData, name: str = "scenario") -> Table:
    """Scenario summary of a run (from ``/meta`` and ``/meta/config_json``)."""
    env = r.config.get("environment", {})
    de = env.get("density_error", {}) or {}
    dep_rows = []
    for d in r.config.get("deputies", []):
        tgt = d.get("target_roe_m")
        dl = d.get("deadline_s")
        dep_rows.append(f"{d.get('name')}: roe_m {d.get('roe_m')}"
                        + (f" -> target {tgt}" if tgt is not None else "")
                        + (f" by {float(dl) / 86400:.3g} d" if dl is not None else ""))
    ch = r.config.get("chief", {})
    orb = ch.get("orbit", {}) or {}
    items = [
        ("run name", r.name), ("run log", str(r.path)),
        ("status", r.status + (f" ({r.reason})" if r.reason else "")),
        ("epoch (UTC)", r.epoch_utc),
        ("duration", f"{r.duration_s / 86400:.4g} days (reached {r.t_end_s / 86400:.4g} days)"),
        ("log step", f"{r.meta.get('log_step_s', '')} s"),
        ("guidance law", f"{r.law} (cycle {r.meta.get('cycle_s', '')} s)"),
        ("seed", r.meta.get("seed", "")),
        ("chief", f"{ch.get('name', r.chief)}: a {float(orb.get('a_m', float('nan'))) / 1e3:.3f} km, "
                  f"e {orb.get('e', '')}, i {float(orb.get('i_deg', float('nan'))):.4f} deg"),
        ("deputies", "; ".join(dep_rows) or "none"),
        ("environment", f"preset {env.get('preset', '')}, gravity {env.get('gravity_degree', '')}x"
                        f"{env.get('gravity_order', '')}, atmosphere {env.get('atmosphere', '')}, "
                        f"Sun {env.get('sun', '')}, Moon {env.get('moon', '')}, SRP {env.get('srp', '')}"),
        ("solar activity", solar_activity_text(r.config)),
        ("truth density error", f"bias {de.get('bias', 0)}, Gauss-Markov sigma {de.get('sigma', 0)}, "
                                f"tau {de.get('tau_s', '')} s"),
        ("navigation", "perfect" if _cfg(r, "navigation", "perfect", default=True) else "with errors"),
        ("actuators", "perfect" if _cfg(r, "actuators", "perfect", default=True) else "with errors"),
        ("tolerance box", f"{list(map(float, r.tolerance_m))} m (a-scaled mean ROE)"),
        ("keep-out radius", f"{r.keep_out_radius_m:g} m" if r.keep_out_radius_m > 0 else "off"),
    ]
    return key_value_table(name, f"Scenario summary: {r.name}", items,
                           note="Frames: covey's ECI is true of date (TOD, IERS 2010); ROE are "
                                "a-scaled quasi-nonsingular mean ROE relative to the chief.")


def provenance_table(r: RunData, name: str = "provenance") -> Table:
    """Software and data provenance from ``/meta``."""
    m = r.meta
    files = r.data_files
    dates = sorted(x for x in files.get("mtime_utc", []) if x)
    sw_files = [(p, d) for p, d in zip(files.get("path", []), files.get("mtime_utc", []))
                if "spaceweather" in p.lower().replace("-", "").replace("_", "")
                or "solfsmy" in p.lower() or "dtcfile" in p.lower()]
    items = [
        ("covey version", m.get("covey_version", "")), ("git commit", m.get("git_commit", "")),
        ("Orekit version", m.get("orekit_version", "")), ("Java version", m.get("java_version", "")),
        ("JPype version", m.get("jpype_version", "")), ("Python version", m.get("python_version", "")),
        ("numpy / h5py / HDF5", f"{m.get('numpy_version', '')} / {m.get('h5py_version', '')} / "
                                f"{m.get('hdf5_version', '')}"),
        ("Orekit data", f"{m.get('data_path', '')} ({m.get('orekit_data_from', m.get('data_source', ''))})"),
        ("Orekit data files", f"{len(files.get('path', []))} files"
                              + (f", modified {dates[0]} to {dates[-1]}" if dates else "")),
        ("solar-activity source", solar_activity_text(r.config)
         + ("; files: " + ", ".join(f"{p} ({d})" for p, d in sw_files) if sw_files else "")),
        ("truth density method", r.truth_attrs.get("truth_density_method", "")),
        ("truth sampler", r.truth_attrs.get("truth_sampler", "")),
        ("log schema", f"{m.get('schema', '')} {m.get('schema_version', '')}"),
        ("run started / finished (UTC)", f"{m.get('started_utc', '')} / {m.get('finished_utc', '')}"),
        ("wall time", f"{float(m.get('wall_time_s', float('nan'))):.1f} s"),
    ]
    return key_value_table(name, f"Software and data provenance: {r.name}", items,
                           note="From the run log's /meta (versions, git commit, data files).")


def data_files_table(r: RunData, name: str = "data_files") -> Table:
    t = Table(name, f"Orekit data files used: {r.name}",
              [Column("path", "file", "", "l"), Column("size_bytes", "size [byte]", "d"),
               Column("mtime_utc", "modified (UTC)", "", "l")],
              note="/meta/data_files of the run log.")
    f = r.data_files
    for p, s, d in zip(f.get("path", []), f.get("size_bytes", []), f.get("mtime_utc", [])):
        t.add(p, int(s), d)
    return t


METRIC_COLS = (
    ("dv_total_mps", "Δv [m/s]", ".4f"), ("n_burns", "burns", "d"), ("n_switches", "switches", "d"),
    ("final_error_norm_m", "|final error| [m]", ".2f"),
    ("err_da_m", "a δa err [m]", ".2f"), ("err_dlambda_m", "a δλ err [m]", ".2f"),
    ("err_dex_m", "a δex err [m]", ".2f"), ("err_dey_m", "a δey err [m]", ".2f"),
    ("err_dix_m", "a δix err [m]", ".2f"), ("err_diy_m", "a δiy err [m]", ".2f"),
    ("time_to_tolerance_h", "t to box [h]", ".2f"), ("min_distance_any_m", "min dist [m]", ".1f"),
    ("min_rn_separation_m", "min RN sep [m]", ".1f"), ("reached_deadline", "deadline", ""),
    ("safety", "safety", ""),
)


def metric_values(m: dict) -> dict:
    """Flat metric values of one deputy's ``/metrics`` entry (the columns of :data:`METRIC_COLS`)."""
    fe = np.asarray(m.get("final_error_m", np.full(6, np.nan)), float)
    out = {k: m.get(k, float("nan")) for k, _, _ in METRIC_COLS}
    for i, c in enumerate(("da", "dlambda", "dex", "dey", "dix", "diy")):
        out[f"err_{c}_m"] = float(fe[i]) if fe.size == 6 else float("nan")
    tt = m.get("time_to_tolerance_s", float("nan"))
    out["time_to_tolerance_h"] = float(tt) / 3600.0 if tt is not None else float("nan")
    flags = [f"keep-out ({m.get('min_distance_other', '')})" if m.get("keep_out_violated") else "",
             "RN separation" if m.get("rn_separation_violated") else ""]
    out["safety"] = ", ".join(f for f in flags if f) or "ok"
    return out


def metrics_table(r: RunData, name: str = "metrics") -> Table | None:
    if not r.metrics:
        return None
    t = Table(name, f"Metrics per deputy: {r.name}",
              [Column("deputy", "deputy", "", "l")] + [Column(k, h, f) for k, h, f in METRIC_COLS],
              note="From /metrics (sim.judge.metrics, truth only): final error = truth mean ROE "
                   "minus target at the deadline (a-scaled m); distances over the logged samples.")
    for d in r.deputies:
        if d in r.metrics:
            v = metric_values(r.metrics[d])
            t.add(d, *[v[k] for k, _, _ in METRIC_COLS],
                  css="fail" if v["safety"] != "ok" else "")
    return t


def final_roe_table(r: RunData, name: str = "final_roe") -> Table | None:
    if not r.deputies:
        return None
    t = Table(name, f"Mean ROE at start, deadline and end: {r.name}",
              [Column("deputy", "deputy", "", "l"), Column("component", "component", "", "l"),
               Column("initial_m", "initial [m]", ".2f"), Column("at_deadline_m", "at deadline [m]", ".2f"),
               Column("final_m", "end of run [m]", ".2f"), Column("target_m", "target [m]", ".2f"),
               Column("error_m", "error at deadline [m]", ".2f"), Column("tolerance_m", "tolerance [m]", ".2f"),
               Column("in_tolerance", "in box", "")],
              note="Truth mean ROE (a-scaled, chief-relative, Orekit Eckstein-Hechler); error = "
                   "value at the deadline (or the last sample) minus target.")
    for d in r.deputies:
        cr = r.crafts[d]
        if cr.mean_roe_m is None or not len(cr.mean_roe_m):
            continue
        roe = cr.mean_roe_m
        kd = min(int(np.searchsorted(cr.t_s, r.deadlines_s[d] - 1e-6)), len(cr.t_s) - 1)
        tgt = r.targets.get(d)
        for i, lab in enumerate(ROE_LABELS):
            err = float(roe[kd, i] - tgt[i]) if tgt is not None else float("nan")
            ok = bool(abs(err) <= r.tolerance_m[i]) if tgt is not None else None
            t.add(d, lab, float(roe[0, i]), float(roe[kd, i]), float(roe[-1, i]),
                  float(tgt[i]) if tgt is not None else float("nan"), err, float(r.tolerance_m[i]),
                  "" if ok is None else ok, css="" if ok is None or ok else "fail")
    return t


def navigation_table(r: RunData, name: str = "navigation") -> Table | None:
    if r.navigation is None:
        return None
    t = Table(name, f"Navigation error against stated sigma: {r.name}",
              [Column("kind", "kind", "", "l"), Column("name", "spacecraft", "", "l"),
               Column("quantity", "quantity", "", "l"), Column("axis", "axis", "", "l"),
               Column("rms", "RMS error", ".4g"), Column("sigma_mean", "mean stated sigma", ".4g"),
               Column("within_1sigma", "within 1 sigma", ".3f"),
               Column("within_3sigma", "within 3 sigma", ".3f"), Column("units", "units", "", "l")],
              note="Fractions of guidance cycles with |error| within 1 and 3 stated sigma (a "
                   "Gaussian error with a true sigma would give about 0.683 and 0.997).")
    for kind, keys in _NAV.items():
        for n, g in (r.navigation.get(kind) or {}).items():
            for e_key, s_key, q, u in ((keys[0], keys[1], "position", "m"), (keys[2], keys[3], "velocity", "m/s")):
                if e_key not in g or s_key not in g:
                    continue
                for i, ax in enumerate("RTN"):
                    e, s = g[e_key][:, i], g[s_key][:, i]
                    ok = np.isfinite(e) & np.isfinite(s)
                    if not np.any(ok):
                        continue
                    e, s = e[ok], s[ok]
                    pos = s > 0
                    t.add(kind, n, q, ax, float(np.sqrt(np.mean(e ** 2))), float(np.mean(s)),
                          float(np.mean(np.abs(e[pos]) <= s[pos])) if np.any(pos) else float("nan"),
                          float(np.mean(np.abs(e[pos]) <= 3 * s[pos])) if np.any(pos) else float("nan"), u)
    return t


def events_table(r: RunData, name: str = "events") -> Table | None:
    ev = r.events
    if not len(ev["t_s"]):
        return None
    t = Table(name, f"Events: {r.name}",
              [Column("t_s", "t [s]", ".1f"), Column("name", "spacecraft", "", "l"),
               Column("kind", "kind", "", "l"), Column("detail", "detail", "", "l")])
    for row in zip(ev["t_s"], ev["name"], ev["kind"], ev["detail"]):
        t.add(float(row[0]), *row[1:])
    return t


def impulses_summary_table(r: RunData, name: str = "impulses") -> Table | None:
    rows = []
    for n in r.crafts:
        tt, dv, src = r.executed_impulses(n)
        if tt.size:
            mag = np.linalg.norm(dv, axis=1)
            rows.append((n, int(tt.size), float(np.sum(mag)), float(np.max(mag)),
                         *[float(np.sum(np.abs(dv[:, i]))) for i in range(3)], src))
    n_cmd = {}
    if r.impulses is not None:
        for n, s in zip(r.impulses["name"], r.impulses["status"]):
            n_cmd.setdefault(n, {}).setdefault(s, 0)
            n_cmd[n][s] += 1
    if not rows and not n_cmd:
        return None
    t = Table(name, f"Executed impulses per spacecraft: {r.name}",
              [Column("name", "spacecraft", "", "l"), Column("n", "impulses", "d"),
               Column("dv_total_mps", "Σ|Δv| [m/s]", ".5f"), Column("dv_max_mps", "max |Δv| [m/s]", ".5f"),
               Column("dv_r_mps", "Σ|Δv R| [m/s]", ".5f"), Column("dv_t_mps", "Σ|Δv T| [m/s]", ".5f"),
               Column("dv_n_mps", "Σ|Δv N| [m/s]", ".5f"), Column("commands", "commanded (status: count)", "", "l"),
               Column("source", "source", "", "l")],
              note="RTN: the spacecraft's own radial, transverse, normal axes at the impulse.")
    done = set()
    for row in rows:
        cmd = "; ".join(f"{k}: {v}" for k, v in sorted(n_cmd.get(row[0], {}).items()))
        t.add(*row[:7], cmd, row[7])
        done.add(row[0])
    for n, st in n_cmd.items():
        if n not in done:
            t.add(n, 0, 0.0, float("nan"), 0.0, 0.0, 0.0,
                  "; ".join(f"{k}: {v}" for k, v in sorted(st.items())), "")
    return t


COMPARE_METRICS = (("dv_total_mps", "Δv", "m/s", ".5f"), ("n_burns", "burns", "1", ".0f"),
                   ("n_switches", "switches", "1", ".0f"),
                   ("final_error_norm_m", "|final error|", "m", ".3f"),
                   ("err_da_m", "a δa err", "m", ".3f"), ("err_dlambda_m", "a δλ err", "m", ".3f"),
                   ("err_dex_m", "a δex err", "m", ".3f"), ("err_dey_m", "a δey err", "m", ".3f"),
                   ("err_dix_m", "a δix err", "m", ".3f"), ("err_diy_m", "a δiy err", "m", ".3f"),
                   ("time_to_tolerance_h", "time to box", "h", ".3f"),
                   ("min_distance_any_m", "min distance", "m", ".2f"))


def compare_table(cand: RunData, base: RunData, name: str = "compare") -> Table:
    """Candidate versus baseline metrics per deputy (difference = candidate - baseline)."""
    t = Table(name, f"Candidate ({cand.label}) versus baseline ({base.label})",
              [Column("deputy", "deputy", "", "l"), Column("metric", "metric", "", "l"),
               Column("units", "units", "", "l"), Column("candidate", "candidate", ".5g"),
               Column("baseline", "baseline", ".5g"), Column("difference", "candidate − baseline", ".4g")],
              note="From each log's /metrics (truth only).")
    for d in cand.deputies:
        if d not in cand.metrics and d not in base.metrics:
            continue
        a = metric_values(cand.metrics.get(d, {}))
        b = metric_values(base.metrics.get(d, {}))
        for k, lab, u, _ in COMPARE_METRICS:
            va, vb = float(a.get(k, np.nan)), float(b.get(k, np.nan))
            t.add(d, lab, u, va, vb, va - vb)
    return t


def run_tables(runs: Sequence[RunData]) -> list[Table]:
    """The tables of a single-run report (candidate; the compare table with a baseline)."""
    r = runs[0]
    out = [scenario_table(r), provenance_table(r), metrics_table(r), final_roe_table(r),
           impulses_summary_table(r), navigation_table(r), events_table(r)]
    if len(runs) > 1:
        out.insert(2, compare_table(r, runs[1]))
    out.append(data_files_table(r))
    return [t for t in out if t is not None]


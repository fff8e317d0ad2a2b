"""Metrics that judge a run, computed from the logged truth only (never from guidance code).

All inputs are plain arrays read from a run log, so the same functions serve a live run, a
campaign summary and a later re-evaluation of old logs. Mean ROE come from sim.orekit.meanroe
(Orekit's Eckstein-Hechler mean theory), as logged under ``/spacecraft/<name>/mean_roe_m``.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Mapping, Sequence

import numpy as np

from sim.models.frames import relative_rtn

ROE_KEYS = ("a_da_m", "a_dlambda_m", "a_dex_m", "a_dey_m", "a_dix_m", "a_diy_m")
ROE_LABELS = ("a da", "a dlambda", "a dex", "a dey", "a dix", "a diy")
"""The a-scaled ROE components as printed (same order as :data:`ROE_KEYS`)."""

CYCLE_STATUSES = ("ok", "degraded", "hold", "infeasible")
"""Guidance cycle outcomes a law reports (``guidance.interface.Diagnostics.status``), in the order
they are printed."""


@dataclass
class DeputyMetrics:
    """Per-deputy metrics of one run (units in names).

    ``final_error_m`` is truth mean ROE minus target at the deadline (or at the last sample if
    the run ended earlier, flagged by ``reached_deadline``), a-scaled metres, order da, dlambda,
    dex, dey, dix, diy, taken at ``t_final_s`` (s since epoch).

    ``target_met`` is the verdict: the deadline was reached and every component of
    ``final_error_m`` lies inside the ``[metrics] tolerance_m`` box; ``target_verdict`` says
    ``"yes"`` or ``"no: ..."`` with what failed (the components outside the box, or that the run
    ended before the deadline, or that there were no samples).
    """

    name: str
    dv_total_mps: float
    propellant_used_kg: float
    n_burns: int
    n_switches: int
    final_error_m: list
    final_error_norm_m: float
    max_error_after_convergence_m: float  # largest |error| from entering the box to the deadline
    time_to_tolerance_s: float  # enter the box and stay in it up to the deadline; nan: not in it
    reached_deadline: bool
    time_in_mode_s: dict = field(default_factory=dict)
    min_distance_m: float = float("nan")  # to the chief, over the logged samples
    min_rn_separation_m: float = float("nan")  # radial/normal, in the chief's RTN frame
    min_distance_any_m: float = float("nan")  # to any other spacecraft (chief or deputy)
    min_distance_other: str = ""  # the spacecraft of that closest approach
    t_min_distance_any_s: float = float("nan")
    t_min_rn_separation_s: float = float("nan")
    keep_out_violated: bool = False  # min_distance_any_m < events.keep_out_radius_m (when > 0)
    rn_separation_violated: bool = False  # min_rn_separation_m < events.min_rn_separation_m (> 0)
    n_unconverted_samples: int = 0  # truth samples without a mean ROE (the judge could not convert)
    deadline_s: float = float("nan")  # s since epoch (the run's end when the deputy has none)
    t_final_s: float = float("nan")  # time of the sample final_error_m is taken at, s since epoch
    target_met: bool = False  # reached the deadline inside the tolerance box
    target_verdict: str = ""  # "yes", or "no: <what failed>"

    def as_dict(self) -> dict:
        return asdict(self)


def target_verdict(final_error_m, tolerance_m, reached_deadline: bool,
                   t_final_s: float = float("nan"),
                   deadline_s: float = float("nan")) -> tuple[bool, str]:
    """Whether a deputy met its target, and why not.

    Parameters
    ----------
    final_error_m : (6,) truth mean ROE minus target, a-scaled m (da, dlambda, dex, dey, dix, diy).
    tolerance_m : (6,) half-widths of the tolerance box, a-scaled m.
    reached_deadline : bool
        False when the run ended before the deadline (the error is then taken early).
    t_final_s, deadline_s : float
        When the error was taken and the deadline, s since epoch (for the message).

    Returns
    -------
    (met, text)
        ``(True, "yes")``, or ``(False, "no: <reason>")`` with the reason: no samples, the run
        ended before the deadline, or each component outside the box with its error and
        half-width, worst (largest error / half-width) first.
    """
    e = np.asarray(final_error_m, float).reshape(6)
    tol = np.asarray(tolerance_m, float).reshape(6)
    if not np.all(np.isfinite(e)):
        return False, "no: no truth samples to judge"
    if not reached_deadline:
        return False, (f"no: the run ended at t = {t_final_s / 86400.0:.3g} d, before the deadline "
                       f"at {deadline_s / 86400.0:.3g} d")
    out = np.abs(e) > tol
    if not out.any():
        return True, "yes"
    order = sorted(np.nonzero(out)[0], key=lambda k: -abs(e[k]) / tol[k])
    return False, "no: " + ", ".join(f"{ROE_LABELS[k]} {e[k]:+.1f} m outside +-{tol[k]:g} m"
                                     for k in order)


def cycle_outcomes(status: Sequence[str]) -> dict[str, int]:
    """Counts of guidance cycle outcomes (``/guidance/cycles/status``), every known status first
    (:data:`CYCLE_STATUSES`, zero counts included), then any other status a law reported."""
    out = {s: 0 for s in CYCLE_STATUSES}
    for s in status:
        s = s.decode() if isinstance(s, bytes) else str(s)
        out[s] = out.get(s, 0) + 1
    return out


def cycles_text(counts: Mapping[str, int], noun: str = "") -> str:
    """``"12/12 ok"``, ``"9 infeasible, 3 hold / 12"`` (statuses other than ok, most severe
    first), or ``"none"`` when no cycle was flown (free drift). ``noun`` (e.g. ``"cycles"``) is
    put after the total: ``"12/12 cycles ok"``, ``"9 infeasible / 12 cycles"``."""
    n = sum(counts.values())
    if n == 0:
        return "none"
    unit = f" {noun}" if noun else ""
    bad = [(s, counts[s]) for s in sorted(counts, key=_severity) if s != "ok" and counts[s]]
    if not bad:
        return f"{n}/{n}{unit} ok"
    return ", ".join(f"{c} {s}" for s, c in bad) + f" / {n}{unit}"


def _severity(status: str) -> int:
    order = ("infeasible", "degraded", "hold")
    return order.index(status) if status in order else len(order)


def index_ranges(idx: Sequence[int]) -> str:
    """``[0, 1, 2, 5, 7, 8]`` -> ``"0-2, 5, 7-8"``."""
    idx = sorted(int(i) for i in idx)
    parts: list[str] = []
    k = 0
    while k < len(idx):
        j = k
        while j + 1 < len(idx) and idx[j + 1] == idx[j] + 1:
            j += 1
        parts.append(str(idx[k]) if j == k else f"{idx[k]}-{idx[j]}")
        k = j + 1
    return ", ".join(parts)


def safety_flags(m: "DeputyMetrics", keep_out_radius_m: float, min_rn_separation_m: float
                 ) -> "DeputyMetrics":
    """Set the safety-monitor flags of ``m`` against the scenario thresholds (0 = monitor off)."""
    m.keep_out_violated = bool(keep_out_radius_m > 0 and m.min_distance_any_m < keep_out_radius_m)
    m.rn_separation_violated = bool(min_rn_separation_m > 0
                                    and m.min_rn_separation_m < min_rn_separation_m)
    return m


def closest_approach(t_s, r_eci_m, others: Mapping[str, np.ndarray]) -> tuple[float, str, float]:
    """Smallest distance from one spacecraft to any of ``others`` over common samples.

    Parameters
    ----------
    t_s : (K,) sample times, s.
    r_eci_m : (K, 3) positions of the spacecraft.
    others : name -> (K, 3) positions of the other spacecraft at the same times.

    Returns
    -------
    (distance_m, other_name, t_s) ; (nan, "", nan) without samples.
    """
    best = (float("nan"), "", float("nan"))
    r = np.asarray(r_eci_m, float).reshape(-1, 3)
    for name, ro in others.items():
        n = min(len(r), len(ro))
        if n == 0:
            continue
        d = np.linalg.norm(np.asarray(ro, float)[:n] - r[:n], axis=1)
        k = int(np.argmin(d))
        if not best[1] or d[k] < best[0]:
            best = (float(d[k]), name, float(np.asarray(t_s, float)[k]))
    return best


def time_in_modes(t_s: np.ndarray, mode_index: np.ndarray, mode_names: Sequence[str]) -> dict:
    """Seconds spent in each mode, from sampled mode indices (sample-and-hold)."""
    out = {m: 0.0 for m in mode_names}
    if len(t_s) < 2:
        return out
    dt = np.diff(t_s)
    for k, m in enumerate(mode_names):
        out[m] = float(np.sum(dt[mode_index[:-1] == k]))
    return out


def deputy_metrics(
    name: str,
    t_s: np.ndarray,
    mean_roe_m: np.ndarray,
    target_roe_m: np.ndarray,
    deadline_s: float,
    tolerance_m: np.ndarray,
    dv_exec_rtn_mps: np.ndarray,
    propellant_used_kg: float,
    n_switches: int,
    mode_index: np.ndarray,
    mode_names: Sequence[str],
    r_chief_eci_m: np.ndarray,
    v_chief_eci_mps: np.ndarray,
    r_deputy_eci_m: np.ndarray,
) -> DeputyMetrics:
    """Metrics of one deputy.

    Parameters
    ----------
    t_s : (K,) sample times, s.
    mean_roe_m : (K, 6) truth mean ROE, a-scaled m.
    target_roe_m : (6,) target mean ROE, a-scaled m.
    deadline_s : float, s since epoch.
    tolerance_m : (6,) tolerance box half-widths per ROE component, a-scaled m.
    dv_exec_rtn_mps : (B, 3) executed impulses.
    r_chief_eci_m, v_chief_eci_mps, r_deputy_eci_m : (K, 3) truth samples (same times).
    """
    t_s = np.asarray(t_s, float)
    err = np.asarray(mean_roe_m, float) - np.asarray(target_roe_m, float)[None, :]
    tol = np.asarray(tolerance_m, float)
    inside = np.all(np.abs(err) <= tol[None, :], axis=1)
    reached = bool(t_s.size and t_s[-1] >= deadline_s - 1e-6)
    k_final = int(np.searchsorted(t_s, deadline_s - 1e-6)) if reached else t_s.size - 1
    k_final = min(max(k_final, 0), t_s.size - 1)
    final = err[k_final] if t_s.size else np.full(6, np.nan)
    # time to enter the tolerance box and stay in it until the judged sample (the deadline, or the
    # last sample of a run that ended earlier): after the deadline a deputy may drift out again
    ttt = float("nan")
    inside = inside[:k_final + 1]
    if inside.size and inside[-1]:
        outside = np.nonzero(~inside)[0]
        k_in = 0 if outside.size == 0 else outside[-1] + 1
        ttt = float(t_s[k_in] - t_s[0])
        max_after = float(np.max(np.linalg.norm(err[k_in:k_final + 1], axis=1)))
    else:
        max_after = float("nan")
    t_final = float(t_s[k_final]) if t_s.size else float("nan")
    met, verdict = target_verdict(final, tol, reached, t_final, float(deadline_s))
    dv = np.asarray(dv_exec_rtn_mps, float).reshape(-1, 3)
    rel = relative_rtn(np.asarray(r_chief_eci_m), np.asarray(v_chief_eci_mps), np.asarray(r_deputy_eci_m))
    rn = np.hypot(rel[:, 0], rel[:, 2]) if rel.size else np.zeros(0)
    return DeputyMetrics(
        name=name,
        dv_total_mps=float(np.sum(np.linalg.norm(dv, axis=1))),
        propellant_used_kg=float(propellant_used_kg),
        n_burns=int(dv.shape[0]),
        n_switches=int(n_switches),
        final_error_m=[float(x) for x in final],
        final_error_norm_m=float(np.linalg.norm(final)),
        max_error_after_convergence_m=max_after,
        time_to_tolerance_s=ttt,
        reached_deadline=reached,
        time_in_mode_s=time_in_modes(t_s, np.asarray(mode_index), mode_names),
        min_distance_m=float(np.min(np.linalg.norm(rel, axis=1))) if rel.size else float("nan"),
        min_rn_separation_m=float(np.min(rn)) if rn.size else float("nan"),
        t_min_rn_separation_s=float(t_s[int(np.argmin(rn))]) if rn.size else float("nan"),
        deadline_s=float(deadline_s), t_final_s=t_final, target_met=met, target_verdict=verdict,
    )


def format_table(rows: Sequence[Mapping], columns: Sequence[tuple[str, str, str]]) -> str:
    """Plain-text table. ``columns``: (key, header, format spec).

    A float NaN prints as ``n/a``; a value that does not take the format spec prints as ``str``;
    the keys listed in a row's ``"_marked"`` entry get a ``*`` (explained under the table, see
    :func:`table_notes`).
    """
    head = [h for _, h, _ in columns]
    body = []
    for r in rows:
        cells = []
        marks = r.get("_marked", ())
        for key, _, fmt in columns:
            v = r.get(key, "")
            if isinstance(v, float) and np.isnan(v):
                cell = "n/a"
            else:
                try:
                    cell = format(v, fmt) if fmt else str(v)
                except (TypeError, ValueError):
                    cell = str(v)
            cells.append(cell + ("*" if key in marks else ""))
        body.append(cells)
    widths = [max(len(h), *(len(c[i]) for c in body)) if body else len(h) for i, h in enumerate(head)]
    lines = ["  ".join(h.rjust(w) for h, w in zip(head, widths))]
    lines.append("  ".join("-" * w for w in widths))
    for c in body:
        lines.append("  ".join(x.rjust(w) for x, w in zip(c, widths)))
    return "\n".join(lines)


def run_metrics(f, cfg) -> list[DeputyMetrics]:
    """Metrics of every deputy with a target, from an open run log and the run's configuration.

    Parameters
    ----------
    f : h5py.File or h5py.Group
        The run log (open for reading or still being written).
    cfg : sim.scenario.config.RunConfig

    Returns
    -------
    list of DeputyMetrics
        Deputies without ``target_roe_m`` are skipped.
    """
    chief = cfg.chief.name

    def arr(path, default=None):
        return np.asarray(f[path][...]) if path in f else default

    tc = arr(f"spacecraft/{chief}/truth/t_s", np.zeros(0))
    rc = arr(f"spacecraft/{chief}/truth/r_eci_m", np.zeros((0, 3)))
    vc = arr(f"spacecraft/{chief}/truth/v_eci_mps", np.zeros((0, 3)))
    imp_name = arr("commands/impulses/name")
    imp_status = arr("commands/impulses/status")
    imp_dv = arr("commands/impulses/dv_exec_rtn_mps")
    imp_prop = arr("commands/impulses/propellant_used_kg")
    sw_name = arr("commands/switches/name")
    out = []
    for d in cfg.deputies:
        if d.target_roe_m is None:
            continue
        base = f"spacecraft/{d.name}"
        t = arr(f"{base}/truth/t_s", np.zeros(0))
        roe = arr(f"{base}/mean_roe_m", np.zeros((0, 6)))
        rd = arr(f"{base}/truth/r_eci_m", np.zeros((0, 3)))
        mi = arr(f"{base}/truth/mode_index", np.zeros(0, int))
        modes = list(f[base].attrs.get("mode_names", [])) if base in f else []
        modes = [m.decode() if isinstance(m, bytes) else str(m) for m in modes]
        n = min(len(t), len(tc), len(roe))
        dv = np.zeros((0, 3))
        prop = 0.0
        if imp_name is not None and len(imp_name):
            names = np.array([x.decode() if isinstance(x, bytes) else str(x) for x in imp_name])
            st = np.array([x.decode() if isinstance(x, bytes) else str(x) for x in imp_status])
            sel = (names == d.name) & np.isin(st, ("executed", "clipped_max"))
            dv = imp_dv[sel]
            prop = float(np.sum(imp_prop[names == d.name]))
        n_sw = 0
        if sw_name is not None and len(sw_name):
            n_sw = int(np.sum(np.array([x.decode() if isinstance(x, bytes) else str(x)
                                         for x in sw_name]) == d.name))
        deadline = cfg.duration_s if d.deadline_s is None else d.deadline_s
        m = deputy_metrics(
            d.name, t[:n], roe[:n], np.asarray(d.target_roe_m, float), deadline,
            np.asarray(cfg.metrics.tolerance_m, float), dv, prop, n_sw, mi[:n], modes,
            rc[:n], vc[:n], rd[:n])
        # closest approach to any other spacecraft (deputy pairs count for the keep-out monitor)
        others = {sc.name: arr(f"spacecraft/{sc.name}/truth/r_eci_m", np.zeros((0, 3)))
                  for sc in cfg.spacecraft if sc.name != d.name}
        m.min_distance_any_m, m.min_distance_other, m.t_min_distance_any_s = closest_approach(
            t, rd, others)
        m.n_unconverted_samples = int(np.count_nonzero(np.isnan(roe).any(axis=1))) if len(roe) else 0
        out.append(safety_flags(m, float(cfg.events.keep_out_radius_m),
                                float(cfg.events.min_rn_separation_m)))
    return out


METRIC_COLUMNS = (
    ("name", "deputy", ""),
    ("target_met_text", "target met", ""),
    ("dv_total_mps", "dv [m/s]", ".4f"),
    ("n_burns", "burns", "d"),
    ("n_switches", "switches", "d"),
    ("err_da_m", "a da err [m]", ".1f"),
    ("err_dlambda_m", "a dlambda err [m]", ".1f"),
    ("err_de_m", "|a de err| [m]", ".1f"),
    ("err_di_m", "|a di err| [m]", ".1f"),
    ("final_error_norm_m", "|err| [m]", ".1f"),
    ("time_to_tolerance_h", "t to box [h]", ".1f"),
    ("min_distance_m", "min dist [m]", ".0f"),
    ("min_rn_separation_m", "min RN sep [m]", ".0f"),
    ("monitor_flags", "monitor flags", ""),
)
"""The per-deputy table of ``covey run``: (row key, header, format spec) for :func:`format_table`
over :func:`table_rows`. Errors are a-scaled metres at the deadline (``*``: taken early)."""

ERROR_KEYS = ("err_da_m", "err_dlambda_m", "err_de_m", "err_di_m", "final_error_norm_m")
"""The row keys of the final errors (marked ``*`` when taken before the deadline)."""


def table_rows(metrics: Sequence[DeputyMetrics], extra: Mapping | None = None,
               events=None) -> list[dict]:
    """Flatten metrics for :func:`format_table` with :data:`METRIC_COLUMNS`.

    Parameters
    ----------
    metrics : sequence of DeputyMetrics
    extra : mapping, optional
        Entries added to every row (e.g. the law, the run status).
    events : sim.scenario.config.EventsConfig, optional
        The monitor thresholds; with them a monitor that is off (threshold 0) reads ``off``.

    Returns
    -------
    list of dict
        ``m.as_dict()`` plus: ``err_da_m``, ``err_dlambda_m`` (m), ``err_de_m`` and ``err_di_m``
        (magnitudes of the relative e and i vector errors, ``hypot(dex, dey)``,
        ``hypot(dix, diy)``, m), ``time_to_tolerance_h`` (h, or ``"never"``), ``target_met_text``
        (``yes`` / ``no (<components>)``), ``monitor_flags`` (``none``, ``off`` or the flags) and
        ``_marked`` (the error keys, when the errors were taken before the deadline).
    """
    rows = []
    for m in metrics:
        e = m.final_error_m
        r = dict(m.as_dict())
        r["err_da_m"] = e[0]
        r["err_dlambda_m"] = e[1]
        r["err_de_m"] = float(np.hypot(e[2], e[3]))
        r["err_di_m"] = float(np.hypot(e[4], e[5]))
        ttt = m.time_to_tolerance_s
        r["time_to_tolerance_h"] = "never" if not np.isfinite(ttt) else ttt / 3600.0
        r["target_met_text"] = _met_short(m)
        r["monitor_flags"] = _monitor_flags(m, events)
        if not m.reached_deadline:
            r["_marked"] = ERROR_KEYS
        r.update(extra or {})
        rows.append(r)
    return rows


def _met_short(m: DeputyMetrics) -> str:
    """``yes``, ``no (a dey, a diy)``, ``no (ended early)``, ``no (no samples)``."""
    if m.target_met:
        return "yes"
    v = m.target_verdict
    if "no truth samples" in v:
        return "no (no samples)"
    if not m.reached_deadline:
        return "no (ended early)"
    pos = {lab: min((v.find(f"{lab} {sg}") for sg in "+-" if f"{lab} {sg}" in v), default=-1)
           for lab in ROE_LABELS}
    comps = sorted((lab for lab, k in pos.items() if k >= 0), key=pos.get)  # worst first
    return f"no ({', '.join(comps)})"


def _monitor_flags(m: DeputyMetrics, events=None) -> str:
    flags = [f"keep-out ({m.min_distance_other})" if m.keep_out_violated else "",
             "RN separation" if m.rn_separation_violated else ""]
    flags = [f for f in flags if f]
    if flags:
        return ", ".join(flags)
    if events is not None and events.keep_out_radius_m <= 0 and events.min_rn_separation_m <= 0:
        return "off"
    return "none"


def table_notes(metrics: Sequence[DeputyMetrics], cfg) -> list[str]:
    """The lines printed under a metrics table: what the columns mean, which errors were taken
    early, and what the monitors are (and are not).

    Parameters
    ----------
    metrics : sequence of DeputyMetrics
    cfg : sim.scenario.config.RunConfig
        For ``log_step_s`` and the ``[events]`` thresholds.
    """
    lines = ["errors: truth mean ROE (Orekit Eckstein-Hechler) minus target at the deadline, "
             "a-scaled m; |a de err| and |a di err| are the magnitudes of the relative e- and "
             "i-vector errors, |err| of all six; target met: inside the [metrics] tolerance box "
             "at the deadline; t to box: time to enter the box and stay in it up to the deadline "
             "(never: not in it at the deadline)"]
    early = dict.fromkeys(f"{m.name} at t = {m.t_final_s / 86400.0:.3g} d (deadline "
                          f"{m.deadline_s / 86400.0:.3g} d)"
                          for m in metrics if not m.reached_deadline)
    if early:
        lines.append("*: taken before the deadline, at the last sample (the run ended early): "
                     + ", ".join(early))
    ev = cfg.events
    mons = []
    if ev.keep_out_radius_m > 0:
        mons.append(f"keep-out: closer than {ev.keep_out_radius_m:g} m to any spacecraft")
    if ev.min_rn_separation_m > 0:
        mons.append(f"RN separation: radial/normal separation to the chief below "
                    f"{ev.min_rn_separation_m:g} m")
    what = ("; ".join(mons) if mons
            else "off ([events] keep_out_radius_m and min_rn_separation_m are 0)")
    lines.append(f"monitor flags: {what}. Monitors and min dist / min RN sep are sampled every "
                 f"log_step_s = {cfg.log_step_s:g} s of logged truth (a closer approach between "
                 "samples is missed); they are no conjunction assessment")
    return lines


def read_cycles(f) -> dict:
    """The guidance cycle outcomes of an open run log (``/guidance/cycles``).

    Parameters
    ----------
    f : h5py.File or h5py.Group

    Returns
    -------
    dict
        ``counts`` (status -> number of cycles, :func:`cycle_outcomes`), and ``infeasible``: a list
        of ``(cycle_index, t_s, message)`` of every infeasible cycle, in time order. Empty counts
        for a free-drift log.
    """
    g = "guidance/cycles"
    if f"{g}/status" not in f:
        return {"counts": {}, "infeasible": []}

    def text(a):
        return [x.decode() if isinstance(x, bytes) else str(x) for x in a]

    status = text(f[f"{g}/status"][...])
    n = len(status)
    msg = text(f[f"{g}/message"][...]) if f"{g}/message" in f else [""] * n
    t = np.asarray(f[f"{g}/t_s"][...], float) if f"{g}/t_s" in f else np.full(n, np.nan)
    idx = (np.asarray(f[f"{g}/cycle_index"][...], int) if f"{g}/cycle_index" in f
           else np.arange(n))
    bad = [(int(idx[k]), float(t[k]), msg[k]) for k in range(n) if status[k] == "infeasible"]
    return {"counts": cycle_outcomes(status) if n else {}, "infeasible": bad}


def write_metrics(rec, metrics: Sequence[DeputyMetrics]) -> None:
    """Store metrics in the run log under ``/metrics/<deputy>`` (attributes and small datasets)."""
    for m in metrics:
        g = f"metrics/{m.name}"
        rec.write_dataset(f"{g}/final_error_m", np.asarray(m.final_error_m, float), units="m",
                          columns=list(ROE_KEYS), meaning="truth mean ROE minus target at the deadline")
        rec.write_attrs(g, dv_total_mps=m.dv_total_mps, propellant_used_kg=m.propellant_used_kg,
                        n_burns=m.n_burns, n_switches=m.n_switches,
                        final_error_norm_m=m.final_error_norm_m,
                        max_error_after_convergence_m=m.max_error_after_convergence_m,
                        time_to_tolerance_s=m.time_to_tolerance_s,
                        reached_deadline=m.reached_deadline, min_distance_m=m.min_distance_m,
                        min_rn_separation_m=m.min_rn_separation_m,
                        min_distance_any_m=m.min_distance_any_m,
                        min_distance_other=m.min_distance_other,
                        t_min_distance_any_s=m.t_min_distance_any_s,
                        t_min_rn_separation_s=m.t_min_rn_separation_s,
                        keep_out_violated=m.keep_out_violated,
                        rn_separation_violated=m.rn_separation_violated,
                        n_unconverted_samples=m.n_unconverted_samples,
                        deadline_s=m.deadline_s, t_final_s=m.t_final_s,
                        target_met=m.target_met, target_verdict=m.target_verdict,
                        time_in_mode_names=list(m.time_in_mode_s.keys()),
                        time_in_mode_s=np.asarray(list(m.time_in_mode_s.values()), float))

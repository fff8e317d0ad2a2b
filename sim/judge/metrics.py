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


@dataclass
class DeputyMetrics:
    """Per-deputy metrics of one run (units in names).

    ``final_error_m`` is truth mean ROE minus target at the deadline (or at the last sample if
    the run ended earlier, flagged by ``reached_deadline``), a-scaled metres, order da, dlambda,
    dex, dey, dix, diy.
    """

    name: str
    dv_total_mps: float
    propellant_used_kg: float
    n_burns: int
    n_switches: int
    final_error_m: list
    final_error_norm_m: float
    max_error_after_convergence_m: float
    time_to_tolerance_s: float  # nan when never entered
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

    def as_dict(self) -> dict:
        return asdict(self)


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
    # time to enter the tolerance box and stay in it until the end of the record
    ttt = float("nan")
    if inside.size and inside[-1]:
        outside = np.nonzero(~inside)[0]
        k_in = 0 if outside.size == 0 else outside[-1] + 1
        ttt = float(t_s[k_in] - t_s[0])
        max_after = float(np.max(np.linalg.norm(err[k_in:], axis=1)))
    else:
        max_after = float("nan")
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
    )


def format_table(rows: Sequence[Mapping], columns: Sequence[tuple[str, str, str]]) -> str:
    """Plain-text table. ``columns``: (key, header, format spec)."""
    head = [h for _, h, _ in columns]
    body = []
    for r in rows:
        cells = []
        for key, _, fmt in columns:
            v = r.get(key, "")
            try:
                cells.append(format(v, fmt) if fmt else str(v))
            except (TypeError, ValueError):
                cells.append(str(v))
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
    ("dv_total_mps", "dv [m/s]", ".4f"),
    ("n_burns", "burns", "d"),
    ("n_switches", "switches", "d"),
    ("err_dlambda_m", "a dlambda err [m]", ".1f"),
    ("err_de_m", "a de err [m]", ".1f"),
    ("err_di_m", "a di err [m]", ".1f"),
    ("final_error_norm_m", "|err| [m]", ".1f"),
    ("time_to_tolerance_h", "t in box [h]", ".1f"),
    ("min_distance_m", "min dist [m]", ".0f"),
    ("min_rn_separation_m", "min RN sep [m]", ".0f"),
    ("safety", "safety", ""),
)


def table_rows(metrics: Sequence[DeputyMetrics], extra: Mapping | None = None) -> list[dict]:
    """Flatten metrics for :func:`format_table` with :data:`METRIC_COLUMNS`."""
    rows = []
    for m in metrics:
        e = m.final_error_m
        r = dict(m.as_dict())
        r["err_dlambda_m"] = e[1]
        r["err_de_m"] = float(np.hypot(e[2], e[3]))
        r["err_di_m"] = float(np.hypot(e[4], e[5]))
        r["time_to_tolerance_h"] = m.time_to_tolerance_s / 3600.0
        flags = [f"keep-out ({m.min_distance_other})" if m.keep_out_violated else "",
                 "RN separation" if m.rn_separation_violated else ""]
        r["safety"] = ", ".join(f for f in flags if f) or "ok"
        r.update(extra or {})
        rows.append(r)
    return rows


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
                        time_in_mode_names=list(m.time_in_mode_s.keys()),
                        time_in_mode_s=np.asarray(list(m.time_in_mode_s.values()), float))

"""What the single-run report reads from a run log, as plain arrays (:class:`RunData`).

Everything comes from the log alone (README "Run log schema"): the truth samples, the mean ROE,
the scenario's targets, deadlines and thresholds from ``/meta/config_json``, the optional closed-loop
groups (``/guidance``, ``/navigation``, ``/commands``; absent in free-drift runs) and the stored
metrics. Missing optional groups give ``None`` (never an error).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
import numpy as np

from sim.errors import LogFormatError
from sim.log.reader import RunLog, read_log
from sim.models.frames import relative_rtn

__all__ = ["Craft", "RunData", "load_run", "EXECUTED"]

EXECUTED = ("executed", "clipped_max")
"""Command statuses of impulses that were flown (``/commands/impulses/status``)."""


def _arr(log: RunLog, path: str, shape_tail: tuple = ()) -> np.ndarray | None:
    v = log.get(path, None)
    if v is None:
        return None
    return np.asarray(v, float).reshape((-1,) + shape_tail) if shape_tail else np.asarray(v)


def _arr_or(log: RunLog, path: str, shape_tail: tuple = ()) -> np.ndarray:
    """A float dataset, or an empty one of the right shape when the log has none."""
    v = _arr(log, path, shape_tail)
    return np.zeros((0,) + shape_tail) if v is None else np.asarray(v, float).reshape((-1,) + shape_tail)


def _text(log: RunLog, path: str) -> list[str] | None:
    v = log.get(path, None)
    if v is None:
        return None
    if isinstance(v, str):
        return [v]
    return [str(x) for x in v]


@dataclass
class Craft:
    """One spacecraft's logged truth.

    Attributes
    ----------
    name, role : str
    index : int
        Position in the log's spacecraft list (chief 0): its colour.
    t_s : (K,) s since the epoch.
    r_eci_m, v_eci_mps : (K, 3) ECI (TOD) position and velocity.
    mass_kg, density_kgpm3, drag_area_m2 : (K,)
    believed_density_kgpm3 : (K,) or None
    mode_index : (K,) int, into ``mode_names``.
    mean_roe_m : (K, 6) or None
        Deputies only: truth mean ROE relative to the chief, a-scaled m.
    """

    name: str
    role: str
    index: int
    t_s: np.ndarray
    r_eci_m: np.ndarray
    v_eci_mps: np.ndarray
    mass_kg: np.ndarray
    density_kgpm3: np.ndarray
    drag_area_m2: np.ndarray
    believed_density_kgpm3: np.ndarray | None
    mode_index: np.ndarray
    mode_names: list
    mean_roe_m: np.ndarray | None = None


@dataclass
class RunData:
    """A run log reduced to what the report draws (see :func:`load_run`).

    Attributes
    ----------
    path : Path
    label : str
        "candidate", "baseline" or the run name (legend text).
    meta : dict
        ``/meta`` and root attributes.
    config : dict
        ``/meta/config_json``.
    crafts : dict
        Name -> :class:`Craft`, chief first.
    chief : str
    deputies : list of str
    targets : dict
        Deputy -> (6,) target mean ROE (a-scaled m) or None.
    deadlines_s : dict
        Deputy -> deadline, s since epoch (the run duration when none is set).
    tolerance_m : (6,) tolerance box half-widths, a-scaled m.
    keep_out_radius_m, min_rn_separation_m : float
        ``[events]`` thresholds (0 = off).
    maneuvers : dict of arrays
        ``/maneuvers``: ``t_s``, ``name``, ``dv_rtn_mps`` (M, 3), ``mass_before_kg``,
        ``mass_after_kg`` (M = 0 when nothing was flown).
    impulses, switches : dict of arrays or None
        ``/commands/impulses`` and ``/commands/switches`` (None without ``/commands``).
    guidance : dict or None
        ``cycles`` (``t_s``, ``status``) and ``remaining`` (deputy -> (t_s, dv_remaining_mps));
        None without ``/guidance``.
    navigation : dict or None
        ``absolute`` (name -> dict of arrays) and ``relative`` (deputy -> dict); None without
        ``/navigation``.
    metrics : dict
        Deputy -> ``/metrics/<deputy>`` attributes plus ``final_error_m`` (6,).
    events : dict of arrays
    """

    path: Path
    label: str
    meta: dict
    config: dict
    scenario_text: str
    status: str
    reason: str
    crafts: dict
    chief: str
    deputies: list
    targets: dict
    deadlines_s: dict
    tolerance_m: np.ndarray
    keep_out_radius_m: float
    min_rn_separation_m: float
    maneuvers: dict
    impulses: dict | None
    switches: dict | None
    guidance: dict | None
    navigation: dict | None
    metrics: dict
    events: dict
    data_files: dict = field(default_factory=dict)
    truth_attrs: dict = field(default_factory=dict)

    @property
    def name(self) -> str:
        return str(self.meta.get("run_name", self.path.stem))

    @property
    def epoch_utc(self) -> str:
        return str(self.meta.get("epoch_utc", ""))

    @property
    def duration_s(self) -> float:
        return float(self.meta.get("duration_s", self.config.get("duration_s", 0.0)) or 0.0)

    @property
    def t_end_s(self) -> float:
        v = self.meta.get("t_end_s")
        if v is None or v == "":
            ts = [c.t_s[-1] for c in self.crafts.values() if c.t_s.size]
            return float(max(ts)) if ts else 0.0
        return float(v)

    @property
    def law(self) -> str:
        return str(self.meta.get("guidance_law", self.config.get("guidance", {}).get("law", "none")))

    def executed_impulses(self, name: str) -> tuple[np.ndarray, np.ndarray, str]:
        """Executed impulses of a spacecraft: times (s), RTN delta-v (M, 3) m/s, and the source
        (``"/maneuvers"`` when the truth logged any impulse, else the executed rows of
        ``/commands/impulses``)."""
        m = self.maneuvers
        if len(m["t_s"]):
            sel = np.array([n == name for n in m["name"]], bool)
            return m["t_s"][sel], m["dv_rtn_mps"][sel], "/maneuvers"
        c = self.impulses
        if c is not None and len(c["t_exec_s"]):
            sel = np.array([n == name and s in EXECUTED for n, s in zip(c["name"], c["status"])], bool)
            order = np.argsort(c["t_exec_s"][sel], kind="stable")
            return c["t_exec_s"][sel][order], c["dv_exec_rtn_mps"][sel][order], "/commands/impulses"
        return np.zeros(0), np.zeros((0, 3)), "/maneuvers"

    def relative_rtn_m(self, deputy: str) -> tuple[np.ndarray, np.ndarray]:
        """Times (s) and the deputy's position minus the chief's in the chief's RTN axes (K, 3),
        m, over the samples both have."""
        c, d = self.crafts[self.chief], self.crafts[deputy]
        t, ic, id_ = np.intersect1d(c.t_s, d.t_s, assume_unique=True, return_indices=True)
        if t.size == 0:
            return t, np.zeros((0, 3))
        return t, relative_rtn(c.r_eci_m[ic], c.v_eci_mps[ic], d.r_eci_m[id_])


def load_run(source: str | Path | RunLog, label: str = "") -> RunData:
    """Read a run log for the report.

    Parameters
    ----------
    source : path or RunLog
    label : str
        Legend label (default the run name).

    Raises
    ------
    LogFormatError
        Not a covey run log, or one without spacecraft truth.
    """
    log = source if isinstance(source, RunLog) else read_log(source)
    path = Path(log.path)
    try:
        config = json.loads(log.get("meta/config_json", "{}") or "{}")
    except json.JSONDecodeError as exc:
        raise LogFormatError(str(path), "meta/config_json", f"not valid JSON ({exc})") from None
    names = log.spacecraft_names
    if not names:
        raise LogFormatError(str(path), "spacecraft@names", "no spacecraft in the log")
    chief = str(log.attrs("spacecraft").get("chief", names[0]))
    crafts: dict[str, Craft] = {}
    for k, n in enumerate(names):
        base = f"spacecraft/{n}"
        t = _arr(log, f"{base}/truth/t_s")
        if t is None:
            raise LogFormatError(str(path), f"{base}/truth/t_s", "missing (every spacecraft has "
                                 "its truth samples)")
        t = np.asarray(t, float)
        kk = t.size
        a = log.attrs(base)
        modes = [str(m) for m in (log.attrs(f"{base}/truth/mode_index").get("mode_names")
                                  or a.get("mode_names") or [])]
        bel = _arr(log, f"{base}/believed_density_kgpm3")
        if bel is not None and not np.any(np.isfinite(bel)):
            bel = None
        roe = _arr(log, f"{base}/mean_roe_m", (6,))
        if roe is not None and len(roe) != kk:  # rows as truth/t_s (a damaged log: NaN-padded)
            roe = np.vstack([roe[:kk], np.full((max(0, kk - len(roe)), 6), np.nan)])

        def get(p, tail=(), fill=np.nan):
            v = _arr(log, f"{base}/truth/{p}", tail)
            return v if v is not None else np.full((kk,) + tail, fill)

        crafts[n] = Craft(
            name=n, role=str(a.get("role", "chief" if n == chief else "deputy")), index=k, t_s=t,
            r_eci_m=np.asarray(get("r_eci_m", (3,)), float),
            v_eci_mps=np.asarray(get("v_eci_mps", (3,)), float),
            mass_kg=np.asarray(get("mass_kg"), float),
            density_kgpm3=np.asarray(get("density_kgpm3"), float),
            drag_area_m2=np.asarray(get("drag_area_m2"), float),
            believed_density_kgpm3=bel,
            mode_index=np.asarray(get("mode_index", fill=0), int),
            mode_names=modes, mean_roe_m=roe if n != chief else None)
    deputies = [n for n in names if n != chief]
    dep_cfg = {d.get("name"): d for d in config.get("deputies", [])}
    duration = float(log.meta.get("duration_s", config.get("duration_s", 0.0)) or 0.0)
    targets, deadlines = {}, {}
    for d in deputies:
        c = dep_cfg.get(d, {})
        tgt = c.get("target_roe_m")
        targets[d] = None if tgt is None else np.asarray(tgt, float)
        dl = c.get("deadline_s")
        deadlines[d] = duration if dl is None else float(dl)
    tol = np.asarray(config.get("metrics", {}).get("tolerance_m", [10.0] * 6), float).reshape(-1)
    if tol.size == 1:
        tol = np.repeat(tol, 6)
    ev_cfg = config.get("events", {})

    man = {"t_s": _arr_or(log, "maneuvers/t_s"), "name": _text(log, "maneuvers/name") or [],
           "dv_rtn_mps": _arr_or(log, "maneuvers/dv_rtn_mps", (3,)),
           "mass_before_kg": _arr_or(log, "maneuvers/mass_before_kg"),
           "mass_after_kg": _arr_or(log, "maneuvers/mass_after_kg")}
    impulses = None
    if "commands/impulses/t_cmd_s" in log:
        impulses = {k: np.asarray(log.get(f"commands/impulses/{k}"), float)
                    for k in ("cycle_t_s", "t_cmd_s", "t_exec_s", "propellant_used_kg", "mass_before_kg")}
        impulses["dv_cmd_rtn_mps"] = _arr(log, "commands/impulses/dv_cmd_rtn_mps", (3,))
        impulses["dv_exec_rtn_mps"] = _arr(log, "commands/impulses/dv_exec_rtn_mps", (3,))
        impulses["name"] = _text(log, "commands/impulses/name") or []
        impulses["status"] = _text(log, "commands/impulses/status") or []
    switches = None
    if "commands/switches/t_cmd_s" in log:
        switches = {k: np.asarray(log.get(f"commands/switches/{k}"), float)
                    for k in ("cycle_t_s", "t_cmd_s", "t_start_s", "t_end_s", "area_factor")}
        switches["name"] = _text(log, "commands/switches/name") or []
        switches["mode"] = _text(log, "commands/switches/mode") or []
    guidance = None
    if "guidance" in log:
        rem = {}
        for d in log.children("guidance/deputies"):
            t = _arr(log, f"guidance/deputies/{d}/t_s")
            r = _arr(log, f"guidance/deputies/{d}/dv_remaining_mps")
            if t is not None and r is not None:
                rem[d] = (np.asarray(t, float), np.asarray(r, float))
        guidance = {"cycles": {"t_s": np.asarray(_arr(log, "guidance/cycles/t_s")
                                                 if "guidance/cycles/t_s" in log else np.zeros(0), float),
                               "status": _text(log, "guidance/cycles/status") or []},
                    "remaining": rem}
    navigation = None
    if "navigation" in log:
        navigation = {}
        for kind, keys in (("absolute", ("err_r_rtn_m", "sigma_r_rtn_m", "err_v_rtn_mps", "sigma_v_rtn_mps")),
                           ("relative", ("err_dr_rtn_m", "sigma_dr_rtn_m", "err_dv_rtn_mps", "sigma_dv_rtn_mps"))):
            navigation[kind] = {}
            for n in log.children(f"navigation/{kind}"):
                base = f"navigation/{kind}/{n}"
                if f"{base}/t_s" not in log:
                    continue
                g = {"t_s": np.asarray(log.get(f"{base}/t_s"), float),
                     "valid": np.asarray(log.get(f"{base}/valid", np.ones(0)), bool)}
                for k in keys:
                    if f"{base}/{k}" in log:
                        g[k] = _arr(log, f"{base}/{k}", (3,))
                navigation[kind][n] = g
    metrics = {}
    for d in log.children("metrics"):
        m = dict(log.attrs(f"metrics/{d}"))
        fe = log.get(f"metrics/{d}/final_error_m", None)
        m["final_error_m"] = np.asarray(fe, float) if fe is not None else np.full(6, np.nan)
        metrics[d] = m
    events = {"t_s": np.asarray(log.get("events/t_s", np.zeros(0)), float),
              "name": _text(log, "events/name") or [], "kind": _text(log, "events/kind") or [],
              "detail": _text(log, "events/detail") or []}
    files = {k: (_text(log, f"meta/data_files/{k}") if k != "size_bytes"
                 else list(np.asarray(log.get("meta/data_files/size_bytes", np.zeros(0))).tolist()))
             for k in ("path", "size_bytes", "mtime_utc")}
    return RunData(
        path=path, label=label or str(log.meta.get("run_name", path.stem)), meta=dict(log.meta),
        config=config, scenario_text=log.scenario_text or "", status=log.status, reason=log.reason,
        crafts=crafts, chief=chief, deputies=deputies, targets=targets, deadlines_s=deadlines,
        tolerance_m=tol, keep_out_radius_m=float(ev_cfg.get("keep_out_radius_m", 0.0) or 0.0),
        min_rn_separation_m=float(ev_cfg.get("min_rn_separation_m", 0.0) or 0.0),
        maneuvers=man, impulses=impulses, switches=switches, guidance=guidance,
        navigation=navigation, metrics=metrics, events=events,
        data_files={k: (v or []) for k, v in files.items()},
        truth_attrs=dict(log.attrs("spacecraft")))

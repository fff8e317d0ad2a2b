"""``covey export``: a run log's truth ephemerides as CCSDS OEM files, its impulses and its
attitude-mode timeline as CSV.

Written into one folder, ``<run>`` being the run name::

    <run>_<spacecraft>.oem       CCSDS OEM (KVN), one per spacecraft, by Orekit's own writer
    <run>_<spacecraft>.oem.xml   the same as XML (with ``xml=True``)
    <run>_impulses.csv           every commanded impulse and what was executed
    <run>_modes.csv              attitude modes held (truth samples) and commanded switches

The OEM (the only part that needs Java) is written by :mod:`sim.orekit.oem_export`, imported
inside :func:`export_run`. Each OEM has one segment per coast arc (a new segment after every
executed impulse of that spacecraft). UTC time stamps come from Orekit's UTC scale.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from sim.errors import LogFormatError, ScenarioError
from sim.report.rundata import EXECUTED, RunData, load_run
from sim.report.tables import Column, Table

__all__ = ["ExportResult", "export_run", "impulses_table", "modes_table", "IMPULSE_COLUMNS",
           "MODE_COLUMNS"]

UtcFn = Callable[[Sequence[float]], list]
"""t_s (s since the run epoch) -> ISO 8601 UTC strings."""

IMPULSE_COLUMNS = (
    ("spacecraft", "l"), ("epoch_utc", "l"), ("t_s", "r"), ("cycle_t_s", "r"), ("t_cmd_s", "r"),
    ("status", "l"), ("dv_cmd_r_mps", "r"), ("dv_cmd_t_mps", "r"), ("dv_cmd_n_mps", "r"),
    ("dv_exec_r_mps", "r"), ("dv_exec_t_mps", "r"), ("dv_exec_n_mps", "r"), ("dv_exec_mps", "r"),
    ("mass_before_kg", "r"), ("mass_after_kg", "r"), ("propellant_used_kg", "r"), ("source", "l"))
"""Columns of ``<run>_impulses.csv``: epoch_utc and t_s are the execution time (the commanded time
for an impulse not executed); RTN is the spacecraft's own radial, transverse, normal frame; source
says where the executed values come from (``/maneuvers``: the truth's record of the impulse;
``/commands/impulses``: the command log, without a truth record)."""

MODE_COLUMNS = (
    ("spacecraft", "l"), ("kind", "l"), ("mode", "l"), ("start_utc", "l"), ("end_utc", "l"),
    ("t_start_s", "r"), ("t_end_s", "r"), ("duration_s", "r"), ("t_cmd_s", "r"),
    ("cycle_t_s", "r"), ("area_factor", "r"))
"""Columns of ``<run>_modes.csv``: kind ``held`` rows are the intervals of constant mode in the
truth samples (an interval ends at the first sample of the next mode, the last at the last sample);
kind ``commanded`` rows are the commanded switches, from slew start to slew end."""


def _table(name: str, cols) -> Table:
    return Table(name, name, [Column(k, k, "", a) for k, a in cols])


def impulses_table(run: RunData, utc: UtcFn) -> Table:
    """Every commanded impulse (and every truth impulse without a command) of a run.

    Parameters
    ----------
    run : RunData
    utc : callable
        t_s (s since the epoch) -> ISO 8601 UTC strings.
    """
    t = _table(f"{run.name}_impulses", IMPULSE_COLUMNS)
    man = run.maneuvers
    used = np.zeros(len(man["t_s"]), bool)
    rows = []
    cmd = run.impulses
    if cmd is not None:
        for i in range(len(cmd["t_cmd_s"])):
            name, status = cmd["name"][i], cmd["status"][i]
            dvc = cmd["dv_cmd_rtn_mps"][i]
            dve = cmd["dv_exec_rtn_mps"][i]
            t_exec = float(cmd["t_exec_s"][i])
            mb = float(cmd["mass_before_kg"][i])
            prop = float(cmd["propellant_used_kg"][i])
            ma = mb - prop
            src = "/commands/impulses"
            if status in EXECUTED:
                hit = [j for j in range(len(man["t_s"])) if not used[j] and man["name"][j] == name
                       and abs(man["t_s"][j] - t_exec) <= 1e-6]
                if hit:
                    j = hit[0]
                    used[j] = True
                    dve = man["dv_rtn_mps"][j]
                    mb, ma = float(man["mass_before_kg"][j]), float(man["mass_after_kg"][j])
                    src = "/maneuvers"
            t_when = t_exec if np.isfinite(t_exec) else float(cmd["t_cmd_s"][i])
            rows.append([name, t_when, t_when, float(cmd["cycle_t_s"][i]), float(cmd["t_cmd_s"][i]),
                         status, *map(float, dvc), *map(float, dve), float(np.linalg.norm(dve)),
                         mb, ma, prop, src])
    for j in np.flatnonzero(~used):
        dve = man["dv_rtn_mps"][j]
        tt = float(man["t_s"][j])
        mb, ma = float(man["mass_before_kg"][j]), float(man["mass_after_kg"][j])
        rows.append([man["name"][j], tt, tt, float("nan"), float("nan"), "executed",
                     float("nan"), float("nan"), float("nan"), *map(float, dve),
                     float(np.linalg.norm(dve)), mb, ma, mb - ma, "/maneuvers"])
    rows.sort(key=lambda r: (r[1], r[0]))
    stamps = utc([r[1] for r in rows]) if rows else []
    for r, s in zip(rows, stamps):
        r[1] = s
        t.add(*r)
    return t


def _held_intervals(t: np.ndarray, mi: np.ndarray) -> list[tuple[float, float, int]]:
    if t.size == 0:
        return []
    ch = np.flatnonzero(np.diff(mi)) + 1
    starts = np.r_[0, ch]
    ends = np.r_[ch, t.size - 1]
    return [(float(t[s]), float(t[e]), int(mi[s])) for s, e in zip(starts, ends)]


def modes_table(run: RunData, utc: UtcFn) -> Table:
    """Attitude-mode timeline of a run: held intervals (truth) and commanded switches."""
    t = _table(f"{run.name}_modes", MODE_COLUMNS)
    rows = []
    for n, cr in run.crafts.items():
        for a, b, m in _held_intervals(cr.t_s, cr.mode_index):
            mode = cr.mode_names[m] if m < len(cr.mode_names) else str(m)
            rows.append([n, "held", mode, a, b, a, b, b - a, float("nan"), float("nan"), float("nan")])
    sw = run.switches
    if sw is not None:
        for i in range(len(sw["t_cmd_s"])):
            a, b = float(sw["t_start_s"][i]), float(sw["t_end_s"][i])
            rows.append([sw["name"][i], "commanded", sw["mode"][i], a, b, a, b, b - a,
                         float(sw["t_cmd_s"][i]), float(sw["cycle_t_s"][i]), float(sw["area_factor"][i])])
    order = {n: k for k, n in enumerate(run.crafts)}
    rows.sort(key=lambda r: (order.get(r[0], 99), r[5], r[1] != "held"))
    times = [r[3] for r in rows] + [r[4] for r in rows]
    stamps = utc(times) if rows else []
    for k, r in enumerate(rows):
        r[3], r[4] = stamps[k], stamps[len(rows) + k]
        t.add(*r)
    return t


@dataclass
class ExportResult:
    """Files written by :func:`export_run` (spacecraft -> OEM path, and the two CSVs)."""

    out_dir: Path
    oem: dict = field(default_factory=dict)
    oem_xml: dict = field(default_factory=dict)
    impulses_csv: Path | None = None
    modes_csv: Path | None = None
    frame: str = "TOD"


def export_run(log_path: str | Path, out_dir: str | Path, *, frame: str = "TOD", xml: bool = False,
               spacecraft: Sequence[str] | None = None, data_path: str | None = None,
               creation_utc: str | None = None) -> ExportResult:
    """Write the OEM files, the impulses CSV and the mode timeline CSV of a run log.

    Parameters
    ----------
    log_path : path
        A covey run log.
    out_dir : path
        Folder (created).
    frame : {"TOD", "GCRF", "EME2000"}
        OEM reference frame (TOD: covey's ECI as logged; the others transformed by Orekit).
    xml : bool
        Also write each OEM as XML.
    spacecraft : sequence of str, optional
        Spacecraft to write OEMs for (default all).
    data_path : str, optional
        Orekit data (default: the bundled data, or COVEY_OREKIT_DATA).
    creation_utc : str, optional
        The OEM ``CREATION_DATE`` (default now).

    Raises
    ------
    ScenarioError
        Unknown spacecraft or frame.
    LogFormatError
        The log cannot be read.
    EnvironmentSetupError
        No Java or Orekit data.
    """
    from sim import __version__
    from sim.orekit import oem_export
    from sim.report.oem_check import check_oem

    if frame not in oem_export.FRAMES:
        raise ScenarioError("--frame", frame, f"one of {', '.join(oem_export.FRAMES)}")
    run = load_run(log_path)
    names = list(spacecraft) if spacecraft else list(run.crafts)
    unknown = [n for n in names if n not in run.crafts]
    if unknown:
        raise ScenarioError("--spacecraft", unknown, f"spacecraft of the log: {', '.join(run.crafts)}")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    res = ExportResult(out, frame=frame)
    comments = [f"covey {__version__} run {run.name} ({run.path.name}), git {run.meta.get('git_commit', '')}",
                f"truth ephemeris of the run log; run epoch {run.epoch_utc}; status {run.status}",
                "analysis aid, not flight certification"]
    for n in names:
        cr = run.crafts[n]
        t_imp, _, _ = run.executed_impulses(n)
        for is_xml in ((False, True) if xml else (False,)):
            p = out / (f"{run.name}_{n}.oem" + (".xml" if is_xml else ""))
            oem_export.write_oem(p, n, run.epoch_utc, cr.t_s, cr.r_eci_m, cr.v_eci_mps, frame=frame,
                                 xml=is_xml, split_times_s=t_imp, comments=comments,
                                 data_path=data_path, creation_utc=creation_utc)
            problems = check_oem(p.read_text(encoding="utf-8"))
            if problems:
                raise LogFormatError(str(p), "OEM", "the written OEM fails the CCSDS 502.0-B "
                                     "keyword check: " + "; ".join(problems[:3]))
            (res.oem_xml if is_xml else res.oem)[n] = p

    def utc(ts):
        return oem_export.utc_iso(run.epoch_utc, ts, data_path=data_path)

    res.impulses_csv = out / f"{run.name}_impulses.csv"
    res.impulses_csv.write_text(impulses_table(run, utc).to_csv(), encoding="utf-8")
    res.modes_csv = out / f"{run.name}_modes.csv"
    res.modes_csv.write_text(modes_table(run, utc).to_csv(), encoding="utf-8")
    return res

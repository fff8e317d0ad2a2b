"""Fly a planned campaign into a folder, resumably (:func:`run_campaign`), and rebuild its summary
from the run logs (:func:`collect_rows`, :func:`write_campaign_summary`).

The campaign folder::

    <folder>/campaign.toml         the campaign file verbatim (a changed file is refused)
    <folder>/base_scenario.toml    the base scenario text the runs were made from
    <folder>/runs/<name>_<k>.h5    one ordinary covey run log per run (written by the workers)
    <folder>/summary.h5            the campaign summary (written by this process only)
    <folder>/.lock                 held (flock) while a campaign process works in the folder

A run is complete when its log opens as a covey run log with status ``ok``, ``stopped`` or
``failed`` (a run ended by an interrupt does not count). The same command again flies only the
runs without a complete log, after removing the ``*.part`` leftovers of killed runs; the summary is
rebuilt from the logs every time. Nothing is ever written under a final name before it is
complete (run logs and the summary are written under temporary names and renamed).
"""

from __future__ import annotations

import difflib
import functools
import json
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import h5py
import numpy as np

from sim.campaign.plan import Plan
from sim.campaign.summary import SUMMARY_NAME, RunRow, scalar_metric_names, write_summary
from sim.errors import EnvironmentSetupError
from sim.log.recorder import SCHEMA_NAME as LOG_SCHEMA
from sim.log.recorder import SCHEMA_VERSION as LOG_VERSION

__all__ = ["CampaignResult", "run_campaign", "log_state", "collect_rows",
           "write_campaign_summary", "CAMPAIGN_FILE", "BASE_FILE"]

CAMPAIGN_FILE = "campaign.toml"
BASE_FILE = "base_scenario.toml"
_LOCK = ".lock"
_INTERRUPTED = ("KeyboardInterrupt", "SystemExit")


@dataclass
class CampaignResult:
    """What :func:`run_campaign` did.

    Attributes
    ----------
    folder, summary : Path
    n_runs : int
        Runs in the campaign.
    flown : int
        Runs flown by this call.
    skipped : int
        Runs whose complete log was there already.
    counts : dict
        Status (``ok``, ``stopped``, ``failed``, ``missing``) -> runs, over the whole campaign.
    failed : list of (index, reason, log)
        The failed runs of the whole campaign.
    worker_runs : list of dict
        One entry per run flown by this call: ``index``, ``pid``, ``wall_s``, ``rss_kb``.
    replaced_workers : int
    wall_s : float
    executor : str
    """

    folder: Path
    summary: Path
    n_runs: int
    flown: int
    skipped: int
    counts: dict
    failed: list
    worker_runs: list = field(default_factory=list)
    replaced_workers: int = 0
    wall_s: float = 0.0
    executor: str = ""

    @property
    def exit_code(self) -> int:
        """0 when every run is ok or stopped, else 1."""
        return 0 if self.counts.get("failed", 0) == 0 and self.counts.get("missing", 0) == 0 else 1


# ------------------------------------------------------------------------------------------
# Run logs
# ------------------------------------------------------------------------------------------


def _txt(v) -> str:
    if isinstance(v, bytes):
        return v.decode("utf-8", "replace")
    if isinstance(v, np.generic):
        return str(v.item())
    return str(v)


def log_state(path: Path) -> tuple[str, str] | None:
    """``(status, reason)`` of a complete run log, or None (missing, not a covey run log of a
    readable schema version, damaged, still ``running``, or ended by an interrupt).

    Reads the root attributes only (with the checks of :func:`sim.log.reader.read_log`)."""
    if not path.is_file():
        return None
    try:
        with h5py.File(path, "r") as f:
            if _txt(f.attrs.get("schema", "")) != LOG_SCHEMA:
                return None
            if _txt(f.attrs.get("schema_version", "")).split(".")[0] != LOG_VERSION.split(".")[0]:
                return None
            status, reason = _txt(f.attrs.get("status", "")), _txt(f.attrs.get("reason", ""))
    except (OSError, KeyError, ValueError, RuntimeError):
        return None
    if status not in ("ok", "stopped", "failed"):
        return None
    if status == "failed" and reason.startswith(_INTERRUPTED):
        return None
    return status, reason


def _log_metrics(path: Path) -> dict:
    """Deputy -> the metrics a run log holds under ``/metrics/<deputy>`` (scalars and
    ``final_error_m``)."""
    out: dict = {}
    names = scalar_metric_names()
    try:
        with h5py.File(path, "r") as f:
            if "metrics" not in f:
                return {}
            for dep, g in f["metrics"].items():
                a = g.attrs
                m = {n: float(np.asarray(a[n]).item()) if n in a else float("nan") for n in names}
                m["final_error_m"] = (np.asarray(g["final_error_m"][()], float).tolist()
                                      if "final_error_m" in g else [float("nan")] * 6)
                out[dep] = m
    except (OSError, KeyError, ValueError, RuntimeError):
        return {}
    return out


def _param(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return float("nan")


def collect_rows(plan: Plan, folder: Path, session: dict | None = None) -> list[RunRow]:
    """One :class:`RunRow` per planned run, from its log (status, reason, metrics); a run without a
    complete log is ``failed`` with this call's reason when it failed here (a worker that died),
    else ``missing``."""
    session = session or {}
    rows = []
    for j in plan.jobs:
        p = folder / j.log
        st = log_state(p)
        if st is not None:
            status, reason = st
            metrics = _log_metrics(p)
            log = j.log
        else:
            status, reason = session.get(j.index, ("missing", "no complete run log"))
            metrics, log = {}, ""
        rows.append(RunRow(index=j.index, seed=j.seed, status=status, reason=reason, log=log,
                           case=j.case, grid_index=j.grid_index, draw_index=j.draw_index,
                           params={k: _param(v) for k, v in j.params}, metrics=metrics))
    return rows


def summary_attrs(plan: Plan) -> dict:
    """The root attributes a campaign summary carries besides the standard ones (JSON text for the
    structured ones): what ``covey summary`` needs to group and judge the runs."""
    c = plan.campaign
    return dict(
        runs_per_case=int(c.runs),
        base_scenario=c.base_label,
        cases_json=json.dumps(list(plan.cases)),
        sources_json=json.dumps(list(plan.sources)),
        skipped_sources_json=json.dumps(plan.skipped),
        sweep_keys_json=json.dumps([s.key for s in c.sweeps]),
        grid_json=json.dumps([list(p) for p in plan.grid]),
        dispersion_keys_json=json.dumps([d.key for d in c.dispersions]),
        tolerance_m=np.asarray(plan.tolerance_m, float),
        dv_max_mps=float(c.summary.dv_max_mps) if c.summary.dv_max_mps else float("nan"),
        confidence=float(c.summary.confidence),
        interval=c.summary.interval,
    )


def write_campaign_summary(plan: Plan, folder: Path, rows: list[RunRow]) -> Path:
    """``<folder>/summary.h5`` from ``rows`` (written under a temporary name, then renamed)."""
    c = plan.campaign
    return write_summary(folder / SUMMARY_NAME, rows, name=c.name, kind=c.kind,
                         master_seed=c.master_seed, campaign_toml=c.text,
                         extra_attrs=summary_attrs(plan))


# ------------------------------------------------------------------------------------------
# The folder
# ------------------------------------------------------------------------------------------


class _FolderLock:
    """An exclusive ``flock`` on ``<folder>/.lock`` (released by the kernel when the process dies,
    even by SIGKILL)."""

    def __init__(self, folder: Path):
        self.path = folder / _LOCK
        self.fd = None

    def __enter__(self):
        try:
            import fcntl
        except ImportError:  # pragma: no cover - not POSIX
            return self
        self.fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(self.fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(self.fd)
            self.fd = None
            raise EnvironmentSetupError(f"the campaign folder {str(self.path.parent)!r} is in use by "
                                        "another covey campaign process",
                                        "wait for it to finish, or give another folder with -o")
        return self

    def __exit__(self, *exc):
        if self.fd is not None:
            os.close(self.fd)
            self.fd = None


def _changes(old: str, new: str, label: str) -> str:
    diff = [ln for ln in difflib.unified_diff(old.splitlines(), new.splitlines(), lineterm="", n=0)
            if ln[:1] in "+-" and not ln.startswith(("+++", "---"))]
    shown = "; ".join(diff[:6]) + (f"; ... ({len(diff) - 6} more)" if len(diff) > 6 else "")
    return f"{label} changed: {shown or 'whitespace only'}"


def _write_text(path: Path, text: str) -> None:
    tmp = path.with_name(path.name + ".part")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


def _run_files(runs: Path):
    """The campaign's own files in ``runs/`` (run logs and their leftovers)."""
    if not runs.is_dir():
        return []
    return [p for p in runs.iterdir() if p.is_file() and (p.name.endswith(".part") or p.suffix == ".h5")]


def _prepare(folder: Path, plan: Plan, fresh: bool) -> list[str]:
    """Check the folder against the campaign (or start over with ``fresh``), store the campaign
    and base texts, remove leftovers of killed runs. Returns notes for the user."""
    c = plan.campaign
    notes = []
    stored_c, stored_b = folder / CAMPAIGN_FILE, folder / BASE_FILE
    runs = folder / "runs"
    if fresh:
        removed = 0
        for p in _run_files(runs):
            p.unlink()
            removed += 1
        for p in (folder / SUMMARY_NAME, stored_c, stored_b):
            if p.exists():
                p.unlink()
        if removed:
            notes.append(f"--fresh: removed {removed} run file(s) of the earlier campaign")
    elif stored_c.is_file():
        old_c = stored_c.read_text(encoding="utf-8")
        old_b = stored_b.read_text(encoding="utf-8") if stored_b.is_file() else ""
        what = []
        if old_c != c.text:
            what.append(_changes(old_c, c.text, f"the campaign file ({CAMPAIGN_FILE} in the folder "
                                                "vs the file given)"))
        if old_b != c.base_text:
            what.append(_changes(old_b, c.base_text, f"the base scenario ({c.base_label})"))
        if what:
            raise EnvironmentSetupError(
                f"the campaign folder {str(folder)!r} was made by a different campaign: "
                + " | ".join(what),
                "run the original campaign file again to resume, add --fresh to start over "
                "(removes its runs), or give another folder with -o")
    elif _run_files(runs):
        raise EnvironmentSetupError(f"{str(runs)!r} holds run logs but the folder has no "
                                    f"{CAMPAIGN_FILE}: not a covey campaign folder",
                                    "give another folder with -o, or --fresh to remove them")
    folder.mkdir(parents=True, exist_ok=True)
    runs.mkdir(exist_ok=True)
    _write_text(stored_c, c.text)
    _write_text(stored_b, c.base_text)
    # leftovers of killed runs and of a killed summary write
    names = {Path(j.log).name for j in plan.jobs}
    n_left = 0
    for p in runs.iterdir():
        if p.name.endswith(".part") and any(p.name.startswith(n) for n in names):
            p.unlink()
            n_left += 1
    for p in folder.glob(SUMMARY_NAME + "*.part"):
        p.unlink()
    if n_left:
        notes.append(f"removed {n_left} partial run log(s) left by an interrupted campaign")
    return notes


# ------------------------------------------------------------------------------------------
# Flying
# ------------------------------------------------------------------------------------------


ProgressFn = Callable[[dict], None]


def run_campaign(plan: Plan, folder, *, workers: int | None = None, scheduler: str | None = None,
                 fresh: bool = False, truth_threads: int = 1, orekit_data: str | None = None,
                 progress: ProgressFn | None = None, fly: Callable | None = None,
                 executor=None, jvm_options=None) -> CampaignResult:
    """Fly every run of ``plan`` that has no complete log in ``folder``; write the summary.

    Parameters
    ----------
    plan : Plan
        From :func:`sim.campaign.plan.plan_campaign`.
    folder : path-like
        The campaign folder (created if needed).
    workers : int, optional
        Local worker processes (default: the CPU count; 0: in this process), or the number of
        LocalCluster workers with ``scheduler = "local"``.
    scheduler : str, optional
        ``"local"`` or a Dask scheduler address: fly on Dask ``distributed``.
    fresh : bool
        Remove the runs of an earlier campaign in ``folder`` and start over.
    truth_threads : int
        Truth threads per run (default 1: one core per worker).
    orekit_data : str, optional
        Orekit data folder or zip for every run.
    progress : callable, optional
        Called with a dict (``total``, ``done``, ``failed``, ``running``, ``skipped``,
        ``eta_s``, ``last``) after every finished run and about once a second.
    fly : callable, optional
        The worker function (default :func:`sim.campaign.worker.fly_job`); it must be importable
        by the workers.
    executor : optional
        An executor object to use instead of making one (see :mod:`sim.campaign.executors`).
    jvm_options : str or sequence of str, optional
        Options of the workers' JVMs; default ``COVEY_JVM_OPTIONS`` when set, else
        :data:`sim.campaign.worker.WORKER_JVM_OPTIONS`; ``""``: the JVM's own defaults. A worker
        whose JVM runs already (``--workers 0``, a reused Dask worker) keeps its options.

    Returns
    -------
    CampaignResult

    Raises
    ------
    EnvironmentSetupError
        The folder holds a different campaign (without ``fresh``), or is in use; JVM options
        that cannot be split into options.
    """
    from sim.campaign.executors import make_executor
    from sim.campaign.worker import WORKER_JVM_OPTIONS, Task, fly_job
    from sim.orekit.boot import JVM_OPTIONS_ENV, check_jvm_options, jvm_options_from

    if jvm_options is None and not os.environ.get(JVM_OPTIONS_ENV):
        jvm_options = WORKER_JVM_OPTIONS
    jvm = tuple(jvm_options_from(jvm_options))
    if jvm != WORKER_JVM_OPTIONS:
        check_jvm_options(jvm)  # refused here, not by every worker one run after the other

    fly = fly or fly_job
    folder = Path(folder).resolve()
    folder.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    with _FolderLock(folder):
        notes = _prepare(folder, plan, fresh)
        todo = [j for j in plan.jobs if log_state(folder / j.log) is None]
        skipped = len(plan.jobs) - len(todo)
        session: dict = {}
        worker_runs: list = []
        state = dict(total=len(plan.jobs), done=skipped, failed=0, running=0, skipped=skipped,
                     eta_s=None, last=None, notes=notes, executor="")
        ex = None
        if todo:
            ex = executor if executor is not None else make_executor(workers, scheduler)
            state["executor"] = ex.describe()
        try:
            if progress:
                progress(dict(state))
            if todo:
                make_task = functools.partial(Task, folder=str(folder), base_text=plan.campaign.base_text,
                                              base_path=plan.campaign.base_path,
                                              orekit_data=orekit_data, truth_threads=truth_threads,
                                              jvm_options=jvm)
                _drive(ex, fly, todo, folder, session, worker_runs, state, progress, make_task)
        except BaseException:
            if ex is not None:
                ex.close(cancel=True)
                ex = None
            write_campaign_summary(plan, folder, collect_rows(plan, folder, session))
            raise
        finally:
            if ex is not None:
                ex.close()
        rows = collect_rows(plan, folder, session)
        summary = write_campaign_summary(plan, folder, rows)
    counts: dict = {}
    for r in rows:
        counts[r.status] = counts.get(r.status, 0) + 1
    failed = [(r.index, r.reason, r.log) for r in rows if r.status in ("failed", "missing")]
    return CampaignResult(folder=folder, summary=summary, n_runs=len(rows), flown=len(todo),
                          skipped=skipped, counts=counts, failed=failed, worker_runs=worker_runs,
                          replaced_workers=getattr(ex, "replaced", 0) if ex else 0,
                          wall_s=time.perf_counter() - t0, executor=state["executor"])


def _drive(ex, fly, todo, folder, session, worker_runs, state, progress, make_task) -> None:
    pending = list(todo)
    inflight: dict = {}
    started = time.perf_counter()
    n_done_here = 0
    last_tick = 0.0
    while pending or inflight:
        while pending and len(inflight) < ex.capacity:
            job = pending.pop(0)
            task = make_task(job=job)
            inflight[ex.submit(fly, task)] = job
        state["running"] = len(inflight)
        done = ex.wait(list(inflight), timeout=1.0)
        for f in done:
            job = inflight.pop(f)
            res, why = ex.outcome(f)
            n_done_here += 1
            state["done"] += 1
            if res is None:  # the worker died, or the task could not run
                for p in (folder / "runs").glob(Path(job.log).name + "*.part"):
                    try:
                        p.unlink()
                    except OSError:
                        pass
                session[job.index] = ("failed", why)
                state["failed"] += 1
                state["last"] = dict(index=job.index, status="failed", reason=why, log="")
            else:
                worker_runs.append(dict(index=job.index, pid=res.get("pid"),
                                        wall_s=res.get("wall_s"), rss_kb=res.get("rss_kb")))
                if res.get("status") == "failed":
                    state["failed"] += 1
                    if not res.get("log"):
                        session[job.index] = ("failed", res.get("reason", ""))
                state["last"] = dict(index=job.index, status=res.get("status"),
                                     reason=res.get("reason", ""), log=res.get("log", ""))
        state["running"] = len(inflight)
        left = len(pending) + len(inflight)
        elapsed = time.perf_counter() - started
        state["eta_s"] = elapsed / n_done_here * left if n_done_here else None
        now = time.perf_counter()
        if progress and (done or now - last_tick >= 1.0):
            last_tick = now
            progress(dict(state))
    state["running"] = 0
    state["eta_s"] = 0.0
    if progress:
        progress(dict(state, final=True))

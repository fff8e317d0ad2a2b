"""Fly one scenario: boot Orekit, build the truth world, loop over guidance cycles, log to HDF5.

:func:`run_scenario` is the entry point (``covey run`` calls it). The loop lives in
:class:`Engine`: every guidance cycle of ``cfg.guidance.cycle_s`` it calls :meth:`Engine.plan`
(free drift for now: nothing to do), advances the truth to the end of the cycle and records what
the truth world produced during the interval (:meth:`Engine.record_interval`). Navigation,
guidance and actuators slot into :meth:`Engine.plan` and add their own log groups with
``self.rec.append(...)``; the engine's appends are buffered in memory and written in batches
(:class:`BufferedLog`, at least once per simulated day and every 30 s of wall time, and at the
end or on failure).

Any exception ends the run with ``status = "failed"``: the reason and traceback are stored in the
log, the data recorded so far are kept, and the file is renamed to its final name as usual.
"""

from __future__ import annotations

import contextlib
import dataclasses
import gc
import json
import platform
import subprocess
import time
import traceback as _traceback
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from types import SimpleNamespace
from typing import Any, Callable

import h5py
import numpy as np

from guidance.interface import ROE_NAMES, GuidanceInputError

from sim import __version__
from sim.scenario.config import RunConfig
from sim.errors import CoveyError, EnvironmentSetupError, PropagationError
from sim.judge.metrics import run_metrics, write_metrics
from sim.log.recorder import RunRecorder
from sim.scenario.reader import resolve_orekit_data

__all__ = ["RunSummary", "Engine", "BufferedLog", "run_scenario", "git_commit", "MEAN_OE_NAMES"]

MEAN_OE_NAMES = ("a_m", "ex", "ey", "i_deg", "raan_deg", "u_deg")
"""Datasets of ``/spacecraft/<name>/mean_oe`` (Eckstein-Hechler mean elements, TOD)."""

ProgressFn = Callable[[float, float], None]


FREEZE_HEAP = True
"""Freeze the Python heap during a run's loop (:func:`frozen_heap`). False leaves the garbage
collector as it is."""


@contextlib.contextmanager
def frozen_heap():
    """Collect once, then move every object alive to the garbage collector's permanent generation
    (``gc.freeze``) for the duration of the block, and back afterwards (``gc.unfreeze``; left as it
    is when the caller had frozen objects already).

    Why: JPype runs a full Python collection after each Java garbage collection, on a Java
    thread and holding the GIL, and the truth's propagation makes the JVM collect several times
    a second. A full collection walks every tracked object (about 35 000 after boot and 85 000
    once a run has imported what it uses: functions, dicts, JPype's class wrappers), 30-60 ms
    each; 84 of them took 4.8 s of a 3-day closed loop of the demo formation (17.7 s), stalling
    guidance and the propagation threads' hand-overs.
    Frozen objects are skipped (they are still freed by reference counting); only the cyclic
    garbage made inside the block is collected. Measured in DEVELOPERS.md (closed-loop cost).
    """
    if not FREEZE_HEAP:
        yield
        return
    already = gc.get_freeze_count() > 0
    gc.collect()
    gc.freeze()
    try:
        yield
    finally:
        if not already:
            gc.unfreeze()


def git_commit() -> str:
    """The git commit of the covey source tree (``+dirty`` when tracked files changed), or
    ``"unknown"`` outside a git checkout."""
    root = Path(__file__).resolve().parent.parent
    try:
        out = subprocess.run(["git", "rev-parse", "HEAD"], cwd=root, capture_output=True,
                             text=True, timeout=10)
        if out.returncode != 0:
            return "unknown"
        commit = out.stdout.strip()
        st = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no"], cwd=root,
                            capture_output=True, text=True, timeout=10)
        return commit + ("+dirty" if st.returncode == 0 and st.stdout.strip() else "")
    except (OSError, subprocess.SubprocessError):
        return "unknown"


def _truth_api() -> SimpleNamespace:
    """The Orekit-side functions a run needs, imported late (validation never loads them).
    Tests replace this function to fly a fake truth world."""
    from sim.orekit import meanroe
    from sim.orekit import boot as orekit_boot
    from sim.truth import world as truth

    return SimpleNamespace(boot=orekit_boot.boot, TruthWorld=truth.TruthWorld,
                           mean_elements=meanroe.mean_elements, mean_roe_m=meanroe.mean_roe_m)


@dataclass
class RunSummary:
    """What :func:`run_scenario` returns.

    Attributes
    ----------
    path : Path
        The run log.
    status : str
        ``"ok"`` (ran to the end), ``"stopped"`` (an event ended it cleanly, see ``reason``) or
        ``"failed"`` (an exception, see ``reason`` and ``error``; traceback in the log).
    t_end_s : float
        Time reached, s since epoch.
    final_mean_roe_m : dict
        Deputy name -> last logged mean ROE (6,), a-scaled m.
    final_error_m : dict
        Deputy name -> last logged mean ROE minus ``target_roe_m`` (6,), m, for deputies with a
        target.
    dv_total_mps : dict
        Spacecraft name -> sum of executed impulse magnitudes, m/s.
    """

    path: Path
    status: str
    reason: str
    name: str
    t_end_s: float
    duration_s: float
    wall_time_s: float
    n_samples: int
    spacecraft: tuple[str, ...]
    final_mean_roe_m: dict[str, np.ndarray] = field(default_factory=dict)
    dv_total_mps: dict[str, float] = field(default_factory=dict)
    final_error_m: dict[str, np.ndarray] = field(default_factory=dict)
    metrics: list = field(default_factory=list)
    error: BaseException | None = field(default=None, repr=False)

    @property
    def exit_code(self) -> int:
        """0 for ok or stopped; for a failed run the error's exit code (CoveyError), 2 for a
        GuidanceInputError (bad law name or settings), else 1."""
        if self.status != "failed":
            return 0
        if isinstance(self.error, GuidanceInputError):
            return 2
        return getattr(self.error, "exit_code", 1) if isinstance(self.error, CoveyError) else 1

    def line(self) -> str:
        """One line for the terminal."""
        days = self.t_end_s / 86400.0
        txt = (f"{self.status}: {self.name}, {days:.3g} of {self.duration_s / 86400.0:.3g} days, "
               f"{len(self.spacecraft)} spacecraft, {self.n_samples} samples, "
               f"wall {self.wall_time_s:.1f} s")
        dv = sum(self.dv_total_mps.values())
        if dv:
            txt += f", dv {dv * 1000:.1f} mm/s"
        if self.final_error_m:
            worst = max(self.final_error_m.items(),
                        key=lambda kv: float(np.nan_to_num(np.linalg.norm(kv[1]), nan=-1)))
            txt += (f", largest final |mean ROE - target| {np.linalg.norm(worst[1]):.1f} m "
                    f"({worst[0]})")
        elif self.final_mean_roe_m:
            worst = max(self.final_mean_roe_m.items(),
                        key=lambda kv: float(np.nan_to_num(np.linalg.norm(kv[1]), nan=-1)))
            txt += f", largest final |mean ROE| {np.linalg.norm(worst[1]):.1f} m ({worst[0]})"
        if self.reason:
            txt += f" ({self.reason})"
        return txt + f" -> {self.path}"

LOG_THREAD = True
"""Compress and write the engine's buffered log rows on one writer thread (h5py releases the
GIL while it does), overlapped with the loop; the file is the same either way."""

LOG_WRITE_SIM_S = 86400.0
"""The engine's log buffer is written to the HDF5 file after at most this much simulated time, s."""

LOG_WRITE_WALL_S = 30.0
"""... or after at most this much wall-clock time, s (whichever comes first)."""


class BufferedLog:
    """A :class:`sim.log.recorder.RunRecorder` whose :meth:`append` calls are kept in memory and
    written group by group in one append each (:meth:`write`).

    One h5py append costs about 0.3-1 ms whatever its size (resize, selection, chunk
    read-modify-write of a compressed chunk); a closed-loop cycle makes about a hundred small
    ones. Buffered, the rows of many cycles go to each dataset in one call (written on the
    engine's log-writer thread, :meth:`write_async`, when it has one). The file's content is
    the same as with direct appends: the same datasets, rows, dtypes (a dataset's dtype is that of
    its first rows, as with the recorder), units and attributes. Everything else (``file``,
    ``write_dataset``, ``write_attrs``, ``flush``, ``close``, ...) writes the pending rows first and
    then goes to the recorder, so a reader of ``file`` always sees every row appended so far.
    """

    def __init__(self, rec: RunRecorder):
        self.rec = rec
        self._pending: dict[str, list[tuple[Any, Any, dict[str, np.ndarray]]]] = {}
        self.n_pending = 0
        self._inflight = None

    def append(self, group_path: str, units=None, attrs=None, **arrays: Any) -> None:
        """Queue rows for :meth:`RunRecorder.append` (same arguments; checked here: the same row
        count in every array of a call, the same row shape as earlier queued rows)."""
        if not arrays:
            raise ValueError("append needs at least one array")
        data = {}
        for k, v in arrays.items():
            a = np.asarray(v)
            if a.dtype.kind in ("U", "S", "O"):
                a = np.asarray([str(x) for x in a.ravel()], dtype=object).reshape(a.shape)
            data[k] = a.reshape(1) if a.ndim == 0 else a
        rows = {a.shape[0] for a in data.values()}
        if len(rows) != 1:
            raise ValueError(f"append to {group_path!r}: arrays have different row counts "
                             + str({k: a.shape[0] for k, a in data.items()}))
        queue = self._pending.setdefault(group_path, [])
        if queue and set(queue[0][2]) == set(data):
            first = queue[0][2]
            for k, a in data.items():
                if a.shape[1:] != first[k].shape[1:]:
                    raise ValueError(f"append to {group_path}/{k}: row shape {a.shape[1:]} does not "
                                     f"match the dataset's {first[k].shape[1:]}")
        queue.append((units, attrs, data))
        self.n_pending += 1

    def write(self) -> None:
        """Append every queued row to the file (one append per group and run of equal keys),
        after any :meth:`write_async` still running."""
        self.wait()
        pending, self._pending, self.n_pending = self._pending, {}, 0
        self._write(pending)

    def write_async(self, executor) -> None:
        """Hand the queued rows to ``executor`` (one worker thread) to be appended and flushed
        there, while the caller goes on queueing; h5py releases the GIL while it compresses and
        writes. Any other use of the file waits for it first (:meth:`wait`)."""
        self.wait()
        pending, self._pending, self.n_pending = self._pending, {}, 0

        def job():
            self._write(pending)
            self.rec.flush()

        self._inflight = executor.submit(job)

    def wait(self) -> None:
        """Wait for a :meth:`write_async` (its error, if any, is raised here)."""
        fut, self._inflight = self._inflight, None
        if fut is not None:
            fut.result()

    def _write(self, pending) -> None:
        f = self.rec.file
        for group, queue in pending.items():
            k = 0
            while k < len(queue):
                keys = set(queue[k][2])
                m = k + 1
                while m < len(queue) and set(queue[m][2]) == keys:
                    m += 1
                units, attrs, first = queue[k]
                if m - k == 1:
                    merged = first
                else:
                    merged = {}
                    for name, a0 in first.items():
                        parts = [q[2][name] for q in queue[k:m]]
                        a = np.concatenate(parts, axis=0)
                        path = f"{group}/{name}"
                        if a0.dtype.kind != "O":
                            # the dtype of a new dataset is that of its first rows (as the
                            # recorder does); an existing one converts on write anyway
                            dt = f[path].dtype if path in f else a0.dtype
                            a = a.astype(dt, copy=False)
                        merged[name] = a
                self.rec.append(group, units=units, attrs=attrs, **merged)
                k = m

    # -- everything else writes the queue first ---------------------------------------------
    @property
    def file(self):
        self.write()
        return self.rec.file

    def flush(self) -> None:
        self.write()
        self.rec.flush()

    def write_dataset(self, *a, **kw) -> None:
        self.write()
        self.rec.write_dataset(*a, **kw)

    def write_attrs(self, *a, **kw) -> None:
        self.write()
        self.rec.write_attrs(*a, **kw)

    def __getattr__(self, name: str) -> Any:
        if name.startswith("_"):
            raise AttributeError(name)
        self.write()
        return getattr(self.rec, name)


class Engine:
    """The cycle loop of one run.

    Parameters
    ----------
    cfg : RunConfig
    rec : RunRecorder
    world : TruthWorld
        The truth (``sim.truth.world.TruthWorld`` or anything with its interface).
    api : namespace
        ``mean_elements`` and ``mean_roe_m`` (``sim.orekit.meanroe``).
    progress : callable, optional
        ``progress(t_s, duration_s)`` once at the start and after every cycle.
    """

    def __init__(self, cfg: RunConfig, rec: RunRecorder, world: Any, api: SimpleNamespace,
                 progress: ProgressFn | None = None):
        self.cfg, self.world, self.api = cfg, world, api
        self.rec = rec if isinstance(rec, BufferedLog) else BufferedLog(rec)
        self._log_written_t_s = 0.0
        self._log_written_wall = time.perf_counter()
        # HDF5 compression and writing of the buffered rows on a thread of its own
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="covey-log") \
            if LOG_THREAD else None
        self.progress = progress
        self.names: tuple[str, ...] = tuple(world.names)
        self.chief = self.names[0]
        self.t_s = 0.0
        self.n_samples = 0
        self.final_roe: dict[str, np.ndarray] = {}
        self.dv_total: dict[str, float] = {n: 0.0 for n in self.names}
        self._declare()

    # -- set-up ------------------------------------------------------------------------------
    def _declare(self) -> None:
        """Spacecraft attributes and empty tables, so every log has the same layout."""
        rec = self.rec
        sc_cfg = {sc.name: sc for sc in self.cfg.spacecraft}
        rec.write_attrs("spacecraft", names=list(self.names), chief=self.chief,
                        truth_density_method=str(getattr(self.world, "density_method", "unknown")),
                        truth_sampler=("orekit_oem_writer" if getattr(self.world, "java_sampler", False)
                                       else "python_step_handler"),
                        truth_threads=int(getattr(self.world, "threads", 1)))
        for name in self.names:
            sc = sc_cfg.get(name)
            modes = list(self.world.mode_names(name))
            areas = self.world.mode_area_m2(name)
            rec.write_attrs(f"spacecraft/{name}", role="chief" if name == self.chief else "deputy",
                            bus=sc.bus.name if sc else "", initial_mode=sc.initial_mode if sc else "",
                            mode_names=modes,
                            mode_area_m2=np.array([float(areas.get(m, np.nan)) for m in modes]))
        rec.append("maneuvers", t_s=np.zeros(0), name=np.array([], dtype=str),
                   dv_rtn_mps=np.zeros((0, 3)), dv_eci_mps=np.zeros((0, 3)),
                   mass_before_kg=np.zeros(0), mass_after_kg=np.zeros(0))
        rec.append("events", t_s=np.zeros(0), name=np.array([], dtype=str),
                   kind=np.array([], dtype=str), detail=np.array([], dtype=str))

    # -- the loop ----------------------------------------------------------------------------
    def plan(self, t_s: float, t_next_s: float) -> None:
        """Load mode schedules and impulses for the interval [t_s, t_next_s).

        Free drift: nothing. The closed loop (navigation -> guidance -> actuators) goes here:
        read ``self.world.states()``, build estimates, call the law, then
        ``self.world.set_mode_schedule(...)`` / ``set_impulses(...)``, and log with
        ``self.rec.append("guidance/...", t_s=..., ...)``.
        """

    def finish(self) -> None:
        """Called once after the loop ended normally (ok or stopped), before the log is closed:
        summary datasets of later engines go here. Free drift: nothing."""

    def run(self) -> tuple[str, str]:
        """Fly to the end (or to a stop event). Returns (status, reason)."""
        T = self.cfg.duration_s
        cycle = self.cfg.guidance.cycle_s
        k = 0
        if self.progress is not None:
            self.progress(self.t_s, T)
        while self.t_s < T - 1e-9:
            t_next = min((k + 1) * cycle, T)
            self.plan(self.t_s, t_next)
            res = self.world.advance_to(t_next)
            self.record_interval()
            if not res.stopped and res.t_s < t_next - 1e-6:
                raise PropagationError(res.t_s, ",".join(self.names),
                                       f"truth stopped short of t = {t_next:.1f} s without a reason")
            self.t_s = float(res.t_s)
            k += 1
            if self.progress is not None:
                self.progress(self.t_s, T)
            if res.stopped:
                return "stopped", str(res.reason or "stopped by an event")
        return "ok", ""

    # -- recording ---------------------------------------------------------------------------
    def record_interval(self) -> None:
        """Drain the truth world's buffers into the log: samples (+ mean elements and mean ROE),
        executed impulses, events."""
        samples = self.world.drain_samples()
        chief_mean = None
        chief_t = None
        for name in self.names:
            s = samples.get(name)
            if not s or len(s["t_s"]) == 0:
                continue
            modes = list(self.world.mode_names(name))
            self.rec.append(f"spacecraft/{name}/truth",
                            attrs={"mode_index": {"mode_names": modes}}, **s)
            t = np.asarray(s["t_s"], dtype=float)
            mean = np.asarray(self.api.mean_elements(t, s["r_eci_m"], s["v_eci_mps"],
                                                     self.cfg.epoch_utc), dtype=float)
            oe = {"a_m": mean[:, 0], "ex": mean[:, 1], "ey": mean[:, 2],
                  "i_deg": np.degrees(mean[:, 3]), "raan_deg": np.degrees(mean[:, 4]) % 360.0,
                  "u_deg": np.degrees(mean[:, 5]) % 360.0}
            self.rec.append(f"spacecraft/{name}/mean_oe", units={"ex": "1", "ey": "1"}, **oe)
            if name == self.chief:
                chief_mean, chief_t = mean, t
                self.n_samples += len(t)
                continue
            roe = np.full((len(t), 6), np.nan)
            if chief_mean is not None:
                idx = np.searchsorted(chief_t, t)
                idx = np.clip(idx, 0, len(chief_t) - 1)
                ok = np.abs(chief_t[idx] - t) < 1e-6
                if ok.any():
                    roe[ok] = self.api.mean_roe_m(chief_mean[idx[ok]], mean[ok])
            self.rec.append(f"spacecraft/{name}", units={"mean_roe_m": "m"},
                            attrs={"mean_roe_m": {"columns": list(ROE_NAMES),
                                                  "reference": self.chief}},
                            mean_roe_m=roe)
            self.final_roe[name] = roe[-1]

        imps = self.world.drain_executed_impulses()
        if imps:
            cols = {k: [] for k in imps[0]}
            for imp in imps:
                for k in cols:
                    cols[k].append(imp.get(k))
                self.dv_total[imp["name"]] = self.dv_total.get(imp["name"], 0.0) + float(
                    np.linalg.norm(imp["dv_rtn_mps"]))
            self.rec.append("maneuvers", **{k: np.asarray(v) for k, v in cols.items()})
        events = self.world.drain_events()
        if events:
            self.rec.append("events", t_s=[float(e["t_s"]) for e in events],
                            name=[str(e.get("name", "")) for e in events],
                            kind=[str(e.get("kind", "")) for e in events],
                            detail=[str(e.get("detail", "")) for e in events])
        now = time.perf_counter()
        if (self.t_s - self._log_written_t_s >= LOG_WRITE_SIM_S - 1e-6
                or now - self._log_written_wall >= LOG_WRITE_WALL_S):
            if self._pool is None:
                self.rec.flush()
            else:  # compressed and written on the writer thread
                self.rec.write_async(self._pool)
            self._log_written_t_s = self.t_s
            self._log_written_wall = now

    def flush_log(self) -> None:
        """Write the buffered log rows to the file and flush it (also done at least every
        :data:`LOG_WRITE_SIM_S` simulated or :data:`LOG_WRITE_WALL_S` wall-clock seconds)."""
        self.rec.flush()
        self._log_written_t_s = self.t_s
        self._log_written_wall = time.perf_counter()

    def close(self) -> None:
        """Stop the log-writer thread (after its queued work; idempotent)."""
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None
            try:
                self.rec.wait()
            except Exception:  # noqa: BLE001 - raised already by flush_log, or the run failed
                pass


def _config_json(cfg: RunConfig) -> str:
    d = dataclasses.asdict(cfg)
    d.pop("source_text", None)
    return json.dumps(d, indent=1, default=str, sort_keys=True)


def _write_start_meta(rec: RunRecorder, cfg: RunConfig, data_path: str | None, label: str) -> None:
    rec.write_dataset("meta/scenario_toml", cfg.source_text, units="text")
    rec.write_dataset("meta/config_json", _config_json(cfg), units="text")
    rec.write_attrs(
        "meta", covey_version=__version__, git_commit=git_commit(),
        python_version=platform.python_version(), numpy_version=np.__version__,
        h5py_version=h5py.__version__, hdf5_version=h5py.version.hdf5_version,
        run_name=cfg.name, epoch_utc=cfg.epoch_utc, duration_s=cfg.duration_s,
        log_step_s=cfg.log_step_s, cycle_s=cfg.guidance.cycle_s, guidance_law=cfg.guidance.law,
        seed=cfg.seed, seed_scheme="numpy SeedSequence(seed) spawn keys per error source (sim.models.noise)",
        source_path=cfg.source_path, overrides_json=json.dumps(dict(cfg.overrides), default=str),
        orekit_data_requested=data_path or "", orekit_data_from=label,
        started_utc=time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        status="running", reason="",
    )


def _write_boot_meta(rec: RunRecorder, info: Any) -> None:
    g = lambda k: getattr(info, k, None)  # noqa: E731
    rec.write_attrs("meta", orekit_version=g("orekit_version") or "unknown",
                    java_version=g("java_version") or "unknown",
                    jpype_version=g("jpype_version") or "unknown",
                    data_path=str(g("data_path") or ""), data_source=str(g("data_source") or ""))
    files = list(g("data_files") or ())
    rec.append("meta/data_files", units={"path": "text", "mtime_utc": "text"},
               path=[str(f[0]) for f in files], size_bytes=np.array([int(f[1]) for f in files],
                                                                     dtype=np.int64),
               mtime_utc=[str(f[2]) for f in files])


def run_scenario(cfg: RunConfig, out_path, progress: ProgressFn | None = None,
                 orekit_data: str | None = None) -> RunSummary:
    """Fly one scenario and write its run log.

    Parameters
    ----------
    cfg : RunConfig
        From :func:`sim.scenario.reader.load_scenario`.
    out_path : str or path-like
        The run log (``.h5``); written as ``out_path.part`` and renamed when closed.
    progress : callable, optional
        ``progress(t_s, duration_s)``, called once when the truth is ready and after every
        guidance cycle.
    orekit_data : str, optional
        Orekit data folder or zip; wins over ``COVEY_OREKIT_DATA``, the scenario's
        ``[run] orekit_data`` and the bundled data.

    Returns
    -------
    RunSummary
        A failed run returns ``status = "failed"`` with ``error`` set (it does not raise),
        except KeyboardInterrupt/SystemExit, which are logged and re-raised.

    Raises
    ------
    EnvironmentSetupError
        The log file cannot be created, or the Orekit data path does not exist.
    """
    out = Path(out_path)
    data_path, label = resolve_orekit_data(orekit_data, cfg.orekit_data)
    try:
        rec = RunRecorder(out)
    except OSError as exc:
        raise EnvironmentSetupError(f"cannot write the run log {str(out)!r}: {exc}",
                                    "choose a writable output path with -o PATH") from None
    log = BufferedLog(rec)  # the engine's appends, written in batches (BufferedLog)
    law = None
    if cfg.guidance.law != "none":
        from guidance.registry import load_law

        law = load_law(cfg.guidance.law)  # GuidanceInputError (exit 2) before anything is flown
    wall0 = time.perf_counter()
    names = tuple(sc.name for sc in cfg.spacecraft)
    metrics: list = []
    engine: Engine | None = None
    status, reason, tb, error = "failed", "", "", None
    try:
        _write_start_meta(rec, cfg, data_path, label)
        api = _truth_api()
        # boot() reads COVEY_OREKIT_DATA itself (and then records that as the data source)
        info = api.boot(None if label == "COVEY_OREKIT_DATA" else data_path)
        _write_boot_meta(rec, info)
        world = api.TruthWorld(cfg, info)
        if law is None:
            engine = Engine(cfg, log, world, api, progress)
        else:
            from sim.loop.engine import ClosedLoopEngine

            engine = ClosedLoopEngine(cfg, log, world, api, progress, law)
        with frozen_heap():
            status, reason = engine.run()
        engine.flush_log()
        engine.finish()
        log.write()
        metrics = run_metrics(rec.file, cfg)
        write_metrics(rec, metrics)
    except BaseException as exc:  # noqa: BLE001 - recorded, then re-raised or returned
        error = exc
        status = "failed"
        reason = f"{type(exc).__name__}: {exc}"
        tb = _traceback.format_exc()
        if engine is not None:
            try:  # keep whatever the truth produced before the failure
                engine.record_interval()
            except Exception:  # noqa: BLE001
                pass
            try:  # and the rows still buffered or being written
                engine.flush_log()
            except Exception:  # noqa: BLE001
                pass
        try:  # rows buffered by the engine
            log.write()
        except Exception:  # noqa: BLE001
            pass
    finally:
        if engine is not None:
            engine.close()
        wall = time.perf_counter() - wall0
        try:
            rec.write_attrs("meta", wall_time_s=wall,
                            t_end_s=engine.t_s if engine is not None else 0.0)
        finally:
            rec.close(status, reason, tb)
    if isinstance(error, (KeyboardInterrupt, SystemExit)):
        raise error
    final = dict(engine.final_roe) if engine else {}
    errors = {d.name: final[d.name] - np.asarray(d.target_roe_m, dtype=float)
              for d in cfg.deputies if d.target_roe_m is not None and d.name in final}
    for m in metrics:  # judged at the deadline (sim.judge.metrics), not at the last sample
        errors[m.name] = np.asarray(m.final_error_m, dtype=float)
    return RunSummary(
        path=out, status=status, reason=reason, name=cfg.name,
        t_end_s=engine.t_s if engine is not None else 0.0, duration_s=cfg.duration_s,
        wall_time_s=wall, n_samples=engine.n_samples if engine is not None else 0,
        spacecraft=names, final_mean_roe_m=final, final_error_m=errors,
        dv_total_mps=dict(engine.dv_total) if engine else {}, metrics=metrics, error=error,
    )

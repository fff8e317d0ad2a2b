"""Fly one scenario: boot Orekit, build the truth world, loop over guidance cycles, log to HDF5.

:func:`run_scenario` is the entry point (``covey run`` calls it). The cycle loop lives in
:mod:`sim.loop.engine` (free drift :class:`Engine`, closed loop :class:`ClosedLoopEngine`); the
engine's appends are buffered in memory and written in batches (:class:`sim.log.buffer.BufferedLog`,
at least once per simulated day and every 30 s of wall time, and at the end or on failure), and
the log is checkpointed to ``<log>.part`` after the first cycle and then about every minute
(``RunOptions.checkpoint_wall_s``, ``checkpoint_cycles``; :mod:`sim.log.recorder`).

Any exception ends the run with ``status = "failed"``: the reason and traceback are stored in the
log, the data recorded so far are kept, and the log is written under its final name as usual;
except after a write error (:class:`sim.errors.LogWriteError`, e.g. a full disk), which ends the
run at once and leaves the last checkpoint as it was (nothing more is written).
"""

from __future__ import annotations

import time
import traceback as _traceback
from dataclasses import dataclass, field
from pathlib import Path
from types import SimpleNamespace

import numpy as np

from guidance.interface import GuidanceInputError

from sim.errors import CoveyError, EnvironmentSetupError, LogWriteError
from sim.judge.metrics import cycles_text, read_cycles, run_metrics, write_metrics
from sim.log.buffer import BufferedLog
from sim.log.provenance import git_commit, write_boot_meta, write_start_meta
from sim.log.recorder import RunRecorder
from sim.loop.engine import MEAN_OE_NAMES, ClosedLoopEngine, Engine, ProgressFn
from sim.loop.options import RunOptions, frozen_heap
from sim.scenario.config import RunConfig
from sim.orekit.data import resolve_orekit_data
from sim.orekit.messages import translate as translate_orekit

__all__ = ["RunSummary", "run_scenario", "truth_backend", "git_commit", "MEAN_OE_NAMES"]


def truth_backend() -> SimpleNamespace:
    """The Orekit-side functions a run needs, imported late (validation never loads them).
    Tests replace this function to fly a fake truth world (checked against
    :class:`sim.truth.model.TruthModel`)."""
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
    metrics : list of DeputyMetrics
        Per deputy with a target (:mod:`sim.judge.metrics`), each with its ``target_met`` verdict.
    cycle_counts : dict
        Guidance cycle outcome -> number of cycles (``/guidance/cycles/status``); empty in free
        drift.
    infeasible_cycles : list
        ``(cycle_index, t_s, message)`` of every cycle the law reported infeasible.

    ``status`` says whether the run flew to the end; whether the deputies met their targets is
    :attr:`targets_met`. :attr:`exit_code` follows the status only; :meth:`exit_code_for` with
    ``strict=True`` also fails a missed target or an infeasible guidance cycle.
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
    cycle_counts: dict[str, int] = field(default_factory=dict)
    infeasible_cycles: list = field(default_factory=list)

    @property
    def targets_met(self) -> bool | None:
        """True when every deputy with a target met it (inside the tolerance box at the
        deadline), False when one did not, None when no deputy has a target (or the run failed
        before it was judged)."""
        if not self.metrics:
            return None
        return all(m.target_met for m in self.metrics)

    @property
    def n_infeasible(self) -> int:
        """Guidance cycles the law reported infeasible."""
        return int(self.cycle_counts.get("infeasible", 0))

    def exit_code_for(self, strict: bool = False) -> int:
        """The exit code; with ``strict``, 1 also for a run that flew but missed a target
        (:attr:`targets_met` False) or had an infeasible guidance cycle. A failed run keeps its
        own code."""
        code = self.exit_code
        if strict and code == 0 and (self.targets_met is False or self.n_infeasible > 0):
            return 1
        return code

    def targets_text(self) -> str:
        """``target met: yes``, or ``target met: no (<deputy>: <worst component>; ...)``."""
        if not self.metrics:
            return ""
        if self.targets_met:
            n = len(self.metrics)
            return "target met: yes" + (f" ({n} deputies)" if n > 1 else "")
        missed = []
        for m in self.metrics:
            if m.target_met:
                continue
            v = m.target_verdict.removeprefix("no: ")
            if m.reached_deadline and np.all(np.isfinite(m.final_error_m)):
                parts = v.split(", ")  # components outside the box, worst first
                v = parts[0] + (f" (+{len(parts) - 1} more)" if len(parts) > 1 else "")
            missed.append(f"{m.name}: {v}")
        n = len(self.metrics)
        head = "no" if n == 1 else f"no, {n - len(missed)} of {n}"
        return f"target met: {head} ({'; '.join(missed)})"

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
            txt += f", dv {dv:.4f} m/s"
        if self.cycle_counts:
            txt += f", guidance: {cycles_text(self.cycle_counts, 'cycles')}"
        if self.metrics:
            txt += f", {self.targets_text()}"
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


def run_scenario(cfg: RunConfig, out_path, progress: ProgressFn | None = None,
                 orekit_data: str | None = None, options: RunOptions | None = None) -> RunSummary:
    """Fly one scenario and write its run log.

    Parameters
    ----------
    cfg : RunConfig
        From :func:`sim.scenario.reader.load_scenario`.
    out_path : str or path-like
        The run log (``.h5``); checkpoints go to ``out_path.part``, the complete log replaces
        ``out_path`` at the end (:mod:`sim.log.recorder`).
    progress : callable, optional
        ``progress(t_s, duration_s)``, called once when the truth is ready and after every
        guidance cycle.
    orekit_data : str, optional
        Orekit data folder or zip; wins over ``COVEY_OREKIT_DATA``, the scenario's
        ``[run] orekit_data`` and the bundled data.
    options : RunOptions, optional
        How the run is computed (:class:`sim.loop.options.RunOptions`; stored in the log).

    Returns
    -------
    RunSummary
        A failed run returns ``status = "failed"`` with ``error`` set (it does not raise),
        except KeyboardInterrupt/SystemExit, which are logged and re-raised.

    Raises
    ------
    EnvironmentSetupError
        The log file cannot be created, another run is writing the same ``out_path``, or the
        Orekit data path does not exist.
    """
    out = Path(out_path)
    opts = options if options is not None else RunOptions()
    data = resolve_orekit_data(orekit_data, cfg.orekit_data)
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
        write_start_meta(rec, cfg, data.user_path, data.label, opts)
        api = truth_backend()
        info = api.boot(data)
        write_boot_meta(rec, info)
        world = api.TruthWorld(cfg, info, batched_density=opts.batched_density,
                              java_sampler=opts.java_sampler, threads=opts.truth_threads)
        if law is None:
            engine = Engine(cfg, log, world, api, progress, opts)
        else:
            engine = ClosedLoopEngine(cfg, log, world, api, progress, law, opts)
        with frozen_heap(opts.freeze_heap):
            status, reason = engine.run()
        engine.flush_log()
        engine.finish()
        engine.write_judge_counts()
        log.write()
        metrics = run_metrics(rec.file, cfg)
        write_metrics(rec, metrics)
        if metrics:
            rec.write_attrs("meta", targets_met=all(m.target_met for m in metrics))
    except BaseException as exc:  # noqa: BLE001 - recorded, then re-raised or returned
        tb = _traceback.format_exc()
        # a known Orekit failure in covey's words, with the key to change (the original
        # traceback stays in the log)
        error = translate_orekit(exc, engine.t_s if engine is not None else 0.0,
                                 ",".join(names)) or exc
        status = "failed"
        reason = f"{type(error).__name__}: {error}"
        if engine is not None:
            try:  # keep whatever the truth produced before the failure
                engine.record_interval()
            except Exception:  # noqa: BLE001
                pass
            try:  # and the rows still buffered or being written
                engine.flush_log()
                engine.write_judge_counts()
            except Exception:  # noqa: BLE001
                pass
        try:  # rows buffered by the engine
            log.write()
        except Exception:  # noqa: BLE001
            pass
    finally:
        if engine is not None:
            engine.close()
            try:  # free the truth's Java objects (a campaign worker flies many runs)
                engine.world.close()
            except Exception:  # noqa: BLE001 - nothing more to save
                pass
        wall = time.perf_counter() - wall0
        try:  # the guidance cycle outcomes, also of a failed run
            cycles = read_cycles(rec.file)
        except Exception:  # noqa: BLE001
            cycles = {"counts": {}, "infeasible": []}
        try:
            rec.write_attrs("meta", wall_time_s=wall,
                            t_end_s=engine.t_s if engine is not None else 0.0)
        finally:
            if engine is not None:
                rec.note_progress(engine.t_s, engine.n_samples)
            try:
                out = rec.close(status, reason, tb)  # the .part kept after a write error
            except LogWriteError as exc:  # the final log could not be written
                out = rec.part_path if exc.kept else out
                if not isinstance(error, (KeyboardInterrupt, SystemExit)):
                    error, status, reason = exc, "failed", str(exc)
    if isinstance(error, LogWriteError):
        reason = str(error)
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
        cycle_counts=cycles["counts"], infeasible_cycles=cycles["infeasible"],
    )

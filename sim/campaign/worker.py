"""What a campaign worker process runs: one run of the campaign per call (:func:`fly_job`).

A worker process (a local ``spawn`` process or a Dask worker) calls :func:`fly_job` once per run;
the JVM is started by the first run (``sim.orekit.boot.boot`` is once per process) and reused by
every later run of that process. Each run writes an ordinary covey run log (``run_scenario``: a
temporary ``.part`` name, renamed when closed). Only the parent writes the campaign summary.

A worker is meant to keep one core busy: its JVM starts with :data:`WORKER_JVM_OPTIONS` (the
serial garbage collector: no collector threads competing with the other workers, and a committed
heap that stays put from run to run) unless the campaign is given other options, and numerical
libraries run one thread each (:data:`WORKER_THREAD_ENV`, set for local workers by
:class:`sim.campaign.executors.LocalExecutor`; Dask's nanny sets the same by default).
benchmarks/RESULTS.md has the measurements behind both choices.
"""

from __future__ import annotations

import atexit
import gc
import os
import signal
import sys
import time
from dataclasses import dataclass
from pathlib import Path

__all__ = ["Task", "fly_job", "init_local_worker", "rss_kb", "WORKER_JVM_OPTIONS",
           "WORKER_THREAD_ENV"]

#: JVM options of a campaign worker unless the campaign is given others (``--jvm-options``).
WORKER_JVM_OPTIONS: tuple[str, ...] = ("-XX:+UseSerialGC",)

#: Environment of a local worker process (each left as the user set it, if set): one thread per
#: numerical library, so that N workers on N cores do not start N x cores busy-waiting threads.
WORKER_THREAD_ENV: dict[str, str] = {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1",
                                     "MKL_NUM_THREADS": "1"}


@dataclass(frozen=True)
class Task:
    """Everything a worker needs for one run (picklable).

    Attributes
    ----------
    job : sim.campaign.plan.RunJob
    folder : str
        The campaign folder (absolute); the log goes to ``folder / job.log``.
    base_text, base_path : str
        The base scenario's text and the path that anchors its relative paths.
    orekit_data : str or None
    truth_threads : int
        Spacecraft propagated at the same time inside the run (1: one core per worker).
    jvm_options : tuple of str
        Options of the worker's JVM (used by the worker's first run, which starts it).
    """

    job: object
    folder: str
    base_text: str
    base_path: str
    orekit_data: str | None = None
    truth_threads: int = 1
    jvm_options: tuple[str, ...] = WORKER_JVM_OPTIONS


def rss_kb() -> int:
    """This process's resident memory, kB (``VmRSS`` of ``/proc/self/status``; elsewhere the peak
    ``ru_maxrss`` of ``resource``)."""
    try:
        with open("/proc/self/status", encoding="ascii") as f:
            for line in f:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1])
    except OSError:
        pass
    try:
        import resource

        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        return int(peak // 1024) if sys.platform == "darwin" else int(peak)
    except (ImportError, OSError):  # pragma: no cover - not on Linux or macOS
        return -1


def _leave() -> None:
    """The worker's last exit handler: leave without Python's finalisation, which can abort the
    process ("FATAL: exception not rethrown") while the JVM's threads still run; as
    ``sim.cli.main.console_main`` does for the command line."""
    for f in (sys.stdout, sys.stderr):
        try:
            f.flush()
        except (OSError, ValueError, AttributeError):
            pass
    os._exit(0)


def init_local_worker(parent_pid: int) -> None:
    """Initializer of a local worker process: Ctrl-C is the parent's to handle (a run interrupted
    here would be closed as ``failed`` under its final name), and on Linux the worker is killed
    with its parent (``prctl(PR_SET_PDEATHSIG, SIGKILL)``), so a killed campaign leaves no worker
    writing into the folder that a resumed campaign cleans. At exit the worker skips Python's
    finalisation (:func:`_leave`)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    atexit.register(_leave)
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL("libc.so.6", use_errno=True)
            libc.prctl(1, int(signal.SIGKILL), 0, 0, 0)  # PR_SET_PDEATHSIG = 1
        except (OSError, AttributeError):  # pragma: no cover - best effort
            pass
        if os.getppid() != parent_pid:  # the parent died before prctl took effect
            os._exit(1)


def fly_job(task: Task) -> dict:
    """Fly one run of a campaign and write its run log.

    Returns
    -------
    dict
        ``index``, ``status`` (``ok``, ``stopped``, ``failed``), ``reason``, ``log`` (absolute
        path, "" when no log was written), ``wall_s`` (this call), ``rss_kb`` (the process's
        resident memory after the run and a garbage collection of Python and the JVM), ``pid``.
    """
    from guidance.interface import GuidanceInputError

    from sim.errors import CoveyError
    from sim.loop.options import RunOptions
    from sim.loop.run import run_scenario, truth_backend
    from sim.orekit.boot import collect_java_garbage
    from sim.scenario.reader import parse_scenario

    t0 = time.perf_counter()
    job = task.job
    out = Path(task.folder) / job.log
    status, reason, log = "failed", "", ""
    try:
        # the JVM starts with the worker's options (once per process; later runs reuse it)
        truth_backend().boot(task.orekit_data, jvm_options=tuple(task.jvm_options))
        # the plan checked the solar-activity span for the base and every dispersed extreme
        cfg = parse_scenario(task.base_text, task.base_path, overrides=dict(job.overrides),
                             orekit_data=task.orekit_data, check_solar_span=False)
        s = run_scenario(cfg, out, orekit_data=task.orekit_data,
                         options=RunOptions(truth_threads=int(task.truth_threads)))
        status, reason, log = s.status, s.reason, str(s.path)
    except (CoveyError, GuidanceInputError) as exc:
        reason = f"{type(exc).__name__}: {exc}"
        log = str(out) if out.is_file() else ""
    except Exception as exc:  # noqa: BLE001 - reported to the parent, the campaign goes on
        reason = f"{type(exc).__name__}: {exc}"
        log = str(out) if out.is_file() else ""
    # the next run starts on the same memory: Python's cycles and the JVM's heap collected
    gc.collect()
    collect_java_garbage()
    return dict(index=job.index, status=status, reason=reason, log=log,
                wall_s=time.perf_counter() - t0, rss_kb=rss_kb(), pid=os.getpid())

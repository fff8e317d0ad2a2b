"""Where the runs of a campaign are flown: one thin adapter per executor, one code path.

Each executor has ``capacity`` (runs in flight at once), ``submit(fn, task) -> future``,
``wait(futures, timeout) -> done futures``, ``outcome(future) -> (result, reason)`` and
``close(cancel)``; :func:`sim.campaign.execute.run_campaign` drives them all the same way.

- :class:`LocalExecutor`: N local worker processes (``multiprocessing`` ``spawn``), each its own
  one-process ``concurrent.futures.ProcessPoolExecutor`` so that a worker that dies is known by
  its run and replaced by a fresh process; the JVM of a worker is reused across its runs.
- :class:`DaskExecutor`: a Dask ``distributed`` cluster: ``"local"`` starts a ``LocalCluster``
  (N worker processes, one thread each), any other address connects a ``Client`` to a running
  scheduler. A worker that dies is Dask's to handle (the task is retried elsewhere, then reported
  as ``KilledWorker``).
- :class:`InlineExecutor`: in this process, one run after the other (``--workers 0``; tests,
  debugging).
"""

from __future__ import annotations

import concurrent.futures as cf
import time
import logging
import multiprocessing
import os
import signal
import uuid
from concurrent.futures.process import BrokenProcessPool
from typing import Any, Callable

from sim.errors import EnvironmentSetupError

__all__ = ["LocalExecutor", "DaskExecutor", "InlineExecutor", "make_executor"]


class InlineExecutor:
    """Runs each task in this process when it is submitted (capacity 1)."""

    capacity = 1
    kind = "inline"

    def __init__(self):
        self.replaced = 0

    def submit(self, fn: Callable, task: Any) -> cf.Future:
        f: cf.Future = cf.Future()
        try:
            f.set_result(fn(task))
        except Exception as exc:  # noqa: BLE001 - reported as the run's failure
            f.set_exception(exc)
        return f

    def wait(self, futures, timeout: float | None):
        return [f for f in futures if f.done()]

    def outcome(self, f: cf.Future):
        try:
            return f.result(), None
        except Exception as exc:  # noqa: BLE001
            return None, f"{type(exc).__name__}: {exc}"

    def close(self, cancel: bool = False) -> None:
        pass

    def describe(self) -> str:
        return "in this process"


class LocalExecutor:
    """``n`` local worker processes (spawn), one run each at a time.

    Attributes
    ----------
    replaced : int
        Worker processes that died and were replaced.
    """

    kind = "local"

    def __init__(self, n: int):
        from sim.campaign.worker import WORKER_THREAD_ENV, init_local_worker

        if n < 1:
            raise ValueError("at least one worker")
        # inherited by the spawned workers (read by the numerical libraries when they load); this
        # process's own libraries are loaded already and keep their settings
        for k, v in WORKER_THREAD_ENV.items():
            os.environ.setdefault(k, v)
        self.capacity = int(n)
        self._ctx = multiprocessing.get_context("spawn")
        self._init = init_local_worker
        self._slots: list[cf.ProcessPoolExecutor] = [self._new() for _ in range(self.capacity)]
        self._busy: dict[cf.Future, int] = {}
        self._procs: dict[int, list] = {}  # slot -> its worker process (for the exit code)
        self.replaced = 0

    def _new(self) -> cf.ProcessPoolExecutor:
        return cf.ProcessPoolExecutor(max_workers=1, mp_context=self._ctx,
                                      initializer=self._init, initargs=(os.getpid(),))

    def submit(self, fn: Callable, task: Any) -> cf.Future:
        free = [i for i in range(self.capacity) if i not in self._busy.values()]
        if not free:
            raise RuntimeError("every worker is busy")
        pool = self._slots[free[0]]
        f = pool.submit(fn, task)
        self._busy[f] = free[0]
        # the processes and their Popen handles: the pool may join and close a dead process
        # (Process.exitcode then raises) before outcome() asks; the handle keeps the exit code
        self._procs[free[0]] = [(p, getattr(p, "_popen", None))
                                for p in (getattr(pool, "_processes", None) or {}).values()]
        return f

    def wait(self, futures, timeout: float | None):
        done, _ = cf.wait(list(futures), timeout=timeout, return_when=cf.FIRST_COMPLETED)
        return list(done)

    def outcome(self, f: cf.Future):
        i = self._busy.pop(f)
        try:
            return f.result(), None
        except BrokenProcessPool:
            code = self._exitcode(i)
            self._slots[i].shutdown(wait=False, cancel_futures=True)
            self._slots[i] = self._new()
            self.replaced += 1
            how = f" (exit code {code})" if code is not None else ""
            return None, f"the worker process died{how}; a new worker took its place"
        except Exception as exc:  # noqa: BLE001 - e.g. a task that cannot be pickled
            return None, f"{type(exc).__name__}: {exc}"

    def _exitcode(self, i: int):
        """Exit code of slot ``i``'s dead worker (None if it cannot be had): the process is
        joined for up to 30 s, since on a loaded machine it can still be going down when the
        pool reports it broken."""
        deadline = time.monotonic() + 30.0
        for p, popen in self._procs.get(i, ()):
            try:
                p.join(timeout=max(0.1, deadline - time.monotonic()))
                if p.exitcode is not None:
                    return p.exitcode
            except (AssertionError, ValueError, AttributeError):  # closed by the pool already
                pass
            while popen is not None and time.monotonic() < deadline:
                code = popen.returncode if popen.returncode is not None else popen.poll()
                if code is not None:
                    return code
                time.sleep(0.05)
        return None

    def close(self, cancel: bool = False) -> None:
        for pool in self._slots:
            if cancel:
                for p in list((getattr(pool, "_processes", None) or {}).values()):
                    try:
                        os.kill(p.pid, signal.SIGTERM)
                    except (OSError, AttributeError):
                        pass
            pool.shutdown(wait=True, cancel_futures=cancel)

    def describe(self) -> str:
        return f"{self.capacity} local worker process{'es' if self.capacity != 1 else ''} (spawn)"


class DaskExecutor:
    """A Dask ``distributed`` cluster: ``address = "local"`` starts a ``LocalCluster`` of
    ``n_workers`` processes with one thread each; any other address is a running scheduler."""

    kind = "dask"

    def __init__(self, address: str, n_workers: int = 1):
        try:
            import distributed
        except ImportError:
            raise EnvironmentSetupError("--scheduler needs the Dask 'distributed' package",
                                        "pip install distributed (or pip install -e .)") from None
        self._d = distributed
        self.cluster = None
        self.address = address
        self.replaced = 0
        try:
            if address == "local":
                self.cluster = distributed.LocalCluster(
                    n_workers=int(n_workers), threads_per_worker=1, processes=True,
                    dashboard_address=None, silence_logs=logging.ERROR)
                self.client = distributed.Client(self.cluster)
            else:
                self.client = distributed.Client(address, timeout="20s")
                self.client.wait_for_workers(1, timeout=60)
        except (OSError, TimeoutError) as exc:
            self.close()
            raise EnvironmentSetupError(f"cannot reach the Dask scheduler {address!r}: {exc}",
                                        "start one (dask scheduler / dask worker) and give its "
                                        "address, e.g. tcp://host:8786, or use --scheduler local"
                                        ) from None
        self.capacity = max(1, sum(self.client.nthreads().values()))

    def submit(self, fn: Callable, task: Any):
        name = getattr(getattr(task, "job", None), "name", "run")
        return self.client.submit(fn, task, pure=False, key=f"covey-{name}-{uuid.uuid4().hex[:8]}")

    def wait(self, futures, timeout: float | None):
        try:
            done, _ = self._d.wait(list(futures), timeout=timeout, return_when="FIRST_COMPLETED")
        except (TimeoutError, self._d.TimeoutError):
            return []
        return list(done)

    def outcome(self, f):
        try:
            return f.result(), None
        except self._d.KilledWorker as exc:
            self.replaced += 1
            return None, f"the worker process died (Dask KilledWorker: {exc})"
        except Exception as exc:  # noqa: BLE001
            return None, f"{type(exc).__name__}: {exc}"
        finally:
            f.release()

    def close(self, cancel: bool = False) -> None:
        client = getattr(self, "client", None)
        if client is not None:
            try:
                client.close()
            except Exception:  # noqa: BLE001
                pass
        if self.cluster is not None:
            try:
                self.cluster.close()
            except Exception:  # noqa: BLE001
                pass

    def describe(self) -> str:
        where = "a local Dask cluster" if self.cluster is not None else f"the Dask cluster at {self.address}"
        return f"{where} ({self.capacity} worker thread{'s' if self.capacity != 1 else ''})"


def make_executor(workers: int | None, scheduler: str | None):
    """The executor for ``--workers`` / ``--scheduler``: Dask when a scheduler is given (``local``:
    a LocalCluster of ``workers`` processes, default the CPU count; an address: the cluster's own
    workers), else ``workers`` local processes (default: the CPU count), or this process for
    ``workers = 0``."""
    n = workers if workers is not None else (os.cpu_count() or 1)
    if scheduler:
        return DaskExecutor(scheduler, max(1, n))
    if n == 0:
        return InlineExecutor()
    return LocalExecutor(n)

"""The engine's buffered writer: appends kept in memory and written in batches.

Pure Python/h5py (no Java).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from sim.log.recorder import RunRecorder

__all__ = ["BufferedLog"]


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

    def write_async(self, executor, checkpoint: tuple[float, int] | None = None) -> None:
        """Hand the queued rows to ``executor`` (one worker thread) to be appended and flushed
        there, while the caller goes on queueing; h5py releases the GIL while it compresses and
        writes. Any other use of the file waits for it first (:meth:`wait`).

        ``checkpoint = (t_s, n_samples)``: then also write a checkpoint there
        (:meth:`RunRecorder.checkpoint`, with that progress); its error, if any, is raised by the
        next :meth:`check` or :meth:`wait`."""
        self.wait()
        pending, self._pending, self.n_pending = self._pending, {}, 0

        def job():
            self._write(pending)
            self.rec.flush()
            if checkpoint is not None:
                self.rec.note_progress(*checkpoint)
                self.rec.checkpoint()

        self._inflight = executor.submit(job)

    def checkpoint(self, t_s: float, n_samples: int) -> bool:
        """Write the queued rows, then a checkpoint (:meth:`RunRecorder.checkpoint`)."""
        self.write()
        self.rec.note_progress(t_s, n_samples)
        return self.rec.checkpoint()

    def check(self) -> None:
        """Raise the error of a finished :meth:`write_async` now (a write error ends the run at
        once); a job still running is left to run."""
        fut = self._inflight
        if fut is not None and fut.done():
            self.wait()

    def note_progress(self, t_s: float, n_samples: int) -> None:
        """:meth:`RunRecorder.note_progress` (without writing the queue)."""
        self.rec.note_progress(t_s, n_samples)

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

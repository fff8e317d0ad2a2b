"""The run log survives concurrent writers, kills, write errors and damage.

Sources: the file lifecycle (lock, exclusive temporaries, atomic rename, checkpoints) is covey's
own design (README "Run log schema", "Run log files"; common practice, no source); rename-over
atomicity and ``O_EXCL`` are POSIX (IEEE Std 1003.1, ``rename()``, ``open()``); ``flock``
semantics (released when the holder dies) are Linux's flock(2) [memory]; CRC-32 is ISO 3309 as
computed by ``zlib.crc32`` (the reference implementation); Fletcher-32 is HDF5's own filter.
"""

from __future__ import annotations

import errno
import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import h5py
import numpy as np
import pytest

from sim.errors import EnvironmentSetupError, LogFormatError, LogWriteError
from sim.log import container
from sim.log.reader import read_log
from sim.log.recorder import RunRecorder


def _names(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


# ------------------------------------------------------------------------------------------
# one writer per path, exclusive temporaries, atomic replacement
# ------------------------------------------------------------------------------------------


def test_second_writer_refused_before_touching_anything(tmp_path):
    path = tmp_path / "x.h5"
    first = RunRecorder(path)
    first.append("spacecraft/alpha/truth", t_s=np.arange(100.0))
    first.note_progress(99.0, 100)
    first.checkpoint()
    before = {n: (tmp_path / n).read_bytes() for n in _names(tmp_path)}
    with pytest.raises(EnvironmentSetupError, match="being written by another covey run"):
        RunRecorder(path)
    # the refused writer changed no byte of the first one's files
    assert {n: (tmp_path / n).read_bytes() for n in _names(tmp_path)} == before
    first.close("ok")
    log = read_log(path)
    assert log.status == "ok" and np.array_equal(log.spacecraft.alpha.truth.t_s, np.arange(100.0))
    assert _names(tmp_path) == ["x.h5"]  # .part and .lock removed
    # the path is free again once the first writer closed
    RunRecorder(path).close("ok")


def test_existing_log_replaced_only_by_a_complete_one(tmp_path):
    path = tmp_path / "x.h5"
    with RunRecorder(path) as rec:
        rec.append("g", t_s=[1.0, 2.0])
    old = path.read_bytes()
    rec = RunRecorder(path)
    rec.append("g", t_s=[3.0])
    rec.checkpoint()
    assert path.read_bytes() == old  # untouched while the second run writes
    assert read_log(rec.part_path).partial
    rec.close()
    assert read_log(path).get("g/t_s").tolist() == [3.0]


def test_stale_temporaries_of_dead_writers_removed(tmp_path):
    path = tmp_path / "x.h5"
    host = container.writer_host()
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    stale = tmp_path / f"x.h5.{host}.{dead}.0badcafe.tmp"
    alive = tmp_path / f"x.h5.{host}.{os.getppid()}.0000beef.tmp"  # our parent: alive
    foreign = tmp_path / f"x.h5.otherhost.{dead}.12345678.tmp"     # cannot be proved dead
    for p in (stale, alive, foreign):
        p.write_bytes(b"half a log")
    RunRecorder(path).close()
    assert not stale.exists() and alive.exists() and foreign.exists()


def test_lock_file_left_by_a_killed_writer_does_not_block(tmp_path):
    # a kill leaves <final>.lock behind; flock was released by the kernel with the process
    path = tmp_path / "x.h5"
    (tmp_path / "x.h5.lock").write_text("somehost pid 1\n")
    RunRecorder(path).close()
    assert _names(tmp_path) == ["x.h5"]


def test_unusable_folder_is_an_os_error_and_leaves_nothing(tmp_path):
    (tmp_path / "file").write_text("")
    with pytest.raises(OSError):
        RunRecorder(tmp_path / "file" / "x.h5")  # a file where the folder should be
    assert _names(tmp_path) == ["file"]

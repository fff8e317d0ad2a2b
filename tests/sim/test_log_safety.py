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
import time
from pathlib import Path

import h5py
import numpy as np
import pytest

from sim.errors import EnvironmentSetupError, LogFormatError
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


# ------------------------------------------------------------------------------------------
# checkpoints
# ------------------------------------------------------------------------------------------


def _drift(repo_root, seconds=12000.0, **more):
    from sim.scenario.reader import load_scenario

    return load_scenario(repo_root / "scenarios/demo_drift.toml",
                         {"run.duration_s": seconds, **more})


@pytest.mark.parametrize("log_thread", [False, True])
def test_checkpoints_are_readable_partial_logs(tmp_path, repo_root, fake_truth, monkeypatch,
                                               log_thread):
    from sim.loop.options import RunOptions
    from sim.loop.run import run_scenario

    seen = []
    real = RunRecorder.checkpoint

    def spy(self):
        ok = real(self)
        log = read_log(self.part_path)  # what a reader finds on disk right now
        seen.append((log.partial, log.meta["checkpoint_index"], log.meta["checkpoint_t_s"],
                     log.get("spacecraft/alpha/truth/t_s", np.zeros(0))))
        return ok

    monkeypatch.setattr(RunRecorder, "checkpoint", spy)
    opts = RunOptions(checkpoint_cycles=1, checkpoint_wall_s=1e9, log_thread=log_thread)
    s = run_scenario(_drift(repo_root), tmp_path / "c.h5", options=opts)
    assert s.status == "ok"
    # the demo's cycle is 5400 s: cycles end at 5400, 10800, 12000 s, one checkpoint each
    assert [x[1] for x in seen] == [1, 2, 3] and all(x[0] for x in seen)
    for _, _, t_ck, t in seen:
        assert t[-1] == t_ck  # each checkpoint holds the samples up to its own time
    assert [x[2] for x in seen] == [5400.0, 10800.0, 12000.0]
    log = read_log(tmp_path / "c.h5")
    assert not log.partial and log.status == "ok" and log.checked
    assert _names(tmp_path) == ["c.h5"]


def test_default_checkpoints_after_the_first_cycle_then_by_wall_time(tmp_path, repo_root,
                                                                     fake_truth, monkeypatch):
    from sim.loop.options import RunOptions
    from sim.loop.run import run_scenario

    n = []
    real = RunRecorder.checkpoint
    monkeypatch.setattr(RunRecorder, "checkpoint", lambda self: n.append(1) or real(self))
    assert RunOptions().checkpoint_wall_s == 60.0 and RunOptions().checkpoint_cycles == 0
    run_scenario(_drift(repo_root), tmp_path / "d.h5")
    assert len(n) == 1  # a fraction of a second of wall time: only the first cycle's


# ------------------------------------------------------------------------------------------
# kill -9 mid-run
# ------------------------------------------------------------------------------------------

def _fly_and_exit(cfg, path):  # a forked child: the fake truth is inherited from the test
    from sim.loop.options import RunOptions
    from sim.loop.run import run_scenario

    s = run_scenario(cfg, path, options=RunOptions(checkpoint_cycles=1))
    os._exit(0 if s.status == "ok" else 1)


@pytest.mark.slow
def test_kill_9_at_random_moments_leaves_readable_logs(tmp_path, repo_root, fake_truth):
    """10 kills (SIGKILL) at seeded random moments of a 24-checkpoint run (one per cycle): the
    earlier log stays intact or is replaced by a complete one; a .part reads as a partial log to
    its last checkpoint; a .tmp (killed mid-write) is refused cleanly; a later run cleans up."""
    import multiprocessing

    from sim.loop.run import run_scenario

    ctx = multiprocessing.get_context("fork")
    path = tmp_path / "k.h5"
    cfg = _drift(repo_root, 43200.0, **{"guidance.cycle_s": 1800.0})
    t0 = time.perf_counter()  # how long a whole run takes here, so the kills fall inside it
    child = ctx.Process(target=_fly_and_exit, args=(cfg, path))
    child.start()
    child.join(120)
    full_s = time.perf_counter() - t0
    assert child.exitcode == 0
    run_scenario(_drift(repo_root), path)  # a short earlier log
    earlier = read_log(path)
    rng = np.random.default_rng(20261204)
    seen = {"part": 0, "tmp": 0, "replaced": 0}
    for delay in rng.uniform(0.0, full_s, size=10):
        child = ctx.Process(target=_fly_and_exit, args=(cfg, path))
        child.start()
        time.sleep(float(delay))
        child.kill()
        child.join()
        for p in sorted(tmp_path.iterdir()):
            if p.name.endswith(".lock"):
                continue
            if p.name.endswith(".tmp"):  # the image being written (or written, not yet renamed)
                seen["tmp"] += 1  # when killed: refused when cut short, else a whole image reads
                try:
                    read_log(p)
                except LogFormatError:
                    pass
                continue
            log = read_log(p)  # any other name reads cleanly
            if p.name.endswith(".part"):
                seen["part"] += 1
                assert log.partial and log.status == "running"
                if "checkpoint_t_s" not in log.meta:  # the image made when the log was opened
                    assert "spacecraft/alpha/truth/t_s" not in log
                    continue
                t = log.get("spacecraft/alpha/truth/t_s")
                assert t[-1] == log.meta["checkpoint_t_s"]
                assert np.array_equal(t, np.arange(len(t)) * 60.0)
            else:
                assert p == path and not log.partial
                if log.meta["created_utc"] != earlier.meta["created_utc"]:
                    seen["replaced"] += 1  # the run ended before the kill: a complete log
                    assert log.status == "ok" and log.spacecraft.alpha.truth.t_s[-1] == 43200.0
                    earlier = log
                else:
                    assert np.array_equal(log.spacecraft.alpha.truth.t_s,
                                          earlier.spacecraft.alpha.truth.t_s)
    print("kill -9 outcomes:", seen, f"(a whole run: {full_s:.1f} s)")
    assert seen["part"] >= 5  # most kills land mid-run (a check that the test kills at all)
    run_scenario(_drift(repo_root), path)  # a later run removes what the killed ones left
    assert _names(tmp_path) == ["k.h5"]


# ------------------------------------------------------------------------------------------
# write errors: disk full
# ------------------------------------------------------------------------------------------


def _run_cli(argv, capsys):
    from sim.cli.main import main

    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def test_write_error_ends_the_run_at_once_with_one_line(tmp_path, repo_root, fake_truth,
                                                        monkeypatch, capsys):
    """ENOSPC from the operating system on the third checkpoint (simulated: os.write raises)."""
    real_write = os.write
    calls = {"n": 0, "images": 0}

    def write(fd, data):
        if len(data) == 512:  # a header: one image per header (sim.log.container)
            calls["images"] += 1
        if calls["images"] >= 4:  # the image made at open, then checkpoints 1, 2 pass
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_write(fd, data)

    monkeypatch.setattr(container.os, "write", write)
    import sim.loop.run
    from sim.loop.options import RunOptions

    monkeypatch.setattr(sim.loop.run, "RunOptions", lambda: RunOptions(checkpoint_cycles=1))
    path = tmp_path / "full.h5"
    code, out, err = _run_cli(["run", str(repo_root / "scenarios/demo_drift.toml"), "-o", str(path),
                               "--set", "run.duration_days=1",
                               # deadlines inside the run: no validate warning before the one line
                               "--set", "deputies[0].deadline_days=1",
                               "--set", "deputies[1].deadline_days=1"], capsys)
    lines = err.strip().splitlines()
    assert code == 1 and len(lines) == 1, err
    # the demo's cycle is 5400 s; the third checkpoint (after 3 cycles, t = 16200 s) failed:
    # 271 chief samples (0 .. 16200 s every 60 s)
    assert lines[0] == (f"covey: disk full writing {path} after 271 samples; the last checkpoint "
                        f"is kept in {path}.part")
    assert out.startswith("failed: ") and f"-> {path}.part" in out
    assert calls["images"] == 4  # the run stopped at once: no further write was tried
    assert _names(tmp_path) == ["full.h5.part"]  # the temporary removed, the lock released
    log = read_log(f"{path}.part")
    assert log.partial and log.meta["checkpoint_t_s"] == 10800.0


def _tmpfs(folder: Path, size: str) -> None:
    if os.geteuid() != 0:
        pytest.skip("mounting a tmpfs needs root (it is allowed as root in CI)")
    folder.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(folder)],
                       capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"mount -t tmpfs is not allowed here: {r.stderr.strip()}")


@pytest.fixture
def small_disk(tmp_path):
    d = tmp_path / "disk"
    _tmpfs(d, "300k")
    yield d
    subprocess.run(["umount", str(d)], check=False)


def test_disk_full_on_a_small_tmpfs(small_disk, repo_root, fake_truth, capsys, monkeypatch):
    """A 300 KiB tmpfs and default options: the first cycle's checkpoint fits, the complete log
    (about 1.2 MB for 2 days) does not."""
    monkeypatch.chdir(small_disk.parent)  # a crash file would land here
    path = small_disk / "x.h5"
    code, out, err = _run_cli(["run", str(repo_root / "scenarios/demo_drift.toml"), "-o", str(path),
                               "--set", "run.duration_days=2",
                               "--set", "deputies[0].deadline_days=2",  # no validate warning
                               "--set", "deputies[1].deadline_days=2"], capsys)
    lines = err.strip().splitlines()
    assert code == 1 and len(lines) == 1 and lines[0].startswith(f"covey: disk full writing {path}")
    assert lines[0].endswith(f"the last checkpoint is kept in {path}.part")
    assert _names(small_disk) == ["x.h5.part"]
    log = read_log(f"{path}.part")
    assert log.partial and log.meta["checkpoint_t_s"] == 5400.0  # the first cycle's
    assert not list(small_disk.parent.glob("hs_err_pid*.log"))


def test_concurrent_same_path_second_run_refused_first_intact(tmp_path, repo_root, fake_truth,
                                                              capsys):
    """Two runs on one output path: the second is refused (exit 2, one line) before it touches
    a file; the first ends normally with a complete, readable log."""
    import multiprocessing

    path = tmp_path / "same.h5"
    cfg = _drift(repo_root, 43200.0, **{"guidance.cycle_s": 1800.0})
    child = multiprocessing.get_context("fork").Process(target=_fly_and_exit, args=(cfg, path))
    child.start()
    deadline = time.monotonic() + 60
    while not (tmp_path / "same.h5.part").exists() and time.monotonic() < deadline:
        time.sleep(0.01)
    assert child.is_alive(), "the first run ended before the second could start"
    code, out, err = _run_cli(["run", str(repo_root / "scenarios/demo_drift.toml"), "-o", str(path)],
                              capsys)
    child.join(60)
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert err.startswith(f"covey: {path} is being written by another covey run (writer ")
    assert child.exitcode == 0
    log = read_log(path)
    assert log.status == "ok" and log.spacecraft.alpha.truth.t_s[-1] == 43200.0
    assert _names(tmp_path) == ["same.h5"]


@pytest.mark.orekit
@pytest.mark.slow
def test_disk_full_real_run_one_line_no_crash_file(tmp_path, repo_root):
    """The reproducer: a four-spacecraft Orekit run onto a 300 KiB tmpfs (about 25 s)."""
    disk = tmp_path / "disk"
    _tmpfs(disk, "300k")
    try:
        env = {**os.environ, "COVEY_TRUTH_THREADS": "1", "PYTHONPATH": str(repo_root)}
        r = subprocess.run([sys.executable, "-m", "sim.cli", "run",
                            str(repo_root / "scenarios/formation_four.toml"), "-o",
                            str(disk / "x.h5"), "--set", "run.duration_days=0.5", "-q",
                            # deadlines inside the run: no validate warning before the one line
                            *[a for k in range(3) for a in ("--set", f"deputies[{k}].deadline_days=0.5")]],
                           cwd=tmp_path, env=env, capture_output=True, text=True, timeout=300)
        assert r.returncode == 1, r.stderr
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith(f"covey: disk full writing {disk / 'x.h5'}")
        assert not list(tmp_path.glob("hs_err_pid*.log")) and _names(disk) == ["x.h5.part"]
        assert read_log(disk / "x.h5.part").partial
    finally:
        subprocess.run(["umount", str(disk)], check=False)


# ------------------------------------------------------------------------------------------
# damaged files: byte flips, zeroed blocks, truncation
# ------------------------------------------------------------------------------------------

_READER = """
import hashlib, sys
import numpy as np
sys.path.insert(0, sys.argv[1])
from sim.errors import LogFormatError
from sim.log.reader import read_log

def digest(log):
    h = hashlib.sha256()
    for k in log.keys():
        v = log.get(k)
        h.update(k.encode() + repr(v if isinstance(v, (str, list)) else
                                   (np.asarray(v).dtype.str, np.asarray(v).tobytes())).encode())
    for k in sorted(log._attrs, key=repr):  # key=repr: damaged names may come back as bytes
        h.update(repr((k, sorted(((a, repr(b)) for a, b in log._attrs[k].items()), key=repr))).encode())
    return h.hexdigest()

for p in sys.argv[2:]:
    try:
        out = "read " + digest(read_log(p))
    except LogFormatError as exc:
        out = "refused " + str(exc).replace(chr(10), " ")
    except BaseException as exc:
        out = f"raw {type(exc).__name__}: {exc}".replace(chr(10), " ")
    print(out, flush=True)
"""


def _mutate(data: bytes, seed: int) -> bytes:
    """Seeded damage: one byte inverted, 8 random bytes changed, or 64 bytes zeroed."""
    rng = np.random.default_rng(seed)
    b = bytearray(data)
    kind = seed % 3
    if kind == 0:
        b[int(rng.integers(len(b)))] ^= 0xFF
    elif kind == 1:
        for _ in range(8):
            b[int(rng.integers(len(b)))] ^= int(rng.integers(1, 256))
    else:
        i = int(rng.integers(len(b) - 64))
        b[i:i + 64] = bytes(64)
    return bytes(b)


def _read_all(repo_root, paths, timeout_s):
    """read_log on each path in one child process under one deadline; one outcome per path
    (a hang shows as the paths left without an outcome)."""
    try:
        r = subprocess.run([sys.executable, "-c", _READER, str(repo_root), *map(str, paths)],
                           capture_output=True, text=True, timeout=timeout_s)
        out = r.stdout
    except subprocess.TimeoutExpired as exc:
        out = (exc.stdout or b"").decode() if isinstance(exc.stdout, bytes) else (exc.stdout or "")
    lines = out.splitlines()
    return lines + ["hang"] * (len(paths) - len(lines))


def _legacy_copy(src: Path, dst: Path) -> None:
    """The same log without the covey header and checksums, as covey < 1.3 wrote it (h5py's
    plain writer: signature at byte 0, no Fletcher-32)."""
    with h5py.File(src, "r") as f, h5py.File(dst, "w") as g:
        for k, v in f.attrs.items():
            g.attrs[k] = v
        for name in f:
            f.copy(f[name], g, name=name)
        g.attrs["schema_version"] = "1.2"


@pytest.fixture
def small_log(tmp_path, repo_root, fake_truth):
    from sim.loop.run import run_scenario

    return run_scenario(_drift(repo_root), tmp_path / "small.h5").path


def test_50_byte_flips_clean_error_or_correct_data_never_a_hang(tmp_path, repo_root, small_log):
    data = small_log.read_bytes()
    paths = []
    for seed in range(50):
        p = tmp_path / f"m{seed}.h5"
        p.write_bytes(_mutate(data, seed))
        paths.append(p)
    truth, *outs = _read_all(repo_root, [small_log, *paths], timeout_s=120)
    assert truth.startswith("read ")
    counts = {"same bytes, same data": 0, "refused": 0}
    for p, out in zip(paths, outs):
        assert out != "hang" and not out.startswith("raw "), (p.name, out)
        if p.read_bytes() == data:  # 64 zeros written over zeros: nothing changed
            assert out == truth
            counts["same bytes, same data"] += 1
        else:  # every change is caught by the header's CRC-32
            assert out.startswith("refused ") and str(p) in out, (p.name, out)
            counts["refused"] += 1
    print("byte flips (covey 1.3 logs):", counts)
    assert counts["refused"] >= 25


def test_damaged_legacy_logs_give_clean_errors_and_never_hang(tmp_path, repo_root, small_log):
    """Logs without the covey header (schema < 1.3): every read maps HDF5's errors to
    LogFormatError, and the global-heap damage that hangs HDF5 is refused before HDF5 reads it."""
    legacy = tmp_path / "legacy.h5"
    _legacy_copy(small_log, legacy)
    data = legacy.read_bytes()
    paths = []
    for seed in range(50):
        p = tmp_path / f"l{seed}.h5"
        p.write_bytes(_mutate(data, 1000 + seed))
        paths.append(p)
    # the reproduced hang: the 16-byte header of the 4th object of the first global heap
    # collection zeroed (index 0, size 0: HDF5's collection parser then never advances)
    hang = bytearray(data)
    q = data.index(b"GCOL") + 16
    for _ in range(3):
        q += 16 + (int.from_bytes(hang[q + 8:q + 16], "little") + 7) // 8 * 8
    hang[q:q + 16] = bytes(16)
    (tmp_path / "hang.h5").write_bytes(bytes(hang))
    paths.append(tmp_path / "hang.h5")
    truth, *outs = _read_all(repo_root, [legacy, *paths], timeout_s=120)
    assert truth.startswith("read ")
    counts = {"refused": 0, "read": 0, "read, same data": 0}
    for p, out in zip(paths, outs):
        assert out != "hang" and not out.startswith("raw "), (p.name, out)
        kind = out.split(" ")[0]
        counts[kind] += 1
        counts["read, same data"] += out == truth
    assert outs[-1].startswith("refused ") and "empty object header" in outs[-1]
    print("byte flips (logs without the covey header):", counts)
    # and that file does hang plain h5py (the pre-check is what saves read_log)
    code = ("import h5py, sys\nf = h5py.File(sys.argv[1], 'r')\n[f.attrs[k] for k in f.attrs]\n"
            "f.visititems(lambda n, o: [o.attrs[k] for k in o.attrs])\n")
    with pytest.raises(subprocess.TimeoutExpired):
        subprocess.run([sys.executable, "-c", code, str(tmp_path / "hang.h5")],
                       capture_output=True, timeout=5)


def test_truncated_and_foreign_files_refused(tmp_path, small_log):
    data = small_log.read_bytes()
    for n, what in ((len(data) - 1, "cut short"), (600, "cut short"), (100, "cut short"),
                    (0, "neither a covey")):
        p = tmp_path / f"t{n}.h5"
        p.write_bytes(data[:n])
        with pytest.raises(LogFormatError, match=what):
            read_log(p)
    with pytest.raises(LogFormatError, match="cannot read the file"):
        read_log(tmp_path / "missing.h5")
    with pytest.raises(LogFormatError, match="cannot read the file"):
        read_log(tmp_path)  # a folder

"""The run log on disk: a 512-byte covey header, then the HDF5 file; how it is written safely.

A run log is built in memory (HDF5 core driver, :mod:`sim.log.recorder`) and reaches the disk
only as whole, checked images:

- **Header.** The first 512 bytes are an HDF5 user block (any HDF5 tool skips it) holding plain
  text: the container version, the length of the HDF5 image that follows, a CRC-32 (ISO 3309, as
  ``zlib.crc32``) of the header fields and the image, the status and the writer (host, pid).
  :func:`read_container` checks length and CRC before HDF5 parses a byte, so a damaged or
  truncated log is reported, never parsed (a damaged HDF5 global heap can make HDF5 loop for ever,
  see :mod:`sim.log.reader`).
- **Atomic writes.** :func:`write_atomic` writes header and image to a temporary of a unique
  name created exclusively (``O_CREAT | O_EXCL``: ``<final>.<host>.<pid>.<hex>.tmp``), fsyncs it
  and renames it over the target with ``os.replace``; a crash mid-write leaves the target as it was
  and a ``.tmp`` that a later writer removes once it proves its writer dead.
- **One writer per path.** :class:`PathLock` holds an advisory ``flock`` on ``<final>.lock`` for
  the whole run; a second writer of the same final name is refused before it touches any file.

Pure Python (no Java, no HDF5 calls).
"""

from __future__ import annotations

import errno
import os
import re
import secrets
import socket
import zlib
from dataclasses import dataclass
from pathlib import Path

from sim.errors import EnvironmentSetupError

__all__ = ["HEADER_BYTES", "MAGIC", "ContainerInfo", "pack_header", "parse_header",
           "read_container", "write_atomic", "PathLock", "remove_stale_temporaries",
           "writer_host", "temp_name", "pid_alive"]

HEADER_BYTES = 512
"""Size of the covey header (an HDF5 user block: a power of two >= 512)."""

MAGIC = b"covey.runlog container 1\n"
"""First line of the header."""

HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"

_FIELDS = re.compile(
    rb"covey\.runlog container 1\n"
    rb"bytes (?P<bytes>[0-9]{1,16})\n"
    rb"crc32 (?P<crc>[0-9a-f]{8})\n"
    rb"status (?P<status>[a-z]{1,16})\n"
    rb"writer (?P<host>[A-Za-z0-9._-]{1,200}) (?P<pid>[0-9]{1,10})\n")


def writer_host() -> str:
    """This machine's host name, reduced to ``[A-Za-z0-9._-]`` (used in temporary names)."""
    h = re.sub(r"[^A-Za-z0-9._-]", "_", socket.gethostname() or "host")[:200]
    return h or "host"


def pid_alive(pid: int) -> bool:
    """Whether a process of that id exists on this host (``os.kill(pid, 0)``)."""
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    except OSError:
        return True
    return True


def _render(n_bytes: int, crc: str, status: str, host: str, pid: int) -> bytes:
    text = (MAGIC + f"bytes {n_bytes}\ncrc32 {crc}\nstatus {status}\nwriter {host} {pid}\n"
            .encode("ascii"))
    if len(text) > HEADER_BYTES:
        raise ValueError("covey header too long")
    return text + b"\0" * (HEADER_BYTES - len(text))


def pack_header(image: bytes | memoryview, status: str, host: str, pid: int) -> bytes:
    """The 512-byte header for an HDF5 ``image`` (the CRC covers the header fields and the image)."""
    status = status if re.fullmatch(r"[a-z]{1,16}", status or "") else "unknown"
    blank = _render(len(image), "--------", status, host, pid)
    crc = zlib.crc32(image, zlib.crc32(blank)) & 0xFFFFFFFF
    return _render(len(image), f"{crc:08x}", status, host, pid)


@dataclass(frozen=True)
class ContainerInfo:
    """What a covey header says."""

    n_bytes: int
    crc32: str
    status: str
    host: str
    pid: int


def parse_header(head: bytes) -> ContainerInfo:
    """Parse a 512-byte header strictly (every byte must be as :func:`pack_header` writes it).

    Raises
    ------
    ValueError
        With what is wrong.
    """
    if len(head) < HEADER_BYTES:
        raise ValueError(f"covey header cut short ({len(head)} of {HEADER_BYTES} bytes)")
    m = _FIELDS.match(head)
    if m is None:
        raise ValueError("covey header damaged (its fields do not parse)")
    info = ContainerInfo(int(m["bytes"]), m["crc"].decode(), m["status"].decode(),
                         m["host"].decode(), int(m["pid"]))
    if _render(info.n_bytes, info.crc32, info.status, info.host, info.pid) != head[:HEADER_BYTES]:
        raise ValueError("covey header damaged (bytes after its fields)")
    return info


def read_container(path: str | os.PathLike) -> tuple[ContainerInfo | None, bytes]:
    """Read a whole log file and check it.

    Returns
    -------
    (ContainerInfo or None, bytes)
        The header (None for a file that starts with the HDF5 signature: a log of schema < 1.3,
        or any other HDF5 file) and the HDF5 image (the bytes after the header; the whole file
        without one).

    Raises
    ------
    OSError
        The file cannot be read.
    ValueError
        The header is damaged, the image is shorter or longer than it says, or the CRC differs.
    """
    with open(path, "rb") as fh:
        data = fh.read()
    if data.startswith(HDF5_SIGNATURE):
        return None, data
    # anything else must carry a covey header: a file whose HDF5 signature is further in (where
    # HDF5 would still find it) is read only through a header that checks out
    if not data.startswith(MAGIC):
        raise ValueError("neither a covey run-log header nor an HDF5 signature at its first byte")
    info = parse_header(data[:HEADER_BYTES])
    body = memoryview(data)[HEADER_BYTES:]
    if len(body) != info.n_bytes:
        raise ValueError(f"the file has {len(body)} bytes after its header where the header "
                         f"says {info.n_bytes} (cut short or appended to)")
    blank = _render(info.n_bytes, "--------", info.status, info.host, info.pid)
    crc = zlib.crc32(body, zlib.crc32(blank)) & 0xFFFFFFFF
    if f"{crc:08x}" != info.crc32:
        raise ValueError(f"checksum mismatch (CRC-32 {crc:08x}, header says {info.crc32}): the "
                         "file was changed or damaged after covey wrote it")
    return info, bytes(body)


def temp_name(final: Path, host: str, pid: int) -> Path:
    """A fresh temporary name beside ``final``: ``<final>.<host>.<pid>.<hex>.tmp``."""
    return final.with_name(f"{final.name}.{host}.{pid}.{secrets.token_hex(4)}.tmp")


def _parse_temp(final: Path, name: str) -> tuple[str, int] | None:
    pre = final.name + "."
    if not (name.startswith(pre) and name.endswith(".tmp")):
        return None
    parts = name[len(pre):].rsplit(".", 3)
    if len(parts) != 4 or not parts[1].isdigit() or not re.fullmatch(r"[0-9a-f]{8}", parts[2]):
        return None
    return parts[0], int(parts[1])


def write_atomic(target: Path, final: Path, header: bytes, image: bytes | memoryview,
                 host: str, pid: int, fsync: bool = True) -> None:
    """Write ``header + image`` to a fresh exclusive temporary beside ``final`` and rename it over
    ``target``. On any error the temporary is removed and the OSError re-raised; ``target`` is
    then as it was."""
    tmp = temp_name(final, host, pid)
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0), 0o644)
    try:
        try:
            for chunk in (memoryview(header), memoryview(image)):
                while len(chunk):
                    n = os.write(fd, chunk)
                    if n <= 0:
                        raise OSError(errno.EIO, "short write")
                    chunk = chunk[n:]
            if fsync:
                os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def remove_stale_temporaries(final: Path, host: str) -> list[Path]:
    """Remove the ``.tmp`` files of ``final`` whose writer was on this host and is dead
    (``os.kill(pid, 0)`` raises ProcessLookupError). Returns what was removed."""
    removed = []
    try:
        names = os.listdir(final.parent)
    except OSError:
        return removed
    for name in names:
        who = _parse_temp(final, name)
        if who is None or who[0] != host or who[1] == os.getpid() or pid_alive(who[1]):
            continue
        try:
            os.unlink(final.parent / name)
            removed.append(final.parent / name)
        except OSError:
            pass
    return removed


class PathLock:
    """An exclusive advisory lock (``flock``) on ``<final>.lock``, held while a run writes
    ``final``; released (and the lock file removed) by :meth:`release`, by the kernel when the
    process dies.

    Raises
    ------
    EnvironmentSetupError
        Another process holds the lock (exit code 2).
    OSError
        The lock file cannot be created (e.g. a read-only folder).
    """

    def __init__(self, final: Path, host: str, pid: int):
        self.final = Path(final)
        self.path = self.final.with_name(self.final.name + ".lock")
        self.fd: int | None = None
        try:
            import fcntl
        except ImportError:  # no flock on this platform: no lock (documented)
            return
        while True:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT | getattr(os, "O_CLOEXEC", 0), 0o644)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                holder = ""
                try:
                    holder = os.pread(fd, 300, 0).decode("ascii", "replace").strip()
                except OSError:
                    pass
                os.close(fd)
                who = f" (writer {holder})" if holder else ""
                raise EnvironmentSetupError(
                    f"{self.final} is being written by another covey run{who}",
                    "wait for that run to end, or write this one elsewhere with -o PATH") from None
            except OSError as exc:
                if exc.errno in (errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOSYS, errno.EINVAL):
                    os.close(fd)  # a file system without locks: go on unlocked
                    return
                os.close(fd)
                raise
            # the lock file may have been removed (and replaced) by a writer that just ended
            try:
                same = os.path.samestat(os.fstat(fd), os.stat(self.path))
            except FileNotFoundError:
                same = False
            if not same:
                os.close(fd)
                continue
            os.ftruncate(fd, 0)
            os.pwrite(fd, f"{host} pid {pid}\n".encode("ascii"), 0)
            self.fd = fd
            return

    def release(self) -> None:
        """Remove the lock file and release the lock (idempotent)."""
        if self.fd is None:
            return
        try:
            os.unlink(self.path)
        except OSError:
            pass
        try:
            os.close(self.fd)
        finally:
            self.fd = None

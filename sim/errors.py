"""The few exception types covey raises. Each carries data; its message names the key, the value,
the units and the fix. The CLI turns them into exit codes (2 for input errors, 1 for run failures)
and never shows a traceback for them.
"""

from __future__ import annotations

import errno as _errno
from typing import Any


class CoveyError(Exception):
    """Base of all covey errors."""

    exit_code = 1


class ScenarioError(CoveyError):
    """Bad scenario input.

    Attributes
    ----------
    key : str
        Dotted key path in the scenario file (e.g. ``deputies[1].roe_m``).
    value : Any
        The value given (``None`` when missing; :data:`ScenarioError.MISSING` for a key or table
        that is absent, then the message names the key alone, without ``= value``).
    allowed : str
        What is allowed, with units.
    hint : str
        A suggestion (e.g. the closest valid key), may be empty.
    """

    exit_code = 2
    MISSING: Any = type("Missing", (), {"__repr__": lambda self: "<missing>"})()
    """The ``value`` of a key or table that is not in the file."""

    def __init__(self, key: str, value: Any, allowed: str, hint: str = "", path: str = ""):
        self.key, self.value, self.allowed, self.hint, self.path = key, value, allowed, hint, path
        where = f"{path}: " if path else ""
        shown = "" if value is ScenarioError.MISSING else f" = {value!r}"
        msg = f"{where}{key}{shown}: {allowed}"
        if hint:
            msg += f" ({hint})"
        super().__init__(msg)


class EnvironmentSetupError(CoveyError):
    """The machine lacks something covey needs (Java, Orekit data, a file).

    Attributes
    ----------
    what : str
        What is missing or wrong.
    fix : str
        How to fix it.
    """

    exit_code = 2

    def __init__(self, what: str, fix: str):
        self.what, self.fix = what, fix
        super().__init__(f"{what}. Fix: {fix}")


class PropagationError(CoveyError):
    """The truth propagation failed (Orekit raised) at a known time.

    Attributes
    ----------
    t_s : float
        Time reached, s since epoch.
    spacecraft : str
    detail : str
        Orekit's message.
    """

    def __init__(self, t_s: float, spacecraft: str, detail: str):
        self.t_s, self.spacecraft, self.detail = t_s, spacecraft, detail
        super().__init__(f"truth propagation of {spacecraft!r} failed at t = {t_s:.1f} s: {detail}")


class LogFormatError(CoveyError):
    """A run log cannot be read (missing group, wrong schema version).

    Attributes
    ----------
    path : str
    key : str
        HDF5 path inside the file.
    detail : str
    """

    def __init__(self, path: str, key: str, detail: str):
        self.path, self.key, self.detail = path, key, detail
        super().__init__(f"{path}: {key}: {detail}")


class LogWriteError(CoveyError):
    """The run log could not be written (disk full, quota, I/O error); the run ends at once.

    Attributes
    ----------
    path : str
        The run log being written.
    errno : int or None
    n_samples : int
        Truth samples (of the chief) recorded when the write failed.
    kept : str
        The last checkpoint left readable on disk (``<path>.part``), or "" when none is.
    detail : str
        The operating system's message.
    """

    _WHAT = {_errno.ENOSPC: "disk full", _errno.EDQUOT: "disk quota exceeded",
             _errno.EIO: "I/O error", _errno.EFBIG: "file too large",
             _errno.EROFS: "read-only file system"}

    def __init__(self, path: str, errno: int | None, detail: str, n_samples: int = 0,
                 kept: str = ""):
        self.path, self.errno, self.detail, self.n_samples, self.kept = (
            path, errno, detail, int(n_samples), kept)
        super().__init__(path, errno, detail, n_samples, kept)

    def __str__(self) -> str:
        what = self._WHAT.get(self.errno or -1, f"write error ({self.detail})")
        keep = (f"; the last checkpoint is kept in {self.kept}" if self.kept
                else "; nothing readable was kept")
        return f"{what} writing {self.path} after {self.n_samples} samples{keep}"

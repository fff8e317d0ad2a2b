"""The run-log reader: :func:`read_log` loads a covey run log into a :class:`RunLog` of numpy
arrays (pure h5py/numpy, no Java). The writer is :mod:`sim.log.recorder`; the schema is the
README's "Run log schema".

Damage is reported, never returned, and never hangs:

- a log of schema 1.3 or later starts with a covey header (:mod:`sim.log.container`): its length
  and CRC-32 are checked before HDF5 parses a byte, and HDF5 reads the checked bytes from memory
  (the file is read once, so a checkpoint replaced meanwhile is not mixed in);
- an older log (HDF5 signature at byte 0) gets a structural pre-check of its HDF5 global heaps
  (:func:`global_heap_problem`): a zeroed global-heap object header (index 0, size 0) makes
  HDF5's collection parser (``H5HG__cache_heap_deserialize``, HDF5 2.0.0 as shipped with h5py
  3.16) step by zero bytes for ever, a read that never returns (reproduced: 64 zeroed bytes of a
  small log hung for over 10 minutes reading a string attribute). Its numeric datasets have no
  checksum unless written with one;
- every HDF5 read maps the library's errors to one :class:`sim.errors.LogFormatError` naming the
  file and the object; a checksum (Fletcher-32) failure is such an error.
"""

from __future__ import annotations

import os
from typing import Any

import h5py
import numpy as np

from sim.errors import LogFormatError
from sim.log.container import read_container
from sim.log.recorder import SCHEMA_NAME, SCHEMA_VERSION

__all__ = ["RunLog", "read_log", "global_heap_problem"]


def global_heap_problem(image: bytes) -> str | None:
    """What would make HDF5 loop for ever in a global heap collection of ``image``, or None.

    Walks every plausible collection (signature ``GCOL``, version 1, size from 4096 bytes to the
    end of the file) object by object as HDF5 does (16-byte object headers, 8-byte aligned
    objects, index 0 = the free space to the end) and reports an object that would not advance
    the walk (index 0 and size 0) or would run past the end of its collection (valid
    collections are tiled exactly). 8-byte lengths (h5py's default) are assumed.
    """
    n = len(image)
    pos = image.find(b"GCOL")
    while pos != -1:
        if pos + 16 <= n and image[pos + 4] == 1:
            size = int.from_bytes(image[pos + 8:pos + 16], "little")
            if 4096 <= size <= n - pos:
                end, p = pos + size, pos + 16
                while p < end:
                    if p + 16 > end:
                        break  # too small for a header: free space (as HDF5 takes it)
                    idx = int.from_bytes(image[p:p + 2], "little")
                    obj = int.from_bytes(image[p + 8:p + 16], "little")
                    need = obj if idx == 0 else 16 + ((obj + 7) // 8) * 8
                    if need == 0:
                        return (f"HDF5 global heap at byte {pos} damaged: an empty object header "
                                f"at byte {p} (HDF5 would loop on it for ever)")
                    if p + need > end:
                        return (f"HDF5 global heap at byte {pos} damaged: object {idx} at byte {p} "
                                f"runs past the end of its collection")
                    p += need
        pos = image.find(b"GCOL", pos + 1)
    return None


_LIBRARY_ERRORS = (OSError, RuntimeError, KeyError, ValueError, TypeError, UnicodeDecodeError,
                   OverflowError, IndexError, AttributeError, MemoryError, SystemError)
"""What h5py/numpy raise on a damaged file (mapped to LogFormatError)."""


def _detail(exc: BaseException) -> str:
    return f"damaged or unreadable ({type(exc).__name__}: {' '.join(str(exc).split())[:300]})"


def _decode(v: Any) -> Any:
    if isinstance(v, bytes):
        return v.decode("utf-8", "replace")
    if isinstance(v, np.ndarray) and v.dtype.kind in ("O", "S"):
        return [x.decode("utf-8", "replace") if isinstance(x, bytes) else x for x in v.tolist()]
    if isinstance(v, np.generic):
        return v.item()
    return v


class _Node:
    """Attribute-style access below a path of a :class:`RunLog` (``log.spacecraft.beta``)."""

    def __init__(self, log: "RunLog", path: str):
        self._log, self._path = log, path

    def __getattr__(self, name: str) -> Any:
        if name.startswith("_"):
            raise AttributeError(name)
        path = f"{self._path}/{name}" if self._path else name
        try:
            return self._log[path]
        except KeyError:
            raise AttributeError(f"no {path!r} in {self._log.path}") from None

    def __getitem__(self, name: str) -> Any:
        return getattr(self, name)

    def __dir__(self):
        return self._log.children(self._path)

    def __repr__(self) -> str:
        return f"<run log group /{self._path}: {', '.join(self._log.children(self._path))}>"


class RunLog:
    """A run log read into memory (see :func:`read_log`).

    Attributes
    ----------
    path : str
    meta : dict
        Attributes of ``/meta`` plus the root attributes (schema, schema_version, status, ...).
    scenario_text : str
        The scenario file verbatim.
    status, reason : str
    partial : bool
        True for a checkpoint of a run that has not ended (``status == "running"``: a ``.part``
        file, or the log of a killed run); its data end at ``checkpoint_t_s`` (``meta``).
    checked : bool
        True when the file's covey header (length, CRC-32) was checked (schema >= 1.3).

    ``log.get("spacecraft/beta/mean_roe_m")``, ``log["spacecraft/beta/mean_roe_m"]`` and
    ``log.spacecraft.beta.mean_roe_m`` all return the numpy array; text datasets come back as
    lists of str (scalars as str). ``log.attrs(path)`` and ``log.units(path)`` give attributes.
    """

    def __init__(self, path: str, data: dict[str, Any], attrs: dict[str, dict[str, Any]],
                 groups: set[str]):
        self.path = path
        self._data, self._attrs, self._groups = data, attrs, groups
        root = attrs.get("", {})
        self.meta = {**attrs.get("meta", {}), **{k: v for k, v in root.items()}}
        self.status = str(root.get("status", ""))
        self.reason = str(root.get("reason", ""))
        self.partial = self.status == "running"
        self.checked = False
        self.scenario_text = data.get("meta/scenario_toml", "")

    def keys(self) -> list[str]:
        """All dataset paths."""
        return sorted(self._data)

    def children(self, group: str = "") -> list[str]:
        pre = f"{group}/" if group else ""
        names = {p[len(pre):].split("/")[0] for p in list(self._data) + list(self._groups)
                 if p.startswith(pre) and p != group}
        return sorted(n for n in names if n)

    def get(self, path: str, default: Any = KeyError) -> Any:
        """Dataset at ``path`` (no leading slash needed)."""
        p = path.strip("/")
        if p in self._data:
            return self._data[p]
        if default is KeyError:
            raise KeyError(f"{self.path}: no dataset {p!r}")
        return default

    def __getitem__(self, path: str) -> Any:
        p = path.strip("/")
        if p in self._data:
            return self._data[p]
        if p in self._groups or p == "":
            return _Node(self, p)
        raise KeyError(f"{self.path}: no dataset or group {p!r}")

    def __contains__(self, path: str) -> bool:
        p = path.strip("/")
        return p in self._data or p in self._groups

    def __getattr__(self, name: str) -> Any:
        if name.startswith("_"):
            raise AttributeError(name)
        try:
            return self[name]
        except KeyError:
            raise AttributeError(name) from None

    def attrs(self, path: str) -> dict[str, Any]:
        """Attributes of a group or dataset."""
        return dict(self._attrs.get(path.strip("/"), {}))

    def units(self, path: str) -> Any:
        """The ``units`` attribute of a dataset."""
        return self._attrs.get(path.strip("/"), {}).get("units")

    @property
    def spacecraft_names(self) -> list[str]:
        """Chief first, then deputies."""
        return list(self.attrs("spacecraft").get("names", []))

    def __repr__(self) -> str:
        return f"<RunLog {self.path} status={self.status!r} {len(self._data)} datasets>"


def read_log(path: str | os.PathLike) -> RunLog:
    """Read a run log into memory.

    Parameters
    ----------
    path : str or path-like
        A ``.h5`` run log, or the ``.part`` checkpoint of a run that is still going or was killed
        (``RunLog.partial`` is then True: the data up to its last checkpoint).

    Returns
    -------
    RunLog

    Raises
    ------
    LogFormatError
        Not readable, not an HDF5 file, not a covey run log, an unsupported schema major version,
        or damaged (checksum mismatch, cut short, an HDF5 object that cannot be read: the error
        names the object).
    """
    p = str(path)
    try:
        info, image = read_container(p)
    except OSError as exc:
        raise LogFormatError(p, "/", f"cannot read the file: {exc.strerror or exc}") from None
    except ValueError as exc:
        raise LogFormatError(p, "/", str(exc)) from None
    if info is None:
        problem = global_heap_problem(image)
        if problem:
            raise LogFormatError(p, "/", problem)
    try:
        f = h5py.File(h5py.h5f.open_file_image(image))
    except _LIBRARY_ERRORS as exc:
        raise LogFormatError(p, "/", f"cannot open as HDF5: {_detail(exc)}") from None
    current = "/"
    try:
        with f:
            attrs: dict[str, dict[str, Any]] = {"": {k: _decode(v) for k, v in f.attrs.items()}}
            schema = attrs[""].get("schema", "")
            version = str(attrs[""].get("schema_version", ""))
            if schema != SCHEMA_NAME:
                raise LogFormatError(p, "/@schema", f"not a covey run log (schema {schema!r})")
            if version.split(".")[0] != SCHEMA_VERSION.split(".")[0]:
                raise LogFormatError(p, "/@schema_version", f"version {version} is not readable "
                                     f"by this covey (reads {SCHEMA_VERSION.split('.')[0]}.x)")
            data: dict[str, Any] = {}
            groups: set[str] = set()

            def visit(name: str, obj: Any) -> None:
                nonlocal current
                current = "/" + name
                attrs[name] = {k: _decode(v) for k, v in obj.attrs.items()}
                if isinstance(obj, h5py.Group):
                    groups.add(name)
                    return
                if h5py.check_string_dtype(obj.dtype) is not None:
                    v = obj.asstr()[()]
                    if isinstance(v, str):
                        data[name] = v
                    elif np.ndim(v) == 1:
                        data[name] = [str(x) for x in v]
                    else:
                        data[name] = np.asarray(v, dtype=object)
                else:
                    data[name] = obj[()]
                current = f"after /{name}"

            f.visititems(visit)
    except LogFormatError:
        raise
    except _LIBRARY_ERRORS as exc:
        raise LogFormatError(p, current, _detail(exc)) from None
    log = RunLog(p, data, attrs, groups)
    log.checked = info is not None
    return log

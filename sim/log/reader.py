"""The run-log reader: :func:`read_log` loads a covey run log into a :class:`RunLog` of numpy
arrays (pure h5py/numpy, no Java). The writer is :mod:`sim.log.recorder`; the schema is the
README's "Run log schema".
"""

from __future__ import annotations

import os
from typing import Any

import h5py
import numpy as np

from sim.errors import LogFormatError
from sim.log.recorder import SCHEMA_NAME, SCHEMA_VERSION

__all__ = ["RunLog", "read_log"]




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
        A ``.h5`` run log (a ``.part`` file of a crashed process may also be read, as far as
        HDF5 can).

    Returns
    -------
    RunLog

    Raises
    ------
    LogFormatError
        Not an HDF5 file, not a covey run log, or an unsupported schema major version.
    """
    p = str(path)
    try:
        f = h5py.File(p, "r")
    except (OSError, FileNotFoundError) as exc:
        raise LogFormatError(p, "/", f"cannot open as HDF5: {exc}") from None
    with f:
        schema = _decode(f.attrs.get("schema", ""))
        version = str(_decode(f.attrs.get("schema_version", "")))
        if schema != SCHEMA_NAME:
            raise LogFormatError(p, "/@schema", f"not a covey run log (schema {schema!r})")
        if version.split(".")[0] != SCHEMA_VERSION.split(".")[0]:
            raise LogFormatError(p, "/@schema_version", f"version {version} is not readable by this "
                                 f"covey (reads {SCHEMA_VERSION.split('.')[0]}.x)")
        data: dict[str, Any] = {}
        attrs: dict[str, dict[str, Any]] = {"": {k: _decode(v) for k, v in f.attrs.items()}}
        groups: set[str] = set()

        def visit(name: str, obj: Any) -> None:
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

        f.visititems(visit)
    return RunLog(p, data, attrs, groups)

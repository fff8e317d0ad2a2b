"""Dataset-by-dataset comparison of two run logs (pure h5py/numpy, no Java).

Used to show that two runs are the same run: every attribute and dataset equal (NaN equal to
NaN), apart from the fields that measure the wall clock or the source tree's git state.
"""

from __future__ import annotations

import os

import h5py
import numpy as np

__all__ = ["WALL_CLOCK_ATTRS", "WALL_CLOCK_DATASETS", "log_items", "diff_logs"]

WALL_CLOCK_ATTRS = frozenset({("/", "created_utc"), ("meta", "started_utc"), ("meta", "finished_utc"),
                              ("meta", "wall_time_s"), ("meta", "git_commit")})
"""(group, attribute) pairs that measure time or the git state, not the simulation."""

WALL_CLOCK_DATASETS = frozenset({"guidance/cycles/solve_time_s", "guidance/cycles/step_wall_s"})
"""Datasets that measure wall-clock time."""


def log_items(path: str | os.PathLike) -> dict:
    """Every attribute, group and dataset of an HDF5 file.

    Returns
    -------
    dict
        ``("attr", group, name) -> value``, ``("group", name) -> None`` and
        ``("data", name) -> (dtype string, shape, array)``.
    """
    out: dict = {}
    with h5py.File(path, "r") as f:
        for k, v in f.attrs.items():
            out[("attr", "/", k)] = v

        def visit(name, obj):
            for k, v in obj.attrs.items():
                out[("attr", name, k)] = v
            if isinstance(obj, h5py.Dataset):
                out[("data", name)] = (obj.dtype.str, obj.shape, obj[()])
            else:
                out[("group", name)] = None

        f.visititems(visit)
    return out


def _equal(a, b) -> bool:
    if isinstance(a, tuple):
        return a[:2] == b[:2] and _equal(a[2], b[2])
    a, b = np.asarray(a), np.asarray(b)
    if a.shape != b.shape or a.dtype.kind != b.dtype.kind:
        return False
    if a.dtype.kind in "fc":
        return bool(np.array_equal(a, b, equal_nan=True))
    return bool(np.array_equal(a, b))


def diff_logs(p1: str | os.PathLike, p2: str | os.PathLike, *, ignore_attrs=WALL_CLOCK_ATTRS,
              ignore_datasets=WALL_CLOCK_DATASETS) -> list[str]:
    """The keys (as text) of everything that differs between two HDF5 files, or is in only one.

    Parameters
    ----------
    p1, p2 : path-like
        Two run logs.
    ignore_attrs : set of (group, name)
        Attributes left out (default: the wall-clock and git fields).
    ignore_datasets : set of str
        Datasets left out (default: the wall-clock durations).

    Returns
    -------
    list of str
        Sorted; empty when the files are the same run.
    """
    a, b = log_items(p1), log_items(p2)
    skip = {("attr",) + tuple(x) for x in ignore_attrs} | {("data", x) for x in ignore_datasets}
    keys = (set(a) | set(b)) - skip
    return sorted(str(k) for k in keys if k not in a or k not in b or not _equal(a[k], b[k]))

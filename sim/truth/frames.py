"""Frame helpers of the truth world: Orekit transforms as numpy matrices, cached on a time grid.

Integration is in GCRF; everything handed out is in covey's ECI, the true-of-date frame (TOD,
IERS 2010). The exact transforms are evaluated on a :data:`TOD_GRID_S` grid and interpolated in
between (:meth:`sim.truth.world.TruthWorld._gcrf_to_tod`).
"""

from __future__ import annotations

from typing import Callable

import numpy as np

__all__ = ["TOD_GRID_S", "vec3", "rotation_matrix", "grid_cached"]

TOD_GRID_S = 1800.0
"""Grid step of the exact GCRF -> TOD transforms interpolated for the samples, s (also the grid of the
exact TOD -> ITRF transforms used by the batched density)."""


def vec3(v) -> np.ndarray:
    """An Orekit ``Vector3D`` as a numpy array, shape (3,)."""
    return np.array([v.getX(), v.getY(), v.getZ()])


def rotation_matrix(transform) -> np.ndarray:
    """The (3, 3) rotation matrix of an Orekit (static) transform (``r_to = M r_from``)."""
    return np.array([list(row) for row in transform.getRotation().getMatrix()])


def grid_cached(cache: dict, key: int, compute: Callable[[], tuple], limit: int = 10000) -> tuple:
    """``cache[key]``, computed by ``compute()`` on a miss; the cache is emptied past ``limit``
    entries (the exact transforms on the :data:`TOD_GRID_S` grid, reused by nearby samples)."""
    hit = cache.get(key)
    if hit is None:
        hit = compute()
        if len(cache) > limit:
            cache.clear()
        cache[key] = hit
    return hit

"""Independent random streams, one per named error source, derived from the run seed.

Every random error source in covey (a navigation white noise on one spacecraft, an actuator
pointing error, ...) draws from its own :class:`numpy.random.Generator`, built from the run seed
and the source's name with numpy's ``SeedSequence`` spawn keys. Streams of different names are
statistically independent, and switching one source on or off (or drawing more or fewer numbers
from it) never changes the draws of any other source.

Source names are paths: ``stream(seed, "nav/abs/chief/pos/white")`` and
``stream(seed, "nav", "abs", "chief", "pos", "white")`` are the same stream. Each path component
becomes one 32-bit word of the spawn key (its CRC-32), so the key is stable across Python versions
and processes (unlike ``hash``).
"""

from __future__ import annotations

import zlib

import numpy as np
from scipy.signal import lfilter

from sim.errors import ScenarioError

__all__ = ["source_key", "stream", "gauss_markov"]


def source_key(*source: str) -> tuple[int, ...]:
    """The spawn key of a source path: CRC-32 of each ``/``-separated component.

    Parameters
    ----------
    *source : str
        Path components; each may itself contain ``/``.

    Returns
    -------
    tuple of int
        One unsigned 32-bit word per path component.
    """
    parts: list[str] = []
    for s in source:
        if not isinstance(s, str):
            raise TypeError(f"random source name components must be str, got {s!r}")
        parts.extend(p for p in s.split("/") if p)
    if not parts:
        raise ValueError("a random source needs a non-empty name, e.g. 'nav/abs/chief/pos/white'")
    return tuple(zlib.crc32(p.encode("utf-8")) & 0xFFFFFFFF for p in parts)


def stream(seed: int, *source: str) -> np.random.Generator:
    """The random generator of one named error source.

    Parameters
    ----------
    seed : int
        Run seed (``RunConfig.seed``), a non-negative integer.
    *source : str
        Source path, e.g. ``"nav/abs/chief/pos/white"`` or ``"act", name, "pointing"``.

    Returns
    -------
    numpy.random.Generator
        ``default_rng(SeedSequence(seed, spawn_key=source_key(*source)))``: the same seed and name
        always give the same draws; different names give independent streams.

    Raises
    ------
    ScenarioError
        If ``seed`` is not a non-negative integer.
    """
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or int(seed) < 0:
        raise ScenarioError("seed", seed, "a non-negative integer (the run's random seed)")
    return np.random.default_rng(np.random.SeedSequence(int(seed), spawn_key=source_key(*source)))


def gauss_markov(x_prev, w, phi, q) -> np.ndarray:
    """The one first-order Gauss-Markov recursion of covey: ``x[k] = phi x[k-1] + q w[k]``.

    Parameters
    ----------
    x_prev : float or np.ndarray, shape (m,)
        The value before the first step (one per column).
    w : np.ndarray, shape (n,) or (n, m)
        Standard normal draws, one row per step.
    phi, q : float or np.ndarray, shape (m,)
        Per-step correlation ``exp(-dt / tau)`` and driving-noise scale (one per column); for a
        stationary process of standard deviation sigma, ``q = sigma sqrt(1 - phi^2)``.

    Returns
    -------
    np.ndarray, shape of ``w``
        The values after each step. Computed with ``scipy.signal.lfilter`` (the same numbers,
        bit for bit, as the plain loop: checked in tests/sim/test_navigation.py).
    """
    w = np.asarray(w, dtype=float)
    if w.ndim == 1:
        return lfilter([float(q)], [1.0, -float(phi)], w, zi=[float(phi) * float(x_prev)])[0]
    phi = np.broadcast_to(np.asarray(phi, dtype=float), w.shape[1:])
    q = np.broadcast_to(np.asarray(q, dtype=float), w.shape[1:])
    x_prev = np.broadcast_to(np.asarray(x_prev, dtype=float), w.shape[1:])
    out = np.empty_like(w)
    for j in range(w.shape[1]):
        out[:, j] = lfilter([q[j]], [1.0, -phi[j]], w[:, j], zi=[phi[j] * x_prev[j]])[0]
    return out

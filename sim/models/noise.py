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

from sim.errors import ScenarioError


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

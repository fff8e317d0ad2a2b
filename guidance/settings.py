"""The one settings checker of covey (pure Python): numbers with ranges, and "did you mean".

Used by the scenario reader (``sim.scenario.tables``), the built-in laws' settings
(``guidance.laws.base.setting_number``) and guidance's density model, so a number is judged and
described the same way everywhere; each caller wraps the message in its own exception type
(``ScenarioError`` in sim, ``GuidanceInputError`` in guidance).
"""

from __future__ import annotations

import difflib
import math
from typing import Any, Sequence

import numpy as np

__all__ = ["type_name", "range_text", "number_text", "check_number", "closest"]


def type_name(v: Any) -> str:
    """What a TOML value is, in words (``"a string"``, ``"an array"``, ...)."""
    if isinstance(v, bool):
        return "a boolean"
    if isinstance(v, (int, float, np.integer, np.floating)):
        return "a number"
    if isinstance(v, str):
        return "a string"
    if isinstance(v, list):
        return "an array"
    if isinstance(v, dict):
        return "a table"
    return type(v).__name__


def range_text(lo=None, hi=None, lo_open=False, hi_open=False) -> str:
    """``"in [0, 1)"``, ``">= 0"``, ``"< 5"`` or ``""``."""
    if lo is not None and hi is not None:
        return f"in {'(' if lo_open else '['}{lo:g}, {hi:g}{')' if hi_open else ']'}"
    if lo is not None:
        return f"{'>' if lo_open else '>='} {lo:g}"
    if hi is not None:
        return f"{'<' if hi_open else '<='} {hi:g}"
    return ""


def number_text(lo=None, hi=None, lo_open=False, hi_open=False, integer=False, unit="") -> str:
    """What is allowed, in words: ``"an integer in [1, 720]"``, ``"a number >= 0 (s)"``."""
    rng = range_text(lo, hi, lo_open, hi_open)
    return (f"{'an integer' if integer else 'a number'}{' ' + rng if rng else ''}"
            + (f" ({unit})" if unit else ""))


def check_number(v: Any, *, lo=None, hi=None, lo_open=False, hi_open=False, integer=False,
                 unit="", what: str | None = None, whole_float_ok: bool = False) -> float | int:
    """A finite real number (optionally whole) in a range, or ValueError saying what is allowed.

    Parameters
    ----------
    v : Any
        The value given (booleans and strings are not numbers; integers of any size are
        accepted and judged without overflow).
    lo, hi : float, optional
        Bounds (None: unbounded), closed unless ``lo_open`` / ``hi_open``.
    integer : bool
        Require an integer (then an ``int`` is returned; a float with a whole value is refused,
        as in TOML where ``1.0`` is a float).
    unit : str
        Named in the message.
    what : str, optional
        The description of what is allowed (default :func:`number_text`).
    whole_float_ok : bool
        With ``integer``, accept a float with a whole value (a law setting ``8.0``).

    Returns
    -------
    float or int

    Raises
    ------
    ValueError
        ``"must be <what>"`` (with ``", got <type>"`` for a non-number, ``" (finite)"`` for
        inf/nan and ``" (too large)"`` for an integer beyond the float range).
    """
    what = what or number_text(lo, hi, lo_open, hi_open, integer, unit)
    if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
        raise ValueError(f"must be {what}, got {type_name(v)}")
    if integer and not isinstance(v, (int, np.integer)):
        if not (whole_float_ok and math.isfinite(float(v)) and float(v).is_integer()):
            raise ValueError(f"must be {what}")
    try:
        x = float(v)
    except OverflowError:
        raise ValueError(f"must be {what} (too large)") from None
    if not math.isfinite(x):
        raise ValueError(f"must be {what} (finite)")
    if lo is not None and (x < lo or (lo_open and x == lo)):
        raise ValueError(f"must be {what}")
    if hi is not None and (x > hi or (hi_open and x == hi)):
        raise ValueError(f"must be {what}")
    return int(x) if integer and not isinstance(v, (int, np.integer)) else (int(v) if integer else x)


def closest(name: str, allowed: Sequence[str], cutoff: float = 0.6) -> str | None:
    """The allowed name closest to ``name`` (``difflib``), or None."""
    hit = difflib.get_close_matches(str(name), [str(a) for a in allowed], n=1, cutoff=cutoff)
    return hit[0] if hit else None

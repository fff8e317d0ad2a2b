"""One TOML table under validation: typed getters that refuse unknown keys (with a
"did you mean"), check numbers with :func:`guidance.settings.check_number` and name the key path,
the value and what is allowed in every :class:`sim.errors.ScenarioError`. Pure Python.
"""

from __future__ import annotations

import difflib
from typing import Any, Sequence


from guidance.settings import check_number, range_text, type_name
from sim.errors import ScenarioError


__all__ = ['Table', 'MISSING', 'check_num', 'unit_of']


MISSING = object()
"""Marks a required key (no default)."""
_MISSING = MISSING


_UNIT_SUFFIXES = (
    ("_kgpm3", "kg/m^3"), ("_mps", "m/s"), ("_Ns", "N s"), ("_m2", "m^2"), ("_km", "km"),
    ("_deg", "deg"), ("_days", "days"), ("_kg", "kg"), ("_sfu", "sfu"), ("_s", "s"), ("_m", "m"),
)


def unit_of(key: str) -> str:
    for suffix, unit in _UNIT_SUFFIXES:
        if key.endswith(suffix):
            return unit
    return ""


# ------------------------------------------------------------------------------------------
# A TOML table under validation
# ------------------------------------------------------------------------------------------


class Table:
    """One TOML table being read: knows its key path, refuses unknown keys up front."""

    def __init__(self, data: Any, path: str, allowed: Sequence[str], src: str, open_keys=False):
        if not isinstance(data, dict):
            raise ScenarioError(path, data, f"must be a table, got {type_name(data)}", path=src)
        self.d, self.path, self.src = data, path, src
        if not open_keys:
            for k in data:
                if k not in allowed:
                    close = difflib.get_close_matches(k, list(allowed), n=1, cutoff=0.6)
                    hint = (f"did you mean {close[0]!r}?" if close
                            else "valid keys: " + ", ".join(allowed))
                    raise ScenarioError(self.key(k), data[k], "unknown key", hint, path=src)

    # -- helpers ----------------------------------------------------------------------------
    def key(self, k: str) -> str:
        return f"{self.path}.{k}" if self.path else k

    def has(self, k: str) -> bool:
        return k in self.d

    def err(self, k: str, value: Any, allowed: str, hint: str = "") -> ScenarioError:
        return ScenarioError(self.key(k), value, allowed, hint, path=self.src)

    def _get(self, k, default, what):
        if k not in self.d:
            if default is _MISSING:
                raise self.err(k, None, f"required key missing; give {what}")
            return _MISSING
        return self.d[k]

    # -- typed getters ----------------------------------------------------------------------
    def num(self, k, default=_MISSING, *, lo=None, hi=None, lo_open=False, hi_open=False,
            integer=False, unit=None) -> Any:
        unit = unit_of(k) if unit is None else unit
        rng = range_text(lo, hi, lo_open, hi_open)
        what = f"{'an integer' if integer else 'a number'}{' ' + rng if rng else ''}"
        what += f" ({unit})" if unit else ""
        v = self._get(k, default, what)
        if v is _MISSING:
            return default
        return _check_num(v, what, lo, hi, lo_open, hi_open, integer,
                          lambda val, msg: self.err(k, val, msg))

    def boolean(self, k, default=_MISSING) -> bool:
        v = self._get(k, default, "true or false")
        if v is _MISSING:
            return default
        if not isinstance(v, bool):
            raise self.err(k, v, f"must be true or false, got {type_name(v)}")
        return v

    def string(self, k, default=_MISSING, *, choices=None, pattern=None, what="a string") -> Any:
        if choices:
            what = "one of " + ", ".join(repr(c) for c in choices)
        v = self._get(k, default, what)
        if v is _MISSING:
            return default
        if not isinstance(v, str):
            raise self.err(k, v, f"must be {what}, got {type_name(v)}")
        if choices and v not in choices:
            close = difflib.get_close_matches(v, list(choices), n=1, cutoff=0.5)
            raise self.err(k, v, f"must be {what}", f"did you mean {close[0]!r}?" if close else "")
        if pattern is not None and not pattern.match(v):
            raise self.err(k, v, f"must be {what}")
        return v

    def vec(self, k, n, default=_MISSING, *, lo=None, hi=None, lo_open=False, scalar_ok=False,
            unit=None) -> Any:
        unit = unit_of(k) if unit is None else unit
        rng = range_text(lo, hi, lo_open, False)
        what = f"an array of {n} numbers{' ' + rng if rng else ''}{f' ({unit})' if unit else ''}"
        if scalar_ok:
            what += " or one number for all"
        v = self._get(k, default, what)
        if v is _MISSING:
            return default
        if scalar_ok and isinstance(v, (int, float)) and not isinstance(v, bool):
            v = [v] * n
        if not isinstance(v, list) or len(v) != n:
            raise self.err(k, v, f"must be {what}")
        return tuple(_check_num(x, what, lo, hi, lo_open, False, False,
                                lambda val, msg: self.err(k, v, msg)) for x in v)

    def table(self, k, allowed, *, required=False, open_keys=False) -> "Table | None":
        if k not in self.d:
            if required:
                raise self.err(k, None, "required table missing")
            return None
        return Table(self.d[k], self.key(k), allowed, self.src, open_keys=open_keys)

    def exclusive(self, *keys, required=True) -> str | None:
        """The one of ``keys`` that is given (error if several, or none when required)."""
        given = [k for k in keys if k in self.d]
        if len(given) > 1:
            raise self.err(given[1], self.d[given[1]],
                           f"give only one of {', '.join(keys)}", f"{given[0]} is also given")
        if not given:
            if required:
                raise self.err(keys[0], None, f"required key missing; give one of {', '.join(keys)}")
            return None
        return given[0]


def _check_num(v, what, lo, hi, lo_open, hi_open, integer, err):
    try:
        return check_number(v, lo=lo, hi=hi, lo_open=lo_open, hi_open=hi_open, integer=integer,
                            what=what)
    except ValueError as exc:
        raise err(v, str(exc)) from None

check_num = _check_num

"""A small TOML writer for the tables ``tomllib`` reads (tables, arrays of tables, strings,
numbers, booleans, date-times, arrays): a campaign's inline ``[scenario]`` becomes scenario text
that is stored in every run log, as a scenario file would be. Pure Python.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import re
from typing import Any

__all__ = ["dumps"]

_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(k: str) -> str:
    return k if _BARE.match(k) else json.dumps(k)


def _value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, (_dt.datetime, _dt.date, _dt.time)):
        return v.isoformat()
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"cannot write {type(v).__name__} as TOML")


def _is_table_array(v: Any) -> bool:
    return isinstance(v, list) and bool(v) and all(isinstance(x, dict) for x in v)


def _emit(out: list[str], table: dict, prefix: str) -> None:
    plain = [(k, v) for k, v in table.items() if not isinstance(v, dict) and not _is_table_array(v)]
    for k, v in plain:
        out.append(f"{_key(k)} = {_value(v)}")
    for k, v in table.items():
        name = f"{prefix}.{_key(k)}" if prefix else _key(k)
        if isinstance(v, dict):
            out.append("")
            out.append(f"[{name}]")
            _emit(out, v, name)
        elif _is_table_array(v):
            for item in v:
                out.append("")
                out.append(f"[[{name}]]")
                _emit(out, item, name)


def dumps(tables: dict) -> str:
    """TOML text of ``tables`` (``tomllib.loads(dumps(t)) == t`` for what tomllib produces)."""
    out: list[str] = []
    _emit(out, tables, "")
    return "\n".join(out).lstrip("\n") + "\n"

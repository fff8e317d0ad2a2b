"""``--set KEY=VALUE`` overrides: a key path (``deputies[1].roe_m``, ``run.duration_days``)
applied to the raw TOML tables before validation. Pure Python.
"""

from __future__ import annotations

import re
from typing import Any


from sim.errors import ScenarioError



__all__ = ['apply_override']


# ------------------------------------------------------------------------------------------
# Overrides
# ------------------------------------------------------------------------------------------

_ALTERNATIVES = (
    ("duration_days", "duration_s"), ("altitude_km", "a_km"), ("i_deg", "sun_synchronous"),
    ("mean_anomaly_deg", "u_deg"), ("deadline_days", "deadline_s"), ("roe_m", "orbit"),
)
_KEY_RE = re.compile(r"[A-Za-z0-9_-]+(?:\.[A-Za-z0-9_-]+|\[[0-9]{1,6}\])*")
_PART_RE = re.compile(r"([A-Za-z0-9_-]+)|\[([0-9]+)\]")
_WHAT = ("override key must be a dotted key path of bare TOML keys and [index] parts, such as "
         "run.duration_days or deputies[0].roe_m")


def _path_text(parts: list[Any]) -> str:
    out = ""
    for p in parts:
        out += f"[{p}]" if isinstance(p, int) else (f".{p}" if out else p)
    return out


def apply_override(raw: dict, dotted: str, value: Any, src: str) -> None:
    """Set ``value`` at the key path ``dotted`` of the raw tables (missing tables are made).

    Raises
    ------
    ScenarioError
        The key path is malformed, starts with an index, indexes a table or an element the file
        does not have, or goes through a value that is not a table or an array.
    """
    key = str(dotted).strip()
    if not _KEY_RE.fullmatch(key):
        raise ScenarioError(key, value, _WHAT, path=src)
    parts: list[Any] = [m.group(1) if m.group(1) is not None else int(m.group(2))
                        for m in _PART_RE.finditer(key)]
    node: Any = raw
    for n, (k, nxt) in enumerate(zip(parts[:-1], parts[1:])):
        node = _step(node, k, nxt, parts[:n + 1], key, value, src)
    last = parts[-1]
    where = _path_text(parts[:-1])
    if isinstance(last, int):
        if not isinstance(node, list):
            raise ScenarioError(key, value, f"{where} is {_kind(node)}, not an array", path=src)
        if last >= len(node):
            raise ScenarioError(key, value, f"no such element: {where} has {len(node)}", path=src)
        node[last] = value
        return
    if isinstance(node, list):
        raise ScenarioError(key, value, f"{where} is an array: give an [index] before .{last}",
                            path=src)
    if not isinstance(node, dict):
        raise ScenarioError(key, value, f"the key path goes through {where} = {_short(node)}, "
                            "which is not a table", path=src)
    for pair in _ALTERNATIVES:
        if last in pair:
            for other in pair:
                if other != last:
                    node.pop(other, None)
    node[last] = value


def _kind(node: Any) -> str:
    return "a table" if isinstance(node, dict) else f"the value {_short(node)}"


def _short(v: Any) -> str:
    r = repr(v)
    return r if len(r) <= 60 else r[:57] + "..."


def _step(node: Any, k: Any, nxt: Any, done: list[Any], key: str, value: Any, src: str) -> Any:
    where = _path_text(done[:-1])
    if isinstance(k, int):
        if not isinstance(node, list):
            raise ScenarioError(key, value, f"{where} is {_kind(node)}, not an array", path=src)
        if k >= len(node):
            raise ScenarioError(key, value, f"no such element: {where} has {len(node)}", path=src)
        return node[k]
    if isinstance(node, list):
        raise ScenarioError(key, value, f"{where} is an array: give an [index] before .{k}",
                            path=src)
    if not isinstance(node, dict):
        raise ScenarioError(key, value, f"the key path goes through {where} = {_short(node)}, "
                            "which is not a table", path=src)
    if k not in node:
        if isinstance(nxt, int):
            raise ScenarioError(key, value, f"no such element: {_path_text(done)} is not in the "
                                "file", path=src)
        node[k] = {}
    return node[k]

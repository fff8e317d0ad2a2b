"""``--set KEY=VALUE`` overrides: a key path (``deputies[1].roe_m``, ``run.duration_days``)
applied to the raw TOML tables before validation. Pure Python.
"""

from __future__ import annotations

import re
from typing import Any


from guidance.settings import type_name
from sim.errors import ScenarioError



__all__ = ["apply_override", "split_key", "join_key"]


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


def split_key(dotted: str) -> list[Any]:
    """The parts of a key path: names (str) and indices (int).

    ``"deputies[0].roe_m[1]"`` -> ``["deputies", 0, "roe_m", 1]``.
    """
    return [m.group(1) if m.group(1) is not None else int(m.group(2))
            for m in _PART_RE.finditer(dotted)]


def join_key(parts) -> str:
    """Inverse of :func:`split_key`: ``["deputies", 0, "roe_m"]`` -> ``"deputies[0].roe_m"``."""
    out = ""
    for p in parts:
        if isinstance(p, int):
            out += f"[{p}]"
        else:
            out += f".{p}" if out else str(p)
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
    where = join_key(parts[:-1])
    if isinstance(last, int):
        if not isinstance(node, list):
            raise _not_array(key, value, where, node, src)
        if last >= len(node):
            raise _out_of_range(key, value, where, node, last, src)
        node[last] = value
        return
    if isinstance(node, list):
        raise ScenarioError(key, value, f"{where} is an array: address an element with [i]",
                            path=src)
    if not isinstance(node, dict):
        raise _through(key, value, where, node, src)
    for pair in _ALTERNATIVES:
        if last in pair:
            for other in pair:
                if other != last:
                    node.pop(other, None)
    node[last] = value


def _out_of_range(key, value, where, node, k, src) -> ScenarioError:
    n = len(node)
    rng = f"indices 0 to {n - 1}" if n else "no elements"
    return ScenarioError(key, value, f"index [{k}] is out of range: {where} has {n} "
                         f"element{'s' if n != 1 else ''} in the file ({rng})", path=src)


def _not_array(key, value, where, node, src) -> ScenarioError:
    if isinstance(node, dict):
        return ScenarioError(key, value, f"{where} is a table, not an array", path=src)
    return _through(key, value, where, node, src)


def _through(key, value, where, node, src) -> ScenarioError:
    return ScenarioError(key, value, f"the path goes through {where} = {_short(node)}, which is "
                         f"{type_name(node)}, not a table or an array", path=src)


def _short(v: Any) -> str:
    r = repr(v)
    return r if len(r) <= 60 else r[:57] + "..."


def _step(node: Any, k: Any, nxt: Any, done: list[Any], key: str, value: Any, src: str) -> Any:
    where = join_key(done[:-1])
    if isinstance(k, int):
        if not isinstance(node, list):
            raise _not_array(key, value, where, node, src)
        if k >= len(node):
            raise _out_of_range(key, value, where, node, k, src)
        return node[k]
    if isinstance(node, list):
        raise ScenarioError(key, value, f"{where} is an array: address an element with [i]",
                            path=src)
    if not isinstance(node, dict):
        raise _through(key, value, where, node, src)
    if k not in node:
        if isinstance(nxt, int):
            raise ScenarioError(key, value, f"{join_key(done)} is not in the file: [{nxt}] needs "
                                "an array the file has", path=src)
        node[k] = {}
    return node[k]

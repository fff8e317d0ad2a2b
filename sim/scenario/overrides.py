"""``--set KEY=VALUE`` overrides: a key path (``deputies[1].roe_m``, ``run.duration_days``,
``deputies[0].roe_m[1]``) applied to the raw TOML tables before validation. Pure Python.

A key path is names joined by ``.``, each optionally followed by ``[i]`` indices (counted from 0):
``deputies[0]`` is an element of the array of tables ``[[deputies]]``, ``roe_m[1]`` one element of
a numeric array. A missing table key is created (so ``--set actuators.time_sigma_s=0.1`` works on a
file without ``[actuators]``); an index must name an element the file has.
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
_PART_RE = re.compile(r"([^.\[\]]+)|\[(\d+)\]")


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


def _index_error(dotted, value, here, node, k, src) -> ScenarioError:
    n = len(node)
    rng = f"indices 0 to {n - 1}" if n else "no elements"
    return ScenarioError(dotted, value, f"index [{k}] is out of range: {here} has {n} "
                         f"element{'s' if n != 1 else ''} in the file ({rng})", path=src)


def _not_container(dotted, value, here, node, src) -> ScenarioError:
    return ScenarioError(dotted, value, f"the path goes through {here} = {node!r}, which is "
                         f"{type_name(node)}, not a table or an array", path=src)


def apply_override(raw: dict, dotted: str, value: Any, src: str) -> None:
    """Set ``dotted`` to ``value`` in the raw TOML tables ``raw`` (in place).

    Parameters
    ----------
    raw : dict
        The file's tables as read by ``tomllib``.
    dotted : str
        Key path, e.g. ``run.duration_days``, ``deputies[1].roe_m`` or ``deputies[0].roe_m[1]``.
    value : Any
        The new value (validated later with the rest of the file).
    src : str
        The file, for the error message.

    Raises
    ------
    ScenarioError
        An empty path, an index out of range (naming the array and its length), an index on a
        table or a name on an array, or a path through a value that is neither a table nor an
        array.
    """
    parts = split_key(dotted)
    if not parts or isinstance(parts[0], int):
        raise ScenarioError(dotted, value, "override key must be a dotted key path such as "
                            "run.duration_days, deputies[0].roe_m or deputies[0].roe_m[1]", path=src)
    node: Any = raw
    walked: list[Any] = []
    for k, nxt in zip(parts[:-1], parts[1:]):
        here = join_key(walked) or "(file)"
        if isinstance(node, list):
            if not isinstance(k, int) and k.isdigit():
                k = int(k)
            if not isinstance(k, int):
                raise ScenarioError(dotted, value, f"{here} is an array: address an element with "
                                    f"[i], e.g. {here}[0]", path=src)
            if k >= len(node):
                raise _index_error(dotted, value, here, node, k, src)
            node = node[k]
        elif isinstance(node, dict):
            if isinstance(k, int):
                raise ScenarioError(dotted, value, f"{here} is a table, not an array: address its "
                                    "keys with .name", path=src)
            if k not in node:
                node[k] = [] if isinstance(nxt, int) else {}
            node = node[k]
        else:
            raise _not_container(dotted, value, here, node, src)
        walked.append(k)
    last = parts[-1]
    here = join_key(walked) or "(file)"
    if isinstance(node, list):
        if not isinstance(last, int) and last.isdigit():
            last = int(last)
        if not isinstance(last, int):
            raise ScenarioError(dotted, value, f"{here} is an array: address an element with [i], "
                                f"e.g. {here}[0]", path=src)
        if last >= len(node):
            raise _index_error(dotted, value, here, node, last, src)
        node[last] = value
        return
    if not isinstance(node, dict):
        raise _not_container(dotted, value, here, node, src)
    if isinstance(last, int):
        raise ScenarioError(dotted, value, f"{here} is a table, not an array: address its keys "
                            "with .name", path=src)
    for pair in _ALTERNATIVES:
        if last in pair:
            for other in pair:
                if other != last:
                    node.pop(other, None)
    node[last] = value

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
_PART_RE = re.compile(r"([^.\[\]]+)|\[(\d+)\]")


def apply_override(raw: dict, dotted: str, value: Any, src: str) -> None:
    parts: list[Any] = []
    for m in _PART_RE.finditer(dotted):
        parts.append(m.group(1) if m.group(1) is not None else int(m.group(2)))
    if not parts:
        raise ScenarioError(dotted, value, "override key must be a dotted key path such as "
                            "run.duration_days or deputies[0].roe_m", path=src)
    node: Any = raw
    for k, nxt in zip(parts[:-1], parts[1:]):
        if isinstance(node, list):
            if not isinstance(k, int) and k.isdigit():
                k = int(k)
            if not isinstance(k, int) or k >= len(node):
                raise ScenarioError(dotted, value, f"no such element in the file ({len(node)} given)",
                                    path=src)
            node = node[k]
        else:
            if k not in node:
                node[k] = [] if isinstance(nxt, int) else {}
            node = node[k]
    last = parts[-1]
    if isinstance(node, list):
        if not isinstance(last, int) or last >= len(node):
            raise ScenarioError(dotted, value, "no such array element in the file", path=src)
        node[last] = value
        return
    if not isinstance(node, dict):
        raise ScenarioError(dotted, value, "override path goes through a value that is not a table",
                            path=src)
    for pair in _ALTERNATIVES:
        if last in pair:
            for other in pair:
                if other != last:
                    node.pop(other, None)
    node[last] = value

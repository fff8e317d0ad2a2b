"""The verification matrix the report shows: one :class:`VerificationRow` per requirement.

The rows come from whatever checked the requirements (the regression gate hands a list of rows to
:func:`sim.report.build.build_report`), or from a file given to ``covey report --requirements FILE``:

- CSV with a header row naming the columns ``id, text, measured, limit, margin, verdict`` and
  optionally ``units, metric, deputy`` (any order, extra columns ignored);
- JSON: a list of objects with those keys, or an object with such a list under ``"rows"``.

``metric`` (a campaign-summary or run metric name such as ``dv_total_mps``,
``final_error_norm_m`` or ``err_dlambda_m``) and ``deputy`` (empty: every deputy) let the report
draw the limit on the matching figure (the campaign CDFs).
"""

from __future__ import annotations

import csv
import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

from sim.errors import ScenarioError

__all__ = ["VerificationRow", "read_verification", "limits_for", "REQUIRED_FIELDS"]

REQUIRED_FIELDS = ("id", "text", "measured", "limit", "margin", "verdict")
_OPTIONAL = ("units", "metric", "deputy")


def _num(v: Any) -> Any:
    """A number when the text is one (else the text as given)."""
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return float(v)
    s = str(v).strip()
    try:
        return float(s)
    except ValueError:
        return s


@dataclass(frozen=True)
class VerificationRow:
    """One requirement and its result.

    Attributes
    ----------
    id : str
        Requirement identifier.
    text : str
        What is required (e.g. "final a dlambda error within 50 m at 95 %").
    measured, limit, margin : float or str
        Measured value, limit and margin (same units), or text.
    verdict : str
        ``pass``, ``fail`` or another word (shown as given; pass/fail are coloured).
    units : str
        Units of measured, limit and margin.
    metric : str
        Metric name the limit applies to (draws it on the matching figure), optional.
    deputy : str
        Deputy the row is about ("" = all), optional.
    """

    id: str
    text: str
    measured: Any
    limit: Any
    margin: Any
    verdict: str
    units: str = ""
    metric: str = ""
    deputy: str = ""

    @property
    def limit_value(self) -> float | None:
        """The limit as a finite number, or None."""
        v = _num(self.limit)
        return float(v) if isinstance(v, float) and math.isfinite(v) else None

    @property
    def passed(self) -> bool | None:
        w = self.verdict.strip().lower()
        return True if w in ("pass", "passed", "ok") else False if w in ("fail", "failed") else None


def _from_mapping(m: dict, where: str) -> VerificationRow:
    missing = [k for k in REQUIRED_FIELDS if k not in m]
    if missing:
        raise ScenarioError(f"{where}", sorted(m), f"a verification row with the fields "
                            f"{', '.join(REQUIRED_FIELDS)} (missing: {', '.join(missing)})")
    return VerificationRow(id=str(m["id"]), text=str(m["text"]), measured=_num(m["measured"]),
                           limit=_num(m["limit"]), margin=_num(m["margin"]),
                           verdict=str(m["verdict"]),
                           **{k: str(m.get(k, "") or "") for k in _OPTIONAL})


def read_verification(path: str | Path) -> list[VerificationRow]:
    """Read verification rows from a CSV or JSON file (format in the module docstring).

    Raises
    ------
    ScenarioError
        The file is missing, not CSV/JSON, or a row lacks a required field (the message names the
        file, the row and the fields).
    """
    p = Path(path)
    if not p.is_file():
        raise ScenarioError("--requirements", str(p), "an existing CSV or JSON file of "
                            "verification rows")
    text = p.read_text(encoding="utf-8")
    rows: list[VerificationRow] = []
    if p.suffix.lower() == ".json" or text.lstrip().startswith(("[", "{")):
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise ScenarioError("--requirements", str(p), f"valid JSON ({exc})") from None
        if isinstance(data, dict):
            data = data.get("rows", [])
        if not isinstance(data, list):
            raise ScenarioError("--requirements", str(p), "a JSON list of rows or {\"rows\": [...]}")
        for k, m in enumerate(data):
            if not isinstance(m, dict):
                raise ScenarioError(f"{p}: rows[{k}]", m, "an object with the row's fields")
            rows.append(_from_mapping(m, f"{p}: rows[{k}]"))
        return rows
    reader = csv.DictReader(text.splitlines())
    if not reader.fieldnames:
        raise ScenarioError("--requirements", str(p), "a CSV file with a header row "
                            + ", ".join(REQUIRED_FIELDS))
    for k, m in enumerate(reader):
        rows.append(_from_mapping({a.strip(): b for a, b in m.items() if a}, f"{p}: row {k + 2}"))
    return rows


def limits_for(rows: Sequence[VerificationRow], metric: str, deputy: str = "") -> list[tuple[str, float]]:
    """(requirement id, limit) of the rows about ``metric`` for ``deputy`` (or for all deputies)."""
    out = []
    for r in rows:
        if r.metric == metric and r.limit_value is not None and r.deputy in ("", deputy):
            out.append((r.id, r.limit_value))
    return out


"""Output of the gate: the verification matrix and comparison tables as a terminal table
(:func:`sim.judge.metrics.format_table`), CSV, JSON or Markdown, and the matrix as JUnit XML
(one ``<testsuite>``, one ``<testcase>`` per requirement) for CI.
"""

from __future__ import annotations

import csv
import io
import json
import math
import xml.etree.ElementTree as ET
from typing import Any, Mapping, Sequence

from sim.judge.metrics import format_table

__all__ = ["FORMATS", "CAUTION", "render_rows", "render_matrix", "junit_xml", "write_junit"]

FORMATS = ("table", "csv", "json", "markdown")

CAUTION = ("covey results are analysis aids, not flight certification: defer to the mission's own "
           "verification and validation.")


def _clean(v: Any) -> Any:
    """JSON-able: NaN and inf as None, numpy scalars as Python numbers."""
    if isinstance(v, dict):
        return {k: _clean(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_clean(x) for x in v]
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):
        try:
            v = v.item()
        except (ValueError, AttributeError):
            pass
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def _cell(v: Any, spec: str = "") -> str:
    if v is None:
        return ""
    try:
        return format(v, spec) if spec else str(v)
    except (TypeError, ValueError):
        return str(v)


def _md_escape(s: str) -> str:
    return str(s).replace("|", "\\|").replace("\n", " ")


def render_rows(columns: Sequence[tuple[str, str, str]], rows: Sequence[Mapping], fmt: str,
                title: str = "", notes: Sequence[str] = (), extra: Mapping | None = None) -> str:
    """A table in one of :data:`FORMATS`.

    Parameters
    ----------
    columns : sequence of (key, header, format spec)
    rows : sequence of mappings
    fmt : str
        ``table``, ``csv``, ``json`` or ``markdown``.
    title : str
        A line before the table (table, markdown), ``title`` in JSON.
    notes : sequence of str
        Lines after the table (table, markdown), ``notes`` in JSON; CSV leaves them out.
    extra : mapping, optional
        More top-level JSON fields.
    """
    if fmt == "json":
        doc = {"title": title, **(extra or {}), "rows": [dict(r) for r in rows],
               "notes": list(notes)}
        return json.dumps(_clean(doc), indent=1)
    if fmt == "csv":
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([k for k, _, _ in columns])
        for r in rows:
            w.writerow([_cell(r.get(k), "") if not isinstance(r.get(k), float)
                        else ("" if not math.isfinite(r[k]) else repr(r[k])) for k, _, _ in columns])
        return buf.getvalue().rstrip("\n")
    if fmt == "markdown":
        lines = [f"**{_md_escape(title)}**", ""] if title else []
        lines.append("| " + " | ".join(_md_escape(h) for _, h, _ in columns) + " |")
        lines.append("|" + "|".join("---" for _ in columns) + "|")
        for r in rows:
            lines.append("| " + " | ".join(_md_escape(_cell(r.get(k), s)) for k, _, s in columns)
                         + " |")
        if notes:
            lines.append("")
            lines.extend(f"- {_md_escape(n)}" for n in notes)
        return "\n".join(lines)
    if fmt != "table":
        raise ValueError(f"unknown format {fmt!r}; one of {', '.join(FORMATS)}")
    body = format_table([{k: ("" if r.get(k) is None else r.get(k)) for k, _, _ in columns}
                         for r in rows], columns)
    out = ([title] if title else []) + [body] + list(notes)
    return "\n".join(out)


_MATRIX_COLUMNS = (("id", "id", ""), ("text", "requirement", ""), ("measured_text", "measured", ""),
                   ("limit_text", "limit", ""), ("margin_text", "margin", ""),
                   ("verdict", "verdict", ""))


def _short(s: str, n: int = 48) -> str:
    return s if len(s) <= n else s[: n - 3] + "..."


def render_matrix(v, fmt: str = "table") -> str:
    """The verification matrix (:class:`sim.gate.check.Verification`) in one of :data:`FORMATS`."""
    rows = [r.as_dict() for r in v.rows]
    if fmt == "json":
        return render_rows(_MATRIX_COLUMNS, rows, "json", v.headline(), list(v.notes) + [CAUTION],
                           extra={"passed": v.passed, "candidate": v.candidate,
                                  "baseline": v.baseline, "requirements": v.requirements,
                                  "name": v.name, "kind": v.kind, "n_runs": v.n_runs,
                                  "counts": v.counts()})
    if fmt == "csv":
        cols = [(k, k, "") for k in ("id", "text", "metric", "deputy", "measured", "limit",
                                     "margin", "verdict", "measured_text", "limit_text", "detail")]
        return render_rows(cols, rows, "csv")
    if fmt == "markdown":
        for r in rows:
            r["verdict"] = {"fail": "**FAIL**", "pass": "pass"}.get(r["verdict"], r["verdict"])
        notes = [f"{r.id}: {r.detail}" for r in v.rows if r.detail] + list(v.notes) + [CAUTION]
        return render_rows(_MATRIX_COLUMNS, rows, "markdown", v.headline(), notes)
    for r in rows:
        r["text"] = _short(r["text"])
        r["verdict"] = r["verdict"].upper() if r["verdict"] == "fail" else r["verdict"]
    notes = [f"  {r.id}: {r.detail}" for r in v.rows if r.verdict != "pass" and r.detail]
    return render_rows(_MATRIX_COLUMNS, rows, "table", v.headline(),
                       notes + list(v.notes) + [CAUTION])


def junit_xml(v) -> str:
    """The verification matrix as JUnit XML: one ``<testsuite>``, one ``<testcase>`` per
    requirement (name = the requirement id) with ``<failure>`` when it fails and ``<skipped>``
    when it is n/a; each case's ``<system-out>`` holds the requirement text and the row."""
    c = v.counts()
    suite = ET.Element("testsuite", name=f"covey check {v.name}".strip(), tests=str(len(v.rows)),
                       failures=str(c["fail"]), errors="0", skipped=str(c["n/a"]), time="0")
    props = ET.SubElement(suite, "properties")
    for k, val in (("candidate", v.candidate), ("baseline", v.baseline),
                   ("requirements", v.requirements), ("caution", CAUTION)):
        ET.SubElement(props, "property", name=k, value=str(val))
    cls = "covey.check" + (f".{v.name}" if v.name else "")
    for r in v.rows:
        tc = ET.SubElement(suite, "testcase", classname=cls, name=r.id, time="0")
        line = f"{r.text} | measured {r.measured_text} | limit {r.limit_text} | margin {r.margin_text}"
        if r.verdict == "fail":
            f = ET.SubElement(tc, "failure", type="requirement not met",
                              message=f"{r.id} {r.text}: measured {r.measured_text}, limit "
                                      f"{r.limit_text}, margin {r.margin_text}")
            f.text = r.detail
        elif r.verdict == "n/a":
            ET.SubElement(tc, "skipped", message=r.detail or "not applicable")
        out = ET.SubElement(tc, "system-out")
        out.text = line + (f"\n{r.detail}" if r.detail else "")
    ET.indent(suite)
    return '<?xml version="1.0" encoding="utf-8"?>\n' + ET.tostring(suite, encoding="unicode") + "\n"


def write_junit(v, path) -> None:
    """Write :func:`junit_xml` to ``path``."""
    from pathlib import Path

    p = Path(path)
    if p.parent and not p.parent.exists():
        p.parent.mkdir(parents=True, exist_ok=True)
    p.write_text(junit_xml(v), encoding="utf-8")

"""Report tables: one :class:`Table` written as CSV (full precision), LaTeX (booktabs) and HTML.

Cells hold raw values (numbers, text, bools); each column has a format used for LaTeX and HTML
(``".3f"``, ``".4g"``, ``"d"``, ``""`` for text). NaN and None print as an en dash in LaTeX and
HTML and as an empty cell in CSV.
"""

from __future__ import annotations

import csv
import html
import io
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Sequence

import numpy as np

__all__ = ["Column", "Table", "fmt_cell", "latex_escape", "key_value_table"]


@dataclass(frozen=True)
class Column:
    """A table column.

    Attributes
    ----------
    key : str
        Machine name (the CSV header).
    header : str
        Header shown in LaTeX and HTML, with units in brackets (e.g. ``"dv [m/s]"``).
    fmt : str
        Format spec for LaTeX/HTML (``""``: ``str``).
    align : str
        ``"l"`` or ``"r"``.
    """

    key: str
    header: str
    fmt: str = ""
    align: str = "r"


@dataclass
class Table:
    """A titled table of rows.

    Attributes
    ----------
    name : str
        File stem (``tables/<name>.csv`` and ``.tex``).
    title : str
        Caption.
    columns : list of Column
    rows : list of list
        Raw cell values, one list per row, in column order.
    note : str
        A sentence under the table (sources, frames, units).
    number : int
        Set by the report builder ("Table N").
    """

    name: str
    title: str
    columns: list
    rows: list = field(default_factory=list)
    note: str = ""
    number: int = 0
    row_classes: list = field(default_factory=list)  # optional CSS class per row (HTML)

    def add(self, *cells: Any, css: str = "") -> None:
        if len(cells) != len(self.columns):
            raise ValueError(f"table {self.name}: {len(cells)} cells for {len(self.columns)} columns")
        self.rows.append(list(cells))
        self.row_classes.append(css)

    # ---------------------------------------------------------------------------------- CSV
    def to_csv(self) -> str:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([c.key for c in self.columns])
        for r in self.rows:
            w.writerow([_csv_cell(v) for v in r])
        return buf.getvalue()

    # -------------------------------------------------------------------------------- LaTeX
    def to_latex(self) -> str:
        """A ``table`` float with a booktabs ``tabular`` (needs ``\\usepackage{booktabs}``)."""
        spec = "".join(c.align for c in self.columns)
        lines = ["% covey report table (needs \\usepackage{booktabs})",
                 "\\begin{table}[htbp]", "\\centering", "\\small",
                 f"\\caption{{{latex_escape(self.title)}}}",
                 f"\\label{{tab:covey-{self.name.replace('_', '-')}}}",
                 f"\\begin{{tabular}}{{{spec}}}", "\\toprule",
                 " & ".join(latex_escape(c.header) for c in self.columns) + " \\\\", "\\midrule"]
        for r in self.rows:
            lines.append(" & ".join(latex_escape(fmt_cell(v, c.fmt, dash="--"))
                                    for v, c in zip(r, self.columns)) + " \\\\")
        lines += ["\\bottomrule", "\\end{tabular}"]
        if self.note:
            lines.append(f"\\par\\smallskip\\footnotesize {latex_escape(self.note)}")
        lines += ["\\end{table}", ""]
        return "\n".join(lines)

    # --------------------------------------------------------------------------------- HTML
    def to_html(self) -> str:
        cap = f"Table {self.number}. " if self.number else ""
        out = [f'<table class="data" id="tab-{html.escape(self.name)}">',
               f"<caption>{html.escape(cap + self.title)}</caption>", "<thead><tr>"]
        out += [f'<th class="{c.align}">{html.escape(c.header)}</th>' for c in self.columns]
        out.append("</tr></thead><tbody>")
        for k, r in enumerate(self.rows):
            css = self.row_classes[k] if k < len(self.row_classes) else ""
            out.append(f'<tr class="{html.escape(css)}">' if css else "<tr>")
            for v, c in zip(r, self.columns):
                out.append(f'<td class="{c.align}">{html.escape(fmt_cell(v, c.fmt))}</td>')
            out.append("</tr>")
        out.append("</tbody></table>")
        if self.note:
            out.append(f'<p class="note">{html.escape(self.note)}</p>')
        return "\n".join(out)

    def write(self, folder: str | Path) -> dict[str, Path]:
        """Write ``<folder>/<name>.csv`` and ``<folder>/<name>.tex``."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        p_csv, p_tex = folder / f"{self.name}.csv", folder / f"{self.name}.tex"
        p_csv.write_text(self.to_csv(), encoding="utf-8")
        p_tex.write_text(self.to_latex(), encoding="utf-8")
        return {"csv": p_csv, "tex": p_tex}


def _is_missing(v: Any) -> bool:
    if v is None:
        return True
    if isinstance(v, (float, np.floating)) and not math.isfinite(float(v)):
        return bool(math.isnan(float(v)))
    return False


def _csv_cell(v: Any) -> str:
    if _is_missing(v):
        return ""
    if isinstance(v, (bool, np.bool_)):
        return "true" if v else "false"
    if isinstance(v, (np.integer, int)):
        return str(int(v))
    if isinstance(v, (np.floating, float)):
        return repr(float(v))
    return str(v)


def fmt_cell(v: Any, fmt: str = "", dash: str = "\u2013") -> str:
    """A cell as text: ``format(v, fmt)`` for numbers, ``dash`` for NaN/None, yes/no for bools."""
    if _is_missing(v):
        return dash
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if fmt and isinstance(v, (int, float, np.integer, np.floating)):
        try:
            if fmt.endswith("d"):
                return format(int(v), fmt)
            return format(float(v), fmt)
        except (TypeError, ValueError):
            return str(v)
    if isinstance(v, (np.floating, float)):
        return format(float(v), ".6g")
    return str(v)


_LATEX = {"\\": "\\textbackslash{}", "&": "\\&", "%": "\\%", "$": "\\$", "#": "\\#", "_": "\\_",
          "{": "\\{", "}": "\\}", "~": "\\textasciitilde{}", "^": "\\textasciicircum{}",
          "<": "\\textless{}", ">": "\\textgreater{}", "\u2013": "--", "\u00b1": "$\\pm$",
          "\u03bb": "$\\lambda$", "\u03b4": "$\\delta$", "\u03c3": "$\\sigma$", "\u2264": "$\\le$",
          "\u00b2": "$^2$", "\u00b3": "$^3$", "\u2212": "-", "\u0394": "$\\Delta$",
          "\u03a3": "$\\Sigma$", "|": "$|$", "\u00d7": "$\\times$", "\u2265": "$\\ge$",
          "\u00b0": "$^\\circ$"}


def latex_escape(text: str) -> str:
    """Escape LaTeX's special characters (and map the few non-ASCII symbols the report uses)."""
    return "".join(_LATEX.get(ch, ch) for ch in str(text))


def key_value_table(name: str, title: str, items: Sequence[tuple[str, Any]], note: str = "") -> Table:
    """A two-column (item, value) table."""
    t = Table(name, title, [Column("item", "item", "", "l"), Column("value", "value", "", "l")],
              note=note)
    for k, v in items:
        t.add(k, v)
    return t


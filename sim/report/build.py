"""``covey report``: the verification report of a run log or a campaign, from the files alone.

:func:`build_report` writes into one folder::

    report.html                 the self-contained page (figures embedded, no network needed)
    figures/figNN_<name>.png    every figure, numbered in report order (PNG, deterministic bytes)
    figures/figNN_<name>.pdf    the same figure as vector PDF
    figures/index.csv           number, name, title, caption and files of every figure (and the
                                figures not drawn, with the reason)
    figures/figures.tex         a LaTeX figure environment per figure (\\includegraphics + caption)
    tables/<name>.csv / .tex    every table as CSV (full precision) and LaTeX (booktabs)
"""

from __future__ import annotations

import csv
import io
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Sequence


from sim import __version__
from sim.errors import ScenarioError
from sim.report.figures import FigureSpec, Skipped
from sim.report.html import render_page
from sim.report.style import PNG_DPI, label_figure, save_figure
from sim.report.tables import Table, latex_escape
from sim.report.verification import VerificationRow, read_verification

__all__ = ["ReportResult", "build_report", "source_kind", "verification_table"]


@dataclass
class ReportResult:
    """What :func:`build_report` wrote.

    Attributes
    ----------
    out_dir, html : Path
    kind : str
        ``"run"`` or ``"campaign"``.
    figures : list of FigureSpec
        Numbered, with their files and data arrays.
    skipped : list of Skipped
    tables : list of Table
    timings_s : dict
        Wall time of the steps (read, figures, tables, html), s.
    """

    out_dir: Path
    html: Path
    kind: str
    figures: list = field(default_factory=list)
    skipped: list = field(default_factory=list)
    tables: list = field(default_factory=list)
    timings_s: dict = field(default_factory=dict)

    def figure(self, name: str) -> FigureSpec:
        for f in self.figures:
            if f.name == name:
                return f
        raise KeyError(f"no figure {name!r}; figures: {[f.name for f in self.figures]}")


_PAGE_ORDER = {
    "run": ["scenario", "provenance", "verification", "compare", "metrics", "final_roe", "impulses",
            "navigation", "events", "data_files"],  # a long events table joins data_files at the end
    "campaign": ["campaign", "scenario", "provenance", "verification", "compare", "campaign_metrics",
                 "performance_bounds", "sweep", "error_budget"]}
"""Table order on the page (and numbering); the long data-file list goes to the appendix."""


def source_kind(path: str | Path) -> str:
    """``"run"`` or ``"campaign"``: :func:`sim.gate.sources.source_kind`, with a missing path
    named as the command's argument.

    Raises
    ------
    ScenarioError
        ``RUN_OR_CAMPAIGN``: nothing there.
    LogFormatError
        Neither a run log nor a campaign folder.
    """
    from sim.gate.sources import source_kind as kind

    p = Path(path)
    if not p.exists():
        raise ScenarioError("RUN_OR_CAMPAIGN", str(p), "an existing run log (.h5) or campaign folder")
    return kind(p)


def verification_table(rows: Sequence[VerificationRow]) -> Table:
    from sim.report.tables import Column

    t = Table("verification", "Verification matrix",
              [Column("id", "requirement", "", "l"), Column("text", "text", "", "l"),
               Column("measured", "measured", ".5g"), Column("limit", "limit", ".5g"),
               Column("margin", "margin", ".4g"), Column("units", "units", "", "l"),
               Column("verdict", "verdict", "", "l")],
              note="Results as given to the report (requirements checked elsewhere); margins "
                   "as stated there.")
    for r in rows:
        css = {True: "pass", False: "fail"}.get(r.passed, "")
        t.add(r.id, r.text, r.measured, r.limit, r.margin, r.units, r.verdict, css=css)
    return t


def _figures_index(figs: Sequence[FigureSpec], skipped: Sequence[Skipped]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["number", "name", "title", "caption", "png", "pdf", "not_drawn_reason"])
    for f in figs:
        w.writerow([f.number, f.name, f.title, f.caption,
                    f.files["png"].name if "png" in f.files else "",
                    f.files["pdf"].name if "pdf" in f.files else "", ""])
    for s in skipped:
        w.writerow(["", s.name, s.title, "", "", "", s.reason])
    return buf.getvalue()


def _figures_tex(figs: Sequence[FigureSpec]) -> str:
    out = ["% covey report figures: \\input{figures/figures.tex} (needs \\usepackage{graphicx})"]
    for f in figs:
        if "pdf" not in f.files:
            continue
        out += ["\\begin{figure}[htbp]", "\\centering",
                f"\\includegraphics[width=\\linewidth]{{figures/{f.files['pdf'].name}}}",
                f"\\caption{{{latex_escape(f.caption)}}}",
                f"\\label{{fig:covey-{f.name.replace('_', '-')}}}", "\\end{figure}", ""]
    return "\n".join(out)


def build_report(source: str | Path, out_dir: str | Path, *,
                 requirements: str | Path | Sequence[VerificationRow] | None = None,
                 baseline: str | Path | None = None, confidence: float = 0.95,
                 formats: Sequence[str] = ("png", "pdf"), dpi: int = PNG_DPI) -> ReportResult:
    """Write the report of a run log or campaign (layout in the module docstring).

    Parameters
    ----------
    source : path
        A run log (``.h5``), or a campaign folder (or its ``summary.h5``).
    out_dir : path
        Folder to write (created; files of the same names are replaced, and the numbered figures
        of an earlier report in ``figures/`` removed).
    requirements : path or sequence of VerificationRow, optional
        The verification matrix: rows, or a CSV/JSON file of them
        (:func:`sim.report.verification.read_verification`).
    baseline : path, optional
        A run log (for a run) or a campaign (for a campaign) to overlay and compare.
    confidence : float
        Probability of the campaign confidence ellipses and bounds, in (0, 1).
    formats : sequence of {"png", "pdf"}
        Figure files to write (PNG is always made: the page embeds it).
    dpi : int
        PNG resolution.

    Raises
    ------
    ScenarioError
        Bad arguments (missing source, baseline of the other kind, confidence out of range).
    LogFormatError
        A log or summary that cannot be read.
    """
    if not 0.0 < float(confidence) < 1.0:
        raise ScenarioError("--confidence", confidence, "a probability in (0, 1), e.g. 0.95")
    bad = [f for f in formats if f not in ("png", "pdf")]
    if bad:
        raise ScenarioError("formats", bad, "png and/or pdf")
    formats = tuple(dict.fromkeys(["png", *formats]))
    timings = {}
    t0 = time.perf_counter()
    kind = source_kind(source)
    rows: list[VerificationRow] = []
    if requirements is not None:
        rows = (read_verification(requirements) if isinstance(requirements, (str, Path))
                else list(requirements))
    if baseline is not None and source_kind(baseline) != kind:
        raise ScenarioError("--baseline", str(baseline), f"a {kind} like the report's source "
                            f"({'a run log' if kind == 'run' else 'a campaign folder'})")
    lab = ("candidate", "baseline") if baseline is not None else ("", "")
    if kind == "run":
        from sim.report.rundata import load_run
        from sim.report.single import run_figures, run_tables

        srcs = [load_run(source, lab[0])] + ([load_run(baseline, lab[1])] if baseline else [])
        timings["read_s"] = time.perf_counter() - t0
        built = run_figures(srcs)
        tables = run_tables(srcs)
        main = srcs[0]
        title = f"Verification report: run {main.name}"
        subtitle = (f"single run, law {main.law}, status {main.status}, epoch {main.epoch_utc}, "
                    f"{main.t_end_s / 86400:.4g} days; log {main.path.name}"
                    + (f"; baseline {srcs[1].path.name}" if baseline else ""))
        scenario_text = main.scenario_text
    else:
        from sim.report.campaign import campaign_figures, campaign_tables, load_campaign

        srcs = [load_campaign(source, lab[0])] + ([load_campaign(baseline, lab[1])] if baseline else [])
        timings["read_s"] = time.perf_counter() - t0
        built = campaign_figures(srcs, rows, confidence)
        tables = campaign_tables(srcs, confidence)
        main = srcs[0]
        title = f"Verification report: campaign {main.name}"
        subtitle = (f"{main.kind.replace('_', ' ')} campaign, {main.summary.n_runs} runs, "
                    f"{int(main.ok.sum())} ok; summary {main.path}"
                    + (f"; baseline {srcs[1].path}" if baseline else ""))
        scenario_text = main.first_run.scenario_text if main.first_run is not None else ""
    t1 = time.perf_counter()
    timings["build_figures_s"] = t1 - t0 - timings["read_s"]

    out = Path(out_dir)
    fig_dir, tab_dir = out / "figures", out / "tables"
    fig_dir.mkdir(parents=True, exist_ok=True)
    tab_dir.mkdir(parents=True, exist_ok=True)
    for old in list(fig_dir.glob("fig[0-9][0-9]_*.png")) + list(fig_dir.glob("fig[0-9][0-9]_*.pdf")):
        old.unlink()  # figures of an earlier report in this folder (numbers may have moved)
    figs = [f for f in built if isinstance(f, FigureSpec)]
    skipped = [f for f in built if isinstance(f, Skipped)]
    for n, f in enumerate(figs, start=1):
        f.number = n
        label_figure(f.fig, n, f.title)
        files = save_figure(f.fig, fig_dir / f"fig{n:02d}_{f.name}", formats, dpi=dpi,
                            title=f"Figure {n}. {f.title}")
        f.png_bytes = files.pop("png_bytes")
        f.files = files
    (fig_dir / "index.csv").write_text(_figures_index(figs, skipped), encoding="utf-8")
    (fig_dir / "figures.tex").write_text(_figures_tex(figs), encoding="utf-8")
    t2 = time.perf_counter()
    timings["save_figures_s"] = t2 - t1

    if rows:
        tables.insert(1, verification_table(rows))
    order = _PAGE_ORDER[kind]
    tables.sort(key=lambda t: order.index(t.name) if t.name in order else len(order))
    long_tables = [t for t in tables if t.name == "data_files"
                   or (t.name == "events" and len(t.rows) > 12)]
    long_names = {t.name for t in long_tables}
    for n, t in enumerate(tables, start=1):  # numbered in the order the page shows them
        t.number = n
        t.write(tab_dir)
    by = {t.name: t for t in tables}

    def sec(names):  # long tables go to the appendix, collapsed
        return "\n".join(by[n].to_html() for n in names if n in by and n not in long_names)

    if kind == "run":
        sections = [("scenario", "Scenario", sec(["scenario"])),
                    ("provenance", "Software and data provenance", sec(["provenance"]))]
        if rows:
            sections.append(("verification", "Verification matrix", sec(["verification"])))
        if "compare" in by:
            sections.append(("compare", "Candidate versus baseline", sec(["compare"])))
        sections.append(("metrics", "Metric tables",
                         sec(["metrics", "final_roe", "impulses", "navigation", "events"])))
    else:
        sections = [("campaign", "Campaign", sec(["campaign"]))]
        if "scenario" in by:
            sections.append(("scenario", "Scenario (first run of the campaign)", sec(["scenario"])))
        if "provenance" in by:
            sections.append(("provenance", "Software and data provenance", sec(["provenance"])))
        if rows:
            sections.append(("verification", "Verification matrix", sec(["verification"])))
        if "compare" in by:
            sections.append(("compare", "Candidate versus baseline", sec(["compare"])))
        sections.append(("metrics", "Metric tables",
                         sec(["campaign_metrics", "performance_bounds", "sweep", "error_budget"])))
    appendix = []
    if scenario_text:
        appendix.append(("Scenario file (verbatim from the run log)", scenario_text))
    if kind == "campaign" and main.summary.campaign_toml:
        appendix.append(("Campaign file (verbatim from the summary)", main.summary.campaign_toml))
    for t in long_tables:
        appendix.append((f"Table {t.number}. {t.title} ({len(t.rows)} rows)", t.to_html(), True))
    page = render_page(title=title, subtitle=subtitle + f"; covey {__version__}", sections=sections,
                       figures=figs, skipped=skipped, appendix=appendix)
    html_path = out / "report.html"
    html_path.write_text(page, encoding="utf-8")
    timings["tables_html_s"] = time.perf_counter() - t2
    timings["total_s"] = time.perf_counter() - t0
    return ReportResult(out, html_path, kind, figs, skipped, tables, timings)

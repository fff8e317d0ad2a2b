"""``covey report RUN_OR_CAMPAIGN -o DIR``: the verification report (figures as PNG and PDF,
tables as CSV and LaTeX, one self-contained HTML page) of a run log or a campaign, from the files
alone (no Java)."""

from __future__ import annotations

import argparse

from sim.cli.common import UsageError

HELP = "write the verification report (figures, tables, HTML page) of a run log or campaign"


def add_parser(sub) -> argparse.ArgumentParser:
    r = sub.add_parser(
        "report", help=HELP,
        description="Write the verification report of a run log or of a campaign folder (its "
                    "summary.h5): figures as PNG and vector PDF with captions, tables as CSV and "
                    "LaTeX (booktabs), and report.html, one self-contained page (figures embedded, "
                    "no network needed). Reads the files only (no Java). The report is an "
                    "analysis aid, not flight certification.")
    r.add_argument("source", metavar="RUN_OR_CAMPAIGN",
                   help="a run log (.h5) or a campaign folder (or its summary.h5)")
    r.add_argument("-o", "--output", metavar="DIR", required=True,
                   help="folder to write (created; files of the same names are replaced)")
    r.add_argument("--requirements", metavar="FILE",
                   help="verification results to show as the verification matrix: CSV or JSON "
                        "rows with id, text, measured, limit, margin, verdict (optional units, "
                        "metric, deputy: a limit naming a metric is drawn on the campaign CDFs)")
    r.add_argument("--baseline", metavar="B",
                   help="a run log (for a run) or a campaign (for a campaign) to overlay on the "
                        "figures and compare in a table")
    r.add_argument("--confidence", metavar="P", type=float, default=0.95,
                   help="probability of the campaign confidence ellipses and per-axis bounds "
                        "(default 0.95)")
    r.add_argument("--dpi", type=int, default=None, help="PNG resolution (default 120)")
    r.add_argument("--no-pdf", action="store_true", help="PNG figures only (faster)")
    return r


def run(args: argparse.Namespace) -> int:
    """Write the report; print where it is. Exit 0, or 2 for bad input."""
    import matplotlib

    matplotlib.use("Agg")  # no display is ever needed
    from sim.errors import LogFormatError
    from sim.report.build import build_report
    from sim.report.style import PNG_DPI

    if args.dpi is not None and not 30 <= args.dpi <= 600:
        raise UsageError(f"--dpi {args.dpi}: a resolution in [30, 600] dots per inch")
    try:
        res = build_report(args.source, args.output, requirements=args.requirements,
                           baseline=args.baseline, confidence=args.confidence,
                           formats=("png",) if args.no_pdf else ("png", "pdf"),
                           dpi=args.dpi or PNG_DPI)
    except LogFormatError as exc:  # an unreadable input file is bad input
        raise UsageError(str(exc)) from None
    print(f"report: {res.html} ({res.kind}, {len(res.figures)} figures, {len(res.tables)} tables, "
          f"{res.timings_s['total_s']:.1f} s)")
    print(f"  figures: {res.out_dir / 'figures'} (PNG{'' if args.no_pdf else ' and PDF'}, "
          f"index.csv, figures.tex); tables: {res.out_dir / 'tables'} (CSV and LaTeX)")
    for s in res.skipped:
        print(f"  not drawn: {s.title}: {s.reason}")
    return 0

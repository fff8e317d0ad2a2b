"""``covey summary DIR``: statistics of a campaign (percentiles, success rate, per-axis bounds,
error budget)."""

from __future__ import annotations

import argparse
import sys

from sim.cli.common import UsageError

HELP = "print the statistics of a campaign folder (or its summary.h5)"


def add_parser(sub) -> argparse.ArgumentParser:
    from sim.campaign.report import FORMATS
    from sim.campaign.spec import INTERVALS

    p = sub.add_parser(
        "summary", help=HELP,
        description="Per deputy: percentiles 50/90/95/99 and max of delta-v and of each "
                    "|final mean-ROE error| component, the success rate against a tolerance box "
                    "with a confidence interval, the per-axis bounds of the final-error "
                    "covariance ellipsoid; one row per grid point for sweeps; the contribution of "
                    "each source for error budgets. Defaults come from the campaign file.")
    p.add_argument("folder", metavar="DIR", help="campaign folder (or its summary.h5)")
    p.add_argument("--format", choices=FORMATS, default="table",
                   help="table (default), csv (tidy: one value per line), json or markdown")
    p.add_argument("--tolerance-m", metavar="M[,M...]",
                   help="success box: 6 half-widths (or one for all) on |final mean-ROE error|, "
                        "a-scaled m, da,dlambda,dex,dey,dix,diy (default: the campaign's)")
    p.add_argument("--dv-max-mps", type=float, metavar="MPS",
                   help="success also needs delta-v <= this per deputy, m/s")
    p.add_argument("--confidence", type=float, metavar="P",
                   help="confidence of the interval and of the bounds, in (0, 1) (default: the "
                        "campaign's, 0.95)")
    p.add_argument("--interval", choices=INTERVALS, help="success-rate interval (default: the "
                                                          "campaign's, clopper_pearson)")
    p.add_argument("--detail", action="store_true",
                   help="percentiles and bounds of every grid point / error-budget case too")
    return p


def _tolerance(text):
    if text is None:
        return None
    try:
        vals = [float(x) for x in text.replace(" ", "").split(",") if x]
    except ValueError:
        raise UsageError(f"--tolerance-m {text!r}: give 6 numbers (m) separated by commas, or one "
                         "for all") from None
    if len(vals) == 1:
        vals *= 6
    if len(vals) != 6 or not all(v > 0 for v in vals):
        raise UsageError(f"--tolerance-m {text!r}: give 6 numbers > 0 (m), da,dlambda,dex,dey,"
                         "dix,diy, or one for all")
    return vals


def run(args: argparse.Namespace) -> int:
    from sim.campaign.report import build_report, render
    from sim.campaign.summary import read_summary

    if args.confidence is not None and not 0 < args.confidence < 1:
        raise UsageError(f"--confidence {args.confidence}: give a probability in (0, 1), e.g. 0.95")
    if args.dv_max_mps is not None and not args.dv_max_mps > 0:
        raise UsageError(f"--dv-max-mps {args.dv_max_mps}: give a delta-v > 0 (m/s)")
    from pathlib import Path

    from sim.campaign.summary import SUMMARY_NAME
    from sim.errors import EnvironmentSetupError

    path = Path(args.folder)
    if not (path / SUMMARY_NAME if path.is_dir() else path).is_file():
        raise EnvironmentSetupError(f"no campaign summary at {str(path)!r} (looked for "
                                    f"{str(path / SUMMARY_NAME) if path.is_dir() else str(path)!r})",
                                    "give a campaign folder made by covey campaign FILE -o DIR")
    s = read_summary(path)
    rep = build_report(s, tolerance_m=_tolerance(args.tolerance_m), dv_max_mps=args.dv_max_mps,
                       confidence=args.confidence, interval=args.interval)
    sys.stdout.write(render(rep, args.format, detail=args.detail))
    return 0

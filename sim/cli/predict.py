"""``covey predict SCENARIO``: the linear prediction of the final mean-ROE errors (no Java).

The scenario's law plans once at t = 0 (no truth is flown) and every linear error source is
propagated to each deputy's deadline through guidance's own STMs and control matrices
(:mod:`guidance.lincov`, :mod:`sim.lincov.predict`). With ``--campaign DIR`` the prediction is
compared with the campaign's Monte Carlo final errors and stored next to its summary.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from sim.cli.common import DEFAULT_RESULTS, UsageError, load

HELP = "predict the final errors of a scenario's plan by linear covariance (no truth flown)"


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        "predict", help=HELP,
        description="Plan the scenario's law once at t = 0 and propagate each error source's "
                    "covariance to every deputy's deadline in the planner's linear model; list "
                    "the sources that need Monte Carlo. No Java needed.")
    p.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    p.add_argument("-o", "--output", metavar="PATH",
                   help="prediction file to write, or a folder for <run name>_prediction.h5 "
                        "(default: DIR/prediction.h5 with --campaign, else "
                        "results/<run name>_prediction.h5; an existing file is replaced)")
    p.add_argument("--campaign", metavar="DIR",
                   help="a campaign folder (or its summary.h5): compare the prediction with its "
                        "Monte Carlo final errors and write the prediction next to the summary")
    p.add_argument("--confidence", type=float, default=0.95, metavar="P",
                   help="probability of the confidence ellipsoid the bounds are taken on, in "
                        "(0, 1) (default 0.95)")
    p.add_argument("--orekit-data", metavar="PATH",
                   help="Orekit data folder or zip for the solar-activity span check")
    p.add_argument("--set", action="append", metavar="KEY=VALUE",
                   help="override a scenario key (repeatable; VALUE is a TOML value)")
    return p


def _output_path(args, cfg, campaign_dir: Path | None) -> Path:
    from sim.lincov.store import PREDICTION_NAME

    if args.output:
        out = Path(args.output)
        if out.is_dir() or args.output.endswith(("/", "\\")):
            return out / f"{cfg.name}_prediction.h5"
        return out
    if campaign_dir is not None:
        return campaign_dir / PREDICTION_NAME
    return DEFAULT_RESULTS / f"{cfg.name}_prediction.h5"


def run(args: argparse.Namespace) -> int:
    """Predict, print the table (and the comparison), write the file; exit code 0."""
    from sim.lincov.predict import predict_scenario, prediction_table
    from sim.lincov.store import write_prediction

    if not (0.0 < args.confidence < 1.0):
        raise UsageError(f"--confidence {args.confidence!r}: a probability strictly between 0 and 1")
    summary, campaign_dir = None, None
    if args.campaign:
        from sim.campaign.summary import SUMMARY_NAME, read_summary

        c = Path(args.campaign)
        spath = c / SUMMARY_NAME if c.is_dir() else c
        if not spath.is_file():
            raise UsageError(f"--campaign {args.campaign!r}: no campaign summary there (expected "
                             f"a folder holding {SUMMARY_NAME}, or the file itself)")
        summary = read_summary(spath)
        campaign_dir = spath.parent
    cfg = load(args.scenario, args)
    pred = predict_scenario(cfg, args.confidence)
    for line in prediction_table(pred):
        print(line)
    comparison = None
    if summary is not None:
        from sim.lincov.compare import compare_with_summary, comparison_table

        comparison = compare_with_summary(pred, summary)
        if not comparison:
            print(f"campaign {summary.path}: no deputy of this scenario has final errors there")
        for line in comparison_table(comparison, pred.confidence):
            print(line)
    out = write_prediction(_output_path(args, cfg, campaign_dir), pred, comparison,
                           campaign=str(summary.path) if summary is not None else "")
    print(f"prediction: {out} (plan {pred.plan_time_s:.2f} s, linear propagation "
          f"{pred.predict_time_s * 1e3:.0f} ms); an analysis aid, not flight certification")
    return 0

"""``covey run SCENARIO``: fly a scenario and write its run log."""

from __future__ import annotations

import argparse
import os
import sys
import traceback
from pathlib import Path

from guidance.interface import GuidanceInputError

from sim.cli.common import DEFAULT_RESULTS, Progress, add_run_options, load
from sim.cli.common import err as _err
from sim.errors import CoveyError

HELP = "fly a scenario and write its run log"


def add_parser(sub) -> argparse.ArgumentParser:
    r = sub.add_parser("run", help=HELP, description="Fly a scenario file and write its HDF5 run log.")
    r.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    add_run_options(r)
    return r


def run(args: argparse.Namespace) -> int:
    """Fly ``args.scenario``; the run's exit code."""
    return fly(args, args.scenario)


def fly(args: argparse.Namespace, scenario: str | Path, demo: bool = False,
             cfg=None, summaries: list | None = None) -> int:
    from sim.loop.run import run_scenario

    cfg = load(scenario, args) if cfg is None else cfg
    out = Path(args.output) if args.output else DEFAULT_RESULTS / f"{cfg.name}.h5"
    if args.output and (out.is_dir() or args.output.endswith(("/", os.sep))):
        out = out / f"{cfg.name}.h5"  # a folder: the default file name inside it
    bar = Progress() if (not args.quiet and sys.stderr.isatty()) else None
    if bar is not None:
        bar.start()
    try:
        summary = run_scenario(cfg, out, progress=bar, orekit_data=args.orekit_data)
    finally:
        if bar is not None:
            bar.done()
    print(summary.line())
    if summaries is not None:
        summaries.append(summary)
    if summary.metrics and not demo:
        from sim.judge.metrics import METRIC_COLUMNS, format_table, table_rows

        print(format_table(table_rows(summary.metrics), METRIC_COLUMNS))
    if summary.status == "failed":
        err = summary.error
        if isinstance(err, (CoveyError, GuidanceInputError)):
            _err(str(err))
        else:
            _err(f"run failed: {summary.reason}; the traceback is in the log "
                 f"(/meta/traceback); run with COVEY_DEBUG=1 for the traceback")
            if os.environ.get("COVEY_DEBUG") and err is not None:
                traceback.print_exception(type(err), err, err.__traceback__)
    return summary.exit_code

"""``covey run SCENARIO``: fly a scenario and write its run log."""

from __future__ import annotations

import argparse
import os
import sys
import traceback
from pathlib import Path

from guidance.interface import GuidanceInputError

from sim.cli.common import DEFAULT_RESULTS, Progress, add_run_options, load, out as _out
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
        cfg=None, summaries: list | None = None, out_path: Path | None = None) -> int:
    """Fly one scenario: warnings on stderr, the summary line (and, unless ``demo``, the metrics
    table) on stdout; the exit code (``--strict``: 1 also for a missed target or an infeasible
    guidance cycle)."""
    from sim.loop.run import run_scenario
    from sim.scenario.feasibility import feasibility_warnings

    cfg = load(scenario, args) if cfg is None else cfg
    out = out_path if out_path is not None else output_path(args.output, cfg.name)
    for w in feasibility_warnings(cfg):
        _err(f"warning: {w}")
    bar = Progress() if (not args.quiet and sys.stderr.isatty()) else None
    if bar is not None:
        bar.start()
    try:
        summary = run_scenario(cfg, out, progress=bar, orekit_data=args.orekit_data)
    finally:
        if bar is not None:
            bar.done()
    _out(summary.line())
    if summaries is not None:
        summaries.append(summary)
    if summary.metrics and not demo:
        from sim.judge.metrics import METRIC_COLUMNS, format_table, table_notes, table_rows

        _out(format_table(table_rows(summary.metrics, events=cfg.events), METRIC_COLUMNS))
        for line in table_notes(summary.metrics, cfg):
            _out(line)
    for line in infeasible_lines(summary):
        _out(line)
    if summary.status == "failed":
        err = summary.error
        if isinstance(err, (CoveyError, GuidanceInputError)):
            _err(str(err))
        else:
            _err(f"run failed: {summary.reason}; the traceback is in the log "
                 f"(/meta/traceback); run with COVEY_DEBUG=1 for the traceback")
            if os.environ.get("COVEY_DEBUG") and err is not None:
                traceback.print_exception(type(err), err, err.__traceback__)
    return summary.exit_code_for(getattr(args, "strict", False))


def output_path(output: str | None, name: str) -> Path:
    """The run log of ``-o PATH``: the file, ``<name>.h5`` inside a folder (an existing one, or a
    path ending with a separator), or ``results/<name>.h5`` without ``-o``."""
    if not output:
        return DEFAULT_RESULTS / f"{name}.h5"
    out = Path(output)
    if out.is_dir() or output.endswith(("/", os.sep)):
        out = out / f"{name}.h5"
    return out


def infeasible_lines(summary) -> list[str]:
    """One line naming the infeasible guidance cycles of a run (their indices and times, and the
    first message the law gave), or nothing."""
    bad = summary.infeasible_cycles
    if not bad:
        return []
    from sim.judge.metrics import index_ranges

    total = sum(summary.cycle_counts.values())
    idx, t0, msg = bad[0]
    msgs = {m for _, _, m in bad}
    more = f" ({len(msgs) - 1} other message(s) in the log)" if len(msgs) > 1 else ""
    return [f"guidance infeasible in {len(bad)} of {total} cycles of {summary.name}: cycles "
            f"{index_ranges([b[0] for b in bad])} (first at t = {t0 / 3600.0:.2f} h): {msg}{more}; "
            "every message: /guidance/cycles/message in the log"]

"""``covey validate FILE``: check a scenario file, or a campaign file, without running it (no Java)."""

from __future__ import annotations

import argparse
import re
from pathlib import Path

from sim.cli.common import UsageError, load, out

HELP = "check a scenario or campaign file without running it"


def add_parser(sub) -> argparse.ArgumentParser:
    v = sub.add_parser("validate", help=HELP,
                       description="Check a scenario file, or a campaign file (one with a "
                                   "[campaign] table: its base scenario, every dispersion, sweep "
                                   "and error-budget case), without running it (no Java needed): "
                                   "print what it resolved, and warnings about targets no "
                                   "actuator can reach and spacecraft starting inside the "
                                   "keep-out radius.")
    v.add_argument("scenario", metavar="FILE", help="scenario or campaign TOML file")
    v.add_argument("--orekit-data", metavar="PATH",
                   help="Orekit data folder or zip for the solar-activity span check")
    v.add_argument("--set", action="append", metavar="KEY=VALUE",
                   help="override a scenario key (scenario files only)")
    return v


def _is_campaign_file(path: str) -> bool:
    from sim.campaign.spec import _toml, is_campaign

    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return False  # the scenario reader reports it
    try:
        return is_campaign(_toml.loads(text))
    except (RecursionError, _toml.TOMLDecodeError):  # the campaign or scenario reader says why
        return re.search(r"^\s*\[\s*campaign\s*\]", text, re.MULTILINE) is not None


def run(args: argparse.Namespace) -> int:
    """Validate, print what was resolved and any warnings; exit code 0 (bad input raises, exit
    2; warnings do not change the code)."""
    if _is_campaign_file(args.scenario):
        return _campaign(args)
    from sim.scenario.feasibility import feasibility_warnings
    from sim.scenario.reader import describe

    from sim.loop.mission import check_guidance

    cfg = load(args.scenario, args)
    law = check_guidance(cfg)
    warnings = feasibility_warnings(cfg)
    plural = "s" if len(warnings) != 1 else ""
    note = f" ({len(warnings)} warning{plural} below)" if warnings else ""
    out(f"ok: {args.scenario} is a valid scenario{note}")
    if law:
        out(f"  guidance law {cfg.guidance.law!r} ({law}) accepts its settings and the mission")
    for line in describe(cfg, args.orekit_data):
        out(f"  {line}")
    for w in warnings:
        out(f"warning: {w}")
    return 0


def _campaign(args: argparse.Namespace) -> int:
    from sim.campaign.plan import describe_plan, plan_campaign
    from sim.campaign.spec import load_campaign

    if args.set:
        raise UsageError("--set applies to scenario files; a campaign fixes keys in its "
                         "[campaign.set] table")
    plan = plan_campaign(load_campaign(args.scenario), orekit_data=args.orekit_data)
    c = plan.campaign
    out(f"ok: {args.scenario} is a valid campaign ({c.kind} {c.name!r}, {plan.n_runs} runs)")
    for line in describe_plan(plan):
        out(f"  {line}")
    return 0

"""``covey validate SCENARIO``: check a scenario file without running it (no Java)."""

from __future__ import annotations

import argparse

from sim.cli.common import load, out

HELP = "check a scenario file without running it"


def add_parser(sub) -> argparse.ArgumentParser:
    v = sub.add_parser("validate", help=HELP,
                       description="Check a scenario file without running it (no Java "
                                   "needed): print what it resolved, and warnings about targets "
                                   "no actuator can reach and spacecraft starting inside the "
                                   "keep-out radius.")
    v.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    v.add_argument("--orekit-data", metavar="PATH",
                   help="Orekit data folder or zip for the solar-activity span check")
    v.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a scenario key")
    return v


def run(args: argparse.Namespace) -> int:
    """Validate, print what was resolved and any warnings; exit code 0 (bad input raises, exit
    2; warnings do not change the code)."""
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

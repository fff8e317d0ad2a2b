"""``covey validate SCENARIO``: check a scenario file without running it (no Java)."""

from __future__ import annotations

import argparse

from sim.cli.common import load

HELP = "check a scenario file without running it"


def add_parser(sub) -> argparse.ArgumentParser:
    v = sub.add_parser("validate", help=HELP,
                       description="Check a scenario file without running it (no Java needed).")
    v.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    v.add_argument("--orekit-data", metavar="PATH",
                   help="Orekit data folder or zip for the solar-activity span check")
    v.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a scenario key")
    return v


def run(args: argparse.Namespace) -> int:
    """Validate, print what was resolved; exit code 0 (bad input raises, exit 2)."""
    from sim.scenario.reader import describe

    from sim.loop.mission import check_guidance

    cfg = load(args.scenario, args)
    law = check_guidance(cfg)
    print(f"ok: {args.scenario} is a valid scenario")
    if law:
        print(f"  guidance law {cfg.guidance.law!r} ({law}) accepts its settings and the mission")
    for line in describe(cfg, args.orekit_data):
        print(f"  {line}")
    return 0

"""``covey check CANDIDATE --requirements FILE``: the regression gate (verification matrix, exit
0 all pass, 1 any fail, 2 bad input; JUnit XML for CI)."""

from __future__ import annotations

import argparse

from sim.cli.common import parse_set
from sim.cli.common import err as _err
from sim.errors import LogFormatError

HELP = "check a run log or campaign against requirements (and a baseline): pass/fail for CI"


def add_parser(sub) -> argparse.ArgumentParser:
    from sim.gate.output import FORMATS

    p = sub.add_parser(
        "check", help=HELP,
        description="Check a run log or campaign against a requirements file (and a baseline "
                    "run or campaign) and print the verification matrix: requirement id, text, "
                    "measured value, limit, margin, verdict. Exit codes: 0 every requirement "
                    "passes (or is n/a), 1 any fails, 2 bad input. No propagation, no Java.")
    p.add_argument("candidate", metavar="CANDIDATE", help="run log (.h5) or campaign folder")
    p.add_argument("--requirements", "-r", required=True, metavar="FILE",
                   help="requirements TOML file (see README, 'Gate a controller change in CI')")
    p.add_argument("--baseline", "-b", metavar="BASELINE",
                   help="run log or campaign folder for the kind = \"regression\" requirements")
    p.add_argument("--junit", metavar="FILE", help="also write the matrix as JUnit XML")
    p.add_argument("--format", choices=FORMATS, default="table", help="output (default: table)")
    p.add_argument("--set", action="append", metavar="KEY=VALUE",
                   help="re-judge candidate and baseline with this judging key (see covey judge)")
    return p


def run(args: argparse.Namespace) -> int:
    from sim.gate.check import check
    from sim.gate.output import write_junit

    try:
        v = check(args.candidate, args.requirements, args.baseline, parse_set(args.set))
    except LogFormatError as exc:
        _err(str(exc))
        return 2
    if args.junit:
        try:
            write_junit(v, args.junit)
        except OSError as exc:
            _err(f"--junit {args.junit}: cannot write: {exc}")
            return 2
    print(v.text(args.format))
    return v.exit_code

"""``covey compare A B [C ...]``: run logs and campaigns side by side, noise-aware for campaigns."""

from __future__ import annotations

import argparse

from sim.cli.common import UsageError, parse_set
from sim.cli.common import err as _err
from sim.errors import LogFormatError

HELP = "compare run logs or campaigns side by side (two-sample tests for campaigns)"


def _floats(text: str) -> list[float]:
    try:
        vals = [float(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r}: expected numbers separated by commas, "
                                         "e.g. 50,95,99") from None
    if not vals or any(not 0.0 <= v <= 100.0 for v in vals):
        raise argparse.ArgumentTypeError(f"{text!r}: percentiles in [0, 100], e.g. 50,95,99")
    return vals


def add_parser(sub) -> argparse.ArgumentParser:
    from sim.gate.output import FORMATS

    p = sub.add_parser(
        "compare", help=HELP,
        description="Compare run logs and/or campaign folders, each against the first, per "
                    "deputy and metric. Run logs: the values, differences and relative "
                    "differences (re-judged by today's metric code). Campaigns: percentiles "
                    "and a two-sample test per metric; a difference is called out only when "
                    "its p-value is below --significance. Runs are paired (Wilcoxon "
                    "signed-rank) when both campaigns share a master seed and dispersions, "
                    "else Mann-Whitney U (or --test ks). No propagation, no Java.")
    p.add_argument("sources", nargs="+", metavar="LOG_OR_CAMPAIGN",
                   help="two or more run logs (.h5) or campaign folders; the first is the reference")
    p.add_argument("--metric", action="append", metavar="NAME",
                   help="a per-deputy metric to show (repeatable; default: the main ones, "
                        "see README)")
    p.add_argument("--percentiles", type=_floats, default=[50.0, 95.0], metavar="P,P,...",
                   help="percentiles shown for campaigns (default: 50,95)")
    p.add_argument("--significance", type=float, default=0.01, metavar="ALPHA",
                   help="call a campaign difference out only below this p-value (default: 0.01)")
    p.add_argument("--test", choices=("mannwhitney", "ks"), default="mannwhitney",
                   help="unpaired two-sample test (default: mannwhitney)")
    p.add_argument("--unpaired", action="store_true",
                   help="do not pair runs even when the campaigns allow it")
    p.add_argument("--set", action="append", metavar="KEY=VALUE",
                   help="re-judge every source with this judging key (see covey judge)")
    p.add_argument("--format", choices=FORMATS, default="table", help="output (default: table)")
    p.add_argument("--fail-on-worse", action="store_true",
                   help="exit 1 when any difference called out is worse")
    return p


def run(args: argparse.Namespace) -> int:
    from sim.gate.compare import compare

    if len(args.sources) < 2:
        raise UsageError("compare needs at least two run logs or campaigns")
    if not 0.0 < args.significance < 1.0:
        raise UsageError(f"--significance {args.significance}: a level in (0, 1), e.g. 0.01")
    try:
        c = compare(args.sources, args.metric, args.percentiles, args.significance, args.test,
                    not args.unpaired, parse_set(args.set))
    except LogFormatError as exc:
        _err(str(exc))
        return 2
    print(c.text(args.format))
    if args.fail_on_worse and any("worse" in ch for _, _, ch in c.flagged()):
        return 1
    return 0

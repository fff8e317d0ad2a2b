"""``covey judge LOG``: recompute a run log's metrics with today's code and other thresholds."""

from __future__ import annotations

import argparse
import json

from sim.cli.common import parse_set
from sim.cli.common import err as _err
from sim.errors import LogFormatError

HELP = "recompute a run log's metrics (other thresholds, a target, a deadline) without re-flying"


def add_parser(sub) -> argparse.ArgumentParser:
    from sim.gate.judge import JUDGE_KEYS
    from sim.gate.output import FORMATS

    p = sub.add_parser(
        "judge", help=HELP,
        description="Recompute the metrics of a run log from its logged truth with today's "
                    "metric code, optionally with other judging thresholds, and print them. "
                    "No propagation, no Java. Judging keys: " + ", ".join(JUDGE_KEYS) + ".")
    p.add_argument("log", metavar="LOG", help="run log (.h5)")
    p.add_argument("--set", action="append", metavar="KEY=VALUE",
                   help="judge with another value of a judging key, e.g. --set "
                        "events.keep_out_radius_m=50 (repeatable; VALUE is a TOML value)")
    p.add_argument("--format", choices=FORMATS, default="table",
                   help="output format (default: table)")
    return p


def _changes(stored, metrics) -> list[str]:
    old = {m.name: m.as_dict() for m in stored}
    out = []
    for m in metrics:
        o = old.get(m.name)
        if o is None:
            out.append(f"{m.name} (not stored)")
            continue
        for k, v in m.as_dict().items():
            w = o.get(k)
            same = (v == w) or (isinstance(v, float) and isinstance(w, float) and v != v and w != w)
            if isinstance(v, list) and isinstance(w, list):
                same = all(a == b or (a != a and b != b) for a, b in zip(v, w)) and len(v) == len(w)
            if not same:
                out.append(f"{m.name}.{k} ({w!r} -> {v!r})" if not isinstance(v, (list, dict))
                           else f"{m.name}.{k}")
    return out


def run(args: argparse.Namespace) -> int:
    from sim import __version__
    from sim.gate.judge import rejudge
    from sim.gate.output import render_rows
    from sim.judge.metrics import METRIC_COLUMNS, table_rows

    overrides = parse_set(args.set)
    try:
        j = rejudge(args.log, overrides)
    except LogFormatError as exc:
        _err(str(exc))
        return 2
    meta = j.meta
    head = (f"{args.log}: {len(j.metrics)} deputies judged by covey {__version__} from the logged "
            f"truth (log schema {meta.get('schema_version', '?')}, written by covey "
            f"{meta.get('covey_version', '?')}, status {meta.get('status', '?')})")
    if overrides:
        head += "; judged with " + ", ".join(f"{k}={v!r}" for k, v in overrides.items())
    notes = list(j.notes)
    changed = _changes(j.stored, j.metrics)
    if changed:
        notes.append("differs from the metrics stored in the log: " + ", ".join(changed))
    elif j.stored:
        notes.append("same as the metrics stored in the log")
    if args.format == "json":
        doc = {"log": args.log, "overrides": overrides, "covey_version": __version__,
               "log_schema_version": meta.get("schema_version"),
               "metrics": [m.as_dict() for m in j.metrics], "notes": notes}
        from sim.gate.output import _clean

        print(json.dumps(_clean(doc), indent=1, default=str))
        return 0
    print(render_rows(METRIC_COLUMNS, table_rows(j.metrics), args.format, head, notes))
    return 0

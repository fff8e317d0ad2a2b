"""``covey demo``: fly the packaged demo scenario with each built-in law, one comparison table."""

from __future__ import annotations

import argparse
from importlib import resources
from pathlib import Path

from sim.cli.common import DEFAULT_RESULTS, add_run_options, load, out
from sim.cli.run import fly
from sim.errors import EnvironmentSetupError

DEMO_NAME = "demo_formation.toml"
DEMO_STEM = "demo_formation"
DEMO_LAWS = ("propulsion_only", "hybrid_single", "hybrid_resolve")
HELP = "fly the built-in demo with each built-in guidance law"


def demo_scenario_path() -> Path:
    """The packaged demo scenario (``sim/demo/demo_formation.toml``)."""
    return Path(str(resources.files("sim").joinpath("demo", DEMO_NAME)))


def add_parser(sub) -> argparse.ArgumentParser:
    d = sub.add_parser("demo", help=HELP,
                       description="Fly the built-in demo (a chief and two deputies near 500 km "
                                   "sun-synchronous; the deputies re-phase along-track by a few km "
                                   "and widen their e/i-vector separation, deadline 2.75 days, "
                                   "run 3 days; realistic navigation and actuator errors and a "
                                   "truth density error) once with each built-in law, and print "
                                   "one comparison table. Logs: "
                                   "results/demo_formation_<law>.h5.")
    add_run_options(d, output_help="folder for the run logs demo_formation_<law>.h5 (created if "
                                   "missing; default: results); a PATH ending in .h5 gives "
                                   "PATH-without-.h5_<law>.h5, one file per law")
    d.add_argument("--law", action="append", metavar="LAW", choices=DEMO_LAWS,
                   help="fly only this law (repeatable; default: all of "
                        + ", ".join(DEMO_LAWS) + ")")
    return d


def demo_output(output: str | None, name: str) -> Path:
    """Where the demo writes the log of one law's run (``name`` = ``demo_formation_<law>``):
    ``results/<name>.h5`` by default, ``<folder>/<name>.h5`` for ``-o FOLDER``, and
    ``<stem>_<law>.h5`` beside it for ``-o <stem>.h5`` (so the laws never share a file)."""
    if not output:
        return DEFAULT_RESULTS / f"{name}.h5"
    p = Path(output)
    if p.suffix == ".h5" and not p.is_dir():
        law = name[len(DEMO_STEM) + 1:] if name.startswith(DEMO_STEM + "_") else name
        return p.with_name(f"{p.stem}_{law}.h5")
    return p / f"{name}.h5"


def run(args: argparse.Namespace) -> int:
    """Fly the demo with each law asked for; the worst exit code."""
    path = demo_scenario_path()
    if not path.is_file():
        raise EnvironmentSetupError(f"the demo scenario {str(path)!r} is missing",
                                    'reinstall covey (pip install -e ".[test]")')
    return _demo(args, path)


DEMO_COLUMNS = ("law", "name", "status", "guidance", "target_met_text", "dv_total_mps", "n_burns",
                "n_switches", "err_da_m", "err_dlambda_m", "err_de_m", "err_di_m",
                "final_error_norm_m", "time_to_tolerance_h", "monitor_flags", "wall_s")
"""Row keys of the demo's comparison table (headers and formats from METRIC_COLUMNS)."""


def demo_columns() -> tuple[tuple[str, str, str], ...]:
    """(key, header, format) of the demo's comparison table."""
    from sim.judge.metrics import METRIC_COLUMNS

    own = {"law": ("law", "law", ""), "status": ("status", "status", ""),
           "guidance": ("guidance", "guidance cycles", ""), "wall_s": ("wall_s", "wall [s]", ".0f")}
    own.update({c[0]: c for c in METRIC_COLUMNS})
    return tuple(own[k] for k in DEMO_COLUMNS)


def _demo(args: argparse.Namespace, path: Path) -> int:
    """Fly the demo once per law and print one comparison table."""
    import dataclasses

    from sim.judge.metrics import cycles_text, format_table, table_notes, table_rows

    base = load(path, args)
    laws = tuple(dict.fromkeys(args.law or DEMO_LAWS))
    summaries: list = []
    worst = 0
    for law in laws:
        cfg = dataclasses.replace(base, name=f"{base.name}_{law}",
                                  guidance=dataclasses.replace(base.guidance, law=law))
        worst = max(worst, fly(args, path, demo=True, cfg=cfg, summaries=summaries,
                               out_path=demo_output(args.output, cfg.name)))
    rows = []
    metrics = []
    for law, sm in zip(laws, summaries):
        rows += table_rows(sm.metrics, {"law": law, "status": sm.status,
                                        "guidance": cycles_text(sm.cycle_counts),
                                        "wall_s": sm.wall_time_s}, events=base.events)
        metrics += sm.metrics
    if rows:
        out()
        out(format_table(rows, demo_columns()))
        for line in table_notes(metrics, base):
            out(line)
        out("status: ok = flew to the end, stopped = an event ended it, failed = an error; "
            "guidance cycles: the outcomes the law reported (/guidance/cycles/status)")
    if summaries:
        out(f"\nrun logs: {', '.join(str(sm.path) for sm in summaries)}")
        dep = base.deputies[0].name if base.deputies else base.chief.name
        out("  read one in Python: from sim.log.reader import read_log; "
            f"log = read_log({str(summaries[-1].path)!r}); "
            f"log.get('spacecraft/{dep}/mean_roe_m')")
    return worst

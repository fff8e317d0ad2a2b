"""``covey demo``: fly the packaged demo scenario with each built-in law, one comparison table."""

from __future__ import annotations

import argparse
from importlib import resources
from pathlib import Path

from sim.cli.common import add_run_options, load
from sim.cli.run import fly
from sim.errors import EnvironmentSetupError

DEMO_NAME = "demo_formation.toml"
DEMO_LAWS = ("propulsion_only", "hybrid_single", "hybrid_resolve")
HELP = "fly the built-in demo with each built-in guidance law"


def demo_scenario_path() -> Path:
    """The packaged demo scenario (``sim/demo/demo_formation.toml``)."""
    return Path(str(resources.files("sim").joinpath("demo", DEMO_NAME)))


def add_parser(sub) -> argparse.ArgumentParser:
    d = sub.add_parser("demo", help=HELP,
                       description="Fly the built-in demo (a chief and two deputies near 500 km "
                                   "sun-synchronous, 3 days, realistic navigation and actuator "
                                   "errors and a truth density error) once with each built-in "
                                   "law, and print one comparison table. Logs: "
                                   "results/demo_formation_<law>.h5.")
    add_run_options(d)
    d.add_argument("--law", action="append", metavar="LAW", choices=DEMO_LAWS,
                   help="fly only this law (repeatable; default: all of "
                        + ", ".join(DEMO_LAWS) + ")")
    return d


def run(args: argparse.Namespace) -> int:
    """Fly the demo with each law asked for; the worst exit code."""
    path = demo_scenario_path()
    if not path.is_file():
        raise EnvironmentSetupError(f"the demo scenario {str(path)!r} is missing",
                                    'reinstall covey (pip install -e ".[test]")')
    return _demo(args, path)


def _demo(args: argparse.Namespace, path: Path) -> int:
    """Fly the demo once per law and print one comparison table."""
    import dataclasses

    from sim.judge.metrics import format_table, table_rows

    base = load(path, args)
    laws = tuple(dict.fromkeys(args.law or DEMO_LAWS))
    summaries: list = []
    worst = 0
    for law in laws:
        cfg = dataclasses.replace(base, name=f"{base.name}_{law}",
                                  guidance=dataclasses.replace(base.guidance, law=law))
        worst = max(worst, fly(args, path, demo=True, cfg=cfg, summaries=summaries))
    rows = []
    for law, sm in zip(laws, summaries):
        rows += table_rows(sm.metrics, {"law": law, "status": sm.status,
                                        "wall_s": sm.wall_time_s})
    if rows:
        cols = (("law", "law", ""), ("name", "deputy", ""), ("status", "status", ""),
                ("dv_total_mps", "dv [m/s]", ".4f"), ("n_burns", "burns", "d"),
                ("n_switches", "switches", "d"), ("err_dlambda_m", "a dlambda err [m]", ".1f"),
                ("err_de_m", "a de err [m]", ".1f"), ("err_di_m", "a di err [m]", ".1f"),
                ("final_error_norm_m", "|err| [m]", ".1f"), ("wall_s", "wall [s]", ".0f"))
        print()
        print("errors are truth mean ROE (Orekit Eckstein-Hechler) minus target at the deadline, "
              "a-scaled metres")
        print(format_table(rows, cols))
        print(f"\nrun logs: {', '.join(str(sm.path) for sm in summaries)}")
        print("  read one in Python: from sim.log.reader import read_log; "
              f"log = read_log({str(summaries[-1].path)!r}); log.spacecraft.beta.mean_roe_m")
    return worst

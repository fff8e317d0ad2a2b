"""The ``covey`` command line: one module per command, registered in :data:`COMMANDS`.

Each command module has ``add_parser(subparsers) -> ArgumentParser`` and
``run(args) -> int`` (the exit code). Exit codes: 0 ok (also a run stopped cleanly by an event),
1 run failed, 2 bad input (scenario, command line, missing Java or data). covey's own errors print
one line on stderr; an unexpected exception prints one line too, and its traceback only with
``COVEY_DEBUG=1``. A closed stdout (``covey run ... | head -1``) is not an error: the commands
print through :func:`sim.cli.common.out`, which sends the rest of the output to the null device,
and the command keeps its exit code.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import traceback
from typing import Sequence

from guidance.interface import GuidanceInputError

from sim import __version__
from sim.cli.common import err as _err
from sim.cli.common import stdout_to_devnull
from sim.errors import CoveyError

COMMANDS = {
    "run": "sim.cli.run",
    "validate": "sim.cli.validate",
    "demo": "sim.cli.demo",
    "predict": "sim.cli.predict",
    "judge": "sim.cli.judge",
    "compare": "sim.cli.compare",
    "check": "sim.cli.check",
    "report": "sim.cli.report",
    "export": "sim.cli.export",
    "campaign": "sim.cli.campaign",
    "summary": "sim.cli.summary",
}
"""Command name -> module (with ``add_parser`` and ``run``), in the order ``--help`` lists them."""


def _build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="covey",
        description="Fly formation-flying guidance closed-loop against a full-force Orekit truth "
                    "propagator in LEO and log every run to HDF5.",
        epilog="Exit codes: 0 ok, 1 run failed, 2 bad input. COVEY_OREKIT_DATA=PATH selects an "
               "Orekit data folder or zip; COVEY_DEBUG=1 shows tracebacks.")
    p.add_argument("--version", action="version", version=f"covey {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    for name, modname in COMMANDS.items():
        mod = importlib.import_module(modname)
        sp = mod.add_parser(sub)
        sp.set_defaults(handler=mod.run)
    return p


def _debug_traceback(exc: BaseException) -> None:
    """The traceback of ``exc`` (and of what caused it) on stderr when ``COVEY_DEBUG`` is set."""
    if os.environ.get("COVEY_DEBUG"):
        traceback.print_exception(type(exc), exc, exc.__traceback__)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``covey`` console script. Returns the exit code."""
    parser = _build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: --help (0) or a usage error (2)
        return int(exc.code or 0)
    except BrokenPipeError:  # --help into a closed pipe
        stdout_to_devnull()
        return 0
    if args.command is None:
        try:
            parser.print_help()
        except BrokenPipeError:
            stdout_to_devnull()
        return 2
    try:
        return int(args.handler(args))
    except BrokenPipeError:  # output written past sim.cli.common.out: the command's code is lost
        stdout_to_devnull()
        _err("output stopped: stdout was closed before the command finished")
        return 1
    except CoveyError as exc:
        _err(str(exc))
        _debug_traceback(exc)
        return exc.exit_code
    except GuidanceInputError as exc:  # a law's settings refused: bad input
        _err(str(exc))
        _debug_traceback(exc)  # e.g. why a user law's module failed to import
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
            try:
                sys.stdout.flush()
            except BrokenPipeError:  # the reader closed the pipe: not a failure of the command
                stdout_to_devnull()
            sys.stderr.flush()
        finally:
            os._exit(int(code) if isinstance(code, int) else 1)


if __name__ == "__main__":  # pragma: no cover - ``python -m sim.cli.main`` behaves as the installed command
    console_main()

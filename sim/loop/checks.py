"""What the harness checks of a guidance law's answer before flying it (pure Python, no Java).

:func:`check_output` refuses a wrong type, an unknown spacecraft or mode, a non-finite number or
a time before the cycle with a :class:`GuidanceFailure` (run status ``failed``, exit code 1).
"""

from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np

from guidance.interface import Diagnostics, GuidanceOutput, Impulse, ModeSwitch, SpacecraftCommand

from sim.errors import CoveyError

__all__ = ["GuidanceFailure", "check_output", "EPS_T"]

EPS_T = 1e-6
"""s: times closer than this are the same instant."""
_EPS_T = EPS_T


class GuidanceFailure(CoveyError):
    """The guidance law raised, or answered with something the harness cannot fly.

    Attributes
    ----------
    law : str
        The law's name or import path.
    t_s : float
        Cycle time, s since epoch.
    detail : str
        What was wrong.
    """

    exit_code = 1

    def __init__(self, law: str, t_s: float, detail: str):
        self.law, self.t_s, self.detail = law, t_s, detail
        super().__init__(f"guidance law {law!r} at t = {t_s:.1f} s: {detail}")


def _finite(x) -> bool:
    try:
        return bool(np.all(np.isfinite(np.asarray(x, dtype=float))))
    except (TypeError, ValueError):
        return False


def _time(x) -> bool:
    """A finite real number (a time in s); strings and booleans are not."""
    return isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, bool) \
        and math.isfinite(float(x))


def check_output(out: Any, t_s: float, known_modes: Mapping[str, tuple[str, ...]], law: str
                 ) -> dict[str, SpacecraftCommand]:
    """Validate a law's answer; returns its commands by spacecraft name.

    Raises
    ------
    GuidanceFailure
        Wrong type, unknown spacecraft or mode, non-finite numbers, times before ``t_s``.
    """
    if not isinstance(out, GuidanceOutput):
        raise GuidanceFailure(law, t_s, f"step() returned {type(out).__name__}, expected GuidanceOutput")
    cmds = out.commands
    if not isinstance(cmds, Mapping):
        raise GuidanceFailure(law, t_s, "GuidanceOutput.commands must map spacecraft names to SpacecraftCommand")
    result = {}
    for name, c in cmds.items():
        if name not in known_modes:
            raise GuidanceFailure(law, t_s, f"command for unknown spacecraft {name!r}; known: {sorted(known_modes)}")
        if not isinstance(c, SpacecraftCommand):
            raise GuidanceFailure(law, t_s, f"commands[{name!r}] is {type(c).__name__}, expected SpacecraftCommand")
        for field in ("mode_switches", "impulses"):
            if not isinstance(getattr(c, field), (tuple, list)):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].{field} is "
                                      f"{type(getattr(c, field)).__name__}, expected a tuple")
        for k, sw in enumerate(c.mode_switches):
            if not isinstance(sw, ModeSwitch) or not _time(sw.t_s):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].mode_switches[{k}] = {sw!r}: a ModeSwitch with finite t_s")
            if sw.mode not in known_modes[name]:
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].mode_switches[{k}].mode = {sw.mode!r}: one of {list(known_modes[name])}")
            if sw.t_s < t_s - _EPS_T:
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].mode_switches[{k}].t_s = {sw.t_s:.3f} s is before the cycle time")
        for k, imp in enumerate(c.impulses):
            if not isinstance(imp, Impulse) or not _time(imp.t_s):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].impulses[{k}] = {imp!r}: an Impulse with finite t_s")
            dv = np.asarray(imp.dv_rtn_mps, dtype=float) if _finite(imp.dv_rtn_mps) else None
            if dv is None or dv.shape != (3,):
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].impulses[{k}].dv_rtn_mps = {imp.dv_rtn_mps!r}: 3 finite numbers in m/s")
            if imp.t_s < t_s - _EPS_T:
                raise GuidanceFailure(law, t_s, f"commands[{name!r}].impulses[{k}].t_s = {imp.t_s:.3f} s is before the cycle time")
        result[name] = c
    d = out.diagnostics
    if not isinstance(d, Diagnostics):
        raise GuidanceFailure(law, t_s, f"GuidanceOutput.diagnostics is {type(d).__name__}, expected Diagnostics")
    if not _time(d.solve_time_s):
        raise GuidanceFailure(law, t_s, f"diagnostics.solve_time_s = {d.solve_time_s!r}: a finite number in s")
    for k, v in dict(getattr(d, "dv_remaining_mps", {}) or {}).items():
        if not _finite(v):
            raise GuidanceFailure(law, t_s, f"diagnostics.dv_remaining_mps[{k!r}] = {v!r}: a finite number in m/s")
    return result

"""Scenario files: parse and validate a TOML scenario into a :class:`sim.scenario.config.RunConfig`.

No JVM is needed here: validation is pure Python (the solar-activity span is read from the CSSI
text file directly). Every problem raises :class:`sim.errors.ScenarioError` naming the key path
(``deputies[1].roe_m``, counted from 0), the value given and what is allowed, with units.

File layout (the README's "Scenario reference" lists every key, its units, default and range)::

    [run]          name, epoch_utc, duration_days | duration_s, log_step_s, seed, orekit_data
    [environment]  preset, gravity_degree, gravity_order, atmosphere, local_solar_time, sun, moon,
                   srp, position_tolerance_m, [environment.solar_activity],
                   [environment.density_error]
    [bus.<type>]   mass_kg, cd, cr, slew_time_s, [bus.<type>.geometry] (+ [[...geometry.panels]]),
                   [bus.<type>.modes.<mode>] rotation_xyz_deg, [bus.<type>.thruster]
    [chief]        name, bus, initial_mode, [chief.orbit]
    [[deputies]]   name, bus, initial_mode, roe_m | [deputies.orbit], target_roe_m,
                   deadline_days | deadline_s
    [events] [guidance] (+ [guidance.settings]) [navigation] [actuators]
"""

from __future__ import annotations

import os
from dataclasses import replace
from pathlib import Path
from typing import Any, Mapping

try:  # Python >= 3.11
    import tomllib as _toml
except ModuleNotFoundError:  # pragma: no cover - Python 3.10
    import tomli as _toml  # type: ignore[no-redef]


from sim.scenario.config import (
    RunConfig,
)
from sim.errors import EnvironmentSetupError, ScenarioError
from sim.orekit.data import resolve_orekit_data, solar_activity_span


from sim.scenario.build import PRESET_DEFAULTS, build as _build, check_solar_span as _check_solar_span, law_settings, sun_synchronous_inclination_deg  # noqa: F401
from sim.scenario.describe import describe  # noqa: F401
from sim.scenario.overrides import apply_override as _apply_override

__all__ = [
    "load_scenario",
    "parse_scenario",
    "sun_synchronous_inclination_deg",
    "resolve_orekit_data",
    "solar_activity_span",
    "describe",
    "PRESET_DEFAULTS",
]


# ------------------------------------------------------------------------------------------
# Public API
# ------------------------------------------------------------------------------------------


def read_input_file(path: str | os.PathLike, what: str, missing_fix: str) -> str:
    """The text of an input file (a scenario, campaign or requirements TOML), UTF-8.

    Raises
    ------
    EnvironmentSetupError
        ``"<what> file PATH not found"`` with ``missing_fix``, or ``"cannot read <what> file
        PATH: ..."``.
    """
    p = Path(path)
    try:
        return p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise EnvironmentSetupError(f"{what} file {str(p)!r} not found", missing_fix) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise EnvironmentSetupError(f"cannot read {what} file {str(p)!r}: {exc}",
                                    "give a readable UTF-8 TOML file") from None


def load_scenario(path, overrides: Mapping[str, Any] | None = None, *,
                  orekit_data: str | os.PathLike | None = None,
                  check_solar_span: bool = True) -> RunConfig:
    """Read and validate a scenario file.

    Parameters
    ----------
    path : str or path-like
        The TOML scenario file.
    overrides : mapping, optional
        ``{"run.duration_days": 0.2, "deputies[0].roe_m": [...], ...}``: values replacing (or
        adding) keys of the file before validation. Setting one of a pair of alternatives (e.g.
        ``run.duration_days``) removes the other (``run.duration_s``).
    orekit_data : path, optional
        Orekit data folder or zip (wins over ``COVEY_OREKIT_DATA`` and ``[run] orekit_data``);
        used here for the solar-activity span check.
    check_solar_span : bool
        Refuse an epoch (or epoch + duration) outside the solar-activity data (default True).

    Returns
    -------
    RunConfig
        With ``source_text`` the file verbatim and ``source_path`` the file's absolute path.

    Raises
    ------
    ScenarioError
        Any problem of the file's content, naming the key path, the value and what is allowed.
    EnvironmentSetupError
        The file (or the Orekit data folder) cannot be read.
    """
    p = Path(path)
    text = read_input_file(p, "scenario", "give the path of a .toml scenario (see scenarios/)")
    return parse_scenario(text, str(p.resolve()), overrides=overrides, orekit_data=orekit_data,
                          check_solar_span=check_solar_span)


def parse_toml(text: str, src: str, what: str = "an input file") -> dict:
    """The tables of TOML ``text`` (scenario, campaign and requirements files alike).

    Raises
    ------
    ScenarioError
        Key ``(file)``: not valid TOML (the parser's line and column), or nested so deeply that
        the parser runs out of recursion (``what`` needs at most a few levels).
    """
    try:
        return _toml.loads(text)
    except _toml.TOMLDecodeError as exc:
        raise ScenarioError("(file)", None, f"not valid TOML: {exc}", path=src) from None
    except RecursionError:
        raise ScenarioError("(file)", None, "not readable: arrays or tables nested too deeply "
                            f"({what} needs at most a few levels)", path=src) from None


def parse_scenario(text: str, path: str = "", overrides: Mapping[str, Any] | None = None, *,
                   orekit_data: str | os.PathLike | None = None,
                   check_solar_span: bool = True) -> RunConfig:
    """Validate scenario TOML text (see :func:`load_scenario`); ``path`` names it in errors and
    anchors relative paths in it (default: the current directory)."""
    src = path or "<scenario>"
    raw = parse_toml(text, src, "a scenario")
    if overrides:
        for k, v in overrides.items():
            _apply_override(raw, k, v, src)
    base_dir = Path(path).resolve().parent if path else Path.cwd()
    cfg = _build(raw, src, base_dir, Path(path).stem if path else "scenario")
    cfg = replace(cfg, source_text=text, source_path=path,
                  overrides=dict(overrides) if overrides else {})
    if check_solar_span:
        _check_solar_span(cfg, raw, src, base_dir, orekit_data)
    return cfg

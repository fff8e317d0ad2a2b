"""What ``covey validate`` prints about a validated scenario. Pure Python.
"""

from __future__ import annotations

import datetime as _dt

from guidance.constants import R_EARTH_M

from sim.scenario.config import (
    RunConfig,
)
from sim.errors import EnvironmentSetupError
from sim.orekit.data import parse_epoch, resolve_orekit_data, solar_activity_span



__all__ = ['describe']


def describe(cfg: RunConfig, orekit_data: str | None = None) -> list[str]:
    """Short human-readable lines about a validated scenario (for ``covey validate``)."""
    o = cfg.chief.orbit
    assert o is not None
    lines = [
        f"run {cfg.name!r}: epoch {cfg.epoch_utc}, {cfg.duration_s / 86400.0:g} days, "
        f"log step {cfg.log_step_s:g} s, seed {cfg.seed}",
        f"environment: preset {cfg.environment.preset}, gravity {cfg.environment.gravity_degree}x"
        f"{cfg.environment.gravity_order}, atmosphere {cfg.environment.atmosphere}, "
        f"sun {cfg.environment.sun}, moon {cfg.environment.moon}, srp {cfg.environment.srp}",
        f"chief {cfg.chief.name!r} ({cfg.chief.bus.name}): mean a {o.a_m / 1000:.3f} km "
        f"(altitude {(o.a_m - R_EARTH_M) / 1000:.1f} km), e {o.e:g}, i {o.i_deg:.4f} deg"
        + (" (sun-synchronous)" if o.sun_synchronous else ""),
    ]
    try:
        from sim.models.geometry import mode_areas_m2
    except ImportError:  # pragma: no cover
        mode_areas_m2 = None
    seen = set()
    for sc in cfg.spacecraft:
        if mode_areas_m2 is None or sc.bus.name in seen:
            continue
        seen.add(sc.bus.name)
        areas = mode_areas_m2(sc.bus)
        txt = ", ".join(f"{m} {a:.4f}" for m, a in areas.items())
        lines.append(f"bus {sc.bus.name!r}: {sc.bus.mass_kg:g} kg, ram-facing area per mode (m^2): {txt}")
        if areas.get("max_drag", 0.0) <= areas.get("min_drag", 0.0):
            lines.append(f"  note: bus {sc.bus.name!r} max_drag area is not larger than min_drag")
    for d in cfg.deputies:
        init = f"roe_m {list(d.roe_m)}" if d.roe_m is not None else "absolute mean elements"
        tgt = f", target {list(d.target_roe_m)}" if d.target_roe_m is not None else ""
        lines.append(f"deputy {d.name!r} ({d.bus.name}): {init}{tgt}")
    lines.append(f"guidance: {cfg.guidance.law}, cycle {cfg.guidance.cycle_s:g} s")
    choice = resolve_orekit_data(orekit_data, cfg.orekit_data)
    try:
        span = solar_activity_span(cfg.environment, choice.path)
    except EnvironmentSetupError:
        span = None
    if span is not None:
        first, last, obs, _ = span
        t1 = parse_epoch(cfg.epoch_utc) + _dt.timedelta(seconds=cfg.duration_s)
        txt = f"solar activity: data {first} to {last}"
        if obs is not None:
            txt += f", observed to {obs}"
            if t1.date() > obs:
                txt += " (this run uses predicted values after that)"
        lines.append(txt)
    lines.append(f"Orekit data: {choice.label}" + (f" {choice.user_path}" if choice.user_path else ""))
    return lines

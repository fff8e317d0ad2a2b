"""Translate the validated scenario into what a guidance law is told (guidance.interface.Mission).

Only nominal, configured quantities pass this wall: the bus mass, Cd, the nominal ram-facing area
per mode (from the geometry, as the harness computes it), slew time, thruster limits, targets and
deadlines, and the law's own settings. Nothing of the truth state or of realised errors passes.
"""

from __future__ import annotations

from typing import Callable, Mapping

import numpy as np

from guidance.interface import DeputyTarget, Mission, SpacecraftCaps, ThrusterCaps

from sim.scenario.config import RunConfig, SpacecraftConfig
from sim.errors import ScenarioError


def spacecraft_caps(sc: SpacecraftConfig, area_by_mode_m2: Mapping[str, float]) -> SpacecraftCaps:
    """Guidance's view of one spacecraft from its configuration and nominal mode areas (m^2)."""
    bus = sc.bus
    thr = None
    if bus.thruster is not None:
        t = bus.thruster
        thr = ThrusterCaps(
            dv_max_per_burn_mps=t.dv_max_per_burn_mps,
            min_impulse_bit_Ns=t.min_impulse_bit_Ns,
            isp_s=t.isp_s,
            propellant_kg=t.propellant_kg,
        )
    return SpacecraftCaps(
        name=sc.name,
        mass_kg=bus.mass_kg,
        cd=bus.cd,
        drag_area_m2=dict(area_by_mode_m2),
        slew_time_s=bus.slew_time_s,
        thruster=thr,
        initial_mode=sc.initial_mode,
    )


def build_mission(cfg: RunConfig, area_by_mode: Callable[[str], Mapping[str, float]]) -> Mission:
    """The Mission a law receives at set-up.

    Parameters
    ----------
    cfg : RunConfig
    area_by_mode : callable
        ``name -> {mode: nominal ram-facing area, m^2}`` (``TruthWorld.mode_area_m2``).

    Raises
    ------
    ScenarioError
        A deputy without ``target_roe_m`` when a guidance law is named.
    """
    chief = spacecraft_caps(cfg.chief, area_by_mode(cfg.chief.name))
    deps, targets = [], []
    for k, d in enumerate(cfg.deputies):
        deps.append(spacecraft_caps(d, area_by_mode(d.name)))
        if d.target_roe_m is None:
            raise ScenarioError(
                f"deputies[{k}].target_roe_m", None,
                "six a-scaled metres (da, dlambda, dex, dey, dix, diy) are required when "
                f"guidance.law = {cfg.guidance.law!r}",
            )
        deadline = cfg.duration_s if d.deadline_s is None else d.deadline_s
        targets.append(DeputyTarget(name=d.name, target_roe_m=np.asarray(d.target_roe_m, float),
                                    deadline_s=float(deadline)))
    return Mission(
        epoch_utc=cfg.epoch_utc,
        chief=chief,
        deputies=tuple(deps),
        targets=tuple(targets),
        cycle_s=cfg.guidance.cycle_s,
        settings=dict(cfg.guidance.settings),
    )


def check_guidance(cfg: RunConfig) -> str | None:
    """Check the scenario's guidance law and settings without flying (no JVM).

    Loads the law (``guidance.registry.load_law``) and calls its ``setup`` with the mission built
    from the nominal geometry. Returns the law's class name, or None for ``law = "none"``.

    Raises
    ------
    GuidanceInputError
        Unknown law, bad settings, or a mission the law refuses.
    ScenarioError
        A deputy without a target.
    """
    if cfg.guidance.law == "none":
        return None
    from guidance.registry import load_law

    from sim.models.geometry import mode_areas_m2

    law = load_law(cfg.guidance.law)
    buses = {sc.name: sc.bus for sc in cfg.spacecraft}
    law.setup(build_mission(cfg, lambda name: mode_areas_m2(buses[name])))
    return type(law).__name__

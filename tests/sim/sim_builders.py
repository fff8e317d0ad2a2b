"""Shared builders of the sim tests: a 3U-like bus and a RunConfig made directly (the scenario
reader builds these from TOML). Invented spacecraft and numbers."""

from __future__ import annotations


from sim.scenario.config import (AttitudeModeConfig, BusConfig, EnvironmentConfig, EventsConfig,
                                 GeometryConfig, MeanOrbitConfig, RunConfig, SpacecraftConfig,
                                 ThrusterConfig)

__all__ = ["EPOCH", "R_E_M", "cubesat_bus", "make_run", "env_only"]

EPOCH = "2024-06-01T00:00:00Z"  # inside the CSSI observed span of the bundled data
R_E_M = 6378137.0  # WGS-84 equatorial radius, m (NIMA TR8350.2)


def cubesat_bus(name="bus3u", mass_kg=4.0, box=(0.1, 0.1, 0.3405), cd=2.2, slew_time_s=120.0, thruster=True):
    """A 3U-like box. max_drag: velocity along body X (0.1 x 0.3405 face); min_drag: rotated
    90 deg about Y, velocity along body Z (0.1 x 0.1 end face)."""
    modes = {
        "nominal": AttitudeModeConfig("nominal", (0.0, 0.0, 0.0)),
        "max_drag": AttitudeModeConfig("max_drag", (0.0, 0.0, 0.0)),
        "min_drag": AttitudeModeConfig("min_drag", (0.0, 90.0, 0.0)),
    }
    geo = GeometryConfig(kind="box", box_x_m=box[0], box_y_m=box[1], box_z_m=box[2])
    return BusConfig(name=name, mass_kg=mass_kg, cd=cd, slew_time_s=slew_time_s, geometry=geo, modes=modes,
                     thruster=ThrusterConfig(isp_s=60.0) if thruster else None)


def make_run(*, alt_km=500.0, e=1e-4, i_deg=97.4, raan_deg=30.0, argp_deg=0.0, u_deg=0.0, deputies=(),
             chief_mode="nominal", bus=None, env=None, duration_s=86400.0, log_step_s=60.0, seed=1,
             events=None, epoch=EPOCH) -> RunConfig:
    bus = bus or cubesat_bus()
    chief = SpacecraftConfig("chief", bus, initial_mode=chief_mode,
                             orbit=MeanOrbitConfig(R_E_M + alt_km * 1e3, e, i_deg, raan_deg, argp_deg, u_deg))
    deps = tuple(SpacecraftConfig(n, bus, initial_mode=m, roe_m=tuple(map(float, roe))) for n, m, roe in deputies)
    return RunConfig("test", epoch, duration_s, log_step_s, seed, env or EnvironmentConfig(), chief, deps,
                     events=events or EventsConfig())


def env_only(**kw) -> EnvironmentConfig:
    """Everything off unless switched on."""
    base = dict(preset="full", gravity_degree=0, gravity_order=0, atmosphere="none", sun=False, moon=False, srp=False)
    base.update(kw)
    return EnvironmentConfig(**base)

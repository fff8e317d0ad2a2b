"""A small worked example of a user's guidance law: drag-only along-track bang-bang control.

It is the example of DEVELOPERS.md ("How to add a guidance law") and a usable law in its own right
for pure along-track phasing with differential drag. Name it in a scenario as
``law = "guidance.laws.example_user_law:DragBangBang"`` (or the built-in name ``"drag_bang_bang"``).

Model. For a near-circular chief the along-track ROE in a-scaled metres ``X = a dlambda`` drifts at
``V = dX/dt = -1.5 n a da``, and a differential along-track acceleration ``w`` (deputy minus chief,
m/s^2) changes ``da`` at ``2 w / (n a)`` (Gauss's equation for the semi-major axis), so
``dV/dt = -3 w``: a double integrator driven by the drag. The deputy in ``max_drag`` gives
``u_hi = -3 w(max_drag) > 0``, in ``min_drag`` ``u_lo = -3 w(min_drag)``. The time-optimal
switching curve of a double integrator, ``e + V |V| / (2 U) = 0`` with ``e = X - X_target`` and
``U`` the braking authority, decides the mode at each call; inside a dead band the deputy holds
``hold_mode``. Only ``X`` and ``V`` are controlled: the law plans no impulse.
"""

from __future__ import annotations

import numpy as np

from ..density import DensityModel, differential_along_track_accel_mps2, relative_wind_speed_mps
from ..constants import R_EARTH_M
from ..dynamics import mean_motion
from ..estimation import nav_to_mean
from ..interface import (Diagnostics, GuidanceInputError, GuidanceOutput, Mission, ModeSwitch,
                         NavSolution, SpacecraftCommand)
from .base import parse_settings, setting_choice, setting_number, setting_string

SETTINGS = {
    "deadband_m": (10.0, setting_number(0.0, unit="m"), "along-track error (a-scaled) left uncorrected, m"),
    "chief_mode": ("nominal", setting_string, "attitude mode the chief holds"),
    "hold_mode": ("nominal", setting_string, "deputy mode inside the dead band"),
    "density_model": ("exponential", setting_choice("exponential", "harris_priester"), "density model"),
    "f107_forecast_sfu": (150.0, setting_number(50.0, 400.0, unit="sfu"), "forecast F10.7, sfu"),
    "density_coefficient": (1.0, setting_number(1e-3, 1e3), "multiplies the density estimate"),
}


class DragBangBang:
    """Drag-only along-track bang-bang law (registry name ``"drag_bang_bang"``)."""

    def __init__(self):
        self.mission = None

    def setup(self, mission: Mission) -> None:
        self.s = parse_settings(mission.settings, SETTINGS)
        self.density = DensityModel.from_settings(self.s)
        for dep in mission.deputies:
            for m in ("max_drag", "min_drag", self.s["hold_mode"]):
                if m not in dep.drag_area_m2:
                    raise GuidanceInputError(f"deputies.{dep.name}.modes", sorted(dep.drag_area_m2),
                                             f"modes including {m!r}")
        if self.s["chief_mode"] not in mission.chief.drag_area_m2:
            raise GuidanceInputError("guidance.settings.chief_mode", self.s["chief_mode"],
                                     f"one of {sorted(mission.chief.drag_area_m2)}")
        self.mission = mission
        self.mode = {d.name: d.initial_mode for d in mission.deputies}

    def believed_density_kgpm3(self, r_eci_m: np.ndarray, t_s: np.ndarray | None = None) -> np.ndarray:
        """The law's density belief at positions ``r_eci_m`` (K, 3) in ECI (TOD), m -> (K,) kg/m^3
        (the optional method of guidance.interface.GuidanceLaw; ``t_s`` (K,) is ignored)."""
        return self.density.density_at_eci_kgpm3(r_eci_m)

    def step(self, t_s: float, nav: NavSolution) -> GuidanceOutput:
        try:
            state = nav_to_mean(nav)
        except GuidanceInputError as exc:  # keep the pending schedules, say why
            return GuidanceOutput({}, Diagnostics(status="infeasible", message=f"bad navigation: {exc}"))
        a = float(state.chief_oe[0])
        n = float(mean_motion(a))
        rho = float(self.density.density_kgpm3(a - R_EARTH_M))
        v = float(relative_wind_speed_mps(a, state.chief_oe[3]))
        b_chief = self.mission.chief.ballistic_coefficient_m2pkg(self.s["chief_mode"])
        commands, pred = {}, {}
        times = np.array([t_s])
        for dep in self.mission.deputies:
            w = {m: differential_along_track_accel_mps2(rho, v, dep.ballistic_coefficient_m2pkg(m), b_chief)
                 for m in ("max_drag", "min_drag")}
            u_hi, u_lo = -3.0 * w["max_drag"], -3.0 * w["min_drag"]  # dV/dt in each mode, m/s^2
            roe_m = state.roe_m[dep.name]
            e = roe_m[1] - float(self.mission.target_for(dep.name).target_roe_m[1])
            V = -1.5 * n * roe_m[0]  # along-track drift rate, m/s
            if abs(e) < self.s["deadband_m"] and abs(V) * 5400.0 < self.s["deadband_m"]:
                mode = self.s["hold_mode"]
            else:
                brake = abs(u_lo) if V > 0 else abs(u_hi)  # authority that slows the drift down
                s_curve = e + V * abs(V) / (2.0 * max(brake, 1e-30))
                mode = "min_drag" if s_curve > 0 else "max_drag"
            switches = () if mode == self.mode[dep.name] else (ModeSwitch(float(t_s), mode),)
            self.mode[dep.name] = mode
            commands[dep.name] = SpacecraftCommand(dep.name, mode_switches=switches)
            pred[dep.name] = roe_m[None, :].copy()
        return GuidanceOutput(commands, Diagnostics(
            status="ok", dv_remaining_mps={d.name: 0.0 for d in self.mission.deputies},
            predicted_t_s=times, predicted_roe_m=pred))

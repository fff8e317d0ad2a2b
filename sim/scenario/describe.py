"""What ``covey validate`` prints about a validated scenario. Pure Python.
"""

from __future__ import annotations

import datetime as _dt

from guidance.constants import R_EARTH_M

from sim.scenario.config import (
    ActuatorConfig,
    ErrorAxesConfig,
    GeometryConfig,
    NavErrorConfig,
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
        thr = sc.bus.thruster
        lines.append("  thruster: " + ("none" if thr is None else
                     f"{thr.dv_max_per_burn_mps:g} m/s per burn at most, minimum impulse bit "
                     f"{thr.min_impulse_bit_Ns:g} N s, Isp {thr.isp_s:g} s, propellant "
                     f"{thr.propellant_kg:g} kg"))
        if sc.bus.geometry == GeometryConfig():
            g = sc.bus.geometry
            lines.append(f"  note: bus {sc.bus.name!r} has the default geometry: a box "
                         f"{g.box_x_m:g} x {g.box_y_m:g} x {g.box_z_m:g} m, no panels (give "
                         f"[bus.{sc.bus.name}.geometry] for its own)")
        if areas.get("max_drag", 0.0) <= areas.get("min_drag", 0.0):
            lines.append(f"  note: bus {sc.bus.name!r} max_drag area is not larger than min_drag "
                         "(no differential-drag authority)")
    for d in cfg.deputies:
        init = f"roe_m {list(d.roe_m)}" if d.roe_m is not None else "absolute mean elements"
        lines.append(f"deputy {d.name!r} ({d.bus.name}): initial {init}")
        if d.target_roe_m is not None:
            deadline = cfg.duration_s if d.deadline_s is None else d.deadline_s
            when = (f"deadline {deadline / 86400.0:g} days" if d.deadline_s is not None
                    else f"deadline the end of the run, {deadline / 86400.0:g} days")
            lines.append(f"  target roe_m {list(d.target_roe_m)}, {when}")
        else:
            lines.append("  no target (free drift, not judged)")
    lines.append(f"guidance: {cfg.guidance.law}, cycle {cfg.guidance.cycle_s:g} s")
    lines.append(_navigation_line(cfg))
    lines.append(_actuators_line(cfg.actuators))
    de = cfg.environment.density_error
    if de.bias == 0.0 and de.sigma == 0.0:
        lines.append("truth density error: none (truth density = the atmosphere model's)")
    else:
        lines.append(f"truth density error: bias {de.bias:+g}, Gauss-Markov 1-sigma {de.sigma:g}, "
                     f"tau {de.tau_s:g} s (the truth density is the model's times "
                     "1 + bias + GM; guidance is not told)")
    ev = cfg.events
    lines.append(f"events: altitude floor {ev.min_altitude_km:g} km (stops the run), keep-out "
                 + (f"radius {ev.keep_out_radius_m:g} m (stops the run)" if ev.keep_out_radius_m > 0
                    else "off")
                 + ", radial/normal separation monitor "
                 + (f"{ev.min_rn_separation_m:g} m (flags only)" if ev.min_rn_separation_m > 0
                    else "off"))
    tol = cfg.metrics.tolerance_m
    lines.append("metrics: tolerance box +-" + _vec(tol) + " m on the mean-ROE error (a-scaled "
                 "da, dlambda, dex, dey, dix, diy)")
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


def _vec(v) -> str:
    """One number when all are equal, else the list: ``1`` or ``[1, 2, 3]``."""
    v = [float(x) for x in v]
    return f"{v[0]:g}" if all(x == v[0] for x in v) else "[" + ", ".join(f"{x:g}" for x in v) + "]"


def _axes(a: ErrorAxesConfig) -> str:
    parts = [f"{name} {_vec(sig)}" for name, sig in
             (("white", a.white_sigma), ("bias", a.bias_sigma), ("GM", a.gm_sigma))
             if any(x != 0.0 for x in sig)]
    if any(x != 0.0 for x in a.gm_sigma):
        parts[-1] += f" (tau {_vec(a.gm_tau_s)} s)"
    return ", ".join(parts) if parts else "0"


def _nav_kind(n: NavErrorConfig) -> str:
    txt = (f"position [m] {_axes(n.position_m)}, velocity [m/s] {_axes(n.velocity_mps)}, "
           f"update {n.update_s:g} s")
    if n.outages_s:
        txt += f", {len(n.outages_s)} outage(s)"
    return txt


def _navigation_line(cfg: RunConfig) -> str:
    nav = cfg.navigation
    if nav.perfect:
        given = nav.absolute != NavErrorConfig() or nav.relative != NavErrorConfig()
        return ("navigation: perfect (guidance gets the truth states; [navigation] perfect = "
                "true is the default" + ("; the error tables given are not used" if given else "")
                + ")")
    return (f"navigation (1-sigma per RTN axis): absolute {_nav_kind(nav.absolute)}; relative "
            f"{_nav_kind(nav.relative)}")


def _actuators_line(act: ActuatorConfig) -> str:
    vals = (("dv scale", act.dv_scale_sigma, ""), ("dv fixed", act.dv_fixed_sigma_mps, " m/s"),
            ("pointing", act.pointing_sigma_deg, " deg"), ("timing", act.time_sigma_s, " s"),
            ("drag area", act.drag_area_sigma, ""), ("attitude", act.attitude_sigma_deg, " deg"))
    if act.perfect:
        given = any(v != 0.0 for _, v, _ in vals)
        return ("actuators: perfect (commands executed exactly; [actuators] perfect = true is the "
                "default" + ("; the sigmas given are not used" if given else "") + ")")
    txt = ", ".join(f"{n} {v:g}{u}" for n, v, u in vals)
    return f"actuators: errors 1-sigma: {txt}"

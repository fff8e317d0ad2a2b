"""Warnings about a validated scenario that will fly but cannot do what it asks (``covey validate``
prints them, ``covey run`` repeats them on stderr). Pure Python, no Java.

What is checked, per deputy with a ``target_roe_m`` (a change is a component of target minus
initial mean ROE larger than the ``[metrics] tolerance_m`` half-width):

- out-of-plane changes (a dix, a diy) without a usable thruster (none, or no propellant):
  differential drag acts in the orbit plane; a dix does not change without thrust, a diy only
  drifts under J2 with a dix and a da (common practice, no source);
- any change when the deputy has neither a usable thruster nor drag authority (its ``max_drag``
  area not above its ``min_drag`` area): no actuator acts at all;
- a deadline after the end of the run (the error is then taken at the last sample, and the target
  reads as not met);

and for every pair of spacecraft, a separation at t = 0 below ``[events] keep_out_radius_m`` (the
run would stop at once). The initial positions come from the mean elements taken as osculating
(:mod:`guidance.roe`); the J2 short-period terms differ between two close spacecraft by a small
fraction of their separation.
"""

from __future__ import annotations

import math

import numpy as np

from sim.scenario.config import RunConfig, SpacecraftConfig

__all__ = ["feasibility_warnings", "initial_roe_m", "initial_positions_eci_m"]

_LABELS = ("a da", "a dlambda", "a dex", "a dey", "a dix", "a diy")


def _oe(o) -> np.ndarray:
    """[a (m), ex, ey, i, raan, u (rad)] of a MeanOrbitConfig."""
    w = math.radians(o.argp_deg)
    return np.array([o.a_m, o.e * math.cos(w), o.e * math.sin(w), math.radians(o.i_deg),
                     math.radians(o.raan_deg), math.radians(o.u_deg)])


def initial_roe_m(cfg: RunConfig, sc: SpacecraftConfig) -> np.ndarray:
    """Initial mean ROE of a deputy relative to the chief, a-scaled m (6,): ``roe_m`` as given,
    or computed from its absolute mean elements (:func:`guidance.roe.oe_to_roe`)."""
    if sc.roe_m is not None:
        return np.asarray(sc.roe_m, float)
    from guidance.roe import oe_to_roe

    c = _oe(cfg.chief.orbit)
    return np.asarray(oe_to_roe(c, _oe(sc.orbit)), float) * c[0]


def initial_positions_eci_m(cfg: RunConfig) -> dict[str, np.ndarray]:
    """Position at t = 0 of every spacecraft (3,), m, from its mean elements taken as osculating
    (Keplerian conversion, :func:`guidance.roe.oe_to_rv`)."""
    from guidance.roe import oe_to_rv, roe_to_oe

    c = _oe(cfg.chief.orbit)
    out = {cfg.chief.name: np.asarray(oe_to_rv(c)[0], float)}
    for d in cfg.deputies:
        oe = _oe(d.orbit) if d.orbit is not None else roe_to_oe(c, np.asarray(d.roe_m) / c[0])
        out[d.name] = np.asarray(oe_to_rv(oe)[0], float)
    return out


def _usable_thruster(sc: SpacecraftConfig) -> bool:
    t = sc.bus.thruster
    return t is not None and t.propellant_kg > 0.0


def feasibility_warnings(cfg: RunConfig) -> list[str]:
    """Warnings (one line each) about targets no actuator can reach, deadlines after the run and
    spacecraft starting inside the keep-out radius; empty when none apply."""
    from sim.models.geometry import mode_areas_m2

    out: list[str] = []
    tol = np.asarray(cfg.metrics.tolerance_m, float)
    for k, d in enumerate(cfg.deputies):
        if d.target_roe_m is None:
            continue
        who = f"deputy {d.name!r} (deputies[{k}])"
        change = np.asarray(d.target_roe_m, float) - initial_roe_m(cfg, d)
        needed = np.abs(change) > tol
        areas = mode_areas_m2(d.bus)
        a_hi, a_lo = areas.get("max_drag", 0.0), areas.get("min_drag", 0.0)
        drag = a_hi > a_lo
        thruster = _usable_thruster(d)
        why_no_thr = ("has no thruster" if d.bus.thruster is None
                      else "has a thruster without propellant (propellant_kg = 0)")

        def listed(idx):
            return ", ".join(f"{_LABELS[i]} by {change[i]:+.1f} m" for i in idx)

        if not thruster and not drag and needed.any():
            out.append(f"{who}: the target changes {listed(np.nonzero(needed)[0])}, but bus "
                       f"{d.bus.name!r} {why_no_thr} and no drag authority (max_drag area "
                       f"{a_hi:.4f} m^2 not above min_drag {a_lo:.4f} m^2): no actuator can make "
                       "the change; only the natural drift moves the deputy")
        elif not thruster and needed[4:].any():
            out.append(f"{who}: the target changes {listed(4 + np.nonzero(needed[4:])[0])} out of "
                       f"plane, but bus {d.bus.name!r} {why_no_thr}: differential drag acts in the "
                       "orbit plane and cannot make it (a dix does not change; a diy only drifts "
                       "under J2 with a dix and a da)")
        deadline = cfg.duration_s if d.deadline_s is None else d.deadline_s
        if deadline > cfg.duration_s + 1e-6:
            out.append(f"{who}: deadline {deadline / 86400.0:g} days is after the end of the run "
                       f"({cfg.duration_s / 86400.0:g} days): its error is taken at the last "
                       "sample and its target reads as not met")
    ko = float(cfg.events.keep_out_radius_m)
    if ko > 0.0:
        r = initial_positions_eci_m(cfg)
        names = list(r)
        for i, a in enumerate(names):
            for b in names[i + 1:]:
                dist = float(np.linalg.norm(r[a] - r[b]))
                if dist < ko:
                    out.append(f"{a!r} and {b!r} start {dist:.1f} m apart, inside "
                               f"[events] keep_out_radius_m = {ko:g} m: the run stops at t = 0 "
                               "(initial separation from the mean elements taken as osculating)")
    return out

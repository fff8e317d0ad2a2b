"""Actuator error models: what the truth actually flies, given what guidance commanded.

Pure numpy (no Orekit). The engine passes each guidance cycle's commanded impulses and attitude-mode
switches through :class:`ActuatorModel` and loads the executed ones into the truth. Every returned
record holds both the commanded and the executed values, for the log.

Impulses (:meth:`ActuatorModel.execute_impulses`), in commanded-time order, each:

1. per-burn maximum: a commanded magnitude above ``dv_max_per_burn_mps`` is clipped to it along the
   commanded direction (status ``clipped_max``);
2. minimum impulse bit: a (clipped) commanded magnitude below ``min_impulse_bit_Ns / mass`` is not
   fired (``dropped_min_bit``);
3. execution errors: magnitude ``|dv| (1 + dv_scale_sigma n1) + dv_fixed_sigma_mps n2``; pointing:
   the direction is turned by the small rotation whose two components perpendicular to the commanded
   direction are ``pointing_sigma_deg * (n3, n4)``, so the angle between commanded and executed
   directions is Rayleigh-distributed with scale ``pointing_sigma_deg`` (mean
   ``sigma sqrt(pi/2)``); time ``t + time_sigma_s n5``. The executed magnitude is then clamped into
   ``[min bit / mass, dv_max]`` (the thruster cannot deliver outside its range). The RTN components
   are applied in the RTN frame at the executed time.
4. propellant: ``m_used = m (1 - exp(-|dv_exec| / (Isp g0)))`` (rocket equation, g0 = 9.80665 m/s^2);
   a burn needing more than the propellant left is not fired (``dropped_no_propellant``). Mass and
   propellant are tracked across calls.

A spacecraft without a thruster gets ``dropped_no_thruster`` for every commanded burn.

Attitude modes (:meth:`ActuatorModel.realise_switches`): a switch commanded at ``t`` slews from ``t``
to ``t + slew_time_s`` (the truth should use the new mode from ``t_end_s``). The drag area realised
while a mode is held is the nominal one times

    area_factor = drag_area_factor(mode) * attitude_factor,

- ``drag_area_factor(mode) = 1 + drag_area_sigma n`` drawn once per run per spacecraft per mode
  (stream ``act/<name>/area/<mode>``; clamped at 0.01): the as-built area differs from the model;
- ``attitude_factor``: an attitude pointing error drawn at each switch (a small rotation with three
  independent components of 1-sigma ``attitude_sigma_deg`` about the VNC axes, held until the next
  switch). For box geometry it is the ratio of the box-and-panels area projected along the velocity
  with and without the error (:func:`sim.models.geometry.mode_area_m2`); for table geometry, where no shape is
  known, it is the cosine of the angle between the perturbed and nominal ram axes (a flat face
  turned away from the flow).

``cfg.perfect``: commands are executed as given (no draws) but the hardware limits (per-burn
maximum, minimum impulse bit, propellant) and the slew time still apply.

Random streams (:func:`sim.models.noise.stream`), per spacecraft: ``act/<name>/burn/scale``,
``.../burn/fixed``, ``.../burn/pointing``, ``.../burn/time`` (each draws the same count for every
commanded burn, fired or not), ``act/<name>/area/<mode>``, ``act/<name>/attitude``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from guidance.interface import GuidanceInputError, Impulse, ModeSwitch

from sim.scenario.config import ActuatorConfig, BusConfig
from sim.errors import ScenarioError
from sim.models.geometry import error_rotation, mode_area_m2
from sim.models.noise import stream

__all__ = [
    "G0_MPS2",
    "ExecutedImpulse",
    "ExecutedSwitch",
    "ActuatorModel",
    "REALISTIC_ACTUATORS",
]

G0_MPS2 = 9.80665
"""Standard gravity for the rocket equation, m/s^2 (the conventional value, CGPM 1901)."""

STATUSES = ("executed", "clipped_max", "dropped_min_bit", "dropped_no_propellant",
            "dropped_no_thruster")

#: Realistic actuator errors. Thruster magnitude 3 % and pointing 1 deg 1-sigma: "1-5 % magnitude and
#: about 1 deg pointing are common practice in formation-flying Monte Carlo studies" [memory, no
#: citable source found]. Fixed magnitude part 2e-5 m/s (about the minimum impulse bit of a
#: 1e-4 N s thruster on a 5 kg spacecraft), execution time 0.1 s, drag area 5 %, attitude 2 deg:
#: common practice, no source.
REALISTIC_ACTUATORS = ActuatorConfig(perfect=False, dv_scale_sigma=0.03, dv_fixed_sigma_mps=2e-5,
                                     pointing_sigma_deg=1.0, time_sigma_s=0.1, drag_area_sigma=0.05,
                                     attitude_sigma_deg=2.0)


@dataclass(frozen=True)
class ExecutedImpulse:
    """One commanded burn and what was executed.

    Attributes
    ----------
    name : str
        Spacecraft.
    t_cmd_s : float
        Commanded time, s since epoch.
    dv_cmd_rtn_mps : np.ndarray, shape (3,)
        Commanded delta-v, the spacecraft's RTN at the commanded time, m/s.
    t_exec_s : float
        Executed time, s (the commanded time for a burn not fired).
    dv_exec_rtn_mps : np.ndarray, shape (3,)
        Executed delta-v, RTN at the executed time, m/s (zero for a burn not fired).
    status : str
        One of ``executed``, ``clipped_max``, ``dropped_min_bit``, ``dropped_no_propellant``,
        ``dropped_no_thruster``.
    propellant_used_kg : float
        Propellant this burn used, kg.
    mass_before_kg : float
        Spacecraft mass just before the burn, kg.
    """

    name: str
    t_cmd_s: float
    dv_cmd_rtn_mps: np.ndarray
    t_exec_s: float
    dv_exec_rtn_mps: np.ndarray
    status: str
    propellant_used_kg: float
    mass_before_kg: float = float("nan")

    @property
    def fired(self) -> bool:
        """True when the burn was executed (possibly clipped)."""
        return self.status in ("executed", "clipped_max")


@dataclass(frozen=True)
class ExecutedSwitch:
    """One commanded attitude-mode switch and how it is realised.

    Attributes
    ----------
    name : str
    t_cmd_s : float
        Commanded switch time, s.
    mode : str
    t_start_s, t_end_s : float
        Slew start and end, s; the mode is held from ``t_end_s``.
    area_factor : float
        Realised drag area over the nominal area of ``mode`` while the mode is held
        (``drag_area_factor * attitude_factor``).
    drag_area_factor : float
        The per-run area factor of the mode.
    attitude_factor : float
        The part due to this switch's attitude pointing error.
    attitude_error_rad : np.ndarray, shape (3,)
        The pointing error as a rotation vector about the VNC axes (V, N, C), rad.
    """

    name: str
    t_cmd_s: float
    mode: str
    t_start_s: float
    t_end_s: float
    area_factor: float
    drag_area_factor: float = 1.0
    attitude_factor: float = 1.0
    attitude_error_rad: np.ndarray = field(default_factory=lambda: np.zeros(3))


# ------------------------------------------------------------------------------------------
# The model
# ------------------------------------------------------------------------------------------


def _nonneg(value, key: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) \
            or not math.isfinite(float(value)) or float(value) < 0:
        raise ScenarioError(key, value, "a non-negative finite number")
    return float(value)


class ActuatorModel:
    """Execution of commanded impulses and attitude-mode switches, with errors and bookkeeping.

    Parameters
    ----------
    cfg : sim.scenario.config.ActuatorConfig
    seed : int
        Run seed.
    buses : Mapping[str, sim.scenario.config.BusConfig]
        Bus of each spacecraft, by spacecraft name.
    mass0_kg : Mapping[str, float]
        Initial wet mass per spacecraft, kg (default: the bus mass).
    propellant0_kg : Mapping[str, float]
        Initial propellant per spacecraft, kg (default: the bus thruster's, 0 without thruster).
    """

    def __init__(self, cfg: ActuatorConfig, seed: int, buses: Mapping[str, BusConfig],
                 mass0_kg: Mapping[str, float], propellant0_kg: Mapping[str, float]):
        self.cfg = cfg
        self.seed = seed
        stream(seed, "act")  # validates the seed
        self._sig = {k: _nonneg(getattr(cfg, k), f"actuators.{k}") for k in
                     ("dv_scale_sigma", "dv_fixed_sigma_mps", "pointing_sigma_deg", "time_sigma_s",
                      "drag_area_sigma", "attitude_sigma_deg")}
        self.perfect = bool(cfg.perfect)
        self.buses = dict(buses)
        self._mass: dict[str, float] = {}
        self._prop: dict[str, float] = {}
        self._rng: dict[str, dict[str, np.random.Generator]] = {}
        self._area: dict[str, dict[str, float]] = {}
        for name, bus in self.buses.items():
            m0 = float(mass0_kg.get(name, bus.mass_kg))
            p_default = bus.thruster.propellant_kg if bus.thruster is not None else 0.0
            p0 = float(propellant0_kg.get(name, p_default))
            if not (math.isfinite(m0) and m0 > 0):
                raise ScenarioError(f"{name}.mass_kg", m0, "a positive mass in kg")
            if not (math.isfinite(p0) and 0 <= p0 < m0):
                raise ScenarioError(f"{name}.propellant_kg", p0,
                                    f"propellant in kg, 0 <= propellant < wet mass ({m0} kg)")
            if bus.thruster is not None:
                th = bus.thruster
                for k in ("dv_max_per_burn_mps", "min_impulse_bit_Ns", "isp_s"):
                    _nonneg(getattr(th, k), f"buses.{bus.name}.thruster.{k}")
                if th.isp_s <= 0 or th.dv_max_per_burn_mps <= 0:
                    raise ScenarioError(f"buses.{bus.name}.thruster", th,
                                        "isp_s > 0 s and dv_max_per_burn_mps > 0 m/s")
            self._mass[name] = m0
            self._prop[name] = p0
            self._rng[name] = {}
            self._area[name] = {}
        for name in set(mass0_kg) | set(propellant0_kg):
            if name not in self.buses:
                raise ScenarioError(f"{name}", name, f"a spacecraft with a bus: one of {sorted(self.buses)}")

    # -- state ----------------------------------------------------------------------------------

    def mass_kg(self, name: str) -> float:
        """Current wet mass, kg."""
        return self._mass[self._known(name)]

    def propellant_kg(self, name: str) -> float:
        """Propellant left, kg."""
        return self._prop[self._known(name)]

    def _known(self, name: str) -> str:
        if name not in self.buses:
            raise KeyError(f"actuators: unknown spacecraft {name!r} (known: {sorted(self.buses)})")
        return name

    def _stream(self, name: str, *source: str) -> np.random.Generator:
        key = "/".join(source)
        g = self._rng[name].get(key)
        if g is None:
            g = self._rng[name][key] = stream(self.seed, "act", name, *source)
        return g

    def modes(self, name: str) -> tuple[str, ...]:
        """Attitude modes the spacecraft defines: the bus's ``modes``; for a table geometry without
        ``modes`` the table's keys; otherwise ``("nominal",)`` (as ``sim.models.geometry.mode_names``)."""
        bus = self.buses[self._known(name)]
        if bus.modes:
            return tuple(bus.modes)
        if bus.geometry.kind == "table":
            return tuple(bus.geometry.area_by_mode_m2)
        return ("nominal",)

    # -- impulses -------------------------------------------------------------------------------

    def execute_impulses(self, name: str, commanded: Sequence[Impulse],
                         t_not_before_s: float | None = None) -> list[ExecutedImpulse]:
        """Execute commanded impulses (those of the coming cycle), in time order.

        Parameters
        ----------
        name : str
            Spacecraft.
        commanded : sequence of guidance.interface.Impulse
            Impulses to execute now; each is executed exactly once (call once per impulse).
        t_not_before_s : float, optional
            Executed times are not moved before this (e.g. the current cycle time).

        Returns
        -------
        list of ExecutedImpulse
            One record per commanded impulse, sorted by commanded time.

        Raises
        ------
        GuidanceInputError
            A commanded delta-v that is not three finite numbers, or a non-finite time.
        """
        self._known(name)
        bus = self.buses[name]
        th = bus.thruster
        items = []
        for i, imp in enumerate(commanded):
            key = f"commands.{name}.impulses[{i}]"
            try:
                dv = np.asarray(imp.dv_rtn_mps, dtype=float).reshape(3)
                t = float(imp.t_s)
            except (TypeError, ValueError, AttributeError):
                raise GuidanceInputError(
                    key, imp, "an Impulse with t_s (s) and dv_rtn_mps, 3 numbers in m/s") from None
            if not (np.all(np.isfinite(dv)) and math.isfinite(t)):
                raise GuidanceInputError(key, imp, "finite t_s (s) and dv_rtn_mps (m/s)")
            items.append((t, i, dv))
        items.sort(key=lambda x: (x[0], x[1]))
        out = []
        for t, _, dv in items:
            out.append(self._execute_one(name, th, t, dv, t_not_before_s))
        return out

    def _burn_draws(self, name: str) -> tuple[float, float, float, float, float]:
        if self.perfect:
            return 0.0, 0.0, 0.0, 0.0, 0.0
        n1 = self._stream(name, "burn", "scale").standard_normal()
        n2 = self._stream(name, "burn", "fixed").standard_normal()
        n3, n4 = self._stream(name, "burn", "pointing").standard_normal(2)
        n5 = self._stream(name, "burn", "time").standard_normal()
        return float(n1), float(n2), float(n3), float(n4), float(n5)

    def _execute_one(self, name, th, t, dv_cmd, t_not_before):
        n1, n2, n3, n4, n5 = self._burn_draws(name)
        mass = self._mass[name]
        zero = np.zeros(3)

        def rec(status, t_exec=t, dv=zero, used=0.0):
            return ExecutedImpulse(name, t, dv_cmd.copy(), t_exec, np.array(dv, dtype=float), status,
                                   float(used), mass)

        if th is None:
            return rec("dropped_no_thruster")
        mag = float(np.linalg.norm(dv_cmd))
        dv_min = th.min_impulse_bit_Ns / mass
        dv_max = th.dv_max_per_burn_mps
        status = "executed"
        if mag > dv_max:
            status, target = "clipped_max", dv_max
        else:
            target = mag
        if target <= 0.0 or target < dv_min:
            return rec("dropped_min_bit")
        u = dv_cmd / mag
        s = self._sig
        m_exec = target * (1.0 + s["dv_scale_sigma"] * n1) + s["dv_fixed_sigma_mps"] * n2
        m_exec = min(max(m_exec, dv_min), dv_max)
        sig_p = math.radians(s["pointing_sigma_deg"])
        turned = sig_p > 0 and (n3 != 0.0 or n4 != 0.0)
        if turned:
            p1, p2 = _perpendicular_basis(u)
            e = sig_p * (n3 * p1 + n4 * p2)
            ang = float(np.linalg.norm(e))
            u = math.cos(ang) * u + math.sin(ang) * (e / ang)
            u = u / np.linalg.norm(u)
        t_exec = t + s["time_sigma_s"] * n5
        if t_not_before is not None:
            t_exec = max(t_exec, float(t_not_before))
        used = mass * -math.expm1(-m_exec / (th.isp_s * G0_MPS2))
        if used > self._prop[name]:
            return rec("dropped_no_propellant", t_exec)
        self._mass[name] = mass - used
        self._prop[name] = self._prop[name] - used
        dv_exec = dv_cmd.copy() if (m_exec == mag and not turned) else m_exec * u  # exact when unchanged
        return rec(status, t_exec, dv_exec, used)

    # -- attitude modes -------------------------------------------------------------------------

    def area_factor_by_mode(self, name: str) -> dict[str, float]:
        """The per-run drag-area factor of each mode (``1 + drag_area_sigma n``, 1 if perfect)."""
        return {m: self._drag_factor(name, m) for m in self.modes(name)}

    def _drag_factor(self, name: str, mode: str) -> float:
        f = self._area[name].get(mode)
        if f is None:
            if self.perfect or self._sig["drag_area_sigma"] == 0.0:
                f = 1.0
            else:
                n = float(stream(self.seed, "act", name, "area", mode).standard_normal())
                f = max(0.01, 1.0 + self._sig["drag_area_sigma"] * n)
            self._area[name][mode] = f
        return f

    def _attitude_factor(self, name: str, mode: str) -> tuple[float, np.ndarray]:
        if self.perfect or self._sig["attitude_sigma_deg"] == 0.0:
            return 1.0, np.zeros(3)
        sig = math.radians(self._sig["attitude_sigma_deg"])
        eps = sig * self._stream(name, "attitude").standard_normal(3)
        bus = self.buses[name]
        if bus.geometry.kind == "box":
            rot = bus.modes[mode].rotation_xyz_deg if mode in bus.modes else (0.0, 0.0, 0.0)
            a0 = mode_area_m2(bus.geometry, rot)
            a1 = mode_area_m2(bus.geometry, rot, eps)
            return (a1 / a0 if a0 > 0 else 1.0), eps
        # table: cosine of the tilt of the ram axis, e_x . R(eps) e_x
        return float(error_rotation(eps)[0, 0]), eps

    def _check_mode(self, name: str, mode, key: str) -> str:
        allowed = self.modes(name)
        if not isinstance(mode, str) or mode not in allowed:
            raise GuidanceInputError(key, mode, f"an attitude mode of {name!r}: one of {list(allowed)}")
        return mode

    def realise_switches(self, name: str, commanded: Sequence[ModeSwitch]) -> list[ExecutedSwitch]:
        """Realise commanded attitude-mode switches (those of the coming cycle), in time order.

        Parameters
        ----------
        name : str
        commanded : sequence of guidance.interface.ModeSwitch

        Returns
        -------
        list of ExecutedSwitch
            One per commanded switch, sorted by commanded time.
        """
        self._known(name)
        slew = float(self.buses[name].slew_time_s)
        items = []
        for i, sw in enumerate(commanded):
            key = f"commands.{name}.mode_switches[{i}]"
            try:
                t = float(sw.t_s)
                mode = sw.mode
            except (TypeError, ValueError, AttributeError):
                raise GuidanceInputError(key, sw, "a ModeSwitch with t_s (s) and mode (str)") from None
            if not math.isfinite(t):
                raise GuidanceInputError(f"{key}.t_s", t, "a finite time in s")
            self._check_mode(name, mode, f"{key}.mode")
            items.append((t, i, mode))
        items.sort(key=lambda x: (x[0], x[1]))
        return [self._switch(name, t, mode, t, t + slew) for t, _, mode in items]

    def _switch(self, name, t, mode, t0, t1) -> ExecutedSwitch:
        fd = self._drag_factor(name, mode)
        fa, eps = self._attitude_factor(name, mode)
        return ExecutedSwitch(name, t, mode, t0, t1, fd * fa, fd, fa, eps)


def _perpendicular_basis(u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two unit vectors perpendicular to the unit vector ``u`` and to each other."""
    e = np.zeros(3)
    e[int(np.argmin(np.abs(u)))] = 1.0
    p1 = np.cross(u, e)
    p1 /= np.linalg.norm(p1)
    return p1, np.cross(u, p1)

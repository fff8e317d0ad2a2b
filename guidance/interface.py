"""The contract between the simulation harness and every guidance law.

Everything here is plain numpy data. Guidance never sees truth: the harness hands a law a
:class:`Mission` once (what it is asked to do and what the spacecraft can do) and then, at each
guidance cycle, a :class:`NavSolution` (navigation *estimates* with their stated 1-sigma).
The law answers with a :class:`GuidanceOutput`: per spacecraft a time-tagged attitude-mode schedule
and a list of time-tagged impulses, plus diagnostics.

Conventions
-----------
- Time ``t_s`` is seconds since the scenario epoch (``Mission.epoch_utc``), a float.
- ``eci`` in a name means covey's inertial frame: the true-of-date frame (TOD, IERS 2010
  conventions), whose z axis is the true celestial pole, so that the J2 equator is the xy plane.
- ``rtn`` is the chief's (or the spacecraft's own) radial / along-track (transverse) / normal frame:
  R along the position vector, N along the orbit angular momentum, T = N x R.
- ROE are quasi-nonsingular relative orbital elements (Koenig et al., JGCD 40(7), 2017, eq. 2)
  ordered (da, dlambda, dex, dey, dix, diy); ``roe_m`` means scaled by the chief semi-major axis
  (a-scaled metres).

Semantics of commands
---------------------
Each call of :meth:`GuidanceLaw.step` at time ``t`` returns the law's whole plan from ``t`` on.
The harness discards whatever it had pending at or after ``t`` for a spacecraft named in the
commands and loads the new items. A spacecraft that the commands do not name keeps its pending plan.
Mode switches and impulses earlier than ``t`` are refused by the harness.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping, Protocol, runtime_checkable

import numpy as np

ROE_NAMES = ("da", "dlambda", "dex", "dey", "dix", "diy")
"""Order of the six quasi-nonsingular ROE components everywhere in covey."""

MODE_NAMES_REQUIRED = ("max_drag", "min_drag", "nominal")
"""Attitude modes every spacecraft defines (more may be added)."""


# --------------------------------------------------------------------------------------------
# Mission description (given once)
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ThrusterCaps:
    """What one spacecraft's thruster can do.

    Attributes
    ----------
    dv_max_per_burn_mps : float
        Largest delta-v of a single impulse, m/s.
    min_impulse_bit_Ns : float
        Smallest impulse the thruster can deliver, N s. Divide by mass for the smallest delta-v.
    isp_s : float
        Specific impulse, s.
    propellant_kg : float
        Propellant on board at the start, kg.
    """

    dv_max_per_burn_mps: float
    min_impulse_bit_Ns: float
    isp_s: float
    propellant_kg: float


@dataclass(frozen=True)
class SpacecraftCaps:
    """Capabilities of one spacecraft as guidance knows them (its own model, not the truth).

    Attributes
    ----------
    name : str
        Spacecraft name, unique in the mission.
    mass_kg : float
        Wet mass at the start, kg.
    cd : float
        Drag coefficient guidance assumes.
    drag_area_m2 : Mapping[str, float]
        Ram-facing (velocity-projected) area per attitude mode, m^2, as computed by the harness from
        the spacecraft's nominal geometry.
    slew_time_s : float
        Time to change attitude mode, s.
    thruster : ThrusterCaps or None
        None for a spacecraft with no thruster.
    initial_mode : str
        Attitude mode at the start.
    """

    name: str
    mass_kg: float
    cd: float
    drag_area_m2: Mapping[str, float]
    slew_time_s: float
    thruster: ThrusterCaps | None
    initial_mode: str = "nominal"

    def ballistic_coefficient_m2pkg(self, mode: str) -> float:
        """Cd A / m of one attitude mode, m^2/kg."""
        return self.cd * float(self.drag_area_m2[mode]) / self.mass_kg

    @property
    def min_dv_mps(self) -> float:
        """Smallest delta-v one impulse can deliver, m/s (minimum impulse bit / mass)."""
        if self.thruster is None:
            return float("inf")
        return self.thruster.min_impulse_bit_Ns / self.mass_kg


@dataclass(frozen=True)
class DeputyTarget:
    """Where one deputy must be, in chief-relative mean ROE.

    Attributes
    ----------
    name : str
        Deputy name.
    target_roe_m : np.ndarray, shape (6,)
        Target mean ROE, a-scaled metres, order :data:`ROE_NAMES`.
    deadline_s : float
        Time the target must be reached by, s since epoch.
    """

    name: str
    target_roe_m: np.ndarray
    deadline_s: float


@dataclass(frozen=True)
class Mission:
    """Everything a guidance law is told once, before the first cycle.

    Attributes
    ----------
    epoch_utc : str
        Scenario epoch, ISO 8601 UTC. Guidance may use it only as a clock reference.
    chief : SpacecraftCaps
        The chief (reference) spacecraft.
    deputies : tuple of SpacecraftCaps
        The deputies, in scenario order.
    targets : tuple of DeputyTarget
        One target per deputy, same order.
    cycle_s : float
        Guidance cycle period the harness calls the law at, s.
    settings : Mapping[str, Any]
        The law's own settings from the scenario's ``[guidance.settings]`` table.
    """

    epoch_utc: str
    chief: SpacecraftCaps
    deputies: tuple[SpacecraftCaps, ...]
    targets: tuple[DeputyTarget, ...]
    cycle_s: float
    settings: Mapping[str, Any] = field(default_factory=dict)

    def target_for(self, name: str) -> DeputyTarget:
        for t in self.targets:
            if t.name == name:
                return t
        raise KeyError(name)

    def spacecraft(self, name: str) -> SpacecraftCaps:
        for sc in (self.chief, *self.deputies):
            if sc.name == name:
                return sc
        raise KeyError(name)


# --------------------------------------------------------------------------------------------
# Navigation (given every cycle)
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class AbsoluteEstimate:
    """Navigation estimate of one spacecraft's absolute state.

    Attributes
    ----------
    name : str
    t_s : float
        Time tag of the estimate, s since epoch.
    r_eci_m : np.ndarray, shape (3,)
        Position in covey's ECI (TOD), m.
    v_eci_mps : np.ndarray, shape (3,)
        Velocity in covey's ECI (TOD), m/s.
    sigma_r_rtn_m : np.ndarray, shape (3,)
        Stated 1-sigma of the position error in the spacecraft's RTN frame, m.
    sigma_v_rtn_mps : np.ndarray, shape (3,)
        Stated 1-sigma of the velocity error in RTN, m/s.
    mass_kg : float
        Current mass estimate (wet mass minus propellant used), kg.
    """

    name: str
    t_s: float
    r_eci_m: np.ndarray
    v_eci_mps: np.ndarray
    sigma_r_rtn_m: np.ndarray
    sigma_v_rtn_mps: np.ndarray
    mass_kg: float


@dataclass(frozen=True)
class RelativeEstimate:
    """Navigation estimate of a deputy relative to the chief.

    Attributes
    ----------
    name : str
        Deputy name.
    t_s : float
        Time tag, s since epoch.
    dr_rtn_m : np.ndarray, shape (3,)
        Deputy position minus chief position, expressed in the chief's RTN frame, m.
    dv_rtn_mps : np.ndarray, shape (3,)
        Deputy velocity minus chief velocity, both inertial, expressed in the chief's RTN frame, m/s
        (not the velocity seen in the rotating RTN frame).
    sigma_dr_rtn_m, sigma_dv_rtn_mps : np.ndarray, shape (3,)
        Stated 1-sigma per axis.
    mass_kg : float
        Deputy mass estimate, kg.
    """

    name: str
    t_s: float
    dr_rtn_m: np.ndarray
    dv_rtn_mps: np.ndarray
    sigma_dr_rtn_m: np.ndarray
    sigma_dv_rtn_mps: np.ndarray
    mass_kg: float


@dataclass(frozen=True)
class NavSolution:
    """All navigation a law gets at one cycle.

    Attributes
    ----------
    t_s : float
        Cycle time, s since epoch.
    chief : AbsoluteEstimate
    deputies : Mapping[str, RelativeEstimate]
        Relative estimates by deputy name.
    valid : bool
        False during a navigation outage: the estimates are then propagated by the navigation
        filter, not fresh.
    """

    t_s: float
    chief: AbsoluteEstimate
    deputies: Mapping[str, RelativeEstimate]
    valid: bool = True


# --------------------------------------------------------------------------------------------
# Commands and diagnostics (returned every cycle)
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ModeSwitch:
    """Command to start slewing into an attitude mode at ``t_s``."""

    t_s: float
    mode: str


@dataclass(frozen=True)
class Impulse:
    """Command for one impulsive burn.

    Attributes
    ----------
    t_s : float
        Execution time, s since epoch.
    dv_rtn_mps : np.ndarray, shape (3,)
        Delta-v in the burning spacecraft's own RTN frame at ``t_s``, m/s.
    """

    t_s: float
    dv_rtn_mps: np.ndarray


@dataclass(frozen=True)
class SpacecraftCommand:
    """Plan for one spacecraft from the cycle time on."""

    name: str
    mode_switches: tuple[ModeSwitch, ...] = ()
    impulses: tuple[Impulse, ...] = ()


@dataclass(frozen=True)
class Diagnostics:
    """What a law reports about its own solve.

    Attributes
    ----------
    status : str
        ``"ok"``, ``"infeasible"`` (no plan satisfies the constraints; ``message`` says why),
        ``"hold"`` (nothing to do this cycle, previous plan kept) or ``"degraded"`` (a plan was made
        but some constraint was relaxed; ``message`` says which).
    message : str
    solve_time_s : float
        Wall time spent in the solve, s.
    dv_remaining_mps : Mapping[str, float]
        Predicted propulsive delta-v from now to the deadline per deputy, m/s (the plan's cost).
    predicted_t_s : np.ndarray, shape (K,)
        Times of the predicted trajectory, s since epoch.
    predicted_roe_m : Mapping[str, np.ndarray]
        Per deputy the predicted mean ROE at ``predicted_t_s``, shape (K, 6), a-scaled metres.
    """

    status: str = "ok"
    message: str = ""
    solve_time_s: float = 0.0
    dv_remaining_mps: Mapping[str, float] = field(default_factory=dict)
    predicted_t_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    predicted_roe_m: Mapping[str, np.ndarray] = field(default_factory=dict)


@dataclass(frozen=True)
class GuidanceOutput:
    """A law's answer at one cycle."""

    commands: Mapping[str, SpacecraftCommand]
    diagnostics: Diagnostics


@runtime_checkable
class GuidanceLaw(Protocol):
    """What every guidance law implements.

    A law is constructed with no arguments (``cls()``), then :meth:`setup` is called once and
    :meth:`step` at every guidance cycle. A law must not read any file or clock other than what
    it is given; it may keep state between calls.

    Notes
    -----
    Optional method: a law may also define the method below (it is not part of the protocol's
    ``isinstance`` check); the harness calls it only after :meth:`setup`.

    ``believed_density_kgpm3(r_eci_m, t_s=None) -> np.ndarray``
        The law's own atmospheric density belief at given positions, kg/m^3, which the harness
        logs next to the truth density (for a law without the method it logs NaN: no belief).

        Parameters: ``r_eci_m`` : np.ndarray, shape (K, 3), positions in covey's ECI (TOD), m;
        ``t_s`` : np.ndarray, shape (K,), optional, their times, s since epoch (None when the
        harness does not give them; a belief that depends on altitude only ignores them).

        Returns: np.ndarray, shape (K,), density, kg/m^3.

        The built-in laws answer with their :class:`guidance.density.DensityModel`
        (:meth:`guidance.density.DensityModel.density_at_eci_kgpm3`).
    """

    def setup(self, mission: Mission) -> None:
        """Receive the mission description and the law's own settings (``mission.settings``)."""
        ...

    def step(self, t_s: float, nav: NavSolution) -> GuidanceOutput:
        """Plan from ``t_s`` on, given the navigation estimate ``nav``."""
        ...


class GuidanceInputError(ValueError):
    """Bad mission input or settings for a guidance law.

    Attributes
    ----------
    key : str
        The setting or mission field at fault (dotted path).
    value : Any
        The value given.
    allowed : str
        What is allowed, with units.
    """

    def __init__(self, key: str, value: Any, allowed: str):
        self.key, self.value, self.allowed = key, value, allowed
        super().__init__(f"{key} = {value!r}: {allowed}")

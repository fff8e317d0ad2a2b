"""Per-spacecraft state of the truth world: the attitude-mode timeline, pending impulses, the
propagator and integrator, and the sample buffers (Java objects inside; only sim/truth and
sim/orekit import Java)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from sim.errors import ScenarioError
from sim.models import geometry as scgeo
from sim.orekit.forces import MAX_STEP_S, ForceEnvironment
from sim.scenario.config import SpacecraftConfig
from sim.truth.sampling import make_sampler

__all__ = ["TruthState", "AdvanceResult", "Switch", "Craft", "new_propagator", "EPS_T"]

EPS_T = 1e-6
"""s: times closer than this are the same instant."""
_EPS_T = EPS_T


@dataclass(frozen=True)
class TruthState:
    """True state of one spacecraft.

    Attributes
    ----------
    name : str
    t_s : float
        Seconds since the epoch.
    r_eci_m, v_eci_mps : np.ndarray, shape (3,)
        Position and velocity in TOD, m and m/s.
    mass_kg : float
    mode : str
        Commanded attitude mode.
    """

    name: str
    t_s: float
    r_eci_m: np.ndarray
    v_eci_mps: np.ndarray
    mass_kg: float
    mode: str


@dataclass(frozen=True)
class AdvanceResult:
    """Outcome of :meth:`TruthWorld.advance_to`.

    Attributes
    ----------
    t_s : float
        Time reached (the target, or the stop time).
    stopped : bool
        True when an event ended the run (``"altitude"``, ``"keep_out"``).
    reason : str or None
    """

    t_s: float
    stopped: bool
    reason: str | None


@dataclass
class Switch:
    t_cmd: float  # commanded (slew start), s
    t_eff: float  # drag area takes effect (slew midpoint), s
    mode: str
    area_m2: float  # effective drag area (nominal * factor)
    kind: str = "mode_switch"
    reported: bool = False


def new_propagator(forces: ForceEnvironment, orbit):
    """The truth's integrator settings: a NumericalPropagator on DormandPrince853 with Orekit's
    tolerances for ``position_tolerance_m`` in equinoctial elements, minimum step 1 ms, step cap
    :data:`sim.orekit.forces.MAX_STEP_S`, equinoctial orbit type and the environment's ``mu``; no force
    model, state, handler or detector yet. Returns ``(propagator, integrator)`` (Orekit's
    propagator does not give its integrator back; set its initial step before each call)."""
    from org.hipparchus.ode.nonstiff import DormandPrince853Integrator
    from org.orekit.orbits import OrbitType
    from org.orekit.propagation.numerical import NumericalPropagator

    tol = NumericalPropagator.tolerances(float(forces.env.position_tolerance_m), orbit, OrbitType.EQUINOCTIAL)
    integrator = DormandPrince853Integrator(1e-3, MAX_STEP_S, tol[0], tol[1])
    p = NumericalPropagator(integrator)
    p.setOrbitType(OrbitType.EQUINOCTIAL)
    p.setMu(forces.mu_m3ps2)
    return p, integrator


class Craft:
    """Book-keeping of one spacecraft of a :class:`sim.truth.world.TruthWorld`: configuration, mode
    timeline, pending impulses, propagator, sample buffers."""

    def __init__(self, world, cfg: SpacecraftConfig, state0):
        self.world = world
        self.cfg = cfg
        self.name = cfg.name
        self.bus = cfg.bus
        self.modes = scgeo.mode_names(cfg.bus)
        self.mode_index = {m: k for k, m in enumerate(self.modes)}
        if cfg.initial_mode not in self.mode_index:
            raise ScenarioError(f"spacecraft.{cfg.name}.initial_mode", cfg.initial_mode,
                                f"one of the bus's attitude modes {list(self.modes)}")
        self.areas = scgeo.mode_areas_m2(cfg.bus)
        self.area_ref = max(self.areas.values())
        self.srp_area = scgeo.srp_area_m2(cfg.bus, self.areas)
        if cfg.bus.mass_kg <= 0:
            raise ScenarioError(f"buses.{cfg.bus.name}.mass_kg", cfg.bus.mass_kg, "a positive mass, kg")
        self.factors: dict[str, float] = {m: 1.0 for m in self.modes}
        self.timeline: list[Switch] = [Switch(-math.inf, -math.inf, cfg.initial_mode, self.areas[cfg.initial_mode],
                                                "initial")]
        self.impulses: list[tuple[float, np.ndarray]] = []
        self.state = state0
        self.t_s = 0.0
        env = world.forces
        self.propagator, self.integrator = new_propagator(env, state0.getOrbit())
        self.static_forces = env.static_forces(self.srp_area, cfg.bus.cr)
        # buffers: committed (to drain) and of the running segment
        self.samples: dict[str, list] = {k: [] for k in ("t", "rv", "m", "rho")}
        self.seg: dict[str, list] = {k: [] for k in ("t", "rv", "m", "rho")}
        from jpype import JArray, JDouble

        self._jarray = lambda n: JArray(JDouble)(n)
        self.tmp6 = self._jarray(6)
        self.buf = self._jarray(6)
        self.next_k = 0  # next grid index to sample
        self.executed: list[dict] = []
        self.seg_executed: list[dict] = []
        self.sampler = make_sampler(world, self)  # put on the propagator per segment (_run_segment)

    # -- schedule lookups ---------------------------------------------------------------
    def modes_at(self, t) -> list[str]:
        """Commanded mode at each time of ``t`` (array_like)."""
        tl = sorted(self.timeline, key=lambda s: s.t_cmd)
        keys = np.array([s.t_cmd for s in tl])
        idx = np.searchsorted(keys, np.asarray(t, dtype=float) + _EPS_T, side="right") - 1
        return [tl[max(i, 0)].mode for i in np.atleast_1d(idx)]

    def areas_at(self, t) -> np.ndarray:
        """Drag area in effect at each time of ``t`` (array_like), m^2."""
        tl = sorted(self.timeline, key=lambda s: s.t_eff)
        keys = np.array([s.t_eff for s in tl])
        vals = np.array([s.area_m2 for s in tl])
        idx = np.searchsorted(keys, np.atleast_1d(np.asarray(t, dtype=float)) + _EPS_T, side="right") - 1
        return vals[np.maximum(idx, 0)]

    def mode_at(self, t: float) -> str:
        return self.modes_at([t])[0]

    def area_at(self, t: float) -> float:
        return float(self.areas_at([t])[0])

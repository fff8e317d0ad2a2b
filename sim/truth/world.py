"""The truth world: one Orekit numerical propagator per spacecraft.

What happens in one :meth:`TruthWorld.advance_to` call, per spacecraft:

1. Pending impulses at exactly the current time are applied to the state (same arithmetic as
   Orekit's ``ImpulseManeuver``); later ones inside the interval become ``ImpulseManeuver``
   events on ``DateDetector`` s, applied at their exact epoch with mass depletion by the rocket
   equation.
2. A fresh ``DragForce(atmosphere, IsotropicDrag(A_ref, Cd))`` is built whose two parameter
   drivers hold, as time spans inside the interval, the attitude-mode drag area
   (``"drag coefficient"`` = ``Cd * A_mode * factor / A_ref``) and the truth density scale error
   (``"global drag factor"`` = ``1 + bias + GM(t)``). Orekit adds a date event at each span
   transition, so the hot loop stays in Java.
3. ONE ``propagate()`` to the target time, with the integrator's initial step set, an altitude
   detector, and a sampler of the fixed grid ``k * log_step_s``: by default Orekit's CCSDS OEM
   streaming writer as a Java fixed-step handler writing into a Java ``StringBuilder``, parsed in
   numpy after the call (no Python per sample; ``java_sampler``); for a segment that does
   not start on the grid, or with the per-sample density below, a Python step handler (called
   once per integrator step, never inside a force evaluation).

Logged density: with NRLMSISE-00 in mean local solar time (and pymsis importable) the sampler
records no density; :meth:`TruthWorld.drain_samples` computes it for all samples at once with the
reference NRLMSISE-00 Fortran (pymsis, version 0) from the sampled positions (TOD -> ITRF by
Orekit's exact transform on a :data:`TOD_GRID_S` grid and the Earth rotation in between, geodetic
coordinates on ``forces.earth``, model time in UT1 as Orekit's) and the F10.7, F10.7A and daily
Ap read from the same Orekit space-weather object the force model uses, once per UTC day. It
matches Orekit's ``NRLMSISE00.getDensity`` within 1.6e-5 relative at every sample of a day
(measured; pymsis runs the Fortran in single precision; tests/sim/test_truth_density.py). Other
atmospheres, apparent local solar time, a run containing a leap second, or
``TruthWorld(..., batched_density=False)`` use Orekit's ``getDensity`` per sample.

Frames: integration in GCRF; every state, sample and delta-v handed out is in covey's ECI, the
true-of-date frame (TOD, IERS 2010). Initial states are given as Eckstein-Hechler *mean* elements
in TOD and converted with ``EcksteinHechlerTheory.meanToOsculating`` (gravity degree >= 2; with
the central term only, mean = osculating).

Slews: a mode switch commanded at ``t`` starts a slew of ``bus.slew_time_s``; the drag area
changes in one step at the slew's midpoint ``t + slew/2`` (for an area that changes linearly during
the slew this gives the same along-track impulse as the ramp, with one span transition instead of
several). ``mode_index`` in the samples is the *commanded* mode (it changes at ``t``);
``drag_area_m2`` is the area in effect (it changes at ``t + slew/2``).
"""

from __future__ import annotations

import math
from typing import Callable, Mapping, Sequence

import numpy as np

from sim.scenario.config import RunConfig, SpacecraftConfig
from sim.errors import PropagationError, ScenarioError
from sim.orekit.forces import MAX_STEP_S, ForceEnvironment
from sim.orekit.meanroe import deputy_mean_from_roe
from sim.orekit.boot import BootInfo, boot
from sim.models.frames import rtn_columns
from sim.models.actuators import G0_MPS2
from sim.models.noise import gauss_markov
from sim.truth.craft import AdvanceResult, Craft, Switch, TruthState, new_propagator
from sim.truth.density import EARTH_ROTATION_RADPS, MsisBatch, geodetic_from_ecef  # noqa: F401
from sim.truth.frames import TOD_GRID_S, grid_cached, rotation_matrix, vec3
from sim.truth.sampling import make_trigger_handler

DENSITY_ERROR_SPAWN_KEY = 0x44454E
"""Spawn key of the density-error random stream (ASCII ``"DEN"``):
``np.random.SeedSequence(run.seed, spawn_key=(DENSITY_ERROR_SPAWN_KEY,))``."""

MIN_DENSITY_SPAN_S = 60.0
"""Shortest span of the piecewise-constant density error (``tau / 10``, at least this), s."""

TRUTH_THREADS_ENV = "COVEY_TRUTH_THREADS"
"""Environment variable that sets the default of ``TruthWorld(threads=None)``: how many spacecraft
are propagated at the same time within one :meth:`TruthWorld.advance_to` (``1``: one after the
other). Unset: the number of CPU cores, at most the number of spacecraft."""


def default_threads() -> int:
    """Threads of ``TruthWorld(threads=None)``: :data:`TRUTH_THREADS_ENV` if set (a positive
    integer), else ``os.cpu_count()``.

    Raises
    ------
    ScenarioError
        The variable is set to something that is not a positive integer.
    """
    import os

    raw = os.environ.get(TRUTH_THREADS_ENV)
    if raw is None or not raw.strip():
        return max(1, os.cpu_count() or 1)
    try:
        n = int(raw)
    except ValueError:
        n = 0
    if n < 1:
        raise ScenarioError(TRUTH_THREADS_ENV, raw, "a positive integer (1: propagate the spacecraft "
                                                    "one after the other)")
    return n


_POOLS: dict = {}


def thread_pool(n: int):
    """The process's propagation thread pool of ``n`` threads (one per size, made on first use;
    threads attached to the JVM as daemons so they never hold the JVM's shut-down), so a world
    never runs more spacecraft at once than its own ``threads``."""
    pool = _POOLS.get(n)
    if pool is None:
        from concurrent.futures import ThreadPoolExecutor

        def attach():
            from java.lang import Thread

            Thread.attachAsDaemon()

        pool = _POOLS[n] = ThreadPoolExecutor(max_workers=n, thread_name_prefix="covey-truth",
                                              initializer=attach)
    return pool


_EPS_T = 1e-6  # s: times closer than this are the same instant


class TruthWorld:
    """The true dynamics of every spacecraft of a run.

    Parameters
    ----------
    run : RunConfig
    boot_info : BootInfo or None
        From :func:`sim.orekit.boot.boot`; booted here (with ``run.orekit_data``) when None.
    batched_density : bool
        Logged density of NRLMSISE-00 (mean local solar time) computed in batch with pymsis at
        :meth:`drain_samples` (True) or by Orekit's ``getDensity`` per sample (False). Other
        models always use Orekit per sample (``RunOptions.batched_density``).
    java_sampler : bool
        Sample with Orekit's OEM streaming writer (True) or the Python step handler (False)
        (``RunOptions.java_sampler``).
    threads : int or None
        Spacecraft propagated at the same time in :meth:`advance_to` (each spacecraft's
        ``propagate()`` runs in Java on its own thread; the results do not depend on it: every
        spacecraft has its own propagator and the shared Orekit models are immutable or use
        Orekit's thread-safe caches). None: :func:`default_threads`. Capped at the number of
        spacecraft.

    Attributes
    ----------
    names : tuple of str
        Spacecraft names, chief first.
    t_s : float
        Current time, s since the epoch.
    boot_info : BootInfo
    forces : sim.orekit.forces.ForceEnvironment
    density_method : str
        How the logged density is computed: ``"pymsis"`` (batched), ``"orekit"`` (per sample) or
        ``"none"`` (no atmosphere: zeros).
    threads : int
        Spacecraft propagated at the same time.
    """

    def __init__(self, run: RunConfig, boot_info: BootInfo | None = None, batched_density: bool = True,
                 java_sampler: bool = True, threads: int | None = None):
        self.run = run
        self.java_sampler = bool(java_sampler)
        n_thr = default_threads() if threads is None else threads
        if isinstance(n_thr, bool) or not isinstance(n_thr, (int, np.integer)) or n_thr < 1:
            raise ScenarioError("threads", threads, "a positive integer (1: one spacecraft after the other)")
        self.threads = int(min(int(n_thr), max(1, len(run.spacecraft))))
        self._early: dict | None = None  # segments begun by start_early
        self.boot_info = boot_info if boot_info is not None else boot(run.orekit_data)
        if run.log_step_s <= 0:
            raise ScenarioError("log_step_s", run.log_step_s, "a positive sampling step, s")
        self.forces = ForceEnvironment(run.environment, run.epoch_utc, run.duration_s, self.boot_info.data_path)
        self.t_s = 0.0
        self._stopped: str | None = None
        self._events: list[dict] = []
        self._tod_cache: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        self._msis: MsisBatch | None = None
        self.density_method = self._choose_density_method(bool(batched_density))
        self._init_density_error()
        names = [sc.name for sc in run.spacecraft]
        if len(set(names)) != len(names):
            raise ScenarioError("spacecraft names", names, "unique names")
        self.names = tuple(names)
        self._crafts: dict[str, Craft] = {}
        chief_mean = None
        for k, sc in enumerate(run.spacecraft):
            mean = self._mean_elements_of(sc, chief_mean, is_chief=(k == 0))
            if k == 0:
                chief_mean = mean
            self._crafts[sc.name] = Craft(self, sc, self._initial_state(mean, sc.bus.mass_kg))
        min_alt = run.events.min_altitude_km * 1e3
        for c in self._crafts.values():
            alt = self._altitude_m(c.state)
            if alt < min_alt:
                self._stopped = "altitude"
                self._events.append(dict(t_s=0.0, name=c.name, kind="altitude",
                                         detail=f"initial altitude {alt / 1e3:.1f} km below "
                                                f"{run.events.min_altitude_km} km"))

    def _choose_density_method(self, batched: bool) -> str:
        """``"pymsis"`` when asked for and exact (NRLMSISE-00 in mean local solar time, pymsis
        importable, no leap second from the epoch to a day after the run), else ``"orekit"``
        (``"none"`` without atmosphere)."""
        f = self.forces
        if f.atmosphere is None:
            return "none"
        if not (batched and f.env.atmosphere == "nrlmsise00" and f.env.local_solar_time == "mean"):
            return "orekit"
        try:
            import pymsis
        except ImportError:
            return "orekit"
        # the batch maps t to UTC as epoch + t: check that no leap second lies in the run
        import datetime as _dt

        from org.orekit.time import TimeScalesFactory
        from sim.orekit.forces import parse_epoch

        span = float(self.run.duration_s) + 86400.0
        end = f.epoch.shiftedBy(span).getComponents(TimeScalesFactory.getUTC())
        expect = parse_epoch(self.run.epoch_utc) + _dt.timedelta(seconds=span)
        d, tm = end.getDate(), end.getTime()
        got = (_dt.datetime(d.getYear(), d.getMonth(), d.getDay(), tzinfo=_dt.timezone.utc)
               + _dt.timedelta(seconds=float(tm.getSecondsInLocalDay())))
        if abs((got - expect).total_seconds()) > 1e-3:
            return "orekit"
        self._msis = MsisBatch(self, pymsis)
        return "pymsis"

    # ---------------------------------------------------------------------------------
    # initial states
    # ---------------------------------------------------------------------------------
    def _mean_elements_of(self, sc: SpacecraftConfig, chief_mean, is_chief: bool) -> np.ndarray:
        if sc.orbit is not None and sc.roe_m is not None:
            raise ScenarioError(f"spacecraft.{sc.name}", "orbit and roe_m", "exactly one of orbit and roe_m")
        if sc.orbit is not None:
            o = sc.orbit
            if not (o.a_m > 0 and 0 <= o.e < 1):
                raise ScenarioError(f"spacecraft.{sc.name}.orbit", (o.a_m, o.e), "a_m > 0 m and 0 <= e < 1")
            w = math.radians(o.argp_deg)
            return np.array([o.a_m, o.e * math.cos(w), o.e * math.sin(w), math.radians(o.i_deg),
                             math.radians(o.raan_deg), math.radians(o.u_deg)])
        if is_chief:
            raise ScenarioError("chief.orbit", None, "mean orbital elements for the chief")
        if sc.roe_m is None:
            raise ScenarioError(f"deputies.{sc.name}", None, "either orbit (mean elements) or roe_m (6 values, m)")
        roe = np.asarray(sc.roe_m, dtype=float)
        if roe.shape != (6,) or not np.all(np.isfinite(roe)):
            raise ScenarioError(f"deputies.{sc.name}.roe_m", sc.roe_m, "6 finite a-scaled ROE values, m")
        return deputy_mean_from_roe(chief_mean, roe)

    def _initial_state(self, mean: np.ndarray, mass_kg: float):
        from org.orekit.orbits import CartesianOrbit, CircularOrbit, PositionAngleType
        from org.orekit.propagation import SpacecraftState
        from org.orekit.propagation.conversion.osc2mean import EcksteinHechlerTheory

        f = self.forces
        a, ex, ey, i, raan, u = (float(x) for x in mean)
        mean_orbit = CircularOrbit(a, ex, ey, i, raan, u, PositionAngleType.MEAN, f.tod, f.epoch, f.mu_m3ps2)
        if f.env.gravity_degree >= 2:
            osc = EcksteinHechlerTheory(f.eh_provider).meanToOsculating(mean_orbit)
        else:
            osc = mean_orbit
        pv = osc.getPVCoordinates(f.gcrf)
        return SpacecraftState(CartesianOrbit(pv, f.gcrf, f.epoch, f.mu_m3ps2), float(mass_kg))

    def _altitude_m(self, state) -> float:
        f = self.forces
        gp = f.earth.transform(state.getPosition(), f.gcrf, state.getDate())
        return float(gp.getAltitude())

    # ---------------------------------------------------------------------------------
    # density error
    # ---------------------------------------------------------------------------------
    def _init_density_error(self) -> None:
        de = self.run.environment.density_error
        if de.sigma < 0 or de.tau_s <= 0:
            raise ScenarioError("environment.density_error", (de.sigma, de.tau_s), "sigma >= 0 and tau_s > 0 s")
        if de.sigma == 0.0:
            self._rho_t = np.array([0.0])
            self._rho_f = np.array([max(0.0, 1.0 + de.bias)])
            return
        dt = max(de.tau_s / 10.0, MIN_DENSITY_SPAN_S)
        n = int(math.ceil(max(self.run.duration_s, dt) / dt)) + 2
        rng = np.random.default_rng(np.random.SeedSequence(self.run.seed, spawn_key=(DENSITY_ERROR_SPAWN_KEY,)))
        w = rng.standard_normal(n)
        phi = math.exp(-dt / de.tau_s)
        q = de.sigma * math.sqrt(1.0 - phi * phi)
        x = np.empty(n)
        x[0] = de.sigma * w[0]  # stationary start
        x[1:] = gauss_markov(x[0], w[1:], phi, q)
        self._rho_t = np.arange(n) * dt
        self._rho_f = np.maximum(0.0, 1.0 + de.bias + x)

    def density_scale(self, t_s) -> float | np.ndarray:
        """Truth density scale error ``max(0, 1 + bias + GM(t))`` in effect at ``t_s`` (1 when off).

        The Gauss-Markov value is piecewise constant over spans of ``max(tau/10, 60 s)``.
        """
        idx = np.searchsorted(self._rho_t, np.asarray(t_s, dtype=float) + _EPS_T, side="right") - 1
        out = self._rho_f[np.clip(idx, 0, len(self._rho_f) - 1)]
        return float(out) if np.ndim(out) == 0 else out

    # ---------------------------------------------------------------------------------
    # public queries
    # ---------------------------------------------------------------------------------
    def _craft(self, name: str) -> Craft:
        try:
            return self._crafts[name]
        except KeyError:
            raise ScenarioError("spacecraft", name, f"one of {list(self.names)}") from None

    def mode_names(self, name: str) -> tuple[str, ...]:
        """Attitude-mode names of a spacecraft in index order (``mode_index`` of the samples)."""
        return self._craft(name).modes

    def mode_area_m2(self, name: str) -> dict[str, float]:
        """Nominal ram-facing drag area of each mode of a spacecraft, m^2 (no area factors)."""
        return dict(self._craft(name).areas)

    def states(self) -> dict[str, TruthState]:
        """Current true states (TOD), by name."""
        out = {}
        for name, c in self._crafts.items():
            pv = c.state.getPVCoordinates(self.forces.tod)
            out[name] = TruthState(name, self.t_s, vec3(pv.getPosition()), vec3(pv.getVelocity()),
                                   float(c.state.getMass()), c.mode_at(self.t_s))
        return out

    # ---------------------------------------------------------------------------------
    # commands
    # ---------------------------------------------------------------------------------
    def set_mode_schedule(self, name: str, switches: Sequence[tuple[float, str]],
                          area_factor_by_mode: Mapping[str, float] | None = None,
                          area_factor_fn: Callable[[str, float], float] | None = None) -> None:
        """Replace the pending attitude-mode switches (those at ``t >= t_s``) of a spacecraft.

        Parameters
        ----------
        name : str
        switches : sequence of (t_s, mode)
            Each switch starts a slew of ``bus.slew_time_s``; the drag area changes at the slew
            midpoint.
        area_factor_by_mode : mapping or None
            Multiplier of each mode's drag area (realised area error); modes not named keep 1.
            When given it replaces the spacecraft's factors and also applies to the mode in
            effect from ``t_s`` on; None keeps the factors set before (initially 1).
        area_factor_fn : callable or None
            ``fn(mode, t_switch_s) -> float``, called once per new switch here (never during
            propagation), multiplying that switch's area (e.g. a sampled attitude error).

        Raises
        ------
        ScenarioError
            Unknown spacecraft or mode, a switch before ``t_s``, a negative or non-finite factor.
        """
        c = self._craft(name)
        self._cancel_early(name)
        new = sorted(((float(t), str(m)) for t, m in switches), key=lambda x: x[0])
        for t, m in new:
            if m not in c.mode_index:
                raise ScenarioError(f"{name}.mode_schedule", m, f"one of the attitude modes {list(c.modes)}")
            if not math.isfinite(t) or t < self.t_s - _EPS_T:
                raise ScenarioError(f"{name}.mode_schedule", t, f"switch times >= current time {self.t_s} s")
        if area_factor_by_mode is not None:
            for m, fac in area_factor_by_mode.items():
                if m not in c.mode_index or not (math.isfinite(float(fac)) and float(fac) >= 0):
                    raise ScenarioError(f"{name}.area_factor_by_mode", {m: fac},
                                        f"non-negative factors for modes in {list(c.modes)}")
            c.factors = {m: float(area_factor_by_mode.get(m, 1.0)) for m in c.modes}
        # pending switches are replaced; area-factor changes already in effect are not switches
        c.timeline = [sw for sw in c.timeline
                      if sw.t_cmd < self.t_s - _EPS_T or sw.kind in ("initial", "area_factor")]
        if area_factor_by_mode is not None:
            cur = c.mode_at(self.t_s)
            area = c.areas[cur] * c.factors[cur]
            t_eff = max([self.t_s] + [sw.t_eff for sw in c.timeline if math.isfinite(sw.t_eff)])
            if area != c.area_at(t_eff):
                c.timeline.append(Switch(self.t_s, t_eff, cur, area, "area_factor"))
        slew = float(c.bus.slew_time_s)
        for t, m in new:
            fac = c.factors[m]
            if area_factor_fn is not None:
                f2 = float(area_factor_fn(m, t))
                if not (math.isfinite(f2) and f2 >= 0):
                    raise ScenarioError(f"{name}.area_factor_fn", f2, "a non-negative finite factor")
                fac *= f2
            c.timeline.append(Switch(t, t + 0.5 * slew, m, c.areas[m] * fac))

    def set_impulses(self, name: str, impulses: Sequence[tuple[float, np.ndarray]]) -> None:
        """Replace the pending impulses (``t >= t_s``) of a spacecraft.

        Parameters
        ----------
        name : str
        impulses : sequence of (t_s, dv_rtn_mps)
            Delta-v in the spacecraft's own RTN frame (Orekit ``LOFType.QSW``) at that epoch, m/s,
            shape (3,). Applied at the exact epoch with mass depletion
            ``m+ = m- exp(-|dv| / (isp g0))`` (``bus.thruster.isp_s``). An impulse at exactly the
            end of an :meth:`advance_to` interval is applied at the start of the next one (the
            state and sample at that time are pre-impulse). The truth does not limit propellant.

        Raises
        ------
        ScenarioError
            Unknown spacecraft, no thruster, a time before ``t_s``, a malformed delta-v.
        """
        c = self._craft(name)
        items = []
        for t, dv in impulses:
            t = float(t)
            dv = np.asarray(dv, dtype=float).reshape(-1)
            if c.bus.thruster is None:
                raise ScenarioError(f"{name}.impulses", (t, dv.tolist()), "no impulses: the bus has no thruster")
            if dv.shape != (3,) or not np.all(np.isfinite(dv)):
                raise ScenarioError(f"{name}.impulses", dv.tolist(), "dv_rtn_mps of 3 finite values, m/s")
            if not math.isfinite(t) or t < self.t_s - _EPS_T:
                raise ScenarioError(f"{name}.impulses", t, f"impulse times >= current time {self.t_s} s")
            items.append((max(t, self.t_s), dv.copy()))
        new = [imp for imp in c.impulses if imp[0] < self.t_s - _EPS_T] + sorted(items, key=lambda x: x[0])
        if self._early is not None and name in self._early["items"]:
            same = len(new) == len(c.impulses) and all(
                a[0] == b[0] and np.array_equal(a[1], b[1]) for a, b in zip(new, c.impulses))
            if same:
                return
            self._cancel_early(name)
        c.impulses = new

    # ---------------------------------------------------------------------------------
    # propagation
    # ---------------------------------------------------------------------------------
    def _tod_transform(self, k: int) -> tuple[np.ndarray, np.ndarray]:
        """GCRF -> TOD rotation matrix and rotation rate (rad/s, TOD axes) at ``k * TOD_GRID_S``."""
        def exact():
            f = self.forces
            tr = f.gcrf.getTransformTo(f.tod, f.epoch.shiftedBy(float(k * TOD_GRID_S)))
            return rotation_matrix(tr), vec3(tr.getRotationRate())

        return grid_cached(self._tod_cache, k, exact)

    def _gcrf_to_tod(self, t: np.ndarray, rv_gcrf: np.ndarray) -> np.ndarray:
        """GCRF position-velocity (K, 6) at times ``t`` (K,) -> TOD (K, 6).

        Orekit's GCRF -> TOD transform (a pure rotation, with its rate) is evaluated exactly on a
        grid of :data:`TOD_GRID_S` and interpolated quadratically (three nodes around the nearest
        one) in between: the rotation is precession-nutation, whose fastest sizeable term (0.2
        arcsec, 13.7 days) leaves an error of about 2e-6 m at LEO radius (measured); a test checks
        samples against Orekit's exact transform.
        """
        g = t / TOD_GRID_S
        j = np.rint(g).astype(int)
        x = g - j
        wts = np.stack([0.5 * x * (x - 1.0), 1.0 - x * x, 0.5 * x * (x + 1.0)], axis=1)  # nodes j-1, j, j+1
        out = np.empty_like(rv_gcrf)
        for jj in np.unique(j):
            sel = j == jj
            nodes = [self._tod_transform(int(jj) + d) for d in (-1, 0, 1)]
            w = wts[sel]
            m = sum(w[:, q, None, None] * nodes[q][0] for q in range(3))
            om = sum(w[:, q, None] * nodes[q][1] for q in range(3))
            r = np.einsum("kij,kj->ki", m, rv_gcrf[sel, :3])
            v = np.einsum("kij,kj->ki", m, rv_gcrf[sel, 3:]) - np.cross(om, r)
            out[sel, :3], out[sel, 3:] = r, v
        return out

    def _impulse_record(self, c: Craft, s, dv_rtn: np.ndarray, isp_s: float) -> dict:
        f = self.forces
        date = s.getDate()
        pv = s.getPVCoordinates(f.gcrf)
        basis = rtn_columns(vec3(pv.getPosition()), vec3(pv.getVelocity()))
        dv_gcrf = basis @ dv_rtn
        from org.hipparchus.geometry.euclidean.threed import Vector3D

        dv_tod = vec3(f.gcrf.getStaticTransformTo(f.tod, date).transformVector(Vector3D(*map(float, dv_gcrf))))
        m0 = float(s.getMass())
        return dict(name=c.name, t_s=float(date.durationFrom(f.epoch)), dv_rtn_mps=np.array(dv_rtn, dtype=float),
                    dv_eci_mps=dv_tod, mass_before_kg=m0,
                    mass_after_kg=m0 * math.exp(-float(np.linalg.norm(dv_rtn)) / (isp_s * G0_MPS2)),
                    _dv_gcrf=dv_gcrf)

    def _apply_impulse_now(self, c: Craft, dv_rtn: np.ndarray) -> None:
        """Apply an impulse to the current state (at the start of a segment)."""
        from org.hipparchus.geometry.euclidean.threed import Vector3D
        from org.orekit.orbits import CartesianOrbit
        from org.orekit.propagation import SpacecraftState
        from org.orekit.utils import PVCoordinates

        f = self.forces
        rec = self._impulse_record(c, c.state, dv_rtn, c.bus.thruster.isp_s)
        pv = c.state.getPVCoordinates(f.gcrf)
        v_new = vec3(pv.getVelocity()) + rec["_dv_gcrf"]
        orbit = CartesianOrbit(PVCoordinates(pv.getPosition(), Vector3D(*map(float, v_new))), f.gcrf,
                               c.state.getDate(), f.mu_m3ps2)
        c.state = SpacecraftState(orbit, rec["mass_after_kg"])
        c.seg_executed.append(rec)

    def _drag_force(self, c: Craft, t0: float, t1: float):
        from org.orekit.forces.drag import DragForce, IsotropicDrag

        f = self.forces
        if f.atmosphere is None:
            return None
        cd = float(c.bus.cd)
        sens = IsotropicDrag(float(c.area_ref), cd)
        drivers = {d.getName(): d for d in sens.getDragParametersDrivers()}
        d_cd, d_rho = drivers["drag coefficient"], drivers["global drag factor"]
        # attitude-mode drag area: value cd * A / A_ref, spans at effective switch times in (t0, t1)
        d_cd.setValue(cd * c.area_at(t0) / c.area_ref)
        for sw in sorted(c.timeline, key=lambda s: s.t_eff):
            if t0 + _EPS_T < sw.t_eff < t1 - _EPS_T:
                date = f.epoch.shiftedBy(float(sw.t_eff))
                d_cd.addSpanAtDate(date)
                d_cd.setValue(cd * sw.area_m2 / c.area_ref, date)
        # truth density error
        d_rho.setValue(float(self.density_scale(t0)))
        lo = int(np.searchsorted(self._rho_t, t0 + _EPS_T, side="right"))
        hi = int(np.searchsorted(self._rho_t, t1 - _EPS_T, side="left"))
        for tk, fk in zip(self._rho_t[lo:hi], self._rho_f[lo:hi]):
            date = f.epoch.shiftedBy(float(tk))
            d_rho.addSpanAtDate(date)
            d_rho.setValue(float(fk), date)
        return DragForce(f.atmosphere, sens)

    def _run_segment(self, c: Craft, t1: float) -> tuple[float, str | None]:
        """One propagate() of a spacecraft from its current time to t1. Returns (t reached, stop reason)."""
        from org.orekit.attitudes import LofOffset
        from org.orekit.forces.maneuvers import ImpulseManeuver
        from org.orekit.frames import LOFType
        from org.orekit.propagation.events import AltitudeDetector, DateDetector
        from org.orekit.propagation.events.handlers import StopOnDecreasing
        from org.hipparchus.geometry.euclidean.threed import Vector3D

        f = self.forces
        t0 = c.t_s
        # impulses at exactly t0 are applied here; those strictly inside become events
        inside = []
        for t, dv in c.impulses:
            if abs(t - t0) <= _EPS_T:
                self._apply_impulse_now(c, dv)
            elif t0 < t < t1 - _EPS_T:
                inside.append((t, dv))
        p = c.propagator
        p.removeForceModels()
        p.setMu(f.mu_m3ps2)
        for fm in c.static_forces:
            p.addForceModel(fm)
        drag = self._drag_force(c, t0, t1)
        if drag is not None:
            p.addForceModel(drag)
        p.clearEventsDetectors()
        p.addEventDetector(AltitudeDetector(300.0, 1e-3, self.run.events.min_altitude_km * 1e3, f.earth)
                           .withHandler(StopOnDecreasing()))
        if inside:
            qsw = LofOffset(f.gcrf, LOFType.QSW)
            isp = float(c.bus.thruster.isp_s)
            for t, dv in inside:
                trig = DateDetector(f.epoch.shiftedBy(float(t))).withHandler(make_trigger_handler(self, c, dv, isp))
                p.addEventDetector(ImpulseManeuver(trig, qsw, Vector3D(*map(float, dv)), isp))
        p.resetInitialState(c.state)
        c.integrator.setInitialStepSize(float(min(MAX_STEP_S, max(t1 - t0, 1e-3))))
        h = float(self.run.log_step_s)
        n0 = len(c.seg["t"])
        mux = p.getMultiplexer()
        mux.clear()
        java = (self.java_sampler and self.density_method != "orekit"
                and abs(t0 / h - round(t0 / h)) * h <= _EPS_T and round(t0 / h) <= c.next_k)
        if java:
            oem_seg, text = self._oem_segment(c)
            mux.add(h, oem_seg)
            m0 = float(c.state.getMass())
            n_exec = len(c.seg_executed)
        else:
            n_max = max(0, int(math.floor((t1 + _EPS_T) / h)) - c.next_k + 1)
            c.buf = c._jarray(6 * n_max + 6)
            mux.add(c.sampler)
        try:
            end = p.propagate(f.epoch.shiftedBy(float(t1)))
        except Exception as exc:  # Orekit/JPype exceptions
            t_fail = c.seg["t"][-1] if c.seg["t"] else t0
            raise PropagationError(float(t_fail), c.name, str(exc)) from exc
        if java:
            self._take_oem_samples(c, str(text.toString()), float(end.getDate().durationFrom(f.epoch)), m0,
                                   c.seg_executed[n_exec:])
        n = len(c.seg["t"]) - n0
        if n and not java:
            rv = np.asarray(c.buf)[: 6 * n].reshape(n, 6)
            c.seg["rv"].append(self._gcrf_to_tod(np.asarray(c.seg["t"][n0:], dtype=float), rv))
        c.state = end
        t_end = float(end.getDate().durationFrom(f.epoch))
        c.t_s = t_end
        if t_end < t1 - _EPS_T:
            return t_end, "altitude"
        c.t_s = t1
        return t1, None

    def orekit_state(self, name: str):
        """The current Orekit ``SpacecraftState`` of spacecraft ``name`` (GCRF; for benchmarks and
        cross-checks that drive Orekit directly)."""
        return self._craft(name).state

    def bare_propagator(self, name: str, t1_s: float | None = None, state=None):
        """A plain Orekit propagator of spacecraft ``name`` with the truth's integrator settings
        and force model: the static forces and the drag with its attitude-mode and density-error
        spans over ``[0, t1_s]`` (default the run duration) as the timeline stands now, initial
        state ``state`` (default the current one). No step handler, no event detector, no
        impulses: a reference for benchmarks and cross-checks (one ``propagate()`` over the run
        is what covey's truth costs without covey). Returns ``(propagator, integrator)``."""
        c = self._craft(name)
        st = c.state if state is None else state
        p, integ = new_propagator(self.forces, st.getOrbit())
        for fm in c.static_forces:
            p.addForceModel(fm)
        drag = self._drag_force(c, 0.0, float(self.run.duration_s if t1_s is None else t1_s))
        if drag is not None:
            p.addForceModel(drag)
        p.setInitialState(st)
        integ.setInitialStepSize(MAX_STEP_S)
        return p, integ

    def _oem_segment(self, c: Craft):
        """A CCSDS OEM segment writer (Orekit's StreamingOemWriter, a Java fixed-step handler) that
        writes the GCRF state at every sampling step into a Java StringBuilder, times as seconds
        since the run epoch. Returns (handler, builder)."""
        from java.lang import StringBuilder
        from org.orekit.data import DataContext
        from org.orekit.files.ccsds.definitions import BodyFacade, CenterName, FrameFacade, TimeSystem
        from org.orekit.files.ccsds.ndm.odm import OdmHeader
        from org.orekit.files.ccsds.ndm.odm.oem import OemMetadata, OemWriter, StreamingOemWriter
        from org.orekit.files.ccsds.utils.generation import KvnGenerator
        from org.orekit.utils import IERSConventions

        f = self.forces
        text = StringBuilder()
        ctx = DataContext.getDefault()
        gen = KvnGenerator(text, 0, c.name, 1e15, 0)  # relative dates up to 3e7 years after the epoch
        hdr = OdmHeader()
        hdr.setFormatVersion(3.0)
        hdr.setOriginator("covey")
        md = OemMetadata(1)
        md.setObjectName(c.name)
        md.setObjectID(c.name)
        md.setCenter(BodyFacade.create(CenterName.EARTH, ctx.getCelestialBodies()))
        md.setReferenceFrame(FrameFacade.map(f.gcrf))
        md.setTimeSystem(TimeSystem.UTC)
        writer = StreamingOemWriter(gen, OemWriter(IERSConventions.IERS_2010, ctx, f.epoch), hdr, md)
        return writer.newSegment(), text

    def _take_oem_samples(self, c: Craft, text: str, t_end: float, m0: float, impulses: list) -> None:
        """Grid samples of one segment from its OEM text (km, km/s, GCRF) into ``c.seg``; the mass
        follows the impulses executed in the segment (it changes nowhere else)."""
        h = float(self.run.log_step_s)
        lines = [ln for ln in text.split("\n") if ln[:1].isdigit()]
        if not lines:
            return
        ncol = len(lines[0].split())
        data = np.array(" ".join(lines).split(), dtype=float).reshape(-1, ncol)
        t = data[:, 0]
        k = np.rint(t / h)
        keep = (np.abs(t - k * h) <= _EPS_T) & (k >= c.next_k) & (t <= t_end + _EPS_T)
        if not np.any(keep):
            return
        t, k, rv = k[keep] * h, k[keep].astype(int), data[keep, 1:7] * 1e3
        _, first = np.unique(k, return_index=True)
        t, k, rv = t[first], k[first], rv[first]
        mass = np.full(t.size, m0)
        for rec in sorted(impulses, key=lambda r: r["t_s"]):
            mass[t > rec["t_s"] + _EPS_T] = rec["mass_after_kg"]
        c.seg["t"].extend(t.tolist())
        c.seg["m"].extend(mass.tolist())
        c.seg["rv"].append(self._gcrf_to_tod(t, rv))
        c.next_k = int(k[-1]) + 1

    def _begin(self, c: Craft):
        for buf in c.seg.values():
            buf.clear()
        c.seg_executed.clear()
        return (c.state, c.t_s, c.next_k, list(c.impulses))

    def _restore(self, c: Craft, saved) -> None:
        c.state, c.t_s, c.next_k, c.impulses = saved[0], saved[1], saved[2], list(saved[3])
        for buf in c.seg.values():
            buf.clear()
        c.seg_executed.clear()

    def _keep_out_time(self, t_lo: float) -> tuple[float, str, float] | None:
        r_min = float(self.run.events.keep_out_radius_m)
        if r_min <= 0 or len(self._crafts) < 2:
            return None
        crafts = list(self._crafts.values())
        ts = np.asarray(crafts[0].seg["t"])
        if ts.size == 0:
            return None
        n = min(len(cc.seg["t"]) for cc in crafts)
        if n == 0:
            return None
        ts = ts[:n]
        rs = [np.concatenate(cc.seg["rv"])[:n, :3] for cc in crafts]
        first = None
        for i in range(len(crafts)):
            for j in range(i + 1, len(crafts)):
                d = np.linalg.norm(rs[i] - rs[j], axis=1)
                bad = np.nonzero((d < r_min) & (ts >= t_lo - _EPS_T))[0]
                if bad.size and (first is None or ts[bad[0]] < first[0]):
                    first = (float(ts[bad[0]]), f"{crafts[i].name}/{crafts[j].name}", float(d[bad[0]]))
        return first

    def advance_to(self, t_s: float) -> AdvanceResult:
        """Propagate every spacecraft to ``t_s`` (one ``propagate()`` each).

        Samples at the multiples of ``run.log_step_s`` in the interval are collected for
        :meth:`drain_samples`. An altitude below ``run.events.min_altitude_km`` or (with
        ``keep_out_radius_m > 0``) a sampled separation below the keep-out radius stops the run:
        every spacecraft is then brought to the stop time (the interval is propagated again from
        its start, to the stop time) and later calls return at once with ``stopped=True``.

        Raises
        ------
        ScenarioError
            ``t_s`` before the current time.
        PropagationError
            Orekit failed.
        """
        t1 = float(t_s)
        if self._stopped is not None:
            return AdvanceResult(self.t_s, True, self._stopped)
        if not math.isfinite(t1) or t1 < self.t_s - _EPS_T:
            raise ScenarioError("advance_to.t_s", t_s, f"a time >= current time {self.t_s} s")
        if t1 <= self.t_s + _EPS_T:
            return AdvanceResult(self.t_s, False, None)
        t0 = self.t_s
        early = self._early
        if early is not None and abs(early["t1"] - t1) > _EPS_T:
            self.cancel_early()
            early = None
        self._early = None
        begun = early["items"] if early is not None else {}
        saved = {n: (begun[n][0] if n in begun else self._begin(c)) for n, c in self._crafts.items()}
        reached = self._run_segments(t1, {n: fut for n, (_, fut) in begun.items()})
        t_stop, reason, who, detail = t1, None, None, ""
        for n, (tr, why) in reached.items():
            if why is not None and tr < t_stop:
                t_stop, reason, who = tr, why, n
                alt = self._altitude_m(self._crafts[n].state) / 1e3
                detail = f"altitude {alt:.2f} km reached the limit {self.run.events.min_altitude_km} km"
        ko = self._keep_out_time(t0)
        if ko is not None and ko[0] <= t_stop + _EPS_T and (reason is None or ko[0] < t_stop):
            t_stop, reason, who = ko[0], "keep_out", ko[1]
            detail = f"separation {ko[2]:.2f} m below the keep-out radius {self.run.events.keep_out_radius_m} m"
        if reason is not None:
            for n, c in self._crafts.items():
                if c.t_s > t_stop + _EPS_T:
                    self._restore(c, saved[n])
                    self._run_segment(c, t_stop)
                    c.t_s = t_stop
        self._commit(t0, t_stop)
        self.t_s = t_stop
        if reason is not None:
            self._stopped = reason
            self._events.append(dict(t_s=t_stop, name=who, kind=reason, detail=detail))
            return AdvanceResult(t_stop, True, reason)
        return AdvanceResult(t1, False, None)

    def start_early(self, t_s: float, names: Sequence[str]) -> list[str]:
        """Begin the segments of ``names`` to ``t_s`` now, on the propagation threads, while the
        caller does other work (the closed loop: guidance, for spacecraft it is not expected to
        command). :meth:`advance_to` ``(t_s)`` then uses them. Until then the caller may change
        any other spacecraft; a :meth:`set_mode_schedule` of one of ``names``, or a
        :meth:`set_impulses` that changes its impulses, first waits for and discards its early
        segment (so the truth never depends on this call: it only saves time). Needs
        ``threads > 1``; returns the names begun (none when it cannot)."""
        if self.threads <= 1 or self._stopped is not None or self._early is not None:
            return []
        t1 = float(t_s)
        if not math.isfinite(t1) or t1 <= self.t_s + _EPS_T:
            return []
        items = {}
        for n in names:
            if n in self._crafts and n not in items:
                c = self._crafts[n]
                saved = self._begin(c)
                items[n] = (saved, thread_pool(self.threads).submit(self._run_segment, c, t1))
        if items:
            self._early = {"t1": t1, "items": items}
        return list(items)

    def _cancel_early(self, name: str) -> None:
        e = self._early
        if e is None or name not in e["items"]:
            return
        saved, fut = e["items"].pop(name)
        try:
            fut.result()
        except BaseException:  # noqa: BLE001 - discarded: the segment is run again
            pass
        self._restore(self._crafts[name], saved)
        if not e["items"]:
            self._early = None

    def cancel_early(self) -> None:
        """Wait for and discard every segment begun by :meth:`start_early`."""
        while self._early is not None:
            self._cancel_early(next(iter(self._early["items"])))

    def close(self) -> None:
        """Release the run's Java objects (idempotent; the world cannot advance afterwards).

        Each propagator holds Python proxies (the step handler and the impulse triggers) that hold
        the spacecraft's book-keeping, which holds the propagator again: a cycle between the two
        heaps that neither garbage collector can free, so a process that flies many runs (a
        campaign worker) would keep every finished world. Clearing the propagators' handlers and
        detectors and dropping the Python side breaks it.
        """
        if getattr(self, "_closed", False):
            return
        self.cancel_early()
        for c in self._crafts.values():
            try:
                p = c.propagator
                p.clearEventsDetectors()
                p.getMultiplexer().clear()
                p.removeForceModels()
            except Exception:  # noqa: BLE001 - a JVM already shutting down: nothing to free
                pass
            c.sampler = None
            c.propagator = c.integrator = None
            c.static_forces = []
            c.world = None
        self._crafts.clear()
        self._msis = None
        self._tod_cache.clear()
        self._closed = True

    def _run_segments(self, t1: float, begun: Mapping[str, object] | None = None
                      ) -> dict[str, tuple[float, str | None]]:
        """:meth:`_run_segment` of every spacecraft, ``self.threads`` at a time (JPype releases
        the GIL while Java runs); ``begun``: futures of segments already started
        (:meth:`start_early`). The first failure, in spacecraft order, is raised after all have
        finished."""
        crafts = list(self._crafts.items())
        begun = dict(begun or {})
        if not begun and (self.threads <= 1 or len(crafts) <= 1):
            return {n: self._run_segment(c, t1) for n, c in crafts}
        futures = [(n, begun[n] if n in begun else thread_pool(self.threads).submit(self._run_segment, c, t1))
                   for n, c in crafts]
        reached, failure = {}, None
        for n, fut in futures:
            try:
                reached[n] = fut.result()
            except BaseException as exc:  # noqa: BLE001 - re-raised below, in order
                failure = failure or exc
        if failure is not None:
            raise failure
        return reached

    def _commit(self, t0: float, t1: float) -> None:
        events = []
        for c in self._crafts.values():
            for k in c.samples:
                c.samples[k].extend(c.seg[k])
                c.seg[k].clear()
            c.executed.extend(c.seg_executed)
            for rec in c.seg_executed:
                events.append(dict(t_s=rec["t_s"], name=c.name, kind="impulse",
                                   detail=f"dv_rtn_mps {np.round(rec['dv_rtn_mps'], 6).tolist()}, mass "
                                          f"{rec['mass_before_kg']:.6f} -> {rec['mass_after_kg']:.6f} kg"))
            c.seg_executed.clear()
            c.impulses = [imp for imp in c.impulses if imp[0] > t1 + _EPS_T or
                          (abs(imp[0] - t1) <= _EPS_T and imp[0] > t0 + _EPS_T)]
            prev = None
            for sw in sorted(c.timeline, key=lambda s: s.t_cmd):
                if sw.kind != "initial" and sw.t_cmd <= t1 + _EPS_T and not sw.reported:
                    events.append(dict(t_s=sw.t_cmd, name=c.name, kind=sw.kind,
                                       detail=f"{prev} -> {sw.mode}; drag area {sw.area_m2:.6g} m^2 "
                                              f"from t = {sw.t_eff:.3f} s"))
                    sw.reported = True
                prev = sw.mode
        events.sort(key=lambda e: e["t_s"])
        self._events.extend(events)

    # ---------------------------------------------------------------------------------
    # outputs
    # ---------------------------------------------------------------------------------
    def drain_samples(self) -> dict[str, dict[str, np.ndarray]]:
        """Samples since the last drain, per spacecraft.

        Returns
        -------
        dict
            name -> ``t_s`` (K,), ``r_eci_m`` (K, 3) and ``v_eci_mps`` (K, 3) in TOD, ``mass_kg``
            (K,), ``mode_index`` (K,) int (commanded mode, index in :meth:`mode_names`),
            ``density_kgpm3`` (K,) truth local density including the density scale error,
            ``drag_area_m2`` (K,) drag area in effect (mode area times its factor).
        """
        ts = {n: np.asarray(c.samples["t"], dtype=float) for n, c in self._crafts.items()}
        rvs = {n: np.concatenate(c.samples["rv"]) if c.samples["rv"] else np.zeros((0, 6))
               for n, c in self._crafts.items()}
        if self.density_method == "pymsis":  # one batch for every spacecraft
            rho_all = self._msis.density(np.concatenate(list(ts.values())),
                                         np.concatenate([rv[:, :3] for rv in rvs.values()]))
            cuts = np.cumsum([len(t) for t in ts.values()])[:-1]
            rhos = dict(zip(ts, np.split(rho_all, cuts)))
        elif self.density_method == "orekit":
            rhos = {n: np.asarray(c.samples["rho"], dtype=float) for n, c in self._crafts.items()}
        else:
            rhos = {n: np.zeros(len(t)) for n, t in ts.items()}
        out = {}
        for name, c in self._crafts.items():
            s = c.samples
            t, rv = ts[name], rvs[name]
            mode_idx = np.array([c.mode_index[m] for m in c.modes_at(t)] if t.size else [], dtype=int)
            area = c.areas_at(t) if t.size else np.zeros(0)
            out[name] = dict(
                t_s=t,
                r_eci_m=rv[:, :3].copy(),
                v_eci_mps=rv[:, 3:].copy(),
                mass_kg=np.asarray(s["m"], dtype=float),
                mode_index=mode_idx,
                density_kgpm3=rhos[name] * self.density_scale(t) if t.size else t.copy(),
                drag_area_m2=area,
            )
            for k in s:
                s[k].clear()
        return out

    def drain_executed_impulses(self) -> list[dict]:
        """Impulses applied since the last drain: ``name, t_s, dv_rtn_mps (3,), dv_eci_mps (3,)``
        (TOD), ``mass_before_kg, mass_after_kg``."""
        out = []
        for c in self._crafts.values():
            for rec in c.executed:
                out.append({k: v for k, v in rec.items() if not k.startswith("_")})
            c.executed.clear()
        out.sort(key=lambda r: (r["t_s"], self.names.index(r["name"])))
        return out

    def drain_events(self) -> list[dict]:
        """Events since the last drain: ``t_s, name, kind, detail`` with kind ``"altitude"``,
        ``"keep_out"`` (name ``"a/b"``), ``"mode_switch"``, ``"area_factor"`` or ``"impulse"``."""
        out, self._events = self._events, []
        return out

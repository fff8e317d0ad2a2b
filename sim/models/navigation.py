"""Navigation error models: what the guidance law is told instead of the truth.

Pure numpy (no Orekit). The engine calls :meth:`NavigationModel.estimate` at each guidance cycle with
the truth states and gets the :class:`guidance.interface.NavSolution` the law sees, plus an error
record for the log.

Model
-----
Two kinds of navigation, each with its own :class:`sim.scenario.config.NavErrorConfig`:

- *absolute* (every spacecraft's own state; the chief's goes into the NavSolution): error of the
  estimated position and velocity, expressed in that spacecraft's RTN frame;
- *relative* (each deputy with respect to the chief, as carrier-phase differential GNSS gives it):
  error of the relative position and of the inertial velocity difference, both in the chief's RTN
  axes (see :class:`guidance.interface.RelativeEstimate`).

On each of the three RTN axes, the error of position (and, separately, of velocity) at update epoch
``t_k = k * update_s`` is

    e_k = white_k + bias + gm_k,

with ``white_k ~ N(0, white_sigma^2)`` independent per epoch, ``bias ~ N(0, bias_sigma^2)`` drawn once
per run, and ``gm`` a first-order Gauss-Markov process in its exact discretisation
``gm_{k+1} = exp(-dt/tau) gm_k + sigma sqrt(1 - exp(-2 dt/tau)) w_k``, started in its stationary
distribution ``gm_0 ~ N(0, sigma^2)`` (Gelb, Applied Optimal Estimation, MIT Press 1974, ch. 4
[memory for the chapter]). Its lag-1 autocorrelation is ``exp(-dt/tau)``.

Between updates, and during outages (``outages_s``: intervals ``[start, end)`` in which no update
epoch gives a fix), the estimate is the last fix propagated: the fix error is carried forward with the
Keplerian (two-body) state transition matrix around the spacecraft's orbit, so a velocity error
turns into a growing along-track error as it would in a filter coasting without measurements. The
propagation of the *state* itself is taken as exact (estimate = truth + propagated error): the model
does not add the dynamics-model error of a real onboard propagator. ``NavSolution.valid`` is False
while the call time lies in an outage or an update epoch has been missed.

The stated 1-sigma is the root-sum-square of the configured white, bias and Gauss-Markov sigmas on
each axis at a fresh fix; after the fix it is propagated with the same transition matrix
(``P(t) = Phi P_fix Phi^T``), so it grows during outages.

Every error source has its own random stream (:func:`sim.models.noise.stream`), named
``nav/<abs|rel>/<spacecraft>/<pos|vel>/<white|bias|gm>``, and every stream draws exactly three
numbers per update epoch (white, gm) or once per run (bias) whatever the call pattern: the error at an
epoch does not depend on when the engine asked for it, and switching a source on or off does not
change any other source's draws.

``cfg.perfect`` gives truth with zero sigma, always valid (outages are ignored).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from guidance.constants import MU_EARTH_M3PS2
from guidance.interface import AbsoluteEstimate, NavSolution, RelativeEstimate

from sim.scenario.config import ErrorAxesConfig, NavErrorConfig, NavigationConfig
from sim.errors import ScenarioError
from sim.models.frames import rtn_rows
from sim.models.noise import gauss_markov, stream

__all__ = [
    "NavigationModel",
    "ErrorProcess",
    "kepler_propagate",
    "kepler_stm",
    "REALISTIC_NAVIGATION",
]

_EPS_T = 1e-9  # s: times closer than this to an update epoch count as on it
_CHUNK = 65536  # draws per block when a process has to skip many epochs


# ------------------------------------------------------------------------------------------
# Realistic defaults (the sources of each number beside it)
# ------------------------------------------------------------------------------------------

#: Absolute navigation of a small-satellite GNSS receiver: per axis 1-sigma 1.5 m position
#: (3D 2.6 m) and 1.1 cm/s velocity (3D 1.9 cm/s): between a filtered single-frequency solution
#: (Sun, Han, Chen, "Precise real-time navigation of LEO satellites using a single-frequency GPS
#: receiver and ultra-rapid ephemerides", arXiv:1704.02094, 2017: 3D 0.50 m, 0.55 mm/s) and a
#: low-power nanosatellite receiver of about 10 m. The split into white/bias/Gauss-Markov and the
#: 30 min correlation time are common practice, no source.
REALISTIC_ABSOLUTE = NavErrorConfig(
    position_m=ErrorAxesConfig(white_sigma=(1.0, 1.0, 1.0), bias_sigma=(0.5, 0.5, 0.5),
                               gm_sigma=(1.0, 1.0, 1.0), gm_tau_s=(1800.0, 1800.0, 1800.0)),
    velocity_mps=ErrorAxesConfig(white_sigma=(0.01, 0.01, 0.01), bias_sigma=(0.0, 0.0, 0.0),
                                 gm_sigma=(0.005, 0.005, 0.005), gm_tau_s=(1800.0, 1800.0, 1800.0)),
    update_s=10.0,
)

#: Relative navigation by carrier-phase differential GNSS: per axis 1.15 cm position (3D 2.0 cm)
#: and 0.25 mm/s velocity (3D 0.43 mm/s), after the hardware-in-the-loop figures "about 2 cm position
#: and below 0.5 mm/s velocity" (Ferguson, Busse, How, a formation-flying navigation performance
#: prediction study, technical report, c. 2001) and "about 1 cm, 0.5 mm/s"
#: (Busse, How, "Real-time experimental demonstration of precise decentralized relative navigation
#: for formation flying spacecraft", AIAA GNC 2002). The split and the 10 min correlation time are
#: common practice, no source.
REALISTIC_RELATIVE = NavErrorConfig(
    position_m=ErrorAxesConfig(white_sigma=(0.008, 0.008, 0.008), bias_sigma=(0.002, 0.002, 0.002),
                               gm_sigma=(0.008, 0.008, 0.008), gm_tau_s=(600.0, 600.0, 600.0)),
    velocity_mps=ErrorAxesConfig(white_sigma=(2e-4, 2e-4, 2e-4), bias_sigma=(0.0, 0.0, 0.0),
                                 gm_sigma=(1.5e-4, 1.5e-4, 1.5e-4), gm_tau_s=(600.0, 600.0, 600.0)),
    update_s=10.0,
)

#: Navigation with the realistic defaults above (``perfect = False``).
REALISTIC_NAVIGATION = NavigationConfig(perfect=False, absolute=REALISTIC_ABSOLUTE,
                                        relative=REALISTIC_RELATIVE)


# ------------------------------------------------------------------------------------------
# Frames and two-body propagation (numpy)
# ------------------------------------------------------------------------------------------


def _stumpff(z):
    """Stumpff functions C(z), S(z) for arrays of z (series near 0, trigonometric otherwise)."""
    z = np.asarray(z, dtype=float)
    c = np.empty_like(z)
    s = np.empty_like(z)
    small = np.abs(z) < 1e-2
    zs = z[small]
    # series to z^5: truncation below 1e-22 for |z| < 1e-2
    c[small] = 1 / 2 - zs / 24 + zs**2 / 720 - zs**3 / 40320 + zs**4 / 3628800 - zs**5 / 479001600
    s[small] = 1 / 6 - zs / 120 + zs**2 / 5040 - zs**3 / 362880 + zs**4 / 39916800 - zs**5 / 6227020800
    pos = (~small) & (z > 0)
    if np.any(pos):
        sz = np.sqrt(z[pos])
        c[pos] = 2.0 * np.sin(sz / 2) ** 2 / z[pos]
        s[pos] = (sz - np.sin(sz)) / sz**3
    neg = (~small) & (z < 0)
    if np.any(neg):
        sz = np.sqrt(-z[neg])
        c[neg] = (np.cosh(sz) - 1.0) / (-z[neg])
        s[neg] = (np.sinh(sz) - sz) / sz**3
    return c, s


def kepler_propagate(r_eci_m, v_eci_mps, dt_s, mu=MU_EARTH_M3PS2):
    """Two-body propagation by universal variables (f and g functions), vectorised over states.

    Parameters
    ----------
    r_eci_m, v_eci_mps : array_like, shape (3,) or (N, 3)
        Initial positions (m) and velocities (m/s) in an inertial frame.
    dt_s : float
        Propagation time, s (negative propagates backwards).
    mu : float
        Gravitational parameter, m^3/s^2.

    Returns
    -------
    r, v : np.ndarray, same shape as the inputs
        Propagated positions and velocities.

    Notes
    -----
    Curtis, Orbital Mechanics for Engineering Students, 2005, sec. 3.7 (universal Kepler equation,
    Newton iteration, Lagrange coefficients) [memory for the section].
    """
    r0 = np.atleast_2d(np.asarray(r_eci_m, dtype=float))
    v0 = np.atleast_2d(np.asarray(v_eci_mps, dtype=float))
    one = np.asarray(r_eci_m).ndim == 1
    dt = float(dt_s)
    if dt == 0.0:
        return (r0[0].copy(), v0[0].copy()) if one else (r0.copy(), v0.copy())
    sqmu = math.sqrt(mu)
    r0n = np.linalg.norm(r0, axis=1)
    alpha = 2.0 / r0n - np.sum(v0 * v0, axis=1) / mu
    if np.any(alpha <= 0):
        raise ValueError("kepler_propagate: only elliptic states are supported")
    rv = np.sum(r0 * v0, axis=1) / sqmu
    chi = sqmu * alpha * dt
    for _ in range(60):
        z = alpha * chi**2
        c, s = _stumpff(z)
        rn = chi**2 * c + rv * chi * (1 - z * s) + r0n * (1 - z * c)
        f = rv * chi**2 * c + (1 - alpha * r0n) * chi**3 * s + r0n * chi - sqmu * dt
        dchi = f / rn
        chi = chi - dchi
        if np.all(np.abs(dchi) <= 1e-14 * np.maximum(1.0, np.abs(chi))):
            break
    else:  # pragma: no cover - Newton on the universal equation converges for elliptic orbits
        raise ValueError("kepler_propagate: universal Kepler equation did not converge")
    z = alpha * chi**2
    c, s = _stumpff(z)
    fl = 1 - chi**2 / r0n * c
    gl = dt - chi**3 * s / sqmu
    r = fl[:, None] * r0 + gl[:, None] * v0
    rn = np.linalg.norm(r, axis=1)
    fd = sqmu / (rn * r0n) * chi * (z * s - 1)
    gd = 1 - chi**2 / rn * c
    v = fd[:, None] * r0 + gd[:, None] * v0
    return (r[0], v[0]) if one else (r, v)


_H_STM = np.array([10.0, 10.0, 10.0, 1e-2, 1e-2, 1e-2])  # finite-difference steps, m and m/s


def kepler_stm(r_eci_m, v_eci_mps, dt_s, mu=MU_EARTH_M3PS2) -> np.ndarray:
    """Two-body state transition matrix d x(t0 + dt) / d x(t0), by central differences.

    Parameters
    ----------
    r_eci_m, v_eci_mps : array_like, shape (3,)
        Reference state at t0 (m, m/s), inertial.
    dt_s : float
        Propagation time, s.

    Returns
    -------
    np.ndarray, shape (6, 6)
        Inertial Cartesian STM (position then velocity). Steps of 10 m and 1 cm/s: truncation
        error of order (step/r)^2 ~ 1e-12 relative.
    """
    x0 = np.concatenate((np.asarray(r_eci_m, float), np.asarray(v_eci_mps, float)))
    pert = np.vstack((x0 + np.diag(_H_STM), x0 - np.diag(_H_STM)))
    r, v = kepler_propagate(pert[:, :3], pert[:, 3:], dt_s, mu)
    x = np.hstack((r, v))
    return ((x[:6] - x[6:]) / (2.0 * _H_STM)[:, None]).T


# ------------------------------------------------------------------------------------------
# Error processes
# ------------------------------------------------------------------------------------------


def _axes3(value, key: str, positive: bool = False) -> np.ndarray:
    try:
        a = np.asarray(value, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        a = np.zeros(0)
    if a.size == 1:
        a = np.repeat(a, 3)
    bad = a.size != 3 or not np.all(np.isfinite(a)) or (np.any(a <= 0) if positive else np.any(a < 0))
    if bad:
        what = "positive" if positive else "non-negative"
        raise ScenarioError(key, value, f"three {what} finite numbers (R, T, N axes)")
    return a


class ErrorProcess:
    """White noise + constant bias + first-order Gauss-Markov on three axes, at update epochs.

    Parameters
    ----------
    axes : sim.scenario.config.ErrorAxesConfig
        Sigmas per axis (units of the quantity) and GM time constants (s).
    update_s : float
        Update period, s (the discretisation step of the GM process).
    seed : int
        Run seed.
    source : str
        Stream path prefix, e.g. ``"nav/abs/chief/pos"``; the three sources are
        ``<source>/white``, ``<source>/bias`` and ``<source>/gm``.
    key : str
        Scenario key for error messages, e.g. ``"navigation.absolute.position_m"``.

    Notes
    -----
    Epochs must be requested in non-decreasing order (:meth:`at`). The white and GM streams draw
    exactly three standard normals per epoch in epoch order (skipped epochs are drawn and
    discarded), so the value at an epoch does not depend on which epochs were requested before.
    """

    def __init__(self, axes: ErrorAxesConfig, update_s: float, seed: int, source: str, key: str):
        self.white_sigma = _axes3(axes.white_sigma, f"{key}.white_sigma")
        self.bias_sigma = _axes3(axes.bias_sigma, f"{key}.bias_sigma")
        self.gm_sigma = _axes3(axes.gm_sigma, f"{key}.gm_sigma")
        self.gm_tau_s = _axes3(axes.gm_tau_s, f"{key}.gm_tau_s", positive=True)
        self.update_s = float(update_s)
        self.gm_phi = np.exp(-self.update_s / self.gm_tau_s)
        self.gm_q = self.gm_sigma * np.sqrt(-np.expm1(-2.0 * self.update_s / self.gm_tau_s))
        self._rng_white = stream(seed, source, "white") if np.any(self.white_sigma > 0) else None
        self._rng_gm = stream(seed, source, "gm") if np.any(self.gm_sigma > 0) else None
        if np.any(self.bias_sigma > 0):
            self.bias = self.bias_sigma * stream(seed, source, "bias").standard_normal(3)
        else:
            self.bias = np.zeros(3)
        self._k = -1
        self._white = np.zeros(3)
        self._gm = np.zeros(3)

    @property
    def stated_sigma(self) -> np.ndarray:
        """RSS of the white, bias and GM sigmas per axis, shape (3,)."""
        return np.sqrt(self.white_sigma**2 + self.bias_sigma**2 + self.gm_sigma**2)

    @property
    def epoch(self) -> int:
        """Last epoch computed (-1 before the first)."""
        return self._k

    def _advance(self, k: int) -> None:
        m = k - self._k
        while m > 0:
            n = min(m, _CHUNK)
            if self._rng_white is not None:
                self._white = self._rng_white.standard_normal((n, 3))[-1] * self.white_sigma
            if self._rng_gm is not None:
                w = self._rng_gm.standard_normal((n, 3))
                if self._k < 0:  # stationary start at epoch 0
                    x = w[0] * self.gm_sigma
                    w = w[1:]
                else:
                    x = self._gm
                if len(w) > 0:
                    x = gauss_markov(x, w, self.gm_phi, self.gm_q)[-1]
                self._gm = x
            self._k += n
            m -= n

    def at(self, k: int) -> np.ndarray:
        """Total error at epoch ``k`` (>= the last epoch requested), shape (3,)."""
        return sum(self.components(k).values())

    def components(self, k: int) -> dict[str, np.ndarray]:
        """The three parts ``white``, ``bias``, ``gm`` at epoch ``k``, each shape (3,)."""
        k = int(k)
        if k < self._k:
            raise ValueError(f"error process epochs must not go backwards: asked {k} after {self._k}")
        self._advance(k)
        return {"white": self._white.copy(), "bias": self.bias.copy(), "gm": self._gm.copy()}


class _Schedule:
    """Update epochs and outages of one navigation kind."""

    def __init__(self, cfg: NavErrorConfig, key: str):
        u = cfg.update_s
        if isinstance(u, bool) or not isinstance(u, (int, float)) or not math.isfinite(u) or u <= 0:
            raise ScenarioError(f"{key}.update_s", u, "a positive number of seconds")
        self.update_s = float(u)
        outs = []
        for i, iv in enumerate(cfg.outages_s):
            try:
                s, e = (float(x) for x in iv)
            except (TypeError, ValueError):
                raise ScenarioError(f"{key}.outages_s[{i}]", iv,
                                    "a pair [start, end] of seconds since epoch") from None
            if not (math.isfinite(s) and math.isfinite(e) and 0 <= s < e):
                raise ScenarioError(f"{key}.outages_s[{i}]", iv,
                                    "a pair [start, end] of seconds with 0 <= start < end")
            outs.append((s, e))
        self.outages = sorted(outs)

    def in_outage(self, t: float) -> bool:
        return any(s <= t < e for s, e in self.outages)

    def epoch_at_or_before(self, t: float) -> int:
        return max(0, int(math.floor(t / self.update_s + _EPS_T)))

    def fix(self, t: float) -> tuple[int, int, bool]:
        """(k_t, k_fix, valid): latest scheduled epoch, latest epoch with a fix, validity at t.

        Epoch 0 always gives a fix (the run starts with a navigation solution).
        """
        k_t = self.epoch_at_or_before(t)
        k = k_t
        while k > 0:
            tk = k * self.update_s
            hit = next(((s, e) for s, e in self.outages if s <= tk < e), None)
            if hit is None:
                break
            k = min(k - 1, int(math.ceil(hit[0] / self.update_s - _EPS_T)) - 1)
        k = max(k, 0)
        valid = (k == k_t) and not self.in_outage(t)
        return k_t, k, valid


# ------------------------------------------------------------------------------------------
# The model
# ------------------------------------------------------------------------------------------


@dataclass
class _Fix:
    """Fix error of one estimate (one spacecraft, one kind) at the fix epoch."""

    k: int
    t_s: float
    dr_m: np.ndarray  # position error at the fix, RTN axes of the fix, m
    dv_mps: np.ndarray  # velocity error at the fix, RTN axes of the fix, m/s


class NavigationModel:
    """Navigation estimates with configured errors, from truth states.

    Parameters
    ----------
    cfg : sim.scenario.config.NavigationConfig
    seed : int
        Run seed.
    chief : str
        Chief name.
    deputies : sequence of str
        Deputy names (scenario order).

    Notes
    -----
    See the module docstring for the model. Calls to :meth:`estimate` must come in
    non-decreasing time.
    """

    def __init__(self, cfg: NavigationConfig, seed: int, chief: str, deputies: Sequence[str]):
        self.cfg = cfg
        self.seed = seed
        self.chief = str(chief)
        self.deputies = tuple(str(d) for d in deputies)
        names = (self.chief, *self.deputies)
        if len(set(names)) != len(names):
            raise ScenarioError("spacecraft", list(names), "unique spacecraft names")
        stream(seed, "nav")  # validates the seed
        self._abs_sched = _Schedule(cfg.absolute, "navigation.absolute")
        self._rel_sched = _Schedule(cfg.relative, "navigation.relative")
        self._abs: dict[str, tuple[ErrorProcess, ErrorProcess]] = {}
        self._rel: dict[str, tuple[ErrorProcess, ErrorProcess]] = {}
        for n in names:
            self._abs[n] = self._processes(cfg.absolute, "abs", n, "navigation.absolute")
        for n in self.deputies:
            self._rel[n] = self._processes(cfg.relative, "rel", n, "navigation.relative")
        self._fix_cache: dict[tuple[str, str], _Fix] = {}
        self._t_last = -math.inf
        self.last_absolute: dict[str, AbsoluteEstimate] = {}
        """Absolute estimates of every spacecraft at the last call (the chief's is in the NavSolution)."""

    def _processes(self, cfg: NavErrorConfig, kind: str, name: str, key: str):
        dt = self._abs_sched.update_s if kind == "abs" else self._rel_sched.update_s
        return (ErrorProcess(cfg.position_m, dt, self.seed, f"nav/{kind}/{name}/pos", f"{key}.position_m"),
                ErrorProcess(cfg.velocity_mps, dt, self.seed, f"nav/{kind}/{name}/vel",
                             f"{key}.velocity_mps"))

    # -- helpers ------------------------------------------------------------------------------

    def _fix(self, kind: str, name: str, k: int) -> _Fix:
        f = self._fix_cache.get((kind, name))
        if f is not None and f.k == k:
            return f
        pr, pv = (self._abs if kind == "abs" else self._rel)[name]
        sched = self._abs_sched if kind == "abs" else self._rel_sched
        f = _Fix(k, k * sched.update_s, pr.at(k), pv.at(k))
        self._fix_cache[(kind, name)] = f
        return f

    def processes(self, kind: str, name: str) -> tuple[ErrorProcess, ErrorProcess]:
        """The (position, velocity) error processes of ``kind`` (``"abs"`` or ``"rel"``) for ``name``."""
        return (self._abs if kind == "abs" else self._rel)[name]

    def stated_sigma(self, kind: str) -> tuple[np.ndarray, np.ndarray]:
        """Stated 1-sigma (position, velocity) per RTN axis at a fresh fix, shape (3,) each."""
        if self.cfg.perfect:
            return np.zeros(3), np.zeros(3)
        cfg = self.cfg.absolute if kind == "abs" else self.cfg.relative

        def rss(ax: ErrorAxesConfig) -> np.ndarray:
            return np.sqrt(sum(np.asarray(x, float) ** 2
                               for x in (ax.white_sigma, ax.bias_sigma, ax.gm_sigma)))

        return rss(cfg.position_m), rss(cfg.velocity_mps)

    @staticmethod
    def _propagate_error(x_t, dt_s, m_fix, dr_fix, dv_fix, sr_fix, sv_fix, m_t):
        """Carry a fix error forward by ``dt_s`` along the orbit whose state at t is ``x_t``.

        Parameters
        ----------
        x_t : (r_eci_m (3,), v_eci_mps (3,))
            Reference state at t; it is propagated back by ``dt_s`` (two-body) to the fix.
        m_fix : np.ndarray, shape (3, 3), or None
            ECI-to-RTN rotation the fix error is expressed in; None for the reference's own RTN
            at the fix.
        dr_fix, dv_fix, sr_fix, sv_fix : np.ndarray, shape (3,)
            Fix error and its stated 1-sigma, axes ``m_fix``.
        m_t : np.ndarray, shape (3, 3)
            ECI-to-RTN rotation of the result at t.

        Returns
        -------
        dr, dv, sigma_r, sigma_v : np.ndarray, shape (3,)
            Error and stated 1-sigma at t in the axes ``m_t`` (covariance ``Phi P Phi^T``).
        """
        r_f, v_f = kepler_propagate(x_t[0], x_t[1], -dt_s)
        mf = rtn_rows(r_f, v_f) if m_fix is None else m_fix
        phi = kepler_stm(r_f, v_f, dt_s)
        z = np.zeros((3, 3))
        to_eci = np.block([[mf.T, z], [z, mf.T]])
        to_t = np.block([[m_t, z], [z, m_t]])
        g = to_t @ phi @ to_eci
        dx = g @ np.concatenate((dr_fix, dv_fix))
        p_t = g @ np.diag(np.concatenate((sr_fix, sv_fix)) ** 2) @ g.T
        sig = np.sqrt(np.clip(np.diag(p_t), 0.0, None))
        return dx[:3], dx[3:], sig[:3], sig[3:]

    def _check_truth(self, t_s, truth):
        if not math.isfinite(t_s):
            raise ValueError(f"navigation: t_s must be finite, got {t_s!r}")
        if t_s < self._t_last - _EPS_T:
            raise ValueError(f"navigation: estimate times must not decrease ({t_s} after {self._t_last})")
        out = {}
        for n in (self.chief, *self.deputies):
            if n not in truth:
                raise ValueError(f"navigation: truth state of {n!r} missing (got {sorted(truth)})")
            r, v, m = truth[n]
            r = np.asarray(r, dtype=float).reshape(3)
            v = np.asarray(v, dtype=float).reshape(3)
            if not (np.all(np.isfinite(r)) and np.all(np.isfinite(v)) and math.isfinite(float(m))):
                raise ValueError(f"navigation: truth state of {n!r} at t = {t_s} s is not finite")
            out[n] = (r, v, float(m))
        return out

    # -- the engine's call ----------------------------------------------------------------------

    def estimate(self, t_s: float, truth: Mapping[str, tuple[np.ndarray, np.ndarray, float]]
                 ) -> tuple[NavSolution, dict]:
        """Navigation solution at ``t_s`` and the error record for the log.

        Parameters
        ----------
        t_s : float
            Time, s since epoch (non-decreasing between calls).
        truth : Mapping[str, (r_eci_m (3,), v_eci_mps (3,), mass_kg)]
            Truth states (covey's ECI, TOD) of the chief and every deputy.

        Returns
        -------
        nav : guidance.interface.NavSolution
            What the guidance law sees.
        record : dict
            ``t_s``, ``valid``, ``abs_outage``/``rel_outage`` (no fresh fix at t), and
            ``abs[name]`` with ``dr_rtn_m``, ``dv_rtn_mps`` (estimate minus truth, the spacecraft's
            own RTN axes at t), ``sigma_r_rtn_m``, ``sigma_v_rtn_mps``, ``t_fix_s``,
            ``r_eci_m``, ``v_eci_mps`` (the estimate); ``rel[deputy]`` with ``ddr_rtn_m``,
            ``ddv_rtn_mps`` (estimate minus truth of the relative state, chief RTN axes at t),
            ``sigma_dr_rtn_m``, ``sigma_dv_rtn_mps``, ``t_fix_s``.
        """
        t_s = float(t_s)
        tr = self._check_truth(t_s, truth)
        self._t_last = max(self._t_last, t_s)
        perfect = bool(self.cfg.perfect)
        zero = np.zeros(3)
        m_rtn = {n: rtn_rows(x[0], x[1]) for n, x in tr.items()}
        rec = {"t_s": t_s, "abs": {}, "rel": {}}

        # absolute
        if perfect:
            abs_valid = True
            k_fix = self._abs_sched.epoch_at_or_before(t_s)
        else:
            _, k_fix, abs_valid = self._abs_sched.fix(t_s)
        for n, (r, v, mass) in tr.items():
            if perfect:
                dr, dv, sr, sv, tf = zero, zero, zero, zero, t_s
            else:
                dr, dv, sr, sv, tf = self._error_now("abs", n, k_fix, t_s, (r, v), lambda dt: None, m_rtn[n])
            m = m_rtn[n]
            r_est = r + m.T @ dr
            v_est = v + m.T @ dv
            self.last_absolute[n] = AbsoluteEstimate(n, t_s, r_est, v_est, np.array(sr), np.array(sv), mass)
            rec["abs"][n] = {"dr_rtn_m": np.array(dr), "dv_rtn_mps": np.array(dv),
                             "sigma_r_rtn_m": np.array(sr), "sigma_v_rtn_mps": np.array(sv),
                             "t_fix_s": tf, "r_eci_m": r_est, "v_eci_mps": v_est}

        # relative
        if perfect:
            rel_valid = True
            k_fix = self._rel_sched.epoch_at_or_before(t_s)
        else:
            _, k_fix, rel_valid = self._rel_sched.fix(t_s)
        rc, vc, _ = tr[self.chief]
        mc = m_rtn[self.chief]
        deputies = {}
        for n in self.deputies:
            rd, vd, mass = tr[n]
            dr_true = mc @ (rd - rc)
            dv_true = mc @ (vd - vc)
            if perfect:
                ddr, ddv, sr, sv, tf = zero, zero, zero, zero, t_s
            else:
                ddr, ddv, sr, sv, tf = self._error_now(
                    "rel", n, k_fix, t_s, (rd, vd), lambda dt: rtn_rows(*kepler_propagate(rc, vc, -dt)), mc)
            deputies[n] = RelativeEstimate(n, t_s, dr_true + ddr, dv_true + ddv, np.array(sr),
                                           np.array(sv), mass)
            rec["rel"][n] = {"ddr_rtn_m": np.array(ddr), "ddv_rtn_mps": np.array(ddv),
                             "sigma_dr_rtn_m": np.array(sr), "sigma_dv_rtn_mps": np.array(sv),
                             "t_fix_s": tf}

        valid = bool(abs_valid and rel_valid)
        rec["valid"] = valid
        rec["abs_outage"] = not abs_valid
        rec["rel_outage"] = not rel_valid
        nav = NavSolution(t_s, self.last_absolute[self.chief], deputies, valid)
        return nav, rec

    def _error_now(self, kind, name, k_fix, t_s, state, frame_at_fix, m_now):
        """Estimate-minus-truth at ``t_s`` from the last fix (epoch ``k_fix``) of ``kind``/``name``.

        At the fix time the fix's own errors and the stated sigmas; later (an update gap or an
        outage) the fix carried forward by :meth:`_propagate_error`, with ``frame_at_fix(dt)``
        the RTN matrix the errors are expressed in at the fix (None: the spacecraft's own, the
        absolute case; the chief's RTN propagated back, the relative case) and ``m_now`` the RTN
        matrix at ``t_s``. Returns ``dr, dv, sigma_r, sigma_v, t_fix_s``.
        """
        f = self._fix(kind, name, k_fix)
        pr, pv = (self._abs if kind == "abs" else self._rel)[name]
        dt = t_s - f.t_s
        if dt <= _EPS_T:
            return f.dr_m, f.dv_mps, pr.stated_sigma, pv.stated_sigma, f.t_s
        dr, dv, sr, sv = self._propagate_error(state, dt, frame_at_fix(dt), f.dr_m, f.dv_mps,
                                               pr.stated_sigma, pv.stated_sigma, m_now)
        return dr, dv, sr, sv, f.t_s


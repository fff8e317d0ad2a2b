"""The three built-in guidance laws flown closed-loop against the Orekit truth: the ideal variant
(each law reaches its target within the model's accuracy) and the realistic variant (the laws
rank as a closed loop should).

Scenarios (scenarios/*.toml; measured results in benchmarks/RESULTS.md):

- ``ei_pair`` / ``ei_pair_ideal``: a close pair, 3 km along-track to a passive-safe e/i-separated
  formation (a de = a di = 300 m, parallel) in 2.5 days; flown as in the file.
- ``spread_four`` / ``spread_four_ideal``: chief and three deputies spread along-track by
  differential drag; the files ask for -150/+150/+300 km in 25 days. Here a shortened copy
  (``SPREAD_SHORT``): 6 days, targets -10/+10/+20 km (the drag authority scales with the square
  of the time: 25 days reach about 700 km rest to rest, 6 days about 40 km), same e/i targets.

Every flown case runs once per module (module fixtures) and several checks read its log. The
judge is ``sim.judge.metrics`` (truth mean ROE from Orekit's Eckstein-Hechler theory, at the deadline),
never guidance code; guidance's own density model is used only to say what guidance believed.

Error budget of the ideal variant (the tolerance of ``test_ideal_*_reaches_target``)
-------------------------------------------------------------------------------------
With perfect navigation and actuators and J2 + drag only, a law misses the target for three
reasons, each bounded separately:

1. Differential drag that guidance did not expect: guidance plans with its own density (an
   exponential table at the chief's altitude at the solve time, guidance.density) and
   ``0.5 rho v^2 (B_deputy - B_chief)`` along-track; the truth has NRLMSISE-00 with the real
   solar activity at each spacecraft's own position, the full drag vector and the real masses.
   :func:`drag_mismatch_miss` integrates the logged difference (truth forces from the logged
   density, area, mass and state; minus guidance's planned acceleration with the flown areas)
   through Gauss's variational equations for near-circular orbits in ROE form (impulsive form
   as in Gaias et al., "Impulsive Maneuvers for Formation Reconfiguration Using Relative
   Orbital Elements", JGCD 38(6), 2015) plus the secular J2 couplings that matter over days: along-track drift
   ``-3/2 n a da``, rotation of the relative e vector at the apsidal rate, differential nodal
   drift ``-7/2 Omega_dot sin(i) a da - Omega_dot sin(i) tan(i) a dix`` (standard secular J2
   rates, Vallado, Fundamentals of Astrodynamics and Applications, 4th ed. [memory]).
   That prediction is subtracted; what it leaves out (second order) is allowed as
   ``REL_DRAG`` = 5 % of it, per group as in item 3 (measured: 0.6 % on a dlambda, 0.3 % on
   a da, 1.4 % on the e vector for the open-loop hybrid of the ideal pair, 5.5 km predicted).
2. The mean-element map: guidance's first-order J2 (+J3) mean/osculating map versus the judge's
   Eckstein-Hechler mean elements differ by at most ``MAP_M`` = 0.33 m per mean-ROE component
   for offsets up to 5 km, and an e-vector separation reads as ``MAP_E`` = 2.4e-3 of it in
   a dlambda (benchmarks/RESULTS.md [guidance-model], both measured against Orekit); plus
   ``MAP_REL`` = 1e-5 of the along-track separation beyond 5 km (measured here: 2.1 m at 300 km
   in the 25-day spread, common practice, no source). A da mapping error also drifts along-track by
   ``3/2 n (T - t_plan) MAP_M`` until the deadline. ``test_ideal_guidance_state_matches_judge``
   checks the bound itself at every re-plan.
3. The planner's first-order J2 STM and impulse/drag input matrices: relative error O(J2) of the
   change still to make at the plan time; allowed ``REL_STM`` = 1 % of it, per group (a da,
   a dlambda, the e vector's and the i vector's change in magnitude, for both of their
   components: an error in one shows in the other). Measured: 0.28 % for the propulsion-only
   pair, 0.69 m in dix and dex for 250 m e and i changes.

``t_plan`` is the solve time of the plan that flies the last stretch: 0 for the single-solve laws,
the last re-solve (one chief orbit before the deadline, ``freeze_s``) for ``hybrid_resolve``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from guidance.constants import J2, MU_EARTH_M3PS2, OMEGA_EARTH_RADPS, R_EARTH_M
from guidance.density import DensityModel, relative_wind_speed_mps
from guidance.laws.base import COMMON_SETTINGS
from sim.log.reader import read_log
from sim.loop.run import run_scenario
from sim.scenario.reader import load_scenario

REPO = Path(__file__).resolve().parents[2]
SCEN = REPO / "scenarios"
LAWS = ("propulsion_only", "hybrid_single", "hybrid_resolve")

SPREAD_SHORT = {
    "run.duration_days": 6.0,
    "deputies[0].deadline_days": 6.0,
    "deputies[1].deadline_days": 6.0,
    "deputies[2].deadline_days": 6.0,
    "deputies[0].target_roe_m": [0.0, -10000.0, 0.0, 40.0, 0.0, 40.0],
    "deputies[1].target_roe_m": [0.0, 10000.0, 0.0, -40.0, 0.0, -40.0],
    "deputies[2].target_roe_m": [0.0, 20000.0, 0.0, 80.0, 0.0, 80.0],
}

# error budget of the ideal variant (module docstring)
MAP_M = 0.33
MAP_E = 2.4e-3
MAP_REL = 1e-5
REL_STM = 0.01
REL_DRAG = 0.05


# ------------------------------------------------------------------------------------------
# Flying
# ------------------------------------------------------------------------------------------


@dataclass
class Flown:
    law: str
    cfg: object
    summary: object
    log: object
    wall_s: float

    @property
    def metrics(self) -> dict:
        return {m.name: m for m in self.summary.metrics}

    def statuses(self) -> np.ndarray:
        return np.array([_s(x) for x in self.log.get("guidance/cycles/status")])


def _s(x) -> str:
    return x.decode() if isinstance(x, bytes) else str(x)


def _fly_all(path: Path, overrides: dict, folder: Path) -> dict[str, Flown]:
    out = {}
    for law in LAWS:
        cfg = load_scenario(path, overrides={**overrides, "guidance.law": law})
        h5 = folder / f"{path.stem}_{law}.h5"
        t0 = time.perf_counter()
        summary = run_scenario(cfg, h5)
        wall = time.perf_counter() - t0
        assert summary.status == "ok", (path.name, law, summary.reason)
        out[law] = Flown(law, cfg, summary, read_log(h5), wall)
        print(f"\n{path.stem} {law}: {wall:.1f} s wall")
        for m in summary.metrics:
            print(f"  {m.name}: dv {m.dv_total_mps:.4f} m/s, final error [m] "
                  + " ".join(f"{e:.2f}" for e in m.final_error_m))
    return out


@pytest.fixture(scope="module")
def pair_ideal(tmp_path_factory):
    return _fly_all(SCEN / "ei_pair_ideal.toml", {}, tmp_path_factory.mktemp("pair_ideal"))


@pytest.fixture(scope="module")
def pair_real(tmp_path_factory):
    return _fly_all(SCEN / "ei_pair.toml", {}, tmp_path_factory.mktemp("pair_real"))


@pytest.fixture(scope="module")
def spread_ideal(tmp_path_factory):
    return _fly_all(SCEN / "spread_four_ideal.toml", SPREAD_SHORT, tmp_path_factory.mktemp("spread_ideal"))


@pytest.fixture(scope="module")
def spread_real(tmp_path_factory):
    return _fly_all(SCEN / "spread_four.toml", SPREAD_SHORT, tmp_path_factory.mktemp("spread_real"))


# ------------------------------------------------------------------------------------------
# The error budget (module docstring)
# ------------------------------------------------------------------------------------------


def _truth(log, sc):
    g = f"spacecraft/{sc}/truth"
    return {k: np.asarray(log.get(f"{g}/{k}"), float)
            for k in ("t_s", "r_eci_m", "v_eci_mps", "density_kgpm3", "drag_area_m2", "mass_kg")}


def _drag_eci(x, cd):
    """Drag acceleration from logged truth samples, m/s^2 (atmosphere co-rotating with the Earth
    about the TOD z axis, covey's ECI; the truth's own force model, sim.truth.world)."""
    v_rel = x["v_eci_mps"] - np.cross([0.0, 0.0, OMEGA_EARTH_RADPS], x["r_eci_m"])
    k = 0.5 * x["density_kgpm3"] * cd * x["drag_area_m2"] / x["mass_kg"]
    return -(k * np.linalg.norm(v_rel, axis=1))[:, None] * v_rel


def chief_rates(a_m: float, i_rad: float):
    """Mean motion, secular J2 nodal and apsidal rates (Vallado 4th ed. [memory]), rad/s."""
    n = math.sqrt(MU_EARTH_M3PS2 / a_m**3)
    k = n * J2 * (R_EARTH_M / a_m) ** 2
    return n, -1.5 * k * math.cos(i_rad), 0.75 * k * (5.0 * math.cos(i_rad) ** 2 - 1.0)


def drag_mismatch_miss(fl: Flown, deputy: str, t_plan_s: float, t_end_s: float) -> np.ndarray:
    """Mean-ROE miss at ``t_end_s`` (a-scaled m, shape (6,)) caused by the differential drag the
    truth applied minus the differential along-track drag guidance planned with, from
    ``t_plan_s`` on (module docstring, item 1)."""
    cfg, log = fl.cfg, fl.log
    chief = cfg.chief.name
    cd = {sc.name: sc.bus.cd for sc in cfg.spacecraft}
    c, d = _truth(log, chief), _truth(log, deputy)
    df = _drag_eci(d, cd[deputy]) - _drag_eci(c, cd[chief])
    r, v = c["r_eci_m"], c["v_eci_mps"]
    R = r / np.linalg.norm(r, axis=1)[:, None]
    N = np.cross(r, v)
    N /= np.linalg.norm(N, axis=1)[:, None]
    T = np.cross(N, R)
    f = np.stack([np.sum(df * R, 1), np.sum(df * T, 1), np.sum(df * N, 1)], axis=1)
    t = c["t_s"]
    k0 = int(np.searchsorted(t, t_plan_s - 1e-6))
    a = float(log.get(f"spacecraft/{chief}/mean_oe/a_m")[k0])
    inc = math.radians(float(log.get(f"spacecraft/{chief}/mean_oe/i_deg")[k0]))
    # what guidance planned with: its density at the chief's altitude at the solve time,
    # the circular relative-wind speed, the areas as flown (guidance.laws.base, guidance.density)
    belief = DensityModel.from_settings(cfg.guidance.settings)
    rho_b = float(belief.density_kgpm3(a - R_EARTH_M))
    v_b = float(relative_wind_speed_mps(a, inc))
    f[:, 1] -= -0.5 * rho_b * v_b**2 * (cd[deputy] * d["drag_area_m2"] / d["mass_kg"]
                                         - cd[chief] * c["drag_area_m2"] / c["mass_kg"])
    n, raan_dot, argp_dot = chief_rates(a, inc)
    node = np.cross([0.0, 0.0, 1.0], N)
    node /= np.linalg.norm(node, axis=1)[:, None]
    u = np.arctan2(np.sum(R * np.cross(N, node), 1), np.sum(R * node, 1))
    sel = (t >= t_plan_s - 1e-6) & (t <= t_end_s + 1e-6)
    t, f, u = t[sel], f[sel], u[sel]
    su, cu = np.sin(u), np.cos(u)
    # Gauss, near-circular, a-scaled ROE rates per unit force (Gaias et al., JGCD 38(6), 2015)
    b = np.stack([2 * f[:, 1], -2 * f[:, 0], su * f[:, 0] + 2 * cu * f[:, 1],
                  -cu * f[:, 0] + 2 * su * f[:, 1], cu * f[:, 2], su * f[:, 2]], axis=1) / n
    A = np.zeros((6, 6))
    A[1, 0] = -1.5 * n                                   # Kepler along-track drift
    A[2, 3], A[3, 2] = -argp_dot, argp_dot               # relative e vector rotates (J2)
    A[5, 0] = -3.5 * raan_dot * math.sin(inc)            # nodal drift from da (J2)
    A[5, 4] = -raan_dot * math.sin(inc) * math.tan(inc)  # nodal drift from dix (J2)
    x = np.zeros(6)
    for k in range(1, t.size):
        x = x + (t[k] - t[k - 1]) * (A @ x + 0.5 * (b[k] + b[k - 1]))
    return x


def judge_minus_guidance(fl: Flown, deputy: str, t_s: float) -> np.ndarray:
    """Truth mean ROE (the judge) minus guidance's own estimate at a solve time ``t_s`` (the first
    point of that cycle's logged prediction), a-scaled m."""
    log = fl.log
    ct = log.get(f"guidance/predicted/{deputy}/cycle_t_s")
    tp = log.get(f"guidance/predicted/{deputy}/t_s")
    rp = log.get(f"guidance/predicted/{deputy}/roe_m")
    k = np.nonzero((np.abs(ct - t_s) < 1e-6) & (np.abs(tp - t_s) < 1e-6))[0]
    assert k.size == 1, (deputy, t_s)
    t = log.get(f"spacecraft/{deputy}/truth/t_s")
    j = int(np.searchsorted(t, t_s - 1e-6))
    assert abs(t[j] - t_s) < 1e-6
    return np.asarray(log.get(f"spacecraft/{deputy}/mean_roe_m")[j]) - rp[k[0]]


def replan_times(fl: Flown) -> np.ndarray:
    """Cycle times at which the law (re)planned (status other than ``hold``)."""
    st = fl.statuses()
    return np.asarray(fl.log.get("guidance/cycles/t_s"))[st != "hold"]


def ideal_tolerance_m(fl: Flown, deputy: str, t_plan_s: float, predicted_m: np.ndarray) -> np.ndarray:
    """Per-component tolerance of the ideal final error (module docstring, items 1-3), m."""
    dep = next(d for d in fl.cfg.deputies if d.name == deputy)
    t = fl.log.get(f"spacecraft/{deputy}/truth/t_s")
    roe = np.asarray(fl.log.get(f"spacecraft/{deputy}/mean_roe_m"))
    x_plan = roe[int(np.searchsorted(t, t_plan_s - 1e-6))]
    d = np.asarray(dep.target_roe_m) - x_plan
    # the change still to make, per group: a da, a dlambda, |a de| for both e, |a di| for both i
    remaining = np.abs(np.array([d[0], d[1], *[math.hypot(d[2], d[3])] * 2, *[math.hypot(d[4], d[5])] * 2]))
    a = float(fl.log.get(f"spacecraft/{fl.cfg.chief.name}/mean_oe/a_m")[0])
    n = math.sqrt(MU_EARTH_M3PS2 / a**3)
    mapping = mapping_bound_m(fl, deputy)
    p = np.asarray(predicted_m, float)
    p_group = np.abs(np.array([p[0], p[1], *[math.hypot(p[2], p[3])] * 2, *[math.hypot(p[4], p[5])] * 2]))
    tol = mapping + REL_STM * remaining + REL_DRAG * p_group
    tol[1] += 1.5 * n * (dep.deadline_s - t_plan_s) * mapping[0]
    return tol


def mapping_bound_m(fl: Flown, deputy: str) -> np.ndarray:
    """Accuracy of guidance's mean ROE against the judge's over this run (item 2), m, (6,)."""
    roe = np.asarray(fl.log.get(f"spacecraft/{deputy}/mean_roe_m"))
    b = np.full(6, MAP_M + MAP_REL * float(np.max(np.abs(roe[:, 1]))))
    b[1] += MAP_E * float(np.max(np.hypot(roe[:, 2], roe[:, 3])))
    return b


def _t_plan(fl: Flown) -> float:
    return 0.0 if fl.law != "hybrid_resolve" else float(replan_times(fl)[-1])


# ------------------------------------------------------------------------------------------
# Ideal variant
# ------------------------------------------------------------------------------------------


def _check_ideal_reaches_target(runs: dict[str, Flown], law: str):
    fl = runs[law]
    t_plan = _t_plan(fl)
    rows = []
    for dep in fl.cfg.deputies:
        m = fl.metrics[dep.name]
        assert m.reached_deadline
        err = np.asarray(m.final_error_m)
        pred = drag_mismatch_miss(fl, dep.name, t_plan, dep.deadline_s)
        tol = ideal_tolerance_m(fl, dep.name, t_plan, pred)
        rows.append((dep.name, err, pred, tol))
        print(f"\n{law} {dep.name}: t_plan {t_plan / 86400:.2f} d\n  final error {np.round(err, 2)}"
              f"\n  drag-mismatch prediction {np.round(pred, 2)}\n  residual {np.round(err - pred, 2)}"
              f"\n  tolerance {np.round(tol, 2)}")
    for name, err, pred, tol in rows:
        assert np.all(np.abs(err - pred) <= tol), (law, name, err - pred, tol)
    return rows


@pytest.mark.orekit
@pytest.mark.parametrize("law", LAWS)
def test_ideal_pair_reaches_target_within_model_accuracy(pair_ideal, law):
    rows = _check_ideal_reaches_target(pair_ideal, law)
    if law != "hybrid_single":
        # not limited by guidance's density: within a few metres of the 300 m e/i formation and
        # within the along-track budget of item 2 (computed, not fixed: the formula above)
        (_, err, _, tol), = rows
        assert np.all(np.abs(err[[0, 2, 3, 4, 5]]) <= 5.0), err
    else:
        # the open-loop hybrid is off by what its density belief predicts (kilometres), and the
        # prediction explains it (checked above): guidance's density is truly the limit
        (_, err, pred, _), = rows
        assert abs(pred[1]) > 1000.0 and np.sign(err[1]) == np.sign(pred[1])


@pytest.mark.orekit
@pytest.mark.slow
@pytest.mark.parametrize("law", LAWS)
def test_ideal_spread_reaches_target_within_model_accuracy(spread_ideal, law):
    _check_ideal_reaches_target(spread_ideal, law)


def _check_guidance_state_matches_judge(fl: Flown):
    worst = np.zeros(6)
    for t in replan_times(fl):
        for dep in fl.cfg.deputies:
            d = judge_minus_guidance(fl, dep.name, float(t))
            bound = mapping_bound_m(fl, dep.name)
            worst = np.maximum(worst, np.abs(d))
            assert np.all(np.abs(d) <= bound), (fl.law, dep.name, t, d, bound)
    print(f"\n{fl.law}: worst |judge - guidance| at a re-plan {np.round(worst, 3)} m")


@pytest.mark.orekit
def test_ideal_guidance_state_matches_judge_pair(pair_ideal):
    """Item 2 of the budget: with perfect navigation, guidance's own mean ROE at every re-plan
    equals the judge's within the documented accuracy of its mean/osculating map."""
    _check_guidance_state_matches_judge(pair_ideal["hybrid_resolve"])


@pytest.mark.orekit
@pytest.mark.slow
def test_ideal_guidance_state_matches_judge_spread(spread_ideal):
    _check_guidance_state_matches_judge(spread_ideal["hybrid_resolve"])


def remaining_dv_allowance(fl: Flown, deputy: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per re-plan k >= 1: (t_k, increase of the predicted remaining delta-v, allowance), m/s.

    With perfect navigation the previous plan's remainder plus a correction of the deviation
    ``dx = estimate(t_k) - previous prediction(t_k)`` (model error only) is a feasible plan, so the
    new optimum can exceed the old remainder by at most the cost of that correction, flown at once
    with pairs of burns half an orbit apart (minimum-dv values of Gauss's equations, Gaias et al.,
    JGCD 38(6), 2015): ``n/2 |a da| + n/2 |a de| + n |a di| + |a dlambda| / (1.5 T_left)``; plus the
    planner's relative optimality gap (the law's ``optimality_gap``) on both plans (guidance-laws
    section) and two minimum impulse bits (a sub-bit correction is raised to one bit,
    guidance.planning.plan_deputy).
    """
    log = fl.log
    tc = replan_times(fl)
    t_all = np.asarray(log.get(f"guidance/deputies/{deputy}/t_s"))
    dv_all = np.asarray(log.get(f"guidance/deputies/{deputy}/dv_remaining_mps"))
    dv = dv_all[np.searchsorted(t_all, tc - 1e-6)]
    ct = log.get(f"guidance/predicted/{deputy}/cycle_t_s")
    tp = log.get(f"guidance/predicted/{deputy}/t_s")
    rp = log.get(f"guidance/predicted/{deputy}/roe_m")
    dep = next(d for d in fl.cfg.deputies if d.name == deputy)
    bus = dep.bus
    mass = np.asarray(log.get(f"spacecraft/{deputy}/truth/mass_kg"))
    dv_min = bus.thruster.min_impulse_bit_Ns / float(mass.min())
    a = float(log.get(f"spacecraft/{fl.cfg.chief.name}/mean_oe/a_m")[0])
    n = math.sqrt(MU_EARTH_M3PS2 / a**3)
    # the cycle before each re-plan (whose prediction the new estimate is compared with)
    t_cyc = np.asarray(log.get("guidance/cycles/t_s"))
    gap = float(fl.cfg.guidance.settings.get("optimality_gap", COMMON_SETTINGS["optimality_gap"][0]))
    inc, allow = [], []
    for k in range(1, tc.size):
        prev = t_cyc[np.searchsorted(t_cyc, tc[k] - 1e-6) - 1]
        sp = np.abs(ct - prev) < 1e-6
        sn = np.abs(ct - tc[k]) < 1e-6
        x_pred = rp[sp][np.argmin(np.abs(tp[sp] - tc[k]))]
        x_est = rp[sn][np.argmin(np.abs(tp[sn] - tc[k]))]
        d = x_est - x_pred
        t_left = dep.deadline_s - tc[k]
        cost = (0.5 * n * abs(d[0]) + abs(d[1]) / (1.5 * t_left) + 0.5 * n * math.hypot(d[2], d[3])
                + n * math.hypot(d[4], d[5]))
        inc.append(dv[k] - dv[k - 1])
        allow.append(gap * (dv[k] + dv[k - 1]) + 2.0 * dv_min + cost)
    return tc[1:], np.asarray(inc), np.asarray(allow)


def _check_remaining_dv(fl: Flown):
    for dep in fl.cfg.deputies:
        t, inc, allow = remaining_dv_allowance(fl, dep.name)
        assert t.size >= 10
        k = int(np.argmax(inc - allow))
        print(f"\n{dep.name}: {int(np.sum(inc > 1e-9))} of {inc.size} re-plans raised the remaining dv; "
              f"largest rise {inc.max():.2e} m/s; tightest margin {allow[k] - inc[k]:.2e} m/s "
              f"at {t[k] / 86400:.2f} d")
        assert np.all(inc <= allow), (dep.name, t[inc > allow] / 86400, inc[inc > allow], allow[inc > allow])


@pytest.mark.orekit
def test_ideal_pair_resolve_remaining_dv_never_increases(pair_ideal):
    _check_remaining_dv(pair_ideal["hybrid_resolve"])


@pytest.mark.orekit
@pytest.mark.slow
def test_ideal_spread_resolve_remaining_dv_never_increases(spread_ideal):
    _check_remaining_dv(spread_ideal["hybrid_resolve"])


# ------------------------------------------------------------------------------------------
# Realistic variant
# ------------------------------------------------------------------------------------------


def _realistic_rows(runs: dict[str, Flown]):
    m = {law: runs[law].metrics for law in LAWS}
    rows = []
    for dep in runs["hybrid_resolve"].cfg.deputies:
        n = dep.name
        res, sgl, prop = m["hybrid_resolve"][n], m["hybrid_single"][n], m["propulsion_only"][n]
        assert res.reached_deadline and sgl.reached_deadline and prop.reached_deadline
        print(f"\n{n}: a dlambda error resolve {res.final_error_m[1]:.1f} m, single "
              f"{sgl.final_error_m[1]:.1f} m, propulsion only {prop.final_error_m[1]:.1f} m; dv resolve "
              f"{res.dv_total_mps:.4f}, single {sgl.dv_total_mps:.4f}, propulsion only "
              f"{prop.dv_total_mps:.4f} m/s")
        rows.append((n, res, sgl, prop))
    return rows


def _check_realistic_errors(runs):
    """Realistic variant: the cadenced re-solve ends closer along-track than the
    single-solve hybrid; the single-solve hybrid uses less propulsive dv than propulsion only
    (the judge: sim.judge.metrics, executed impulses and truth mean ROE at the deadline)."""
    for n, res, sgl, prop in _realistic_rows(runs):
        assert abs(res.final_error_m[1]) < abs(sgl.final_error_m[1]), n
        assert sgl.dv_total_mps < prop.dv_total_mps, n


def _check_realistic_resolve_dv(runs):
    """Realistic variant: the re-solve uses no more than 10 % more propulsive dv than
    the single-solve hybrid, and less than propulsion only."""
    for n, res, sgl, prop in _realistic_rows(runs):
        assert res.dv_total_mps <= 1.10 * sgl.dv_total_mps, n
        assert res.dv_total_mps < prop.dv_total_mps, n


@pytest.mark.orekit
def test_realistic_pair_resolve_ends_closer_and_single_saves_dv(pair_real):
    _check_realistic_errors(pair_real)


@pytest.mark.orekit
def test_realistic_pair_resolve_dv_within_10pct_of_single_and_below_propulsion(pair_real):
    _check_realistic_resolve_dv(pair_real)


@pytest.mark.orekit
@pytest.mark.slow
def test_realistic_spread_resolve_ends_closer_and_single_saves_dv(spread_real):
    _check_realistic_errors(spread_real)


@pytest.mark.orekit
@pytest.mark.slow
def test_realistic_spread_resolve_dv_within_10pct_of_single_and_below_propulsion(spread_real):
    # the file flies the re-solve with resolve_mode = "drag_only" ([guidance.settings.hybrid_resolve]):
    # impulses as first planned, drag re-planned every cycle; with drag_and_impulses it measured
    # 1.2-2.0 x the single solve (benchmarks/RESULTS.md [scenarios])
    assert spread_real["hybrid_resolve"].cfg.guidance.settings["resolve_mode"] == "drag_only"
    _check_realistic_resolve_dv(spread_real)


@pytest.mark.orekit
def test_realistic_pair_formation_is_passive_safe_after_the_deadline(pair_real):
    """With parallel relative e and i vectors the radial/normal separation never drops below
    min(a de, a di) ("Proximity operations of formation-flying spacecraft
    using an eccentricity/inclination vector separation", JGCD 29(3), 2006 [memory]); the target is
    300 m each. After the deadline both spacecraft hold the same attitude; allowed: the final e/i
    error of the re-solve (within 10 m, checked) and the J2 rotation of the e vector over the
    remaining half day (3.5 deg/day at 500 km SSO: 300 m x (1 - cos 1.8 deg) < 1 m)."""
    fl = pair_real["hybrid_resolve"]
    dep = fl.cfg.deputies[0]
    m = fl.metrics[dep.name]
    assert np.all(np.abs(m.final_error_m[2:]) <= 10.0), m.final_error_m
    log = fl.log
    t = np.asarray(log.get(f"spacecraft/{dep.name}/truth/t_s"))
    rc = np.asarray(log.get(f"spacecraft/{fl.cfg.chief.name}/truth/r_eci_m"))
    vc = np.asarray(log.get(f"spacecraft/{fl.cfg.chief.name}/truth/v_eci_mps"))
    rd = np.asarray(log.get(f"spacecraft/{dep.name}/truth/r_eci_m"))
    after = t >= dep.deadline_s
    assert t[-1] - dep.deadline_s >= 0.4 * 86400
    R = rc / np.linalg.norm(rc, axis=1)[:, None]
    N = np.cross(rc, vc)
    N /= np.linalg.norm(N, axis=1)[:, None]
    dr = rd - rc
    rn = np.hypot(np.sum(dr * R, 1), np.sum(dr * N, 1))[after]
    print(f"\nmin radial/normal separation after the deadline {rn.min():.1f} m; over the run "
          f"{m.min_rn_separation_m:.1f} m (monitor threshold {fl.cfg.events.min_rn_separation_m} m)")
    assert rn.min() >= 300.0 - 10.0 - 1.0 - 15.0  # 15 m: osculating vs mean (J2 short-period terms)
    assert not m.keep_out_violated and not m.rn_separation_violated


# ------------------------------------------------------------------------------------------
# The minimum-impulse-bit case found by these runs (guidance.planning.plan_deputy)
# ------------------------------------------------------------------------------------------


def test_sub_bit_correction_costs_at_most_one_bit_more():
    """A re-solve of spread_four_ideal at 0.5 d needed, besides its large late burns, one
    along-track correction of 0.9 minimum impulse bits. The minimum-bit rule moved it onto the
    large burns at 24.97-24.99 days and the plan cost 0.0497 m/s instead of 0.0170. The request
    here is that case with its fixed drag folded into the initial ROE (the planner is linear). A
    deliverable plan costs at most one bit more per sub-bit impulse than the plan without the
    rule (raise each to the bit), so the planner must not return more (common practice, no source)."""
    from dataclasses import replace

    from guidance.planning import PlanRequest, burn_grid, plan_deputy

    chief = np.array([6878107.599409623, 1.6342449546723008e-05, 0.0005001593937181761,
                      1.699981967634404, 5.419115258273065, 3.7686029819337503])
    a = chief[0]
    roe0 = np.array([-0.0315268, 149976.61082, 39.895254, -2.847600, -12.283127, 7.695576]) / a
    target = np.array([0.0, 150000.0, 0.0, -40.0, 0.0, -40.0]) / a
    tb = burn_grid(0.0, 43200.0, 2160000.0, 5684.3524907190995, 8, 60.0)
    dv_min = 1e-5
    req = PlanRequest(chief_oe=chief, t0_s=43200.0, deadline_s=2160000.0, roe0=roe0,
                      roe_target=target, burn_t_s=tb, dv_max_mps=0.05, dv_min_mps=dv_min)
    free = plan_deputy(replace(req, dv_min_mps=0.0))
    plan = plan_deputy(req)
    mags = np.linalg.norm(plan.dv_rtn_mps, axis=1)
    n_small_free = int(np.sum(np.linalg.norm(free.dv_rtn_mps, axis=1) < dv_min))
    assert n_small_free >= 1  # the case really has a sub-bit impulse
    assert np.all(mags >= dv_min * (1 - 1e-9))
    assert mags.sum() <= np.linalg.norm(free.dv_rtn_mps, axis=1).sum() + n_small_free * dv_min + 1e-9
    # the price: a miss of the fraction of a bit flown too much, metres in a-scaled ROE
    assert plan.status in ("ok", "degraded") and np.max(np.abs(plan.miss_m)) < 50.0

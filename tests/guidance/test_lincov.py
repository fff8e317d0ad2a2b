"""Checks of the linear covariance model (guidance.lincov), in the planner's own linear model.

What is checked against what:
- Performance bounds: the per-axis bound sqrt(chi2_n(p) P_ii) is the support function of the
  confidence ellipsoid {x: x^T P^-1 x <= chi2_n(p)} in direction e_i (Boyd & Vandenberghe, Convex
  Optimization, 2004, support function of an ellipsoid [memory for the section]); checked against
  a brute-force search over points of the ellipsoid surface (random points, then a random local
  search from the best), for uncorrelated, correlated and singular covariances. The ellipsoid holds
  the fraction p of Gaussian draws (the Mahalanobis norm of a Gaussian vector is chi-square with n
  degrees of freedom, e.g. Johnson & Wichern, Applied Multivariate Statistical Analysis, 2007,
  result 4.7 [memory for the number]); the count is held to a binomial 5-sigma band.
- Per source, a Monte Carlo of the plan in the planner's linear model (4000 draws, fixed seeds)
  through code paths other than the covariance formulas (the scalar reference functions
  guidance.dynamics.impulse_input / drag_segment_input, a Gauss-Markov process simulated on a
  fine grid, guidance's navigation chain nav_to_mean itself) reproduces each predicted variance:
  the ratio sample / predicted variance lies in the chi-square band of a sample variance,
  (N-1) s^2 / sigma^2 ~ chi2(N-1) (Cochran's theorem, e.g. Casella & Berger, Statistical
  Inference, 2002, Thm 5.3.1 [memory for the number]), two-sided at 1e-4 per axis. For the
  density, a wrong correlation model (a fully correlated scale error) falls outside that band,
  so the check can fail.
- The averaged Gauss-Markov correlation of two segments against scipy.integrate.dblquad, and the
  O(S) recursion of density_cov against the (S, S) correlation matrix.
- Consistency with the planner's own prediction (guidance.planning): a law's plan rebuilt by
  linear_plan_from_law has the plan's own drag w_mps2 and predicted final ROE; LinearPlan.after
  keeps the final ROE (semigroup property of the STM, common practice, no source).
- The navigation Jacobian gives the same 1-sigma as nav_to_mean's own linearised sigma.
- The re-solve cadence: the last re-solve is the last cycle that satisfies the law's own rule.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from scipy.signal import lfilter
from scipy.stats import chi2

from guidance import lincov as lc
from guidance.constants import R_EARTH_M
from guidance.density import differential_along_track_accel_mps2, relative_wind_speed_mps
from guidance.dynamics import drag_segment_input, impulse_input, stm_j2
from guidance.estimation import nav_to_mean
from guidance.interface import (
    AbsoluteEstimate,
    DeputyTarget,
    Mission,
    NavSolution,
    RelativeEstimate,
    SpacecraftCaps,
    ThrusterCaps,
)
from guidance.meanosc import mean_oe_to_rv
from guidance.planning import chief_period_s, propagate_chief, segment_grid
from guidance.registry import load_law
from guidance.roe import roe_to_oe, rtn_basis

A = R_EARTH_M + 500e3
CHIEF = np.array([A, 4e-4, -3e-4, np.radians(97.4), 0.3, 0.1])
N_MC = 4000


def var_band(n, alpha=1e-4):
    """Band of sample variance / true variance for n Gaussian draws (chi-square, scipy.stats)."""
    return chi2.ppf(alpha / 2, n - 1) / (n - 1), chi2.ppf(1 - alpha / 2, n - 1) / (n - 1)


def assert_cov_matches(samples, P, rel_floor=1e-9):
    lo, hi = var_band(samples.shape[0])
    S = np.cov(samples, rowvar=False)
    d = np.diag(P)
    live = d > rel_floor * d.max()
    ratio = np.diag(S)[live] / d[live]
    assert np.all((ratio > lo) & (ratio < hi)), (ratio, lo, hi)
    # axes the model says are untouched stay untouched in the samples too
    assert np.all(np.diag(S)[~live] <= 1e-6 * d.max())
    return ratio


def synthetic_plan(days=2.0, chief=CHIEF, seed=1):
    rng = np.random.default_rng(seed)
    T = days * 86400.0
    P = chief_period_s(chief)
    s0, s1 = segment_grid(0.0, 0.0, T, P, 4)
    duty = rng.uniform(0, 1, s0.size)
    b_lo, b_hi, b_ch = 2.2 * 0.01 / 4, 2.2 * 0.034 / 4, 2.2 * 0.02 / 4
    k = -0.5 * 5e-13 * 7600.0**2
    w = k * ((1 - duty) * b_lo + duty * b_hi - b_ch)
    sens = np.column_stack([k * (1 - duty) * b_lo, k * duty * b_hi, np.full(s0.size, -k * b_ch)])
    bt = np.sort(rng.uniform(0.05 * T, 0.95 * T, 5))
    dv = rng.normal(0, 0.01, (5, 3))
    return lc.LinearPlan("d1", np.asarray(chief, float), 0.0, T, np.array([0, 2000, 0, 100, 0, 100]) / A,
                         bt, dv, s0, s1, w, sens, ("d1/min_drag", "d1/max_drag", "chief/nominal"))


# ------------------------------------------------------------------------------------------
# bounds
# ------------------------------------------------------------------------------------------


def _psd_sqrt(P):
    w, V = np.linalg.eigh(P)
    return V * np.sqrt(np.clip(w, 0, None))


def _surface(P, k, rng, n=200_000):
    """Random points of the surface {x = sqrt(k) L z, |z| = 1}, L L^T = P, and their z."""
    z = rng.standard_normal((n, P.shape[0]))
    z /= np.linalg.norm(z, axis=1, keepdims=True)
    return np.sqrt(k) * z @ _psd_sqrt(P).T, z


def _brute_support(P, k, axis, rng, x, z, refine=3000):
    """max x_axis over the surface, by search only: the best random point, then a random local
    search on the sphere from it."""
    L = _psd_sqrt(P)
    best = z[np.argmax(x[:, axis])]
    val = np.max(x[:, axis])
    step = 0.1
    for _ in range(refine):  # random local search on the sphere
        cand = best + step * rng.standard_normal(best.size)
        cand /= np.linalg.norm(cand)
        v = np.sqrt(k) * (L @ cand)[axis]
        if v > val:
            best, val = cand, v
        else:
            step = max(step * 0.995, 1e-7)
    return float(np.max(x[:, axis])), float(val)


@pytest.mark.parametrize("kind", ["uncorrelated", "correlated", "singular"])
def test_bound_is_the_support_function_of_the_confidence_ellipsoid(kind):
    rng = np.random.default_rng({"uncorrelated": 1, "correlated": 2, "singular": 3}[kind])
    if kind == "uncorrelated":
        P = np.diag([4.0, 900.0, 1.0, 2.25, 0.25, 0.09])
    else:
        M = rng.standard_normal((6, 6 if kind == "correlated" else 3)) * np.array([1, 30, 1, 2, 0.5, 0.3])[:, None]
        P = M @ M.T
    p = 0.95
    k = chi2.ppf(p, 6)
    bound = lc.support_bounds(P, p)
    np.testing.assert_allclose(bound, np.sqrt(k * np.diag(P)), rtol=1e-14)
    x, z = _surface(P, k, rng)
    if kind != "singular":  # the sampled points lie on the surface x^T P^-1 x = k
        m2 = np.einsum("ki,ij,kj->k", x[:100], np.linalg.inv(P), x[:100])
        np.testing.assert_allclose(m2, k, rtol=1e-8)
    for axis in range(6):
        raw, refined = _brute_support(P, k, axis, rng, x, z)
        assert raw <= bound[axis] * (1 + 1e-12) and refined <= bound[axis] * (1 + 1e-12)
        assert refined >= bound[axis] * (1 - 1e-6), (axis, refined, bound[axis])
        assert raw >= 0.97 * bound[axis]
    # larger than the one-dimensional bound at the same p (chi2_6(0.95) = 12.59 vs chi2_1 = 3.84)
    assert np.all(bound[np.diag(P) > 0] > np.sqrt(chi2.ppf(p, 1) * np.diag(P))[np.diag(P) > 0])


def test_confidence_ellipsoid_holds_p_of_gaussian_draws():
    rng = np.random.default_rng(7)
    M = rng.standard_normal((6, 6))
    P = M @ M.T
    n = 20000
    x = rng.standard_normal((n, 6)) @ np.linalg.cholesky(P).T
    for p in (0.9, 0.99):
        k = lc.support_factor(p) ** 2
        inside = np.einsum("ki,ij,kj->k", x, np.linalg.inv(P), x) <= k
        assert abs(inside.mean() - p) < 5 * np.sqrt(p * (1 - p) / n)
        # every draw inside the ellipsoid is inside the per-axis box of the bounds
        assert np.all(np.abs(x[inside]) <= lc.support_bounds(P, p) * (1 + 1e-12))
    with pytest.raises(ValueError, match="confidence"):
        lc.support_factor(1.0)


# ------------------------------------------------------------------------------------------
# per-source Monte Carlo in the linear model
# ------------------------------------------------------------------------------------------


def test_thruster_magnitude_covariance_matches_a_linear_monte_carlo():
    plan = synthetic_plan()
    s, f = 0.03, 2e-5
    P = lc.thruster_magnitude_cov(plan, s, f)
    rng = np.random.default_rng(11)
    mag = np.linalg.norm(plan.dv_rtn_mps, axis=1)
    u = plan.dv_rtn_mps / mag[:, None]
    G = np.array([impulse_input(plan.chief_oe, t, plan.deadline_s) for t in plan.burn_t_s])  # (J,6,3)
    n1 = rng.standard_normal((N_MC, mag.size))
    n2 = rng.standard_normal((N_MC, mag.size))
    ddv = (mag * (1 + s * n1) + f * n2 - mag)[:, :, None] * u[None]  # executed minus commanded
    x = A * np.einsum("jik,njk->ni", G, ddv)
    assert_cov_matches(x, P)


@pytest.mark.parametrize("tau_s", [900.0, 86400.0])
def test_density_covariance_matches_a_simulated_gauss_markov_process(tau_s):
    plan = synthetic_plan(days=1.0)
    sigma, bias = 0.15, 0.1
    mean, P = lc.density_cov(plan, bias, sigma, tau_s)
    # the bias is a fixed scale on the planned drag: its effect is bias times the drag's effect
    g_ref = np.array([drag_segment_input(plan.chief_oe, a, b, plan.deadline_s)
                      for a, b in zip(plan.seg_t0_s, plan.seg_t1_s)])  # (S, 6), reference quadrature
    c = A * g_ref * plan.w_mps2[:, None]
    np.testing.assert_allclose(mean, bias * c.sum(axis=0), rtol=1e-9, atol=1e-12)
    # GM on a 10 s grid in its exact discretisation (stationary start), segment means by trapezoid
    dt = 10.0
    t = np.arange(0.0, plan.deadline_s + dt / 2, dt)
    phi = np.exp(-dt / tau_s)
    rng = np.random.default_rng(int(tau_s))
    q = sigma * np.sqrt(1 - phi * phi)
    xs = []
    for _ in range(N_MC // 1000):
        w = rng.standard_normal((1000, t.size))
        # gm_i = phi gm_(i-1) + q w_i with gm_0 = sigma w_0, as an AR(1) filter (scipy.signal)
        gm, _ = lfilter([q], [1.0, -phi], w, axis=1, zi=((sigma - q) * w[:, 0])[:, None])
        cum = np.concatenate([np.zeros((1000, 1)), np.cumsum(0.5 * dt * (gm[:, 1:] + gm[:, :-1]), axis=1)], axis=1)
        c0 = np.array([np.interp(plan.seg_t0_s, t, r) for r in cum])
        c1 = np.array([np.interp(plan.seg_t1_s, t, r) for r in cum])
        avg = (c1 - c0) / (plan.seg_t1_s - plan.seg_t0_s)
        xs.append(avg @ c)
    x = np.concatenate(xs)
    assert_cov_matches(x, P)
    # a wrong correlation model (the scale error fully correlated over the day) fails this check
    P_full = sigma**2 * np.outer(c.sum(axis=0), c.sum(axis=0))
    if tau_s == 900.0:
        lo, hi = var_band(N_MC)
        r = np.var(x[:, 1], ddof=1) / P_full[1, 1]
        assert not (lo < r < hi), r


@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")  # the kink at x = y
def test_segment_correlation_against_numerical_integration_and_the_recursion():
    tau = 1500.0
    s0 = np.array([0.0, 1000.0, 5000.0])
    s1 = np.array([800.0, 3000.0, 5600.0])
    R = lc.segment_correlation(s0, s1, tau)
    for i in range(3):
        for j in range(3):
            v, _ = integrate.dblquad(lambda y, x: np.exp(-abs(x - y) / tau), s0[i], s1[i], s0[j], s1[j],
                                     epsabs=1e-10, epsrel=1e-10)
            assert R[i, j] == pytest.approx(v / ((s1[i] - s0[i]) * (s1[j] - s0[j])), rel=1e-7)
    plan = synthetic_plan(days=1.0)
    _, P = lc.density_cov(plan, 0.0, 0.2, tau)
    c = A * plan.drag_effects() * plan.w_mps2[:, None]
    P_mat = 0.2**2 * c.T @ lc.segment_correlation(plan.seg_t0_s, plan.seg_t1_s, tau) @ c
    np.testing.assert_allclose(P, P_mat, rtol=1e-10, atol=1e-12 * np.abs(P).max())


def test_drag_area_covariance_matches_a_monte_carlo_of_the_area_factors():
    plan = synthetic_plan()
    sigma = 0.05
    P = lc.drag_area_cov(plan, sigma)
    rng = np.random.default_rng(5)
    eps = sigma * rng.standard_normal((N_MC, 3))
    # the synthetic plan's drag rebuilt from its physics with perturbed areas (same constants)
    duty = plan.area_sens_mps2[:, 1] / (plan.area_sens_mps2[:, 0] * 0.034 / 0.01 + plan.area_sens_mps2[:, 1])
    k = -0.5 * 5e-13 * 7600.0**2
    b_lo, b_hi, b_ch = 2.2 * 0.01 / 4, 2.2 * 0.034 / 4, 2.2 * 0.02 / 4
    w_pert = k * ((1 - duty) * b_lo * (1 + eps[:, :1]) + duty * b_hi * (1 + eps[:, 1:2])
                  - b_ch * (1 + eps[:, 2:3]))  # (N, S)
    g = np.array([drag_segment_input(plan.chief_oe, a, b, plan.deadline_s)
                  for a, b in zip(plan.seg_t0_s, plan.seg_t1_s)])
    x = A * (w_pert - plan.w_mps2) @ g
    ratio = assert_cov_matches(x, P)
    assert ratio.size == 5  # dix is untouched by along-track drag (its row of B is zero)


def _nav(chief, dr, dv, names):
    rc, vc = mean_oe_to_rv(chief)
    one = np.ones(3)
    deps = {n: RelativeEstimate(n, 0.0, r, v, one, one, 4.0) for n, r, v in zip(names, dr, dv)}
    return NavSolution(0.0, AbsoluteEstimate("chief", 0.0, rc, vc, one, one, 4.0), deps)


def test_navigation_covariance_matches_a_monte_carlo_through_the_navigation_chain():
    plan = synthetic_plan()
    sr, sv = np.array([0.01, 0.02, 0.01]), np.array([2e-4, 1e-4, 2e-4])
    P = lc.navigation_cov(plan, sr, sv)
    chief = plan.chief_oe
    rc, vc = mean_oe_to_rv(chief)
    C = rtn_basis(rc, vc)
    rd, vd = mean_oe_to_rv(roe_to_oe(chief, plan.roe0))
    x0 = np.concatenate([C @ (rd - rc), C @ (vd - vc)])
    rng = np.random.default_rng(3)
    n = 2000  # two batches: nav_to_mean is vectorised over deputies
    out = []
    for _ in range(N_MC // n):
        e = rng.standard_normal((n, 6)) * np.concatenate([sr, sv])
        x = x0 + e
        st = nav_to_mean(_nav(chief, x[:, :3], x[:, 3:], [f"s{i}" for i in range(n)]))
        ref = nav_to_mean(_nav(chief, [x0[:3]], [x0[3:]], ["ref"])).roe["ref"]
        d = np.array([st.roe[f"s{i}"] for i in range(n)]) - ref
        out.append(A * d @ stm_j2(chief, plan.deadline_s).T)  # planned from x0 + e: error -Phi e
    assert_cov_matches(np.concatenate(out), P)


def test_navigation_jacobian_gives_nav_to_mean_own_sigma():
    roe = np.array([0.0, 2000.0, 0.0, 100.0, 0.0, 100.0]) / A
    J = lc.relative_nav_jacobian(CHIEF, roe)
    s = np.array([0.01, 0.02, 0.03, 2e-4, 1e-4, 3e-4])
    rc, vc = mean_oe_to_rv(CHIEF)
    C = rtn_basis(rc, vc)
    rd, vd = mean_oe_to_rv(roe_to_oe(CHIEF, roe))
    nav = NavSolution(0.0, AbsoluteEstimate("chief", 0.0, rc, vc, np.ones(3), np.ones(3), 4.0),
                      {"d": RelativeEstimate("d", 0.0, C @ (rd - rc), C @ (vd - vc), s[:3], s[3:], 4.0)})
    st = nav_to_mean(nav)
    np.testing.assert_allclose(A * np.sqrt((J**2) @ s**2), st.sigma_roe_m["d"], rtol=1e-6)
    np.testing.assert_allclose(st.roe["d"], roe, atol=1e-9)


# ------------------------------------------------------------------------------------------
# the law's plan in the linear model
# ------------------------------------------------------------------------------------------

AREAS = {"max_drag": 0.034, "min_drag": 0.01, "nominal": 0.02}


def _mission(settings=None, deadline=2 * 86400.0):
    def caps(name, thr):
        return SpacecraftCaps(name, 4.0, 2.2, dict(AREAS), 120.0,
                              ThrusterCaps(0.05, 1e-4, 60.0, 0.2) if thr else None, "nominal")
    tgt = DeputyTarget("d1", np.array([0.0, -3000.0, 0.0, 20.0, 15.0, 0.0]), deadline)
    return Mission("2025-03-01T00:00:00Z", caps("chief", False), (caps("d1", True),), (tgt,), 5400.0,
                   settings or {})


def _nav0(chief=CHIEF, roe_m=(0.0,) * 6):
    rc, vc = mean_oe_to_rv(chief)
    C = rtn_basis(rc, vc)
    rd, vd = mean_oe_to_rv(roe_to_oe(chief, np.asarray(roe_m, float) / chief[0]))
    return NavSolution(0.0, AbsoluteEstimate("chief", 0.0, rc, vc, np.ones(3), np.full(3, 1e-3), 4.0),
                       {"d1": RelativeEstimate("d1", 0.0, C @ (rd - rc), C @ (vd - vc),
                                               np.full(3, 0.02), np.full(3, 5e-4), 4.0)})


@pytest.mark.parametrize("name", ["propulsion_only", "hybrid_single", "hybrid_resolve"])
def test_linear_plan_of_a_law_is_the_plan_the_law_flies(name):
    law = load_law(name)
    law.setup(_mission())
    law.step(0.0, _nav0())
    plan = law.deputies["d1"].plan
    lp = lc.linear_plan_from_law(law, "d1")
    # the drag rebuilt from its physics is the planner's own (weak_drag_margin = 1 by default)
    np.testing.assert_allclose(lp.w_mps2, plan.w_mps2, rtol=1e-12, atol=1e-20)
    # and the linear plan predicts what the planner predicts (guidance.planning's Plan.roe_final)
    np.testing.assert_allclose(lp.roe_at_deadline(), plan.roe_final, rtol=0, atol=1e-12)
    # area sensitivities: w is linear in the area factors, so w(1 + f) - w = sens @ f exactly
    a = float(plan.request.chief_oe[0])  # the chief as the law estimated it
    rho = float(law.density.density_kgpm3(a - R_EARTH_M))
    v = float(relative_wind_speed_mps(a, plan.request.chief_oe[3]))
    f = np.array([0.03, -0.02, 0.01][: lp.area_sens_mps2.shape[1]])
    b = {m: 2.2 * a / 4.0 for m, a in AREAS.items()}
    if law.PLAN_DRAG:
        d = plan.duty
        bd = (1 - d) * b["min_drag"] * (1 + f[0]) + d * b["max_drag"] * (1 + f[1])
        w_f = differential_along_track_accel_mps2(rho, v, bd, b["nominal"] * (1 + f[2]))
    else:
        w_f = differential_along_track_accel_mps2(rho, v, np.full(lp.w_mps2.size, b["nominal"] * (1 + f[0])),
                                                  b["nominal"] * (1 + f[1]))
    np.testing.assert_allclose(w_f - lp.w_mps2, lp.area_sens_mps2 @ f, rtol=1e-9, atol=1e-22)


def test_rest_of_a_plan_predicts_the_same_final_roe():
    chief = CHIEF.copy()
    chief[1:3] = 0.0  # circular chief: the piecewise STM is exactly the one-step STM
    law = load_law("hybrid_single")
    law.setup(_mission())
    law.step(0.0, _nav0(chief))
    plan = law.deputies["d1"].plan
    lp = lc.linear_plan_from_law(law, "d1")
    for t in (0.3 * 86400.0, 1.7 * 86400.0):
        rest = lp.after(t, plan.roe_at(t))
        assert rest.t0_s == t and np.all(rest.burn_t_s >= t - 1e-9) and np.all(rest.seg_t0_s >= t)
        np.testing.assert_array_equal(rest.chief_oe, propagate_chief(lp.chief_oe, t))
        np.testing.assert_allclose(rest.roe_at_deadline(), lp.roe_at_deadline(), rtol=0, atol=1e-11)


def test_last_resolve_time_follows_the_law_cadence():
    period = chief_period_s(CHIEF)
    T = 2 * 86400.0
    cycles = 5400.0 * np.arange(int(np.ceil(T / 5400.0)))
    for settings, step in (({}, 5400.0), ({"resolve_s": 4 * 5400.0}, 4 * 5400.0)):
        law = load_law("hybrid_resolve")
        law.setup(_mission(settings, deadline=T))
        law.step(0.0, _nav0())
        expected = max(t for t in np.arange(0.0, T, step) if t < T - period)
        assert lc.last_resolve_time(law, "d1", cycles) == expected
    # navigation invalid at that re-solve: the law re-solves at the next valid cycle instead
    # (its rule: at least resolve_s since the last re-solve), still before the freeze
    last = lc.last_resolve_time(law, "d1", cycles, valid=lambda t: t != expected)
    assert last == expected + 5400.0 and last < T - period
    single = load_law("hybrid_single")
    single.setup(_mission())
    single.step(0.0, _nav0())
    assert lc.last_resolve_time(single, "d1", cycles) is None


def test_dominant_source_and_combination():
    r1 = lc.SourceResult("navigation", "linear", np.diag([4.0, 1, 0, 0, 0, 0]))
    r2 = lc.SourceResult("density", "linear", np.diag([1.0, 9, 0, 0, 0, 0]), np.ones(6))
    P, m = lc.combine([r1, r2])
    np.testing.assert_array_equal(np.diag(P), [5, 10, 0, 0, 0, 0])
    np.testing.assert_array_equal(m, np.ones(6))
    names, share = lc.dominant_sources([r1, r2])
    assert names[:2] == ["navigation", "density"] and names[2] == ""
    np.testing.assert_allclose(share[:2], [0.8, 0.9])
    assert np.isnan(share[2])

"""Checks of the navigation error models (sim/navigation.py) and the random streams (sim/seeds.py).

Statistical checks compare sample statistics of the *logged* estimate errors with the configured
model within 3 standard errors of the estimator (sampling-error formulas named beside each check).
Truth states come from closed-form Keplerian circular orbits built here from orbital elements, so
frames and relative states are checked against an independent construction.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from guidance.constants import MU_EARTH_M3PS2 as MU
from sim.scenario.config import ErrorAxesConfig, NavErrorConfig, NavigationConfig
from sim.errors import ScenarioError
from sim.models.navigation import REALISTIC_NAVIGATION, ErrorProcess, NavigationModel, kepler_propagate
from sim.models.noise import source_key, stream

A_M = 6378137.0 + 500e3
N_RADPS = math.sqrt(MU / A_M**3)
DT = 10.0


def circ(t, a=A_M, i_deg=97.4, raan_deg=30.0, u0_deg=0.0):
    """Circular Keplerian orbit from elements: r, v (ECI) and the ECI->RTN matrix, built from the
    perifocal-type unit vectors P (ascending node) and Q (90 deg ahead in the orbit plane)."""
    i, o = math.radians(i_deg), math.radians(raan_deg)
    n = math.sqrt(MU / a**3)
    u = math.radians(u0_deg) + n * t
    p = np.array([math.cos(o), math.sin(o), 0.0])
    q = np.array([-math.sin(o) * math.cos(i), math.cos(o) * math.cos(i), math.sin(i)])
    rhat = math.cos(u) * p + math.sin(u) * q
    that = -math.sin(u) * p + math.cos(u) * q
    nhat = np.array([math.sin(o) * math.sin(i), -math.cos(o) * math.sin(i), math.cos(i)])
    return a * rhat, a * n * that, np.vstack((rhat, that, nhat))


DEPUTY = dict(a=A_M + 30.0, i_deg=97.4 + 2e-4, raan_deg=30.0 + 1e-4, u0_deg=-0.01)


def truth_at(t):
    rc, vc, _ = circ(t)
    rd, vd, _ = circ(t, **DEPUTY)
    return {"c": (rc, vc, 5.0), "d": (rd, vd, 4.0)}


def axes(white=0.0, bias=0.0, gm=0.0, tau=600.0):
    f = lambda x: tuple(np.broadcast_to(np.asarray(x, float), (3,)).tolist())  # noqa: E731
    return ErrorAxesConfig(white_sigma=f(white), bias_sigma=f(bias), gm_sigma=f(gm), gm_tau_s=f(tau))


def nav_cfg(ap=None, av=None, rp=None, rv=None, outages_abs=(), outages_rel=(), update_s=DT):
    z = axes()
    return NavigationConfig(
        perfect=False,
        absolute=NavErrorConfig(ap or z, av or z, update_s, tuple(outages_abs)),
        relative=NavErrorConfig(rp or z, rv or z, update_s, tuple(outages_rel)))


def run(cfg, seed, times):
    m = NavigationModel(cfg, seed, "c", ["d"])
    return [m.estimate(t, truth_at(t)) for t in times]


def lag1(x):
    x = x - x.mean()
    return float(np.dot(x[:-1], x[1:]) / np.dot(x, x))


# Large-sample sampling errors of a stationary series with autocorrelation function rho_k
# (Bartlett 1946; Brockwell & Davis, Time Series: Theory and Methods, 1991, sec. 7.2 [memory]):
#   var(sample variance) ~ (2 sigma^4 / n) sum_k rho_k^2,
#   var(r_1) ~ (1/n) sum_k (rho_{k+1}^2 + rho_{k-1} rho_{k+1} + 2 rho_1^2 rho_k^2 - 4 rho_1 rho_k rho_{k+1}),
# sums over all integers k. For white noise they give 2 sigma^4/n and 1/n; for a first-order
# Gauss-Markov (AR(1)) series (2 sigma^4/n)(1 + rho^2)/(1 - rho^2) and (1 - rho^2)/n.


def acf_white_plus_gm(white, gm, tau, kmax):
    """Autocorrelation at lags -kmax..kmax of white + exact discrete GM (sum of independent parts)."""
    k = np.arange(-kmax, kmax + 1)
    frac = gm**2 / (white**2 + gm**2)
    rho = frac * np.exp(-np.abs(k) * DT / tau)
    rho[k == 0] = 1.0
    return rho


def se_std(sigma, acf, n):
    """Standard error of the sample standard deviation: se(s^2) / (2 sigma)."""
    return sigma * math.sqrt(2.0 * np.sum(acf**2) / n) / 2.0


def se_lag1(acf, n):
    """Standard error of the lag-1 sample autocorrelation (Bartlett's formula)."""
    m = len(acf) // 2
    r = np.concatenate((np.zeros(2), acf, np.zeros(2)))  # r[j + m + 2] = rho_j
    rho = lambda j: r[np.asarray(j) + m + 2]  # noqa: E731
    k = np.arange(-m, m + 1)
    terms = rho(k + 1) ** 2 + rho(k - 1) * rho(k + 1) + 2 * rho(1) ** 2 * rho(k) ** 2 \
        - 4 * rho(1) * rho(k) * rho(k + 1)
    return math.sqrt(np.sum(terms) / n)


# ------------------------------------------------------------------------------------------
# Streams
# ------------------------------------------------------------------------------------------


def test_streams_reproducible_distinct_and_path_equivalent():
    a = stream(7, "nav/abs/c/pos/white").standard_normal(5)
    assert np.array_equal(a, stream(7, "nav/abs/c/pos/white").standard_normal(5))
    assert np.array_equal(a, stream(7, "nav", "abs", "c", "pos", "white").standard_normal(5))
    assert not np.array_equal(a, stream(8, "nav/abs/c/pos/white").standard_normal(5))
    assert not np.array_equal(a, stream(7, "nav/abs/c/pos/gm").standard_normal(5))
    # stable key: the CRC-32 (zlib) of each path component
    import zlib
    assert source_key("nav/abs") == (zlib.crc32(b"nav"), zlib.crc32(b"abs"))
    with pytest.raises(ScenarioError):
        stream(-1, "x")


# ------------------------------------------------------------------------------------------
# Long-run statistics of the logged errors
# ------------------------------------------------------------------------------------------

N_LONG = 20000
ABS_POS_WHITE = np.array([1.0, 2.0, 3.0])
ABS_VEL_GM = np.array([0.01, 0.02, 0.005])
ABS_VEL_TAU = np.array([300.0, 600.0, 1200.0])
REL_POS_BIAS = np.array([0.02, 0.01, 0.005])
REL_VEL_WHITE = np.array([2e-4, 1e-4, 1e-4])
REL_VEL_GM = np.array([2e-4, 3e-4, 1e-4])
REL_VEL_TAU = np.array([200.0, 400.0, 800.0])


@pytest.fixture(scope="module")
def long_run():
    cfg = nav_cfg(ap=axes(white=ABS_POS_WHITE), av=axes(gm=ABS_VEL_GM, tau=ABS_VEL_TAU),
                  rp=axes(bias=REL_POS_BIAS), rv=axes(white=REL_VEL_WHITE, gm=REL_VEL_GM, tau=REL_VEL_TAU))
    m = NavigationModel(cfg, 2024, "c", ["d"])
    out = {"ap": [], "av": [], "rp": [], "rv": [], "navs": [], "truth": []}
    for k in range(N_LONG):
        t = k * DT
        tr = truth_at(t)
        nav, rec = m.estimate(t, tr)
        out["ap"].append(rec["abs"]["c"]["dr_rtn_m"])
        out["av"].append(rec["abs"]["c"]["dv_rtn_mps"])
        out["rp"].append(rec["rel"]["d"]["ddr_rtn_m"])
        out["rv"].append(rec["rel"]["d"]["ddv_rtn_mps"])
        if k < 50:
            out["navs"].append((nav, rec))
            out["truth"].append(tr)
    return {k: (np.array(v) if k in ("ap", "av", "rp", "rv") else v) for k, v in out.items()}


def test_white_noise_sigma_per_axis(long_run):
    e = long_run["ap"]
    n = len(e)
    s = e.std(axis=0, ddof=1)
    # Standard error of the sample standard deviation of n independent normal samples:
    # sigma / sqrt(2 (n - 1)) (e.g. Kendall & Stuart, The Advanced Theory of Statistics [memory]).
    se = ABS_POS_WHITE / math.sqrt(2 * (n - 1))
    assert np.all(np.abs(s - ABS_POS_WHITE) < 3 * se), (s, ABS_POS_WHITE)
    assert np.all(np.abs(e.mean(axis=0)) < 3 * ABS_POS_WHITE / math.sqrt(n))
    # white: lag-1 autocorrelation 0 within 3/sqrt(n) (Bartlett's formula, rho = 0)
    for j in range(3):
        assert abs(lag1(e[:, j])) < 3 / math.sqrt(n)


def test_gauss_markov_sigma_and_time_constant(long_run):
    e = long_run["av"]
    n = len(e)
    rho = np.exp(-DT / ABS_VEL_TAU)
    s = e.std(axis=0, ddof=1)
    r1 = np.array([lag1(e[:, j]) for j in range(3)])
    for j in range(3):
        acf = acf_white_plus_gm(0.0, ABS_VEL_GM[j], ABS_VEL_TAU[j], int(40 * ABS_VEL_TAU[j] / DT))
        # configured sigma within 3 standard errors (Bartlett, above)
        assert abs(s[j] - ABS_VEL_GM[j]) < 3 * se_std(ABS_VEL_GM[j], acf, n), (j, s[j])
        # Exact discrete first-order Gauss-Markov: lag-1 autocorrelation exp(-dt/tau) (Gelb, Applied
        # Optimal Estimation, 1974 [memory for the section]); 3 standard errors plus the estimator's
        # O(1/n) bias, about (1 + 4 rho)/n (Marriott & Pope, Biometrika 1954 [memory]).
        se_r = se_lag1(acf, n)
        assert abs(se_r - math.sqrt((1 - rho[j] ** 2) / n)) < 1e-3 * se_r  # AR(1) closed form
        assert abs(r1[j] - rho[j]) < 3 * se_r + 5 / n, (j, r1[j], rho[j], se_r)
        # the implied time constant is the configured one, within the same sampling error
        tau_hat = -DT / math.log(r1[j])
        d_tau = ABS_VEL_TAU[j] * (3 * se_r + 5 / n) / (rho[j] * abs(math.log(rho[j])))
        assert abs(tau_hat - ABS_VEL_TAU[j]) < d_tau, (j, tau_hat)


def test_white_plus_gm_combined_sigma_and_correlation(long_run):
    e = long_run["rv"]
    n = len(e)
    sig = np.sqrt(REL_VEL_WHITE**2 + REL_VEL_GM**2)
    s = e.std(axis=0, ddof=1)
    r1 = np.array([lag1(e[:, j]) for j in range(3)])
    for j in range(3):
        acf = acf_white_plus_gm(REL_VEL_WHITE[j], REL_VEL_GM[j], REL_VEL_TAU[j],
                                int(40 * REL_VEL_TAU[j] / DT))
        assert abs(s[j] - sig[j]) < 3 * se_std(sig[j], acf, n), (j, s[j], sig[j])
        # lag-1 autocorrelation of white + GM: rho * gm^2 / (white^2 + gm^2)
        m = len(acf) // 2
        assert abs(r1[j] - acf[m + 1]) < 3 * se_lag1(acf, n) + 5 / n, (j, r1[j], acf[m + 1])


def test_bias_constant_over_run(long_run):
    e = long_run["rp"]
    assert np.all(e == e[0])  # bias only: exactly the same every epoch
    assert np.all(np.abs(e[0]) > 0)


def test_bias_distributed_normal_across_seeds():
    cfg = nav_cfg(rp=axes(bias=REL_POS_BIAS))
    tr = truth_at(0.0)
    b = np.array([NavigationModel(cfg, s, "c", ["d"]).estimate(0.0, tr)[1]["rel"]["d"]["ddr_rtn_m"]
                  for s in range(2000)])
    n = len(b)
    # mean within 3 sigma/sqrt(n); std within 3 sigma/sqrt(2(n-1)) (normal sampling errors)
    assert np.all(np.abs(b.mean(axis=0)) < 3 * REL_POS_BIAS / math.sqrt(n))
    assert np.all(np.abs(b.std(axis=0, ddof=1) - REL_POS_BIAS) < 3 * REL_POS_BIAS / math.sqrt(2 * (n - 1)))
    # normality: Kolmogorov-Smirnov on the standardised draws of each axis
    from scipy.stats import kstest
    for j in range(3):
        assert kstest(b[:, j] / REL_POS_BIAS[j], "norm").pvalue > 1e-3


def test_logged_errors_are_estimate_minus_truth_in_rtn(long_run):
    for (nav, rec), tr in zip(long_run["navs"], long_run["truth"]):
        t = rec["t_s"]
        rc, vc, mc = circ(t)
        rd, vd, _ = circ(t, **DEPUTY)
        e_r = mc @ (nav.chief.r_eci_m - rc)
        e_v = mc @ (nav.chief.v_eci_mps - vc)
        assert np.allclose(e_r, rec["abs"]["c"]["dr_rtn_m"], atol=1e-8)
        assert np.allclose(e_v, rec["abs"]["c"]["dv_rtn_mps"], atol=1e-11)
        rel = nav.deputies["d"]
        assert np.allclose(rel.dr_rtn_m - mc @ (rd - rc), rec["rel"]["d"]["ddr_rtn_m"], atol=1e-7)
        assert np.allclose(rel.dv_rtn_mps - mc @ (vd - vc), rec["rel"]["d"]["ddv_rtn_mps"], atol=1e-10)
        assert nav.valid and nav.chief.mass_kg == 5.0 and rel.mass_kg == 4.0


def test_stated_sigma_is_rss_of_configured_sigmas():
    ap = ErrorAxesConfig((1.0, 2.0, 0.5), (0.3, 0.0, 0.2), (0.4, 1.0, 0.0), (600.0, 600.0, 600.0))
    m = NavigationModel(nav_cfg(ap=ap), 1, "c", ["d"])
    nav, rec = m.estimate(0.0, truth_at(0.0))
    expect = np.sqrt(np.array([1.0, 4.0, 0.25]) + np.array([0.09, 0.0, 0.04]) + np.array([0.16, 1.0, 0.0]))
    assert np.allclose(nav.chief.sigma_r_rtn_m, expect, rtol=1e-14)
    assert np.allclose(nav.chief.sigma_v_rtn_mps, 0.0)


# ------------------------------------------------------------------------------------------
# Independence, reproducibility, call pattern
# ------------------------------------------------------------------------------------------

FULL = dict(ap=axes(1.0, 0.5, 1.0, 900.0), av=axes(0.01, 0.0, 0.005, 900.0),
            rp=axes(0.01, 0.002, 0.008, 600.0), rv=axes(2e-4, 1e-5, 1.5e-4, 600.0))
TIMES = [k * DT for k in range(0, 300, 3)]


def _arrays(recs, kind, name, key):
    return np.array([r[kind][name][key] for _, r in recs])


def test_switching_absolute_white_off_keeps_relative_draws():
    on = run(nav_cfg(**FULL), 5, TIMES)
    off = run(nav_cfg(**{**FULL, "ap": axes(0.0, 0.5, 1.0, 900.0)}), 5, TIMES)
    for key in ("ddr_rtn_m", "ddv_rtn_mps"):
        assert np.array_equal(_arrays(on, "rel", "d", key), _arrays(off, "rel", "d", key))
    # the other absolute sources are untouched too: off-on differs by exactly the white part
    assert np.array_equal(_arrays(on, "abs", "c", "dv_rtn_mps"), _arrays(off, "abs", "c", "dv_rtn_mps"))
    assert not np.array_equal(_arrays(on, "abs", "c", "dr_rtn_m"), _arrays(off, "abs", "c", "dr_rtn_m"))


def test_switching_relative_sources_off_keeps_absolute_draws():
    on = run(nav_cfg(**FULL), 5, TIMES)
    off = run(nav_cfg(**{**FULL, "rp": axes(), "rv": axes(0.0, 1e-5, 1.5e-4, 600.0)}), 5, TIMES)
    for name in ("c", "d"):
        for key in ("dr_rtn_m", "dv_rtn_mps"):
            assert np.array_equal(_arrays(on, "abs", name, key), _arrays(off, "abs", name, key))
    assert np.all(_arrays(off, "rel", "d", "ddr_rtn_m") == 0.0)


def test_same_seed_identical_different_seed_different():
    a = run(nav_cfg(**FULL), 11, TIMES)
    b = run(nav_cfg(**FULL), 11, TIMES)
    c = run(nav_cfg(**FULL), 12, TIMES)
    for kind, name, key in (("abs", "c", "dr_rtn_m"), ("abs", "d", "dv_rtn_mps"), ("rel", "d", "ddr_rtn_m")):
        assert np.array_equal(_arrays(a, kind, name, key), _arrays(b, kind, name, key))
        assert not np.any(_arrays(a, kind, name, key) == _arrays(c, kind, name, key))


def test_errors_at_an_epoch_do_not_depend_on_call_pattern():
    every = run(nav_cfg(**FULL), 3, [k * DT for k in range(200)])
    sparse = run(nav_cfg(**FULL), 3, [k * DT for k in range(0, 200, 37)])
    for j, (_, rec) in enumerate(sparse):
        k = int(round(rec["t_s"] / DT))
        for kind, name, key in (("abs", "c", "dr_rtn_m"), ("rel", "d", "ddv_rtn_mps")):
            assert np.array_equal(rec[kind][name][key], every[k][1][kind][name][key])


# ------------------------------------------------------------------------------------------
# Outages and propagation between fixes
# ------------------------------------------------------------------------------------------


def _twobody_ivp(x0, dt):
    """Newton's two-body problem integrated numerically (independent of the f-and-g propagator)."""
    def f(_, x):
        r = x[:3]
        return np.concatenate((x[3:], -MU * r / np.linalg.norm(r) ** 3))
    sol = solve_ivp(f, (0.0, dt), x0, method="DOP853", rtol=1e-13, atol=1e-7)
    return sol.y[:, -1]


def test_outage_no_fresh_fix_valid_false_estimate_propagated():
    out = (1000.0, 4000.0)
    cfg = nav_cfg(**FULL, outages_abs=[out], outages_rel=[out])
    m = NavigationModel(cfg, 9, "c", ["d"])
    times = [980.0, 990.0, 1000.0, 1500.0, 2500.0, 3990.0, 4000.0]
    res = {t: m.estimate(t, truth_at(t)) for t in times}
    nav_f, rec_f = res[990.0]
    assert nav_f.valid and rec_f["abs"]["c"]["t_fix_s"] == 990.0
    xc_f = np.concatenate((nav_f.chief.r_eci_m, nav_f.chief.v_eci_mps))
    tr_f = truth_at(990.0)
    rc_f, vc_f, mc_f = circ(990.0)
    # the deputy's estimated state at the fix, rebuilt in ECI from the relative estimate
    rel_f = nav_f.deputies["d"]
    xd_f = np.concatenate((rc_f + mc_f.T @ rel_f.dr_rtn_m, vc_f + mc_f.T @ rel_f.dv_rtn_mps))
    for t in (1000.0, 1500.0, 2500.0, 3990.0):
        nav, rec = res[t]
        assert not nav.valid and rec["abs_outage"] and rec["rel_outage"]
        assert rec["abs"]["c"]["t_fix_s"] == 990.0 and rec["rel"]["d"]["t_fix_s"] == 990.0
        # chief estimate = last fix propagated (two-body, numerical integration as the reference;
        # the truth here is Keplerian, so the only difference is second order in the error)
        dt = t - 990.0
        xc = _twobody_ivp(xc_f, dt)
        xc_true = _twobody_ivp(np.concatenate(tr_f["c"][:2]), dt)
        e_ref = xc - xc_true
        e_mod = np.concatenate((nav.chief.r_eci_m - truth_at(t)["c"][0],
                                nav.chief.v_eci_mps - truth_at(t)["c"][1]))
        assert np.allclose(e_mod[:3], e_ref[:3], atol=2e-3), (t, e_mod, e_ref)
        assert np.allclose(e_mod[3:], e_ref[3:], atol=2e-6)
        # relative estimate = deputy's last relative fix propagated, expressed in chief RTN at t
        xd = _twobody_ivp(xd_f, dt)
        xd_true = _twobody_ivp(np.concatenate(tr_f["d"][:2]), dt)
        _, _, mc = circ(t)
        rel = nav.deputies["d"]
        rd, vd, _ = circ(t, **DEPUTY)
        rc, vc, _ = circ(t)
        assert np.allclose(rel.dr_rtn_m - mc @ (rd - rc), mc @ (xd - xd_true)[:3], atol=2e-5)
        assert np.allclose(rel.dv_rtn_mps - mc @ (vd - vc), mc @ (xd - xd_true)[3:], atol=2e-8)
    # the error grows during the outage (velocity error -> along-track drift) and so does the stated sigma
    e_start = np.linalg.norm(rec_f["abs"]["c"]["dr_rtn_m"])
    e_end = np.linalg.norm(res[3990.0][1]["abs"]["c"]["dr_rtn_m"])
    assert e_end > e_start + 5.0
    s0 = rec_f["abs"]["c"]["sigma_r_rtn_m"]
    s1 = res[3990.0][1]["abs"]["c"]["sigma_r_rtn_m"]
    assert s1[1] > 10 * s0[1]
    # first fix after the outage: valid again, fresh, and the same draws as a run without outage
    nav_a, rec_a = res[4000.0]
    assert nav_a.valid and rec_a["abs"]["c"]["t_fix_s"] == 4000.0
    ref = NavigationModel(nav_cfg(**FULL), 9, "c", ["d"]).estimate(4000.0, truth_at(4000.0))[1]
    assert np.array_equal(rec_a["abs"]["c"]["dr_rtn_m"], ref["abs"]["c"]["dr_rtn_m"])
    assert np.array_equal(rec_a["rel"]["d"]["ddv_rtn_mps"], ref["rel"]["d"]["ddv_rtn_mps"])


def test_between_updates_estimate_is_last_fix_propagated():
    m = NavigationModel(nav_cfg(**FULL, update_s=30.0), 4, "c", ["d"])
    nav0, rec0 = m.estimate(60.0, truth_at(60.0))
    nav1, rec1 = m.estimate(75.0, truth_at(75.0))
    assert nav1.valid and rec1["abs"]["c"]["t_fix_s"] == 60.0
    x = _twobody_ivp(np.concatenate((nav0.chief.r_eci_m, nav0.chief.v_eci_mps)), 15.0)
    assert np.allclose(nav1.chief.r_eci_m, x[:3], atol=1e-3)
    assert np.allclose(nav1.chief.v_eci_mps, x[3:], atol=1e-6)


def test_outage_starting_at_zero_keeps_the_initial_fix():
    cfg = nav_cfg(**FULL, outages_abs=[(0.0, 100.0)])
    m = NavigationModel(cfg, 1, "c", ["d"])
    nav, rec = m.estimate(50.0, truth_at(50.0))
    assert not nav.valid and rec["abs"]["c"]["t_fix_s"] == 0.0 and rec["rel"]["d"]["t_fix_s"] == 50.0


def test_kepler_propagator_against_numerical_integration():
    r, v, _ = circ(0.0, a=A_M + 20e3)
    v = v * 1.001 + np.array([3.0, 0.0, 1.0])  # slightly eccentric
    for dt in (10.0, 2000.0, -700.0):
        ref = _twobody_ivp(np.concatenate((r, v)), dt)
        r1, v1 = kepler_propagate(r, v, dt)
        assert np.allclose(r1, ref[:3], atol=1e-4) and np.allclose(v1, ref[3:], atol=1e-7)


# ------------------------------------------------------------------------------------------
# Perfect navigation
# ------------------------------------------------------------------------------------------


def test_perfect_navigation_returns_truth_and_relative_state_in_chief_rtn():
    cfg = NavigationConfig(perfect=True, absolute=NavErrorConfig(axes(5.0), axes(0.1), 10.0, ((0.0, 1e5),)),
                           relative=REALISTIC_NAVIGATION.relative)
    m = NavigationModel(cfg, 1, "c", ["d", "e"])
    dr = np.array([12.0, -340.0, 56.0])
    dv = np.array([0.03, -0.01, 0.2])
    for t in (0.0, 1234.5, 5000.0):
        rc, vc, mc = circ(t, i_deg=51.6, raan_deg=-40.0, u0_deg=10.0)
        rd, vd, _ = circ(t, **DEPUTY)
        # deputy "e" placed from the RTN offsets with the independent element-built frame
        re_, ve_ = rc + mc.T @ dr, vc + mc.T @ dv
        nav, rec = m.estimate(t, {"c": (rc, vc, 5.0), "d": (rd, vd, 4.0), "e": (re_, ve_, 3.0)})
        assert nav.valid
        assert np.array_equal(nav.chief.r_eci_m, rc) and np.array_equal(nav.chief.v_eci_mps, vc)
        assert np.all(nav.chief.sigma_r_rtn_m == 0) and np.all(nav.deputies["e"].sigma_dv_rtn_mps == 0)
        assert np.allclose(nav.deputies["e"].dr_rtn_m, dr, atol=1e-8)
        assert np.allclose(nav.deputies["e"].dv_rtn_mps, dv, atol=1e-11)
        assert np.allclose(nav.deputies["d"].dr_rtn_m, mc @ (rd - rc), atol=1e-8)
        assert nav.deputies["e"].mass_kg == 3.0


# ------------------------------------------------------------------------------------------
# Bad input
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("cfg, key", [
    (nav_cfg(ap=ErrorAxesConfig(white_sigma=(-1.0, 0.0, 0.0))), "navigation.absolute.position_m.white_sigma"),
    (nav_cfg(rv=ErrorAxesConfig(gm_tau_s=(0.0, 1.0, 1.0))), "navigation.relative.velocity_mps.gm_tau_s"),
    (nav_cfg(update_s=0.0), "navigation.absolute.update_s"),
    (nav_cfg(outages_rel=[(50.0, 10.0)]), "navigation.relative.outages_s[0]"),
])
def test_bad_config_names_the_key(cfg, key):
    with pytest.raises(ScenarioError) as ei:
        NavigationModel(cfg, 1, "c", ["d"])
    assert ei.value.key == key


def test_time_must_not_go_backwards():
    m = NavigationModel(nav_cfg(**FULL), 1, "c", ["d"])
    m.estimate(100.0, truth_at(100.0))
    with pytest.raises(ValueError, match="must not decrease"):
        m.estimate(50.0, truth_at(50.0))


def test_error_process_rejects_going_back():
    p = ErrorProcess(axes(1.0), 10.0, 1, "x", "x")
    p.at(5)
    with pytest.raises(ValueError):
        p.at(4)


def test_gauss_markov_is_the_plain_recursion_bit_for_bit():
    # x[k] = phi x[k-1] + q w[k]: the first-order Gauss-Markov recursion (e.g. Brown & Hwang,
    # "Introduction to Random Signals and Applied Kalman Filtering", 4th ed., Wiley 2012, sec. 2.9);
    # the lfilter form must give the loop's numbers exactly (the logs depend on it)
    from sim.models.noise import gauss_markov

    rng = np.random.default_rng(7)
    for n in (1, 3, 9, 400):
        w = rng.standard_normal((n, 3))
        phi, q, x0 = np.array([0.9, 0.5, 0.99]), np.array([0.1, 1.0, 0.01]), rng.standard_normal(3)
        x, loop = x0.copy(), []
        for row in w:
            x = phi * x + q * row
            loop.append(x)
        assert np.array_equal(gauss_markov(x0, w, phi, q), np.array(loop))
        y, x1 = [], float(x0[0])
        for v in w[:, 0]:
            x1 = 0.9 * x1 + 0.1 * v
            y.append(x1)
        assert np.array_equal(gauss_markov(x0[0], w[:, 0], 0.9, 0.1), np.array(y))

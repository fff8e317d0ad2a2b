"""Checks of guidance.estimation.nav_to_mean: navigation estimate -> mean ROE and their 1-sigma.

References: the ROE definition (Koenig et al., JGCD 40(7), 2017, eq. 2); for the sigma, a Monte
Carlo of the same chain and the textbook two-body sensitivity of the semi-major axis,
a = 1/(2/r - v^2/mu): da = 2 dr_R + 2 dv_T / n for a circular orbit (vis-viva; common practice,
no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from guidance.constants import R_EARTH_M
from guidance.dynamics import mean_motion
from guidance.estimation import MeanRelativeState, nav_to_mean
from guidance.interface import AbsoluteEstimate, GuidanceInputError, NavSolution, RelativeEstimate
from guidance.meanosc import mean_oe_to_rv, rv_to_mean_oe
from guidance.roe import oe_to_roe, relative_rtn_to_eci, roe_to_oe, rtn_basis

CHIEF = np.array([R_EARTH_M + 500e3, 1e-4, 2e-4, np.radians(97.4), 0.3, 0.1])
ROE_M = {"d1": np.array([10.0, 200.0, 50.0, -30.0, 100.0, 20.0]),
         "d2": np.array([-300.0, -4000.0, 0.0, 400.0, 0.0, -400.0])}
SIG_R, SIG_V = np.full(3, 0.02), np.full(3, 5e-4)


def make_nav(chief=CHIEF, roe_m=ROE_M, valid=True):
    rc, vc = mean_oe_to_rv(chief)
    C = rtn_basis(rc, vc)
    deps = {}
    for name, r in roe_m.items():
        rd, vd = mean_oe_to_rv(roe_to_oe(chief, r / chief[0]))
        deps[name] = RelativeEstimate(name, 60.0, C @ (rd - rc), C @ (vd - vc), SIG_R, SIG_V, 4.0)
    chief_est = AbsoluteEstimate("chief", 60.0, rc, vc, np.full(3, 1.0), np.full(3, 1e-3), 4.0)
    return NavSolution(60.0, chief_est, deps, valid)


def test_recovers_the_mean_state_it_was_built_from():
    s = nav_to_mean(make_nav(valid=False))
    assert isinstance(s, MeanRelativeState)
    assert s.t_s == 60.0 and s.valid is False
    np.testing.assert_allclose(s.chief_oe[0], CHIEF[0], rtol=1e-13)
    np.testing.assert_allclose(s.chief_oe[1:], CHIEF[1:], atol=1e-12)
    for name, r in ROE_M.items():
        np.testing.assert_allclose(s.roe_m[name], r, atol=1e-5)  # m
        np.testing.assert_allclose(s.roe[name] * s.chief_oe[0], s.roe_m[name], rtol=1e-15)


def test_sigma_matches_monte_carlo_and_vis_viva():
    nav = make_nav()
    s = nav_to_mean(nav)
    rng = np.random.default_rng(11)
    n = 4000
    d = nav.deputies["d1"]
    dr = d.dr_rtn_m + rng.normal(size=(n, 3)) * SIG_R
    dv = d.dv_rtn_mps + rng.normal(size=(n, 3)) * SIG_V
    rd, vd = relative_rtn_to_eci(nav.chief.r_eci_m, nav.chief.v_eci_mps, dr, dv)
    roe = oe_to_roe(s.chief_oe, rv_to_mean_oe(rd, vd)) * s.chief_oe[0]
    mc = roe.std(axis=0)
    # 4000 samples: the sample std has 1.1 % relative 1-sigma; allow 5 %
    np.testing.assert_allclose(s.sigma_roe_m["d1"], mc, rtol=0.05)
    # vis-viva: sigma(a da) = sqrt((2 sigma_R)^2 + (2 sigma_vT / n)^2) for near-circular
    n_c = mean_motion(CHIEF[0])
    expected = np.hypot(2 * SIG_R[0], 2 * SIG_V[1] / n_c)
    assert s.sigma_roe_m["d1"][0] == pytest.approx(expected, rel=0.02)


def test_no_deputies():
    s = nav_to_mean(make_nav(roe_m={}))
    assert s.roe == {} and s.sigma_roe_m == {}
    assert s.chief_oe.shape == (6,)


def test_bad_navigation_input_is_a_clear_error():
    nav = make_nav()
    bad = NavSolution(nav.t_s, AbsoluteEstimate("chief", 0.0, np.array([np.nan, 0, 0]),
                                                nav.chief.v_eci_mps, SIG_R, SIG_V, 4.0),
                      nav.deputies)
    with pytest.raises(GuidanceInputError, match="nav.chief.r_eci_m"):
        nav_to_mean(bad)
    d = nav.deputies["d1"]
    bad_dep = RelativeEstimate("d1", 0.0, np.zeros(2), d.dv_rtn_mps, SIG_R, SIG_V, 4.0)
    with pytest.raises(GuidanceInputError, match="nav.deputies.d1.dr_rtn_m"):
        nav_to_mean(NavSolution(nav.t_s, nav.chief, {"d1": bad_dep}))
    far = RelativeEstimate("d1", 0.0, d.dr_rtn_m, d.dv_rtn_mps + [0, 5000.0, 0], SIG_R, SIG_V, 4.0)
    with pytest.raises(GuidanceInputError, match="nav.deputies.d1"):
        nav_to_mean(NavSolution(nav.t_s, nav.chief, {"d1": far}))
    hyperbolic = AbsoluteEstimate("chief", 0.0, nav.chief.r_eci_m, 2.0 * nav.chief.v_eci_mps,
                                  SIG_R, SIG_V, 4.0)
    with pytest.raises(GuidanceInputError, match="nav.chief"):
        nav_to_mean(NavSolution(nav.t_s, hyperbolic, {}))

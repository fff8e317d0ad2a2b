"""Checks of guidance.roe: the ROE definition, its inverse, and the two-body element conversions.

Sources: ROE definition of Koenig, Guffanti et al., "New State Transition Matrices for
Spacecraft Relative Motion in Perturbed Orbits", JGCD 40(7), 2017, eq. 2; osculating circular elements computed by Orekit 13.1
(``CircularOrbit``, stored in tests/data/meanosc_eckstein_hechler.npz by
scripts/make_meanosc_reference.py).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from guidance.constants import MU_EARTH_M3PS2, R_EARTH_M
from guidance.roe import (oe_to_roe, oe_to_rv, relative_rtn_to_eci, roe_to_oe, rtn_basis,
                          rv_to_oe, wrap_pi)

DATA = Path(__file__).resolve().parents[1] / "data" / "meanosc_eckstein_hechler.npz"


def classical_to_qns(a, e, i, raan, w, M):
    return np.array([a, e * np.cos(w), e * np.sin(w), i, raan, w + M])


def random_chiefs(rng, n):
    a = R_EARTH_M + rng.uniform(350e3, 900e3, n)
    e = rng.uniform(0.0, 0.02, n)
    w = rng.uniform(0, 2 * np.pi, n)
    return np.stack([a, e * np.cos(w), e * np.sin(w), np.radians(rng.uniform(20, 110, n)),
                     rng.uniform(0, 2 * np.pi, n), rng.uniform(0, 2 * np.pi, n)], axis=-1)


def test_roe_match_koenig_definition_for_known_element_differences():
    # Koenig et al. 2017 eq. 2, written out in classical elements:
    # da = (a_d - a_c)/a_c; dlambda = (M_d + w_d) - (M_c + w_c) + (O_d - O_c) cos i_c;
    # dex = e_d cos w_d - e_c cos w_c; dey = e_d sin w_d - e_c sin w_c; dix = i_d - i_c;
    # diy = (O_d - O_c) sin i_c.
    a, e, i, O, w, M = 6878137.0, 1.2e-3, np.radians(97.4), np.radians(40.0), np.radians(70.0), 1.1
    d = dict(a=350.0, e=-2e-4, i=np.radians(0.01), O=np.radians(-0.02), w=np.radians(3.0),
             M=np.radians(-2.9))
    chief = classical_to_qns(a, e, i, O, w, M)
    dep = classical_to_qns(a + d["a"], e + d["e"], i + d["i"], O + d["O"], w + d["w"], M + d["M"])
    expected = np.array([
        d["a"] / a,
        (M + d["M"] + w + d["w"]) - (M + w) + d["O"] * np.cos(i),
        (e + d["e"]) * np.cos(w + d["w"]) - e * np.cos(w),
        (e + d["e"]) * np.sin(w + d["w"]) - e * np.sin(w),
        d["i"],
        d["O"] * np.sin(i),
    ])
    np.testing.assert_allclose(oe_to_roe(chief, dep), expected, rtol=0, atol=1e-15)


def test_dlambda_wraps_across_zero_argument_of_latitude():
    # A deputy 1e-4 rad ahead of a chief at u = 2 pi - 5e-5 has u_d = 5e-5 after wrapping:
    # the along-track ROE must be the small angle (definition, Koenig et al. 2017 eq. 2).
    chief = np.array([6.9e6, 0, 0, 1.0, 0.5, 2 * np.pi - 5e-5])
    dep = chief.copy()
    dep[5] = 5e-5
    assert oe_to_roe(chief, dep)[1] == pytest.approx(1e-4, abs=1e-15)


def test_roe_to_oe_and_back_is_identity():
    rng = np.random.default_rng(1)
    chief = random_chiefs(rng, 200)
    roe = rng.normal(scale=5e3, size=(200, 6)) / chief[:, :1]  # up to ~20 km a-scaled
    back = oe_to_roe(chief, roe_to_oe(chief, roe))
    np.testing.assert_allclose(back, roe, rtol=0, atol=1e-12)
    dep = roe_to_oe(chief, roe)
    dep2 = roe_to_oe(chief, oe_to_roe(chief, dep))
    diff = dep2 - dep
    diff[:, 4:] = wrap_pi(diff[:, 4:])
    np.testing.assert_allclose(diff[:, 0] / dep[:, 0], 0, atol=1e-12)
    np.testing.assert_allclose(diff[:, 1:], 0, atol=1e-12)


def test_rv_round_trip():
    rng = np.random.default_rng(2)
    oe = random_chiefs(rng, 300)
    oe[:5, 1:3] = 0.0  # exactly circular
    r, v = oe_to_rv(oe)
    back = rv_to_oe(r, v)
    diff = back - oe
    diff[:, 4:] = wrap_pi(diff[:, 4:])
    np.testing.assert_allclose(diff[:, 0] / oe[:, 0], 0, atol=1e-12)
    np.testing.assert_allclose(diff[:, 1:], 0, atol=1e-11)
    r2, v2 = oe_to_rv(back)
    np.testing.assert_allclose(r2, r, rtol=0, atol=1e-5)  # m
    np.testing.assert_allclose(v2, v, rtol=0, atol=1e-8)  # m/s


def test_rv_to_oe_matches_orekit_circular_elements():
    # Orekit's osculating CircularOrbit (a, ex, ey, i, raan, alpha_M) of 528 states (same mu).
    d = np.load(DATA)
    assert float(d["mu_m3ps2"]) == MU_EARTH_M3PS2
    mine = rv_to_oe(d["r_osc_eci_m"], d["v_osc_eci_mps"])
    ref = d["osc_oe"]
    diff = mine - ref
    diff[:, 4:] = wrap_pi(diff[:, 4:])
    assert np.max(np.abs(diff[:, 0])) < 1e-6  # m (measured 1.2e-8 m)
    assert np.max(np.abs(diff[:, 1:])) < 1e-12  # (measured 1.4e-15)


def test_rtn_basis_and_relative_state():
    oe = np.array([6.9e6, 1e-3, 2e-4, np.radians(97.0), 0.3, 1.2])
    r, v = oe_to_rv(oe)
    C = rtn_basis(r, v)
    np.testing.assert_allclose(C @ C.T, np.eye(3), atol=1e-15)
    np.testing.assert_allclose(C[0], r / np.linalg.norm(r), atol=1e-15)
    h = np.cross(r, v)
    np.testing.assert_allclose(C[2], h / np.linalg.norm(h), atol=1e-15)
    assert C[1] @ v > 0.99 * np.linalg.norm(v)  # T is along the velocity for near-circular
    dr, dv = np.array([10.0, -200.0, 35.0]), np.array([0.01, -0.02, 0.05])
    rd, vd = relative_rtn_to_eci(r, v, dr, dv)
    np.testing.assert_allclose(C @ (rd - r), dr, atol=1e-8)
    np.testing.assert_allclose(C @ (vd - v), dv, atol=1e-12)

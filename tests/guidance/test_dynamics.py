"""Checks of guidance.dynamics: J2 STM, Keplerian STM, impulsive and drag input matrices.

Sources beside each check:
- secular J2 rates: Vallado, Fundamentals of Astrodynamics and Applications, 4th ed., 2013
  (argument of perigee 3/4 n J2 (Re/a)^2 (5 cos^2 i - 1)/(1-e^2)^2, RAAN -3/2 n J2 (Re/a)^2 cos i
  /(1-e^2)^2, mean anomaly n [1 + 3/4 J2 (Re/p)^2 sqrt(1-e^2) (3 cos^2 i - 1)]) [memory for the
  section];
- 500 km SSO check values [derived] from Koenig et al., JGCD 40(7), 2017, eqs. 14-16 with
  a = Re + 500 km, e = 0, i = 97.4 deg;
- impulsive input matrix: Gauss variational equations for near-circular orbits (Gaias et al.,
  JGCD 38(6), 2015), checked against a two-body impulse on the Cartesian state;
- drag: closed forms derived below from the same Gauss equations; orbit decay rate
  da/dt = -rho sqrt(mu a) Cd A/m and decay per revolution 2 pi (Cd A/m) rho a^2 (Vallado, drag
  section [memory]).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad_vec, solve_ivp

from guidance.constants import J2, MU_EARTH_M3PS2, R_EARTH_M, SECONDS_PER_DAY
from guidance.dynamics import (control_impulse, drag_segment_input, impulse_input,
                               j2_coefficients, mean_arg_latitude, mean_motion, stm_j2, stm_kepler)
from guidance.roe import oe_to_roe, oe_to_rv, roe_to_oe, rtn_basis, rv_to_oe

SSO500 = np.array([R_EARTH_M + 500e3, 0.0, 0.0, np.radians(97.4), 0.3, 0.7])
CHIEFS = [
    SSO500,
    np.array([R_EARTH_M + 450e3, 1e-3, -5e-4, np.radians(97.2), 1.0, 2.0]),
    np.array([R_EARTH_M + 400e3, 5e-3, 8e-3, np.radians(51.6), 0.3, 0.7]),
    np.array([R_EARTH_M + 700e3, -2e-3, 1e-2, np.radians(30.0), 4.0, 5.0]),
]


def vallado_rates(oe):
    """Secular J2 rates (rad/s) of w, raan and M (Vallado 2013), elements (a, ex, ey, i, ...)."""
    a, ex, ey, i = (float(x) for x in oe[:4])
    e2 = ex * ex + ey * ey
    n = np.sqrt(MU_EARTH_M3PS2 / a**3)
    f = n * J2 * (R_EARTH_M / a) ** 2 / (1 - e2) ** 2
    w_dot = 0.75 * f * (5 * np.cos(i) ** 2 - 1)
    raan_dot = -1.5 * f * np.cos(i)
    M_dot = n + 0.75 * f * np.sqrt(1 - e2) * (3 * np.cos(i) ** 2 - 1)
    return w_dot, raan_dot, M_dot


def secular_propagate(oe, tau_s):
    """Integrate the mean element rates numerically: (a, e, i) fixed, e-vector turns, raan, u."""
    w_dot, raan_dot, M_dot = vallado_rates(oe)

    def rhs(t, y):
        return [0.0, -w_dot * y[2], w_dot * y[1], 0.0, raan_dot, M_dot + w_dot]

    sol = solve_ivp(rhs, (0.0, tau_s), np.asarray(oe, float), method="DOP853", rtol=1e-13,
                    atol=1e-15)
    return sol.y[:, -1]


@pytest.mark.parametrize("chief", CHIEFS)
def test_secular_rates_equal_closed_form(chief):
    c = j2_coefficients(chief)
    w_dot, raan_dot, M_dot = vallado_rates(chief)
    assert c["w_dot"] == pytest.approx(w_dot, rel=1e-12)
    assert c["raan_dot"] == pytest.approx(raan_dot, rel=1e-12)
    assert c["u_dot"] == pytest.approx(M_dot + w_dot, rel=1e-12)
    # The STM's e-vector block is a rotation by w_dot tau.
    tau = 86400.0
    circ = np.r_[chief[0], 0, 0, chief[3:]]
    Phi = stm_j2(circ, tau)
    ang = vallado_rates(circ)[0] * tau
    np.testing.assert_allclose(Phi[2:4, 2:4], [[np.cos(ang), -np.sin(ang)],
                                               [np.sin(ang), np.cos(ang)]], atol=1e-13)


def test_sso_500km_check_values():
    # [derived] from Koenig et al. 2017 eqs. 14-16: n = 1.10678e-3 rad/s, kappa = 7.7277e-7 rad/s, e-vector rotation
    # -3.508 deg/day, RAAN +0.9854 deg/day, Phi21/tau = -1.65503e-3 1/s, a*dix = 100 m makes
    # a*diy drift 13.13 m/day.
    c = j2_coefficients(SSO500)
    assert c["n"] == pytest.approx(1.10678e-3, rel=1e-5)
    assert c["kappa"] == pytest.approx(7.7277e-7, rel=1e-4)
    assert np.degrees(c["w_dot"]) * SECONDS_PER_DAY == pytest.approx(-3.508, abs=5e-4)
    assert np.degrees(c["raan_dot"]) * SECONDS_PER_DAY == pytest.approx(0.9854, abs=5e-5)
    Phi = stm_j2(SSO500, SECONDS_PER_DAY)
    assert Phi[1, 0] / SECONDS_PER_DAY == pytest.approx(-1.65503e-3, rel=1e-5)
    roe_m = np.array([0, 0, 0, 0, 100.0, 0])
    assert (Phi @ roe_m)[5] == pytest.approx(13.13, abs=5e-3)
    # the SSO rate itself, 360 deg / 365.2422 d = 0.985609 deg/day (common practice): i = 97.4
    # deg at 500 km is sun-synchronous to 0.03 %
    assert np.degrees(c["raan_dot"]) * SECONDS_PER_DAY == pytest.approx(0.985609, rel=3e-4)


@pytest.mark.parametrize("chief", CHIEFS)
def test_j2_stm_equals_jacobian_of_secular_propagation(chief):
    # Independent check: propagate chief and deputy mean elements separately by integrating the
    # Vallado secular rates, difference them into ROE, and take the Jacobian by central
    # differences: it must equal Koenig's J2 STM (exact derivative of the same secular model).
    tau = 5 * SECONDS_PER_DAY
    c_f = secular_propagate(chief, tau)
    h = 1e-7  # dimensionless ROE step (0.7 m)
    J = np.empty((6, 6))
    for k in range(6):
        dp = np.zeros(6)
        dp[k] = h
        rp = oe_to_roe(c_f, secular_propagate(roe_to_oe(chief, dp), tau))
        rm = oe_to_roe(c_f, secular_propagate(roe_to_oe(chief, -dp), tau))
        J[:, k] = (rp - rm) / (2 * h)
    Phi = stm_j2(chief, tau)
    # round-off of the integration (1e-13 relative of ~1e3 rad of u) over 2h: ~1e-3 absolute
    # on the 1e3-sized Phi21; elsewhere far smaller
    np.testing.assert_allclose(J, Phi, rtol=0, atol=2e-5 * np.abs(Phi).max() + 1e-7)


def test_j2_stm_finite_roe_prediction_error_is_second_order():
    # 10 days, ROE of a few hundred metres: the STM's prediction error must be second order in
    # the separation (halving the ROE quarters it), measured against the secular propagation.
    chief = CHIEFS[2]
    tau = 10 * SECONDS_PER_DAY
    roe0 = np.array([50.0, 300.0, 200.0, -150.0, 250.0, -100.0]) / chief[0]
    c_f = secular_propagate(chief, tau)
    err = []
    for s in (1.0, 0.5):
        num = oe_to_roe(c_f, secular_propagate(roe_to_oe(chief, s * roe0), tau))
        err.append(np.abs(num - stm_j2(chief, tau) @ (s * roe0)).max() * chief[0])
    assert err[0] < 2.0  # m, of ~70 km of along-track drift
    assert err[1] / err[0] == pytest.approx(0.25, abs=0.02)


@pytest.mark.parametrize("chief", CHIEFS)
def test_stm_composition(chief):
    # Phi(t1 + t2) = Phi(t2; chief at t1) Phi(t1): the chief's e-vector has turned by w_dot t1.
    t1, t2 = 3 * SECONDS_PER_DAY, 5 * SECONDS_PER_DAY
    c1 = secular_propagate(chief, t1)
    lhs = stm_j2(chief, t1 + t2)
    rhs = stm_j2(c1, t2) @ stm_j2(chief, t1)
    np.testing.assert_allclose(lhs, rhs, rtol=0, atol=1e-9 * np.abs(lhs).max())
    lhs_k = stm_kepler(chief, t1 + t2)
    np.testing.assert_allclose(lhs_k, stm_kepler(chief, t2) @ stm_kepler(chief, t1), atol=1e-9)


def test_stm_vectorised_over_tau():
    taus = np.array([0.0, 100.0, -3000.0, 86400.0])
    batch = stm_j2(CHIEFS[1], taus)
    assert batch.shape == (4, 6, 6)
    np.testing.assert_allclose(batch[0], np.eye(6), atol=0)
    for k, t in enumerate(taus):
        np.testing.assert_array_equal(batch[k], stm_j2(CHIEFS[1], t))


def test_kepler_stm_against_two_body_drift():
    # Two-body: only the mean argument of latitude drifts, at sqrt(mu/a^3); linearised
    # dlambda drift -3/2 n da tau (first order in da).
    chief = CHIEFS[0]
    da = 20.0 / chief[0]
    tau = 2 * SECONDS_PER_DAY
    n_c, n_d = mean_motion(chief[0]), mean_motion(chief[0] * (1 + da))
    exact = (n_d - n_c) * tau
    pred = (stm_kepler(chief, tau) @ np.array([da, 0, 0, 0, 0, 0]))[1]
    assert pred == pytest.approx(exact, rel=5 * da)  # second-order term 15/8 da^2 n tau


@pytest.mark.parametrize("e", [0.0, 1e-4, 1e-3])
@pytest.mark.parametrize("u", [0.3, 2.0, 4.5])
def test_impulse_matrix_matches_two_body_impulse(e, u):
    # Gauss variational equations (Gaias et al. 2015) predict the change of osculating ROE of a
    # deputy that starts on the chief and gets an RTN impulse; the near-circular matrix neglects
    # O(e) terms, and the impulse response is linear to O(dv/v).
    chief = np.array([R_EARTH_M + 500e3, 0.6 * e, 0.8 * e, np.radians(97.4), 0.3, u])
    r, v = oe_to_rv(chief)
    C = rtn_basis(r, v)
    B = control_impulse(chief[0], chief[5])
    scale = 1e-3 / mean_motion(chief[0])  # a-scaled metres per 1 mm/s, 0.9 m
    for ax in range(3):
        dv = np.zeros(3)
        dv[ax] = 1e-3
        roe = oe_to_roe(chief, rv_to_oe(r, v + C.T @ dv))
        err = np.abs(roe - B @ dv).max() * chief[0]
        assert err <= (3.0 * e + 2e-6) * scale


def test_impulse_matrix_rows_and_batch():
    # The rows of the issue / Gaias et al. 2015, times 1/(n a).
    a, u = 7.0e6, 0.9
    na = mean_motion(a) * a
    expected = np.array([[0, 2, 0], [-2, 0, 0], [np.sin(u), 2 * np.cos(u), 0],
                         [-np.cos(u), 2 * np.sin(u), 0], [0, 0, np.cos(u)], [0, 0, np.sin(u)]]) / na
    np.testing.assert_allclose(control_impulse(a, u), expected, rtol=1e-15)
    batch = control_impulse(a, np.array([u, u + 1.0]))
    assert batch.shape == (2, 6, 3)
    np.testing.assert_allclose(batch[0], expected, rtol=1e-15)
    chief = CHIEFS[1]
    G = impulse_input(chief, 1000.0, 5000.0, t_ref_s=200.0)
    np.testing.assert_allclose(
        G, stm_j2(chief, 4000.0) @ control_impulse(chief[0], mean_arg_latitude(chief, 1000.0, 200.0)))


@pytest.mark.parametrize("orbits", [1, 3, 10])
def test_drag_segment_closed_form_whole_orbits(orbits):
    # Closed form with the Keplerian STM, derived from the Gauss equations for a constant
    # along-track a_T (row da: 2/(n a); row dlambda: no T term, drift -3/2 n da):
    #   da(t1)      = 2 a_T dt / (n a)
    #   dlambda(tf) = -3/2 n int_{t0}^{t1} da(tau->tf) = -(3 a_T / a) [dt^2/2 + dt (tf - t1)]
    #   dex, dey    = (2/(n a)) a_T int cos u, sin u = 0 over whole turns of u
    #   dix, diy    = 0.
    # "Whole orbits" are whole turns of the mean argument of latitude (period 2 pi / u_dot).
    chief = CHIEFS[1]
    a = chief[0]
    n = mean_motion(a)
    T_u = 2 * np.pi / j2_coefficients(chief)["u_dot"]
    t0 = 1234.0
    dt = orbits * T_u
    for tf_extra in (0.0, 7000.0):
        g = drag_segment_input(chief, t0, t0 + dt, t0 + dt + tf_extra, t_ref_s=0.0,
                               stm=stm_kepler)
        expected = np.array([2 * dt / (n * a), -(3 / a) * (dt**2 / 2 + dt * tf_extra),
                             0, 0, 0, 0])
        np.testing.assert_allclose(g[:2], expected[:2], rtol=1e-12)
        assert np.abs(g[2:]).max() < 1e-10 * np.abs(g[0])


def test_drag_segment_j2_against_adaptive_quadrature():
    # The composite Gauss-Legendre rule against scipy's adaptive quadrature of the same integrand.
    chief = CHIEFS[1]
    T = 2 * np.pi / mean_motion(chief[0])
    for t0, t1, tf in ((100.0, 100.0 + 0.3 * T, 100.0 + 2 * T), (0.0, 3.7 * T, 5 * T),
                       (500.0, 500.0 + 20 * T, 500.0 + 20 * T)):
        g = drag_segment_input(chief, t0, t1, tf, t_ref_s=50.0)
        ref = quad_vec(lambda tau: stm_j2(chief, tf - tau)
                       @ control_impulse(chief[0], mean_arg_latitude(chief, tau, 50.0))[:, 1],
                       t0, t1, epsabs=0, epsrel=1e-12, limit=5000)[0]
        np.testing.assert_allclose(g, ref, rtol=0, atol=1e-10 * np.abs(ref).max())
    assert np.all(drag_segment_input(chief, 10.0, 10.0, 20.0) == 0)


def test_drag_decay_rate_matches_textbook():
    # Differential da rate of a deputy with more drag equals the textbook decay rate difference
    # da/dt = -rho sqrt(mu a) (B_dep - B_chief) (Vallado [memory]), and per
    # revolution 2 pi dB rho a^2: with rho 5e-13 kg/m^3 at 500 km, Cd 2.2, 4 kg, areas 0.01 and
    # 0.034 m^2 [derived from the same formula: 0.82 and 2.78 m/rev decay].
    from guidance.density import differential_along_track_accel_mps2

    a = R_EARTH_M + 500e3
    chief = np.array([a, 0, 0, np.radians(97.4), 0, 0])
    rho, b_lo, b_hi = 5e-13, 2.2 * 0.01 / 4, 2.2 * 0.034 / 4
    v = np.sqrt(MU_EARTH_M3PS2 / a)
    aT = differential_along_track_accel_mps2(rho, v, b_hi, b_lo)
    T = 2 * np.pi / mean_motion(a)
    g = drag_segment_input(chief, 0.0, T, T, stm=stm_kepler)
    da_m = g[0] * aT * a
    assert da_m / T == pytest.approx(-rho * np.sqrt(MU_EARTH_M3PS2 * a) * (b_hi - b_lo), rel=1e-12)
    assert 2 * np.pi * b_lo * rho * a**2 == pytest.approx(0.82, abs=0.01)
    assert 2 * np.pi * b_hi * rho * a**2 == pytest.approx(2.78, abs=0.01)
    assert da_m == pytest.approx(-(2.78 - 0.82), abs=0.02)

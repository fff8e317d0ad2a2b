"""Checks of the actuator error models (sim/actuators.py).

Statistical checks: sample statistics of the executed-minus-commanded records against the configured
model, within 3 standard errors (normal sampling errors; Rayleigh moments). Bookkeeping: the rocket
equation (Tsiolkovsky: m0 / m1 = exp(dv / (Isp g0)), e.g. Sutton & Biblarz, Rocket Propulsion
Elements, ch. 4 [memory for the chapter]) to 1e-12 relative.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import kstest, rayleigh

from guidance.interface import GuidanceInputError, Impulse, ModeSwitch
from sim.models.actuators import G0_MPS2, ActuatorModel
from sim.models.geometry import mode_area_m2 as projected_area_m2
from sim.scenario.config import (ActuatorConfig, AttitudeModeConfig, BusConfig, GeometryConfig, PanelConfig,
                        ThrusterConfig)
from sim.errors import ScenarioError

MODES = {"nominal": AttitudeModeConfig("nominal", (0.0, 0.0, 0.0)),
         "max_drag": AttitudeModeConfig("max_drag", (0.0, 0.0, 90.0)),
         "min_drag": AttitudeModeConfig("min_drag", (0.0, 90.0, 0.0))}
BOX = GeometryConfig(kind="box", box_x_m=0.1, box_y_m=0.2, box_z_m=0.34)


def bus(thruster=ThrusterConfig(dv_max_per_burn_mps=0.05, min_impulse_bit_Ns=1e-4, isp_s=60.0,
                                propellant_kg=0.2), geometry=BOX, slew=120.0):
    return BusConfig("b", 5.0, slew_time_s=slew, geometry=geometry, modes=MODES, thruster=thruster)


def model(cfg, seed=1, b=None, mass=5.0, prop=0.2):
    b = b or bus()
    return ActuatorModel(cfg, seed, {"s": b}, {"s": mass}, {"s": prop})


def burns(n, mag, rng, t0=0.0, dt=100.0):
    """n commanded impulses of magnitude mag (scalar or array) in random directions."""
    u = rng.standard_normal((n, 3))
    u /= np.linalg.norm(u, axis=1)[:, None]
    mag = np.broadcast_to(mag, (n,))
    return [Impulse(t0 + k * dt, mag[k] * u[k]) for k in range(n)]


def execute_in_cycles(m, cmds, per_cycle=50):
    out = []
    for i in range(0, len(cmds), per_cycle):
        out += m.execute_impulses("s", cmds[i:i + per_cycle])
    return out


def angle(a, b):
    return math.atan2(np.linalg.norm(np.cross(a, b)), float(np.dot(a, b)))


BIG = ThrusterConfig(dv_max_per_burn_mps=0.05, min_impulse_bit_Ns=1e-6, isp_s=3000.0, propellant_kg=4.0)


# ------------------------------------------------------------------------------------------
# Execution statistics
# ------------------------------------------------------------------------------------------


def test_magnitude_error_proportional_plus_fixed():
    scale, fixed = 0.03, 1e-4
    cfg = ActuatorConfig(perfect=False, dv_scale_sigma=scale, dv_fixed_sigma_mps=fixed)
    rng = np.random.default_rng(0)
    for mag in (0.01, 0.035):
        m = model(cfg, seed=2, b=bus(BIG), prop=4.0)
        ex = execute_in_cycles(m, burns(20000, mag, rng))
        assert all(e.status == "executed" for e in ex)
        err = np.array([np.linalg.norm(e.dv_exec_rtn_mps) - mag for e in ex])
        sig = math.hypot(scale * mag, fixed)
        n = len(err)
        # normal sampling errors: mean sigma/sqrt(n), std sigma/sqrt(2(n-1))
        assert abs(err.mean()) < 3 * sig / math.sqrt(n)
        assert abs(err.std(ddof=1) - sig) < 3 * sig / math.sqrt(2 * (n - 1)), (mag, err.std(), sig)
        assert kstest(err / sig, "norm").pvalue > 1e-3
        # no pointing or time error configured: direction and time as commanded
        c = ex[7]
        assert angle(c.dv_cmd_rtn_mps, c.dv_exec_rtn_mps) < 1e-12 and c.t_exec_s == c.t_cmd_s


def test_pointing_angle_is_rayleigh_with_scale_sigma():
    sig_deg = 1.0
    sig = math.radians(sig_deg)
    m = model(ActuatorConfig(perfect=False, pointing_sigma_deg=sig_deg), b=bus(BIG), prop=4.0)
    ex = execute_in_cycles(m, burns(20000, 0.02, np.random.default_rng(1)))
    th = np.array([angle(e.dv_cmd_rtn_mps, e.dv_exec_rtn_mps) for e in ex])
    n = len(th)
    # Rayleigh(scale sigma): mean sigma sqrt(pi/2), variance (4 - pi)/2 sigma^2; theta^2 exponential
    # with mean 2 sigma^2 and variance 4 sigma^4 (standard results for the norm of a 2-D normal vector)
    assert abs(th.mean() - sig * math.sqrt(math.pi / 2)) < 3 * sig * math.sqrt((4 - math.pi) / 2 / n)
    assert abs(np.mean(th**2) - 2 * sig**2) < 3 * 2 * sig**2 / math.sqrt(n)
    assert kstest(th, rayleigh(scale=sig).cdf).pvalue > 1e-3
    # magnitude untouched by the pointing error
    mags = np.array([np.linalg.norm(e.dv_exec_rtn_mps) for e in ex])
    assert np.allclose(mags, 0.02, rtol=1e-12)


def test_execution_time_error_sigma():
    sig = 0.5
    m = model(ActuatorConfig(perfect=False, time_sigma_s=sig), b=bus(BIG), prop=4.0)
    ex = execute_in_cycles(m, burns(20000, 0.02, np.random.default_rng(2)))
    d = np.array([e.t_exec_s - e.t_cmd_s for e in ex])
    n = len(d)
    assert abs(d.mean()) < 3 * sig / math.sqrt(n)
    assert abs(d.std(ddof=1) - sig) < 3 * sig / math.sqrt(2 * (n - 1))
    # t_not_before_s keeps the execution inside the cycle
    m2 = model(ActuatorConfig(perfect=False, time_sigma_s=100.0), b=bus(BIG), prop=4.0)
    ex2 = m2.execute_impulses("s", burns(200, 0.02, np.random.default_rng(3), t0=1000.0, dt=0.0),
                              t_not_before_s=1000.0)
    assert min(e.t_exec_s for e in ex2) >= 1000.0


REALISTIC = ActuatorConfig(perfect=False, dv_scale_sigma=0.05, dv_fixed_sigma_mps=1e-4,
                           pointing_sigma_deg=2.0, time_sigma_s=0.2)


def test_min_impulse_bit_and_max_per_burn_never_violated():
    b = bus(ThrusterConfig(dv_max_per_burn_mps=0.05, min_impulse_bit_Ns=2e-4, isp_s=220.0, propellant_kg=1.0))
    m = model(REALISTIC, b=b, prop=1.0)
    rng = np.random.default_rng(4)
    mags = np.concatenate((rng.uniform(0.0, 1e-4, 500), rng.uniform(1e-4, 0.08, 3000)))
    rng.shuffle(mags)
    ex = execute_in_cycles(m, burns(len(mags), mags, rng), per_cycle=37)
    seen = set()
    for e, mag in zip(ex, mags):
        seen.add(e.status)
        dv = np.linalg.norm(e.dv_exec_rtn_mps)
        dv_min = 2e-4 / e.mass_before_kg
        if e.fired:
            assert dv_min * (1 - 1e-15) <= dv <= 0.05 * (1 + 1e-15), (mag, dv)
        else:
            assert dv == 0.0 and e.propellant_used_kg == 0.0
        if mag > 0.05:
            assert e.status == "clipped_max"
        elif mag < dv_min:
            assert e.status == "dropped_min_bit"
        else:
            assert e.status == "executed"
    assert seen == {"executed", "clipped_max", "dropped_min_bit"}


def test_rocket_equation_bookkeeping_exact():
    isp = 220.0
    b = bus(ThrusterConfig(dv_max_per_burn_mps=0.05, min_impulse_bit_Ns=1e-4, isp_s=isp, propellant_kg=0.5))
    m = model(REALISTIC, seed=8, b=b, mass=6.0, prop=0.5)
    ex = execute_in_cycles(m, burns(2000, 0.03, np.random.default_rng(5)))
    ve = isp * G0_MPS2
    assert G0_MPS2 == 9.80665
    mass, used, dv_sum = 6.0, 0.0, 0.0
    for e in ex:
        assert e.fired
        dv = np.linalg.norm(e.dv_exec_rtn_mps)
        assert e.mass_before_kg == pytest.approx(mass, rel=1e-12)
        after = e.mass_before_kg - e.propellant_used_kg
        assert e.mass_before_kg / after == pytest.approx(math.exp(dv / ve), rel=1e-12)
        mass, used, dv_sum = after, used + e.propellant_used_kg, dv_sum + dv
    assert m.mass_kg("s") == pytest.approx(6.0 * math.exp(-dv_sum / ve), rel=1e-12)
    assert m.propellant_kg("s") == pytest.approx(0.5 - used, rel=1e-12)
    assert m.mass_kg("s") - m.propellant_kg("s") == pytest.approx(5.5, rel=1e-12)


def test_burn_propellant_cannot_pay_for_is_dropped_and_logged():
    isp, mass, prop = 60.0, 5.0, 1e-3
    b = bus(ThrusterConfig(dv_max_per_burn_mps=0.05, min_impulse_bit_Ns=1e-4, isp_s=isp, propellant_kg=prop))
    m = model(ActuatorConfig(perfect=True), b=b, mass=mass, prop=prop)
    dv = np.array([0.0, 0.05, 0.0])
    ve = isp * G0_MPS2
    need1 = mass * (1 - math.exp(-0.05 / ve))  # 4.2e-4 kg
    need2 = (mass - need1) * (1 - math.exp(-0.05 / ve))
    ex = m.execute_impulses("s", [Impulse(10.0 * k, dv) for k in range(3)] + [Impulse(40.0, dv / 5)])
    assert [e.status for e in ex] == ["executed", "executed", "dropped_no_propellant", "executed"]
    assert ex[2].propellant_used_kg == 0.0 and np.all(ex[2].dv_exec_rtn_mps == 0.0)
    assert np.array_equal(ex[2].dv_cmd_rtn_mps, dv)  # the log keeps what was commanded
    left = prop - need1 - need2
    assert 0 < left < need2  # the third burn could not be paid for, the smaller fourth can
    assert ex[3].propellant_used_kg == pytest.approx((mass - need1 - need2) * (1 - math.exp(-0.01 / ve)),
                                                     rel=1e-12)
    assert m.propellant_kg("s") == pytest.approx(left - ex[3].propellant_used_kg, rel=1e-12)


def test_perfect_actuators_reproduce_commands_but_enforce_limits():
    cfg = ActuatorConfig(perfect=True, dv_scale_sigma=0.5, dv_fixed_sigma_mps=0.01, pointing_sigma_deg=10.0,
                         time_sigma_s=5.0, drag_area_sigma=0.3, attitude_sigma_deg=10.0)
    m = model(cfg)
    cmds = burns(100, np.linspace(0.001, 0.049, 100), np.random.default_rng(6))
    ex = m.execute_impulses("s", cmds)
    for c, e in zip(cmds, ex):
        assert e.status == "executed" and e.t_exec_s == c.t_s
        assert np.array_equal(e.dv_exec_rtn_mps, c.dv_rtn_mps)
    big = m.execute_impulses("s", [Impulse(1e5, np.array([0.1, 0.0, 0.0])),
                                   Impulse(1e5 + 1, np.array([1e-7, 0.0, 0.0]))])
    assert big[0].status == "clipped_max" and np.allclose(big[0].dv_exec_rtn_mps, [0.05, 0, 0], rtol=1e-15)
    assert big[1].status == "dropped_min_bit"
    sw = m.realise_switches("s", [ModeSwitch(10.0, "max_drag"), ModeSwitch(500.0, "min_drag")])
    assert [(s.t_start_s, s.t_end_s, s.area_factor) for s in sw] == [(10.0, 130.0, 1.0), (500.0, 620.0, 1.0)]
    assert m.area_factor_by_mode("s") == {"nominal": 1.0, "max_drag": 1.0, "min_drag": 1.0}


# ------------------------------------------------------------------------------------------
# Streams: reproducibility, order, independence
# ------------------------------------------------------------------------------------------


def _exec_arrays(ex):
    return np.array([np.concatenate((e.dv_exec_rtn_mps, [e.t_exec_s])) for e in ex])


def test_same_seed_identical_different_seed_different():
    cmds = burns(50, 0.02, np.random.default_rng(7))
    a = _exec_arrays(model(REALISTIC, seed=3).execute_impulses("s", cmds))
    b = _exec_arrays(model(REALISTIC, seed=3).execute_impulses("s", cmds))
    c = _exec_arrays(model(REALISTIC, seed=4).execute_impulses("s", cmds))
    assert np.array_equal(a, b)
    assert not np.any(a == c)


def test_draws_are_per_burn_in_order_whatever_the_cycle_split():
    cmds = burns(60, 0.02, np.random.default_rng(8))
    one = _exec_arrays(model(REALISTIC, seed=3).execute_impulses("s", cmds))
    split = _exec_arrays(execute_in_cycles(model(REALISTIC, seed=3), cmds, per_cycle=7))
    assert np.array_equal(one, split)


def test_switching_pointing_off_keeps_magnitude_and_time_draws():
    cmds = burns(100, 0.02, np.random.default_rng(9))
    on = model(REALISTIC, seed=5).execute_impulses("s", cmds)
    off_cfg = ActuatorConfig(perfect=False, dv_scale_sigma=0.05, dv_fixed_sigma_mps=1e-4,
                             pointing_sigma_deg=0.0, time_sigma_s=0.2)
    off = model(off_cfg, seed=5).execute_impulses("s", cmds)
    for a, b in zip(on, off):
        mag_a, mag_b = np.linalg.norm(a.dv_exec_rtn_mps), np.linalg.norm(b.dv_exec_rtn_mps)
        assert mag_a == pytest.approx(mag_b, rel=1e-14)
        assert a.t_exec_s == b.t_exec_s
        assert angle(b.dv_exec_rtn_mps, b.dv_cmd_rtn_mps) < 1e-12 < angle(a.dv_exec_rtn_mps, a.dv_cmd_rtn_mps)


# ------------------------------------------------------------------------------------------
# Attitude modes
# ------------------------------------------------------------------------------------------


def test_projected_area_of_box_modes_and_small_rotation():
    x, y, z = 0.1, 0.2, 0.34
    # velocity along body x, -y, +z for the three modes (rotation about Z by 90 deg, about Y by 90 deg)
    assert projected_area_m2(BOX, (0, 0, 0)) == pytest.approx(y * z, rel=1e-14)
    assert projected_area_m2(BOX, (0, 0, 90)) == pytest.approx(x * z, rel=1e-14)
    assert projected_area_m2(BOX, (0, 90, 0)) == pytest.approx(x * y, rel=1e-14)
    # a face-on box tilted by th about the orbit normal (VNC Y) shows A_x cos th + A_z sin th
    # (projection of a convex box: sum of face areas times |cos| of each face normal; closed form)
    th = math.radians(3.0)
    assert projected_area_m2(BOX, (0, 0, 0), (0.0, th, 0.0)) == pytest.approx(
        y * z * math.cos(th) + x * y * math.sin(th), rel=1e-12)
    # panels: a one-sided panel facing the flow counts A cos, facing away counts nothing
    g = GeometryConfig(kind="box", box_x_m=x, box_y_m=y, box_z_m=z,
                       panels=(PanelConfig(0.5, (1.0, 0.0, 0.0), double_sided=False),))
    assert projected_area_m2(g, (0, 0, 0), (0.0, th, 0.0)) == pytest.approx(
        (y * z + 0.5) * math.cos(th) + x * y * math.sin(th), rel=1e-12)
    assert projected_area_m2(g, (0, 0, 180)) == pytest.approx(y * z, rel=1e-12)


def test_switch_takes_slew_time_and_area_factor_per_mode():
    cfg = ActuatorConfig(perfect=False, drag_area_sigma=0.1)
    m = model(cfg, b=bus(slew=90.0))
    sw = m.realise_switches("s", [ModeSwitch(2000.0, "max_drag"), ModeSwitch(100.0, "min_drag"),
                                  ModeSwitch(5000.0, "max_drag")])
    assert [s.t_cmd_s for s in sw] == [100.0, 2000.0, 5000.0]
    assert all(s.t_end_s - s.t_start_s == 90.0 and s.t_start_s == s.t_cmd_s for s in sw)
    f = m.area_factor_by_mode("s")
    assert sw[1].area_factor == sw[2].area_factor == f["max_drag"] != f["min_drag"]
    # the per-mode factor does not depend on which modes were used before (stream per mode)
    m2 = model(cfg, b=bus(slew=90.0))
    assert m2.realise_switches("s", [ModeSwitch(0.0, "max_drag")])[0].area_factor == f["max_drag"]


def test_drag_area_factor_distributed_across_seeds():
    sig = 0.08
    cfg = ActuatorConfig(perfect=False, drag_area_sigma=sig)
    f = np.array([model(cfg, seed=s).area_factor_by_mode("s")["max_drag"] for s in range(3000)])
    n = len(f)
    assert abs(f.mean() - 1.0) < 3 * sig / math.sqrt(n)
    assert abs(f.std(ddof=1) - sig) < 3 * sig / math.sqrt(2 * (n - 1))


def test_attitude_error_changes_ram_area_table_cosine_statistics():
    sig_deg = 2.0
    sig = math.radians(sig_deg)
    g = GeometryConfig(kind="table", area_by_mode_m2={"nominal": 0.03, "max_drag": 0.07, "min_drag": 0.02})
    b = BusConfig("t", 5.0, geometry=g, thruster=None)
    m = ActuatorModel(ActuatorConfig(perfect=False, attitude_sigma_deg=sig_deg), 1, {"s": b}, {}, {})
    sw = m.realise_switches("s", [ModeSwitch(float(k), "max_drag") for k in range(5000)])
    f = np.array([s.area_factor for s in sw])
    assert np.all(f <= 1.0)
    # cos of the ram-axis tilt; small angles: 1 - f ~ tilt^2 / 2 with tilt^2 ~ sigma^2 chi^2_2, so
    # E[1 - f] = sigma^2 and sd(1 - f) = sigma^2 (exponential distribution)
    n = len(f)
    assert abs(np.mean(1 - f) - sig**2) < 3 * sig**2 / math.sqrt(n) + sig**4
    # and the rotation vector drawn has the configured sigma per axis
    eps = np.array([s.attitude_error_rad for s in sw])
    assert np.all(np.abs(eps.std(axis=0, ddof=1) - sig) < 3 * sig / math.sqrt(2 * (n - 1)))


def test_attitude_error_box_factor_matches_projection():
    m = model(ActuatorConfig(perfect=False, attitude_sigma_deg=3.0))
    for s in m.realise_switches("s", [ModeSwitch(float(k), "min_drag") for k in range(20)]):
        a0 = projected_area_m2(BOX, MODES["min_drag"].rotation_xyz_deg)
        a1 = projected_area_m2(BOX, MODES["min_drag"].rotation_xyz_deg, s.attitude_error_rad)
        assert s.attitude_factor == pytest.approx(a1 / a0, rel=1e-14)
        assert s.attitude_factor > 1.0  # a tilted end-on box shows more of its sides


# ------------------------------------------------------------------------------------------
# Bad input
# ------------------------------------------------------------------------------------------


def test_bad_commands_and_config():
    m = model(REALISTIC)
    with pytest.raises(GuidanceInputError) as ei:
        m.execute_impulses("s", [Impulse(0.0, np.array([np.nan, 0.0, 0.0]))])
    assert ei.value.key == "commands.s.impulses[0]"
    with pytest.raises(GuidanceInputError) as ei:
        m.realise_switches("s", [ModeSwitch(0.0, "sideways")])
    assert ei.value.key == "commands.s.mode_switches[0].mode"
    with pytest.raises(ScenarioError) as es:
        model(ActuatorConfig(perfect=False, pointing_sigma_deg=-1.0))
    assert es.value.key == "actuators.pointing_sigma_deg"
    with pytest.raises(ScenarioError):
        model(REALISTIC, prop=6.0)  # more propellant than mass


def test_no_thruster_burns_are_dropped():
    m = model(REALISTIC, b=bus(thruster=None), prop=0.0)
    ex = m.execute_impulses("s", [Impulse(0.0, np.array([0.0, 0.01, 0.0]))])
    assert ex[0].status == "dropped_no_thruster" and m.mass_kg("s") == 5.0

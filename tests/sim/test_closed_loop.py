"""Closed-loop behaviour: the engine, the run log and the metrics, checked from the logged data.

Most checks fly the Keplerian stand-in truth (``fake_truth`` of tests/conftest.py) with tiny laws
defined here, so thousands of guidance cycles run in seconds; the reproducibility and switch
checks fly the real Orekit truth for a fraction of a day (``@pytest.mark.orekit``).

Sources of the checks:
- Gauss-Markov lag-1 autocorrelation ``exp(-dt/tau)`` and the stationary variance: Gelb (ed.),
  Applied Optimal Estimation, MIT Press 1974, ch. 4 [memory].
- Sampling errors of correlated Gaussian series (Bartlett 1946 [memory]): variance of the mean
  ``sigma^2 / N sum_k rho_k``, of the mean square ``2 sigma^4 / N sum_k rho_k^2`` (k over all
  integers), and of a lag-h autocorrelation estimate
  ``1/N sum_{k>=1} (rho_{k+h} + rho_{k-h} - 2 rho_h rho_k)^2``, with the model's autocorrelation
  rho_k of white noise plus Gauss-Markov; of a sample standard deviation of n independent normals
  ``sigma / sqrt(2 n)``.
- Rayleigh distribution of the angle between two directions when the error has two independent
  normal components of 1-sigma s: mean ``s sqrt(pi / 2)``, variance ``(4 - pi) / 2 s^2``
  (standard textbook result [memory]); Kolmogorov-Smirnov test against its CDF (scipy.stats).
- Rocket equation ``m_used = m (1 - exp(-dv / (Isp g0)))``, g0 = 9.80665 m/s^2 (CGPM 1901).
- Everything else (failed-run contents, exit codes, reproducibility, what is logged): covey's own
  contract (common practice, no source).

Bounds: statistics are checked within 4 standard errors (many checks in one family: at 4 sigma
the chance that one of ~40 fails by chance is about 0.3 %); the seeds are fixed, so a failure is
reproducible.
"""

from __future__ import annotations

import math
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from guidance.interface import Diagnostics, GuidanceOutput, Impulse, ModeSwitch, SpacecraftCommand
from sim.models.frames import relative_rtn
from sim.log.diff import WALL_CLOCK_ATTRS, diff_logs, log_items
from sim.log.reader import read_log
from sim.loop.run import run_scenario
from sim.scenario.reader import load_scenario

THIS = "tests.sim.test_closed_loop"
REPO = Path(__file__).resolve().parents[2]
NSIG = 4.0


# ------------------------------------------------------------------------------------------
# Tiny laws (imported by the engine through "tests.sim.test_closed_loop:ClassName")
# ------------------------------------------------------------------------------------------


class HoldLaw:
    """Commands nothing."""

    def setup(self, mission):
        self.mission = mission

    def step(self, t_s, nav):
        return GuidanceOutput({}, Diagnostics(status="hold"))


class RaisingLaw:
    """Commands one small burn per deputy per cycle, then misbehaves at ``fail_at_s``.

    Settings: ``fail_at_s`` (s), ``how``: ``"raise"``, ``"nan"`` (NaN delta-v), ``"mode"`` (unknown
    attitude mode), ``"past"`` (impulse before the cycle time), ``"type"`` (returns a dict),
    ``"diagnostics"`` (None for diagnostics), ``"bare_impulse"`` (an Impulse, not a tuple of them),
    ``"solve_time"`` (a string for the solve time).
    """

    def setup(self, mission):
        self.mission = mission
        self.fail_at_s = float(mission.settings.get("fail_at_s", 3 * mission.cycle_s))
        self.how = str(mission.settings.get("how", "raise"))
        if self.how == "setup":
            raise RuntimeError("no such thing\n(second line)")

    def _ok(self, t_s):
        cmds = {d.name: SpacecraftCommand(d.name, impulses=(Impulse(t_s + 5.0, np.array([0.0, 1e-3, 0.0])),))
                for d in self.mission.deputies}
        return GuidanceOutput(cmds, Diagnostics(status="ok", message=f"cycle at {t_s:.0f} s"))

    def step(self, t_s, nav):
        if t_s < self.fail_at_s - 1e-6:
            return self._ok(t_s)
        name = self.mission.deputies[0].name
        if self.how == "raise":
            return self._explode(t_s)
        if self.how == "nan":
            bad = SpacecraftCommand(name, impulses=(Impulse(t_s + 5.0, np.array([np.nan, 0.0, 0.0])),))
        elif self.how == "mode":
            bad = SpacecraftCommand(name, mode_switches=(ModeSwitch(t_s + 5.0, "sideways"),))
        elif self.how == "past":
            bad = SpacecraftCommand(name, impulses=(Impulse(t_s - 100.0, np.array([0.0, 1e-3, 0.0])),))
        elif self.how == "type":
            return {"commands": {}}
        elif self.how == "diagnostics":
            return GuidanceOutput({}, None)
        elif self.how == "bare_impulse":
            bad = SpacecraftCommand(name, impulses=Impulse(t_s + 5.0, np.zeros(3)))
        elif self.how == "solve_time":
            return GuidanceOutput({}, Diagnostics(solve_time_s="fast"))
        else:
            raise AssertionError(self.how)
        return GuidanceOutput({name: bad}, Diagnostics(status="ok"))

    def _explode(self, t_s):
        raise RuntimeError(f"deliberate failure at t = {t_s:.0f} s\n(second line of the message)")


class BurnLaw:
    """Commands seven burns per deputy per cycle of known delta-v, plus a mode switch per cycle.

    Burns at ``t + OFFSET[k] * c`` (cycle time t, cycle length c): ``A`` 1 mm/s along +T, ``B``
    30 mm/s along a fixed oblique direction, ``C`` exactly the per-burn maximum along -T, ``D`` 1.6 x
    the maximum (clipped), ``E`` 1.5 x the minimum impulse bit, ``F`` half the minimum impulse bit
    (dropped), ``G`` 1 mm/s 0.25 s before the cycle ends (its time error often pushes it past the
    cycle end). The deputies alternate max_drag / min_drag, switching at t + c/16.
    """

    OFFSET = {"A": 1 / 8, "B": 2 / 8, "C": 3 / 8, "D": 4 / 8, "E": 5 / 8, "F": 6 / 8, "G": 0.975}
    DIR = {"A": (0, 1, 0), "B": (0.3, -0.5, 0.8), "C": (0, -1, 0), "D": (0.3, -0.5, 0.8), "E": (0, 1, 0),
           "F": (0, 1, 0), "G": (1, 0, 0)}

    def setup(self, mission):
        self.mission = mission
        self.k = 0

    @staticmethod
    def magnitudes(caps):
        th = caps.thruster
        dmin = th.min_impulse_bit_Ns / caps.mass_kg
        return {"A": 1e-3, "B": 0.03, "C": th.dv_max_per_burn_mps, "D": 1.6 * th.dv_max_per_burn_mps,
                "E": 1.5 * dmin, "F": 0.5 * dmin, "G": 1e-3}

    def step(self, t_s, nav):
        c = self.mission.cycle_s
        cmds = {}
        for caps in self.mission.deputies:
            m = self.magnitudes(caps)
            imps = tuple(Impulse(t_s + self.OFFSET[k] * c, m[k] * np.asarray(self.DIR[k], float)
                                 / np.linalg.norm(self.DIR[k])) for k in self.OFFSET)
            mode = "max_drag" if self.k % 2 == 0 else "min_drag"
            cmds[caps.name] = SpacecraftCommand(caps.name, mode_switches=(ModeSwitch(t_s + c / 16, mode),),
                                                impulses=imps)
        self.k += 1
        return GuidanceOutput(cmds, Diagnostics(status="ok"))


# ------------------------------------------------------------------------------------------
# Helpers
# ------------------------------------------------------------------------------------------


def _demo(repo_root, **over):
    return load_scenario(repo_root / "scenarios/demo_formation.toml", over)


_FAKE_WORLD = []


def _fake_world_class():
    """The fake truth of tests/conftest.py (behind the fake_truth fixture), remembering its
    instances so a test can read what the engine loaded into it. Imported late: this module is
    also imported by the engine, to load the laws above."""
    if not _FAKE_WORLD:
        from conftest import FakeTruthWorld

        class FakeWorld(FakeTruthWorld):
            instances: list = []

            def __init__(self, *a, **k):
                super().__init__(*a, **k)
                FakeWorld.instances.append(self)

        _FAKE_WORLD.append(FakeWorld)
    return _FAKE_WORLD[0]


def _str(a):
    return [x.decode() if isinstance(x, bytes) else str(x) for x in np.asarray(a).reshape(-1)]


# ------------------------------------------------------------------------------------------
# A law that raises or answers badly mid-run (covey's own contract, common practice, no source)
# ------------------------------------------------------------------------------------------

FAIL_CASES = {
    "raise": ("step() raised RuntimeError: deliberate failure at t = 16200 s (second line",),
    "nan": ("commands['beta'].impulses[0].dv_rtn_mps", "nan", "3 finite numbers in m/s"),
    "mode": ("commands['beta'].mode_switches[0].mode = 'sideways'", "one of ['max_drag', 'min_drag', 'nominal']"),
    "past": ("commands['beta'].impulses[0].t_s = 16100.000 s is before the cycle time",),
    "type": ("step() returned dict, expected GuidanceOutput",),
    "diagnostics": ("GuidanceOutput.diagnostics is NoneType, expected Diagnostics",),
    "bare_impulse": ("commands['beta'].impulses is Impulse, expected a tuple",),
    "solve_time": ("diagnostics.solve_time_s = 'fast': a finite number in s",),
}


@pytest.mark.parametrize("how", sorted(FAIL_CASES))
def test_bad_law_fails_run_and_keeps_data(tmp_path, repo_root, fake_truth, how):
    cycle = 5400.0
    t_fail = 3 * cycle
    cfg = _demo(repo_root, **{"run.duration_days": 1.0, "guidance.law": f"{THIS}:RaisingLaw",
                              "guidance.settings.how": how, "guidance.settings.fail_at_s": t_fail})
    s = run_scenario(cfg, tmp_path / "f.h5")
    assert s.status == "failed" and s.exit_code == 1 and s.t_end_s == t_fail
    assert "\n" not in s.reason and "GuidanceFailure" in s.reason and "t = 16200.0 s" in s.reason
    for part in FAIL_CASES[how]:
        assert part in s.reason, (part, s.reason)
    log = read_log(s.path)
    assert log.status == "failed" and log.reason == s.reason and log.meta["t_end_s"] == t_fail
    tb = log.get("meta/traceback")
    assert "GuidanceFailure" in tb
    if how == "raise":  # the law's own frames and exception, through the exception chain
        assert "in _explode" in tb and "RuntimeError: deliberate failure at t = 16200 s" in tb
    else:
        assert "check_output" in tb
    # everything up to the failing cycle is kept
    t = log.get("spacecraft/alpha/truth/t_s")
    assert np.allclose(t, np.arange(0.0, t_fail + 1.0, cfg.log_step_s))
    for name in ("beta", "gamma"):
        assert np.array_equal(log.get(f"spacecraft/{name}/truth/t_s"), t)
        assert log.get(f"spacecraft/{name}/mean_roe_m").shape == (len(t), 6)
        # navigation is made before the law is called: one row per cycle including the failing one
        assert np.allclose(log.get(f"navigation/relative/{name}/t_s"), [0.0, cycle, 2 * cycle, t_fail])
    assert np.allclose(log.get("navigation/absolute/alpha/t_s"), [0.0, cycle, 2 * cycle, t_fail])
    assert np.allclose(log.get("guidance/cycles/t_s"), [0.0, cycle, 2 * cycle])
    assert _str(log.get("guidance/cycles/message")) == ["cycle at 0 s", "cycle at 5400 s", "cycle at 10800 s"]
    # one commanded burn per deputy per good cycle, executed at its cycle
    assert np.allclose(sorted(log.get("commands/impulses/t_cmd_s")), np.repeat([5.0, cycle + 5.0, 2 * cycle + 5.0], 2))
    assert _str(log.get("commands/impulses/status")) == ["executed"] * 6


def test_law_raising_in_setup_fails_run(tmp_path, repo_root, fake_truth, capsys):
    from sim.cli.main import main

    out = tmp_path / "s.h5"
    code = main(["run", str(repo_root / "scenarios/demo_formation.toml"), "-o", str(out),
                 "--set", f'guidance.law="{THIS}:RaisingLaw"', "--set", "guidance.settings.how=setup"])
    err = capsys.readouterr().err
    assert code == 1 and len(err.strip().splitlines()) == 1 and "Traceback" not in err, err
    assert "setup() raised RuntimeError: no such thing (second line)" in err
    log = read_log(out)
    assert log.status == "failed" and "in setup" in log.get("meta/traceback")


def test_bad_law_cli_exit_1_one_line(tmp_path, repo_root, fake_truth, capsys):
    from sim.cli.main import main

    out = tmp_path / "c.h5"
    code = main(["run", str(repo_root / "scenarios/demo_formation.toml"), "-o", str(out),
                 "--set", "run.duration_days=0.5", "--set", f'guidance.law="{THIS}:RaisingLaw"',
                 "--set", "guidance.settings.how=raise",
                 # deadlines inside the run: no validate warning precedes the one error line
                 "--set", "deputies[0].deadline_days=0.5", "--set", "deputies[1].deadline_days=0.5"])
    cap = capsys.readouterr()
    assert code == 1
    lines = cap.err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in cap.err, cap.err
    assert lines[0].startswith("covey: guidance law") and "deliberate failure at t = 16200 s" in lines[0]
    assert read_log(out).status == "failed"


# ------------------------------------------------------------------------------------------
# Navigation error statistics from the log
# ------------------------------------------------------------------------------------------

NAV_DT_S = 10.0  # guidance cycle = navigation update: one fresh fix per logged row
NAV_CYCLES = 2000
# per axis (R, T, N): white, Gauss-Markov sigma, GM tau. Axis patterns: white only, GM only, both.
# Time constants near the update interval make the lag-1 autocorrelation most informative about tau.
NAV_MODEL = {
    ("absolute", "position_m"): ((2.0, 0.0, 1.0), (0.0, 3.0, 1.5), (600.0, 12.0, 10.0)),
    ("absolute", "velocity_mps"): ((0.01, 0.0, 0.005), (0.0, 0.02, 0.004), (600.0, 25.0, 8.0)),
    ("relative", "position_m"): ((0.0, 0.01, 0.02), (0.03, 0.0, 0.01), (15.0, 600.0, 10.0)),
    ("relative", "velocity_mps"): ((2e-4, 0.0, 1e-4), (0.0, 3e-4, 2e-4), (600.0, 10.0, 20.0)),
}


def _nav_overrides():
    over = {"navigation.perfect": False}
    for (kind, table), (w, g, tau) in NAV_MODEL.items():
        base = f"navigation.{kind}"
        over[f"{base}.update_s"] = NAV_DT_S
        over[f"{base}.{table}.white_sigma"] = list(w)
        over[f"{base}.{table}.bias_sigma"] = [0.0, 0.0, 0.0]
        over[f"{base}.{table}.gm_sigma"] = list(g)
        over[f"{base}.{table}.gm_tau_s"] = list(tau)
    return over


def _acf(white, gm, tau_s, dt_s, n_lags):
    """Model autocorrelation rho_0..rho_n of white + first-order Gauss-Markov sampled every dt
    (Gelb 1974 [memory]: the GM part has autocorrelation exp(-|k| dt / tau))."""
    k = np.arange(n_lags + 1)
    rho = gm ** 2 * np.exp(-k * dt_s / tau_s) / (white ** 2 + gm ** 2)
    rho[0] = 1.0
    return rho


def _check_series(series, white, gm, tau_s, dt_s, what):
    """Sigma, mean and lag-1 / lag-2 autocorrelation of independent zero-mean series (rows of
    equal length) against the model, within NSIG standard errors (Bartlett's formulas [memory])."""
    x = np.asarray(series, float)
    m, n = x.shape
    N = m * n
    sigma = math.hypot(white, gm)
    rho = _acf(white, gm, tau_s, dt_s, 400)
    two_sided = lambda a: a[0] + 2.0 * np.sum(a[1:])  # noqa: E731 - sum over k = -inf..inf
    # variance with known zero mean: var(mean x^2) = 2 sigma^4 / N * sum_k rho_k^2 (Gaussian)
    var_hat = float(np.mean(x ** 2))
    se_var = math.sqrt(2.0 / N * two_sided(rho ** 2)) * sigma ** 2
    assert abs(var_hat - sigma ** 2) <= NSIG * se_var, (what, math.sqrt(var_hat), sigma, se_var)
    se_mean = math.sqrt(sigma ** 2 / N * two_sided(rho))
    assert abs(float(np.mean(x))) <= NSIG * se_mean, (what, float(np.mean(x)), se_mean)
    measured = {"sigma": math.sqrt(var_hat), "sigma_model": sigma}
    for h in (1, 2):
        r_h = float(np.sum(x[:, h:] * x[:, :-h]) / np.sum(x ** 2))
        # Bartlett: var(r_h) = 1/N sum_{k>=1} (rho_{k+h} + rho_{k-h} - 2 rho_h rho_k)^2
        kk = np.arange(1, 300)
        terms = rho[kk + h] + rho[np.abs(kk - h)] - 2.0 * rho[h] * rho[kk]
        se_r = math.sqrt(np.sum(terms ** 2) / N)
        assert abs(r_h - rho[h]) <= NSIG * se_r, (what, h, r_h, rho[h], se_r)
        measured[f"r{h}"] = r_h
        measured[f"r{h}_model"] = float(rho[h])
    return measured


ACT = {"perfect": False, "dv_scale_sigma": 0.03, "dv_fixed_sigma_mps": 2e-4, "pointing_sigma_deg": 2.0,
       "time_sigma_s": 0.5, "drag_area_sigma": 0.05, "attitude_sigma_deg": 2.0}
ISP_S = 3000.0  # so that NAV_CYCLES cycles of BurnLaw never run out of propellant


@pytest.fixture(scope="module")
def long_run(tmp_path_factory):
    """One run of NAV_CYCLES guidance cycles of NAV_DT_S on the Keplerian fake truth with
    BurnLaw, the navigation model NAV_MODEL and the actuator errors ACT. Returns (cfg, log)."""
    import sim.loop.run
    from guidance.roe import oe_to_roe, rv_to_oe

    FakeWorld = _fake_world_class()

    boot_info = SimpleNamespace(data_path="/fake", data_source="fake", orekit_version="fake",
                                java_version="fake", jpype_version="fake", data_files=())
    api = SimpleNamespace(boot=lambda data_path=None, jvm_options=None: boot_info, TruthWorld=FakeWorld,
                          mean_elements=lambda t, r, v, epoch: rv_to_oe(r, v),
                          mean_roe_m=lambda c, d: oe_to_roe(c, d) * np.asarray(c)[..., :1])
    over = {"run.duration_s": NAV_CYCLES * NAV_DT_S, "run.log_step_s": 200.0,
            "guidance.cycle_s": NAV_DT_S, "guidance.law": f"{THIS}:BurnLaw",
            "bus.sixu.thruster.isp_s": ISP_S, **_nav_overrides(),
            **{f"actuators.{k}": v for k, v in ACT.items()}}
    cfg = _demo(REPO, **over)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(sim.loop.run, "truth_backend", lambda: api)
        s = run_scenario(cfg, tmp_path_factory.mktemp("long") / "long.h5")
    assert s.status == "ok", s.reason
    return cfg, s, read_log(s.path)


def test_navigation_errors_in_log_have_configured_statistics(long_run):
    cfg, _, log = long_run
    t_cycles = np.arange(NAV_CYCLES) * NAV_DT_S
    groups = {"absolute": [f"navigation/absolute/{n}" for n in ("alpha", "beta", "gamma")],
              "relative": [f"navigation/relative/{n}" for n in ("beta", "gamma")]}
    names = {("absolute", "position_m"): ("err_r_rtn_m", "sigma_r_rtn_m"),
             ("absolute", "velocity_mps"): ("err_v_rtn_mps", "sigma_v_rtn_mps"),
             ("relative", "position_m"): ("err_dr_rtn_m", "sigma_dr_rtn_m"),
             ("relative", "velocity_mps"): ("err_dv_rtn_mps", "sigma_dv_rtn_mps")}
    for (kind, table), (white, gm, tau) in NAV_MODEL.items():
        err_name, sig_name = names[(kind, table)]
        errs, sigs = [], []
        for g in groups[kind]:
            assert np.allclose(log.get(f"{g}/t_s"), t_cycles)
            assert np.allclose(log.get(f"{g}/t_fix_s"), t_cycles)  # a fresh fix at every cycle
            assert np.all(log.get(f"{g}/valid"))
            errs.append(log.get(f"{g}/{err_name}"))
            sigs.append(log.get(f"{g}/{sig_name}"))
        errs = np.asarray(errs)  # (spacecraft, cycles, 3)
        # stated sigma: RSS of the configured parts (bias 0), covey's contract
        assert np.allclose(np.asarray(sigs), np.hypot(white, gm), rtol=1e-12)
        for ax in range(3):
            _check_series(errs[:, :, ax], white[ax], gm[ax], tau[ax], NAV_DT_S, f"{kind} {table} axis {ax}")
    # absolute errors are estimate minus truth in the spacecraft's own RTN axes: check against the
    # logged truth at the cycles that fall on the truth sample grid (frame built independently)
    for n in ("alpha", "beta", "gamma"):
        tt = log.get(f"spacecraft/{n}/truth/t_s")
        k = np.searchsorted(t_cycles, tt)
        ok = (k < NAV_CYCLES) & (np.abs(t_cycles[np.minimum(k, NAV_CYCLES - 1)] - tt) < 1e-9)
        assert ok.sum() >= 8
        r, v = log.get(f"spacecraft/{n}/truth/r_eci_m")[ok], log.get(f"spacecraft/{n}/truth/v_eci_mps")[ok]
        g = f"navigation/absolute/{n}"
        r_est, v_est = log.get(f"{g}/r_eci_m")[k[ok]], log.get(f"{g}/v_eci_mps")[k[ok]]
        assert np.allclose(relative_rtn(r, v, r_est), log.get(f"{g}/err_r_rtn_m")[k[ok]], atol=1e-6)
        assert np.allclose(relative_rtn(r, v, r + (v_est - v)), log.get(f"{g}/err_v_rtn_mps")[k[ok]],
                           atol=1e-9)


# ------------------------------------------------------------------------------------------
# Actuator execution from the log (BurnLaw in the same long run)
# ------------------------------------------------------------------------------------------


def _impulse_table(log):
    g = "commands/impulses"
    return SimpleNamespace(
        cycle=log.get(f"{g}/cycle_t_s"), name=np.array(_str(log.get(f"{g}/name"))),
        t_cmd=log.get(f"{g}/t_cmd_s"), dv_cmd=log.get(f"{g}/dv_cmd_rtn_mps"),
        t_exec=log.get(f"{g}/t_exec_s"), dv_exec=log.get(f"{g}/dv_exec_rtn_mps"),
        status=np.array(_str(log.get(f"{g}/status"))), used=log.get(f"{g}/propellant_used_kg"),
        mass=log.get(f"{g}/mass_before_kg"))


def test_actuator_execution_statistics_and_limits(long_run):
    from scipy import stats

    from sim.models.actuators import G0_MPS2

    cfg, summary, log = long_run
    th = cfg.deputies[0].bus.thruster
    c = NAV_DT_S
    imp = _impulse_table(log)
    n_cmd = len(BurnLaw.OFFSET) * 2 * NAV_CYCLES
    assert len(imp.t_cmd) == n_cmd  # every commanded burn has exactly one row
    assert set(imp.name) == {"beta", "gamma"}
    # the commanded values are logged as the law gave them (times and delta-v exact)
    kinds = np.array(list(BurnLaw.OFFSET))
    off = np.array(list(BurnLaw.OFFSET.values())) * c
    j = np.argmin(np.abs((imp.t_cmd - imp.cycle)[:, None] - off[None, :]), axis=1)
    assert np.allclose(imp.t_cmd - imp.cycle, off[j], atol=1e-9)
    kind = kinds[j]
    for k in kinds:
        assert np.sum(kind == k) == 2 * NAV_CYCLES
    mag_cmd = np.linalg.norm(imp.dv_cmd, axis=1)
    mass0 = cfg.deputies[0].bus.mass_kg
    want = BurnLaw.magnitudes(SimpleNamespace(thruster=th, mass_kg=mass0))
    for k, m in want.items():
        u = np.asarray(BurnLaw.DIR[k], float) / np.linalg.norm(BurnLaw.DIR[k])
        assert np.allclose(imp.dv_cmd[kind == k], m * u, rtol=1e-12, atol=1e-15), k
    # statuses and hard limits: never above the per-burn maximum, never below one minimum bit
    exp_status = {"A": "executed", "B": "executed", "C": "executed", "D": "clipped_max", "E": "executed",
                  "F": "dropped_min_bit", "G": "executed"}
    for k, st in exp_status.items():
        assert set(imp.status[kind == k]) == {st}, k
    fired = np.isin(imp.status, ("executed", "clipped_max"))
    mag = np.linalg.norm(imp.dv_exec, axis=1)
    dv_min = th.min_impulse_bit_Ns / imp.mass
    assert np.all(mag[fired] <= th.dv_max_per_burn_mps * (1 + 1e-12))
    assert np.all(mag[fired] >= dv_min[fired] * (1 - 1e-12))
    assert np.all(mag[~fired] == 0.0) and np.all(imp.used[~fired] == 0.0)
    n_at_max = int(np.sum(mag[kind == "C"] >= th.dv_max_per_burn_mps * (1 - 1e-12)))
    n_at_min = int(np.sum(mag[kind == "E"] <= dv_min[kind == "E"] * (1 + 1e-12)))
    assert 0 < n_at_max < np.sum(kind == "C") and 0 < n_at_min < np.sum(kind == "E")  # the clamps act
    # magnitude error |dv| (1 + s n1) + f n2: A is dominated by f, B by s (two equations, two unknowns)
    out = {}
    for k in ("A", "B"):
        sel = kind == k
        e = mag[sel] - mag_cmd[sel]
        n = e.size
        sd = math.hypot(want[k] * ACT["dv_scale_sigma"], ACT["dv_fixed_sigma_mps"])
        assert abs(np.mean(e)) <= NSIG * sd / math.sqrt(n), (k, np.mean(e), sd)
        assert abs(np.std(e) / sd - 1) <= NSIG / math.sqrt(2 * n), (k, np.std(e), sd)
        out[f"mag_sd_{k}"] = (float(np.std(e)), sd)
    # pointing: angle between commanded and executed, Rayleigh with scale sigma (all fired burns)
    sig = math.radians(ACT["pointing_sigma_deg"])
    cosang = np.sum(imp.dv_cmd[fired] * imp.dv_exec[fired], axis=1) / (mag_cmd[fired] * mag[fired])
    ang = np.arccos(np.clip(cosang, -1, 1))
    n = ang.size
    mean_r = sig * math.sqrt(math.pi / 2)
    assert abs(np.mean(ang) - mean_r) <= NSIG * sig * math.sqrt((4 - math.pi) / 2 / n), (np.mean(ang), mean_r)
    assert abs(np.mean(ang ** 2) / (2 * sig ** 2) - 1) <= NSIG / math.sqrt(n)  # theta^2/sigma^2 ~ chi2(2)
    assert stats.kstest(ang, stats.rayleigh(scale=sig).cdf).pvalue > 1e-4
    out["pointing_mean_deg"] = (math.degrees(float(np.mean(ang))), math.degrees(mean_r))
    # execution time error, 1-sigma time_sigma_s (every commanded burn draws one); G excluded, as
    # its time is held inside its cycle (checked below)
    sel = fired & (kind != "G")
    dt = imp.t_exec[sel] - imp.t_cmd[sel]
    ts = ACT["time_sigma_s"]
    assert abs(np.mean(dt)) <= NSIG * ts / math.sqrt(dt.size)
    assert abs(np.std(dt) / ts - 1) <= NSIG / math.sqrt(2 * dt.size)
    out["time_sd_s"] = (float(np.std(dt)), ts)
    # what is logged as executed is what the truth was given: time and delta-v of every fired burn
    world = _fake_world_class().instances[-1]
    for name in ("beta", "gamma"):
        loaded = [x for batch in world.impulses[name] for x in batch]
        sel = fired & (imp.name == name)
        assert len(loaded) == int(sel.sum())
        assert np.allclose([x[0] for x in loaded], imp.t_exec[sel], rtol=0, atol=1e-9)
        assert np.allclose(np.array([x[1] for x in loaded]), imp.dv_exec[sel], rtol=0, atol=1e-15)
    g = kind == "G"
    assert np.all(imp.t_exec[g] < imp.cycle[g] + c) and np.any(imp.t_exec[g] > imp.t_cmd[g] + 0.2)
    # propellant from the log: rocket equation per burn, and the mass chain per spacecraft
    assert np.allclose(imp.used[fired], imp.mass[fired] * -np.expm1(-mag[fired] / (ISP_S * G0_MPS2)),
                       rtol=1e-12, atol=0)
    for name in ("beta", "gamma"):
        sel = np.nonzero(imp.name == name)[0]
        order = sel[np.lexsort((imp.t_cmd[sel],))]
        assert imp.mass[order[0]] == mass0
        assert np.allclose(imp.mass[order[1:]], imp.mass[order[:-1]] - imp.used[order[:-1]], rtol=0, atol=1e-12)
    # metrics count what was executed
    met = {m.name: m for m in summary.metrics}
    for name in ("beta", "gamma"):
        sel = fired & (imp.name == name)
        assert met[name].n_burns == int(sel.sum())
        assert met[name].dv_total_mps == pytest.approx(float(np.sum(mag[sel])), rel=1e-12)
        assert met[name].propellant_used_kg == pytest.approx(float(np.sum(imp.used[imp.name == name])), rel=1e-12)
        assert met[name].n_switches == NAV_CYCLES
    print("actuator statistics (measured, model):", out)


def test_burns_the_propellant_cannot_pay_for_are_logged_not_flown(tmp_path, repo_root, fake_truth):
    """Perfect actuators, 3 g of propellant at Isp 60 s (about 0.18 m/s): BurnLaw's burns run it
    out within two cycles; a burn is dropped exactly when its rocket-equation propellant exceeds
    what is left (Tsiolkovsky; g0 = 9.80665 m/s^2)."""
    from sim.models.actuators import G0_MPS2

    prop0 = 0.003
    cfg = _demo(repo_root, **{"run.duration_s": 60.0, "run.log_step_s": 10.0, "guidance.cycle_s": 10.0,
                              "guidance.law": f"{THIS}:BurnLaw", "actuators.perfect": True,
                              "bus.sixu.thruster.propellant_kg": prop0})
    s = run_scenario(cfg, tmp_path / "p.h5")
    assert s.status == "ok", s.reason
    imp = _impulse_table(read_log(s.path))
    th = cfg.deputies[0].bus.thruster
    for name in ("beta", "gamma"):
        sel = np.nonzero(imp.name == name)[0]
        sel = sel[np.argsort(imp.t_cmd[sel], kind="stable")]
        left = prop0
        n_drop = 0
        for k in sel:
            mag = min(float(np.linalg.norm(imp.dv_cmd[k])), th.dv_max_per_burn_mps)
            if imp.status[k] in ("dropped_min_bit",):
                continue
            need = imp.mass[k] * -math.expm1(-mag / (th.isp_s * G0_MPS2))
            if need > left:
                assert imp.status[k] == "dropped_no_propellant" and imp.used[k] == 0.0
                assert np.all(imp.dv_exec[k] == 0.0)
                n_drop += 1
            else:
                assert imp.status[k] in ("executed", "clipped_max")
                assert imp.used[k] == pytest.approx(need, rel=1e-12)
                left -= imp.used[k]
        assert n_drop >= 10 and 0.0 <= left < prop0 and np.sum(imp.used[sel]) <= prop0
        assert {m.name: m for m in s.metrics}[name].propellant_used_kg == pytest.approx(prop0 - left, rel=1e-12)


def test_switches_logged_commanded_and_executed(long_run):
    cfg, _, log = long_run
    g = "commands/switches"
    name = np.array(_str(log.get(f"{g}/name")))
    mode = np.array(_str(log.get(f"{g}/mode")))
    t_cmd, cyc = log.get(f"{g}/t_cmd_s"), log.get(f"{g}/cycle_t_s")
    t0, t1, fac = log.get(f"{g}/t_start_s"), log.get(f"{g}/t_end_s"), log.get(f"{g}/area_factor")
    assert len(name) == 2 * NAV_CYCLES and set(name) == {"beta", "gamma"}
    for n in ("beta", "gamma"):
        sel = name == n
        assert np.allclose(t_cmd[sel], np.arange(NAV_CYCLES) * NAV_DT_S + NAV_DT_S / 16)
        assert np.allclose(cyc[sel], np.arange(NAV_CYCLES) * NAV_DT_S)
        assert list(mode[sel]) == ["max_drag" if k % 2 == 0 else "min_drag" for k in range(NAV_CYCLES)]
    slew = cfg.deputies[0].bus.slew_time_s
    assert np.allclose(t0, t_cmd) and np.allclose(t1 - t0, slew)
    assert np.all(np.isfinite(fac)) and np.all(fac > 0) and np.std(fac) > 0


# ------------------------------------------------------------------------------------------
# Safety monitors (sim.judge.metrics) against an independent computation from the logged truth
# ------------------------------------------------------------------------------------------


def _rn_separation(r_c, v_c, r_d):
    """|(radial, normal)| of r_d - r_c in the chief's RTN frame, written here independently:
    radial along r_c, normal along r_c x v_c (common practice, no source)."""
    dr = r_d - r_c
    u_r = r_c / np.linalg.norm(r_c, axis=1)[:, None]
    h = np.cross(r_c, v_c)
    u_n = h / np.linalg.norm(h, axis=1)[:, None]
    return np.hypot(np.einsum("ij,ij->i", dr, u_r), np.einsum("ij,ij->i", dr, u_n))


def _check_safety_metrics(log, cfg, metrics):
    """The logged and returned safety metrics equal a computation from the logged truth."""
    names = [sc.name for sc in cfg.spacecraft]
    r = {n: log.get(f"spacecraft/{n}/truth/r_eci_m") for n in names}
    t = log.get(f"spacecraft/{names[0]}/truth/t_s")
    vc = log.get(f"spacecraft/{names[0]}/truth/v_eci_mps")
    ko, rn_min = cfg.events.keep_out_radius_m, cfg.events.min_rn_separation_m
    for m in metrics:
        d_chief = np.linalg.norm(r[m.name] - r[names[0]], axis=1)
        d_any = {o: np.linalg.norm(r[m.name] - r[o], axis=1) for o in names if o != m.name}
        other = min(d_any, key=lambda o: d_any[o].min())
        rn = _rn_separation(r[names[0]], vc, r[m.name])
        assert m.min_distance_m == pytest.approx(d_chief.min(), rel=1e-9, abs=1e-9)
        assert m.min_distance_any_m == pytest.approx(d_any[other].min(), rel=1e-9, abs=1e-9)
        assert m.min_distance_other == other and m.t_min_distance_any_s == t[np.argmin(d_any[other])]
        assert m.min_rn_separation_m == pytest.approx(rn.min(), rel=1e-9, abs=1e-9)
        assert m.t_min_rn_separation_s == t[np.argmin(rn)]
        assert m.keep_out_violated == bool(ko > 0 and d_any[other].min() < ko)
        assert m.rn_separation_violated == bool(rn_min > 0 and rn.min() < rn_min)
        a = log.attrs(f"metrics/{m.name}")
        assert bool(a["keep_out_violated"]) == m.keep_out_violated
        assert bool(a["rn_separation_violated"]) == m.rn_separation_violated
        assert a["min_distance_any_m"] == m.min_distance_any_m and a["min_distance_other"] == other
        assert a["min_rn_separation_m"] == m.min_rn_separation_m


def test_safety_monitors_flag_thresholds(tmp_path, repo_root, fake_truth):
    # beta 100 m ahead of the chief on the same orbit (no radial/normal separation); gamma 130 m
    # ahead with parallel e/i vectors of 25 m (radial/normal separation 25 m all along): both are
    # more than 45 m from the chief, but closer than that to each other
    over = {"run.duration_s": 6000.0, "run.log_step_s": 30.0, "guidance.law": f"{THIS}:HoldLaw",
            "deputies[0].roe_m": [0.0, 100.0, 0.0, 0.0, 0.0, 0.0],
            "deputies[1].roe_m": [0.0, 130.0, 0.0, 25.0, 0.0, 25.0],
            "events.keep_out_radius_m": 45.0, "events.min_rn_separation_m": 20.0}
    cfg = _demo(repo_root, **over)
    s = run_scenario(cfg, tmp_path / "s.h5")
    assert s.status == "ok", s.reason
    log = read_log(s.path)
    _check_safety_metrics(log, cfg, s.metrics)
    m = {x.name: x for x in s.metrics}
    for n, other in (("beta", "gamma"), ("gamma", "beta")):
        assert m[n].keep_out_violated and m[n].min_distance_other == other
        assert m[n].min_distance_m > 45.0  # the chief alone would not flag them
    assert m["beta"].rn_separation_violated and m["beta"].min_rn_separation_m < 1.0
    assert not m["gamma"].rn_separation_violated and 24.0 < m["gamma"].min_rn_separation_m < 26.0
    # monitors off (thresholds 0): nothing flagged, the distances are still computed
    cfg0 = _demo(repo_root, **{**over, "events.keep_out_radius_m": 0.0, "events.min_rn_separation_m": 0.0})
    s0 = run_scenario(cfg0, tmp_path / "s0.h5")
    _check_safety_metrics(read_log(s0.path), cfg0, s0.metrics)
    assert not any(x.keep_out_violated or x.rn_separation_violated for x in s0.metrics)
    # covey run prints the flags in its table
    from sim.judge.metrics import METRIC_COLUMNS, format_table, table_rows

    table = format_table(table_rows(s.metrics), METRIC_COLUMNS)
    assert "keep-out (gamma), RN separation" in table and "keep-out (beta)" in table


# ------------------------------------------------------------------------------------------
# The real truth: same scenario and seed twice, switches as flown, burns as flown
# ------------------------------------------------------------------------------------------

# demo_formation shortened to 0.15 day (2.3 chief orbits, 3 guidance cycles) with nearby targets
# reached at the end; realistic navigation, actuator and truth-density errors as in the file
JVM_SET = ["run.duration_days=0.15", "deputies[0].deadline_days=0.15", "deputies[1].deadline_days=0.15",
           "deputies[0].target_roe_m=[0.0, 2100.0, 0.0, 110.0, 0.0, 110.0]",
           "deputies[1].target_roe_m=[0.0, -1600.0, 0.0, -110.0, 0.0, -110.0]", "run.seed=20250601"]

# Fields that measure time, not the simulation: sim.log.diff.WALL_CLOCK_ATTRS / _DATASETS.


@pytest.fixture(scope="module")
def jvm_runs(tmp_path_factory):
    """Run A: ``covey run`` in a child process with PYTHONHASHSEED=12345; run B: the same scenario
    in this process; run C: as B with another seed. Returns (cfg, paths, summary of B)."""
    import os
    import subprocess
    import sys

    from sim.cli.common import parse_set as _parse_set

    scen = REPO / "scenarios" / "demo_formation.toml"
    d = tmp_path_factory.mktemp("jvm")
    paths = {k: d / f"{k}.h5" for k in "ABC"}
    argv = [sys.executable, "-m", "sim.cli.main", "run", str(scen), "-q", "-o", str(paths["A"])]
    for item in JVM_SET:
        argv += ["--set", item]
    env = dict(os.environ, PYTHONHASHSEED="12345")
    env.pop("COVEY_DEBUG", None)
    proc = subprocess.run(argv, cwd=REPO, env=env, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr
    over = _parse_set(JVM_SET)
    cfg = load_scenario(scen, over)
    sb = run_scenario(cfg, paths["B"])
    assert sb.status == "ok", sb.reason
    sc = run_scenario(load_scenario(scen, {**over, "run.seed": 20250602}), paths["C"])
    assert sc.status == "ok", sc.reason
    return cfg, paths, sb


@pytest.mark.orekit
def test_same_scenario_and_seed_give_identical_logs(jvm_runs):
    cfg, p, _ = jvm_runs
    assert diff_logs(p["A"], p["B"]) == []
    a = log_items(p["A"])
    # the excluded fields are there and do measure time (so the exclusion list is not stale)
    for g, k in WALL_CLOCK_ATTRS:
        assert ("attr", g, k) in a
    assert ("attr", "meta", "overrides_json") in a and len(a) > 300
    assert a[("data", "guidance/cycles/step_wall_s")][2].shape == (3,)
    # a different seed draws other navigation and actuator errors and another density error
    la, lc = read_log(p["B"]), read_log(p["C"])
    for g in ("navigation/absolute/alpha/err_r_rtn_m", "navigation/relative/beta/err_dr_rtn_m",
              "navigation/relative/gamma/err_dv_rtn_mps"):
        assert np.all(la.get(g) != lc.get(g)), g
    assert np.all(la.get("commands/switches/area_factor")[:2] != lc.get("commands/switches/area_factor")[:2])
    assert not np.array_equal(la.get("spacecraft/alpha/truth/density_kgpm3"),
                              lc.get("spacecraft/alpha/truth/density_kgpm3"))
    assert np.array_equal(la.get("spacecraft/alpha/truth/t_s"), lc.get("spacecraft/alpha/truth/t_s"))


@pytest.mark.orekit
def test_truth_flies_the_logged_switches_and_burns(jvm_runs):
    """mode_index follows every executed switch from its start, the drag area changes at the slew
    midpoint to the mode's nominal area times the logged realised factor (DEVELOPERS.md, The truth world:
    'mode_index is the commanded mode (changes at t), drag_area_m2 the area in effect (changes at
    t + slew/2)'), and the burns the truth executed (/maneuvers) are the logged executed ones."""
    from sim.models.noise import stream

    cfg, p, summary = jvm_runs
    log = read_log(p["B"])
    # the log says how its truth samples and density were made (defaults: RunOptions)
    assert log.attrs("spacecraft")["truth_sampler"] == "orekit_oem_writer"
    assert log.attrs("spacecraft")["truth_density_method"] == "pymsis"
    from sim.truth.world import default_threads

    assert log.attrs("spacecraft")["truth_threads"] == min(default_threads(), len(cfg.spacecraft))
    g = "commands/switches"
    sw_name = np.array(_str(log.get(f"{g}/name")))
    sw_mode = np.array(_str(log.get(f"{g}/mode")))
    t0, fac = log.get(f"{g}/t_start_s"), log.get(f"{g}/area_factor")
    assert np.allclose(log.get(f"{g}/t_end_s") - t0, cfg.chief.bus.slew_time_s)
    n_checked = 0
    for sc in cfg.spacecraft:
        n = sc.name
        attrs = log.attrs(f"spacecraft/{n}")
        modes = list(attrs["mode_names"])
        area = dict(zip(modes, attrs["mode_area_m2"]))
        t = log.get(f"spacecraft/{n}/truth/t_s")
        mi = log.get(f"spacecraft/{n}/truth/mode_index")
        a = log.get(f"spacecraft/{n}/truth/drag_area_m2")
        # realised per-run factor of the initial mode: stream act/<name>/area/<mode> (sim.models.noise)
        f0 = max(0.01, 1.0 + cfg.actuators.drag_area_sigma
                 * float(stream(cfg.seed, "act", n, "area", sc.initial_mode).standard_normal()))
        sel = np.nonzero(sw_name == n)[0]
        sel = sel[np.argsort(t0[sel], kind="stable")]
        want_mode = np.full(t.shape, modes.index(sc.initial_mode))
        want_area = np.full(t.shape, area[sc.initial_mode] * f0)
        half = 0.5 * sc.bus.slew_time_s
        for k in sel:
            want_mode[t >= t0[k] - 1e-6] = modes.index(sw_mode[k])
            want_area[t >= t0[k] + half - 1e-6] = area[sw_mode[k]] * fac[k]
        assert np.array_equal(mi, want_mode), n
        assert np.allclose(a, want_area, rtol=1e-9, atol=0), n
        n_checked += len(sel)
    assert n_checked >= 6  # the re-solve law commanded drag spells in this run
    # burns: commanded-and-executed rows that fired are exactly what the truth executed
    imp = _impulse_table(log)
    fired = np.isin(imp.status, ("executed", "clipped_max"))
    assert fired.sum() >= 4
    o1 = np.lexsort((imp.t_exec[fired], imp.name[fired]))
    man_name = np.array(_str(log.get("maneuvers/name")))
    man_t = log.get("maneuvers/t_s")
    o2 = np.lexsort((man_t, man_name))
    assert list(man_name[o2]) == list(imp.name[fired][o1])
    assert np.allclose(man_t[o2], imp.t_exec[fired][o1], rtol=0, atol=1e-6)
    assert np.allclose(log.get("maneuvers/dv_rtn_mps")[o2], imp.dv_exec[fired][o1], rtol=0, atol=1e-12)
    assert np.allclose(log.get("maneuvers/mass_before_kg")[o2], imp.mass[fired][o1], rtol=1e-12)
    assert np.allclose(log.get("maneuvers/mass_after_kg")[o2], (imp.mass - imp.used)[fired][o1], rtol=1e-12)
    # safety metrics of the real run against the logged truth
    _check_safety_metrics(log, cfg, summary.metrics)

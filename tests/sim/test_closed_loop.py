"""Closed-loop behaviour: the engine, the run log and the metrics, checked from the logged data.

Most checks fly the Keplerian stand-in truth (``fake_truth`` of tests/conftest.py) with tiny laws
defined here, so thousands of guidance cycles run in seconds; the reproducibility and switch
checks fly the real Orekit truth for a fraction of a day (``@pytest.mark.orekit``).

Sources of the checks:
- Gauss-Markov lag-1 autocorrelation ``exp(-dt/tau)`` and the stationary variance: Gelb (ed.),
  Applied Optimal Estimation, MIT Press 1974, ch. 4 [memory].
- Sampling error of a sample standard deviation of n independent normals: about
  ``sigma / sqrt(2 n)``; of a lag-1 autocorrelation estimate of an AR(1) process with coefficient
  rho: ``sqrt((1 - rho^2) / n)`` (Bartlett 1946 [memory]); of a variance of an AR(1) process:
  ``2 sigma^4 / n * (1 + rho^2) / (1 - rho^2)`` (Bartlett's formula summed over lags [memory]).
- Rayleigh distribution of the angle between two directions when the error has two independent
  normal components of 1-sigma s: mean ``s sqrt(pi / 2)``, variance ``(4 - pi) / 2 s^2``
  (standard textbook result [memory]).
- Rocket equation ``m_used = m (1 - exp(-dv / (Isp g0)))``, g0 = 9.80665 m/s^2 (CGPM 1901).
- Everything else (failed-run contents, exit codes, reproducibility, what is logged): covey's own
  contract (common practice, no source).

Bounds: statistics are checked within 4 standard errors (many checks in one family: at 4 sigma
the chance that one of ~40 fails by chance is about 0.3 %); the seeds are fixed, so a failure is
reproducible.
"""

from __future__ import annotations

import math

import h5py
import numpy as np
import pytest

from guidance.interface import Diagnostics, GuidanceOutput, Impulse, ModeSwitch, SpacecraftCommand
from sim.metrics import rtn_relative
from sim.recorder import read_log
from sim.run import run_scenario
from sim.scenario import load_scenario

THIS = "tests.sim.test_closed_loop"
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
    attitude mode), ``"past"`` (impulse before the cycle time), ``"type"`` (returns a dict).
    """

    def setup(self, mission):
        self.mission = mission
        self.fail_at_s = float(mission.settings.get("fail_at_s", 3 * mission.cycle_s))
        self.how = str(mission.settings.get("how", "raise"))

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
        else:
            raise AssertionError(self.how)
        return GuidanceOutput({name: bad}, Diagnostics(status="ok"))

    def _explode(self, t_s):
        raise RuntimeError(f"deliberate failure at t = {t_s:.0f} s\n(second line of the message)")


class BurnLaw:
    """Commands six burns per deputy per cycle of known delta-v, plus a mode switch per cycle.

    Burns (cycle time t, cycle length c): ``A`` 1 mm/s along +T at t + c/8, ``B`` 30 mm/s along a
    fixed oblique direction at t + c/4, ``C`` exactly the per-burn maximum at t + 3c/8, ``D`` 1.6 x
    the maximum (clipped) at t + c/2, ``E`` 1.5 x the minimum impulse bit at t + 5c/8, ``F`` half
    the minimum impulse bit (dropped) at t + 3c/4. The deputies alternate max_drag / min_drag,
    switching at t + c/16.
    """

    DIR_B = np.array([0.3, -0.5, 0.8]) / np.linalg.norm([0.3, -0.5, 0.8])

    def setup(self, mission):
        self.mission = mission
        self.k = 0

    def magnitudes(self, caps):
        th = caps.thruster
        dmin = th.min_impulse_bit_Ns / caps.mass_kg
        return {"A": 1e-3, "B": 0.03, "C": th.dv_max_per_burn_mps, "D": 1.6 * th.dv_max_per_burn_mps,
                "E": 1.5 * dmin, "F": 0.5 * dmin}

    def step(self, t_s, nav):
        c = self.mission.cycle_s
        cmds = {}
        for caps in self.mission.deputies:
            m = self.magnitudes(caps)
            u_t = np.array([0.0, 1.0, 0.0])
            imps = (Impulse(t_s + c / 8, m["A"] * u_t), Impulse(t_s + c / 4, m["B"] * self.DIR_B),
                    Impulse(t_s + 3 * c / 8, -m["C"] * u_t), Impulse(t_s + c / 2, m["D"] * self.DIR_B),
                    Impulse(t_s + 5 * c / 8, m["E"] * u_t), Impulse(t_s + 3 * c / 4, m["F"] * u_t))
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


def test_bad_law_cli_exit_1_one_line(tmp_path, repo_root, fake_truth, capsys):
    from sim.cli import main

    out = tmp_path / "c.h5"
    code = main(["run", str(repo_root / "scenarios/demo_formation.toml"), "-o", str(out),
                 "--set", "run.duration_days=0.5", "--set", f'guidance.law="{THIS}:RaisingLaw"',
                 "--set", "guidance.settings.how=raise"])
    cap = capsys.readouterr()
    assert code == 1
    lines = cap.err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in cap.err, cap.err
    assert lines[0].startswith("covey: guidance law") and "deliberate failure at t = 16200 s" in lines[0]
    assert read_log(out).status == "failed"

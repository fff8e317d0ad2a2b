"""Checks of the built-in guidance laws through the registry (guidance.registry, guidance.laws).

What is checked against what:
- The GuidanceLaw contract (guidance/interface.py): construction with no arguments, setup(mission),
  step(t_s, nav) -> GuidanceOutput; commands at or after t_s, time-ordered; Diagnostics fields.
- Thruster limits of the mission: every commanded impulse within [min impulse bit / mass,
  dv_max_per_burn].
- The plan's own target: the diagnostics' predicted mean ROE reach the target at the deadline
  within 1 cm (a-scaled) in the law's own model.
- Re-solve with perfect knowledge in the law's own model: the navigation handed to the re-solve
  is built from the law's own predicted mean ROE (mean -> osculating with guidance.meanosc, the
  inverse of what the law applies), so the remaining delta-v must stay within 1 % and not grow.
- The example law's sign logic: the along-track double integrator dV/dt = -3 w of its docstring
  (Gauss's equation for a, common practice, no source): a deputy ahead of its target (dlambda too
  large) must lower its drag (min_drag), one behind must raise it.
"""

from __future__ import annotations

import numpy as np
import pytest

from guidance.constants import R_EARTH_M
from guidance.density import DensityModel
from guidance.interface import (Diagnostics, GuidanceInputError,
                                GuidanceLaw, GuidanceOutput, Impulse, ModeSwitch,
                                NavSolution, RelativeEstimate, SpacecraftCommand)
from guidance.registry import LAWS, load_law

from guidance_builders import AREAS, CHIEF, caps, mission, nav  # noqa: F401  (tests/guidance/guidance_builders.py)

PATHS = {
    "propulsion_only": "guidance.laws.propulsion_only:PropulsionOnly",
    "hybrid_single": "guidance.laws.hybrid:HybridSingle",
    "hybrid_resolve": "guidance.laws.resolve:HybridResolve",
    "drag_bang_bang": "guidance.laws.example_user_law:DragBangBang",
}


def check_output(out, t_s, m):
    assert isinstance(out, GuidanceOutput) and isinstance(out.diagnostics, Diagnostics)
    d = out.diagnostics
    assert d.status in ("ok", "infeasible", "hold", "degraded")
    assert np.isfinite(d.solve_time_s) and d.solve_time_s >= 0
    dep = m.deputies[0]
    dv_min = dep.thruster.min_impulse_bit_Ns / dep.mass_kg if dep.thruster else np.inf
    for name, cmd in out.commands.items():
        assert isinstance(cmd, SpacecraftCommand) and cmd.name == name
        ts = [s.t_s for s in cmd.mode_switches]
        assert all(isinstance(s, ModeSwitch) for s in cmd.mode_switches)
        assert ts == sorted(ts) and all(t >= t_s for t in ts)
        assert all(s.mode in m.spacecraft(name).drag_area_m2 for s in cmd.mode_switches)
        ti = [i.t_s for i in cmd.impulses]
        assert ti == sorted(ti) and all(t >= t_s for t in ti)
        for imp in cmd.impulses:
            assert isinstance(imp, Impulse) and imp.dv_rtn_mps.shape == (3,)
            mag = np.linalg.norm(imp.dv_rtn_mps)
            assert np.isfinite(mag) and dv_min * (1 - 1e-12) <= mag <= 0.05 * (1 + 1e-12)
    for name, x in d.predicted_roe_m.items():
        assert x.shape == (d.predicted_t_s.size, 6)


# ------------------------------------------------------------------------------------------
# registry
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", sorted(LAWS))
def test_each_law_loads_by_name_and_by_path_and_steps(name):
    for spec in (name, PATHS[name]):
        law = load_law(spec)
        assert isinstance(law, LAWS[name]) and isinstance(law, GuidanceLaw)
        m = mission()
        law.setup(m)
        out = law.step(0.0, nav(0.0, np.zeros(6)))
        check_output(out, 0.0, m)
        assert out.diagnostics.status in ("ok", "degraded")
        out2 = law.step(5400.0, nav(5400.0, np.zeros(6)))
        check_output(out2, 5400.0, m)


@pytest.mark.parametrize("spec", ["no_such_law", "guidance.laws:NoSuchClass",
                                  "no_such_package.module:Law", "guidance.interface:Mission", ""])
def test_bad_law_spec_names_the_key_and_the_allowed_names(spec):
    with pytest.raises(GuidanceInputError) as err:
        load_law(spec)
    assert err.value.key == "guidance.law"
    assert err.value.value == spec.strip() or err.value.value == spec
    for name in LAWS:
        assert name in str(err.value)


# ------------------------------------------------------------------------------------------
# settings and mission input
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", ["propulsion_only", "hybrid_single", "hybrid_resolve"])
def test_unknown_setting_is_refused_with_the_allowed_keys(name):
    law = load_law(name)
    with pytest.raises(GuidanceInputError) as err:
        law.setup(mission({"burns_per_orbt": 8}))
    assert err.value.key == "guidance.settings.burns_per_orbt"
    assert "burns_per_orbit" in str(err.value) and "segments_per_orbit" in str(err.value)
    # the same suggestion scenario keys get (guidance.settings.closest, difflib)
    assert "did you mean 'burns_per_orbit'?" in str(err.value)


@pytest.mark.parametrize("key,value", [("burns_per_orbit", 0), ("segments_per_orbit", 2.5),
                                       ("min_dwell_s", -1.0), ("chief_mode", "sideways"),
                                       ("density_coefficient", 0.0), ("stm", "cw"),
                                       ("weak_drag_margin", 0.0), ("weak_drag_margin", 1.5),
                                       ("optimality_gap", 0.0), ("optimality_gap", 0.5)])
def test_bad_setting_values_name_the_key(key, value):
    with pytest.raises(GuidanceInputError) as err:
        load_law("hybrid_single").setup(mission({key: value}))
    assert key in err.value.key


def test_optimality_gap_bounds_the_plan_cost_above_its_certified_lower_bound():
    # weak duality (guidance.planning): a plan's cost is within the gap of its certified lower
    # bound, hence of the optimum; a looser gap stops the column generation earlier
    rounds = {}
    for gap in (1e-6, 1e-2):
        law = load_law("propulsion_only")
        law.setup(mission({"optimality_gap": gap}))
        out = law.step(0.0, nav(0.0, np.zeros(6)))
        assert out.diagnostics.status == "ok", out.diagnostics.message
        plan = law.deputies["d1"].plan
        assert plan.cost_mps > 0
        assert plan.cost_mps - plan.lower_bound_mps <= gap * plan.cost_mps + 1e-10
        rounds[gap] = plan.rounds
    assert rounds[1e-2] < rounds[1e-6]  # measured: 5 and 11


def test_resolve_law_settings():
    law = load_law("hybrid_resolve")
    with pytest.raises(GuidanceInputError) as err:
        law.setup(mission({"resolve_mode": "everything"}))
    assert err.value.key == "guidance.settings.resolve_mode" and "drag_only" in str(err.value)
    law.setup(mission({"resolve_s": 10800.0, "resolve_mode": "drag_only", "freeze_s": 5400.0,
                       "density_coefficient": 1.3}))
    assert law.settings["resolve_s"] == 10800.0 and law.density.density_coefficient == 1.3


@pytest.mark.parametrize("name", sorted(LAWS))
@pytest.mark.parametrize("settings", [{}, {"density_model": "harris_priester"},
                                      {"f107_forecast_sfu": 90, "density_coefficient": 2.5}])
def test_law_reports_the_density_belief_of_its_settings(name, settings):
    """The optional GuidanceLaw method believed_density_kgpm3 gives exactly (bit for bit) what the
    harness used to compute from the law's settings: guidance.density.DensityModel.from_settings
    at the altitude |r| - R_EARTH_M."""
    law = load_law(name)
    law.setup(mission(dict(settings)))
    r = np.array([[R_EARTH_M + 480e3, 0.0, 0.0], [0.0, -(R_EARTH_M + 500e3), 1e3],
                  [4e6, 4e6, 3.5e6], [0.0, 0.0, R_EARTH_M + 620.5e3]])
    t = np.arange(4) * 60.0
    expected = np.asarray(DensityModel.from_settings(settings).density_kgpm3(
        np.linalg.norm(r, axis=1) - R_EARTH_M), float)
    got = law.believed_density_kgpm3(r, t)
    assert got.shape == (4,) and got.dtype == float
    assert np.array_equal(got, expected)
    assert np.array_equal(law.believed_density_kgpm3(r), expected)


def test_deadline_in_the_past_gives_infeasible_status_and_held_commands():
    law = load_law("hybrid_single")
    m = mission(deadline=1000.0)
    law.setup(m)
    out = law.step(2000.0, nav(2000.0, np.zeros(6)))
    check_output(out, 2000.0, m)
    assert out.diagnostics.status == "infeasible" and "deadline" in out.diagnostics.message
    assert out.commands["d1"].impulses == ()


def test_unreachable_within_thruster_limits_gives_infeasible_status():
    law = load_law("propulsion_only")
    m = mission(target=(2000.0, 0.0, 0.0, 0.0, 3000.0, 0.0), deadline=2 * 5400.0)
    law.setup(m)
    out = law.step(0.0, nav(0.0, np.zeros(6)))
    assert out.diagnostics.status == "infeasible" and "unreachable" in out.diagnostics.message
    assert out.commands["d1"].impulses == ()


def test_zero_drag_authority_for_a_drag_only_deputy_is_infeasible():
    same = {"max_drag": 0.02, "min_drag": 0.02, "nominal": 0.02}
    law = load_law("hybrid_single")
    m = mission(thruster=False, areas=same)
    law.setup(m)
    out = law.step(0.0, nav(0.0, np.zeros(6)))
    assert out.diagnostics.status == "infeasible"
    assert "drag authority" in out.diagnostics.message


def test_bad_navigation_gives_a_status_not_a_crash():
    law = load_law("hybrid_resolve")
    m = mission()
    law.setup(m)
    good = nav(0.0, np.zeros(6))
    bad = NavSolution(0.0, good.chief, {"d1": RelativeEstimate(
        "d1", 0.0, np.array([np.nan, 0.0, 0.0]), np.zeros(3), np.ones(3), np.ones(3), 4.0)})
    out = law.step(0.0, bad)
    assert out.diagnostics.status == "infeasible" and "navigation" in out.diagnostics.message
    for cmd in out.commands.values():
        assert all(np.all(np.isfinite(i.dv_rtn_mps)) for i in cmd.impulses)


# ------------------------------------------------------------------------------------------
# behaviour
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", ["propulsion_only", "hybrid_single", "hybrid_resolve"])
def test_prediction_hits_the_target_and_hybrid_saves_propellant(name):
    m = mission()
    law = load_law(name)
    law.setup(m)
    out = law.step(0.0, nav(0.0, np.zeros(6)))
    d = out.diagnostics
    assert d.status == "ok", d.message
    k = int(np.argmin(np.abs(d.predicted_t_s - 3 * 86400.0)))
    assert abs(d.predicted_t_s[k] - 3 * 86400.0) < 1e-6
    np.testing.assert_allclose(d.predicted_roe_m["d1"][k], m.targets[0].target_roe_m, atol=0.01)
    if name == "propulsion_only":
        assert out.commands["d1"].mode_switches == ()  # already in its hold mode
    else:
        prop = load_law("propulsion_only")
        prop.setup(m)
        dv_prop = prop.step(0.0, nav(0.0, np.zeros(6))).diagnostics.dv_remaining_mps["d1"]
        assert d.dv_remaining_mps["d1"] < dv_prop
        modes = {s.mode for s in out.commands["d1"].mode_switches}
        assert {"max_drag", "min_drag"} <= modes


def test_single_solve_laws_fly_open_loop():
    law = load_law("hybrid_single")
    law.setup(mission())
    first = law.step(0.0, nav(0.0, np.zeros(6)))
    later = law.step(10800.0, nav(10800.0, np.array([5.0, -50.0, 1.0, 0.0, 0.0, 0.0])))
    assert later.diagnostics.status == "hold"
    keep = [s for s in first.commands["d1"].mode_switches if s.t_s >= 10800.0]
    assert list(later.commands["d1"].mode_switches) == keep


@pytest.mark.parametrize("mode", ["drag_and_impulses", "drag_only"])
def test_resolve_with_perfect_knowledge_keeps_the_remaining_cost(mode):
    m = mission({"resolve_mode": mode, "min_dwell_s": 0.0})
    law = load_law("hybrid_resolve")
    law.setup(m)
    out = law.step(0.0, nav(0.0, np.zeros(6)))
    assert out.diagnostics.status == "ok"
    prev_dv = out.diagnostics.dv_remaining_mps["d1"]
    for k in (1, 2, 3):
        t = k * 5400.0
        d = out.diagnostics
        x_t = np.array([np.interp(t, d.predicted_t_s, d.predicted_roe_m["d1"][:, i]) for i in range(6)])
        out = law.step(t, nav(t, x_t))
        check_output(out, t, m)
        dv = out.diagnostics.dv_remaining_mps["d1"]
        assert out.diagnostics.status in ("ok", "degraded")
        # perfect knowledge up to the mean/osculating round trip and the interpolation
        assert dv <= prev_dv * 1.01 + 1e-6
        prev_dv = dv


def test_resolve_freezes_near_the_deadline_and_during_outages():
    law = load_law("hybrid_resolve")
    law.setup(mission({"freeze_s": 86400.0}))
    law.step(0.0, nav(0.0, np.zeros(6)))
    assert law.step(5400.0, nav(5400.0, np.zeros(6), valid=False)).diagnostics.status == "hold"
    assert law.step(2.5 * 86400.0, nav(2.5 * 86400.0, np.zeros(6))).diagnostics.status == "hold"


def test_example_law_drives_the_along_track_error_the_right_way():
    m = mission()
    law = load_law("drag_bang_bang")
    law.setup(m)
    ahead = law.step(0.0, nav(0.0, [0.0, 0.0, 0, 0, 0, 0]))  # target -4 km: deputy is ahead
    assert [s.mode for s in ahead.commands["d1"].mode_switches] == ["min_drag"]
    law.setup(mission(target=(0.0, 4000.0, 0, 0, 0, 0)))
    behind = law.step(0.0, nav(0.0, [0.0, 0.0, 0, 0, 0, 0]))
    assert [s.mode for s in behind.commands["d1"].mode_switches] == ["max_drag"]


def test_weak_drag_margin_scales_only_the_weaker_mode_of_the_plan():
    # The planner's drag bounds with weak_drag_margin = 0.5 against the same law with 1.0: the mode
    # with the smaller |differential acceleration| (here min_drag against a nominal chief) is
    # counted at half, the other is unchanged (DEVELOPERS.md, The built-in laws).
    # A law that plans once accepts the setting and ignores it.
    def request(name, k):
        law = load_law(name)
        law.setup(mission({"weak_drag_margin": k}))
        law.step(0.0, nav(0.0, np.zeros(6)))
        return law.deputies["d1"].plan.request

    r1, r5 = request("hybrid_resolve", 1.0), request("hybrid_resolve", 0.5)
    lo1, hi1 = r1.w_low_mps2, r1.w_high_mps2
    assert np.all(np.abs(lo1) < np.abs(hi1)) and np.all(lo1 != 0)
    np.testing.assert_allclose(r5.w_low_mps2, 0.5 * lo1, rtol=1e-12)
    np.testing.assert_allclose(r5.w_high_mps2, hi1, rtol=1e-12)
    s5 = request("hybrid_single", 0.5)
    np.testing.assert_allclose(s5.w_low_mps2, lo1, rtol=1e-12)
    np.testing.assert_allclose(s5.w_high_mps2, hi1, rtol=1e-12)


def test_realised_plan_skips_only_a_re_plan_that_would_return_it(monkeypatch):
    """The all-fixed final re-plan of a hybrid law is skipped when the plan's duty cycles are
    already the realised schedule and no impulse is below the minimum bit (its optimum stays
    optimal with the duty fixed there). Checked against the re-plan itself: the same law and
    navigation with the shortcut disabled give the same commands and remaining delta-v."""
    import guidance.laws.base as base

    def fly(force_replan):
        calls = {"final": 0}
        orig = base.plan_deputy

        def counting(req, **kw):
            if kw.get("reuse") is not None and kw.get("min_bit", True):
                calls["final"] += 1
            return orig(req, **kw)

        with monkeypatch.context() as mp:
            mp.setattr(base, "plan_deputy", counting)
            if force_replan:
                mp.setattr(base, "_has_sub_bit", lambda dv, dv_min: True)
            law = load_law("hybrid_resolve")
            law.setup(mission())
            outs = [law.step(t, nav(t, np.array([0.0, 40.0 * k, 2.0, -1.0, 0.0, 0.0])))
                    for k, t in enumerate((0.0, 5400.0, 10800.0, 16200.0))]
        return outs, calls["final"]

    fast, n_fast = fly(False)
    slow, n_slow = fly(True)
    assert n_slow == 4 and n_fast < n_slow  # the shortcut was taken at least once
    for a, b in zip(fast, slow):
        np.testing.assert_allclose(a.diagnostics.dv_remaining_mps["d1"],
                                   b.diagnostics.dv_remaining_mps["d1"], rtol=1e-9, atol=1e-12)
        ca, cb = a.commands["d1"], b.commands["d1"]
        assert [(s.t_s, s.mode) for s in ca.mode_switches] == [(s.t_s, s.mode) for s in cb.mode_switches]
        assert len(ca.impulses) == len(cb.impulses)
        for ia, ib in zip(ca.impulses, cb.impulses):
            assert ia.t_s == ib.t_s
            np.testing.assert_allclose(ia.dv_rtn_mps, ib.dv_rtn_mps, rtol=1e-9, atol=1e-12)

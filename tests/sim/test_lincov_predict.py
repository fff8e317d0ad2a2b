"""The linear prediction of a scenario (sim.lincov, covey predict): no truth flown, no JVM.

What is checked against what:
- The source table: every source of the campaign error budget's list, with status linear /
  monte_carlo_only / off from the scenario's sigmas (the rule of sim/lincov/predict.py's docstring).
- The re-solve case of hybrid_resolve starts at the last cycle before the freeze (one chief orbit
  before the deadline, the law's default freeze_s; guidance/laws/resolve.py).
- In the planner's own linear model, a Monte Carlo of the demo plan with the drag-area source alone
  (4000 draws, fixed seed; the differential drag rebuilt from the scenario geometry's mode areas,
  sim.models.geometry, and guidance.density's drag formula) reproduces the predicted variances
  within the chi-square band of a sample variance ((N-1) s^2 / sigma^2 ~ chi2(N-1), Cochran's
  theorem, e.g. Casella & Berger, Statistical Inference, 2002, Thm 5.3.1 [memory for the number]),
  two-sided at 1e-4 per axis.
- The prediction file round-trips (h5py), and refuses a file of another schema.
- The comparison with a campaign, on a synthetic summary written with
  sim.campaign.summary.write_summary (a FIXTURE: final errors drawn from the predicted Gaussian, not
  flown): ratios inside the sampling band; errors twice as large give ratios near 0.5, outside it.
  The band holds 99 % of small Gaussian campaigns (its chi-square coverage, checked by simulation).
- Against the truth (flown Monte Carlo of at least 50 runs): NOT here; it needs the campaign runner.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.stats import chi2

from guidance import lincov as lc
from guidance.constants import R_EARTH_M
from guidance.density import differential_along_track_accel_mps2, relative_wind_speed_mps
from guidance.planning import chief_period_s, drag_matrices

from sim.campaign.summary import RunRow, scalar_metric_names, write_summary
from sim.cli.main import main
from sim.errors import LogFormatError, ScenarioError
from sim.lincov.compare import compare_with_summary, sigma_ratio_band
from sim.lincov.predict import plan_at_start, predict_scenario
from sim.lincov.store import read_prediction, write_prediction
from sim.models.geometry import mode_areas_m2
from sim.scenario.reader import load_scenario

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "scenarios" / "demo_formation.toml"


@pytest.fixture(scope="module")
def demo():
    cfg = load_scenario(DEMO)
    start = plan_at_start(cfg)
    return cfg, start, predict_scenario(cfg, 0.95, start)


def test_every_source_is_listed_with_its_status(demo):
    _, _, pred = demo
    assert tuple(pred.statuses) == lc.SOURCE_NAMES
    assert {k for k, v in pred.statuses.items() if v == "linear"} == set(lc.LINEAR_SOURCES)
    assert {k for k, v in pred.statuses.items() if v == "monte_carlo_only"} == {
        "pointing", "timing", "attitude", "solar_activity"}
    assert "absolute" in pred.notes["navigation"] and "monte_carlo_only" in pred.notes["navigation"]
    for dp in pred.deputies.values():
        for c in dp.cases.values():
            for s in c.sources:
                if s.status != "linear":
                    assert not np.any(s.cov_m2) and not np.any(s.mean_m)
            np.testing.assert_allclose(c.cov_m2, sum(s.cov_m2 for s in c.sources))
            assert np.all(np.linalg.eigvalsh(c.cov_m2) > -1e-9 * np.abs(c.cov_m2).max())
            np.testing.assert_allclose(c.half_width_m, np.sqrt(chi2.ppf(0.95, 6) * np.diag(c.cov_m2)))
    # the density bias is a fixed error (mean), the other sources none
    c = pred.deputies["beta"].case
    assert np.any(c.source("density").mean_m != 0) and not np.any(c.source("drag_area").mean_m)
    # perfect navigation and actuators, no density error: everything linear is off
    cfg2 = load_scenario(DEMO, {"navigation.perfect": True, "actuators.perfect": True,
                                "environment.density_error.sigma": 0.0,
                                "environment.density_error.bias": 0.0})
    p2 = predict_scenario(cfg2)
    assert [p2.statuses[s] for s in lc.SOURCE_NAMES] == ["off"] * 7 + ["monte_carlo_only"]
    assert not np.any(p2.deputies["beta"].case.cov_m2)


def test_resolve_case_starts_at_the_last_cycle_before_the_freeze(demo):
    cfg, start, pred = demo
    dp = pred.deputies["beta"]
    assert dp.primary == "after_last_resolve" and set(dp.cases) == {"open_loop", "after_last_resolve"}
    assert dp.cases["open_loop"].t_from_s == 0.0
    period = chief_period_s(start.plans["beta"].chief_oe)
    T = cfg.deputies[0].deadline_s
    cyc = cfg.guidance.cycle_s
    expected = cyc * np.floor((T - period) / cyc - 1e-12)
    assert dp.case.t_from_s == pytest.approx(expected) and expected == 226800.0
    # a single-solve law has the open-loop case only
    p1 = predict_scenario(load_scenario(DEMO, {"guidance.law": "hybrid_single"}))
    assert set(p1.deputies["beta"].cases) == {"open_loop"} and p1.deputies["beta"].primary == "open_loop"


def test_drag_area_prediction_matches_a_monte_carlo_of_the_demo_plan(demo):
    cfg, start, pred = demo
    law = start.law
    plan = law.deputies["beta"].plan
    req = plan.request
    lp = start.plans["beta"]
    sigma = cfg.actuators.drag_area_sigma
    cov = lc.drag_area_cov(lp, sigma)
    np.testing.assert_allclose(cov, pred.deputies["beta"].cases["open_loop"].source("drag_area").cov_m2)
    # the drag of the plan's realised duty cycles, rebuilt from the scenario geometry
    bus = cfg.deputies[0].bus
    areas = mode_areas_m2(bus)
    a = float(req.chief_oe[0])
    rho = float(law.density.density_kgpm3(a - R_EARTH_M))
    v = float(relative_wind_speed_mps(a, req.chief_oe[3]))
    b = {m: bus.cd * ar / bus.mass_kg for m, ar in areas.items()}
    d = plan.duty
    rng = np.random.default_rng(2024)
    n = 4000
    f = sigma * rng.standard_normal((n, 3))  # min_drag, max_drag of beta; nominal of the chief

    def w(fl, fh, fc):
        bd = (1 - d) * b["min_drag"] * (1 + fl) + d * b["max_drag"] * (1 + fh)
        return differential_along_track_accel_mps2(rho, v, bd, b["nominal"] * (1 + fc))

    w0 = w(0.0, 0.0, 0.0)
    dw = w(f[:, :1], f[:, 1:2], f[:, 2:3]) - w0  # (n, S)
    g = drag_matrices(req.chief_oe, req.seg_t0_s, req.seg_t1_s, req.deadline_s, req.t0_s, req.stm)
    x = a * dw @ g
    S = np.cov(x, rowvar=False)
    lo, hi = chi2.ppf(5e-5, n - 1) / (n - 1), chi2.ppf(1 - 5e-5, n - 1) / (n - 1)
    live = np.diag(cov) > 1e-12 * np.diag(cov).max()
    ratio = np.diag(S)[live] / np.diag(cov)[live]
    assert np.all((ratio > lo) & (ratio < hi)), ratio
    assert live.sum() == 5 and np.diag(S)[~live].max() < 1e-12  # dix: drag acts along-track only


def test_prediction_file_round_trip(demo, tmp_path):
    _, _, pred = demo
    p = write_prediction(tmp_path / "p.h5", pred)
    back = read_prediction(p)
    assert back.statuses == pred.statuses and back.notes == pred.notes
    assert back.confidence == pred.confidence and back.law == pred.law == "hybrid_resolve"
    for name, dp in pred.deputies.items():
        bd = back.deputies[name]
        assert bd.primary == dp.primary and set(bd.cases) == set(dp.cases)
        for cn, c in dp.cases.items():
            bc = bd.cases[cn]
            np.testing.assert_array_equal(bc.cov_m2, c.cov_m2)
            np.testing.assert_array_equal(bc.half_width_m, c.half_width_m)
            assert bc.dominant == c.dominant and bc.t_from_s == c.t_from_s
            for s, bs in zip(c.sources, bc.sources):
                assert s.name == bs.name and s.status == bs.status
                np.testing.assert_array_equal(s.cov_m2, bs.cov_m2)
    import h5py

    with h5py.File(tmp_path / "other.h5", "w") as f:
        f.attrs["schema"] = "covey.runlog"
    with pytest.raises(LogFormatError, match="not a covey prediction"):
        read_prediction(tmp_path / "other.h5")


def _summary(path, errors_by_deputy, n_failed=0):
    """A synthetic campaign summary (FIXTURE, not flown): the given final errors per deputy."""
    names = scalar_metric_names()
    n = len(next(iter(errors_by_deputy.values())))
    rows = []
    for k in range(n + n_failed):
        if k < n:
            mets = {d: {**{m: float("nan") for m in names}, "final_error_m": list(e[k])}
                    for d, e in errors_by_deputy.items()}
            rows.append(RunRow(index=k, seed=k, status="ok", metrics=mets))
        else:
            rows.append(RunRow(index=k, seed=k, status="failed", reason="fixture"))
    return write_summary(path / "summary.h5", rows, name="fixture", kind="monte_carlo",
                         master_seed=1, campaign_toml="# fixture\n")


def _draws(pred, n, scale, rng):
    out = {}
    for name, dp in pred.deputies.items():
        c = dp.case
        out[name] = c.mean_m + scale * rng.multivariate_normal(np.zeros(6), c.cov_m2, n, method="eigh")
    return out


def test_comparison_with_a_synthetic_campaign(demo, tmp_path):
    from sim.campaign.summary import read_summary

    _, _, pred = demo
    rng = np.random.default_rng(99)
    (tmp_path / "good").mkdir()
    _summary(tmp_path / "good", _draws(pred, 400, 1.0, rng), n_failed=3)
    comp = compare_with_summary(pred, read_summary(tmp_path / "good"))
    assert set(comp) == {"beta", "gamma"}
    for c in comp.values():
        assert c.n_runs == 400  # the failed runs (no final error) are left out
        assert np.all(c.consistent), (c.ratio, c.band_lo, c.band_hi)
        # means agree within 5 standard errors
        assert np.all(np.abs(c.measured_mean_m - c.predicted_mean_m) <= 5 * c.predicted_sigma_m / np.sqrt(400))
    (tmp_path / "wide").mkdir()
    _summary(tmp_path / "wide", _draws(pred, 400, 2.0, rng))
    comp2 = compare_with_summary(pred, read_summary(tmp_path / "wide"))
    for c in comp2.values():
        assert not np.any(c.consistent)
        np.testing.assert_allclose(c.ratio, 0.5, rtol=0.15)


def test_sampling_band_holds_its_probability():
    lo, hi = sigma_ratio_band(50, 0.01)
    rng = np.random.default_rng(5)
    x = rng.standard_normal((20000, 50))
    r = 1.0 / x.std(axis=1, ddof=1)  # true sigma 1 / sample sigma
    inside = np.mean((r >= lo) & (r <= hi))
    assert abs(inside - 0.99) < 5 * np.sqrt(0.99 * 0.01 / 20000)


def test_cli_predict_with_a_campaign_writes_next_to_its_summary(demo, tmp_path, capsys):
    _, _, pred = demo
    camp = tmp_path / "camp"
    camp.mkdir()
    _summary(camp, _draws(pred, 60, 1.0, np.random.default_rng(1)))
    assert main(["predict", str(DEMO), "--campaign", str(camp)]) == 0
    out = capsys.readouterr().out
    assert "needs Monte Carlo (not linear): pointing, timing, attitude, solar_activity" in out
    assert "vs Monte Carlo (60 runs)" in out and "ratio" in out
    back = read_prediction(camp / "prediction.h5")
    assert back.attrs["campaign"].endswith("summary.h5")
    assert main(["predict", str(DEMO), "-o", str(tmp_path / "x.h5"), "--confidence", "0.99"]) == 0
    assert read_prediction(tmp_path / "x.h5").confidence == 0.99


@pytest.mark.parametrize("argv,msg", [
    (["--confidence", "1.2"], "--confidence"),
    (["--set", "guidance.law=drag_bang_bang"], "guidance.law"),
    (["--set", "guidance.law=none"], "guidance.law"),
    (["--campaign", "no/such/folder"], "--campaign"),
])
def test_cli_predict_bad_input_is_exit_2(argv, msg, tmp_path, capsys):
    assert main(["predict", str(DEMO), "-o", str(tmp_path / "p.h5"), *argv]) == 2
    err = capsys.readouterr().err
    assert err.startswith("covey: ") and msg in err and len(err.strip().splitlines()) == 1


def test_free_drift_has_no_plan():
    with pytest.raises(ScenarioError, match="guidance.law"):
        plan_at_start(load_scenario(REPO / "scenarios" / "demo_drift.toml"))

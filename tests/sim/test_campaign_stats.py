"""Campaign statistics and what ``covey summary`` computes from a summary file (no JVM).

Sources: the per-axis bound sqrt(c P_ii) is the support function of the ellipsoid
{x : x^T P^-1 x <= c} along an axis (Boyd and Vandenberghe, Convex Optimization, 2004, the
support function of an ellipsoid [memory for the section]); it is checked here against a brute-force
search over points of the ellipsoid surface, x = sqrt(c) L u with P = L L^T and u on the unit
sphere. The Clopper-Pearson interval (Biometrika 26(4), 1934) is checked against its beta-quantile
form and its closed form for zero successes, 1 - (alpha/2)^(1/n); the Wilson score interval
(JASA 22, 1927) against its closed formula; the chi-square quantile against scipy.stats.chi2; the
percentiles against a hand example (numpy's linear interpolation, Hyndman and Fan type 7, The
American Statistician 50(4), 1996).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import stats

from sim.campaign.report import build_report, render
from sim.campaign.stats import axis_bounds, paired_rms, percentiles, rss, success_interval, support
from sim.campaign.summary import RunRow, read_summary, scalar_metric_names, write_summary


def test_axis_bound_agrees_with_a_brute_force_search_over_the_ellipsoid():
    rng = np.random.default_rng(1)
    for n in (2, 3, 6):
        A = rng.normal(size=(n, n))
        P = A @ A.T + 0.1 * np.eye(n)
        c = stats.chi2.ppf(0.95, n)
        L = np.linalg.cholesky(P)
        if n == 2:
            th = np.linspace(0, 2 * np.pi, 200001)
            u = np.stack([np.cos(th), np.sin(th)])
        elif n == 3:
            th, ph = np.meshgrid(np.linspace(0, np.pi, 1201), np.linspace(0, 2 * np.pi, 2401))
            u = np.stack([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)]).reshape(3, -1)
        else:
            u = rng.normal(size=(n, 400000))
            u /= np.linalg.norm(u, axis=0)
        surface = np.sqrt(c) * L @ u
        for i in range(n):
            b = support(P, c, np.eye(n)[i])
            assert b == pytest.approx(np.sqrt(c * P[i, i]), rel=1e-12)
            brute = surface[i].max()
            assert brute <= b * (1 + 1e-12)  # no surface point beyond the bound
            assert brute >= b * (1 - (1e-6 if n < 6 else 2e-2)), (n, i, brute, b)
        # along a general direction too
        d = rng.normal(size=n)
        d /= np.linalg.norm(d)
        assert (d @ surface).max() <= support(P, c, d) * (1 + 1e-12)


def test_axis_bounds_from_samples():
    rng = np.random.default_rng(2)
    X = rng.normal(size=(500, 6)) * [1, 10, 1, 1, 2, 2] + [0, 5, 0, 0, 0, 0]
    b = axis_bounds(X, 0.95)
    c = stats.chi2.ppf(0.95, 6)
    assert b["c"] == pytest.approx(c) and b["n"] == 500
    np.testing.assert_allclose(b["half"], np.sqrt(c * np.var(X, axis=0, ddof=1)), rtol=1e-12)
    np.testing.assert_allclose(b["upper"] - b["lower"], 2 * b["half"])
    np.testing.assert_allclose(b["mean"], X.mean(axis=0))
    # about 95 % of Gaussian samples lie inside the 6-D ellipsoid, so a larger share lies inside
    # the per-axis box it spans
    inside = np.all((X >= b["lower"]) & (X <= b["upper"]), axis=1).mean()
    assert inside > 0.95
    one = axis_bounds(X[:1], 0.95)
    assert one["n"] == 1 and np.all(np.isnan(one["half"]))
    with_nan = np.vstack([X[:10], np.full((1, 6), np.nan)])
    assert axis_bounds(with_nan)["n"] == 10


def test_success_intervals():
    n, k, conf = 40, 37, 0.95
    a = 1 - conf
    lo, hi = success_interval(k, n, conf, "clopper_pearson")
    assert lo == pytest.approx(stats.beta.ppf(a / 2, k, n - k + 1), rel=1e-9)
    assert hi == pytest.approx(stats.beta.ppf(1 - a / 2, k + 1, n - k), rel=1e-9)
    lo0, hi0 = success_interval(0, 20, conf, "clopper_pearson")
    assert lo0 == 0.0 and hi0 == pytest.approx(1 - (a / 2) ** (1 / 20), rel=1e-9)
    z = stats.norm.ppf(1 - a / 2)
    p = k / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z / (1 + z * z / n) * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    wl, wh = success_interval(k, n, conf, "wilson")
    assert wl == pytest.approx(centre - half, rel=1e-9) and wh == pytest.approx(centre + half, rel=1e-9)
    assert lo < wl and hi > wh  # the exact interval is the wider here
    assert all(np.isnan(success_interval(0, 0)))


def test_percentiles_and_rms():
    p = percentiles(np.r_[np.arange(1.0, 101.0), np.nan])
    assert p["n"] == 100 and p["p50"] == 50.5 and p["p90"] == pytest.approx(90.1)
    assert p["p99"] == pytest.approx(99.01) and p["max"] == 100.0
    assert np.isnan(percentiles([np.nan])["p50"]) and percentiles([])["n"] == 0
    assert paired_rms([1.0, 3.0, np.nan], [0.0, 0.0, 1.0]) == pytest.approx(np.sqrt(5.0))
    assert rss([3.0, 4.0, np.nan]) == 5.0


# ------------------------------------------------------------------------------------------
# The report of a summary file
# ------------------------------------------------------------------------------------------


def _metrics(err, dv):
    m = {n: 0.0 for n in scalar_metric_names()}
    m["final_error_m"] = list(map(float, err))
    m["dv_total_mps"] = float(dv)
    m["final_error_norm_m"] = float(np.linalg.norm(err))
    return m


def _write(tmp_path, rows, kind, **attrs):
    a = dict(tolerance_m=np.array([5.0, 50.0, 5.0, 5.0, 5.0, 5.0]), dv_max_mps=float("nan"),
             confidence=0.95, interval="clopper_pearson", base_scenario="x.toml")
    a.update(attrs)
    write_summary(tmp_path / "summary.h5", rows, name="t", kind=kind, master_seed=1,
                  campaign_toml="", extra_attrs=a)
    return read_summary(tmp_path)


def test_monte_carlo_report(tmp_path):
    rng = np.random.default_rng(3)
    rows = []
    for k in range(20):
        err = rng.normal(size=6) * [1, 20, 1, 1, 1, 1]
        if k == 4:
            err[1] = 80.0  # outside the box
        status = "failed" if k == 7 else "ok"
        rows.append(RunRow(index=k, seed=k, status=status, reason="boom" if k == 7 else "",
                           draw_index=k, metrics={} if k == 7 else
                           {"beta": _metrics(err, 0.1 + 0.01 * k)}))
    rows.append(RunRow(index=20, seed=20, status="missing", reason="no complete run log", draw_index=20))
    s = _write(tmp_path, rows, "monte_carlo")
    rep = build_report(s)
    sc, = rep["success"]
    inside = sum(1 for r in rows if r.metrics and np.all(np.abs(r.metrics["beta"]["final_error_m"])
                                                        <= [5, 50, 5, 5, 5, 5]))
    assert sc["n"] == 20 and sc["successes"] == inside and inside <= 18  # failed counts, missing not
    assert (sc["ci_low"], sc["ci_high"]) == pytest.approx(success_interval(inside, 20))
    dv = next(r for r in rep["stats"] if r["quantity"] == "dv_total_mps")
    vals = [0.1 + 0.01 * k for k in range(20) if k != 7]
    assert dv["n"] == 19 and dv["p95"] == pytest.approx(np.percentile(vals, 95)) and dv["max"] == pytest.approx(0.29)
    # a tighter box and a delta-v limit from the command line
    rep2 = build_report(s, tolerance_m=[1e3] * 6, dv_max_mps=0.2)
    assert rep2["success"][0]["successes"] == sum(1 for v in vals if v <= 0.2)
    b = [r for r in rep["bounds"] if r["component"] == "err_dlambda_m"][0]
    X = np.array([r.metrics["beta"]["final_error_m"] for r in rows if r.metrics])
    assert b["upper"] == pytest.approx(X[:, 1].mean() + np.sqrt(stats.chi2.ppf(0.95, 6) * X[:, 1].var(ddof=1)))
    assert {r["index"] for r in rep["failed"]} == {7, 20}
    text = render(rep)
    assert "beta, all runs:" in text and "run 7 failed: boom" in text and "not flight certification" in text
    assert json.loads(render(rep, "json"))["campaign"]["counts"] == {"ok": 19, "stopped": 0,
                                                                     "failed": 1, "missing": 1}


def test_sweep_report_has_one_row_per_grid_point(tmp_path):
    rows = []
    for g, coef in enumerate((0.5, 1.0, 2.0)):
        for d in range(3):
            err = np.zeros(6)
            err[1] = 120.0 * abs(coef - 1.0) + d  # grid point 1.0 is the best (box: 50 m)
            rows.append(RunRow(index=3 * g + d, seed=d, status="ok", case=f"c={coef:g}",
                               grid_index=g, draw_index=d, params={"c": coef},
                               metrics={"beta": _metrics(err, 0.1 * coef)}))
    s = _write(tmp_path, rows, "sweep", sweep_keys_json='["c"]')
    rep = build_report(s)
    assert [r["group"] for r in rep["grid"]] == ["c=0.5", "c=1", "c=2"]
    assert [r["successes"] for r in rep["grid"]] == [0, 3, 0]
    assert rep["grid"][1]["err_norm_max_m"] == 2.0
    text = render(rep)
    assert "one row per grid point" in text and "c=0.5" in text


def test_error_budget_report(tmp_path):
    """all_off has no spread; source a moves da by +-1 m, source b moves dlambda by 3 m and dv;
    all_on has both: its contribution is their root-sum-square."""
    rows = []
    cases = ["all_off", "a", "b", "all_on"]
    for c, case in enumerate(cases):
        for d in range(4):
            err = np.array([0.5, 10.0, 0, 0, 0, 0])
            dv = 0.2
            if case in ("a", "all_on"):
                err[0] += (-1) ** d
            if case in ("b", "all_on"):
                err[1] += 3.0
                dv += 0.01 * d
            rows.append(RunRow(index=4 * c + d, seed=d, status="ok", case=case, draw_index=d,
                               metrics={"beta": _metrics(err, dv)}))
    s = _write(tmp_path, rows, "error_budget", cases_json=json.dumps(cases),
               skipped_sources_json=json.dumps({"pointing": "off in the base"}))
    rep = build_report(s)
    r = {x["case"]: x for x in rep["budget"]}
    assert r["all_off"]["std_err_da_m"] == 0.0 and r["all_off"]["contribution_err_da_m"] == 0.0
    assert r["a"]["contribution_err_da_m"] == 1.0 and r["a"]["contribution_err_dlambda_m"] == 0.0
    assert r["b"]["contribution_err_dlambda_m"] == 3.0 and r["b"]["contribution_err_da_m"] == 0.0
    assert r["b"]["contribution_dv_total_mps"] == pytest.approx(np.sqrt(np.mean((0.01 * np.arange(4)) ** 2)))
    assert r["all_on"]["contribution_err_da_m"] == 1.0 and r["all_on"]["contribution_err_dlambda_m"] == 3.0
    assert r["rss_of_sources"]["contribution_err_da_m"] == 1.0
    allon = np.hypot(r["all_on"]["contribution_err_da_m"], r["all_on"]["contribution_err_dlambda_m"])
    rs = np.hypot(r["rss_of_sources"]["contribution_err_da_m"], r["rss_of_sources"]["contribution_err_dlambda_m"])
    assert allon == pytest.approx(rs)
    text = render(rep)
    assert "contribution of each source" in text and "source pointing not flown" in text
    assert "success per case" in text
    md = render(rep, "markdown")
    assert "### beta: error budget" in md and "| case |" in md
    lines = render(rep, "csv").splitlines()
    assert "budget,a,beta,err_da_m,contribution,1.0" in lines

"""The verification report (``covey report``) and the export tables, from run logs flown on the
Keplerian stand-in truth (tests/conftest.py FakeTruthWorld, no JVM) and from synthetic campaign
summaries (tests/sim/report_fixtures.py: invented numbers, labelled test fixtures).

Sources of the checks:
- Confidence ellipsoid of a Gaussian: ``x^T P^-1 x`` is chi-square with n degrees of freedom, so the
  p-region is ``x^T P^-1 x <= chi2.ppf(p, n)`` and its support function along a unit vector u is
  ``sqrt(chi2.ppf(p, n) u^T P u)`` (Boyd & Vandenberghe, Convex Optimization, Cambridge 2004,
  section 8.4 / example 3.33 on support functions of ellipsoids [memory]); chi-square quantiles from
  scipy.stats.chi2 (the reference library). The fraction of Gaussian draws inside it is binomial
  (p, N): checked within 4 standard errors.
- Sample covariance, percentiles and empirical CDFs: numpy (np.cov, np.percentile, np.sort).
- PNG file structure (signature, IHDR, chunk types tEXt/tIME): the PNG specification (W3C
  Recommendation, Portable Network Graphics, 2nd ed., 2003); PDF structure (header ``%PDF-``,
  trailer ``%%EOF``, ``/CreationDate`` in the info dictionary): ISO 32000-1:2008.
- booktabs rules (\\toprule, \\midrule, \\bottomrule): the booktabs package documentation (Fear,
  CTAN) [memory].
- Everything else (which figures a log gives, that the drawn arrays are the log's, file layout,
  CLI exit codes): covey's own contract (common practice, no source).
"""

from __future__ import annotations

import base64
import csv
import io
import json
import re
import subprocess
import sys
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.stats import chi2

from sim.log.reader import read_log
from sim.loop.run import run_scenario
from sim.models.frames import relative_rtn
from sim.report.build import build_report
from sim.report.rundata import load_run
from sim.report.single import RUN_FIGURES
from sim.report.stats import axis_bounds, ecdf, ellipse_points, sample_mean_cov
from sim.report.verification import VerificationRow, read_verification
from sim.scenario.reader import load_scenario

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(Path(__file__).resolve().parent))
from report_fixtures import DEPUTIES, SWEEP_KEY, SWEEP_VALUES, synthetic_campaign  # noqa: E402

ROWS = [VerificationRow("REQ-DV", "total delta-v of every deputy at most 1.2 m/s", 1.05, 1.2, 0.15,
                        "pass", "m/s", "dv_total_mps"),
        VerificationRow("REQ-ERR", "final error norm at most 60 m", 70.0, 60.0, -10.0, "fail", "m",
                        "final_error_norm_m", "gamma")]


def _fly_fake(cfg, path):
    import sim.loop.run
    from conftest import FakeTruthWorld
    from guidance.roe import oe_to_roe, rv_to_oe

    boot = SimpleNamespace(data_path="/fake", data_source="fake", orekit_version="fake-13",
                           java_version="fake", jpype_version="fake",
                           data_files=(("CSSI-Space-Weather-Data/SpaceWeather-All-v1.2.txt", 3,
                                        "2025-01-02T03:04:05Z"),))
    api = SimpleNamespace(boot=lambda data_path=None, jvm_options=None: boot, TruthWorld=FakeTruthWorld,
                          mean_elements=lambda t, r, v, epoch: rv_to_oe(r, v),
                          mean_roe_m=lambda c, d: oe_to_roe(c, d) * np.asarray(c)[..., :1])
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(sim.loop.run, "truth_backend", lambda: api)
        s = run_scenario(cfg, path)
    assert s.status == "ok", s.reason
    return s.path


@pytest.fixture(scope="module")
def logs(tmp_path_factory):
    """Half-day fake-truth runs: the demo closed loop (hybrid_resolve), the same with
    propulsion_only (a baseline), and a free drift (ideal_pair: no guidance, no targets)."""
    d = tmp_path_factory.mktemp("report_logs")
    demo = REPO / "scenarios" / "demo_formation.toml"
    over = {"run.duration_days": 0.5, "deputies[0].deadline_days": 0.5,
            "deputies[1].deadline_days": 0.5}
    closed = _fly_fake(load_scenario(demo, {**over, "guidance.law": "hybrid_resolve"}), d / "closed.h5")
    base = _fly_fake(load_scenario(demo, {**over, "guidance.law": "propulsion_only"}), d / "base.h5")
    drift = _fly_fake(load_scenario(REPO / "scenarios" / "ideal_pair.toml",
                                    {"run.duration_days": 0.5}), d / "drift.h5")
    return SimpleNamespace(closed=closed, base=base, drift=drift, dir=d)


@pytest.fixture(scope="module")
def report(logs, tmp_path_factory):
    """The report of the closed-loop run, overlaid on the propulsion-only run as its baseline."""
    out = tmp_path_factory.mktemp("report_closed")
    return build_report(logs.closed, out, requirements=ROWS, baseline=logs.base)


@pytest.fixture(scope="module")
def campaigns(logs, tmp_path_factory):
    d = tmp_path_factory.mktemp("campaigns")
    out = {}
    for kind in ("monte_carlo", "sweep", "error_budget"):
        synthetic_campaign(d / kind, kind, n_runs=40, seed=3, run_log=logs.closed)
        synthetic_campaign(d / f"{kind}_base", kind, n_runs=40, seed=4, scale=1.5)
        out[kind] = build_report(d / kind, d / f"out_{kind}", requirements=ROWS,
                                 baseline=d / f"{kind}_base", dpi=80)
    out["dir"] = d
    return out


# ------------------------------------------------------------------------------------------
# File checks
# ------------------------------------------------------------------------------------------


def _png_chunks(data: bytes) -> list[tuple[bytes, bytes]]:
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, 5.2)
    out, k = [], 8
    while k < len(data):
        n = int.from_bytes(data[k:k + 4], "big")
        out.append((data[k + 4:k + 8], data[k + 8:k + 8 + n]))
        k += 12 + n
    return out


def _check_png(path: Path) -> None:
    from PIL import Image

    data = path.read_bytes()
    chunks = _png_chunks(data)
    assert chunks[0][0] == b"IHDR" and chunks[-1][0] == b"IEND"
    assert b"tIME" not in [c for c, _ in chunks]  # no modification time chunk (PNG spec 11.3.6.1)
    texts = [v for c, v in chunks if c in (b"tEXt", b"iTXt", b"zTXt")]
    assert not any(re.search(rb"\d{4}-\d{2}-\d{2}", t) for t in texts), texts  # no dates
    with Image.open(path) as im:
        im.load()
        a = np.asarray(im.convert("L"), float)
    assert a.shape[0] > 60 and a.shape[1] >= 300
    assert a.var() > 0 and np.mean(a < 200) > 0.005  # drawn on, not blank


def _check_pdf(path: Path) -> None:
    data = path.read_bytes()
    assert data.startswith(b"%PDF-") and data.rstrip().endswith(b"%%EOF")  # ISO 32000-1, 7.5
    assert b"/Type /Page" in data and b"/CreationDate" not in data


# ------------------------------------------------------------------------------------------
# Single run
# ------------------------------------------------------------------------------------------


def test_run_report_has_every_figure_as_png_and_pdf(report):
    assert [f.name for f in report.figures] == list(RUN_FIGURES)
    assert report.skipped == []
    for n, f in enumerate(report.figures, start=1):
        assert f.number == n and f.files["png"].name == f"fig{n:02d}_{f.name}.png"
        _check_png(f.files["png"])
        _check_pdf(f.files["pdf"])
        assert f.files["png"].read_bytes() == f.png_bytes
        # every caption says what, units and frame (covey's caption contract)
        assert len(f.caption) > 80 and re.search(r"\b(m|m/s|mm/s|kg/m³|hours|days)\b", f.caption), f.caption
    idx = list(csv.DictReader((report.out_dir / "figures" / "index.csv").open()))
    assert [r["name"] for r in idx] == list(RUN_FIGURES)
    tex = (report.out_dir / "figures" / "figures.tex").read_text()
    assert tex.isascii()
    assert tex.count("\\begin{figure}") == len(RUN_FIGURES) and "fig01_roe_planes.pdf" in tex


def test_run_report_html_is_self_contained_with_provenance(report, logs):
    page = report.html.read_text()
    log = read_log(logs.closed)
    imgs = re.findall(r'<img src="data:image/png;base64,([A-Za-z0-9+/=]+)"', page)
    assert len(imgs) == len(report.figures)
    for b64, f in zip(imgs, report.figures):
        assert base64.b64decode(b64) == f.files["png"].read_bytes()
    # no external resource and no script: opens without a network
    assert not re.search(r"(src|href)\s*=\s*\"(https?:|//|file:)", page)
    assert "<script" not in page and "<link" not in page and "@import" not in page
    for text in (log.meta["covey_version"], log.meta["git_commit"], "fake-13",
                 "SpaceWeather-All-v1.2.txt", "2025-01-02T03:04:05Z",
                 "CSSI space-weather file of the Orekit data", "not flight certification",
                 "verification and validation", "operational safety practice", "Verification matrix",
                 "REQ-DV", "REQ-ERR"):
        assert text in page, text
    assert page.count("Figure ") >= len(report.figures)
    assert '<tr class="fail">' in page and '<tr class="pass">' in page


def test_run_report_tables_csv_and_latex(report, logs):
    log = read_log(logs.closed)
    tdir = report.out_dir / "tables"
    names = {t.name for t in report.tables}
    assert {"scenario", "provenance", "verification", "metrics", "final_roe", "impulses",
            "navigation", "data_files"} <= names
    for t in report.tables:
        tex = (tdir / f"{t.name}.tex").read_text()
        assert tex.isascii(), t.name  # symbols as LaTeX math (pdflatex reads it without inputenc)
        assert tex.index("\\toprule") < tex.index("\\midrule") < tex.index("\\bottomrule")
        assert tex.count("\\\\") == len(t.rows) + 1  # header + one line per row
        assert list(csv.reader((tdir / f"{t.name}.csv").open()))[0] == [c.key for c in t.columns]
    rows = {r["deputy"]: r for r in csv.DictReader((tdir / "metrics.csv").open())}
    for d in ("beta", "gamma"):
        a = log.attrs(f"metrics/{d}")
        assert float(rows[d]["dv_total_mps"]) == a["dv_total_mps"]  # full precision in the CSV
        assert int(rows[d]["n_burns"]) == a["n_burns"]
        assert float(rows[d]["err_dlambda_m"]) == log.get(f"metrics/{d}/final_error_m")[1]
    ver = list(csv.DictReader((tdir / "verification.csv").open()))
    assert [r["id"] for r in ver] == ["REQ-DV", "REQ-ERR"] and ver[1]["verdict"] == "fail"


def test_run_figures_draw_the_logged_arrays(report, logs):
    log = read_log(logs.closed)
    run = load_run(logs.closed)
    roe = log.get("spacecraft/beta/mean_roe_m")
    tgt = run.targets["beta"]
    f = report.figure("roe_error").data
    np.testing.assert_array_equal(f["candidate/beta/error_m/1"], roe[:, 1] - tgt[1])
    np.testing.assert_array_equal(report.figure("roe_planes").data["candidate/beta/roe_m"], roe)
    # cumulative delta-v: the executed impulses of the command log (the fake truth logs no /maneuvers)
    names = np.array(log.get("commands/impulses/name"))
    st = np.array(log.get("commands/impulses/status"))
    sel = (names == "beta") & np.isin(st, ("executed", "clipped_max"))
    t = log.get("commands/impulses/t_exec_s")[sel]
    mag = np.linalg.norm(log.get("commands/impulses/dv_exec_rtn_mps")[sel], axis=1)[np.argsort(t, kind="stable")]
    d = report.figure("delta_v").data
    np.testing.assert_allclose(d["candidate/beta/dv_cum_mps"], np.cumsum(mag), rtol=0, atol=1e-15)
    assert d["candidate/beta/dv_cum_mps"][-1] == pytest.approx(log.attrs("metrics/beta")["dv_total_mps"], rel=1e-12)
    # relative motion: deputy minus chief in the chief's RTN axes (sim.models.frames)
    rel = relative_rtn(log.get("spacecraft/alpha/truth/r_eci_m"), log.get("spacecraft/alpha/truth/v_eci_mps"),
                       log.get("spacecraft/gamma/truth/r_eci_m"))
    np.testing.assert_array_equal(report.figure("rtn_motion").data["candidate/gamma/rel_rtn_m"], rel)
    # remaining delta-v as the law predicted it
    np.testing.assert_array_equal(report.figure("dv_remaining").data["candidate/beta/dv_remaining_mps"],
                                  log.get("guidance/deputies/beta/dv_remaining_mps"))
    from sim.report.single import fig_roe_history

    hist = fig_roe_history([load_run(logs.drift)])  # a free drift without targets
    np.testing.assert_array_equal(hist.data["ideal_pair/beta/roe_m/1"],
                                  read_log(logs.drift).get("spacecraft/beta/mean_roe_m")[:, 1])
    nav = report.figure("nav_relative").data
    np.testing.assert_array_equal(nav["candidate/relative/beta/err_dr_rtn_m/T"],
                                  log.get("navigation/relative/beta/err_dr_rtn_m")[:, 1])


def test_figures_are_deterministic(report, logs, tmp_path):
    again = build_report(logs.closed, tmp_path, requirements=ROWS, baseline=logs.base)
    for a, b in zip(report.figures, again.figures):
        assert a.name == b.name and sorted(a.data) == sorted(b.data)
        for k in a.data:
            np.testing.assert_array_equal(a.data[k], b.data[k], err_msg=k)
        assert a.files["png"].read_bytes() == b.files["png"].read_bytes(), a.name
        assert a.files["pdf"].read_bytes() == b.files["pdf"].read_bytes(), a.name
    assert report.html.read_text().replace(str(report.out_dir), "") == \
        again.html.read_text().replace(str(again.out_dir), "")


def test_free_drift_log_gives_the_figures_that_apply(logs, tmp_path, capsys):
    from sim.cli.main import main

    log = read_log(logs.drift)
    assert "guidance" not in log and "navigation" not in log and "commands" not in log
    assert main(["report", str(logs.drift), "-o", str(tmp_path), "--no-pdf", "--dpi", "50"]) == 0
    o = capsys.readouterr().out
    assert "report: " in o and "not drawn: Predicted remaining delta-v" in o
    idx = list(csv.DictReader((tmp_path / "figures" / "index.csv").open()))
    assert [r["name"] for r in idx if r["number"]] == ["roe_planes", "roe_history", "modes", "density",
                                                       "rtn_motion"]
    assert {r["name"]: r["not_drawn_reason"] for r in idx if not r["number"]} == {
        "delta_v": "no impulse was executed (free drift, or no burns)",
        "dv_remaining": "no /guidance group (free drift: no guidance law)",
        "nav_absolute": "no /navigation group (free drift: no guidance law)",
        "nav_relative": "no /navigation group (free drift: no guidance law)"}
    page = (tmp_path / "report.html").read_text()
    assert "Figures not drawn" in page and "no /guidance group" in page
    assert page.count("data:image/png;base64,") == 5
    assert not list((tmp_path / "figures").glob("*.pdf"))
    for p in sorted((tmp_path / "figures").glob("*.png")):
        _check_png(p)


def test_baseline_overlay_and_compare_table(report, logs):
    cand, base = read_log(logs.closed), read_log(logs.base)
    d = report.figure("delta_v").data
    assert "candidate/beta/dv_cum_mps" in d and "baseline/beta/dv_cum_mps" in d
    np.testing.assert_array_equal(report.figure("roe_planes").data["baseline/gamma/roe_m"],
                                  base.get("spacecraft/gamma/mean_roe_m"))
    rows = list(csv.DictReader((report.out_dir / "tables" / "compare.csv").open()))
    r = [x for x in rows if x["deputy"] == "beta" and x["metric"] == "Δv"][0]
    a, b = cand.attrs("metrics/beta")["dv_total_mps"], base.attrs("metrics/beta")["dv_total_mps"]
    assert a != b and float(r["candidate"]) == a and float(r["baseline"]) == b
    assert float(r["difference"]) == pytest.approx(a - b, abs=1e-15)
    page = report.html.read_text()
    assert "Candidate versus baseline" in page and "base.h5" in page


# ------------------------------------------------------------------------------------------
# Campaigns
# ------------------------------------------------------------------------------------------


def test_campaign_reports_have_their_figures(campaigns):
    expect = {"monte_carlo": ["final_error_scatter", "cdf", "cdf_components"],
              "sweep": ["sweep"], "error_budget": ["error_budget"]}
    for kind, names in expect.items():
        res = campaigns[kind]
        assert [f.name for f in res.figures] == names, kind
        for f in res.figures:
            _check_png(f.files["png"])
            _check_pdf(f.files["pdf"])
        page = res.html.read_text()
        assert page.count("data:image/png;base64,") == len(names)
        assert "fake-13" in page and "not flight certification" in page and "REQ-DV" in page


def test_scatter_ellipse_and_bounds(campaigns):
    from sim.campaign.summary import read_summary

    res = campaigns["monte_carlo"]
    s = read_summary(campaigns["dir"] / "monte_carlo")
    ok = np.array([x == "ok" for x in s.runs["status"]])
    p = 0.95
    for dep in DEPUTIES:
        fe = s.metrics[dep]["final_error_m"][ok]
        key = f"candidate/{dep}/dex-dey"
        data = res.figure("final_error_scatter").data
        np.testing.assert_allclose(data[f"{key}/cov_m2"], np.cov(fe[:, [2, 3]], rowvar=False), rtol=1e-12)
        ell, m, cov = data[f"{key}/ellipse_m"], data[f"{key}/mean_m"], data[f"{key}/cov_m2"]
        # every boundary point at Mahalanobis radius^2 = chi2.ppf(p, 2)
        dd = ell - m
        np.testing.assert_allclose(np.einsum("ki,ij,kj->k", dd, np.linalg.inv(cov), dd), chi2.ppf(p, 2), rtol=1e-9)
        # the per-axis bound is the ellipse's extent along the axis (support function)
        np.testing.assert_allclose(np.max(np.abs(dd), axis=0), data[f"{key}/bound_m"], rtol=2e-4)
        np.testing.assert_allclose(data[f"{key}/bound_m"], np.sqrt(chi2.ppf(p, 2) * np.diag(cov)), rtol=1e-12)
        # the 6-D bound of the table
        rows = [r for r in csv.DictReader((res.out_dir / "tables" / "performance_bounds.csv").open())
                if r["deputy"] == dep]
        var = np.var(fe, axis=0, ddof=1)
        np.testing.assert_allclose([float(r["bound_6d_m"]) for r in rows], np.sqrt(chi2.ppf(p, 6) * var), rtol=1e-12)
        np.testing.assert_allclose([float(r["bound_1d_m"]) for r in rows], np.sqrt(chi2.ppf(p, 1) * var), rtol=1e-12)


def test_confidence_ellipse_covers_p_of_gaussian_draws():
    rng = np.random.default_rng(11)
    P = np.array([[4.0, 1.5], [1.5, 1.0]])
    x = rng.multivariate_normal([1.0, -2.0], P, size=20000)
    m, S = sample_mean_cov(x)
    for p in (0.5, 0.9, 0.99):
        d = x - m
        inside = np.einsum("ki,ij,kj->k", d, np.linalg.inv(S), d) <= chi2.ppf(p, 2)
        se = np.sqrt(p * (1 - p) / x.shape[0])
        assert abs(inside.mean() - p) < 4 * se + 1e-3, (p, inside.mean())
        # bounds: the fraction of draws with |x_i - m_i| <= bound along one axis at n = 1 is p
        b1 = axis_bounds(S, p, 1)
        assert abs(np.mean(np.abs(d[:, 0]) <= b1[0]) - p) < 4 * se + 1e-3
    e = ellipse_points(m, S, 0.9, 2001)
    np.testing.assert_allclose(np.max(e, axis=0) - m, axis_bounds(S, 0.9, 2), rtol=1e-5)


def test_cdf_sweep_budget_values(campaigns):
    from sim.campaign.summary import read_summary

    s = read_summary(campaigns["dir"] / "monte_carlo")
    ok = np.array([x == "ok" for x in s.runs["status"]])
    cdf = campaigns["monte_carlo"].figure("cdf")
    xs, F = ecdf(s.metric("beta", "dv_total_mps")[ok])
    np.testing.assert_array_equal(cdf.data["candidate/beta/dv_total_mps/x"], np.sort(s.metric("beta", "dv_total_mps")[ok]))
    np.testing.assert_array_equal(cdf.data["candidate/beta/dv_total_mps/F"], np.arange(1, ok.sum() + 1) / ok.sum())
    # the requirement limits are drawn: a vertical line at each limit naming the metric
    ax_dv, ax_err = cdf.fig.axes[:2]
    def vlines(ax):
        return {float(ln.get_xdata()[0]) for ln in ax.get_lines()
                if len(set(np.atleast_1d(ln.get_xdata()).tolist())) == 1 and len(ln.get_xdata()) == 2}
    assert 1.2 in vlines(ax_dv) and 60.0 in vlines(ax_err) and 60.0 not in vlines(ax_dv)
    # sweep: percentiles per grid point, x the swept value
    sw = read_summary(campaigns["dir"] / "sweep")
    okw = np.array([x == "ok" for x in sw.runs["status"]])
    data = campaigns["sweep"].figure("sweep").data
    np.testing.assert_array_equal(data["candidate/gamma/dv_total_mps/x"], SWEEP_VALUES)
    gi = sw.runs["grid_index"]
    v = sw.metric("gamma", "dv_total_mps")
    want = [np.percentile(v[(gi == g) & okw], [5, 25, 50, 75, 95]) for g in range(len(SWEEP_VALUES))]
    np.testing.assert_allclose(data["candidate/gamma/dv_total_mps/percentiles_5_25_50_75_95"], want, rtol=1e-12)
    assert SWEEP_KEY in campaigns["sweep"].figure("sweep").caption
    # error budget: RMS per case and component
    eb = read_summary(campaigns["dir"] / "error_budget")
    okb = np.array([x == "ok" for x in eb.runs["status"]])
    case = np.array(eb.runs["case"])
    rms = campaigns["error_budget"].figure("error_budget").data["candidate/beta/rms_m"]
    fe = eb.metrics["beta"]["final_error_m"]
    for i, c in enumerate(["all", "navigation", "actuators", "density"]):
        x = fe[(case == c) & okb]
        np.testing.assert_allclose(rms[i, :6], np.sqrt(np.mean(x ** 2, axis=0)), rtol=1e-12)
    assert rms[0, 6] > rms[3, 6]  # the fixture's "all" case has the widest spread


def test_campaign_compare_table(campaigns):
    from sim.campaign.summary import read_summary

    d = campaigns["dir"]
    a, b = read_summary(d / "monte_carlo"), read_summary(d / "monte_carlo_base")
    rows = list(csv.DictReader((campaigns["monte_carlo"].out_dir / "tables" / "compare.csv").open()))
    r = [x for x in rows if x["deputy"] == "gamma" and x["metric"] == "|final error|"][0]
    va = a.metric("gamma", "final_error_norm_m")
    vb = b.metric("gamma", "final_error_norm_m")
    assert float(r["cand_mean"]) == pytest.approx(np.nanmean(va), rel=1e-12)
    assert float(r["base_mean"]) == pytest.approx(np.nanmean(vb), rel=1e-12)
    assert float(r["d_p95"]) == pytest.approx(np.nanpercentile(va, 95) - np.nanpercentile(vb, 95), rel=1e-12)


# ------------------------------------------------------------------------------------------
# Verification rows, CLI, errors
# ------------------------------------------------------------------------------------------


def test_verification_files(tmp_path):
    from sim.errors import ScenarioError

    (tmp_path / "v.csv").write_text("verdict,id,text,measured,limit,margin,extra\npass,R1,dv ok,1.0,2.0,1.0,x\n")
    assert read_verification(tmp_path / "v.csv") == [VerificationRow("R1", "dv ok", 1.0, 2.0, 1.0, "pass")]
    (tmp_path / "v.json").write_text(json.dumps({"rows": [{"id": "R2", "text": "t", "measured": "n/a",
                                                            "limit": 5, "margin": "", "verdict": "fail",
                                                            "metric": "err_dlambda_m"}]}))
    r = read_verification(tmp_path / "v.json")[0]
    assert r.limit_value == 5.0 and r.passed is False and r.measured == "n/a"
    (tmp_path / "bad.csv").write_text("id,text,measured\nR1,x,1\n")
    with pytest.raises(ScenarioError, match="missing: limit, margin, verdict"):
        read_verification(tmp_path / "bad.csv")
    with pytest.raises(ScenarioError, match="--requirements"):
        read_verification(tmp_path / "none.csv")


def test_cli_report_bad_input(logs, campaigns, tmp_path, capsys):
    from sim.cli.main import COMMANDS, main

    assert COMMANDS["report"] == "sim.cli.report" and COMMANDS["export"] == "sim.cli.export"
    out = tmp_path / "r"
    assert main(["report", str(tmp_path / "missing.h5"), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "RUN_OR_CAMPAIGN" in err and "missing.h5" in err
    assert main(["report", str(logs.drift), "-o", str(out),
                 "--baseline", str(campaigns["dir"] / "sweep")]) == 2
    assert "--baseline" in capsys.readouterr().err
    assert main(["report", str(logs.drift), "-o", str(out), "--confidence", "1.5"]) == 2
    assert "--confidence = 1.5" in capsys.readouterr().err
    (tmp_path / "junk.h5").write_bytes(b"not hdf5")
    assert main(["report", str(tmp_path / "junk.h5"), "-o", str(out)]) == 2
    assert "cannot open as HDF5" in capsys.readouterr().err
    assert not out.exists()  # nothing written for bad input


# ------------------------------------------------------------------------------------------
# Export tables (CSV) and the OEM keyword check, without Java
# ------------------------------------------------------------------------------------------


def test_impulse_and_mode_tables(logs):
    from sim.report.export import impulses_table, modes_table

    run = load_run(logs.closed)
    log = read_log(logs.closed)
    stamp = lambda ts: [f"T+{t:.3f}" for t in ts]  # noqa: E731 - UTC by Orekit in the export itself
    t = impulses_table(run, stamp)
    rows = list(csv.DictReader(io.StringIO(t.to_csv())))
    assert len(rows) == len(log.get("commands/impulses/t_cmd_s"))
    for r in rows:
        assert r["epoch_utc"] == f"T+{float(r['t_s']):.3f}"
        assert float(r["mass_after_kg"]) == pytest.approx(float(r["mass_before_kg"]) - float(r["propellant_used_kg"]), abs=1e-15)
        assert r["source"] == "/commands/impulses"  # the fake truth has no /maneuvers
    dv = sum(float(r["dv_exec_mps"]) for r in rows if r["spacecraft"] == "beta" and r["status"] in ("executed", "clipped_max"))
    assert dv == pytest.approx(log.attrs("metrics/beta")["dv_total_mps"], rel=1e-12)
    m = list(csv.DictReader(io.StringIO(modes_table(run, stamp).to_csv())))
    assert sum(r["kind"] == "commanded" for r in m) == len(log.get("commands/switches/t_cmd_s"))
    held = [r for r in m if r["kind"] == "held" and r["spacecraft"] == "alpha"]
    assert float(held[0]["t_start_s"]) == 0.0 and float(held[-1]["t_end_s"]) == log.get("spacecraft/alpha/truth/t_s")[-1]


_KVN = """CCSDS_OEM_VERS = 2.0
CREATION_DATE = 2025-06-01T00:00:00.000
ORIGINATOR = tester

META_START
OBJECT_NAME = x
OBJECT_ID = x
CENTER_NAME = EARTH
REF_FRAME = TOD
TIME_SYSTEM = UTC
START_TIME = 2025-06-01T00:00:00.000
STOP_TIME = 2025-06-01T00:01:00.000
META_STOP

2025-06-01T00:00:00.000 1 2 3 4 5 6
2025-06-01T00:01:00.000 1 2 3 4 5 6e-3
"""


def test_oem_keyword_check_catches_missing_keywords():
    from sim.report.oem_check import HEADER_KEYS, METADATA_KEYS, check_oem

    # minimal OEM laid out as CCSDS 502.0-B's KVN example (header, one metadata block, data lines)
    assert check_oem(_KVN) == []
    for key in HEADER_KEYS + METADATA_KEYS:
        bad = "\n".join(ln for ln in _KVN.splitlines() if not ln.startswith(key + " "))
        assert any(key in p for p in check_oem(bad)), key
    assert check_oem(_KVN.replace("00:01:00.000 1 2", "00:00:00.000 1 2")) != []  # not increasing
    assert check_oem(_KVN.replace("STOP_TIME = 2025-06-01T00:01:00.000", "STOP_TIME = 2025-06-01T00:00:30.000"))
    assert check_oem(_KVN.replace(" 5 6e-3", " 5")) != []  # a short data line


def test_report_package_imports_no_java():
    # sim.report is pure Python: importing every module loads no JPype, Orekit or Java
    code = ("import sys, pkgutil, importlib, sim.report\n"
            "for m in pkgutil.walk_packages(sim.report.__path__, 'sim.report.'):\n"
            "    importlib.import_module(m.name)\n"
            "import sim.cli.report, sim.cli.export\n"
            "bad = [m for m in sys.modules if m.split('.')[0] in ('jpype', '_jpype', 'orekit_jpype', 'org', 'java')]\n"
            "print('LEAK', bad)\n")
    res = subprocess.run([sys.executable, "-c", code], cwd=REPO, capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    assert "LEAK []" in res.stdout, res.stdout


# ------------------------------------------------------------------------------------------
# The page in a real browser (Debian's chromium, headless)
# ------------------------------------------------------------------------------------------

_PROBE = """<script>
window.__covey = {errors: []};
window.addEventListener('error', function (e) {
  var t = e.target || {};
  window.__covey.errors.push('error: ' + (e.message || t.src || t.href || 'resource'));
}, true);
(function () { var ce = console.error;
  console.error = function () {
    window.__covey.errors.push('console.error: ' + Array.prototype.join.call(arguments, ' '));
    ce.apply(console, arguments); }; })();
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var out = {images: imgs.map(function (i) { return [i.complete, i.naturalWidth, i.naturalHeight]; }),
             errors: window.__covey.errors,
             resources: performance.getEntriesByType('resource').map(function (r) { return r.name; })};
  var pre = document.createElement('pre'); pre.id = 'covey-probe';
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
});
</script>"""


def _chromium() -> str:
    import os
    import shutil

    exe = shutil.which("chromium")
    if exe is None:
        msg = ("Debian's chromium is not installed (apt-get install -y chromium; .ci/run installs "
               "it before pytest)")
        if os.environ.get("CI", "").strip().lower() in ("true", "1", "yes"):
            pytest.fail(msg + ": in CI the browser check must run, not be skipped")
        pytest.skip(msg)
    return exe


def _browse(exe: str, page: Path, work: Path, shot: bool = True) -> dict:
    """Open a copy of ``page`` with the probe script in headless chromium: image states, errors
    the page raised, resources fetched, console lines on stderr, and a screenshot."""
    import html as _html

    probe = work / f"probe_{page.parent.name}.html"
    probe.write_text(page.read_text().replace("<head>", "<head>" + _PROBE, 1))
    flags = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
             "--disable-background-networking", "--disable-component-update", "--disable-sync",
             "--hide-scrollbars", f"--user-data-dir={work / 'profile'}", "--enable-logging=stderr",
             "--v=0", "--virtual-time-budget=15000"]
    res = subprocess.run([exe, *flags, "--dump-dom", probe.as_uri()], capture_output=True,
                         text=True, timeout=180)
    m = re.search(r'<pre id="covey-probe">(.*?)</pre>', res.stdout, re.S)
    assert m, (res.returncode, res.stderr[-2000:])
    out = json.loads(_html.unescape(m.group(1)))
    out["console"] = [ln for ln in res.stderr.splitlines() if ":CONSOLE" in ln]
    if not shot:
        return out
    shot = work / f"shot_{page.parent.name}.png"
    res2 = subprocess.run([exe, *flags, "--window-size=1200,1800", f"--screenshot={shot}",
                           page.as_uri()], capture_output=True, text=True, timeout=180)
    assert shot.is_file(), res2.stderr[-2000:]
    out["console"] += [ln for ln in res2.stderr.splitlines() if ":CONSOLE" in ln]
    out["shot"] = shot
    return out


def _page_ok(r: dict, n_images: int) -> None:
    from PIL import Image

    assert r["errors"] == [] and r["console"] == [], (r["errors"], r["console"])
    assert r["resources"] == []  # nothing fetched: figures are data URIs, the style is inline
    assert len(r["images"]) == n_images
    assert all(c and w > 0 and h > 0 for c, w, h in r["images"]), r["images"]
    with Image.open(r["shot"]) as im:
        a = np.asarray(im.convert("L"), float)
    assert a.shape == (1800, 1200) and a.var() > 0 and np.mean(a < 128) > 0.01  # text drawn


def test_report_pages_render_in_a_headless_browser(report, campaigns, tmp_path):
    exe = _chromium()
    # the probe sees a broken image and a page error (so a clean result means something)
    bad = tmp_path / "bad" / "report.html"
    bad.parent.mkdir()
    bad.write_text('<!DOCTYPE html><html><head><meta charset="utf-8"></head><body><p>x</p>'
                   '<img src="data:image/png;base64,AAAA"><script>undefinedCall();</script></body></html>')
    r = _browse(exe, bad, tmp_path, shot=False)
    assert r["images"][0][1] == 0 and any("undefinedCall" in e for e in r["errors"] + r["console"])
    _page_ok(_browse(exe, report.html, tmp_path), len(report.figures))
    mc = campaigns["monte_carlo"]
    _page_ok(_browse(exe, mc.html, tmp_path), len(mc.figures))


def test_reports_of_thin_inputs(tmp_path):
    # one spacecraft and no guidance; a campaign whose runs all failed: a report all the same
    one = _fly_fake(load_scenario(REPO / "scenarios" / "decay_jb2008.toml", {"run.duration_days": 0.1}),
                    tmp_path / "one.h5")
    r = build_report(one, tmp_path / "out_one", formats=("png",), dpi=40)
    assert [f.name for f in r.figures] == ["modes", "density"]
    assert {s.name for s in r.skipped} == {"roe_planes", "roe_history", "delta_v", "dv_remaining",
                                           "nav_absolute", "nav_relative", "rtn_motion"}
    synthetic_campaign(tmp_path / "failed", "monte_carlo", n_runs=4, n_failed=4)
    c = build_report(tmp_path / "failed", tmp_path / "out_one", formats=("png",), dpi=40)
    assert c.figures == [] and {s.name for s in c.skipped} == {"final_error_scatter", "cdf", "cdf_components"}
    assert not list((tmp_path / "out_one" / "figures").glob("fig[0-9]*"))  # the earlier figures went
    page = c.html.read_text()
    assert "failed 4" in page and "no run log of the campaign could be read" in page

"""``covey export`` and ``covey report`` on a real short demo run (Orekit truth, JVM).

Sources of the checks:
- The OEM must be read back by Orekit's own CCSDS parser (``ParserBuilder.buildOemParser``: the
  reference library) and give the logged truth to 1 mm at every logged sample (covey's export
  contract); the mandatory keywords are those of CCSDS 502.0-B (Orbit Data Messages), checked by
  sim.report.oem_check.
- GCRF and TOD differ by precession-nutation since J2000, about 0.35 deg by 2025 (IERS
  Conventions 2010 [memory]): tens of km at LEO radius, so a GCRF file must differ from the TOD
  numbers by well over 1 km.
- UTC stamps: no leap second was introduced in 2025 (IERS Bulletin C [memory]), so epoch + t_s by
  Python's datetime is the UTC time to compare Orekit's with.
- Everything else: covey's own contract (common practice, no source).
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np
import pytest

from sim.log.reader import read_log

REPO = Path(__file__).resolve().parents[2]
SET = {"run.duration_days": 0.15, "deputies[0].deadline_days": 0.15,
       "deputies[1].deadline_days": 0.15,
       "deputies[0].target_roe_m": [0.0, 2100.0, 0.0, 110.0, 0.0, 110.0],
       "deputies[1].target_roe_m": [0.0, -1600.0, 0.0, -110.0, 0.0, -110.0]}


@pytest.fixture(scope="module")
def real_log(tmp_path_factory):
    from sim.loop.run import run_scenario
    from sim.scenario.reader import load_scenario

    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("COVEY_TRUTH_THREADS", "1")
        cfg = load_scenario(REPO / "scenarios" / "demo_formation.toml", SET)
        s = run_scenario(cfg, tmp_path_factory.mktemp("real") / "demo.h5")
    assert s.status == "ok", s.reason
    return s.path


@pytest.mark.orekit
def test_export_oem_reads_back_with_orekit_to_1_mm(real_log, tmp_path, capsys):
    from sim.cli.main import main
    from sim.orekit.oem_export import read_oem
    from sim.report.oem_check import check_oem

    assert main(["export", str(real_log), "-o", str(tmp_path), "--xml"]) == 0
    assert "OEM beta" in capsys.readouterr().out
    log = read_log(real_log)
    epoch = log.meta["epoch_utc"]
    man_t, man_n = log.get("maneuvers/t_s"), log.get("maneuvers/name")
    assert len(man_t) > 0  # the run flew impulses: the segments split at them
    for name in log.spacecraft_names:
        t = log.get(f"spacecraft/{name}/truth/t_s")
        r = log.get(f"spacecraft/{name}/truth/r_eci_m")
        v = log.get(f"spacecraft/{name}/truth/v_eci_mps")
        imp = np.array([x for x, n in zip(man_t, man_n) if n == name])
        for path in (tmp_path / f"demo_formation_{name}.oem", tmp_path / f"demo_formation_{name}.oem.xml"):
            assert check_oem(path.read_text()) == [], path
            segs = read_oem(path, epoch)
            # Orekit's KVN parser gives the values upper case
            assert {(s.object_name.upper(), s.object_id.upper(), s.ref_frame, s.time_system,
                     s.center_name) for s in segs} == {(name.upper(), name.upper(), "TOD", "UTC", "EARTH")}
            tt = np.concatenate([s.t_s for s in segs])
            np.testing.assert_allclose(tt, t, rtol=0, atol=1e-6)
            rr = np.concatenate([s.r_tod_m for s in segs])
            vv = np.concatenate([s.v_tod_mps for s in segs])
            assert np.max(np.linalg.norm(rr - r, axis=1)) <= 1e-3
            assert np.max(np.linalg.norm(vv - v, axis=1)) <= 1e-6
            # one segment per coast arc: no segment spans an impulse
            inside = [x for x in imp if t[0] < x < t[-1]]
            assert len(segs) == 1 + len({int(np.searchsorted(t, x, side="right")) for x in inside})
            for s in segs:
                assert not any(s.t_s[0] < x < s.t_s[-1] for x in imp)
    # the impulses CSV: one row per command, UTC stamps by Orekit
    rows = list(csv.DictReader((tmp_path / "demo_formation_impulses.csv").open()))
    assert len(rows) == len(log.get("commands/impulses/t_cmd_s"))
    e0 = dt.datetime(2025, 6, 1, tzinfo=dt.timezone.utc)
    for row in rows:
        t_ms = dt.timedelta(milliseconds=round(float(row["t_s"]) * 1e3))  # stamps rounded to ms
        want = (e0 + t_ms).strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"
        assert row["epoch_utc"] == want
        if row["status"] == "executed":
            assert row["source"] == "/maneuvers"
    j = [k for k, n in enumerate(man_n) if n == rows[0]["spacecraft"]][0]
    assert float(rows[0]["mass_after_kg"]) == log.get("maneuvers/mass_after_kg")[j]
    modes = list(csv.DictReader((tmp_path / "demo_formation_modes.csv").open()))
    assert sum(m["kind"] == "commanded" for m in modes) == len(log.get("commands/switches/t_cmd_s"))


@pytest.mark.orekit
def test_export_in_gcrf_transforms_and_reads_back(real_log, tmp_path):
    from sim.orekit.oem_export import read_oem
    from sim.report.export import export_run

    res = export_run(real_log, tmp_path, frame="GCRF", spacecraft=["alpha"],
                     creation_utc="2026-01-02T03:04:05Z")
    assert list(res.oem) == ["alpha"]
    text = res.oem["alpha"].read_text()
    assert "REF_FRAME = GCRF" in text and "CREATION_DATE = 2026-01-02T03:04:05" in text
    log = read_log(real_log)
    segs = read_oem(res.oem["alpha"], log.meta["epoch_utc"])
    r = log.get("spacecraft/alpha/truth/r_eci_m")
    rr = np.concatenate([s.r_tod_m for s in segs])
    assert np.max(np.linalg.norm(rr - r, axis=1)) <= 1e-3
    first = [ln for ln in text.splitlines() if ln.startswith("2025-06-01T00:00:00.000 ")][0]
    r_file = np.array(first.split()[1:4], float) * 1e3
    assert np.linalg.norm(r_file - r[0]) > 1e3


@pytest.mark.orekit
def test_report_of_a_real_run(real_log, tmp_path):
    from sim.report.build import build_report
    from sim.report.single import RUN_FIGURES

    res = build_report(real_log, tmp_path, formats=("png",), dpi=60)
    assert [f.name for f in res.figures] == list(RUN_FIGURES) and res.skipped == []
    log = read_log(real_log)
    d = res.figure("density").data
    np.testing.assert_array_equal(d["demo_formation/beta/believed_density_kgpm3"],
                                  log.get("spacecraft/beta/believed_density_kgpm3"))
    dv = res.figure("delta_v").data
    sel = np.array(log.get("maneuvers/name")) == "beta"
    np.testing.assert_allclose(dv["demo_formation/beta/dv_cum_mps"],
                               np.cumsum(np.linalg.norm(log.get("maneuvers/dv_rtn_mps")[sel], axis=1)))
    page = res.html.read_text()
    assert log.meta["orekit_version"] in page and "SpaceWeather-All-v1.2.txt" in page

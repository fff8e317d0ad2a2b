"""The HDF5 run log: round trip, self-description, atomic rename, failed runs keep their data.

Checks are against h5py's own view of the file (dataset attributes, filters, chunking) and the
arrays written; the schema is covey's own (README "Run log schema"; common practice, no source).
"""

from __future__ import annotations

import h5py
import numpy as np
import pytest

from sim.errors import LogFormatError, PropagationError
from sim.log.reader import read_log
from sim.log.recorder import SCHEMA_VERSION, RunRecorder, units_for
from sim.loop.run import run_scenario
from sim.scenario.reader import load_scenario


def _all_datasets(path):
    out = {}
    with h5py.File(path, "r") as f:
        f.visititems(lambda n, o: out.__setitem__(n, dict(o.attrs)) if isinstance(o, h5py.Dataset)
                     else None)
    return out


def test_round_trip_units_chunks_and_rename(tmp_path):
    path = tmp_path / "sub" / "run.h5"
    rng = np.random.default_rng(1)
    r1, r2 = rng.normal(size=(5, 3)), rng.normal(size=(3000, 3))
    rec = RunRecorder(path, chunk_rows=256)
    assert rec.part_path.exists() and not path.exists()  # written under .part until closed
    rec.append("spacecraft/alpha/truth", t_s=np.arange(5.0), r_eci_m=r1,
               mode_index=np.array([0, 1, 1, 2, 0], dtype=np.int8),
               attrs={"mode_index": {"mode_names": ["max_drag", "min_drag", "nominal"]}})
    rec.append("spacecraft/alpha/truth", t_s=5.0 + np.arange(3000.0), r_eci_m=r2,
               mode_index=np.zeros(3000, dtype=np.int8))
    rec.append("events", t_s=[12.5], name=["alpha"], kind=["keep_out"], detail=["2.0 m < 50 m"])
    rec.append("spacecraft/beta", units={"mean_roe_m": "m"}, mean_roe_m=np.ones((2, 6)))
    rec.write_dataset("meta/scenario_toml", "[run]\nname = 'x'\n")
    rec.write_attrs("meta", seed=42, names=["alpha", "beta"], missing=None)
    assert rec.close("ok") == path
    assert path.exists() and not rec.part_path.exists()

    log = read_log(path)
    assert log.status == "ok" and log.meta["schema_version"] == SCHEMA_VERSION
    assert log.meta["seed"] == 42 and log.meta["names"] == ["alpha", "beta"]
    assert log.scenario_text == "[run]\nname = 'x'\n"
    t = log.get("spacecraft/alpha/truth/t_s")
    assert t.shape == (3005,) and np.array_equal(t, np.arange(3005.0))
    assert np.array_equal(log.spacecraft.alpha.truth.r_eci_m, np.vstack([r1, r2]))  # attribute style
    assert np.array_equal(log["spacecraft/beta/mean_roe_m"], np.ones((2, 6)))
    assert log.attrs("spacecraft/alpha/truth/mode_index")["mode_names"][2] == "nominal"
    assert log.get("events/detail") == ["2.0 m < 50 m"]
    assert log.units("spacecraft/alpha/truth/r_eci_m") == "m"
    # every dataset states its units; growing datasets are chunked, compressed, resizable
    with h5py.File(path, "r") as f:
        ds = f["spacecraft/alpha/truth/r_eci_m"]
        assert ds.compression == "gzip" and ds.chunks[0] == 256 and ds.maxshape == (None, 3)
    for name, attrs in _all_datasets(path).items():
        assert "units" in attrs, name


def test_units_from_suffix_and_refusal():
    assert units_for("v_eci_mps") == "m/s" and units_for("density_kgpm3") == "kg/m^3"
    assert units_for("drag_area_m2") == "m^2" and units_for("min_impulse_bit_Ns") == "N s"
    assert units_for("t_s") == "s" and units_for("ex") is None


def test_missing_units_refused_and_row_mismatch(tmp_path):
    with RunRecorder(tmp_path / "x.h5") as rec:
        with pytest.raises(ValueError, match="units"):
            rec.append("g", ex=[0.1])
        with pytest.raises(ValueError, match="row counts"):
            rec.append("g", t_s=[1.0, 2.0], r_m=[1.0])
        rec.append("g", t_s=[1.0])
        with pytest.raises(ValueError, match="row shape"):
            rec.append("h", r_m=np.zeros((2, 3)))
            rec.append("h", r_m=np.zeros((2, 2)))


def test_exception_inside_recorder_closes_as_failed(tmp_path):
    path = tmp_path / "crash.h5"
    with pytest.raises(RuntimeError):
        with RunRecorder(path) as rec:
            rec.append("spacecraft/alpha/truth", t_s=[0.0, 60.0])
            raise RuntimeError("boom")
    log = read_log(path)
    assert log.status == "failed" and "boom" in log.reason
    assert "RuntimeError" in log.get("meta/traceback")
    assert np.array_equal(log.spacecraft.alpha.truth.t_s, [0.0, 60.0])
    assert not (tmp_path / "crash.h5.part").exists()


def test_read_log_refuses_foreign_and_newer_files(tmp_path):
    p = tmp_path / "foreign.h5"
    with h5py.File(p, "w") as f:
        f["x"] = 1
    with pytest.raises(LogFormatError, match="not a covey run log"):
        read_log(p)
    q = tmp_path / "new.h5"
    rec = RunRecorder(q)
    rec.file.attrs["schema_version"] = "99.0"
    rec.close()
    with pytest.raises(LogFormatError, match="99.0"):
        read_log(q)
    (tmp_path / "text.h5").write_text("not hdf5")
    with pytest.raises(LogFormatError):
        read_log(tmp_path / "text.h5")


# ------------------------------------------------------------------------------------------
# The harness loop with a fake (Keplerian, no JVM) truth world
# ------------------------------------------------------------------------------------------


def test_run_with_fake_truth_logs_everything(tmp_path, repo_root, fake_truth):
    cfg = load_scenario(repo_root / "scenarios/demo_drift.toml", {"run.duration_s": 12000.0})
    seen = []
    s = run_scenario(cfg, tmp_path / "r.h5", progress=lambda t, T: seen.append((t, T)))
    assert s.status == "ok" and s.exit_code == 0 and s.t_end_s == 12000.0
    assert [t for t, _ in seen] == [0.0, 5400.0, 10800.0, 12000.0]  # start + once per cycle
    log = read_log(tmp_path / "r.h5")
    assert log.spacecraft_names == ["alpha", "beta", "gamma"]
    t = log.spacecraft.alpha.truth.t_s
    assert np.allclose(t, np.arange(0.0, 12000.0 + 1, 60.0))  # log_step_s grid, no duplicates
    for name in ("beta", "gamma"):
        roe = log.get(f"spacecraft/{name}/mean_roe_m")
        assert roe.shape == (len(t), 6)
        # the fake's mean elements are exact two-body elements, so the ROE are the scenario's
        want = np.array(next(d.roe_m for d in cfg.deputies if d.name == name))
        assert np.allclose(roe, want, atol=1e-3)
        assert log.attrs(f"spacecraft/{name}/mean_roe_m")["columns"][1] == "dlambda"
    assert log.get("spacecraft/alpha/mean_oe/a_m")[0] == pytest.approx(cfg.chief.orbit.a_m)
    assert log.get("spacecraft/alpha/mean_oe/i_deg")[0] == pytest.approx(cfg.chief.orbit.i_deg)
    assert log.scenario_text == cfg.source_text
    assert log.meta["orekit_version"] == "fake" and log.meta["seed"] == cfg.seed
    assert log.meta["git_commit"] and log.meta["covey_version"]
    assert log.get("meta/data_files/path") == ["a.txt"]
    assert log.get("maneuvers/t_s").shape == (0,) and log.get("events/kind") == []
    assert log.attrs("spacecraft/beta")["mode_names"] == ["max_drag", "min_drag", "nominal"]


def test_failed_run_keeps_data_and_traceback(tmp_path, repo_root, fake_truth):
    fake_truth.fail_at_s = 7200.0
    cfg = load_scenario(repo_root / "scenarios/demo_drift.toml", {"run.duration_s": 12000.0})
    s = run_scenario(cfg, tmp_path / "f.h5")
    assert s.status == "failed" and s.exit_code == 1 and isinstance(s.error, PropagationError)
    assert s.path == tmp_path / "f.h5" and not (tmp_path / "f.h5.part").exists()
    log = read_log(s.path)
    assert log.status == "failed" and "fake failure" in log.reason
    assert "PropagationError" in log.get("meta/traceback")
    t = log.spacecraft.alpha.truth.t_s
    assert t[0] == 0.0 and t[-1] == 7140.0  # data up to the failure kept
    assert log.get("spacecraft/gamma/mean_roe_m").shape == (len(t), 6)


def test_stopped_run(tmp_path, repo_root, fake_truth):
    fake_truth.stop_at_s = 6000.0
    cfg = load_scenario(repo_root / "scenarios/demo_drift.toml", {"run.duration_s": 12000.0})
    s = run_scenario(cfg, tmp_path / "s.h5")
    assert s.status == "stopped" and s.reason == "fake stop" and s.exit_code == 0
    assert s.t_end_s == 6000.0
    log = read_log(s.path)
    assert log.status == "stopped" and log.get("events/kind") == ["min_altitude"]
    assert log.get("events/t_s")[0] == 6000.0 and log.spacecraft.alpha.truth.t_s[-1] == 6000.0

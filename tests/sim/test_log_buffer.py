"""The engine's speed devices write the same log as the plain engine.

- The buffered log (sim.log.buffer.BufferedLog) against direct appends: the reference is the recorder
  itself (sim.log.recorder.RunRecorder.append called once per engine append, as the engine did before
  the buffer existed).
- The log-writer thread (RunOptions.log_thread: the buffered rows compressed and written on a thread
  of their own) against writing them on the main thread.

Flown with the Keplerian stand-in truth (tests/conftest.py ``fake_truth``) and the real
hybrid_resolve law, so every closed-loop group (navigation, guidance diagnostics and predictions,
commands, truth, mean elements) is compared.
"""

from __future__ import annotations

import gc

import h5py
import numpy as np
import pytest

import sim.loop.run
from sim.log.buffer import BufferedLog
from sim.loop.options import RunOptions, frozen_heap
from sim.scenario.reader import load_scenario

# wall-clock and provenance fields, different in any two runs
VOLATILE_ATTRS = {"created_utc", "closed_utc", "started_utc", "finished_utc", "wall_time_s", "git_commit"}
VOLATILE_DATASETS = {"guidance/cycles/step_wall_s", "guidance/cycles/solve_time_s"}


class DirectLog(BufferedLog):
    """Write-through: every append goes to the recorder at once."""

    def append(self, group_path, units=None, attrs=None, **arrays):
        self.write()
        self.rec.append(group_path, units=units, attrs=attrs, **arrays)


def _contents(path):
    out = {}
    with h5py.File(path, "r") as f:
        def visit(name, obj):
            attrs = {k: obj.attrs[k] for k in obj.attrs if k not in VOLATILE_ATTRS}
            if isinstance(obj, h5py.Dataset):
                out[name] = (obj.dtype.str if obj.dtype.kind != "O" else "O", obj.shape,
                             None if name in VOLATILE_DATASETS else obj[()], attrs)
            else:
                out[name] = ("group", None, None, attrs)
        f.visititems(visit)
        out["/"] = ("root", None, None, {k: f.attrs[k] for k in f.attrs if k not in VOLATILE_ATTRS})
    return out


def _demo_cfg(repo_root, days=0.5, deadline_days=0.4):
    return load_scenario(repo_root / "scenarios" / "demo_formation.toml",
                         {"run.duration_days": days, "deputies[0].deadline_days": deadline_days,
                          "deputies[1].deadline_days": deadline_days, "guidance.cycle_s": 5400.0})


def _assert_same_logs(a, b, rtol=None):
    """``rtol``: dataset name suffix -> relative tolerance (else exact)."""
    assert sorted(a) == sorted(b)
    for name in a:
        da, db = a[name], b[name]
        assert da[0] == db[0] and da[1] == db[1], name  # dtype, shape
        tol = next((v for k, v in (rtol or {}).items() if name.endswith(k)), None)
        if tol is None:
            assert _same(da[2], db[2]), name
        else:
            np.testing.assert_allclose(da[2], db[2], rtol=tol, atol=0, err_msg=name)
        assert sorted(da[3]) == sorted(db[3]), name
        for k in da[3]:
            if name == "meta" and k in ("traceback", "run_options_json"):  # options differ on purpose
                continue
            assert _same(da[3][k], db[3][k]), (name, k)


def _same(a, b):
    if isinstance(a, (np.ndarray, np.generic, float)) or isinstance(b, (np.ndarray, np.generic, float)):
        a, b = np.asarray(a), np.asarray(b)
        if a.dtype.kind in "fc":
            return a.shape == b.shape and np.array_equal(a, b, equal_nan=True)
        return a.shape == b.shape and bool(np.all(a == b))
    return a == b


@pytest.mark.parametrize("fail", [False, True])
def test_buffered_log_equals_direct_appends(tmp_path, repo_root, fake_truth, monkeypatch, fail):
    cfg = _demo_cfg(repo_root)
    if fail:  # a failed run keeps the same rows either way
        fake_truth.fail_at_s = 3.2 * 5400.0
    # write the buffer more than once per run
    opts = RunOptions(log_write_sim_s=2 * 5400.0)
    s1 = sim.loop.run.run_scenario(cfg, tmp_path / "buffered.h5", options=opts)
    monkeypatch.setattr(sim.loop.run, "BufferedLog", DirectLog)
    s2 = sim.loop.run.run_scenario(cfg, tmp_path / "direct.h5", options=opts)
    assert s1.status == s2.status == ("failed" if fail else "ok")
    a, b = _contents(s1.path), _contents(s2.path)
    assert "guidance/predicted/beta/roe_m" in a and "navigation/relative/gamma/err_dr_rtn_m" in a
    _assert_same_logs(a, b)


@pytest.mark.parametrize("fail", [False, True])
def test_log_thread_same_log(tmp_path, repo_root, fake_truth, monkeypatch, fail):
    cfg = _demo_cfg(repo_root)
    if fail:
        fake_truth.fail_at_s = 3.2 * 5400.0
    opts = RunOptions(log_write_sim_s=2 * 5400.0)  # several writes per run
    s1 = sim.loop.run.run_scenario(cfg, tmp_path / "thread.h5", options=opts.replace(log_thread=True))
    s2 = sim.loop.run.run_scenario(cfg, tmp_path / "inline.h5", options=opts.replace(log_thread=False))
    assert s1.status == s2.status == ("failed" if fail else "ok")
    assert s1.n_samples == s2.n_samples > 0
    _assert_same_logs(_contents(s1.path), _contents(s2.path))


def test_buffer_checks_rows_at_the_call(tmp_path):
    from sim.log.recorder import RunRecorder

    with RunRecorder(tmp_path / "x.h5") as rec:
        log = BufferedLog(rec)
        log.append("g", t_s=[0.0, 1.0], r_m=np.zeros((2, 3)))
        with pytest.raises(ValueError, match="different row counts"):
            log.append("g", t_s=[0.0], r_m=np.zeros((2, 3)))
        with pytest.raises(ValueError, match="row shape"):
            log.append("g", t_s=[2.0], r_m=np.zeros((1, 2)))
        log.append("g", t_s=[2.0], r_m=np.ones((1, 3)))
        assert "g/t_s" not in rec.file  # still buffered
        assert log.file["g/t_s"].shape == (3,)  # reading the file writes the buffer first
        np.testing.assert_array_equal(rec.file["g/r_m"][2], [1.0, 1.0, 1.0])


def test_frozen_heap_freezes_for_the_block_and_restores_the_collector():
    # gc.freeze / gc.unfreeze (Python docs, module gc); the closed loop runs inside this block
    assert gc.get_freeze_count() == 0
    with frozen_heap():
        assert gc.get_freeze_count() > 0
    assert gc.get_freeze_count() == 0
    gc.freeze()  # a caller that froze objects itself keeps them frozen
    try:
        n = gc.get_freeze_count()
        with frozen_heap():
            pass
        assert gc.get_freeze_count() >= n > 0
    finally:
        gc.unfreeze()

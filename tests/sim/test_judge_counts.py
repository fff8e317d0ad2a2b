"""Samples the judge cannot convert are counted, not silent (covey's own contract; common
practice, no source): a mean-element conversion that fails gives NaN rows, counted in the log
(``/spacecraft/<name>/mean_oe@n_unconverted``) and in the deputy's metrics."""

from __future__ import annotations

import numpy as np

import sim.loop.run
from sim.log.reader import read_log
from sim.scenario.reader import load_scenario


def test_unconverted_samples_are_counted(tmp_path, repo_root, fake_truth, monkeypatch):
    cfg = load_scenario(repo_root / "scenarios" / "demo_formation.toml",
                        {"run.duration_days": 0.25, "deputies[0].deadline_days": 0.2,
                         "deputies[1].deadline_days": 0.2})
    real = sim.loop.run.truth_backend()
    conv = real.mean_elements
    bad_t = {600.0, 1200.0, 7200.0}

    def flaky(t, r, v, epoch):  # the judge fails on three sample times
        out = np.array(conv(t, r, v, epoch), float)
        out[np.isin(np.asarray(t, float), list(bad_t))] = np.nan
        return out

    real.mean_elements = flaky
    monkeypatch.setattr(sim.loop.run, "truth_backend", lambda: real)
    s = sim.loop.run.run_scenario(cfg, tmp_path / "x.h5")
    assert s.status == "ok", s.reason
    log = read_log(s.path)
    for name in log.spacecraft_names:
        assert log.attrs(f"spacecraft/{name}/mean_oe")["n_unconverted"] == 3
    for d in ("beta", "gamma"):
        assert log.attrs(f"metrics/{d}")["n_unconverted_samples"] == 3
        assert np.isnan(log.get(f"spacecraft/{d}/mean_roe_m")).any(axis=1).sum() == 3

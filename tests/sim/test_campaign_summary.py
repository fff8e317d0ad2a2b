"""The campaign summary file round-trips (pure h5py, no JVM)."""

from __future__ import annotations

import numpy as np
import pytest

from sim.campaign.summary import RunRow, read_summary, scalar_metric_names, write_summary
from sim.errors import LogFormatError


def _metrics(k):
    names = scalar_metric_names()
    m = {n: float(k) for n in names}
    m["final_error_m"] = [float(k)] * 6
    return m


def test_summary_round_trip(tmp_path):
    rows = [RunRow(index=k, seed=100 + k, status="ok" if k != 2 else "failed", reason="" if k != 2 else "boom",
                   log=f"runs/run_{k:04d}.h5", case="", draw_index=k,
                   params={"deputies[0].roe_m[1]": 10.0 * k},
                   metrics={} if k == 2 else {"beta": _metrics(k)}) for k in range(4)]
    p = write_summary(tmp_path / "summary.h5", rows, name="c", kind="monte_carlo", master_seed=7,
                      campaign_toml="x = 1\n")
    s = read_summary(tmp_path)
    assert s.path == p and s.n_runs == 4 and s.attrs["master_seed"] == 7 and s.campaign_toml == "x = 1\n"
    assert s.runs["status"] == ["ok", "ok", "failed", "ok"] and list(s.runs["seed"]) == [100, 101, 102, 103]
    np.testing.assert_array_equal(s.params["deputies[0].roe_m[1]"], [0.0, 10.0, 20.0, 30.0])
    dv = s.metric("beta", "dv_total_mps")
    assert dv[0] == 0.0 and dv[3] == 3.0 and np.isnan(dv[2])
    np.testing.assert_array_equal(s.metric("beta", "err_dlambda_m")[[0, 1, 3]], [0.0, 1.0, 3.0])
    with pytest.raises(KeyError, match="no metric 'nope'"):
        s.metric("beta", "nope")
    assert "n_burns" in scalar_metric_names() and "final_error_m" not in scalar_metric_names()


def test_not_a_summary_is_a_clean_error(tmp_path):
    import h5py

    with h5py.File(tmp_path / "summary.h5", "w") as f:
        f.attrs["schema"] = "something.else"
    with pytest.raises(LogFormatError, match="not a covey campaign summary"):
        read_summary(tmp_path / "summary.h5")
    (tmp_path / "junk.h5").write_bytes(b"not hdf5")
    with pytest.raises(LogFormatError, match="cannot read"):
        read_summary(tmp_path / "junk.h5")

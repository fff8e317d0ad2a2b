"""Test fixtures of the report tests (and of benchmarks/report_speed.py): synthetic campaign
summaries written with sim.campaign.summary.write_summary.

The numbers are invented (seeded Gaussian draws), not results of covey runs: they exercise the
campaign figures and tables, whose statistics the tests check against numpy/scipy directly.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np

from sim.campaign.summary import RunRow, write_summary
from sim.judge.metrics import DeputyMetrics

DEPUTIES = ("beta", "gamma")
BUDGET_CASES = ("all", "navigation", "actuators", "density")
SWEEP_KEY = "guidance.settings.f107_forecast_sfu"
SWEEP_VALUES = (120.0, 150.0, 180.0, 210.0)

# invented final-error distribution per deputy: mean (6,) and covariance (6, 6), a-scaled m
FE_MEAN = {"beta": np.array([0.5, -3.0, 0.2, 0.1, 0.0, -0.3]),
           "gamma": np.array([-0.4, 5.0, -0.1, 0.3, 0.1, 0.2])}
_L = np.array([[1.5, 0, 0, 0, 0, 0], [6.0, 20.0, 0, 0, 0, 0], [0, 0, 1.2, 0, 0, 0],
               [0, 0, 0.6, 1.0, 0, 0], [0, 0, 0, 0, 0.8, 0], [0, 0, 0, 0, -0.3, 0.7]])
FE_COV = _L @ _L.T


def _metrics(name: str, fe: np.ndarray, dv: float, rng: np.random.Generator) -> dict:
    m = DeputyMetrics(
        name=name, dv_total_mps=float(dv), propellant_used_kg=float(dv * 0.017),
        n_burns=int(rng.integers(3, 40)), n_switches=int(rng.integers(0, 30)),
        final_error_m=[float(x) for x in fe], final_error_norm_m=float(np.linalg.norm(fe)),
        max_error_after_convergence_m=float(np.linalg.norm(fe) * 1.2),
        time_to_tolerance_s=float(rng.uniform(1e4, 2e5)), reached_deadline=True,
        time_in_mode_s={"max_drag": 1000.0, "min_drag": 2000.0, "nominal": 3000.0},
        min_distance_m=float(rng.uniform(900, 1500)), min_rn_separation_m=float(rng.uniform(80, 100)),
        min_distance_any_m=float(rng.uniform(900, 1500)), min_distance_other="alpha")
    return m.as_dict()


def synthetic_campaign(folder: str | Path, kind: str = "monte_carlo", n_runs: int = 40,
                       seed: int = 1, run_log: str | Path | None = None, n_failed: int = 1,
                       scale: float = 1.0) -> Path:
    """Write ``<folder>/summary.h5`` of an invented campaign (test fixture).

    Parameters
    ----------
    kind : "monte_carlo", "sweep" or "error_budget"
        Sweep: :data:`SWEEP_VALUES` of :data:`SWEEP_KEY`, n_runs // 4 draws each (the delta-v
        grows with the swept value); error budget: :data:`BUDGET_CASES`, n_runs // 4 runs each
        (error scales 1, 0.6, 0.4, 0.2).
    run_log : path, optional
        A real run log copied to ``<folder>/runs/run_0000.h5`` and named by the first run (the
        provenance the report reads); the other runs name logs that are not there.
    n_failed : int
        The last ``n_failed`` runs have status ``failed`` and no metrics.
    scale : float
        Multiplies the final errors (a baseline campaign of another spread).
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    rows = []
    L = np.linalg.cholesky(FE_COV)
    for k in range(n_runs):
        case, grid, draw, params = "", -1, k, {}
        err_scale, dv_mean = scale, 0.8
        if kind == "sweep":
            per = max(1, n_runs // len(SWEEP_VALUES))
            grid = min(k // per, len(SWEEP_VALUES) - 1)
            draw = k % per
            params = {SWEEP_KEY: SWEEP_VALUES[grid]}
            dv_mean = 0.5 + 0.004 * (SWEEP_VALUES[grid] - 120.0)
            case = f"{SWEEP_KEY}={SWEEP_VALUES[grid]:g}"
        elif kind == "error_budget":
            per = max(1, n_runs // len(BUDGET_CASES))
            ci = min(k // per, len(BUDGET_CASES) - 1)
            case = BUDGET_CASES[ci]
            draw = k % per
            err_scale = scale * (1.0, 0.6, 0.4, 0.2)[ci]
        else:
            params = {"actuators.dv_scale_sigma": float(rng.uniform(0.01, 0.05))}
        failed = k >= n_runs - n_failed
        metrics = {}
        if not failed:
            for d in DEPUTIES:
                fe = FE_MEAN[d] * err_scale + err_scale * (L @ rng.standard_normal(6))
                metrics[d] = _metrics(d, fe, dv_mean * float(rng.lognormal(0.0, 0.15)), rng)
        rows.append(RunRow(index=k, seed=1000 + k, status="failed" if failed else "ok",
                           reason="invented failure" if failed else "",
                           log=f"runs/run_{k:04d}.h5", case=case, grid_index=grid,
                           draw_index=draw, params=params, metrics=metrics))
    if run_log is not None:
        (folder / "runs").mkdir(exist_ok=True)
        shutil.copyfile(run_log, folder / "runs" / "run_0000.h5")
    toml = (f"# test fixture: invented {kind} campaign\n[campaign]\nname = \"fixture_{kind}\"\n"
            f"kind = \"{kind}\"\nruns = {n_runs}\n")
    return write_summary(folder / "summary.h5", rows, name=f"fixture_{kind}", kind=kind,
                         master_seed=seed, campaign_toml=toml)

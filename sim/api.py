"""covey's public Python face: what a user script or test imports (one place).

    from sim.api import load_scenario, run_scenario, read_log

    cfg = load_scenario("scenarios/demo_drift.toml", overrides={"run.duration_days": 1.0})
    summary = run_scenario(cfg, "results/demo_1day.h5")
    log = read_log(summary.path)
    build_report(summary.path, "results/report_demo_1day")   # figures, tables, report.html

Importing this module starts no JVM (the truth is booted by ``run_scenario``; the OEM export
boots it too).
"""

from __future__ import annotations

from sim.campaign.execute import CampaignResult, run_campaign
from sim.campaign.plan import Plan, plan_campaign
from sim.campaign.report import build_report as campaign_statistics
from sim.campaign.spec import Campaign, load_campaign, parse_campaign
from sim.campaign.summary import CampaignSummary, read_summary
from sim.errors import (CoveyError, EnvironmentSetupError, LogFormatError, LogWriteError,
                        PropagationError, ScenarioError)
from sim.gate import assert_requirements, check, compare, judge_log
from sim.judge.metrics import DeputyMetrics, run_metrics
from sim.lincov.compare import compare_with_summary
from sim.lincov.predict import Prediction, predict_scenario
from sim.lincov.store import read_prediction, write_prediction
from sim.log.diff import diff_logs
from sim.log.reader import RunLog, read_log
from sim.loop.options import RunOptions
from sim.loop.run import RunSummary, run_scenario
from sim.scenario.config import RunConfig
from sim.scenario.feasibility import feasibility_warnings
from sim.scenario.reader import load_scenario, parse_scenario

__all__ = ["load_scenario", "parse_scenario", "feasibility_warnings", "RunConfig", "run_scenario",
           "RunSummary", "RunOptions",
           "read_log", "RunLog", "diff_logs", "run_metrics", "DeputyMetrics", "read_summary",
           "CampaignSummary", "load_campaign", "parse_campaign", "Campaign", "plan_campaign", "Plan",
           "run_campaign", "CampaignResult", "campaign_statistics", "predict_scenario", "Prediction", "write_prediction", "read_prediction",
           "compare_with_summary", "judge_log", "compare", "check", "assert_requirements",
           "build_report", "ReportResult", "VerificationRow", "export_run",
           "CoveyError", "ScenarioError", "EnvironmentSetupError", "PropagationError",
           "LogFormatError", "LogWriteError"]

# The report and export names load matplotlib: imported on first use (PEP 562), not with sim.api.
_LAZY = {"build_report": "sim.report.build", "ReportResult": "sim.report.build",
         "VerificationRow": "sim.report.verification", "export_run": "sim.report.export"}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'sim.api' has no attribute {name!r}")

"""covey's public Python face: what a user script or test imports (one place).

    from sim.api import load_scenario, run_scenario, read_log

    cfg = load_scenario("scenarios/demo_drift.toml", overrides={"run.duration_days": 1.0})
    summary = run_scenario(cfg, "results/demo_1day.h5")
    log = read_log(summary.path)

Importing this module starts no JVM (the truth is booted by ``run_scenario``).
"""

from __future__ import annotations

from sim.campaign.execute import CampaignResult, run_campaign
from sim.campaign.plan import Plan, plan_campaign
from sim.campaign.report import build_report
from sim.campaign.spec import Campaign, load_campaign, parse_campaign
from sim.campaign.summary import CampaignSummary, read_summary
from sim.errors import CoveyError, EnvironmentSetupError, LogFormatError, PropagationError, ScenarioError
from sim.judge.metrics import DeputyMetrics, run_metrics
from sim.log.diff import diff_logs
from sim.log.reader import RunLog, read_log
from sim.loop.options import RunOptions
from sim.loop.run import RunSummary, run_scenario
from sim.scenario.config import RunConfig
from sim.scenario.reader import load_scenario, parse_scenario

__all__ = ["load_scenario", "parse_scenario", "RunConfig", "run_scenario", "RunSummary", "RunOptions",
           "read_log", "RunLog", "diff_logs", "run_metrics", "DeputyMetrics", "read_summary",
           "CampaignSummary", "load_campaign", "parse_campaign", "Campaign", "plan_campaign", "Plan",
           "run_campaign", "CampaignResult", "build_report", "CoveyError", "ScenarioError", "EnvironmentSetupError",
           "PropagationError", "LogFormatError"]

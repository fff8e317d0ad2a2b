"""Compare runs and campaigns, re-judge logs, and check them against requirements (the regression
gate). Reads logs and campaign summaries only: no propagation, no Java.

- :mod:`judge`: re-judge a run log with today's metric code and other thresholds (``covey judge``);
- :mod:`sources`: a run log or a campaign behind one face;
- :mod:`quantities`: the metric names, units and which direction is better;
- :mod:`stats`: percentiles, success-rate bounds, two-sample and regression tests;
- :mod:`compare`: side-by-side comparison (``covey compare``);
- :mod:`requirements`: the requirements file (``covey.requirements``);
- :mod:`check`: the verification matrix (``covey check``) and :func:`assert_requirements`;
- :mod:`output`: table, CSV, JSON, Markdown and JUnit XML.

May import: numpy, scipy, h5py, sim.errors, sim.log, sim.judge, sim.campaign.summary,
sim.scenario.
"""

from sim.gate.check import assert_requirements, check
from sim.gate.compare import compare
from sim.gate.judge import judge_log

__all__ = ["assert_requirements", "check", "compare", "judge_log"]

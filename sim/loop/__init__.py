"""The cycle loop of one run: :mod:`engine` (free drift and closed loop), :mod:`mission` (what a law
is told: the mission wall), :mod:`checks` (a law's answer checked before it is flown),
:mod:`options` (``RunOptions``), :mod:`run` (``run_scenario``). Imports the truth only through
``run.truth_backend`` (late), so nothing here needs Java at import time.

May import: numpy, sim.scenario, sim.models, sim.log, sim.judge, sim.truth.model, guidance.
"""

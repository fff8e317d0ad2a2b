"""Campaigns: Monte Carlo dispersions, parameter sweeps and error budgets over one scenario, and the
campaign summary (:mod:`summary`). Reads and writes run logs and summaries; no Java in the parent.

May import: numpy, scipy, h5py, sim.scenario, sim.loop, sim.log, sim.judge.
"""

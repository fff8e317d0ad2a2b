"""Campaigns: Monte Carlo dispersions, parameter sweeps and error budgets over one scenario, and the
campaign summary (:mod:`summary`). Reads and writes run logs and summaries; no Java in the parent
(the runs are flown by worker processes, each booting its own JVM through ``sim.loop``).

Modules: :mod:`spec` (the campaign file), :mod:`plan` (checked against the base scenario; the runs),
:mod:`sampler` (seeds and draws), :mod:`worker` (one run in a worker), :mod:`executors` (local spawn
processes, Dask distributed, in-process: one adapter), :mod:`execute` (flying, resume, the summary
rebuilt from the logs), :mod:`summary` (the summary file), :mod:`stats` and :mod:`report` (what
``covey summary`` prints), :mod:`tomltext` (inline base scenarios written out as TOML).

May import: numpy, scipy, h5py, distributed (lazily), sim.scenario, sim.loop, sim.log, sim.judge,
sim.errors, and guidance's pure helpers (guidance.settings, guidance.interface's error type).
"""

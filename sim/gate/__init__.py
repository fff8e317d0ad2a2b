"""Compare runs and campaigns, re-judge logs, and check them against requirements (the regression
gate). Reads logs and campaign summaries only: no propagation, no Java.

May import: numpy, scipy, h5py, sim.log, sim.judge, sim.campaign.summary, sim.scenario.
"""

"""Linear covariance prediction of final errors (the sim side: the command, the file and the
comparison with Monte Carlo); the linear model itself is guidance's. No Java.

May import: numpy, scipy, h5py, guidance, sim.scenario, sim.loop.mission, sim.campaign.summary.
"""

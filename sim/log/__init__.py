"""The HDF5 run log: :mod:`recorder` (writer), :mod:`buffer` (batched appends), :mod:`reader`
(``read_log``), :mod:`provenance` (versions, git, data files), :mod:`diff` (two logs compared). No Java.

May import: numpy, h5py, sim.errors, sim.scenario.config.
"""

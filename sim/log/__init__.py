"""The HDF5 run log: :mod:`recorder` (writer), :mod:`container` (the file on disk: covey header,
CRC-32, atomic writes, the per-path lock), :mod:`buffer` (batched appends), :mod:`reader`
(``read_log``), :mod:`provenance` (versions, git, data files), :mod:`diff` (two logs compared). No Java.

May import: numpy, h5py, sim.errors, sim.scenario.config.
"""

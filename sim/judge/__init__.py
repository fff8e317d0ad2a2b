"""What judges guidance: metrics computed from a run log's truth arrays only (never by guidance
code). No Java.

May import: numpy, h5py, sim.models.frames, sim.errors.
"""

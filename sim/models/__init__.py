"""Pure numpy error and geometry models the loop applies between truth and guidance: :mod:`noise`
(seeded streams, the one Gauss-Markov recursion), :mod:`navigation`, :mod:`actuators`,
:mod:`geometry` (spacecraft areas, attitude modes), :mod:`frames` (the one RTN helper). No Java.

May import: numpy, scipy, sim.errors, sim.scenario.config, guidance.interface (data types).
"""

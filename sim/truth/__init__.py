"""The truth world: :mod:`world` (``TruthWorld``: one Orekit numerical propagator per spacecraft),
:mod:`craft` (per-spacecraft state), :mod:`sampling` (step handlers), :mod:`density` (logged
density), :mod:`frames` (Orekit transforms as numpy), :mod:`model` (the ``TruthModel`` Protocol the
loop relies on; no Java).

May import: numpy, jpype/org/java, sim.orekit, sim.models, sim.scenario.config, sim.errors.
"""

"""Scenario files: TOML in, a validated, typed, immutable ``RunConfig`` out (:mod:`config`). No Java.

May import: numpy, tomllib/tomli, sim.errors, sim.orekit.data (pure Python), guidance.constants and
guidance.interface (names only).
"""

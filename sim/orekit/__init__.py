"""The Java side: :mod:`boot` (the one place the JVM starts), :mod:`data` (which Orekit data, its
files, the solar-activity spans; pure Python), :mod:`forces` (force models and space weather) and
:mod:`meanroe` (Eckstein-Hechler mean elements and mean ROE: the independent judge of guidance).

May import: numpy, jpype/org/java (after ``boot``), sim.errors, sim.scenario.config. Nothing here
imports guidance.
"""

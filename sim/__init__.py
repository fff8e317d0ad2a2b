"""covey's truth world and harness (the only package that touches Orekit and Java).

Rooms, in the order data flows through a run:

- ``sim.scenario``: scenario TOML -> validated, typed ``RunConfig`` (no Java);
- ``sim.orekit``: the Java side: JVM boot, Orekit data, force models, the independent
  mean-element judge;
- ``sim.truth``: the truth world (one Orekit propagator per spacecraft);
- ``sim.models``: pure numpy error models (noise streams, navigation, actuators, geometry, frames);
- ``sim.loop``: the cycle loop (engine, mission wall, output checks, runtime options, run);
- ``sim.log``: the HDF5 run log (writer, buffer, reader, provenance, diff);
- ``sim.judge``: metrics from a log (no Java);
- ``sim.campaign``, ``sim.gate``, ``sim.report``, ``sim.lincov``: what reads many runs;
- ``sim.cli``: the ``covey`` command.

Only ``sim.orekit`` and ``sim.truth`` import ``org``, ``java`` or ``jpype`` (a test walks the
imports). ``sim.api`` is the small public face.
"""

__version__ = "0.1.0"

"""Runtime options of one run: switches that change how a run is computed, never what it computes.

:class:`RunOptions` is immutable and passed to :func:`sim.loop.run.run_scenario`; it is stored in
the run log (``/meta@run_options_json``) so a run can be reproduced exactly as it was flown. Tests
and benchmarks flip these instead of module-level globals, so worker processes never inherit a
switch by accident. Pure Python (no Java).
"""

from __future__ import annotations

import contextlib
import dataclasses
import gc
import json
from dataclasses import dataclass

__all__ = ["RunOptions", "frozen_heap"]


@dataclass(frozen=True)
class RunOptions:
    """How a run is computed (the logged numbers do not depend on these; tests check it).

    Attributes
    ----------
    freeze_heap : bool
        Freeze the Python heap during the loop (:func:`frozen_heap`).
    log_thread : bool
        Compress and write the buffered log rows on one writer thread (h5py releases the GIL),
        overlapped with the loop; the file is the same either way.
    log_write_sim_s : float
        The buffered rows are written after at most this much simulated time, s.
    log_write_wall_s : float
        ... or after at most this much wall-clock time, s (whichever comes first).
    checkpoint_wall_s : float
        The log is checkpointed (written whole to ``<log>.part``, readable, status ``running``)
        after the first guidance cycle and then after at most this much wall-clock time, s;
        0: after every cycle.
    checkpoint_cycles : int
        ... and also after every this many guidance cycles; 0: by wall time only.
    batched_density : bool
        Logged NRLMSISE-00 density in batch by the reference code (pymsis) where the set-up
        allows it; False: Orekit per sample.
    java_sampler : bool
        Sample the truth with Orekit's CCSDS OEM streaming writer (no Python per sample);
        False: the Python step handler.
    truth_threads : int or None
        Spacecraft propagated at the same time; None: ``COVEY_TRUTH_THREADS`` or the number of
        cores (:func:`sim.truth.world.default_threads`).
    """

    freeze_heap: bool = True
    log_thread: bool = True
    log_write_sim_s: float = 86400.0
    log_write_wall_s: float = 30.0
    checkpoint_wall_s: float = 60.0
    checkpoint_cycles: int = 0
    batched_density: bool = True
    java_sampler: bool = True
    truth_threads: int | None = None

    def replace(self, **changes) -> "RunOptions":
        """A copy with ``changes`` (unknown names raise TypeError)."""
        return dataclasses.replace(self, **changes)

    def to_json(self) -> str:
        """The options as JSON text (stored in the run log)."""
        return json.dumps(dataclasses.asdict(self), sort_keys=True)


@contextlib.contextmanager
def frozen_heap(enabled: bool = True):
    """Collect once, then move every object alive to the garbage collector's permanent generation
    (``gc.freeze``) for the duration of the block, and back afterwards (``gc.unfreeze``; left as it
    is when the caller had frozen objects already).

    Why: JPype runs a full Python collection after each Java garbage collection, on a Java
    thread and holding the GIL, and the truth's propagation makes the JVM collect several times
    a second. A full collection walks every tracked object (about 35 000 after boot and 85 000
    once a run has imported what it uses: functions, dicts, JPype's class wrappers), 30-60 ms
    each; 84 of them took 4.8 s of a 3-day closed loop of the demo formation (17.7 s), stalling
    guidance and the propagation threads' hand-overs.
    Frozen objects are skipped (they are still freed by reference counting); only the cyclic
    garbage made inside the block is collected. Measured in benchmarks/RESULTS.md (closed-loop cost).
    """
    if not enabled:
        yield
        return
    already = gc.get_freeze_count() > 0
    gc.collect()
    gc.freeze()
    try:
        yield
    finally:
        if not already:
            gc.unfreeze()



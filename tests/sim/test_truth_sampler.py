"""The truth samples taken by Orekit's CCSDS OEM streaming writer (Java fixed-step handler)
against the Python step handler that interpolates the same integrator steps.

Reference: Orekit's own step interpolator (``OrekitStepInterpolator.getInterpolatedState``, the
Python-handler path forced by ``TruthWorld(java_sampler=False)``); the OEM text carries shortest
round-trip decimals of km and km/s, so the two must agree to the last bits, and the mass must
follow the rocket equation across impulses exactly as the propagated state does.
"""

from __future__ import annotations

import numpy as np
import pytest

from sim_builders import cubesat_bus, make_run  # tests/sim/sim_builders.py

pytestmark = pytest.mark.orekit


def _fly(java: bool, log_step_s: float, chunks_s, impulses, switches, threads=None, deputies=1):
    from sim.truth.world import TruthWorld

    deps = [(f"dep{k}" if k else "dep", "nominal", [0.0, 2000.0 * (k + 1), 0.0, 100.0, 0.0, 100.0 * (k + 1)])
            for k in range(deputies)]
    run = make_run(deputies=deps, bus=cubesat_bus(), duration_s=float(chunks_s[-1]), log_step_s=log_step_s)
    w = TruthWorld(run, java_sampler=java, threads=threads)
    for name, *_ in deps:
        w.set_impulses(name, impulses)
        w.set_mode_schedule(name, switches)
    out = {n: [] for n in w.names}
    for t in chunks_s:
        w.advance_to(float(t))
        for n, s in w.drain_samples().items():
            out[n].append(s)
    return {n: {k: np.concatenate([s[k] for s in v]) for k in v[0]} for n, v in out.items()}


@pytest.mark.parametrize("chunks_s", [(5400.0, 10800.0, 16200.0), (4000.0, 9000.0, 16200.0)])
def test_oem_sampler_matches_the_python_sampler(chunks_s):
    # chunk ends on the grid (a 5400 s guidance cycle) and off it (4000 s: the next segment
    # starts off the 60 s grid and falls back to the Python handler); impulses inside segments,
    # one exactly at a chunk boundary, mode switches with slews
    imp = [(1234.5, np.array([0.0, 0.01, 0.0])), (5400.0, np.array([0.002, 0.0, -0.003])),
           (12000.25, np.array([0.0, -0.02, 0.001]))]
    sw = [(700.0, "max_drag"), (7000.0, "min_drag"), (13000.0, "nominal")]
    a = _fly(True, 60.0, chunks_s, imp, sw)
    b = _fly(False, 60.0, chunks_s, imp, sw)
    for n in ("chief", "dep"):
        np.testing.assert_array_equal(a[n]["t_s"], b[n]["t_s"])
        assert a[n]["t_s"].size == int(chunks_s[-1] / 60.0) + 1
        assert np.max(np.abs(a[n]["r_eci_m"] - b[n]["r_eci_m"])) < 1e-6
        assert np.max(np.abs(a[n]["v_eci_mps"] - b[n]["v_eci_mps"])) < 1e-9
        np.testing.assert_allclose(a[n]["mass_kg"], b[n]["mass_kg"], rtol=1e-12, atol=0.0)
        np.testing.assert_array_equal(a[n]["mode_index"], b[n]["mode_index"])
        np.testing.assert_allclose(a[n]["density_kgpm3"], b[n]["density_kgpm3"], rtol=1e-12)
    m = a["dep"]["mass_kg"]
    assert np.unique(np.round(m, 12)).size == 4  # initial + three impulses


def test_spacecraft_propagated_in_parallel_give_the_same_truth_bit_for_bit():
    # threads=3: chief and two deputies each propagate() on their own Java thread; every
    # spacecraft has its own propagator, the shared models are immutable or use Orekit's
    # thread-safe caches, so the samples must be the same numbers as one after the other
    imp = [(1234.5, np.array([0.0, 0.01, 0.0])), (5400.0, np.array([0.002, 0.0, -0.003]))]
    sw = [(700.0, "max_drag"), (7000.0, "min_drag")]
    chunks = (5400.0, 10800.0)
    a = _fly(True, 60.0, chunks, imp, sw, threads=1, deputies=2)
    b = _fly(True, 60.0, chunks, imp, sw, threads=3, deputies=2)
    assert set(a) == {"chief", "dep", "dep1"}
    for n in a:
        for k in a[n]:
            np.testing.assert_array_equal(a[n][k], b[n][k], err_msg=f"{n}/{k}")


def test_bad_thread_count_names_the_variable(monkeypatch):
    from sim.errors import ScenarioError
    from sim.truth.world import TRUTH_THREADS_ENV, default_threads

    monkeypatch.setenv(TRUTH_THREADS_ENV, "two")
    with pytest.raises(ScenarioError) as err:
        default_threads()
    assert TRUTH_THREADS_ENV in str(err.value) and "positive integer" in str(err.value)
    monkeypatch.setenv(TRUTH_THREADS_ENV, "1")
    assert default_threads() == 1


def test_early_segments_give_the_same_truth_and_are_discarded_when_changed():
    # start_early begins the chief's segment while the caller "thinks"; advance_to uses it. A
    # change of that spacecraft's impulses or schedule in between discards it (run again): the
    # truth never depends on the early start
    from sim.truth.world import TruthWorld

    run = make_run(deputies=[("dep", "nominal", [0.0, 2000.0, 0.0, 100.0, 0.0, 100.0])], bus=cubesat_bus(),
                   duration_s=10800.0, log_step_s=60.0)
    imp = [(1234.5, np.array([0.0, 0.01, 0.0]))]

    def fly(early: bool, change: bool):
        w = TruthWorld(run, threads=2)
        w.set_impulses("dep", imp)
        w.advance_to(5400.0)
        if early:
            assert w.start_early(10800.0, ["chief"]) == ["chief"]
        w.set_impulses("dep", [(6000.0, np.array([0.0, -0.01, 0.0]))])
        w.set_impulses("chief", [])  # unchanged: the early segment stays
        if early:
            assert w._early is not None
        if change:
            w.set_impulses("chief", [(7000.0, np.array([0.0, 0.0, 0.002]))])
            w.set_mode_schedule("chief", [(8000.0, "max_drag")])
        w.advance_to(10800.0)
        return w.drain_samples(), w.drain_executed_impulses()

    for change in (False, True):
        ref, ref_imp = fly(False, change)
        got, got_imp = fly(True, change)
        assert len(got_imp) == len(ref_imp) == (3 if change else 2)
        for n in ref:
            for k in ref[n]:
                np.testing.assert_array_equal(ref[n][k], got[n][k], err_msg=f"change={change} {n}/{k}")
    w = TruthWorld(run, threads=1)
    assert w.start_early(5400.0, ["chief"]) == []  # one thread: nothing to overlap

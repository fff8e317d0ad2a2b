"""Fuzzed inputs to ``covey validate`` (no Java): a few hundred seeded mutations of the example
scenarios and of ``--set`` items must each end as "ok" (exit 0) or "refused" (exit 2, one line
on stderr), never as an unexpected error, another exit code or a traceback.

The mutator and the outcome rules are benchmarks/fuzz_inputs.py (which runs 2,000+ cases);
fuzzing against a fixed seed is common practice, no source.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path


_PATH = Path(__file__).resolve().parents[2] / "benchmarks" / "fuzz_inputs.py"
_spec = importlib.util.spec_from_file_location("covey_fuzz_inputs", _PATH)
fuzz_inputs = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fuzz_inputs)


def test_400_mutations_no_unexpected_error(monkeypatch):
    monkeypatch.delenv("COVEY_OREKIT_DATA", raising=False)
    outcomes, by_kind, failures = fuzz_inputs.fuzz(400, seed=20261204)
    assert failures == []
    assert outcomes["ok"] + outcomes["refused"] == 400
    # the mutations reach both outcomes and every kind of mutation ran
    assert outcomes["ok"] >= 10 and outcomes["refused"] >= 200
    kinds = {k for k, _ in by_kind}
    assert {"set:key", "set:value", "text:deep_nesting", "text:bad_utf8", "text:truncate"} <= kinds


def test_the_harness_sees_failures(tmp_path, monkeypatch, repo_root):
    """An exception out of main, an "unexpected error" exit 1 and a stray stderr line on exit 0
    are failures (so the test above can fail)."""
    import sim.cli.main

    scenario = str(repo_root / "scenarios/ideal_pair.toml")
    assert fuzz_inputs.run_case(scenario, None, [], tmp_path)[0] == "ok"
    assert fuzz_inputs.run_case(scenario, None, ["run.seed=-1"], tmp_path)[0] == "refused"

    def boom(argv):
        raise RecursionError("deep")

    monkeypatch.setattr(sim.cli.main, "main", boom)
    assert fuzz_inputs.run_case(scenario, None, [], tmp_path)[0] == "failure"

    def unexpected(argv):
        import sys

        sys.stderr.write("covey: unexpected error: TypeError: x\n")
        return 1

    monkeypatch.setattr(sim.cli.main, "main", unexpected)
    assert fuzz_inputs.run_case(scenario, None, [], tmp_path)[0] == "failure"

    def warns(argv):
        import sys

        sys.stderr.write("RuntimeWarning: overflow encountered in dot\n")
        return 0

    monkeypatch.setattr(sim.cli.main, "main", warns)
    assert fuzz_inputs.run_case(scenario, None, [], tmp_path)[0] == "failure"

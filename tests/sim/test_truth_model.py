"""The truth contract: sim.truth.world.TruthWorld and the tests' stand-in both implement
sim.truth.model.TruthModel, method by method with compatible signatures, so the stand-in the
fast tests fly cannot drift from the real truth (no JVM needed: the classes are inspected)."""

from __future__ import annotations

import inspect

import pytest

from sim.truth.model import TRUTH_METHODS, TruthModel
from tests.conftest import FakeTruthWorld


def _params(fn):
    return [p for p in inspect.signature(fn).parameters.values() if p.name != "self"]


def _compatible(impl, proto) -> list[str]:
    """Problems of ``impl`` against ``proto``: every protocol parameter accepted by name in the
    same position, extra parameters of the implementation optional."""
    out = []
    pi, pp = _params(impl), _params(proto)
    for k, p in enumerate(pp):
        if k >= len(pi) or pi[k].name != p.name:
            out.append(f"parameter {k} should be {p.name!r}, is "
                       f"{pi[k].name if k < len(pi) else 'missing'!r}")
    for p in pi[len(pp):]:
        if p.default is inspect.Parameter.empty and p.kind not in (p.VAR_POSITIONAL, p.VAR_KEYWORD):
            out.append(f"extra parameter {p.name!r} has no default")
    return out


def test_protocol_lists_every_method():
    declared = {n for n, v in vars(TruthModel).items() if inspect.isfunction(v) and not n.startswith("_")}
    assert declared == set(TRUTH_METHODS)


@pytest.mark.parametrize("cls_path", ["sim.truth.world:TruthWorld", "tests.conftest:FakeTruthWorld"])
def test_truth_implementations_match_the_protocol(cls_path):
    import importlib

    mod, _, name = cls_path.partition(":")
    try:
        cls = getattr(importlib.import_module(mod), name)
    except ImportError as exc:  # the real world needs orekit-jpype installed (not the JVM)
        pytest.skip(f"{mod}: {exc}")
    problems = {}
    for m in TRUTH_METHODS:
        impl = getattr(cls, m, None)
        if impl is None:
            problems[m] = ["missing"]
            continue
        p = _compatible(impl, getattr(TruthModel, m))
        if p:
            problems[m] = p
    assert problems == {}


def test_the_checker_catches_a_drifted_stand_in():
    class Drifted(FakeTruthWorld):
        def set_impulses(self, who, impulses):  # renamed parameter
            pass

    assert _compatible(Drifted.set_impulses, TruthModel.set_impulses)
    assert not hasattr(type("Bare", (), {}), "start_early")


def test_stand_in_instances_are_truth_models(repo_root):
    from sim.scenario.reader import load_scenario

    cfg = load_scenario(repo_root / "scenarios" / "demo_formation.toml")
    assert isinstance(FakeTruthWorld(cfg), TruthModel)

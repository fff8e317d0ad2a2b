"""guidance/ is pure numpy/scipy: it never imports Java, JPype, Orekit or the simulation (sim).

Two checks (the project's architecture rule, DEVELOPERS.md "Three walls"; no outside source):
1. dynamic: in a fresh interpreter whose import system refuses the forbidden names (a
   ``sys.meta_path`` finder that raises ImportError), import every module under guidance/
   (walking subpackages such as guidance/laws) and run a small computation;
2. static: no file under guidance/ contains an import of those names (also inside functions, and
   through ``importlib.import_module`` / ``__import__`` with a literal name).
Each check is first shown to fail on a planted violation, so the test cannot pass vacuously.
"""

from __future__ import annotations

import ast
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
GUIDANCE = REPO / "guidance"
FORBIDDEN = ("jpype", "_jpype", "orekit_jpype", "orekit", "java", "javax", "jdk", "org", "sim")

_CHILD = textwrap.dedent("""
    import importlib, importlib.abc, pkgutil, sys
    sys.path.insert(0, {repo!r})
    FORBIDDEN = {forbidden!r}

    class Refuse(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path=None, target=None):
            if name.split(".")[0] in FORBIDDEN:
                raise ImportError("guidance purity test: import of " + name + " refused")
            return None

    sys.meta_path.insert(0, Refuse())
    for top in FORBIDDEN:
        try:
            __import__(top)
        except ImportError:
            pass
        else:
            raise SystemExit("the refusing finder does not work for " + top)
    {planted}
    import guidance

    def fail(name):
        raise sys.exc_info()[1]

    names = ["guidance"] + [m.name for m in pkgutil.walk_packages(guidance.__path__, "guidance.",
                                                                  onerror=fail)]
    for name in names:
        importlib.import_module(name)

    import numpy as np
    from guidance.constants import R_EARTH_M
    from guidance.density import DensityModel, differential_along_track_accel_mps2
    from guidance.dynamics import drag_segment_input, stm_j2
    from guidance.estimation import nav_to_mean
    from guidance.interface import AbsoluteEstimate, NavSolution, RelativeEstimate
    from guidance.meanosc import mean_oe_to_rv

    chief = np.array([R_EARTH_M + 500e3, 1e-4, 0.0, 1.7, 0.3, 0.1])
    rc, vc = mean_oe_to_rv(chief)
    nav = NavSolution(0.0, AbsoluteEstimate("c", 0.0, rc, vc, np.ones(3), np.ones(3), 4.0),
                      {{"d": RelativeEstimate("d", 0.0, np.array([0.0, -200.0, 30.0]), np.zeros(3),
                                             np.ones(3), np.ones(3), 4.0)}})
    state = nav_to_mean(nav)
    rho = DensityModel.from_settings({{}}).density_kgpm3(500e3)
    aT = differential_along_track_accel_mps2(rho, 7600.0, 0.02, 0.01)
    g = drag_segment_input(state.chief_oe, 0.0, 6000.0, 9000.0)
    x = stm_j2(state.chief_oe, 86400.0) @ state.roe["d"] + g * aT
    assert np.all(np.isfinite(x))
    leaked = sorted(m for m in sys.modules if m.split(".")[0] in FORBIDDEN)
    if leaked:
        raise SystemExit("forbidden modules loaded: " + ", ".join(leaked))
    print("PURE", len(names))
""")


def _run_child(planted: str = "") -> subprocess.CompletedProcess:
    code = _CHILD.format(repo=str(REPO), forbidden=FORBIDDEN, planted=planted)
    return subprocess.run([sys.executable, "-c", code], cwd=str(REPO), capture_output=True,
                          text=True, timeout=120)


def test_every_guidance_module_imports_and_runs_without_java_or_sim():
    res = _run_child()
    assert res.returncode == 0, res.stdout + res.stderr
    n = int(res.stdout.split("PURE")[-1])
    expected = {p for p in GUIDANCE.rglob("*.py") if "__pycache__" not in p.parts}
    assert n >= len(expected), (n, sorted(str(p) for p in expected))


def test_dynamic_check_fails_on_a_planted_import():
    # A guidance-like module importing jpype at import time must make the child fail.
    res = _run_child(planted="import jpype")
    assert res.returncode != 0 and "refused" in res.stderr


def forbidden_imports(source: str, filename: str = "<src>") -> list[str]:
    """Import statements (or literal importlib/__import__ calls) of forbidden top-level names."""
    found = []
    for node in ast.walk(ast.parse(source, filename)):
        names = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names = [node.module]
        elif isinstance(node, ast.Call) and node.args and isinstance(node.args[0], ast.Constant) \
                and isinstance(node.args[0].value, str):
            f = node.func
            fname = f.attr if isinstance(f, ast.Attribute) else getattr(f, "id", "")
            if fname in ("import_module", "__import__", "find_spec"):
                names = [node.args[0].value]
        for n in names:
            if n.split(".")[0] in FORBIDDEN:
                found.append(f"{filename}:{node.lineno}: {n}")
    return found


@pytest.mark.parametrize("src", [
    "import jpype",
    "import orekit_jpype as ok",
    "from sim.scenario.config import RunConfig",
    "from java.lang import System",
    "def f():\n    import sim.orekit.boot\n",
    "import importlib\nimportlib.import_module('sim.loop.run')",
    "x = __import__('orekit')",
    "from org.orekit.frames import FramesFactory",
])
def test_static_checker_flags_planted_imports(src):
    assert forbidden_imports(src)


@pytest.mark.parametrize("src", ["import numpy as np", "from .roe import oe_to_roe",
                                 "from simple_module import x", "import scipy.optimize",
                                 "s = 'import jpype'"])
def test_static_checker_allows_clean_code(src):
    assert not forbidden_imports(src)


def test_no_guidance_file_imports_java_or_sim():
    files = sorted(p for p in GUIDANCE.rglob("*.py") if "__pycache__" not in p.parts)
    assert files, "no guidance sources found"
    bad = []
    for p in files:
        bad += forbidden_imports(p.read_text(encoding="utf-8"), str(p.relative_to(REPO)))
    assert not bad, "guidance must stay pure numpy/scipy:\n" + "\n".join(bad)

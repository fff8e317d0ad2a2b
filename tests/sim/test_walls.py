"""The walls inside sim/ (the project's architecture rule, DEVELOPERS.md "Three walls"; no outside
source):

1. only ``sim/orekit`` and ``sim/truth`` import Java (``org``, ``java``, ``jpype``, ``orekit_jpype``),
   anywhere in a file (also inside functions);
2. the rooms that read and judge (scenario, judge, log, models, loop, cli, campaign, gate, report,
   lincov, the public face) reach no Java at import time: no chain of module-level imports leads
   from them to a module that imports Java at module level, and importing them in a fresh
   interpreter loads no Java module;
3. no import circle among sim's modules (module-level imports, the ones that run at import time).

Each checker is first shown to flag a planted violation in a copy of the tree, so the tests
cannot pass vacuously.
"""

from __future__ import annotations

import ast
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
JAVA = ("org", "java", "javax", "jpype", "_jpype", "orekit_jpype", "jdk")
JAVA_ROOMS = ("sim.orekit", "sim.truth")
NO_JAVA_ROOMS = ("sim.scenario", "sim.judge", "sim.log", "sim.models", "sim.loop", "sim.cli",
                 "sim.campaign", "sim.gate", "sim.report", "sim.lincov", "sim.api", "sim.errors")


def _modules(root: Path) -> dict[str, Path]:
    out = {}
    for p in sorted((root / "sim").rglob("*.py")):
        if "__pycache__" in p.parts:
            continue
        parts = list(p.relative_to(root).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = p
    return out


def _imports(path: Path, module: str, top_level_only: bool) -> list[tuple[str, int]]:
    """(imported module name, line) of a file; relative imports resolved against ``module``."""
    tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
    is_pkg = path.name == "__init__.py"
    nodes = tree.body if top_level_only else list(ast.walk(tree))
    if top_level_only:  # module level also means inside try/if blocks at module level
        stack, nodes = list(tree.body), []
        while stack:
            n = stack.pop()
            nodes.append(n)
            if isinstance(n, (ast.If, ast.Try)):
                stack.extend(n.body + n.orelse + getattr(n, "finalbody", [])
                             + [h for x in getattr(n, "handlers", []) for h in x.body])
    out = []
    for n in nodes:
        if isinstance(n, ast.Import):
            out += [(a.name, n.lineno) for a in n.names]
        elif isinstance(n, ast.ImportFrom):
            if n.level:
                base = module.split(".") if is_pkg else module.split(".")[:-1]
                base = base[: len(base) - (n.level - 1)]
                name = ".".join(base + ([n.module] if n.module else []))
            else:
                name = n.module or ""
            out.append((name, n.lineno))
            out += [(f"{name}.{a.name}", n.lineno) for a in n.names]  # `from sim.x import y` (a module)
    return out


def java_importers(root: Path) -> list[str]:
    """Files outside the Java rooms that import Java anywhere (also inside functions)."""
    bad = []
    for mod, path in _modules(root).items():
        if mod.startswith(JAVA_ROOMS):
            continue
        for name, line in _imports(path, mod, top_level_only=False):
            if name.split(".")[0] in JAVA:
                bad.append(f"{path.relative_to(root)}:{line}: {name}")
    return bad


def _graph(root: Path) -> dict[str, set[str]]:
    mods = _modules(root)
    g: dict[str, set[str]] = {}
    for mod, path in mods.items():
        deps = set()
        for name, _ in _imports(path, mod, top_level_only=True):
            if name.split(".")[0] in JAVA:
                deps.add("<java>")
            elif name in mods and name != mod:
                deps.add(name)
        g[mod] = deps
    return g


def java_reachable(root: Path) -> dict[str, list[str]]:
    """For each no-Java room's module, a module-level import chain that reaches Java, if any."""
    g = _graph(root)
    out = {}
    for start in g:
        if not start.startswith(NO_JAVA_ROOMS):
            continue
        seen, stack = {start: [start]}, [start]
        while stack:
            m = stack.pop()
            for d in g.get(m, ()):
                if d == "<java>":
                    out[start] = seen[m] + ["<java>"]
                    stack = []
                    break
                if d not in seen:
                    seen[d] = seen[m] + [d]
                    stack.append(d)
    return out


def import_cycles(root: Path) -> list[list[str]]:
    """Cycles of module-level imports among sim's modules (Tarjan's strongly connected components;
    a package importing its own submodule counts too)."""
    g = {m: {d for d in ds if d != "<java>"} for m, ds in _graph(root).items()}
    index, low, on, stack, out, k = {}, {}, set(), [], [], [0]

    def visit(v):
        index[v] = low[v] = k[0]
        k[0] += 1
        stack.append(v)
        on.add(v)
        for w in g.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    limit = sys.getrecursionlimit()
    sys.setrecursionlimit(max(10000, limit))
    try:
        for v in sorted(g):
            if v not in index:
                visit(v)
    finally:
        sys.setrecursionlimit(limit)  # other tests rely on the interpreter's own limit
    return out


@pytest.fixture
def planted_tree(tmp_path):
    shutil.copytree(REPO / "sim", tmp_path / "sim", ignore=shutil.ignore_patterns("__pycache__"))
    return tmp_path


# ---- the checks on this tree -------------------------------------------------------------------


def test_only_the_orekit_and_truth_rooms_import_java():
    assert java_importers(REPO) == []


def test_the_reading_rooms_reach_no_java_at_import_time():
    assert java_reachable(REPO) == {}


def test_no_import_circle_in_sim():
    assert import_cycles(REPO) == []


def test_importing_the_reading_rooms_loads_no_java():
    code = ("import importlib, pkgutil, sys\n"
            f"sys.path.insert(0, {str(REPO)!r})\n"
            "import sim\n"
            "for m in pkgutil.walk_packages(sim.__path__, 'sim.'):\n"
            f"    if m.name.startswith({NO_JAVA_ROOMS!r}) and not m.name.endswith('__main__'):\n"
            "        importlib.import_module(m.name)\n"
            f"bad = sorted(m for m in sys.modules if m.split('.')[0] in {JAVA!r})\n"
            "print('LOADED', bad)\n")
    res = subprocess.run([sys.executable, "-c", code], cwd=str(REPO), capture_output=True, text=True,
                         timeout=120)
    assert res.returncode == 0, res.stderr
    assert "LOADED []" in res.stdout, res.stdout


# ---- each checker flags a planted violation ----------------------------------------------------


def test_planted_java_import_in_the_judge_is_flagged(planted_tree):
    p = planted_tree / "sim" / "judge" / "metrics.py"
    p.write_text(p.read_text() + "\n\ndef _x():\n    from org.orekit.frames import FramesFactory\n")
    assert any("judge/metrics.py" in b and "org.orekit" in b for b in java_importers(planted_tree))


def test_planted_module_level_chain_to_java_is_flagged(planted_tree):
    p = planted_tree / "sim" / "log" / "reader.py"
    p.write_text("from sim.orekit.boot import boot  # planted\n" + p.read_text())
    (planted_tree / "sim" / "orekit" / "boot.py").write_text(
        (planted_tree / "sim" / "orekit" / "boot.py").read_text() + "\nimport jpype  # planted\n")
    chains = java_reachable(planted_tree)
    assert "sim.log.reader" in chains and chains["sim.log.reader"][-1] == "<java>"


def test_planted_import_circle_is_flagged(planted_tree):
    p = planted_tree / "sim" / "log" / "recorder.py"
    p.write_text(p.read_text() + "\nfrom sim.log.reader import read_log  # planted circle\n")
    assert any({"sim.log.reader", "sim.log.recorder"} <= set(c) for c in import_cycles(planted_tree))

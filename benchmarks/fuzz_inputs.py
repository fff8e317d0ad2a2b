"""Fuzz ``covey validate`` with mutated scenario files and ``--set`` items (no Java).

Each case is one seeded mutation of an example scenario (scenarios/*.toml): of the file's text
(a line deleted or duplicated, a value replaced by a hostile one, bytes inserted, the file cut
short, deep nesting, invalid UTF-8), of a ``--set`` value (huge integers, NaN, inf, tiny and
negative numbers, wrong types, deep arrays, long strings) or of a ``--set`` key path (an index
first, a path through a number, empty parts, out-of-range indices, unknown keys).
:func:`run_case` calls ``sim.cli.main.main(["validate", ...])`` in-process and sorts the outcome:

- ``ok``: exit 0;
- ``refused``: exit 2 with exactly one line on stderr;
- ``failure``: anything else (an "unexpected error" line, another exit code, a traceback, more
  than one stderr line, an exception out of ``main``).

Usage::

    python benchmarks/fuzz_inputs.py [N] [--seed S]      # default N = 2000, S = 20261204

prints the counts per outcome and per mutation kind, and the first failures. The suite runs a
few hundred cases (tests/sim/test_fuzz_inputs.py).
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path
from typing import Any, Iterator

import numpy as np

REPO = Path(__file__).resolve().parent.parent
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

try:
    import tomllib as _toml
except ModuleNotFoundError:  # Python 3.10
    import tomli as _toml  # type: ignore[no-redef]

HOSTILE_VALUES = (
    "9" * 400, "-" + "9" * 400, "0", "-1", "-0.0", "1e308", "1e-300", "-1e-300", "1e400", "nan",
    "inf", "-inf", "true", "false", '""', '"x"', '"' + "a" * 5000 + '"', '"\u00e9\u4e2d\U0001f600"',
    "[]", "[1]", "[1, 2, 3, 4, 5, 6]", "[1, 2, 3, 4, 5, 6, 7]", '[1, "a", true]',
    "[" * 3000 + "]" * 3000, "[" * 40 + "]" * 40, "{}", "{ a = 1 }", "2025-01-01T00:00:00Z",
    "2025-13-45T99:99:99Z", "1979-05-27", "07:32:00", "0x7fffffffffffffff", "0b1", "1_000",
    "3.14159", "500", "6378.137", "63.43", "1e-12", "180", "0.0001", "1e-5", "[[1], [2]]",
    "[1e308, 1e308, 0]", "[1e308, -1e308, 1e308, 1e308, 1e308, 1e308]", "[0, 0, 0]",
)
BAD_KEY_PARTS = ("[0]", "[999999]", ".x", ".x.y", "..", "[-1]", "[", "]", ".", " ", "\u00e9",
                 "[0][0]", ".0", "=", "#")


def scenario_files() -> list[Path]:
    return sorted((REPO / "scenarios").glob("*.toml"))


def _key_paths(node: Any, prefix: str = "") -> Iterator[str]:
    """Every key path of a parsed TOML document (tables, array elements, values)."""
    if isinstance(node, dict):
        for k, v in node.items():
            p = f"{prefix}.{k}" if prefix else str(k)
            yield p
            yield from _key_paths(v, p)
    elif isinstance(node, list):
        for i, v in enumerate(node):
            p = f"{prefix}[{i}]"
            yield p
            yield from _key_paths(v, p)


def _mutate_text(text: str, rng: np.random.Generator) -> tuple[str, bytes]:
    lines = text.splitlines(keepends=True)
    kind = str(rng.choice(["delete_line", "duplicate_line", "replace_value", "insert_bytes",
                           "truncate", "deep_nesting", "bad_utf8", "swap_lines", "header"]))
    if kind == "delete_line" and lines:
        del lines[int(rng.integers(len(lines)))]
    elif kind == "duplicate_line" and lines:
        i = int(rng.integers(len(lines)))
        lines.insert(i, lines[i])
    elif kind == "swap_lines" and len(lines) > 1:
        i, j = (int(x) for x in rng.integers(len(lines), size=2))
        lines[i], lines[j] = lines[j], lines[i]
    elif kind == "replace_value":
        idx = [i for i, ln in enumerate(lines) if "=" in ln and not ln.lstrip().startswith("#")]
        if idx:
            i = int(rng.choice(idx))
            key = lines[i].split("=", 1)[0]
            lines[i] = f"{key}= {rng.choice(HOSTILE_VALUES)}\n"
    elif kind == "header":
        idx = [i for i, ln in enumerate(lines) if ln.lstrip().startswith("[")]
        if idx:
            i = int(rng.choice(idx))
            lines[i] = str(rng.choice(["[[run]]\n", "[chief.orbit.x]\n", "[bus]\n", "[]\n",
                                       "[deputies]\n", "[[chief]]\n", "[run.name]\n"]))
    out = "".join(lines)
    raw = out.encode("utf-8")
    if kind == "insert_bytes":
        i = int(rng.integers(len(raw) + 1))
        raw = raw[:i] + bytes(rng.integers(0, 256, size=int(rng.integers(1, 16)), dtype=np.uint8)) + raw[i:]
    elif kind == "truncate":
        raw = raw[:int(rng.integers(len(raw) + 1))]
    elif kind == "deep_nesting":
        depth = int(rng.choice([50, 500, 1500, 5000]))
        raw += f"\n[zz]\nx = {'[' * depth}{']' * depth}\n".encode()
    elif kind == "bad_utf8":
        i = int(rng.integers(len(raw) + 1))
        raw = raw[:i] + b"\xff\xfe\xc3" + raw[i:]
    return kind, raw


def cases(n: int, seed: int) -> Iterator[tuple[str, str, bytes | None, list[str]]]:
    """``n`` seeded cases: (kind, scenario file, mutated text or None, --set items)."""
    rng = np.random.default_rng(seed)
    files = scenario_files()
    parsed = {f: _toml.loads(f.read_text()) for f in files}
    keys = {f: list(_key_paths(parsed[f])) for f in files}
    for _ in range(n):
        f = files[int(rng.integers(len(files)))]
        what = int(rng.integers(3))
        if what == 0:
            kind, raw = _mutate_text(f.read_text(), rng)
            yield f"text:{kind}", str(f), raw, []
        elif what == 1:
            key = str(rng.choice(keys[f]))
            yield "set:value", str(f), None, [f"{key}={rng.choice(HOSTILE_VALUES)}"]
        else:
            key = str(rng.choice(keys[f]))
            pos = int(rng.integers(len(key) + 1))
            bad = str(rng.choice(BAD_KEY_PARTS))
            key = key[:pos] + bad + key[pos:] if rng.random() < 0.5 else key + bad
            yield "set:key", str(f), None, [f"{key}={rng.choice(HOSTILE_VALUES[:12])}"]


def run_case(scenario: str, raw: bytes | None, sets: list[str], tmp: Path) -> tuple[str, str]:
    """(outcome, detail) of ``covey validate`` on one case (see the module docstring)."""
    from sim.cli.main import main

    path = scenario
    if raw is not None:
        path = str(tmp / Path(scenario).name)  # beside nothing: relative paths in it break too
        Path(path).write_bytes(raw)
    argv = ["validate", path] + [x for s in sets for x in ("--set", s)]
    out, err = io.StringIO(), io.StringIO()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(argv)
    except BaseException as exc:  # noqa: BLE001 - that is the failure being looked for
        return "failure", f"{type(exc).__name__} out of main: {exc}"[:300]
    lines = err.getvalue().strip().splitlines()
    if code == 0:
        return ("ok", "") if not lines else ("failure", f"exit 0 with stderr {lines[:2]}")
    if code == 2 and len(lines) == 1 and "unexpected error" not in lines[0]:
        return "refused", lines[0][:200]
    return "failure", f"exit {code}: {' | '.join(lines)[:300]}"


def fuzz(n: int, seed: int) -> tuple[Counter, Counter, list[tuple]]:
    """Run ``n`` cases; (outcome counts, (kind, outcome) counts, failures)."""
    outcomes, by_kind, failures = Counter(), Counter(), []
    with tempfile.TemporaryDirectory(prefix="covey-fuzz-") as d:
        for k, (kind, scenario, raw, sets) in enumerate(cases(n, seed)):
            outcome, detail = run_case(scenario, raw, sets, Path(d))
            outcomes[outcome] += 1
            by_kind[kind, outcome] += 1
            if outcome == "failure":
                failures.append((k, kind, Path(scenario).name, sets, detail))
    return outcomes, by_kind, failures


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", nargs="?", type=int, default=2000)
    ap.add_argument("--seed", type=int, default=20261204)
    a = ap.parse_args(argv)
    os.environ.pop("COVEY_OREKIT_DATA", None)
    t0 = time.perf_counter()
    outcomes, by_kind, failures = fuzz(a.n, a.seed)
    wall = time.perf_counter() - t0
    print(f"{a.n} cases, seed {a.seed}, {wall:.1f} s: " +
          ", ".join(f"{k} {outcomes[k]}" for k in ("ok", "refused", "failure")))
    for kind in sorted({k for k, _ in by_kind}):
        print(f"  {kind:22s} " + "  ".join(f"{o} {by_kind[kind, o]}" for o in
                                           ("ok", "refused", "failure")))
    for f in failures[:20]:
        print("FAILURE", *f)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())

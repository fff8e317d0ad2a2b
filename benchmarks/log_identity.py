"""Same runs, same logs: fly a 1-day run of every example scenario and compare the logs, dataset
by dataset, with those of another checkout (wall-clock and git fields aside).

Usage::

    python benchmarks/log_identity.py record DIR            # fly every scenarios/*.toml for 1 day into DIR
    python benchmarks/log_identity.py compare DIR_A DIR_B   # the differences, per scenario
    python benchmarks/log_identity.py check REV             # record REV (a git revision, in a temporary
                                                            # worktree) and this checkout, then compare

Prints one line per scenario (``same`` or the differing keys) and exits 1 when any differ. The
runs use one truth thread (``COVEY_TRUTH_THREADS=1``; the samples do not depend on it) and are flown
with ``python -m sim.cli run`` in the checkout being recorded. Attributes a later schema added are
left out with ``--ignore`` (see :data:`DEFAULT_IGNORE`); ``meta/config_json`` is compared without
its ``source_path``.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent

DEFAULT_IGNORE = ("attr:meta@source_path", "attr:meta@run_options_json", "attr:meta@seed_scheme",
                  "attr:spacecraft/*/believed_density_kgpm3@source")
"""Keys that differ for reasons other than the simulation: where the checkout is, an attribute a
newer schema added, and two descriptive texts that name modules (changed when sim/ was regrouped)."""


def record(checkout: Path, out: Path) -> None:
    out.mkdir(parents=True, exist_ok=True)
    env = dict(os.environ, COVEY_TRUTH_THREADS="1", PYTHONPATH=str(checkout))
    for scen in sorted((checkout / "scenarios").glob("*.toml")):
        log = out / f"{scen.stem}.h5"
        cmd = [sys.executable, "-m", "sim.cli", "run", str(scen), "--set", "run.duration_days=1",
               "-o", str(log), "-q"]
        r = subprocess.run(cmd, cwd=checkout, env=env, capture_output=True, text=True)
        print(f"  flew {scen.stem}: exit {r.returncode}", flush=True)


def compare(a: Path, b: Path, ignore: list[str]) -> int:
    """Compare the logs of two record folders; ``ignore``: fnmatch patterns of
    ``attr:GROUP@NAME`` or ``data:PATH`` keys to leave out."""
    import fnmatch
    import json

    sys.path.insert(0, str(REPO))
    from sim.log.diff import WALL_CLOCK_ATTRS, WALL_CLOCK_DATASETS, _equal, log_items

    def key_text(k):
        return f"attr:{k[1]}@{k[2]}" if k[0] == "attr" else f"{k[0]}:{k[1]}"

    pats = list(ignore) + [f"attr:{g}@{n}" for g, n in WALL_CLOCK_ATTRS] + [f"data:{d}" for d in WALL_CLOCK_DATASETS]
    bad = 0
    names = sorted({p.name for p in a.glob("*.h5")} | {p.name for p in b.glob("*.h5")})
    for n in names:
        if not (a / n).exists() or not (b / n).exists():
            print(f"{n}: only in {'B' if not (a / n).exists() else 'A'}")
            bad += 1
            continue
        x, y = log_items(a / n), log_items(b / n)
        diff = []
        for k in sorted(set(x) | set(y), key=str):
            if any(fnmatch.fnmatchcase(key_text(k), pat) for pat in pats):
                continue
            if k == ("data", "meta/config_json") and k in x and k in y:
                cx, cy = (json.loads(v[2]) for v in (x[k], y[k]))
                cx.pop("source_path", None), cy.pop("source_path", None)  # where the checkout is
                if cx == cy:
                    continue
            if k not in x or k not in y or not _equal(x[k], y[k]):
                diff.append(key_text(k))
        print(f"{n}: " + ("same" if not diff else f"{len(diff)} differ: {', '.join(diff[:8])}"))
        bad += bool(diff)
    print(f"{len(names) - bad} of {len(names)} logs the same (ignored: {', '.join(ignore) or 'nothing'})")
    return 1 if bad else 0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    r = sub.add_parser("record")
    r.add_argument("dir", type=Path)
    c = sub.add_parser("compare")
    c.add_argument("a", type=Path)
    c.add_argument("b", type=Path)
    k = sub.add_parser("check")
    k.add_argument("rev")
    for p in (c, k):
        p.add_argument("--ignore", nargs="*", default=list(DEFAULT_IGNORE),
                       help="fnmatch patterns of keys to leave out: attr:GROUP@NAME or data:PATH "
                            "(default: %(default)s)")
    args = ap.parse_args()
    if args.cmd == "record":
        record(REPO, args.dir)
        return 0
    if args.cmd == "compare":
        return compare(args.a, args.b, args.ignore)
    tmp = Path(tempfile.mkdtemp(prefix="covey_identity_"))
    wt = tmp / "ref"
    subprocess.run(["git", "worktree", "add", "-q", "--detach", str(wt), args.rev], cwd=REPO, check=True)
    try:
        print(f"reference {args.rev}:")
        record(wt, tmp / "A")
        print("this checkout:")
        record(REPO, tmp / "B")
        return compare(tmp / "A", tmp / "B", args.ignore)
    finally:
        subprocess.run(["git", "worktree", "remove", "--force", str(wt)], cwd=REPO)


if __name__ == "__main__":
    sys.exit(main())

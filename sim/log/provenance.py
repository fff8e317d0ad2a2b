"""Provenance written into every run log: software versions, git commit, scenario text,
configuration, Orekit data files. Pure Python/h5py (no Java: the Orekit side hands its versions
and data files over as a plain ``BootInfo``).
"""

from __future__ import annotations

import dataclasses
import json
import platform
import subprocess
import time
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from sim import __version__
from sim.log.recorder import RunRecorder
from sim.scenario.config import RunConfig

__all__ = ["git_commit", "config_json", "write_start_meta", "write_boot_meta"]


def git_commit() -> str:
    """The git commit of the covey source tree (``+dirty`` when tracked files changed), or
    ``"unknown"`` outside a git checkout."""
    root = Path(__file__).resolve().parent
    try:
        out = subprocess.run(["git", "rev-parse", "HEAD"], cwd=root, capture_output=True,
                             text=True, timeout=10)
        if out.returncode != 0:
            return "unknown"
        commit = out.stdout.strip()
        st = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no"], cwd=root,
                            capture_output=True, text=True, timeout=10)
        return commit + ("+dirty" if st.returncode == 0 and st.stdout.strip() else "")
    except (OSError, subprocess.SubprocessError):
        return "unknown"


def config_json(cfg: RunConfig) -> str:
    d = dataclasses.asdict(cfg)
    d.pop("source_text", None)
    return json.dumps(d, indent=1, default=str, sort_keys=True)


def write_start_meta(rec: RunRecorder, cfg: RunConfig, data_path: str | None, label: str,
                     options: Any = None) -> None:
    """The scenario text, the validated configuration and the software versions, at the start."""
    rec.write_dataset("meta/scenario_toml", cfg.source_text, units="text")
    rec.write_dataset("meta/config_json", config_json(cfg), units="text")
    rec.write_attrs(
        "meta", covey_version=__version__, git_commit=git_commit(),
        python_version=platform.python_version(), numpy_version=np.__version__,
        h5py_version=h5py.__version__, hdf5_version=h5py.version.hdf5_version,
        run_name=cfg.name, epoch_utc=cfg.epoch_utc, duration_s=cfg.duration_s,
        log_step_s=cfg.log_step_s, cycle_s=cfg.guidance.cycle_s, guidance_law=cfg.guidance.law,
        seed=cfg.seed, seed_scheme="numpy SeedSequence(seed) spawn keys per error source (sim.models.noise)",
        source_path=cfg.source_path, overrides_json=json.dumps(dict(cfg.overrides), default=str),
        orekit_data_requested=data_path or "", orekit_data_from=label,
        started_utc=time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        status="running", reason="",
    )
    if options is not None:
        rec.write_attrs("meta", run_options_json=options.to_json())


def write_boot_meta(rec: RunRecorder, info: Any) -> None:
    """Orekit, Java and JPype versions and the Orekit data files (path, size, mtime)."""
    g = lambda k: getattr(info, k, None)  # noqa: E731
    rec.write_attrs("meta", orekit_version=g("orekit_version") or "unknown",
                    java_version=g("java_version") or "unknown",
                    jpype_version=g("jpype_version") or "unknown",
                    data_path=str(g("data_path") or ""), data_source=str(g("data_source") or ""),
                    jvm_options_json=json.dumps(list(g("jvm_options") or ())))
    files = list(g("data_files") or ())
    rec.append("meta/data_files", units={"path": "text", "mtime_utc": "text"},
               path=[str(f[0]) for f in files], size_bytes=np.array([int(f[1]) for f in files],
                                                                     dtype=np.int64),
               mtime_utc=[str(f[2]) for f in files])

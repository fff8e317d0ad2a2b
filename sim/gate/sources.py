"""What the gate reads: a run log or a campaign, behind one face (:class:`Source`): per deputy
and quantity an array with one value per run (one for a run log, N for a campaign), and the run
statuses. Run logs are judged by today's code (:mod:`sim.gate.judge`); a campaign's metrics come
from its summary, or are re-judged from its run logs when judging overrides are given.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import h5py
import numpy as np

from sim.campaign.summary import SCHEMA_NAME as CAMPAIGN_SCHEMA
from sim.campaign.summary import SUMMARY_NAME, read_summary, scalar_metric_names
from sim.errors import LogFormatError
from sim.gate.judge import rejudge
from sim.gate.quantities import summary_values
from sim.log.recorder import SCHEMA_NAME as RUNLOG_SCHEMA

__all__ = ["Source", "load_source", "source_kind", "pairing"]


@dataclass
class Source:
    """A run log or a campaign, as the gate sees it.

    Attributes
    ----------
    path : str
    kind : str
        ``"run"`` or ``"campaign"``.
    name : str
        Run name or campaign name.
    deputies : list of str
        Deputies with metrics.
    statuses : list of str
        One per run (``ok``, ``stopped``, ``failed``, ``missing``).
    schema : str
        ``covey.runlog x.y`` or ``covey.campaign x.y``.
    master_seed : int or None
        Campaigns only.
    params : dict
        Campaigns: scenario key -> (N,) sampled values.
    run_index : ndarray
        (N,) run indices (``[0]`` for a run log).
    setup : dict
        What the runs were flown with, flattened (``config_json`` of a log; for a campaign
        ``kind`` and its file), for saying how two sources differ.
    notes : list of str
        One line each (fall-backs, re-judging cautions).
    """

    path: str
    kind: str
    name: str
    deputies: list
    statuses: list
    schema: str
    master_seed: int | None = None
    params: dict = field(default_factory=dict)
    run_index: np.ndarray = field(default_factory=lambda: np.zeros(1, int))
    setup: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    _metrics: dict = field(default_factory=dict, repr=False)  # deputy -> name -> (N,) or (N, 6)
    _available: dict = field(default_factory=dict, repr=False)  # deputy -> set of metric names

    @property
    def n(self) -> int:
        """Number of runs."""
        return len(self.statuses)

    def values(self, deputy: str, name: str) -> np.ndarray:
        """(N,) values of a per-deputy quantity (NaN where a run has none)."""
        if deputy not in self._metrics:
            return np.full(self.n, np.nan)
        return summary_values(self._metrics[deputy], name, self.n)

    def has(self, deputy: str, name: str) -> bool:
        """Whether the source holds this quantity at all (an older summary may lack one)."""
        av = self._available.get(deputy, set())
        if name.startswith("err_"):
            return "final_error_m" in av
        return name in av

    def metric_dicts(self, k: int = 0) -> dict:
        """Deputy -> ``DeputyMetrics.as_dict()``-like mapping of run ``k``."""
        out = {}
        for d, m in self._metrics.items():
            out[d] = {n: np.asarray(v)[k] for n, v in m.items()}
        return out

    def label(self) -> str:
        return os.path.basename(self.path.rstrip("/")) or self.path


def source_kind(path: str | os.PathLike) -> str:
    """``"run"`` or ``"campaign"`` for a path (a campaign folder or summary file, or a run log).

    Raises
    ------
    LogFormatError
        Neither.
    """
    p = Path(path)
    if p.is_dir():
        if (p / SUMMARY_NAME).is_file():
            return "campaign"
        raise LogFormatError(str(p), SUMMARY_NAME, "a folder given, but it holds no campaign "
                                                   f"summary ({SUMMARY_NAME}); give a run log "
                                                   "(.h5) or a campaign folder")
    if not p.exists():
        raise LogFormatError(str(p), "/", "no such file or folder")
    try:
        with h5py.File(p, "r") as f:
            schema = f.attrs.get("schema", "")
    except OSError as exc:
        raise LogFormatError(str(p), "/", f"cannot open as HDF5: {exc}") from None
    schema = schema.decode() if isinstance(schema, bytes) else str(schema)
    if schema == RUNLOG_SCHEMA:
        return "run"
    if schema == CAMPAIGN_SCHEMA:
        return "campaign"
    raise LogFormatError(str(p), "/@schema", f"neither a covey run log nor a campaign summary "
                                             f"(schema {schema!r})")


def _flatten(d: Any, pre: str = "") -> dict:
    out = {}
    if isinstance(d, dict):
        for k, v in d.items():
            out.update(_flatten(v, f"{pre}.{k}" if pre else str(k)))
    elif isinstance(d, list) and d and all(isinstance(x, dict) for x in d):
        for i, v in enumerate(d):
            out.update(_flatten(v, f"{pre}[{i}]"))
    else:
        out[pre] = d
    return out


def _run_source(path: str, overrides: Mapping[str, Any] | None) -> Source:
    j = rejudge(path, overrides, fallback=True)
    setup: dict = {}
    try:
        with h5py.File(path, "r") as f:
            if "meta/config_json" in f:
                txt = f["meta/config_json"][()]
                txt = txt.decode() if isinstance(txt, bytes) else str(txt)
                setup = _flatten(json.loads(txt))
                for k in ("source_path", "overrides"):
                    setup = {kk: v for kk, v in setup.items() if not kk.startswith(k)}
    except (OSError, ValueError):
        setup = {}
    metrics = {}
    avail = {}
    for m in j.metrics:
        d = m.as_dict()
        metrics[m.name] = {k: np.asarray([v], float) for k, v in d.items()
                           if not isinstance(v, (str, dict))}  # (1,), final_error_m (1, 6)
        avail[m.name] = set(metrics[m.name])
    meta = j.meta
    return Source(path=path, kind="run", name=str(meta.get("run_name", "")),
                  deputies=[m.name for m in j.metrics], statuses=[str(meta.get("status", ""))],
                  schema=f"{RUNLOG_SCHEMA} {meta.get('schema_version', '')}",
                  setup=setup, notes=list(j.notes), _metrics=metrics, _available=avail)


def _rejudged_campaign_metrics(folder: Path, logs: list, statuses: list,
                               overrides: Mapping[str, Any], notes: list) -> dict:
    n = len(logs)
    names = scalar_metric_names()
    out: dict = {}
    missing = 0
    for k, (rel, st) in enumerate(zip(logs, statuses)):
        p = folder / rel if rel else None
        if p is None or not p.is_file():
            missing += 1
            continue
        for m in rejudge(p, overrides).metrics:
            d = out.setdefault(m.name, {nm: np.full(n, np.nan) for nm in names})
            d.setdefault("final_error_m", np.full((n, 6), np.nan))
            md = m.as_dict()
            for nm in names:
                d[nm][k] = float(md[nm])
            d["final_error_m"][k] = np.asarray(m.final_error_m, float)
    if missing:
        notes.append(f"{folder}: {missing} of {n} runs have no run log to re-judge (NaN)")
    return out


def _campaign_source(path: str, overrides: Mapping[str, Any] | None) -> Source:
    s = read_summary(path)
    folder = s.path.parent
    statuses = [str(x) for x in s.runs.get("status", [])]
    notes: list = []
    metrics = {d: dict(m) for d, m in s.metrics.items()}
    if overrides:
        metrics = _rejudged_campaign_metrics(folder, list(s.runs.get("log", [])), statuses,
                                             overrides, notes)
    ms = s.attrs.get("master_seed")
    setup = {"kind": s.attrs.get("kind", ""), "campaign_toml": s.campaign_toml}
    return Source(path=str(folder), kind="campaign", name=str(s.attrs.get("name", "")),
                  deputies=sorted(metrics), statuses=statuses,
                  schema=f"{CAMPAIGN_SCHEMA} {s.attrs.get('schema_version', '')}",
                  master_seed=None if ms is None else int(ms),
                  params={k: np.asarray(v, float) for k, v in s.params.items()},
                  run_index=np.asarray(s.runs.get("index", np.arange(len(statuses)))),
                  setup=setup, notes=notes, _metrics=metrics,
                  _available={d: set(m) for d, m in metrics.items()})


def load_source(path: str | os.PathLike, overrides: Mapping[str, Any] | None = None) -> Source:
    """Read a run log or a campaign for comparing or checking.

    Parameters
    ----------
    path : path-like
        A run log (``.h5``), a campaign folder, or its ``summary.h5``.
    overrides : mapping, optional
        Judging overrides (:data:`sim.gate.judge.JUDGE_KEYS`): a run log is re-judged with them,
        a campaign's run logs too.

    Raises
    ------
    LogFormatError, ScenarioError
    """
    p = str(path)
    kind = source_kind(p)
    return _run_source(p, overrides) if kind == "run" else _campaign_source(p, overrides)



def pairing(a: Source, b: Source) -> tuple[bool, str]:
    """Whether run k of ``a`` and run k of ``b`` share their random draws, and why (one line).

    Paired when both are campaigns with the same master seed, the same run indices and the same
    dispersions (every ``/params`` array equal, NaN equal to NaN).
    """
    if a.kind != "campaign" or b.kind != "campaign":
        return False, "unpaired: " + ("run logs" if a.kind == b.kind else
                                      "a run log against a campaign (the run as a sample of one)")
    if a.master_seed is None or a.master_seed != b.master_seed:
        return False, f"unpaired: master seeds differ ({a.master_seed}, {b.master_seed})"
    if a.n != b.n or not np.array_equal(a.run_index, b.run_index):
        return False, f"unpaired: different runs ({a.n} and {b.n} runs)"
    if set(a.params) != set(b.params):
        only = sorted(set(a.params) ^ set(b.params))
        return False, f"unpaired: dispersions differ (only on one side: {', '.join(only[:3])})"
    for k in a.params:
        if not np.array_equal(a.params[k], b.params[k], equal_nan=True):
            return False, f"unpaired: dispersed values differ ({k})"
    return True, (f"paired: same master seed {a.master_seed} and dispersions ({a.n} runs, "
                  f"{len(a.params)} dispersed keys)")

"""The campaign summary file: one row per run, every per-run metric the run logs hold.

Written only by the campaign's parent process (beside the run logs, ``<dir>/summary.h5``) and
read by ``covey summary``, ``covey compare``, ``covey check`` and ``covey report``. Pure h5py/numpy
(no Java). The summary can always be rebuilt from the run logs.

Layout (schema ``covey.campaign``, version :data:`SCHEMA_VERSION`), N runs:

============================== ========== ===== =================================================
path                           shape      units content
============================== ========== ===== =================================================
``/`` attributes                                ``schema``, ``schema_version``, ``created_utc``,
                                                ``name``, ``kind`` (``monte_carlo``, ``sweep``,
                                                ``error_budget``), ``master_seed``, ``n_runs``
``/meta/campaign_toml``        scalar     text  the campaign file verbatim
``/runs/index``                (N,)       1     run index k (its seed is derived from k)
``/runs/seed``                 (N,)       1     the run's ``run.seed``
``/runs/status``, ``reason``   (N,)       text  ``ok``, ``stopped``, ``failed``, ``missing``
``/runs/log``                  (N,)       text  the run log, relative to the campaign folder
``/runs/case``                 (N,)       text  grid point or error-budget case label ("" if none)
``/runs/grid_index``           (N,)       1     sweep grid point (-1: none)
``/runs/draw_index``           (N,)       1     dispersion draw (same draws at every grid point)
``/params/<name>``             (N,)       key's the sampled or swept value; attribute ``key`` =
                                                the scenario key path (as ``--set``)
``/metrics/<deputy>/<metric>`` (N,)       name  every scalar of ``sim.judge.metrics.DeputyMetrics``
                                                (NaN where the run has none)
``/metrics/<deputy>/final_error_m`` (N, 6) m    truth mean ROE minus target at the deadline
============================== ========== ===== =================================================
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import h5py
import numpy as np

from sim.errors import LogFormatError
from sim.log.recorder import units_for

__all__ = ["SCHEMA_NAME", "SCHEMA_VERSION", "SUMMARY_NAME", "RunRow", "CampaignSummary",
           "write_summary", "read_summary", "scalar_metric_names", "param_name"]

SCHEMA_NAME = "covey.campaign"
SCHEMA_VERSION = "1.0"
SUMMARY_NAME = "summary.h5"
"""File name of the summary inside a campaign folder."""

_STR = h5py.string_dtype(encoding="utf-8")


def scalar_metric_names() -> tuple[str, ...]:
    """The numeric scalar fields of :class:`sim.judge.metrics.DeputyMetrics` (in field order)."""
    from sim.judge.metrics import DeputyMetrics

    out = []
    for f in dataclasses.fields(DeputyMetrics):
        if f.type in ("float", "int", "bool", float, int, bool):
            out.append(f.name)
    return tuple(out)


def param_name(key: str) -> str:
    """A dataset name for a scenario key path: ``deputies[0].roe_m[1]`` -> ``deputies_0_.roe_m_1_``
    with ``/`` and brackets replaced (the key itself is kept as the dataset's ``key`` attribute)."""
    return re.sub(r"[^A-Za-z0-9_.-]", "_", key)


@dataclass
class RunRow:
    """One run of a campaign, as the summary holds it.

    Attributes
    ----------
    index, seed : int
    status, reason : str
    log : str
        Run log path relative to the campaign folder.
    case : str
    grid_index, draw_index : int
    params : dict
        Scenario key path -> value (float).
    metrics : dict
        Deputy name -> ``DeputyMetrics.as_dict()`` (or {} for a run without metrics).
    """

    index: int
    seed: int
    status: str
    reason: str = ""
    log: str = ""
    case: str = ""
    grid_index: int = -1
    draw_index: int = -1
    params: dict = field(default_factory=dict)
    metrics: dict = field(default_factory=dict)


@dataclass
class CampaignSummary:
    """A campaign summary in memory (numpy arrays, one entry per run).

    Attributes
    ----------
    path : Path
    attrs : dict
        Root attributes (``name``, ``kind``, ``master_seed``, ``n_runs``, ...).
    campaign_toml : str
    runs : dict
        ``index``, ``seed``, ``status``, ``reason``, ``log``, ``case``, ``grid_index``,
        ``draw_index`` -> (N,) arrays (text as lists of str).
    params : dict
        Scenario key path -> (N,) float array.
    metrics : dict
        Deputy -> metric name -> (N,) array, and ``final_error_m`` -> (N, 6).
    """

    path: Path
    attrs: dict
    campaign_toml: str
    runs: dict
    params: dict
    metrics: dict

    @property
    def deputies(self) -> list[str]:
        return sorted(self.metrics)

    @property
    def n_runs(self) -> int:
        return len(self.runs.get("index", ()))

    def metric(self, deputy: str, name: str) -> np.ndarray:
        """``metrics[deputy][name]``; ``err_<component>_m`` (``err_da_m``, ``err_dlambda_m``,
        ``err_dex_m``, ``err_dey_m``, ``err_dix_m``, ``err_diy_m``) give a column of
        ``final_error_m``.

        Raises
        ------
        KeyError
            Naming the deputy or metric and what there is.
        """
        if deputy not in self.metrics:
            raise KeyError(f"no deputy {deputy!r} in {self.path}; deputies: {self.deputies}")
        m = self.metrics[deputy]
        cols = ("da", "dlambda", "dex", "dey", "dix", "diy")
        if name.startswith("err_") and name.endswith("_m") and name[4:-2] in cols:
            return np.asarray(m["final_error_m"])[:, cols.index(name[4:-2])]
        if name not in m:
            raise KeyError(f"no metric {name!r} for {deputy!r} in {self.path}; metrics: {sorted(m)}")
        return np.asarray(m[name])


def _text(a: Sequence[str]) -> np.ndarray:
    return np.asarray([str(x) for x in a], dtype=object)


def write_summary(path: str | os.PathLike, rows: Sequence[RunRow], *, name: str, kind: str,
                  master_seed: int, campaign_toml: str, extra_attrs: Mapping[str, Any] | None = None
                  ) -> Path:
    """Write a campaign summary (to ``path + ".part"``, renamed when complete).

    Parameters
    ----------
    path : path-like
        ``<campaign folder>/summary.h5``.
    rows : sequence of RunRow
        In run-index order.
    name, kind : str
        Campaign name and kind (``monte_carlo``, ``sweep``, ``error_budget``).
    master_seed : int
    campaign_toml : str
        The campaign file's text.
    extra_attrs : mapping, optional
        More root attributes (JSON-able scalars or strings).
    """
    path = Path(path)
    tmp = path.with_name(path.name + ".part")
    rows = sorted(rows, key=lambda r: r.index)
    deputies = sorted({d for r in rows for d in r.metrics})
    keys = list(dict.fromkeys(k for r in rows for k in r.params))
    metric_names = scalar_metric_names()
    with h5py.File(tmp, "w") as f:
        f.attrs.update(schema=SCHEMA_NAME, schema_version=SCHEMA_VERSION,
                       created_utc=_dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
                       name=name, kind=kind, master_seed=int(master_seed), n_runs=len(rows))
        for k, v in (extra_attrs or {}).items():
            f.attrs[k] = v
        d = f.create_dataset("meta/campaign_toml", data=campaign_toml, dtype=_STR)
        d.attrs["units"] = "text"
        g = f.create_group("runs")
        for col, vals, units in (
                ("index", np.array([r.index for r in rows], np.int64), "1"),
                ("seed", np.array([r.seed for r in rows], np.int64), "1"),
                ("grid_index", np.array([r.grid_index for r in rows], np.int64), "1"),
                ("draw_index", np.array([r.draw_index for r in rows], np.int64), "1")):
            g.create_dataset(col, data=vals).attrs["units"] = units
        for col in ("status", "reason", "log", "case"):
            g.create_dataset(col, data=_text([getattr(r, col) for r in rows]), dtype=_STR
                             ).attrs["units"] = "text"
        pg = f.create_group("params")
        for k in keys:
            ds = pg.create_dataset(param_name(k), data=np.array(
                [float(r.params.get(k, np.nan)) for r in rows], float))
            ds.attrs["key"] = k
            ds.attrs["units"] = units_for(k.split(".")[-1].split("[")[0]) or "1"
        mg = f.create_group("metrics")
        for dep in deputies:
            dg = mg.create_group(dep)
            fe = np.full((len(rows), 6), np.nan)
            for i, r in enumerate(rows):
                m = r.metrics.get(dep)
                if m:
                    fe[i] = np.asarray(m["final_error_m"], float)
            ds = dg.create_dataset("final_error_m", data=fe)
            ds.attrs["units"] = "m"
            ds.attrs["columns"] = ["a_da_m", "a_dlambda_m", "a_dex_m", "a_dey_m", "a_dix_m", "a_diy_m"]
            for mn in metric_names:
                vals = np.array([float(r.metrics[dep][mn]) if r.metrics.get(dep) else np.nan
                                 for r in rows], float)
                ds = dg.create_dataset(mn, data=vals)
                ds.attrs["units"] = units_for(mn) or "1"
    os.replace(tmp, path)
    return path


def _dec(v):
    if isinstance(v, bytes):
        return v.decode("utf-8", "replace")
    if isinstance(v, np.generic):
        return v.item()
    return v


def read_summary(path: str | os.PathLike) -> CampaignSummary:
    """Read a campaign summary (a ``summary.h5`` file or the campaign folder holding it).

    Raises
    ------
    LogFormatError
        Not a covey campaign summary, a newer major schema, or damaged.
    """
    p = Path(path)
    if p.is_dir():
        p = p / SUMMARY_NAME
    try:
        with h5py.File(p, "r") as f:
            if _dec(f.attrs.get("schema")) != SCHEMA_NAME:
                raise LogFormatError(str(p), "/", f"not a covey campaign summary (schema "
                                                  f"{_dec(f.attrs.get('schema'))!r})")
            ver = str(_dec(f.attrs.get("schema_version")))
            if ver.split(".")[0] != SCHEMA_VERSION.split(".")[0]:
                raise LogFormatError(str(p), "/@schema_version", f"campaign summary schema {ver} is not readable by this "
                                             f"covey (reads {SCHEMA_VERSION.split('.')[0]}.x)")
            attrs = {k: _dec(v) for k, v in f.attrs.items()}
            toml = _dec(f["meta/campaign_toml"][()]) if "meta/campaign_toml" in f else ""
            runs = {}
            for k, ds in f["runs"].items():
                a = ds[()]
                runs[k] = [_dec(x) for x in a] if a.dtype.kind in "OS" else np.asarray(a)
            params = {_dec(ds.attrs.get("key", k)): np.asarray(ds[()], float)
                      for k, ds in f["params"].items()} if "params" in f else {}
            metrics = {}
            for dep, g in (f["metrics"].items() if "metrics" in f else ()):
                metrics[dep] = {k: np.asarray(ds[()]) for k, ds in g.items()}
    except LogFormatError:
        raise
    except (OSError, KeyError, ValueError, RuntimeError) as exc:
        raise LogFormatError(str(p), "/", f"cannot read the campaign summary: {exc}") from None
    return CampaignSummary(p, attrs, toml, runs, params, metrics)

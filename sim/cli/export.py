"""``covey export RUN -o DIR``: each spacecraft's truth ephemeris as a CCSDS OEM (Orekit's own
writer), the impulses and the attitude-mode timeline as CSV."""

from __future__ import annotations

import argparse

from sim.cli.common import UsageError

HELP = "export a run's truth ephemerides as CCSDS OEM, its impulses and attitude modes as CSV"


def add_parser(sub) -> argparse.ArgumentParser:
    e = sub.add_parser(
        "export", help=HELP,
        description="Write each spacecraft's truth ephemeris of a run log as a CCSDS Orbit "
                    "Ephemeris Message (CCSDS 502.0-B, KVN; XML with --xml) with Orekit's own "
                    "writer, one segment per coast arc between executed impulses; the impulses "
                    "(epoch UTC, RTN delta-v commanded and executed, mass before and after) and "
                    "the attitude-mode timeline as CSV. Needs Java (Orekit).")
    e.add_argument("run_log", metavar="RUN", help="a run log (.h5)")
    e.add_argument("-o", "--output", metavar="DIR", required=True, help="folder to write (created)")
    e.add_argument("--frame", choices=("TOD", "GCRF", "EME2000"), default="TOD",
                   help="OEM reference frame: TOD (default: covey's ECI, true of date IERS 2010, "
                        "the logged numbers), or GCRF / EME2000 (transformed by Orekit's frames)")
    e.add_argument("--xml", action="store_true", help="also write each OEM as XML")
    e.add_argument("--spacecraft", action="append", metavar="NAME",
                   help="only this spacecraft's OEM (repeatable; default all)")
    e.add_argument("--orekit-data", metavar="PATH",
                   help="Orekit data folder or zip (default COVEY_OREKIT_DATA, then the bundled data)")
    return e


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from sim.errors import LogFormatError
    from sim.report.export import export_run

    if not Path(args.run_log).is_file():
        raise UsageError(f"RUN {args.run_log!r}: no such run log (a covey .h5 file)")
    try:
        res = export_run(args.run_log, args.output, frame=args.frame, xml=args.xml,
                         spacecraft=args.spacecraft, data_path=args.orekit_data)
    except LogFormatError as exc:
        raise UsageError(str(exc)) from None
    for n, p in res.oem.items():
        extra = f" and {res.oem_xml[n].name}" if n in res.oem_xml else ""
        print(f"OEM {n}: {p}{extra} (REF_FRAME {res.frame}, TIME_SYSTEM UTC)")
    print(f"impulses: {res.impulses_csv}")
    print(f"attitude modes: {res.modes_csv}")
    return 0

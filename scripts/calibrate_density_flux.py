"""Print the F10.7 exponent table p(h) of guidance/density.py (FLUX_EXPONENT), from NRLMSISE-00.

    /work/venv/bin/python scripts/calibrate_density_flux.py

NRLMSISE-00 (Picone et al., JGR 107(A12):1468, 2002) through pymsis (``version=0``, the official
Fortran), averaged over the globe (latitude weighted by cos, 12 longitudes, 8 times of day) at the
March equinox 2020, Ap = 4, F10.7 = F10.7A. The exponent is p = ln(rho_250 / rho_70) / ln(250/70).
Also prints the F10.7 = 150 global average beside the exponential table guidance uses.
"""

from __future__ import annotations

import numpy as np
import pymsis

ALT_KM = np.array([150, 200, 250, 300, 350, 400, 450, 500, 550, 600, 700, 800, 900, 1000.0])


def global_mean_density(alt_km, f107):
    dates = np.datetime64("2020-03-20T00:00") + np.arange(0, 24, 3).astype("timedelta64[h]")
    lons = np.arange(0, 360, 30.0)
    lats = np.arange(-80, 81, 20.0)
    out = pymsis.calculate(dates, lons, lats, alt_km, f107s=np.full(dates.size, f107),
                           f107as=np.full(dates.size, f107), aps=np.full((dates.size, 7), 4.0),
                           version=0)
    rho = out[..., pymsis.Variable.MASS_DENSITY]  # (dates, lons, lats, alts)
    w = np.cos(np.radians(lats))[None, None, :, None]
    return (rho * w).sum(axis=(0, 1, 2)) / (w.sum() * dates.size * lons.size)


def main():
    from guidance.density import DensityModel

    lo, mid, hi = (global_mean_density(ALT_KM, f) for f in (70.0, 150.0, 250.0))
    p = np.log(hi / lo) / np.log(250.0 / 70.0)
    table = DensityModel().density_kgpm3(ALT_KM * 1e3)
    print("alt_km  rho70       rho150      rho250      p     exp-table(150)/msis150")
    for h, a, b, c, pp, t in zip(ALT_KM, lo, mid, hi, p, table):
        print(f"{h:6.0f}  {a:.3e}  {b:.3e}  {c:.3e}  {pp:.2f}  {t / b:.2f}")


if __name__ == "__main__":
    main()

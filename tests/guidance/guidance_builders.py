"""Shared builders of the guidance tests: a mission and a navigation solution made in the law's
own model (no sim, no Java). Invented spacecraft and numbers."""

from __future__ import annotations

import numpy as np

from guidance.constants import R_EARTH_M
from guidance.interface import (AbsoluteEstimate, DeputyTarget, Mission, NavSolution, RelativeEstimate,
                                SpacecraftCaps, ThrusterCaps)
from guidance.meanosc import mean_oe_to_rv
from guidance.planning import propagate_chief
from guidance.roe import roe_to_oe, rtn_basis

__all__ = ["CHIEF", "AREAS", "caps", "mission", "nav"]

CHIEF = np.array([R_EARTH_M + 500e3, 0.0, 0.0, np.radians(97.4), 0.3, 0.1])
AREAS = {"max_drag": 0.034, "min_drag": 0.01, "nominal": 0.02}  # m^2, a 3U bus (invented)


def caps(name, thruster=True, areas=AREAS):
    thr = ThrusterCaps(0.05, 1e-4, 60.0, 0.2) if thruster else None
    return SpacecraftCaps(name, 4.0, 2.2, dict(areas), 120.0, thr, "nominal")


def mission(settings=None, target=(0.0, -4000.0, 0.0, 0.0, 20.0, 0.0), deadline=3 * 86400.0,
            thruster=True, areas=AREAS):
    return Mission("2025-03-01T00:00:00Z", caps("chief", False), (caps("d1", thruster, areas),),
                   (DeputyTarget("d1", np.array(target, float), deadline),), 5400.0, settings or {})


def nav(t, roe_m, chief=CHIEF, valid=True):
    chief_t = propagate_chief(chief, t)
    rc, vc = mean_oe_to_rv(chief_t)
    C = rtn_basis(rc, vc)
    rd, vd = mean_oe_to_rv(roe_to_oe(chief_t, np.asarray(roe_m, float) / chief[0]))
    return NavSolution(t, AbsoluteEstimate("chief", t, rc, vc, np.ones(3), np.full(3, 1e-3), 4.0),
                       {"d1": RelativeEstimate("d1", t, C @ (rd - rc), C @ (vd - vc),
                                               np.full(3, 0.02), np.full(3, 5e-4), 4.0)}, valid)

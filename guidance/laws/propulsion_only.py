"""Propulsion-only law: one min-fuel impulsive plan at the first call, flown open loop.

The deputies hold ``hold_mode`` (default: the chief's mode); their differential drag in that mode,
from guidance's density estimate, enters the plan as a known disturbance. The program is that of
:mod:`guidance.planning` without drag variables: minimise the sum of the impulse norms over a grid
of ``burns_per_orbit`` candidate times per orbit so that the predicted mean ROE equal the target at
the deadline under the J2 STM, each impulse at most the per-burn maximum and none below the minimum
impulse bit. Later calls return the stored plan from the call time on (status ``"hold"``).
"""

from __future__ import annotations

from .base import PlannerLaw


class PropulsionOnly(PlannerLaw):
    """Single-solve impulsive reconfiguration (registry name ``"propulsion_only"``)."""

    NAME = "propulsion_only"
    PLAN_DRAG = False
    EXTRA_SETTINGS = {}

"""Single-solve hybrid law: impulses and differential-drag duty cycles planned together, once.

At the first call the program of :mod:`guidance.planning` is solved with a drag variable per
segment (``segments_per_orbit`` per orbit): the fraction of the segment the deputy spends in
``max_drag`` (the rest in ``min_drag``) while the chief holds ``chief_mode``, bounded by the two
modes' ballistic coefficients and guidance's density estimate at the chief's altitude. Propulsive
delta-v is the only cost. The duty cycles become time-tagged mode switches (high-drag spell centred
in each segment, spells shorter than ``max(min_dwell_s, slew)`` removed, switches commanded half a
slew early); when that realisation changes the drag, the impulses are re-planned with the realised
drag fixed, so the plan still hits the target in the planner's model. Flown open loop.
"""

from __future__ import annotations

from .base import PlannerLaw


class HybridSingle(PlannerLaw):
    """Single-solve hybrid drag + impulse reconfiguration (registry name ``"hybrid_single"``)."""

    NAME = "hybrid_single"
    PLAN_DRAG = True
    EXTRA_SETTINGS = {}

"""Minimum-fuel reconfiguration planning in mean ROE: the convex program behind covey's laws.

``grids`` (candidate burn times, drag segments, the chief's J2 motion), ``matrices`` (impulse and
drag control-effect matrices), ``minfuel`` (the generic min-fuel program on scaled arrays, solved
with HiGHS), ``types`` (:class:`PlanRequest`, :class:`Plan`), ``deputy`` (:func:`plan_deputy`,
:func:`predict_plan`) and ``duty`` (duty cycles -> mode switches). It imports only numpy, highspy
(HiGHS) and guidance's own modules; the names re-exported here are its public interface.
"""

from .deputy import plan_deputy, predict_plan
from .duty import realise_duty_schedule
from .grids import burn_grid, chief_period_s, propagate_chief, segment_grid
from .matrices import STM_MODELS, drag_matrices, impulse_matrices
from .minfuel import MinFuelProgram, MinFuelSolution
from .types import TINY_DV_MPS, Plan, PlanRequest, sub_bit

__all__ = [
    "STM_MODELS", "TINY_DV_MPS", "MinFuelProgram", "MinFuelSolution", "Plan", "PlanRequest",
    "burn_grid", "chief_period_s", "drag_matrices", "impulse_matrices", "plan_deputy",
    "predict_plan", "propagate_chief", "realise_duty_schedule", "segment_grid", "sub_bit",
]

"""Cadenced re-solve hybrid law: the hybrid plan, re-planned from fresh navigation every
``resolve_s``.

At each re-solve the latest navigation estimate is converted to mean ROE
(:func:`guidance.estimation.nav_to_mean`) and the remainder is planned again on the same anchored
grids (so the rest of the previous plan is always a feasible candidate):

- ``resolve_mode = "drag_and_impulses"`` (default): drag duty cycles and impulses are re-planned;
  impulses of the previous plan less than ``burn_margin_s`` ahead are kept as they are (committed).
- ``resolve_mode = "drag_only"``: every remaining impulse of the previous plan is kept and only the
  drag is re-planned; the target rows become soft (their miss is minimised), because drag alone
  cannot move every ROE component.

``density_coefficient`` is the tuning knob of guidance's density estimate. Within ``freeze_s`` of a
deputy's deadline, or while the navigation is flagged invalid, no re-plan is made (status
``"hold"``) and the current plan is flown. A re-plan that finds no feasible plan keeps the
previous one (status ``"degraded"``).
"""

from __future__ import annotations

import numpy as np

from .base import PlannerLaw, setting_choice, setting_number, setting_optional, warm_directions
from ..planning import PlanRequest


class HybridResolve(PlannerLaw):
    """Hybrid reconfiguration re-solved at a cadence (registry name ``"hybrid_resolve"``)."""

    NAME = "hybrid_resolve"
    PLAN_DRAG = True
    REPLANS = True
    EXTRA_SETTINGS = {
        "resolve_s": (None, setting_optional(setting_number(1.0, unit="s")),
                      "re-solve cadence (default: the guidance cycle), s"),
        "resolve_mode": ("drag_and_impulses", setting_choice("drag_and_impulses", "drag_only"),
                         "what a re-solve may change"),
        "freeze_s": (None, setting_optional(setting_number(0.0, unit="s")),
                     "no re-solve closer than this to the deadline (default: one chief orbit), s"),
        "miss_weight_mps_per_m": (1.0, setting_number(1e-9, unit="m/s per m"),
                                  "drag_only: price of a target miss per a-scaled metre"),
    }

    def extra_setup(self):
        if self.settings["resolve_s"] is None:
            self.settings["resolve_s"] = float(self.mission.cycle_s)

    def _freeze_s(self):
        f = self.settings["freeze_s"]
        return float(self.period_s) if f is None else float(f)

    def wants_plan(self, name, st, t_s, nav):
        if st.plan is None:
            return True
        if not nav.valid:
            return False
        if t_s >= st.deadline_s - self._freeze_s():
            return False
        return t_s - st.plan_t_s >= self.settings["resolve_s"] - 1e-6

    def request_hook(self, name, st, req: PlanRequest, t_s) -> PlanRequest:
        if st.plan is None:
            return req
        s = self.settings
        ahead = [(t, d) for t, d in st.impulses if t >= t_s - 1e-9]
        if s["resolve_mode"] == "drag_only":
            fixed = ahead
            tb = np.zeros(0)
            soft = np.full(6, float(s["miss_weight_mps_per_m"]))
        else:
            fixed = [(t, d) for t, d in ahead if t < t_s + s["burn_margin_s"] - 1e-9]
            tb = req.burn_t_s
            soft = None
        warm = warm_directions(ahead)
        return PlanRequest(**{
            **req.__dict__,
            "burn_t_s": tb,
            "fixed_burns_t_s": np.array([t for t, _ in fixed], dtype=float),
            "fixed_burns_dv_rtn_mps": np.array([d for _, d in fixed], dtype=float).reshape(-1, 3),
            "soft_weight_mps_per_m": soft,
            "warm_columns": warm,
        })

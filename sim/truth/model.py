"""The contract between the loop and a truth world (no Java here).

:class:`sim.truth.world.TruthWorld` implements it with Orekit; the tests' Keplerian stand-in
(``tests/conftest.py``) implements it too, and ``tests/sim/test_truth_model.py`` checks both
against this Protocol (every method present, with a compatible signature), so the stand-in cannot
drift from the real world.
"""

from __future__ import annotations

from typing import Any, Mapping, Protocol, Sequence, runtime_checkable

import numpy as np

__all__ = ["TruthModel", "TRUTH_METHODS"]


@runtime_checkable
class TruthModel(Protocol):
    """What :mod:`sim.loop.engine` needs of the truth.

    Attributes
    ----------
    names : tuple of str
        Spacecraft names, chief first.
    t_s : float
        Current time, s since the epoch.
    density_method : str
        How the logged density is computed (``"pymsis"``, ``"orekit"``, ``"none"``).
    java_sampler : bool
        Whether samples come from Orekit's OEM writer (else a Python step handler).
    threads : int
        Spacecraft propagated at the same time.
    """

    names: tuple[str, ...]
    t_s: float
    density_method: str
    java_sampler: bool
    threads: int

    def mode_names(self, name: str) -> tuple[str, ...]:
        """The attitude modes of spacecraft ``name``, in the bus's order."""

    def mode_area_m2(self, name: str) -> dict[str, float]:
        """Nominal ram-facing drag area per mode, m^2."""

    def states(self) -> Mapping[str, Any]:
        """Current truth state per spacecraft: objects with ``r_eci_m`` (3,), ``v_eci_mps`` (3,)
        (ECI = TOD) and ``mass_kg``."""

    def set_mode_schedule(self, name: str, switches: Sequence[tuple[float, str]],
                          area_factor_by_mode: Mapping[str, float] | None = None,
                          area_factor_fn: Any = None) -> None:
        """Attitude-mode switches ``(t_s, mode)`` for the next :meth:`advance_to`."""

    def set_impulses(self, name: str, impulses: Sequence[tuple[float, np.ndarray]]) -> None:
        """Impulses ``(t_s, dv_rtn_mps (3,))`` for the next :meth:`advance_to`."""

    def advance_to(self, t_s: float) -> Any:
        """Propagate every spacecraft to ``t_s`` (one continuous propagation each); returns an
        object with ``t_s``, ``stopped`` and ``reason``."""

    def start_early(self, t_s: float, names: Sequence[str]) -> list[str]:
        """Begin the segments of ``names`` to ``t_s`` before :meth:`advance_to` (may do nothing);
        returns the names begun."""

    def cancel_early(self) -> None:
        """Wait for and discard segments begun by :meth:`start_early`."""

    def drain_samples(self) -> dict[str, dict[str, np.ndarray]]:
        """Samples since the last drain per spacecraft: ``t_s`` (K,), ``r_eci_m`` (K, 3),
        ``v_eci_mps`` (K, 3), ``mass_kg``, ``mode_index``, ``density_kgpm3``, ``drag_area_m2`` (K,)."""

    def drain_executed_impulses(self) -> list[dict]:
        """Impulses executed since the last drain (``name``, ``t_s``, ``dv_rtn_mps``, ...)."""

    def drain_events(self) -> list[dict]:
        """Events since the last drain (``t_s``, ``name``, ``kind``, ``detail``)."""

    def close(self) -> None:
        """Release what the world holds (called once when the run ends; idempotent)."""


TRUTH_METHODS = ("mode_names", "mode_area_m2", "states", "set_mode_schedule", "set_impulses",
                 "advance_to", "start_early", "cancel_early", "drain_samples",
                 "drain_executed_impulses", "drain_events", "close")
"""The methods of :class:`TruthModel` (checked by name and signature in the tests)."""

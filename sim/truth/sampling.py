"""How the truth is sampled and how impulses fire inside a propagation: the Python step handler
that samples the grid ``k * log_step_s`` (used where Orekit's OEM streaming writer cannot be,
see :meth:`sim.truth.world.TruthWorld._oem_segment`), and the impulse trigger handler. Both are
Java interface proxies created once per process; they run once per integrator step or event,
never inside a force evaluation."""

from __future__ import annotations

import numpy as np

__all__ = ["make_sampler", "make_trigger_handler", "sampler_class"]

_EPS_T = 1e-6  # s: times closer than this are the same instant


_SAMPLER_CLASS = None


def make_sampler(world, craft):
    """Python step handler sampling the grid ``k * log_step_s``. Per sample: interpolated state,
    Cartesian GCRF state copied into a Java array (one call each), mass, and (only when the world's
    ``density_method`` is ``"orekit"``) the model density. The GCRF to TOD rotation is applied
    afterwards in numpy (:meth:`TruthWorld._gcrf_to_tod`); a batched density is computed at
    :meth:`TruthWorld.drain_samples`. Called once per integrator step, never inside a force
    evaluation. The proxy class is created once."""
    global _SAMPLER_CLASS
    if _SAMPLER_CLASS is None:
        from java.lang import System
        from jpype import JImplements, JOverride
        from org.orekit.orbits import OrbitType, PositionAngleType
        from org.orekit.propagation.sampling import OrekitStepHandler

        to_array = OrbitType.CARTESIAN.mapOrbitToArray
        mean_pa = PositionAngleType.MEAN
        arraycopy = System.arraycopy

        @JImplements(OrekitStepHandler)
        class _Sampler:
            def __init__(self, world, craft):
                self.craft = craft
                self.epoch = world.forces.epoch
                self.gcrf = world.forces.gcrf
                self.h = float(world.run.log_step_s)
                self.atm = world.forces.atmosphere if world.density_method == "orekit" else None

            @JOverride
            def init(self, s0, t):
                pass

            @JOverride
            def handleStep(self, interpolator):
                craft, epoch, h, atm, gcrf = self.craft, self.epoch, self.h, self.atm, self.gcrf
                t1 = interpolator.getCurrentState().getDate().durationFrom(epoch)
                k = craft.next_k
                seg = craft.seg
                tt, mm, rho = seg["t"], seg["m"], seg["rho"]
                tmp, buf = craft.tmp6, craft.buf
                n = len(tt)
                while k * h <= t1 + _EPS_T:
                    date = epoch.shiftedBy(k * h)
                    s = interpolator.getInterpolatedState(date)
                    to_array(s.getOrbit(), mean_pa, tmp, None)
                    arraycopy(tmp, 0, buf, 6 * n, 6)
                    tt.append(k * h)
                    mm.append(s.getMass())
                    if atm is not None:
                        rho.append(atm.getDensity(date, s.getPosition(), gcrf))
                    k += 1
                    n += 1
                craft.next_k = k

            @JOverride
            def finish(self, s):
                pass

        _SAMPLER_CLASS = _Sampler
    return _SAMPLER_CLASS(world, craft)


_TRIGGER_CLASS = None


def make_trigger_handler(world, craft, dv_rtn: np.ndarray, isp_s: float):
    """EventHandler of an impulse's DateDetector: records the pre-impulse state and returns STOP,
    which makes the wrapping ImpulseManeuver apply the impulse (Orekit's contract). Called once
    per impulse, never inside a force evaluation. The proxy class is created once per process."""
    global _TRIGGER_CLASS
    if _TRIGGER_CLASS is None:
        from jpype import JImplements, JOverride
        from org.hipparchus.ode.events import Action
        from org.orekit.propagation.events.handlers import EventHandler

        @JImplements(EventHandler)
        class _Trigger:
            def __init__(self, world, craft, dv_rtn, isp_s):
                self.world, self.craft, self.dv_rtn, self.isp_s = world, craft, dv_rtn, isp_s

            @JOverride
            def init(self, s0, t, detector):
                pass

            @JOverride
            def eventOccurred(self, s, detector, increasing):
                self.craft.seg_executed.append(self.world._impulse_record(self.craft, s, self.dv_rtn, self.isp_s))
                return Action.STOP

            @JOverride
            def resetState(self, detector, s):
                return s

            @JOverride
            def finish(self, s, detector):
                pass

        _TRIGGER_CLASS = _Trigger
    return _TRIGGER_CLASS(world, craft, dv_rtn, isp_s)


def sampler_class():
    """The Python step handler's proxy class, or None before the first truth world made it (a
    benchmark wraps its ``handleStep`` with a timer)."""
    return _SAMPLER_CLASS

"""Shared fixtures: repository paths, scenario files, and a fake (two-body, no JVM) truth world
for testing the harness loop, the run log and the CLI without Orekit."""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

REPO = Path(__file__).resolve().parent.parent


@pytest.fixture
def repo_root() -> Path:
    return REPO


@pytest.fixture
def scenario_paths() -> list[Path]:
    """The scenario files of scenarios/ (requirements files, ``*_requirements.toml``, left out)."""
    return sorted(p for p in (REPO / "scenarios").glob("*.toml")
                  if not p.name.endswith("_requirements.toml"))


class FakeTruthWorld:
    """Keplerian stand-in implementing sim.truth.model.TruthModel (mean elements taken as
    osculating). ``fail_at_s`` raises inside advance_to, ``stop_at_s`` reports a stop event."""

    fail_at_s: float | None = None
    stop_at_s: float | None = None
    density_method = "none"
    java_sampler = False

    def __init__(self, run, boot_info=None, batched_density=True, java_sampler=False, threads=None):
        self.threads = 1
        from guidance.roe import roe_to_oe

        self.run = run
        self.names = tuple(sc.name for sc in run.spacecraft)
        o = run.chief.orbit
        c = np.array([o.a_m, o.e * np.cos(np.radians(o.argp_deg)), o.e * np.sin(np.radians(o.argp_deg)),
                      np.radians(o.i_deg), np.radians(o.raan_deg), np.radians(o.u_deg)])
        self.oe0 = {run.chief.name: c}
        for d in run.deputies:
            self.oe0[d.name] = roe_to_oe(c, np.asarray(d.roe_m) / o.a_m)
        self.t_s, self._last_sample = 0.0, -1.0
        self._samples = {n: [] for n in self.names}
        self._events = []
        self.schedules, self.impulses = {}, {}

    def mode_names(self, name):
        return tuple(self.run.chief.bus.modes)

    def mode_area_m2(self, name):
        return {m: 0.01 * (k + 1) for k, m in enumerate(self.mode_names(name))}

    def set_mode_schedule(self, name, switches, area_factor_by_mode=None, area_factor_fn=None):
        self.schedules.setdefault(name, []).append(list(switches))

    def set_impulses(self, name, impulses):
        self.impulses.setdefault(name, []).append(list(impulses))

    def states(self):
        from guidance.roe import oe_to_rv

        out = {}
        for n, oe in self.oe0.items():
            oe_t = oe.copy()
            oe_t[5] += np.sqrt(3.986004415e14 / oe[0] ** 3) * self.t_s
            r, v = oe_to_rv(oe_t)
            out[n] = SimpleNamespace(name=n, t_s=self.t_s, r_eci_m=r, v_eci_mps=v, mass_kg=10.0,
                                     mode="nominal")
        return out

    def _sample(self, t):
        from guidance.roe import oe_to_rv

        for n, oe in self.oe0.items():
            oe_t = oe.copy()
            oe_t[5] += np.sqrt(3.986004415e14 / oe[0] ** 3) * t
            r, v = oe_to_rv(oe_t)
            self._samples[n].append((t, r, v))

    def advance_to(self, t_s):
        step = self.run.log_step_s
        stop = self.stop_at_s is not None and self.stop_at_s <= t_s
        t_end = self.stop_at_s if stop else t_s
        k = 0 if self._last_sample < 0 else int(np.floor(self._last_sample / step + 1e-9)) + 1
        while k * step <= t_end + 1e-9:
            if self.fail_at_s is not None and k * step >= self.fail_at_s:
                from sim.errors import PropagationError

                raise PropagationError(k * step, self.names[0], "fake failure")
            self._sample(k * step)
            self._last_sample = k * step
            k += 1
        self.t_s = t_end
        if stop:
            self._events.append(dict(t_s=t_end, name=self.names[-1], kind="min_altitude",
                                     detail="fake altitude floor"))
        return SimpleNamespace(t_s=t_end, stopped=stop, reason="fake stop" if stop else None)

    def drain_samples(self):
        out = {}
        for n, rows in self._samples.items():
            k = len(rows)
            out[n] = dict(t_s=np.array([r[0] for r in rows]),
                          r_eci_m=np.array([r[1] for r in rows]).reshape(k, 3),
                          v_eci_mps=np.array([r[2] for r in rows]).reshape(k, 3),
                          mass_kg=np.full(k, 10.0), mode_index=np.zeros(k, dtype=np.int16),
                          density_kgpm3=np.full(k, 1e-12), drag_area_m2=np.full(k, 0.03))
            rows.clear()
        return out

    def drain_executed_impulses(self):
        return []

    def drain_events(self):
        ev, self._events = self._events, []
        return ev

    def start_early(self, t_s, names):
        return []

    def cancel_early(self):
        pass

    def close(self):
        pass


def fake_truth_api(World):
    """The truth backend namespace of sim.loop.run (``truth_backend()``) with ``World`` (a
    FakeTruthWorld class) as the truth; for a module-scoped stand-in, see :func:`fake_truth`."""
    from guidance.roe import oe_to_roe, rv_to_oe

    boot_info = SimpleNamespace(data_path="/fake", data_source="fake", orekit_version="fake",
                                java_version="fake", jpype_version="fake",
                                data_files=(("a.txt", 3, "2025-01-01T00:00:00Z"),))
    api = SimpleNamespace(
        boot=lambda data_path=None, jvm_options=None: boot_info, TruthWorld=World,
        mean_elements=lambda t, r, v, epoch: rv_to_oe(r, v),
        mean_roe_m=lambda c, d: oe_to_roe(c, d) * np.asarray(c)[..., :1])
    return api


@pytest.fixture
def fake_truth(monkeypatch):
    """Replace the Orekit side of sim.loop.run with FakeTruthWorld; yields the class (set
    ``fail_at_s`` / ``stop_at_s`` on it)."""
    import sim.loop.run

    class World(FakeTruthWorld):
        pass

    api = fake_truth_api(World)
    monkeypatch.setattr(sim.loop.run, "truth_backend", lambda: api)
    return World

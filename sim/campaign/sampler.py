"""Seeds and dispersion draws of a campaign: a function of (master seed, draw index) only.

Draw ``d`` of a campaign (the run index of a Monte Carlo; the same draw at every grid point of a
sweep and in every case of an error budget) gets

- its run seed (the scenario's ``run.seed``, from which every error source of the run draws its own
  stream): the first 64-bit word of ``numpy.random.SeedSequence(master_seed, spawn_key=(d, 0))``,
  shifted right by one bit (so it fits the scenario's ``[0, 2**63 - 1]``);
- for dispersion ``j`` (file order), one uniform number ``u`` in (0, 1) from
  ``PCG64(SeedSequence(master_seed, spawn_key=(d, 1, j)))``, mapped through the distribution's
  inverse CDF (:meth:`sim.campaign.spec.Distribution.ppf`).

So run k is the same whatever the number of workers, the executor or the order of completion, and
adding a dispersion at the end of the file leaves the earlier ones' draws unchanged. Pure numpy.
"""

from __future__ import annotations

import numpy as np

from sim.campaign.spec import Dispersion

__all__ = ["run_seed", "uniform", "draw", "draws"]

_U53 = float(2**53)


def run_seed(master_seed: int, draw_index: int) -> int:
    """The scenario ``run.seed`` of draw ``draw_index`` (an integer in [0, 2**63 - 1])."""
    ss = np.random.SeedSequence(int(master_seed), spawn_key=(int(draw_index), 0))
    return int(ss.generate_state(1, np.uint64)[0] >> np.uint64(1))


def uniform(master_seed: int, draw_index: int, j: int) -> float:
    """The uniform number in (0, 1) behind dispersion ``j`` of draw ``draw_index``: an integer
    in [0, 2**53) plus one half, over 2**53 (never 0 or 1, so an inverse CDF stays finite)."""
    g = np.random.Generator(np.random.PCG64(
        np.random.SeedSequence(int(master_seed), spawn_key=(int(draw_index), 1, int(j)))))
    return (float(g.integers(0, 2**53)) + 0.5) / _U53


def _plain(v):
    if isinstance(v, np.generic):
        return v.item()
    return v


def draw(d: Dispersion, master_seed: int, draw_index: int):
    """The value of dispersion ``d`` in draw ``draw_index`` (float; a choice returns the listed
    value itself, so integers stay integers)."""
    v = d.dist.ppf(uniform(master_seed, draw_index, d.index))
    v = _plain(np.asarray(v, dtype=object).item() if np.ndim(v) == 0 else v)
    return float(v) if d.dist.kind != "choice" else _plain(v)


def draws(d: Dispersion, master_seed: int, n: int, start: int = 0) -> np.ndarray:
    """Dispersion ``d`` over draws ``start .. start + n - 1`` (float array), as the runs get them."""
    return np.array([float(draw(d, master_seed, k)) for k in range(start, start + n)])

"""Frequency specs tried alone over the searched family: reachable at all, and the best value.

For :mod:`gainloom.design.diagnose` (the pole-region objectives).  A spec on
the gain crossover (``min_crossover``, ``max_crossover``) or the closed-loop
bandwidth (``min_bandwidth``) is, for one controller shape, a set of loop
gains read off the frequency response (:mod:`gainloom.lti.gain_sets`); with
the exact stable gain intervals it says whether *any* positive gain of *any*
searched shape meets the spec, with nothing sampled in the gain.  Where none
does, the best value is the limit bisected between the spec's value and its
loosest end (``BISECTIONS`` steps in log frequency): the largest crossover or
bandwidth (the smallest highest crossover) any stable gain of the family
reaches, to about 1 %.
"""

from __future__ import annotations

import math
from typing import cast

import numpy as np

from ..lti import gain_sets as gs
from ..lti.intervals import GainInterval, stable_gain_intervals
from ..lti.loop import Loop
from .search import Shapes, shape_loops

__all__ = ["FREQUENCY_SPECS", "frequency_reach"]

#: Frequency specs this module judges, in report order.
FREQUENCY_SPECS = ("min_crossover", "max_crossover", "min_bandwidth")
#: Bisection steps on the best value (log frequency; ~1 % over ten decades).
BISECTIONS = 12


def _spec_sets(loops: Loop, grid: gs.ResponseGrid, name: str, value: float) -> list:
    """Gains of every shape meeting spec ``name`` at ``value`` rad/s."""
    v = np.full(loops.points, value)
    unbounded = np.full(loops.points, np.nan)
    if name == "min_crossover":
        return gs.crossover_band_gains(grid, v, unbounded)
    if name == "max_crossover":
        return gs.crossover_band_gains(grid, unbounded, v)
    return gs.bandwidth_gains(loops, v, grid)


def frequency_reach(plant: Loop, shapes: Shapes, p: int, name: str, value: float) -> tuple[bool, float]:
    """Whether spec ``name`` at ``value`` (rad/s) alone is met by a stable gain of a searched shape at ``p``.

    Returns
    -------
    (bool, float)
        Reachable; and where it is not, the best value of the quantity over
        the family (NaN when no stable gain exists at all), rad/s.
    """
    valid = np.flatnonzero(shapes.valid[p])
    if valid.size == 0:
        return False, math.nan
    loops = shape_loops(plant, shapes.zeros[p, valid], shapes.poles[p, valid], np.full(valid.size, p))
    delta = None if loops.delta_den is None else (loops.delta_num, loops.delta_den)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        found = stable_gain_intervals(loops.num, loops.den, ts=loops.ts, delta=delta)
    rows = cast(list[list[GainInterval]], found)  # batched loops: one list per shape
    stable = [[(iv.low, iv.high) for iv in row] for row in rows]
    nyquist = math.pi / float(np.min(np.asarray(loops.ts, float)))
    grid = gs.response_grid(loops, np.full(loops.points, nyquist * 1e-6))

    def met(limit: float) -> bool:
        return any(gs.intersect_all(stable, _spec_sets(loops, grid, name, limit)))

    if met(value):
        return True, math.nan
    # "at least" specs: the largest limit still met; max_crossover: the smallest
    loose = nyquist * 1e-6 if name != "max_crossover" else nyquist
    if not met(loose):
        return False, math.nan
    good, bad = math.log(loose), math.log(value)
    for _ in range(BISECTIONS):
        mid = 0.5 * (good + bad)
        good, bad = (mid, bad) if met(math.exp(mid)) else (good, mid)
    return False, math.exp(good)

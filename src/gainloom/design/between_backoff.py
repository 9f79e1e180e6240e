"""Between-point back-off: a little less loop gain where interpolation alone breaks a spec.

The firmware interpolates the table linearly (bilinearly in 2-D).  Where the
breakpoints sit on a spec bound, as the crossover objectives put them by
design, the interpolated controller between two breakpoints usually misses
that bound by a little: the best gain is a curved function of the operating
point and the firmware follows its chord (the benchmark boost converter,
designed at phase margin 45.1 deg at every load, reaches 43.8 deg between its
loads of 4 and 6 ohm).

Where a grid cell (1-D: an interval) fails the between-points check, the loop
gain ``K`` of its corner breakpoints is lowered by the least common factor
that makes every checked point of the cell pass, its corners included: every
coefficient proportional to ``K`` is scaled and the shape
(:data:`gainloom.design.structures.SHAPE_COEFFICIENTS`) is kept, so the
interpolated controller inside the cell scales by the same factor.  A
breakpoint shared by several failing cells takes the lowest of their factors
(it was checked at each).  The factor is bounded by ``LOWEST_FACTOR``: a cell
that needs more is not an interpolation error but a grid too coarse for the
plant there, and stays failing for the user to refine (``table.refine``, which
runs before this).  Each moved breakpoint carries a warning with the factor,
the specs it restores and the crossover it costs.

Why a back-off rather than more breakpoints: the chord error shrinks with the
square of the interval, so densifying alone needs about three times the
breakpoints before the error falls inside the crossover objectives' 0.1 deg
back-off, while the back-off costs a per cent or two of crossover, and only
where the curvature is (our reasoning, measured on the benchmark loop).
"""

from __future__ import annotations

import numpy as np

from .analysis import analyse
from .lookup import interpolate_grids
from .structures import SHAPE_COEFFICIENTS
from .table_checks import between_points

__all__ = ["LOWEST_FACTOR", "back_off_between"]

#: Least factor on a breakpoint's loop gain (our choice, no source): 10 % of
#: gain (0.9 dB) covers the interpolation error between reasonably placed
#: breakpoints; a cell that needs more has too few of them.
LOWEST_FACTOR = 0.9
#: Trial factors per batched pass on each cell (two passes: resolution about
#: 0.3 % of K).
TRIALS = 6
#: Rounds of check and back-off (a corner lowered for one cell moves the next).
ROUNDS = 4


def _corners(cell: tuple[int, ...], shape: tuple[int, ...]) -> np.ndarray:
    """Flat grid indices of the breakpoints at the corners of ``cell``."""
    mesh = np.meshgrid(*[(i, i + 1) for i in cell], indexing="ij")
    return np.ravel_multi_index(tuple(m.ravel() for m in mesh), shape)


def _scaled(coefficients: dict[str, np.ndarray], factor: np.ndarray) -> dict[str, np.ndarray]:
    """Coefficients with every gain-proportional one multiplied by ``factor`` (per row)."""
    return {k: v if k in SHAPE_COEFFICIENTS else v * factor for k, v in coefficients.items()}


class _Cells:
    """The failing cells of one round: their between points and corner breakpoints, in one batch."""

    def __init__(self, sched, cells, shape, owner_rows, between_points, inter, point_design):
        from .engine import limits_at, sampled_plant

        self.count = len(cells)
        self.corners = [_corners(cell, shape) for cell in cells]
        rows_b = np.concatenate([owner_rows[cell] for cell in cells])
        rows_g = np.concatenate(self.corners)
        self.of = np.concatenate([np.full(owner_rows[cell].size, c) for c, cell in enumerate(cells)]
                                 + [np.full(idx.size, c) for c, idx in enumerate(self.corners)])
        points = np.concatenate([between_points[rows_b], point_design.points[rows_g]])
        self.plant, self.limits = sampled_plant(sched, points), limits_at(sched, points)
        self.coefficients = {k: np.concatenate([inter[k][rows_b], np.asarray(v, float)[rows_g]])
                             for k, v in point_design.coefficients.items()}
        # overshoot and settling need a step response; skip it where neither is asked
        self.step = bool(np.any(np.isfinite(self.limits.max_overshoot)) or np.any(np.isfinite(self.limits.max_settling_time)))

    def passes(self, structure: str, factors: np.ndarray) -> np.ndarray:
        """Per cell and trial factor ``(C, F)``: every between point and corner passes with the gain times it."""
        C, F = factors.shape
        R = self.of.size
        rows = np.tile(np.arange(R), F)
        trial = analyse(self.plant.select(rows), structure,
                        _scaled({k: v[rows] for k, v in self.coefficients.items()}, factors[self.of].T.ravel()),
                        self.limits.select(rows), step=self.step)
        ok = np.ones((C, F), dtype=bool)
        np.logical_and.at(ok, (np.tile(self.of, F), np.repeat(np.arange(F), R)), trial.passed)
        return ok


def _cell_factors(cells: _Cells, structure: str, lowest: np.ndarray) -> np.ndarray:
    """Largest factor in ``[lowest, 1)`` with which each cell passes (NaN where ``lowest`` does not).

    Two batched passes: ``TRIALS`` factors spread over ``[lowest, 1)``, then
    ``TRIALS`` more between the best passing one and the next above it.
    """
    top = np.ones(cells.count)
    low = np.minimum(lowest, 1.0)
    best = np.full(cells.count, np.nan)
    for _ in range(2):
        t = np.arange(1, TRIALS + 1) / TRIALS  # from just below ``top`` down to ``low``
        factors = np.exp(np.log(top)[:, None] + t[None, :] * np.log(low / top)[:, None])
        ok = cells.passes(structure, factors) & (lowest < 1.0)[:, None]
        first = np.argmax(ok, axis=1)  # the largest passing factor
        found = ok[np.arange(cells.count), first]
        rows = np.flatnonzero(found)
        best[rows] = factors[rows, first[rows]]
        top = np.where(found & (first > 0), factors[np.arange(cells.count), np.maximum(first - 1, 0)], top)
        low = np.where(found, best, low)
        if not np.any(found):
            break
    return best


def back_off_between(sched, point_design, axes_values: list[np.ndarray], structure: str, count: int):
    """Lower the loop gain of breakpoints around failing cells (module docstring).

    Parameters
    ----------
    sched : Schedule
    point_design : PointDesign
        The design at the grid points (grid order, first axis slowest).
    axes_values : list of ndarray
        Breakpoints per axis.
    structure : str
    count : int
        Between points per interval (``table.between_points``).

    Returns
    -------
    (PointDesign, dict)
        The design with the moved gains, and ``{point: warning}`` per moved point.
    """
    from .engine import limits_at, sampled_plant

    shape = tuple(v.size for v in axes_values)
    points, owner = between_points(axes_values, count)
    if points.shape[0] == 0:
        return point_design, {}
    between = (sampled_plant(sched, points), limits_at(sched, points))
    members: dict[tuple, list[int]] = {}
    for q, cell in enumerate(owner):
        members.setdefault(tuple(cell), []).append(q)
    owner_rows = {cell: np.asarray(rows) for cell, rows in members.items()}
    original = point_design
    factor = np.ones(point_design.points.shape[0])
    restored: dict[int, set[str]] = {}
    for _ in range(ROUNDS):
        grids = {k: np.asarray(v).reshape(shape) for k, v in point_design.coefficients.items()}
        inter = interpolate_grids(tuple(axes_values), grids, points)
        check = analyse(between[0], structure, inter, between[1])
        failing = np.flatnonzero(~check.passed)
        cells = sorted({tuple(owner[q]) for q in failing})
        if not cells:
            break
        stacked = _Cells(sched, cells, shape, owner_rows, points, inter, point_design)
        lowest = np.array([LOWEST_FACTOR / np.min(factor[idx]) for idx in stacked.corners])
        found = _cell_factors(stacked, structure, lowest)
        step = np.ones_like(factor)
        for c, idx in enumerate(stacked.corners):
            if np.isfinite(found[c]):
                step[idx] = np.minimum(step[idx], found[c])
                names = {n for q in failing if tuple(owner[q]) == cells[c] for n in check.failed_specs(int(q))}
                for p in idx:
                    restored.setdefault(int(p), set()).update(names)
        if np.all(step == 1.0):
            break
        factor *= step
        coefficients = _scaled({k: np.asarray(v, float) for k, v in point_design.coefficients.items()}, step)
        analysis = analyse(point_design.plant, structure, coefficients, point_design.limits)
        point_design = point_design.reanalysed(coefficients, analysis)
    return point_design, _warnings(original, point_design, factor, restored)


def _warnings(before, after, factor: np.ndarray, restored: dict[int, set[str]]) -> dict[int, str]:
    """The warning of every breakpoint whose gain the back-off lowered."""
    out = {}
    for p in np.flatnonzero(factor < 1.0):
        specs = ", ".join(sorted(restored.get(int(p), ())))
        out[int(p)] = (
            f"between-point back-off: K {before.analysis.gain[p]:.6g} -> {after.analysis.gain[p]:.6g} "
            f"({100 * (factor[p] - 1):.2f} %) so that the interpolated table meets {specs} between this "
            f"breakpoint and its neighbours; highest gain crossover "
            f"{before.analysis.last_crossover[p]:.6g} -> {after.analysis.last_crossover[p]:.6g} rad/s"
        )
    return out

"""Whole-table checks: smoothness, monotone coefficients, between points,
refinement and parameter tolerances.

* Smoothness: relative step ``|a - b| / max(|a|, |b|)`` of every coefficient
  between grid neighbours along every axis must stay within
  ``table.max_relative_step``.  Where it does not, the design may move the
  loop gain ``K`` of the later point (its shape kept) inside its exact
  feasible set until the step fits; each such move is reported with the
  objective it cost ("the limit forced a worse design").
* Monotone: a coefficient must not decrease (increase) along each axis; the
  same ``K`` move is tried (and reported) where it does.
* Between points: the coefficients are interpolated exactly as the firmware
  does (linear in 1-D, bilinear in 2-D, on the axis values) and applied to
  the plant evaluated at ``between_points`` intermediate points per interval
  (2-D: on every cell edge and the cell centre), then checked against the
  specs there.  With ``refine.max_inserted > 0`` a breakpoint is inserted in
  the middle of every failing interval (most failures first, within the
  budget), the new points are designed, and the check repeated until it
  passes or the budget is spent.  What still fails then is given the
  between-point back-off (:mod:`gainloom.design.between_backoff`): the loop
  gain of the failing cell's breakpoints lowered by at most 10 %.
* Tolerances: every corner of the declared parameter tolerances (or the
  seeded space-filling sample) at every grid point, with the table's
  coefficients; the worst corner per point is reported.
"""

from __future__ import annotations

import itertools
import math
from typing import Any

import numpy as np

from .analysis import analyse
from .lookup import interpolate_grids
from .structures import SHAPE_COEFFICIENTS
from .table_findings import BetweenFailure, CornerResult, InsertedBreakpoint, MonotoneFinding, StepFinding

__all__ = ["run_table_checks", "relative_steps", "between_points", "tolerance_scales"]

#: Most tolerance samples checked per point before switching to a seeded
#: space-filling sample of this size.
MAX_CORNERS = 64


def relative_steps(grid: np.ndarray, axis: int) -> np.ndarray:
    """``|a - b| / max(|a|, |b|)`` between neighbours along ``axis`` (0 where both are 0)."""
    a = np.take(grid, np.arange(grid.shape[axis] - 1), axis=axis)
    b = np.take(grid, np.arange(1, grid.shape[axis]), axis=axis)
    scale = np.maximum(np.abs(a), np.abs(b))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(scale > 0, np.abs(a - b) / np.where(scale > 0, scale, 1.0), 0.0)


def between_points(axes_values: list[np.ndarray], count: int) -> tuple[np.ndarray, list[tuple[int, ...]]]:
    """Intermediate operating points and the grid interval/cell each belongs to.

    1-D: ``count`` evenly spaced interior points per interval.  2-D: the same
    on every cell edge, plus the cell centre.
    """
    fractions = np.arange(1, count + 1) / (count + 1)
    points, owner = [], []
    if len(axes_values) == 1:
        x = axes_values[0]
        for i in range(x.size - 1):
            for t in fractions:
                points.append([x[i] + t * (x[i + 1] - x[i])])
                owner.append((i,))
        return np.asarray(points, float).reshape(-1, 1), owner
    x, y = axes_values
    for i in range(x.size - 1):
        for j in range(y.size - 1):
            x0, x1, y0, y1 = x[i], x[i + 1], y[j], y[j + 1]
            for t in fractions:
                xs = x0 + t * (x1 - x0)
                ys = y0 + t * (y1 - y0)
                points += [[xs, y0], [x0, ys]]
                owner += [(i, j), (i, j)]
                if j == y.size - 2:
                    points.append([xs, y1])
                    owner.append((i, j))
                if i == x.size - 2:
                    points.append([x1, ys])
                    owner.append((i, j))
            points.append([0.5 * (x0 + x1), 0.5 * (y0 + y1)])
            owner.append((i, j))
    return np.asarray(points, float), owner


def tolerance_scales(tolerances) -> list[dict[str, float]]:
    """Scale factors per tolerance sample: all corners, or a seeded space-filling sample.

    Corners are ``1 - minus`` and ``1 + plus`` of every parameter.  With
    ``samples: [count, seed]``, or more than ``MAX_CORNERS`` corners, a Latin
    hypercube over the box (``numpy.random.default_rng(seed)``) is used.
    """
    names = sorted(tolerances.parameters)
    if not names:
        return []
    bounds = [(1.0 - tolerances.parameters[n][0], 1.0 + tolerances.parameters[n][1]) for n in names]
    samples = tolerances.samples
    if samples == "corners" and 2 ** len(names) <= MAX_CORNERS:
        return [dict(zip(names, corner)) for corner in itertools.product(*bounds)]
    count, seed = (MAX_CORNERS, 0) if samples == "corners" else (int(samples[0]), int(samples[1]))
    rng = np.random.default_rng(seed)
    columns = []
    for low, high in bounds:
        strata = (rng.permutation(count) + rng.uniform(size=count)) / count
        columns.append(low + strata * (high - low))
    return [dict(zip(names, (float(c[k]) for c in columns))) for k in range(count)]


def _check_smoothness(sched, grids: dict[str, np.ndarray], names: tuple[str, ...]
                      ) -> tuple[list[StepFinding], list[MonotoneFinding]]:
    checks = sched.table_checks
    smooth: list[StepFinding] = []
    mono: list[MonotoneFinding] = []
    for name, grid in grids.items():
        for axis in range(grid.ndim):
            if checks.max_relative_step is not None:
                steps = relative_steps(grid, axis)
                for index in zip(*np.nonzero(steps > checks.max_relative_step * (1 + 1e-12))):
                    smooth.append(StepFinding(
                        coefficient=name, axis=names[axis], index=tuple(int(i) for i in index),
                        step=float(steps[index]), limit=float(checks.max_relative_step),
                    ))
        direction = checks.monotone.get(name)
        if direction:
            for axis in range(grid.ndim):
                diff = np.diff(grid, axis=axis)
                bad = diff < 0 if direction == "increasing" else diff > 0
                for index in zip(*np.nonzero(bad)):
                    mono.append(MonotoneFinding(
                        coefficient=name, axis=names[axis], index=tuple(int(i) for i in index),
                        direction=direction, change=float(diff[index]),
                    ))
    return smooth, mono


def _smooth_gains(sched, point_design, shape, structure) -> tuple[dict[str, np.ndarray], list[str], Any]:
    """Move K of later points along the first axis so every coefficient step fits the limit."""
    limit = sched.table_checks.max_relative_step
    monotone = sched.table_checks.monotone
    notes: list[str] = []
    coefficients = {k: v.copy() for k, v in point_design.coefficients.items()}
    if limit is None and not monotone:
        return coefficients, notes, point_design.analysis
    limit = math.inf if limit is None else limit
    names = list(coefficients)
    rising = np.array([monotone.get(k) == "increasing" for k in names])
    falling = np.array([monotone.get(k) == "decreasing" for k in names])

    def acceptable(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Rows of ``b`` (candidates) whose steps from ``a`` fit the limit and the directions."""
        scale = np.maximum(np.abs(a), np.abs(b))
        step = np.where(scale > 0, np.abs(a - b) / np.where(scale > 0, scale, 1), 0)
        ok = np.all(step <= limit, axis=-1)
        ok &= np.all(~rising | (b >= a), axis=-1)
        ok &= np.all(~falling | (b <= a), axis=-1)
        return ok

    grids = {k: v.reshape(shape) for k, v in coefficients.items()}
    flat_index = np.arange(int(np.prod(shape))).reshape(shape)
    ratios = np.geomspace(1 / 64, 64, 1201)
    moved = []
    for axis in range(len(shape)):
        for idx in np.ndindex(*shape):
            if idx[axis] == 0:
                continue
            prev = list(idx)
            prev[axis] -= 1
            prev = tuple(prev)
            a = np.array([grids[k][prev] for k in grids])
            b = np.array([grids[k][idx] for k in grids])
            if acceptable(a, b[None, :])[0]:
                continue
            p = int(flat_index[idx])
            gain = float(point_design.analysis.gain[p])
            if not np.isfinite(gain) or gain == 0:
                continue
            # coefficients scale with K for a fixed shape, except the filter/lead poles
            scalable = np.array([k not in SHAPE_COEFFICIENTS for k in grids])
            trial = b[None, :] * np.where(scalable, ratios[:, None], 1.0)
            fits = acceptable(a[None, :], trial)
            inside = np.array([any(lo < gain * r < hi for lo, hi in point_design.intervals[p]) for r in ratios])
            usable = np.flatnonzero(fits & inside)
            if usable.size == 0:
                continue
            r = ratios[usable[np.argmin(np.abs(np.log(ratios[usable])))]]
            for j, k in enumerate(grids):
                if scalable[j]:
                    grids[k][idx] = b[j] * r
            moved.append((p, gain, gain * r))
    if not moved:
        return coefficients, notes, point_design.analysis
    coefficients = {k: v.ravel().copy() for k, v in grids.items()}
    analysis = analyse(point_design.plant, structure, coefficients, point_design.limits)
    for p, old, new in moved:
        if analysis.passed[p] or not point_design.analysis.passed[p]:
            before = point_design.analysis
            notes.append(
                f"table limits (max_relative_step/monotone) forced a worse design at {sched.describe_point(point_design.points[p])}: "
                f"K {old:.6g} -> {new:.6g}; slowest decay {float(before.decay[p]):.6g} -> "
                f"{float(analysis.decay[p]):.6g} 1/s, damping {float(before.damping[p]):.4g} -> "
                f"{float(analysis.damping[p]):.4g}"
            )
        else:
            for k in coefficients:
                coefficients[k][p] = point_design.coefficients[k][p]
    analysis = analyse(point_design.plant, structure, coefficients, point_design.limits)
    return coefficients, notes, analysis


def _between(sched, axes_values, grids, structure, count):
    from .engine import limits_at, sampled_plant

    if count <= 0:
        return [], 0, None
    points, owner = between_points(axes_values, count)
    coefficients = interpolate_grids(tuple(axes_values), grids, points)
    plant = sampled_plant(sched, points)
    limits = limits_at(sched, points)
    analysis = analyse(plant, structure, coefficients, limits)
    failing: list[BetweenFailure] = []
    for q in np.flatnonzero(~analysis.passed):
        failing.append(BetweenFailure(
            interval=tuple(int(i) for i in owner[q]),
            point={a.name: float(v) for a, v in zip(sched.axes, points[q])},
            failed=tuple(analysis.failed_specs(int(q))),
        ))
    return failing, int(points.shape[0]), (points, owner, analysis)


def _tolerances(sched, points, structure, coefficients):
    from .engine import limits_at, sampled_plant

    scales = tolerance_scales(sched.tolerances)
    if not scales:
        return [], 0, []
    limits = limits_at(sched, points)
    P = points.shape[0]
    fails = np.zeros((len(scales), P), dtype=int)
    damping = np.zeros((len(scales), P))
    failed_names: list[list[list[str]]] = []
    for c, scale in enumerate(scales):
        plant = sampled_plant(sched, points, scale=scale)
        analysis = analyse(plant, structure, coefficients, limits)
        names = [analysis.failed_specs(p) for p in range(P)]
        failed_names.append(names)
        fails[c] = [len(n) for n in names]
        damping[c] = analysis.damping
    failing: list[CornerResult] = []
    worst: list[CornerResult] = []
    for p in range(P):
        # worst corner: most failed specs, then lowest damping
        order = np.lexsort((damping[:, p], -fails[:, p]))
        c = int(order[0])
        entry = CornerResult(
            point={a.name: float(v) for a, v in zip(sched.axes, points[p])},
            worst_corner=c,
            scale=scales[c],
            damping=float(damping[c, p]),
            failed=tuple(failed_names[c][p]),
        )
        worst.append(entry)
        if fails[c, p] > 0:
            failing.append(entry)
    return failing, len(scales), worst


def run_table_checks(sched, point_design, axes_values, progress=None, redesign: bool = True, structure: str | None = None):
    """Run every whole-table check; may smooth gains and insert breakpoints (design only).

    Returns
    -------
    (TableReport, PointDesign, axes_values)
        The report, the (possibly smoothed/refined) point design, and the
        (possibly refined) axis values.
    """
    from .engine import design_points, grid_points
    from .results import TableReport

    structure = structure or sched.controller.structure
    names = tuple(a.name for a in sched.axes)
    axes_values = [np.asarray(v, float) for v in axes_values]
    smoothing_notes: list[str] = []
    inserted: list[InsertedBreakpoint] = []
    if redesign and (sched.table_checks.max_relative_step is not None or sched.table_checks.monotone):
        shape = tuple(v.size for v in axes_values)
        coefficients, smoothing_notes, analysis = _smooth_gains(sched, point_design, shape, structure)
        point_design = point_design.reanalysed(coefficients, analysis)
    count = int(sched.table_checks.between_points)
    budget = int(sched.table_checks.refine_max_inserted) if redesign else 0
    while True:
        shape = tuple(v.size for v in axes_values)
        grids = {k: np.asarray(v).reshape(shape) for k, v in point_design.coefficients.items()}
        if progress is not None:
            progress("between points", 0, 1)
        failing, checked, detail = _between(sched, axes_values, grids, structure, count)
        if progress is not None:
            progress("between points", 1, 1)
        if not failing or budget <= 0:
            break
        # insert breakpoints in the middle of every failing interval (2-D: across
        # the relatively wider side of each failing cell), most failures first,
        # within the remaining budget
        counts: dict[tuple, int] = {}
        for entry in failing:
            counts[entry.interval] = counts.get(entry.interval, 0) + 1
        wanted: list[tuple[int, float]] = []
        for cell in sorted(counts, key=lambda k: (-counts[k], k)):
            axis = 0
            if len(axes_values) == 2:
                widths = [(axes_values[a][cell[a] + 1] - axes_values[a][cell[a]]) / np.ptp(axes_values[a]) for a in (0, 1)]
                axis = int(np.argmax(widths))
            i = cell[axis]
            value = float(0.5 * (axes_values[axis][i] + axes_values[axis][i + 1]))
            if (axis, value) not in wanted:
                wanted.append((axis, value))
        wanted = wanted[:budget]
        new_axes = [v.copy() for v in axes_values]
        for axis, value in wanted:
            new_axes[axis] = np.sort(np.append(new_axes[axis], value))
            inserted.append(InsertedBreakpoint(axis=names[axis], value=value))
        new_points = grid_points(new_axes)
        # reuse the designs of existing points, design only the new ones
        old_lookup = {tuple(p): q for q, p in enumerate(point_design.points)}
        is_new = np.array([tuple(p) not in old_lookup for p in new_points])
        fresh = design_points(sched, new_points[is_new])
        point_design = _merge_designs(point_design, fresh, new_points, is_new, old_lookup, structure)
        axes_values = new_axes
        budget -= len(wanted)
    if failing and redesign:
        point_design = _back_off(sched, point_design, axes_values, structure, count)
        shape = tuple(v.size for v in axes_values)
        grids = {k: np.asarray(v).reshape(shape) for k, v in point_design.coefficients.items()}
        failing, checked, detail = _between(sched, axes_values, grids, structure, count)
    smooth, mono = _check_smoothness(sched, {k: np.asarray(v).reshape(tuple(a.size for a in axes_values))
                                            for k, v in point_design.coefficients.items()}, names)
    if progress is not None:
        progress("tolerances", 0, 1)
    tol_fail, tol_count, tol_worst = _tolerances(sched, point_design.points, structure, point_design.coefficients)
    if progress is not None:
        progress("tolerances", 1, 1)
    report = TableReport(
        smoothness=tuple(smooth),
        monotone=tuple(mono),
        smoothing=tuple(smoothing_notes),
        between=tuple(failing),
        between_checked=checked,
        inserted=tuple(inserted),
        tolerances=tuple(tol_fail),
        tolerance_corners=tol_count,
        tolerance_worst=tuple(tol_worst),
    )
    return report, point_design, axes_values


def _back_off(sched, point_design, axes_values, structure, count):
    """The between-point back-off (:mod:`gainloom.design.between_backoff`), its warnings on the points."""
    from dataclasses import replace

    from .between_backoff import back_off_between

    moved_design, moved = back_off_between(sched, point_design, axes_values, structure, count)
    if not moved:
        return point_design
    P = moved_design.points.shape[0]
    old = point_design.warnings or tuple(() for _ in range(P))
    warnings = tuple(tuple(old[p]) + ((moved[p],) if p in moved else ()) for p in range(P))
    return replace(moved_design, warnings=warnings)


def _merge_designs(old, fresh, new_points, is_new, old_lookup, structure):
    from .engine import PointDesign

    P = new_points.shape[0]
    source = []
    fresh_index = np.cumsum(is_new) - 1
    for q in range(P):
        source.append(("new", int(fresh_index[q])) if is_new[q] else ("old", old_lookup[tuple(new_points[q])]))

    def pick(old_array, new_array):
        return np.stack([new_array[j] if kind == "new" else old_array[j] for kind, j in source])

    coefficients = {k: pick(old.coefficients[k], fresh.coefficients[k]) for k in old.coefficients}
    plant = _sched_plant(old, fresh, source)
    limits = old.limits.replaced({k: pick(getattr(old.limits, k), getattr(fresh.limits, k)) for k in old.limits.as_dict()})
    analysis = analyse(plant, structure, coefficients, limits)
    return PointDesign(
        points=new_points,
        plant=plant,
        limits=limits,
        coefficients=coefficients,
        analysis=analysis,
        feasible=pick(old.feasible, fresh.feasible),
        binding=tuple(fresh.binding[j] if kind == "new" else old.binding[j] for kind, j in source),
        notes=tuple(fresh.notes[j] if kind == "new" else old.notes[j] for kind, j in source),
        intervals=[fresh.intervals[j] if kind == "new" else old.intervals[j] for kind, j in source],
        shape_params=pick(old.shape_params, fresh.shape_params),
        warnings=tuple((fresh.warnings[j] if fresh.warnings else ()) if kind == "new"
                       else (old.warnings[j] if old.warnings else ()) for kind, j in source),
    )


def _sched_plant(old, fresh, source):
    """Stack the sampled plants of old and new points in grid order."""
    from ..lti.loop import Loop

    def rows(loop_old, loop_new, attr):
        a, b = getattr(loop_old, attr), getattr(loop_new, attr)
        if a is None:
            return None
        return np.stack([b[j] if kind == "new" else a[j] for kind, j in source])

    if old.plant.den.shape[1] != fresh.plant.den.shape[1]:
        raise ValueError("plant order changed between grid points")
    return Loop(
        num=rows(old.plant, fresh.plant, "num"),
        den=rows(old.plant, fresh.plant, "den"),
        ts=rows(old.plant, fresh.plant, "ts"),
        hold=old.plant.hold,
        delay=rows(old.plant, fresh.plant, "delay"),
        prewarp=old.plant.prewarp,
        delta_num=rows(old.plant, fresh.plant, "delta_num"),
        delta_den=rows(old.plant, fresh.plant, "delta_den"),
    )

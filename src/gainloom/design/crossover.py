"""Crossover-driven design: the whole controller space, every spec as a gain set.

Used by the objectives ``max-crossover`` (the largest gain crossover that meets
every spec) and ``nearest-target`` with ``target: {crossover: ...}``.

Search space.  A controller *shape* fixes its zeros and poles; the free
shape parameters are searched as s-plane rates ``r`` (rad/s, ``z = exp(-r ts)``)
on a log grid spanning the whole meaningful range, from 1/100 of the slowest
plant pole (or ``1e-6`` of Nyquist) to twice Nyquist (``z = e^-2pi``):

=========  =====================================================================
structure  shape parameters
=========  =====================================================================
pi         zero rate
pd         zero rate (above the derivative filter pole)
pid        both zero rates (ordered); the derivative filter stays at the
           schedule's ``derivative_filter``: a slower filter only adds phase
           lag at crossover, so the fastest allowed one is always best for
           crossover, and no spec here measures noise
lead, lag  zero rate and pole rate (pole faster than zero for lead, slower
           for lag)
leadlag    both zero rates; poles by the corner ratio of
           :mod:`gainloom.design.strategies`
=========  =====================================================================

Gains.  For one shape only the loop gain ``K`` is left, and every spec is a
set of gains: pole regions, stability and the gain margin exactly
(:func:`gainloom.design.search.exact_feasible`), phase margin, delay margin,
crossover band, sensitivity peak and bandwidth from the frequency response
(:mod:`gainloom.lti.gain_sets`).  Their intersection is the feasible set of
the shape; the objective is evaluated inside it (the crossover is read off
the same response).  With ``tolerances: {design: worst-case}`` the sets of
every tolerance corner are intersected, so each spec holds at its worst
corner.

Integral action (our rule, see docs/design.md).  Pushing the crossover up
alone drives a PI zero to ``z -> 1``: the last bit of crossover is bought by
making the integral action (and load-disturbance rejection) vanish.  So for
pi and pid a second pass keeps the crossover within ``INTEGRAL_COST`` of the
best one found (for ``nearest-target``, within ``TIE`` of the crossover the
first pass reached) and, among the shapes that do, takes the one whose
slowest zero is fastest: the most integral action for a bounded, stated
crossover cost.

Tracking (our rule).  Without an integrator, the largest crossover under
margin specs alone is often a band-pass loop: a lead zero at ``z -> 1`` and
its pole at ``z -> 0`` kill the low-frequency gain, and the "crossover" is
bought with a loop that no longer follows its reference.  So for p, pd, lead,
lag and leadlag the loop gain at zero frequency must be at least
``DC_GAIN`` (a step leaves at most 50 % static error); a gain set like the
others, ``K >= DC_GAIN / |H(1)|``.

Shapes.  The coarse grid is evaluated for all points at once; ties (within
``TIE``) go to the shape nearest the neighbouring point's choice, which keeps
tables smooth; then a pattern search refines each point's shape (moving only
for a real gain, ``> REFINE_GAIN``).  A point is declared infeasible only when
no shape of the whole grid and its refinement has a non-empty feasible set;
:func:`certificate` then names the binding spec and its best value over the
space.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..lti import gain_sets as gs
from ..lti.closed_loop import closed_loop_poles
from ..lti.loop import Loop
from ..lti.polynomials import batched_roots
from .search import Shapes, exact_feasible, region_ok, shape_loops
from .spec_limits import SpecLimits
from .strategies import LEAD_RATIO, pack_shapes
from .structures import filter_pole

__all__ = ["CrossoverChoice", "crossover_design", "ranked_alternatives", "INTEGRAL_COST", "shape_space"]

#: Crossover given up for integral action in pi and pid designs (relative).
#: Our choice (no source), see docs/design.md.
INTEGRAL_COST = 0.03
#: Hard floor besides: the slowest zero of pi/pid is at least
#: crossover / INTEGRAL_SPAN (two decades; our choice, no source).
INTEGRAL_SPAN = 100.0
#: Least loop gain at zero frequency, ``|K H(1)|``, of structures without an
#: integrator (p, pd, lead, lag, leadlag): static error of a step at most
#: 1/(1 + DC_GAIN) = 50 %.  Our rule (no source), see the module docstring.
DC_GAIN = 1.0
#: Coarse grid points per shape parameter (one- and two-parameter shapes).
GRID_1D = 48
GRID_2D = 16
#: Relative score band counted as a tie (broken toward the neighbour).
TIE = 0.01
#: Pattern-search rounds, and the least relative improvement that moves it.
REFINE_ROUNDS = 12
REFINE_GAIN = 1e-4
#: Gains tried inside each feasible interval (ends and geometric interior).
INTERVAL_SAMPLES = 6
#: Relative inset from an open interval's end.
EDGE_INSET = 1e-6


@dataclass(frozen=True, eq=False)
class CrossoverChoice:
    """Chosen shape and gain per point.

    Attributes
    ----------
    shapes : Shapes
        One shape per point (``S = 1``), the chosen one.
    gain : ndarray, shape (P,)
        Loop gain ``K`` (NaN where infeasible).
    feasible : ndarray of bool, shape (P,)
    intervals : list of list of (float, float)
        Feasible gains of the chosen shape.
    crossover : ndarray, shape (P,)
        Crossover of the choice (nominal plant), rad/s.
    rates : ndarray, shape (P, d)
        Shape parameters (rates, rad/s) of the choice.
    """

    shapes: Shapes
    gain: np.ndarray
    feasible: np.ndarray
    intervals: list
    crossover: np.ndarray
    rates: np.ndarray


def _plant_rates(plant: Loop) -> np.ndarray:
    """Slowest non-zero plant pole rate per point, rad/s (s-plane magnitude)."""
    roots = batched_roots(plant.den)
    ts = np.asarray(plant.ts, float)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.abs(np.log(roots.astype(complex))) / ts
    nyquist = np.pi / ts[:, 0]
    s = np.where(np.isfinite(s) & (s > 1e-9 * nyquist[:, None]), s, np.inf)
    return np.min(s, axis=1)


def shape_space(plant: Loop) -> tuple[np.ndarray, np.ndarray]:
    """Log-rate bounds ``(low, high)`` of the shape parameters per point."""
    nyquist = np.pi / np.asarray(plant.ts, float)
    slow = _plant_rates(plant)
    low = np.maximum(np.where(np.isfinite(slow), slow / 100.0, nyquist * 1e-6), nyquist * 1e-6)
    return np.log(low), np.log(2.0 * nyquist)


def _dimension(structure: str) -> int:
    return {"p": 0, "pi": 1, "pd": 1, "pid": 2, "lead": 2, "lag": 2, "leadlag": 2}[structure]


def _coarse(structure: str, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """Coarse log-rate grid, shape (P, S, d)."""
    d = _dimension(structure)
    P = low.size
    if d == 0:
        return np.zeros((P, 1, 0))
    n = GRID_1D if d == 1 else GRID_2D
    t = np.linspace(0.0, 1.0, n)
    axis = low[:, None] + t[None, :] * (high - low)[:, None]  # (P, n)
    if d == 1:
        return axis[:, :, None]
    i, j = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    i, j = i.ravel(), j.ravel()
    if structure in ("pid", "leadlag"):
        keep = i <= j if structure == "pid" else np.ones_like(i, bool)
        i, j = i[keep], j[keep]
    else:
        keep = i != j
        i, j = i[keep], j[keep]
    return np.stack([axis[:, i], axis[:, j]], axis=-1)


def _integral_cap(structure: str, log_rates: np.ndarray) -> np.ndarray:
    """Highest crossover (rad/s) the integral floor allows each shape (P, S); inf without integrator."""
    if structure not in ("pi", "pid"):
        return np.full(log_rates.shape[:2], np.inf)
    return INTEGRAL_SPAN * np.exp(np.min(log_rates, axis=-1))


def _shapes(structure: str, log_rates: np.ndarray, ts: np.ndarray, kd_a: np.ndarray) -> Shapes:
    """Shapes from log rates (P, S, d)."""
    P, S = log_rates.shape[:2]
    z = np.exp(-np.exp(log_rates) * ts[:, None, None])
    a = np.broadcast_to(kd_a[:, None], (P, S))
    if structure == "p":
        roots, poles = np.zeros((P, S, 0)), np.zeros((P, S, 0))
    elif structure == "pi":
        roots, poles = z, np.ones((P, S, 1))
    elif structure == "pd":
        roots, poles = z, a[..., None].copy()
    elif structure == "pid":
        roots, poles = np.sort(z, axis=-1), np.stack([np.ones((P, S)), a], axis=-1)
    elif structure in ("lead", "lag"):
        roots, poles = z[..., :1], z[..., 1:]
    else:  # leadlag: lead zero, lag zero; poles by the corner ratio
        roots = z
        poles = np.stack([z[..., 0] ** LEAD_RATIO, z[..., 1] ** (1 / LEAD_RATIO)], axis=-1)
    return pack_shapes(structure, roots, poles)


@dataclass(frozen=True, eq=False)
class _Context:
    structure: str
    plants: tuple[Loop, ...]  # nominal first, then tolerance corners
    limits: SpecLimits
    objective: str
    target: np.ndarray  # crossover target per point, rad/s (NaN: none)
    kd_a: np.ndarray
    w_low: np.ndarray
    #: crossover band the shapes must keep (second pass), rad/s
    band: tuple[np.ndarray, np.ndarray] | None = None
    #: apply the integral floor and the tracking rule (off: the specs alone)
    rules: bool = True


def _spec(limits: SpecLimits, name: str) -> np.ndarray:
    value = getattr(limits, name, None)
    return np.full(limits.points, np.nan) if value is None else np.asarray(value, float)


def _gain_sets(ctx: _Context, plant: Loop, shapes: Shapes, cap: np.ndarray, rows_p: np.ndarray, flat_rows: np.ndarray):
    """Feasible gain sets of the flattened shape rows ``flat_rows`` on one plant; and their response grids."""
    P, S = shapes.valid.shape
    zeros = shapes.zeros.reshape((P * S,) + shapes.zeros.shape[2:])[flat_rows]
    poles = shapes.poles.reshape((P * S,) + shapes.poles.shape[2:])[flat_rows]
    points = rows_p[flat_rows]
    loops = shape_loops(plant, zeros, poles, points)
    lim = ctx.limits
    sets = exact_feasible(loops, lim, points)
    grid = gs.response_grid(loops, ctx.w_low[points])
    low = _spec(lim, "min_crossover")[points]
    high = np.fmin(_spec(lim, "max_crossover")[points], cap.reshape(-1)[flat_rows])
    if ctx.band is not None:
        low, high = np.fmax(low, ctx.band[0][points]), np.fmin(high, ctx.band[1][points])
    parts = [gs.crossover_band_gains(grid, low, high)]
    if np.any(np.isfinite(lim.min_phase_margin[points])):
        parts.append(gs.phase_margin_gains(grid, lim.min_phase_margin[points]))
    if np.any(np.isfinite(lim.min_delay_margin[points])):
        parts.append(gs.delay_margin_gains(grid, lim.min_delay_margin[points]))
    if np.any(np.isfinite(lim.max_sensitivity_peak[points])):
        parts.append(gs.sensitivity_gains(grid, lim.max_sensitivity_peak[points]))
    bandwidth = _spec(lim, "min_bandwidth")[points]
    if np.any(np.isfinite(bandwidth)):
        parts.append(gs.bandwidth_gains(loops, bandwidth, grid))
    if ctx.rules and ctx.structure not in ("pi", "pid"):
        # loop gain at zero frequency at least DC_GAIN: otherwise the best
        # "crossover" is a band-pass loop that does not track (see module doc)
        floor = np.where(np.isfinite(grid.log_k0), DC_GAIN * np.exp(grid.log_k0), 0.0)
        parts.append([[(float(f), math.inf)] for f in floor])
    return gs.intersect_all(sets, *parts), grid


def _sampled_region_ok(ctx: _Context, loops: list[Loop], gains: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Pole-region specs the exact sets leave out, judged at the candidate gains (R, C).

    The natural-frequency band of the dominant pole
    (:func:`gainloom.design.search.region_ok`), on every plant (nominal and
    tolerance corners).  The damping is in the exact sets under both pole
    selections.
    """
    lim = ctx.limits
    names = ["min_natural_frequency", "max_natural_frequency"]
    if not any(np.any(np.isfinite(getattr(lim, n)[points])) for n in names):
        return np.ones(gains.shape, dtype=bool)
    safe = np.nan_to_num(gains, nan=1.0)
    ok = np.ones(gains.shape, dtype=bool)
    for loop in loops:
        region, _ = region_ok(closed_loop_poles(loop, safe), np.asarray(loop.ts, float), lim, points)
        ok &= region
    return ok


def _candidates(sets: list, grid: gs.ResponseGrid, target: np.ndarray) -> np.ndarray:
    """Gains to score per row: interval ends (inset), interior samples, the target's crossing gain."""
    R = len(sets)
    per = max((len(s) for s in sets), default=0) * (INTERVAL_SAMPLES + 1)
    out = np.full((R, max(per, 1)), np.nan)
    finite_k = np.where(np.isfinite(grid.log_k), grid.log_k, -np.inf)
    top = np.exp(np.max(finite_k, axis=1)) * 10.0  # beyond: crossover past Nyquist
    with np.errstate(divide="ignore", invalid="ignore"):
        at_target = np.exp(-np.log(np.abs(_response_at(grid, target))))
    for r, intervals in enumerate(sets):
        values = []
        for lo, hi in intervals:
            hi_in = min(hi * (1 - EDGE_INSET), top[r]) if math.isfinite(hi) else top[r]
            lo_in = lo * (1 + EDGE_INSET) if lo > 0 else hi_in * 1e-9
            if not lo_in < hi_in:
                continue
            values.extend(np.geomspace(lo_in, hi_in, INTERVAL_SAMPLES))
            if np.isfinite(at_target[r]):
                values.append(min(max(at_target[r], lo_in), hi_in))
        out[r, : len(values)] = values
    return out


def _response_at(grid: gs.ResponseGrid, w: np.ndarray) -> np.ndarray:
    """|H| interpolated (log-log) at one frequency per row; NaN where ``w`` is NaN."""
    out = np.full(grid.w.shape[0], np.nan)
    for r in np.flatnonzero(np.isfinite(w)):
        out[r] = np.exp(np.interp(np.log(w[r]), np.log(grid.w[r]), -grid.log_k[r]))
    return out


def _score(ctx: _Context, crossover: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Objective value (larger is better) of crossovers (R, C)."""
    if ctx.objective == "max-crossover":
        return np.where(crossover > 0, crossover, -np.inf)
    target = ctx.target[points][:, None]
    with np.errstate(divide="ignore"):
        return -np.abs(np.log(crossover / target))


def _evaluate(ctx: _Context, log_rates: np.ndarray):
    """Best gain, its score and crossover, and the feasible set, for every shape (P, S)."""
    P, S = log_rates.shape[:2]
    ts = np.asarray(ctx.plants[0].ts, float)
    shapes = _shapes(ctx.structure, log_rates, ts, ctx.kd_a)
    cap = _integral_cap(ctx.structure, log_rates) if ctx.rules else np.full(log_rates.shape[:2], np.inf)
    rows_p = np.repeat(np.arange(P), S)
    flat = np.flatnonzero(shapes.valid.reshape(-1))
    sets_all: list = [[] for _ in range(P * S)]
    score = np.full(P * S, -np.inf)
    gain = np.full(P * S, np.nan)
    crossover = np.full(P * S, np.nan)
    if flat.size:
        sets, grid = _gain_sets(ctx, ctx.plants[0], shapes, cap, rows_p, flat)
        loops = [grid.loop]
        for plant in ctx.plants[1:]:
            corner, corner_grid = _gain_sets(ctx, plant, shapes, cap, rows_p, flat)
            sets = gs.intersect_all(sets, corner)
            loops.append(corner_grid.loop)
        points = rows_p[flat]
        cands = _candidates(sets, grid, ctx.target[points])
        wc = gs.crossover_at(grid, np.nan_to_num(cands, nan=1.0))
        value = np.where(np.isfinite(cands) & _sampled_region_ok(ctx, loops, cands, points), _score(ctx, wc, points), -np.inf)
        best = np.argmax(value, axis=1)
        rows = np.arange(flat.size)
        score[flat] = value[rows, best]
        gain[flat] = np.where(np.isfinite(score[flat]), cands[rows, best], np.nan)
        crossover[flat] = wc[rows, best]
        for r, s in zip(flat, sets):
            sets_all[r] = s
    if ctx.band is not None:  # second pass: the most integral action
        slowest = np.min(log_rates, axis=-1).reshape(-1) if log_rates.shape[-1] else np.zeros(P * S)
        score = np.where(np.isfinite(score), slowest, -np.inf)
    return shapes, score.reshape(P, S), gain.reshape(P, S), crossover.reshape(P, S), sets_all


def _neighbours(points: np.ndarray) -> np.ndarray:
    """Index of the nearest earlier point (normalised axes), -1 for the first."""
    span = np.ptp(points, axis=0)
    x = points / np.where(span > 0, span, 1.0)
    out = np.full(points.shape[0], -1)
    for p in range(1, points.shape[0]):
        out[p] = int(np.argmin(np.sum((x[:p] - x[p]) ** 2, axis=1)))
    return out


def _later_neighbours(points: np.ndarray) -> np.ndarray:
    """Index of the nearest later point (normalised axes), -1 for the last."""
    P = points.shape[0]
    reverse = _neighbours(points[::-1])[::-1]  # indices into the reversed order
    return np.where(reverse >= 0, P - 1 - reverse, -1)


def _tie_break(score: np.ndarray, log_rates: np.ndarray, neighbours: np.ndarray, relative: bool) -> np.ndarray:
    """Per point the best shape; within ``TIE`` of the best, the one nearest the neighbour's choice."""
    P = score.shape[0]
    pick = np.argmax(score, axis=1)
    for p in range(P):
        best = score[p, pick[p]]
        q = neighbours[p]
        if not np.isfinite(best) or q < 0:
            continue
        band = best - TIE * abs(best) if relative else best - TIE
        ties = np.flatnonzero(score[p] >= band)
        distance = np.sum((log_rates[p, ties] - log_rates[q, pick[q]]) ** 2, axis=-1)
        pick[p] = ties[int(np.argmin(distance))]
    return pick


def _refine(ctx: _Context, x: np.ndarray, value: np.ndarray, step: np.ndarray, relative: bool,
            bounds: tuple[np.ndarray, np.ndarray]):
    """Pattern search on the log rates ``x`` (P, d) from their coarse scores, inside the shape space."""
    P, d = x.shape
    if d == 0:
        return x, value
    offsets = np.array([o for o in np.ndindex(*(3,) * d) if any(v != 1 for v in o)], float) - 1.0  # (N, d)
    step = np.broadcast_to(step, (P, d)).copy()
    for _ in range(REFINE_ROUNDS):
        trial = x[:, None, :] + offsets[None, :, :] * step[:, None, :]
        # stay inside the searched space: a pole pushed past its end would only
        # wander in the numerically empty region z < e^-2pi
        trial = np.clip(trial, bounds[0][:, None, None], bounds[1][:, None, None])
        _, score, _, _, _ = _evaluate(ctx, trial)
        j = np.argmax(score, axis=1)
        best = score[np.arange(P), j]
        margin = REFINE_GAIN * np.abs(np.where(np.isfinite(value), value, 0.0)) if relative else REFINE_GAIN
        better = np.isfinite(best) & (~np.isfinite(value) | (best > np.where(np.isfinite(value), value, -np.inf) + margin))
        x = np.where(better[:, None], trial[np.arange(P), j], x)
        value = np.where(better, best, value)
        step = np.where(better[:, None], step, step / 2.0)
    return x, value


def crossover_design(
    plant: Loop,
    structure: str,
    limits: SpecLimits,
    objective: str,
    points: np.ndarray,
    *,
    target_crossover: float | None = None,
    derivative_filter: float | None = None,
    corners: tuple[Loop, ...] = (),
    rules: bool = True,
) -> CrossoverChoice:
    """Search the whole shape space and gain for every point (see the module docstring).

    Parameters
    ----------
    plant : Loop
        Discrete plant, P points (nominal).
    structure : str
    limits : SpecLimits
        Specs the design aims at (usually the tightened ones).
    objective : {"max-crossover", "nearest-target"}
    points : ndarray, shape (P, n_axes)
        Operating points (for the neighbour order of the tie-break).
    target_crossover : float, optional
        Crossover target, rad/s (``nearest-target``).
    derivative_filter : float, optional
        Derivative filter time constant, s (pd, pid).
    corners : tuple of Loop
        The plant at each tolerance corner (worst-case design), same points.
    rules : bool
        Apply the integral floor and the tracking rule (default); off, only
        the specs bound the search.

    Returns
    -------
    CrossoverChoice
    """
    P = plant.points
    ts = np.asarray(plant.ts, float)
    kd_a = filter_pole(derivative_filter if derivative_filter is not None else 0.0, ts)
    low, high = shape_space(plant)
    ctx = _Context(
        structure=structure,
        plants=(plant,) + tuple(corners),
        limits=limits,
        objective=objective,
        target=np.full(P, np.nan if target_crossover is None else float(target_crossover)),
        kd_a=np.broadcast_to(kd_a, (P,)).astype(float),
        w_low=np.exp(low) / 10.0,
        rules=rules,
    )
    neighbours = _neighbours(np.asarray(points, float).reshape(P, -1))
    x, found = _search(ctx, low, high, neighbours, relative=objective == "max-crossover")
    if structure in ("pi", "pid") and np.any(found):
        # second pass: the most integral action at a bounded crossover cost
        _, _, _, wc, _ = _evaluate(ctx, x[:, None, :])
        wc = wc[:, 0]
        if objective == "max-crossover":
            band = ((1 - INTEGRAL_COST) * wc, np.full(P, np.nan))
        else:
            band = ((1 - TIE) * wc, (1 + TIE) * wc)
        second = replace(ctx, band=(np.where(found, band[0], np.nan), np.where(found, band[1], np.nan)))
        x2, found2 = _search(second, low, high, neighbours, relative=False)
        x = np.where(found2[:, None], x2, x)
        ctx = replace(ctx, band=None)
    if structure not in ("pi", "pid"):
        grid = np.asarray(points, float).reshape(P, -1)
        x = _smooth(ctx, x, neighbours, _later_neighbours(grid), relative=objective == "max-crossover")
    shapes, score, gain, crossover, sets = _evaluate(ctx, x[:, None, :])
    feasible = np.isfinite(score[:, 0])
    return CrossoverChoice(
        shapes=shapes,
        gain=np.where(feasible, gain[:, 0], np.nan),
        feasible=feasible,
        intervals=sets,
        crossover=crossover[:, 0],
        rates=np.exp(x),
    )


#: Rounds of the smoothing pass of :func:`_smooth`.
SMOOTH_ROUNDS = 6
#: Fractions of the way toward the neighbours' shape tried in each round.
SMOOTH_STEPS = (1.0, 0.5, 0.25, 0.125, 0.0625)


def _smooth(ctx: _Context, x: np.ndarray, earlier: np.ndarray, later: np.ndarray, relative: bool) -> np.ndarray:
    """Move each point's shape toward its neighbours' as far as ``TIE`` allows.

    Where the objective is flat over the shapes (a lead's zero and pole trade
    against each other) the independent searches settle anywhere in the
    valley, and neighbouring points get unrelated shapes.  Each round offers
    every point its nearest earlier and later neighbours' shapes and
    ``SMOOTH_STEPS`` of the way toward their mean (log rates), all in one
    batched evaluation, and takes the one nearest both neighbours among
    those scoring within ``TIE`` of the point's own best (the score before
    smoothing, so the cost does not add up over rounds).  Whole shapes
    settle a point that sits on another lead of the same crossover (a
    valley with two arms, where the mean between them is poor); the partial
    steps follow a best shape that moves with the operating point.  A
    larger band buys little: on the boost-converter lead benchmark the
    largest step of the lead pole went 0.46 -> 0.17 at 1 %, 0.12 at 2 %,
    0.08 at 3 % and 0.06 at 5 %.  Not used for pi/pid, whose second pass
    (integral action) already pins the shape.
    """
    P = x.shape[0]
    _, best, _, _, _ = _evaluate(ctx, x[:, None, :])
    best = best[:, 0]
    floor = best - TIE * np.abs(best) if relative else best - TIE
    idx = np.arange(P)
    # a point with one neighbour is pulled toward that one alone
    a = np.where(earlier >= 0, earlier, np.where(later >= 0, later, idx))
    b = np.where(later >= 0, later, a)
    steps = np.asarray(SMOOTH_STEPS)

    def distance(shape: np.ndarray, xa: np.ndarray, xb: np.ndarray) -> np.ndarray:
        return np.sum((shape - xa) ** 2 + (shape - xb) ** 2, axis=-1)

    for _ in range(SMOOTH_ROUNDS):
        xa, xb = x[a], x[b]
        target = 0.5 * (xa + xb)
        ladder = x[:, None, :] + steps[None, :, None] * (target - x)[:, None, :]
        trial = np.concatenate([xa[:, None, :], xb[:, None, :], ladder], axis=1)  # (P, C, d)
        _, score, _, _, _ = _evaluate(ctx, trial)
        good = np.isfinite(best)[:, None] & (score >= floor[:, None])
        far = np.where(good, distance(trial, xa[:, None, :], xb[:, None, :]), np.inf)
        pick = np.argmin(far, axis=1)
        move = far[idx, pick] < distance(x, xa, xb) - 1e-12
        if not np.any(move):
            break
        x = np.where(move[:, None], trial[idx, pick], x)
    return x


def _search(ctx: _Context, low: np.ndarray, high: np.ndarray, neighbours: np.ndarray, relative: bool):
    """Coarse grid, tie-break toward the neighbour, pattern search: log rates (P, d) and found flags."""
    P = low.size
    coarse = _coarse(ctx.structure, low, high)
    _, score, _, _, _ = _evaluate(ctx, coarse)
    pick = _tie_break(score, coarse, neighbours, relative)
    x = coarse[np.arange(P), pick]
    d = coarse.shape[-1]
    n = GRID_1D if d == 1 else GRID_2D
    x, value = _refine(ctx, x, score[np.arange(P), pick], ((high - low) / (n - 1))[:, None], relative, (low, high))
    return x, np.isfinite(value)


#: Fractions of each coarse shape's best gain offered as step-response fallbacks.
STEP_FRACTIONS = (1.0, 0.8, 0.6, 0.4, 0.25)


def ranked_alternatives(
    plant: Loop,
    structure: str,
    limits: SpecLimits,
    objective: str,
    *,
    target_crossover: float | None = None,
    derivative_filter: float | None = None,
    corners: tuple[Loop, ...] = (),
) -> tuple[Shapes, np.ndarray]:
    """Feasible (shape, gain) pairs of the coarse grid, best objective first.

    For the step-response specs, which are not gain sets: each coarse shape's
    best gain and ``STEP_FRACTIONS`` of it (inside its feasible set), ordered
    by the objective (the crossover moves with the gain for one shape; the
    score is scaled by the fraction for ``max-crossover``).

    Returns
    -------
    (Shapes, ndarray)
        Shapes ``(P, C)`` and gains ``(P, C)``, NaN gain where there are fewer.
    """
    P = plant.points
    ts = np.asarray(plant.ts, float)
    kd_a = filter_pole(derivative_filter if derivative_filter is not None else 0.0, ts)
    low, high = shape_space(plant)
    ctx = _Context(
        structure=structure, plants=(plant,) + tuple(corners), limits=limits, objective=objective,
        target=np.full(P, np.nan if target_crossover is None else float(target_crossover)),
        kd_a=np.broadcast_to(kd_a, (P,)).astype(float), w_low=np.exp(low) / 10.0,
    )
    coarse = _coarse(structure, low, high)
    shapes, score, gain, _, sets = _evaluate(ctx, coarse)
    S = coarse.shape[1]
    fractions = np.asarray(STEP_FRACTIONS)
    gains = gain[:, :, None] * fractions  # (P, S, F)
    inside = np.zeros(gains.shape, dtype=bool)
    for p in range(P):
        for s in range(S):
            for f, g in enumerate(gains[p, s]):
                inside[p, s, f] = np.isfinite(g) and any(lo < g < hi for lo, hi in sets[p * S + s])
    rank = np.where(inside, (score[:, :, None] * fractions) if objective == "max-crossover" else score[:, :, None] - fractions, -np.inf)
    order = np.argsort(-rank.reshape(P, -1), axis=1, kind="stable")
    flat_gain = np.where(inside, gains, np.nan).reshape(P, -1)
    rows = np.arange(P)[:, None]
    shape_of = order // fractions.size
    picked = Shapes(*(getattr(shapes, f)[rows, shape_of] for f in ("zeros", "poles", "valid", "gain", "params")))
    return picked, flat_gain[rows, order]

"""Gain selection for candidate controller shapes, batched across points.

A *shape* fixes the controller zeros and poles; what is left is the root
locus in the loop gain ``K`` of ``K Z Pnum / (Q Pden)``.  For every point and
every candidate shape this module

1. ranks shapes on a coarse geometric gain grid (one batched eigenvalue call
   for all points, shapes and gains),
2. takes the best shapes per point to the exact gain intervals of the spec
   region (:func:`gainloom.lti.intervals.spec_gain_intervals`), intersected
   with the gain-margin band of the stable interval
   (:func:`gainloom.lti.intervals.stable_gain_intervals`) and ``max_gain``,
3. picks the gain inside that exact feasible set that is best for the
   objective (batched samples, then a batched golden-section refinement),
4. checks phase margin, delay margin and sensitivity peak at the choice
   (:func:`gainloom.lti.margins.loop_margins`) and falls back to the next
   best samples where they fail.

Exact boundary gains (a pole reaching the damping spiral, the decay circle,
the radius circle, the unit circle; under ``poles: dominant`` the damping of
the dominant poles, :mod:`gainloom.design.dominant_sets`) therefore come
from the interval solver, never from the grid.  The natural-frequency band
on the dominant pole and the margins other than the gain margin are judged
on samples.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..lti.bandwidth import closed_loop_bandwidth
from ..lti.closed_loop import closed_loop_poles
from ..lti.convert import poly_from_roots
from ..lti.intervals import spec_gain_intervals, stable_gain_intervals
from ..lti.loop import Loop
from ..lti.margins import loop_margins
from ..lti.polynomials import polymul, z_to_delta
from ..lti.regions import SpecRegion
from ..spec_registry import spec_info
from .analysis import pole_metrics
from .cancel import cancelled_zeros, deflate, mask_cancelled
from .dominant_sets import dominant_damping_sets
from .spec_limits import SpecLimits

__all__ = ["OBJECTIVE_TEXT", "Choice", "GainSamples", "Shapes", "choose_gains", "objective_values", "shape_loops"]

#: Coarse gain samples per shape (ranking only).
COARSE_SAMPLES = 30
#: Decades spanned by the coarse grid around the loop's coefficient scale.
COARSE_DECADES = (-7.0, 3.0)
#: Exact-interval evaluations per point (best shapes by the coarse ranking).
EXACT_SHAPES = 1
#: Rounds of exact evaluation over the ranked shapes (``EXACT_SHAPES`` each).
MAX_ROUNDS = 6
#: Samples inside the exact feasible set per shape.
FINE_SAMPLES = 48
#: Golden-section iterations of the final refinement.
GOLDEN_STEPS = 30
#: Relative inset from an open interval's exact end (the end itself is on
#: the spec boundary and not inside the region).
EDGE_INSET = 1e-9

OBJECTIVE_TEXT = {
    "fastest": "largest smallest decay rate (smallest dominant pole radius)",
    "most-damped": "largest smallest damping ratio",
    "nearest-target": "dominant pole nearest the target pole (or, with target crossover, gain crossover nearest it)",
    "max-crossover": "largest gain crossover meeting every spec, over the whole controller space",
}


@dataclass(frozen=True, eq=False)
class Shapes:
    """Candidate controller shapes: ``S`` per point (all arrays lead with (P, S)).

    Attributes
    ----------
    zeros : ndarray, shape (P, S, nz + 1)
        Monic numerator of the controller in ``z``.
    poles : ndarray, shape (P, S, nq)
        Controller poles in ``z``.
    valid : ndarray of bool, shape (P, S)
        False where a shape is not realisable (e.g. a PI zero outside [0, 1)).
    gain : ndarray, shape (P, S)
        Gain the strategy asks for (dominant-pair magnitude condition), NaN
        where the objective decides.
    params : ndarray, shape (P, S, k)
        The shape parameters for the notes (zero locations in z).
    """

    zeros: np.ndarray
    poles: np.ndarray
    valid: np.ndarray
    gain: np.ndarray
    params: np.ndarray

    @property
    def count(self) -> int:
        """Shapes per point."""
        return self.zeros.shape[1]


def shape_loops(plant: Loop, zeros: np.ndarray, poles: np.ndarray, rows: np.ndarray) -> Loop:
    """The K-free open loops ``Z Pnum / (Q Pden)`` of shape rows.

    Parameters
    ----------
    plant : Loop
        Discrete plant, P points.
    zeros : ndarray, shape (R, nz + 1)
    poles : ndarray, shape (R, nq)
    rows : ndarray of int, shape (R,)
        Plant point of each row.
    """
    ts = plant.ts[rows]
    den_c = poly_from_roots(poles)
    num = polymul(zeros, plant.num[rows])
    den = polymul(den_c, plant.den[rows])
    delta_num = delta_den = None
    if plant.delta_den is not None:
        dz = z_to_delta(zeros, ts)
        dq = z_to_delta(den_c, ts)
        lead = dq[..., :1]
        delta_num = polymul(dz / lead, plant.delta_num[rows])
        delta_den = polymul(dq / lead, plant.delta_den[rows])
    return Loop(num=num, den=den, ts=ts, hold=plant.hold, delay=plant.delay[rows], prewarp=plant.prewarp,
                delta_num=delta_num, delta_den=delta_den)


def _target_s(limits_target: tuple[float, float] | None) -> complex | None:
    if limits_target is None:
        return None
    zeta, wn = limits_target
    return complex(-zeta * wn, wn * math.sqrt(max(1 - zeta * zeta, 0.0)))


def objective_values(
    poles: np.ndarray, ts: np.ndarray, objective: str, target: tuple[float, float] | None, selection: str = "all"
) -> np.ndarray:
    """Score (larger is better) of closed-loop poles ``B + (n,)`` for an objective.

    ``selection`` is the pole selection of the specs (``SpecLimits.poles``).
    """
    metrics = pole_metrics(poles, ts, selection)
    if objective == "fastest":
        return metrics["decay"]
    if objective == "most-damped":
        return metrics["damping"]
    # nearest-target: distance of the dominant pole (upper half) to the target, in units of wn
    s_target = _target_s(target)
    magnitude = np.abs(poles)
    dominant = np.take_along_axis(poles, np.argmax(np.where(np.isfinite(magnitude), magnitude, np.inf), axis=-1)[..., None], axis=-1)[..., 0]
    tsb = np.broadcast_to(np.asarray(ts, float), dominant.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.log(dominant) / tsb
    s = s.real + 1j * np.abs(s.imag)
    distance = np.abs(s - s_target) / abs(s_target)
    return -np.where(np.isfinite(distance), distance, np.inf)


def region_ok(poles: np.ndarray, ts: np.ndarray, limits: SpecLimits, rows: np.ndarray) -> tuple[np.ndarray, dict]:
    """Pole-region verdict of samples ``(R, M, n)`` for the limits of ``rows``."""
    metrics = pole_metrics(poles, ts[:, None], limits.poles)

    def lim(name: str) -> np.ndarray:
        return getattr(limits, name)[rows][:, None]

    ok = metrics["radius"] < 1
    ok &= np.isnan(lim("min_damping")) | (metrics["damping"] >= lim("min_damping"))
    ok &= np.isnan(lim("min_decay")) | (metrics["decay"] >= lim("min_decay"))
    ok &= np.isnan(lim("max_pole_radius")) | (metrics["radius"] <= lim("max_pole_radius"))
    ok &= np.isnan(lim("min_natural_frequency")) | (metrics["dominant_frequency"] >= lim("min_natural_frequency"))
    ok &= np.isnan(lim("max_natural_frequency")) | (metrics["dominant_frequency"] <= lim("max_natural_frequency"))
    return ok, metrics


@dataclass(frozen=True, eq=False)
class GainSamples:
    """The coarse gain samples of every shape, kept for the report on points no gain meets.

    Attributes
    ----------
    grid : ndarray, shape (P, S, G)
        Sampled loop gains per point and shape.
    metrics : dict of str to ndarray, each shape (P, S, G)
        Pole metrics (:func:`gainloom.design.analysis.pole_metrics`) at each sample.
    valid : ndarray of bool, shape (P, S)
        Shapes that exist at each point.
    """

    grid: np.ndarray
    metrics: dict[str, np.ndarray]
    valid: np.ndarray

    @classmethod
    def empty(cls, points: int) -> GainSamples:
        """No samples at ``points`` points (a crossover design samples no gain grid)."""
        return cls(grid=np.zeros((points, 0, 0)), metrics={}, valid=np.zeros((points, 0), dtype=bool))

    @classmethod
    def concatenate(cls, parts: list[GainSamples]) -> GainSamples:
        """The samples of consecutive chunks of points as one."""
        return cls(grid=np.concatenate([s.grid for s in parts]),
                   metrics={k: np.concatenate([s.metrics[k] for s in parts]) for k in parts[0].metrics},
                   valid=np.concatenate([s.valid for s in parts]))

    def with_rows(self, other: GainSamples, rows: np.ndarray) -> GainSamples:
        """These samples with the points ``rows`` taken from ``other`` (same points, same shapes)."""
        grid = self.grid.copy()
        grid[rows] = other.grid[rows]
        metrics = {k: v.copy() for k, v in self.metrics.items()}
        for k, values in metrics.items():
            values[rows] = other.metrics[k][rows]
        return GainSamples(grid=grid, metrics=metrics, valid=self.valid)


@dataclass(frozen=True, eq=False)
class Choice:
    """The chosen shape and gain at every point.

    Attributes
    ----------
    shape : ndarray of int, shape (P,)
        Index of the chosen shape (-1 where none is feasible).
    gain : ndarray, shape (P,)
        Chosen loop gain ``K`` (NaN where infeasible).
    feasible : ndarray of bool, shape (P,)
    intervals : list of list of (float, float)
        Exact feasible gain intervals of the chosen shape per point.
    notes : list of list of str
    samples : GainSamples
        Sampled data kept for the infeasibility report (empty for a
        crossover design, which samples no gain grid).
    """

    shape: np.ndarray
    gain: np.ndarray
    feasible: np.ndarray
    intervals: list
    notes: list
    samples: GainSamples


def _coarse_grid(loop: Loop) -> np.ndarray:
    """Geometric gains per row around the loop's coefficient scale."""
    scale = np.max(np.abs(loop.den), axis=-1) / np.maximum(np.max(np.abs(loop.num), axis=-1), 1e-300)
    exponents = np.linspace(COARSE_DECADES[0], COARSE_DECADES[1], COARSE_SAMPLES)
    return scale[:, None] * 10.0 ** exponents[None, :]


def _region_groups(limits: SpecLimits, points: np.ndarray, ts: np.ndarray):
    """Rows grouped by identical exact-region specs (one solver call per group).

    Under ``poles: dominant`` the damping bound is not part of the region
    (it would bound every pole, and cut the feasible set at a fast pole the
    dominant selection ignores): :func:`_dominant_damping_groups` solves it.
    """
    keys = {}
    exact_damping = limits.poles == "all"
    for row, p in enumerate(points):
        key = (
            float(np.nan_to_num(limits.min_damping[p], nan=0.0)) if exact_damping else 0.0,
            float(np.nan_to_num(limits.min_decay[p], nan=0.0)),
            float(np.nan_to_num(limits.max_pole_radius[p], nan=1.0)),
        )
        keys.setdefault(key, []).append(row)
    return keys


def _dominant_damping_groups(limits: SpecLimits, points: np.ndarray) -> dict[float, np.ndarray]:
    """Rows by ``min_damping`` judged on the dominant poles (:mod:`gainloom.design.dominant_sets`)."""
    if limits.poles == "all":
        return {}
    zeta = limits.min_damping[points]
    groups: dict[float, list[int]] = {}
    for row in np.flatnonzero(np.isfinite(zeta) & (zeta > 0)):
        groups.setdefault(float(zeta[row]), []).append(int(row))
    return {z: np.asarray(rows) for z, rows in groups.items()}


def _intersect(a: list[tuple[float, float]], b: list[tuple[float, float]]) -> list[tuple[float, float]]:
    out = []
    for lo1, hi1 in a:
        for lo2, hi2 in b:
            lo, hi = max(lo1, lo2), min(hi1, hi2)
            if lo < hi:
                out.append((lo, hi))
    return sorted(out)


def exact_feasible(
    loop: Loop, limits: SpecLimits, points: np.ndarray, cancelled: np.ndarray | None = None
) -> list[list[tuple[float, float]]]:
    """Exact feasible gain intervals of K-free loops (rows) at their points.

    Cancelled pole-zero pairs (``cancelled``, see :mod:`gainloom.design.cancel`)
    are divided out first: the pinned closed-loop pole is left out of the
    pole-region specs, as everywhere in the design layer.
    """
    if cancelled is None or not np.any(np.isfinite(cancelled)):
        return _exact_group(loop, limits, points)
    out: list = [None] * loop.points
    for rows, sub in deflate(loop, cancelled):
        for row, found in zip(rows, _exact_group(sub, limits, points[rows])):
            out[row] = found
    return out


def _exact_group(loop: Loop, limits: SpecLimits, points: np.ndarray) -> list[list[tuple[float, float]]]:
    """:func:`exact_feasible` for loops of one order.

    Intersection of the spec-region intervals (damping, decay, pole radius),
    the gain-margin band of the stable intervals (``GM = min(hi/K, K/lo)``,
    the smallest gain change up or down to instability) and ``0 < K <= max_gain``.
    """
    ts = np.asarray(loop.ts, float)
    delta = None if loop.delta_den is None else (loop.delta_num, loop.delta_den)
    # np.errstate: the interval solver divides complex infinities for roots
    # that leave through infinity (reported to its owner); the values are
    # handled there, the warning is noise
    gm_needed = np.isfinite(limits.min_gain_margin[points])
    stable: list = [[] for _ in range(loop.points)]
    if np.any(gm_needed):
        rows = np.flatnonzero(gm_needed)
        sub = loop.select(rows)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            found = stable_gain_intervals(
                sub.num, sub.den, ts=sub.ts, delta=None if delta is None else (sub.delta_num, sub.delta_den)
            )
        for row, intervals in zip(rows, found):
            stable[row] = intervals
    spec = [None] * loop.points
    for (zeta, decay, radius), rows in _region_groups(limits, points, ts).items():
        rows = np.asarray(rows)
        if zeta == 0.0 and decay == 0.0 and radius >= 1.0 and np.all(gm_needed[rows]):
            # no region spec: the region is the stable set, already solved for the gain margin
            for row in rows:
                spec[row] = [(iv.low, iv.high) for iv in stable[row]]
            continue
        region = SpecRegion(min_damping=zeta, min_decay=decay, max_pole_radius=None if radius >= 1 else radius)
        sub = loop.select(rows)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            found = spec_gain_intervals(
                sub.num, sub.den, region, ts=sub.ts, delta=None if delta is None else (sub.delta_num, sub.delta_den)
            )
        for row, intervals in zip(rows, found):
            spec[row] = [(iv.low, iv.high) for iv in intervals]
    out = []
    for row, p in enumerate(points):
        gm = limits.min_gain_margin[p]
        if np.isnan(gm):
            band = [(0.0, math.inf)]  # the spec intervals already imply stability
        else:
            factor = 10.0 ** (gm / 20.0)
            band = []
            for iv in stable[row]:
                lo = iv.low * factor
                hi = iv.high / factor
                if lo < hi:
                    band.append((lo, hi))
        top = limits.max_gain[p]
        cap = [(0.0, math.inf if np.isnan(top) else float(top) * (1 + 1e-15))]
        out.append(_intersect(_intersect(spec[row], band), cap))
    # last, and only where the other specs leave gains: the dominant damping
    # set is the costliest one (the damping spiral and two more circles)
    for zeta, rows in _dominant_damping_groups(limits, points).items():
        rows = rows[[bool(out[r]) for r in rows]]
        if rows.size == 0:
            continue
        found = dominant_damping_sets(loop.select(rows), zeta)
        for row, intervals in zip(rows, found):
            out[row] = _intersect(out[row], intervals)
    return out


def samples_in(intervals: list[tuple[float, float]], count: int) -> np.ndarray:
    """``count`` gains inside open intervals, including points next to each end."""
    if not intervals:
        return np.full(count, np.nan)
    per = max(2, count // len(intervals))
    gains = []
    for lo, hi in intervals:
        if not math.isfinite(hi):
            hi = max(lo, 1.0) * 1e6
        lo_in = lo * (1 + EDGE_INSET) if lo > 0 else hi * 1e-6
        hi_in = hi * (1 - EDGE_INSET)
        if lo_in >= hi_in:
            lo_in = hi_in = 0.5 * (lo + hi)
        gains.append(np.geomspace(lo_in, hi_in, per))
    gains = np.concatenate(gains)[:count]
    return np.concatenate([gains, np.full(count - gains.size, np.nan)])


def _poles_at(loop: Loop, gains: np.ndarray) -> np.ndarray:
    safe = np.where(np.isfinite(gains), gains, 0.0)
    poles = closed_loop_poles(loop, safe)
    return np.where(np.isfinite(gains)[..., None], poles, np.nan)


def choose_gains(
    plant: Loop,
    shapes: Shapes,
    limits: SpecLimits,
    objective: str,
    target: tuple[float, float] | None = None,
    exact_shapes: int = EXACT_SHAPES,
) -> Choice:
    """Pick shape and gain per point (see the module docstring).

    Parameters
    ----------
    plant : Loop
        Discrete plant, P points.
    shapes : Shapes
        S candidate shapes per point.
    limits : SpecLimits
    objective : str
        One of ``names.SWEEP_OBJECTIVES``.
    target : (damping, natural frequency rad/s), optional
        For ``nearest-target``.
    exact_shapes : int
        Shapes per point taken to the exact interval solver.

    Returns
    -------
    Choice
    """
    P, S = shapes.valid.shape
    rows_p = np.repeat(np.arange(P), S)

    def flat(a: np.ndarray) -> np.ndarray:
        return a.reshape((P * S,) + a.shape[2:])

    loops = shape_loops(plant, flat(shapes.zeros), flat(shapes.poles), rows_p)
    ts_rows = plant.ts[rows_p]

    # 1. coarse ranking
    cancelled = cancelled_zeros(flat(shapes.zeros), plant.den[rows_p])
    grid = _coarse_grid(loops)
    poles = mask_cancelled(closed_loop_poles(loops, grid), cancelled)
    ok, metrics = region_ok(poles, ts_rows, limits, rows_p)
    cap = limits.max_gain[rows_p][:, None]
    ok &= np.isnan(cap) | (grid <= cap)
    score = objective_values(poles, ts_rows[:, None], objective, target, limits.poles)
    score = np.where(ok & flat(shapes.valid)[:, None], score, -np.inf)
    best_per_shape = score.max(axis=-1).reshape(P, S)
    # Shapes feasible nowhere on the coarse grid (a narrow feasible gain
    # window falls between its samples) are ranked next by the best damping
    # they reach while stable, so the exact solver sees the promising ones
    # first and an infeasible point still gets a best attempt.
    stable = (metrics["radius"] < 1) & flat(shapes.valid)[:, None]
    reach = np.where(stable, metrics["damping"], -np.inf).max(axis=-1).reshape(P, S)
    order = np.lexsort((-reach, -best_per_shape), axis=-1)
    take = min(exact_shapes, S)
    samples = GainSamples(grid=grid.reshape(P, S, -1), metrics={k: v.reshape(P, S, -1) for k, v in metrics.items()},
                          valid=shapes.valid)

    result_gain = np.full(P, np.nan)
    result_shape = order[:, 0].copy()
    result_feasible = np.zeros(P, dtype=bool)
    result_sets: list = [[] for _ in range(P)]
    notes: list[list[str]] = [[] for _ in range(P)]
    pending = np.arange(P)
    rounds = 0
    # rounds over the ranked shapes: the best ``take`` first, the next ones
    # only for points where margins or the exact set ruled those out
    while pending.size and rounds * take < S and rounds < MAX_ROUNDS:
        cols = order[pending, rounds * take : (rounds + 1) * take]
        gain, shape_col, feasible, sets, round_notes = _resolve(
            loops, shapes, limits, objective, target, pending, cols, S, cancelled
        )
        for j, p in enumerate(pending):
            if feasible[j] or rounds == 0:
                result_gain[p] = gain[j]
                result_shape[p] = shape_col[j]
                result_feasible[p] = feasible[j]
                result_sets[p] = sets[j]
                notes[p] = list(round_notes[j])
            if feasible[j] and rounds > 0:
                notes[p].append(f"the {take * rounds} best-ranked shape(s) missed the margins; used shape rank {rounds * take + 1}+")
        pending = pending[~feasible]
        rounds += 1
    return Choice(
        shape=result_shape,
        gain=np.where(result_feasible, result_gain, np.nan),
        feasible=result_feasible,
        intervals=result_sets,
        notes=notes,
        samples=samples,
    )


def _resolve(loops, shapes, limits, objective, target, points, cols, S, cancelled):
    """Exact intervals, fine samples, refinement and margin checks for shape columns ``cols`` of ``points``."""
    n, take = cols.shape
    sel_rows = (points[:, None] * S + cols).ravel()
    sel_points = np.repeat(points, take)
    sub = loops.select(sel_rows)
    flat_valid = shapes.valid.reshape(-1)
    sub_cancelled = cancelled[sel_rows]
    feasible_sets = exact_feasible(sub, limits, sel_points, sub_cancelled)
    feasible_sets = [f if flat_valid[r] else [] for f, r in zip(feasible_sets, sel_rows)]

    fine = np.stack([samples_in(f, FINE_SAMPLES) for f in feasible_sets])
    asked = shapes.gain.reshape(-1)[sel_rows]
    fine = np.concatenate([fine, asked[:, None]], axis=1)  # the strategy's own gain, if any
    # The fine samples lie inside their sets by construction (samples_in);
    # only the strategy's own gain needs the membership test.
    asked_in = np.array([any(lo < g < hi for lo, hi in f) for f, g in zip(feasible_sets, asked)], dtype=bool)
    fine[:, -1] = np.where(asked_in, asked, np.nan)
    fine_poles = mask_cancelled(_poles_at(sub, fine), sub_cancelled)
    ok_f, _ = region_ok(fine_poles, sub.ts, limits, sel_points)
    ok_f &= np.isfinite(fine)
    score_f = objective_values(fine_poles, sub.ts[:, None], objective, target, limits.poles)
    score_f = np.where(ok_f, score_f, -np.inf)
    has_asked = np.isfinite(fine[:, -1]) & ok_f[:, -1]
    R = sel_rows.size
    # the strategy's own gain wins when it is feasible (dominant-pair)
    best_idx = np.where(has_asked, fine.shape[1] - 1, np.argmax(score_f, axis=1))
    best_score = score_f[np.arange(R), best_idx]
    by_point = best_score.reshape(n, take)
    pick = np.argmax(by_point, axis=1)
    row_pick = np.arange(n) * take + pick
    feasible = np.isfinite(by_point[np.arange(n), pick])
    gain = fine[row_pick, best_idx[row_pick]]
    refine = feasible & ~has_asked[row_pick]
    if np.any(refine):
        gain = gain.copy()
        gain[refine] = _golden(sub.select(row_pick[refine]), fine[row_pick[refine]], best_idx[row_pick[refine]],
                               [feasible_sets[r] for r in row_pick[refine]], limits, sel_points[row_pick[refine]],
                               objective, target, gain[refine], sub_cancelled[row_pick[refine]])

    # frequency-domain specs other than GM at the choice; fall back on the samples
    need = np.zeros(limits.points, dtype=bool)
    for name in FREQUENCY_SPECS:
        need |= ~np.isnan(getattr(limits, name))
    notes: list[list[str]] = [[] for _ in range(n)]
    check = np.flatnonzero(feasible & need[points])
    if check.size:
        good = frequency_specs_ok(sub.select(row_pick[check]), gain[check], limits, points[check])
        bad = check[~good]
        if bad.size:
            rows_b = (bad[:, None] * take + np.arange(take)[None, :]).ravel()
            gains_b = fine[rows_b]
            flat_rows = np.repeat(rows_b, gains_b.shape[1])
            flat_gain = gains_b.ravel()
            usable = np.isfinite(flat_gain) & ok_f[rows_b].ravel()
            owner = np.repeat(np.repeat(bad, take), gains_b.shape[1])
            chosen_row = np.full(bad.size, -1)
            chosen_gain = np.full(bad.size, np.nan)
            if np.any(usable):
                good_b = frequency_specs_ok(
                    sub.select(flat_rows[usable]), flat_gain[usable], limits, sel_points[flat_rows[usable]]
                )
                scores = score_f[rows_b].ravel()[usable]
                for j, q in enumerate(bad):
                    mask = (owner[usable] == q) & good_b
                    if np.any(mask):
                        k = np.flatnonzero(mask)[np.argmax(scores[mask])]
                        chosen_row[j] = flat_rows[usable][k]
                        chosen_gain[j] = flat_gain[usable][k]
            for j, q in enumerate(bad):
                if chosen_row[j] >= 0:
                    gain[q] = chosen_gain[j]
                    pick[q] = chosen_row[j] - q * take
                    notes[q].append(
                        "frequency-domain specs (PM/delay/Ms/crossover/bandwidth) ruled out the objective's best gain; "
                        "took the best sample meeting them"
                    )
                else:
                    feasible[q] = False
    row_final = np.arange(n) * take + pick
    shape_col = cols[np.arange(n), pick]
    return gain, shape_col, feasible, [feasible_sets[r] for r in row_final], notes


#: Specs judged on the frequency response at a chosen gain (not by the exact
#: pole-region intervals), with the ``Margins`` field each is read from
#: (``None``: the closed-loop bandwidth); the kind of bound is the registry's.
FREQUENCY_SPECS: dict[str, str | None] = {
    "min_phase_margin": "phase_margin",
    "min_delay_margin": "delay_margin",
    "max_sensitivity_peak": "sensitivity_peak",
    "min_crossover": "crossover",
    "max_crossover": "last_crossover",
    "min_bandwidth": None,
}


def frequency_specs_ok(loop: Loop, gains: np.ndarray, limits: SpecLimits, points: np.ndarray) -> np.ndarray:
    """True where every frequency-domain spec of ``FREQUENCY_SPECS`` holds for ``K = gains``.

    ``loop`` rows are K-free loops at the operating points ``points``.
    """
    margins = loop_margins(loop, gains)
    bandwidth = closed_loop_bandwidth(loop, gains) if np.any(np.isfinite(limits.min_bandwidth[points])) else None
    ok = np.ones(loop.points, dtype=bool)
    for name, field in FREQUENCY_SPECS.items():
        limit = getattr(limits, name)[points]
        if np.all(np.isnan(limit)):
            continue
        value = np.asarray(bandwidth if field is None else getattr(margins, field), float)
        ok &= np.isnan(limit) | ((value >= limit) if spec_info(name).bound == "min" else (value <= limit))
    return ok


def _golden(loop: Loop, samples: np.ndarray, index: np.ndarray, sets, limits, points, objective, target, start, cancelled):
    """Batched golden-section search of the objective between the neighbours of the best sample."""
    R = loop.points
    lo = np.empty(R)
    hi = np.empty(R)
    for r in range(R):
        row = samples[r]
        i = index[r]
        left = row[i - 1] if i > 0 and np.isfinite(row[i - 1]) else row[i]
        right = row[i + 1] if i + 1 < row.size and np.isfinite(row[i + 1]) else row[i]
        # stay inside the exact interval holding the best sample
        for a, b in sets[r]:
            if a < row[i] < b:
                left = max(left, a * (1 + EDGE_INSET)) if a > 0 else left
                right = min(right, b * (1 - EDGE_INSET))
        lo[r], hi[r] = min(left, row[i]), max(right, row[i])

    def score(g):
        poles = mask_cancelled(closed_loop_poles(loop, g[:, None]), cancelled)
        ok, _ = region_ok(poles, loop.ts, limits, points)
        value = objective_values(poles, loop.ts[:, None], objective, target, limits.poles)[:, 0]
        return np.where(ok[:, 0], value, -np.inf)

    best_gain = start.copy()
    best_value = score(best_gain)
    phi = (math.sqrt(5) - 1) / 2
    a, b = np.log(lo), np.log(hi)
    c = b - phi * (b - a)
    d = a + phi * (b - a)
    fc, fd = score(np.exp(c)), score(np.exp(d))
    for _ in range(GOLDEN_STEPS):
        left_better = fc >= fd
        b = np.where(left_better, d, b)
        a = np.where(left_better, a, c)
        new_c = b - phi * (b - a)
        new_d = a + phi * (b - a)
        c_next = np.where(left_better, new_c, d)
        d_next = np.where(left_better, c, new_d)
        fc_next = np.where(left_better, score(np.exp(new_c)), fd)
        fd_next = np.where(left_better, fc, score(np.exp(new_d)))
        c, d, fc, fd = c_next, d_next, fc_next, fd_next
    for g, f in ((np.exp(c), fc), (np.exp(d), fd), (lo, score(lo)), (hi, score(hi))):
        better = f > best_value
        best_gain = np.where(better, g, best_gain)
        best_value = np.where(better, f, best_value)
    return best_gain

"""The crossover objectives on a schedule: back-off, worst-case corners, certificate.

:func:`choose_by_crossover` runs :func:`gainloom.design.crossover.crossover_design`
on the tightened specs (the design back-off), then on the written specs at the
points where that found nothing, so the back-off never turns a feasible point
into an infeasible one.  With ``tolerances: {design: worst-case}`` every
tolerance corner's plant joins the search.  Where even the written specs are
met by no controller of the whole space, :func:`certify` names the binding
spec and its best value over the space, and the table holds that compromise.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..lti.loop import Loop
from ..spec_registry import spec_info
from .crossover import CrossoverChoice, crossover_design, ranked_alternatives, shape_space
from .search import Shapes
from .spec_limits import SpecLimits

__all__ = ["CrossoverRun", "choose_by_crossover", "uses_crossover", "crossover_target", "step_fallback", "tightened_limits",
           "tolerance_plants", "step_verdicts"]

#: Margin back-off of the crossover objectives (dB, deg), smaller than the
#: general one (design/spec_limits.py BACKOFF: 0.5 dB, 0.5 deg).  These objectives
#: put a margin on its bound at every point by design, so the back-off costs
#: crossover one for one (0.5 dB of gain margin is 6 % of loop gain; on the
#: benchmark current loop the general back-off cost 3.5 % of crossover).  Our
#: choice (no source): 0.1 dB and 0.1 deg clear float32 rounding (~1e-7
#: relative) and the gain-set edges (bisected) by far.  Between points the
#: table is judged by the between-points check; where a margin moves fast
#: with the operating point (the benchmark boost loop) no back-off of this
#: size saves a sparse grid, `table.refine` inserts the points it needs.
MARGIN_BACKOFF = (0.1, 0.1)

#: Bisection steps on the binding spec's limit (best value to ~1 % of its range).
CERTIFY_STEPS = 7

#: Specs the certificate relaxes, with the relaxed end of their range:
#: lower bounds ("at least") go down to ``low``; upper bounds ("at most") up
#: to ``factor`` times the written limit (``max_pole_radius`` up to 1).
_RELAX_ENDS = (
    ("min_gain_margin", 0.0),
    ("min_phase_margin", 0.0),
    ("min_delay_margin", 0.0),
    ("max_sensitivity_peak", 100.0),
    ("min_crossover", 0.0),
    ("max_crossover", 100.0),
    ("min_bandwidth", 0.0),
    ("min_damping", 0.0),
    ("min_decay", 0.0),
    ("max_pole_radius", None),
    ("max_gain", 100.0),
)
_RELAX = tuple((name, "at least" if spec_info(name).bound == "min" else "at most", end) for name, end in _RELAX_ENDS)


def crossover_target(controller) -> float | None:
    """The target crossover (rad/s) of ``nearest-target``, or None."""
    target = getattr(controller, "target", None)
    return None if target is None else getattr(target, "crossover", None)


def uses_crossover(controller, objective: str) -> bool:
    """True when the objective is judged on the crossover (this module's search)."""
    from ..names import CROSSOVER_OBJECTIVES

    return objective in CROSSOVER_OBJECTIVES or (objective == "nearest-target" and crossover_target(controller) is not None)


@dataclass(frozen=True, eq=False)
class CrossoverRun:
    """Result per point: shapes (S = 1), gain (compromise where infeasible), verdicts and notes."""

    shapes: Shapes
    gain: np.ndarray
    feasible: np.ndarray
    intervals: list
    crossover: np.ndarray
    notes: list
    binding: dict


def _with(limits: SpecLimits, name: str, rows: np.ndarray, value: np.ndarray) -> SpecLimits:
    """Limits with spec ``name`` set to ``value`` at ``rows`` (a no-op for a spec the limits lack)."""
    if not hasattr(limits, name):
        return limits
    array = np.array(getattr(limits, name), float)
    array[rows] = value
    return replace(limits, **{name: array})


def _merge(first: CrossoverChoice, second: CrossoverChoice, rows: np.ndarray) -> CrossoverChoice:
    """``first`` with the points ``rows`` taken from ``second`` (which holds only those points)."""
    def put(a, b):
        out = np.array(a, copy=True)
        out[rows] = b
        return out

    shapes = Shapes(*(put(getattr(first.shapes, f), getattr(second.shapes, f)) for f in ("zeros", "poles", "valid", "gain", "params")))
    intervals = list(first.intervals)
    for j, r in enumerate(rows):
        intervals[r] = second.intervals[j]
    return CrossoverChoice(
        shapes=shapes, gain=put(first.gain, second.gain), feasible=put(first.feasible, second.feasible),
        intervals=intervals, crossover=put(first.crossover, second.crossover), rates=put(first.rates, second.rates),
    )


def tolerance_plants(sched, points: np.ndarray) -> tuple[Loop, ...]:
    """The sampled plant at every tolerance sample under ``design: worst-case``, else none."""
    if sched.tolerances.design != "worst-case" or not sched.tolerances.parameters:
        return ()
    from .engine import sampled_plant
    from .table_checks import tolerance_scales

    return tuple(sampled_plant(sched, points, scale) for scale in tolerance_scales(sched.tolerances))


def _select(loop: Loop, rows: np.ndarray) -> Loop:
    return loop.select(rows)


def choose_by_crossover(sched, points: np.ndarray, plant: Loop, limits: SpecLimits, objective: str) -> CrossoverRun:
    """Design every point with a crossover objective (see the module docstring)."""
    controller = sched.controller
    corners = tolerance_plants(sched, points)
    kwargs = dict(target_crossover=crossover_target(controller), derivative_filter=controller.derivative_filter)

    P = plant.points
    ruled_out: set[int] = set()

    def run(rows: np.ndarray, lim: SpecLimits) -> CrossoverChoice:
        """Design ``rows``: with the integral and tracking rules, then without them where that finds nothing."""
        def search(sub: np.ndarray, rules: bool) -> CrossoverChoice:
            return crossover_design(
                _select(plant, sub), controller.structure, lim.select(sub), objective, points[sub],
                corners=tuple(_select(c, sub) for c in corners), rules=rules, **kwargs,
            )

        choice = search(rows, True)
        miss = np.flatnonzero(~choice.feasible)
        if miss.size:
            bare = search(rows[miss], False)
            choice = _merge(choice, bare, miss)
            ruled_out.update(int(rows[m]) for m in miss[bare.feasible])
        return choice

    everything = np.arange(P)
    choice = run(everything, tightened_limits(limits))
    notes: list[list[str]] = [[] for _ in range(P)]
    retry = np.flatnonzero(~choice.feasible)
    if retry.size:
        choice = _merge(choice, run(retry, limits), retry)
        for p in retry[choice.feasible[retry]]:
            notes[p].append("met the specs only without the design back-off (on the spec boundary)")
    if corners:
        for p in np.flatnonzero(choice.feasible):
            notes[p].append(f"designed for every spec at each of {len(corners)} tolerance samples (worst case)")
    rule = (
        "integral action slower than crossover/100 (the integral floor is dropped here)"
        if controller.structure in ("pi", "pid")
        else "a loop gain at zero frequency below 1 (static error above 50 %: it will not track well)"
    )
    for p in sorted(ruled_out):
        if choice.feasible[p]:
            notes[p].append(f"met the specs only with {rule}")
    binding: dict = {}
    gain = choice.gain.copy()
    failed = np.flatnonzero(~choice.feasible)
    if failed.size:
        found, compromise = certify(run, plant, limits, failed, controller.structure)
        binding.update(found)
        choice = _merge(choice, compromise, failed)
        gain = choice.gain.copy()
    return CrossoverRun(
        shapes=choice.shapes, gain=gain, feasible=~np.isin(everything, failed), intervals=choice.intervals,
        crossover=choice.crossover, notes=notes, binding=binding,
    )


def tightened_limits(limits: SpecLimits) -> SpecLimits:
    """The specs the crossover objectives aim at: the design back-off with ``MARGIN_BACKOFF`` margins."""
    gm, pm = MARGIN_BACKOFF
    return replace(limits.tightened(), min_gain_margin=limits.min_gain_margin + gm,
                   min_phase_margin=limits.min_phase_margin + pm)


def _relaxed_end(limit: np.ndarray, kind: str, end: float | None) -> np.ndarray:
    if end is None:  # max_pole_radius
        return np.ones_like(limit)
    return np.full_like(limit, end) if kind == "at least" else limit * end


def certify(run, plant: Loop, limits: SpecLimits, rows: np.ndarray, structure: str):
    """Binding spec and its best value over the whole space at infeasible ``rows``.

    Each spec present is removed in turn (the others kept as written); where
    that makes the point feasible, the spec's limit is bisected between its
    relaxed end and the written value: the last feasible limit is the best
    value of that spec over every shape and gain that meets all other specs.
    The first such spec (report order) is named binding; the design at its
    best value fills the table.  Where no single spec frees the point, all of
    them are relaxed together the same way.

    Returns
    -------
    (dict, CrossoverChoice)
        ``{point: (spec name, note)}`` and the compromise designs of ``rows``.
    """
    low, high = shape_space(_select(plant, rows))
    space = f"shape rates {np.exp(low).min():.3g} .. {np.exp(high).max():.3g} rad/s, every gain"
    found: dict = {}
    picked: list = [None] * rows.size
    pending = np.arange(rows.size)
    present = [(n, k, e) for n, k, e in _RELAX if hasattr(limits, n) and np.any(np.isfinite(getattr(limits, n)[rows]))]
    for name, kind, end in present:
        if pending.size == 0:
            break
        sub = rows[pending]
        written = np.asarray(getattr(limits, name), float)[sub]
        best = run(sub, _with(limits, name, sub, np.nan))
        ok = best.feasible & np.isfinite(written)
        if not np.any(ok):
            continue
        good = np.where(ok, _relaxed_end(written, kind, end), np.nan)
        bad = written.copy()
        for _ in range(CERTIFY_STEPS):
            trial = np.where(ok, _midpoint(good, bad, kind, name), written)
            attempt = run(sub, _with(limits, name, sub, trial))
            move = ok & attempt.feasible
            good = np.where(move, trial, good)
            bad = np.where(ok & ~attempt.feasible, trial, bad)
            if np.any(move):
                best = _merge(best, _pick(attempt, move), np.flatnonzero(move))
        for j in np.flatnonzero(ok):
            found[int(sub[j])] = (name, _text(name, kind, good[j], written[j], structure, space))
            picked[pending[j]] = _pick(best, np.arange(sub.size) == j)
        pending = pending[~ok]
    if pending.size:
        sub = rows[pending]
        relaxed = limits
        for name, kind, end in present:
            written = np.asarray(getattr(limits, name), float)[sub]
            relaxed = _with(relaxed, name, sub, np.where(np.isfinite(written), _relaxed_end(written, kind, end), np.nan))
        attempt = run(sub, relaxed)
        for j, p in enumerate(sub):
            picked[pending[j]] = _pick(attempt, np.arange(sub.size) == j)
            found[int(p)] = (
                present[0][0] if present else "stable",
                f"no {structure} in the whole searched space ({space}) meets every spec, and no single spec "
                "is binding alone: they conflict together; the table holds the design with every spec relaxed "
                "to its loosest end (infeasible, a compromise only)",
            )
    return found, _stack(picked)


def _pick(choice: CrossoverChoice, mask: np.ndarray) -> CrossoverChoice:
    """The entries of ``choice`` at ``mask`` as a choice of ``mask.sum()`` points."""
    rows = np.flatnonzero(mask)
    shapes = Shapes(*(getattr(choice.shapes, f)[rows] for f in ("zeros", "poles", "valid", "gain", "params")))
    return CrossoverChoice(
        shapes=shapes, gain=choice.gain[rows], feasible=choice.feasible[rows],
        intervals=[choice.intervals[r] for r in rows], crossover=choice.crossover[rows], rates=choice.rates[rows],
    )


def _stack(parts: list[CrossoverChoice]) -> CrossoverChoice:
    """One choice from single-point choices, in order."""
    cat = lambda f: np.concatenate([getattr(c.shapes, f) for c in parts])  # noqa: E731
    return CrossoverChoice(
        shapes=Shapes(*(cat(f) for f in ("zeros", "poles", "valid", "gain", "params"))),
        gain=np.concatenate([c.gain for c in parts]), feasible=np.concatenate([c.feasible for c in parts]),
        intervals=sum((c.intervals for c in parts), []), crossover=np.concatenate([c.crossover for c in parts]),
        rates=np.concatenate([c.rates for c in parts]),
    )


def _midpoint(good: np.ndarray, bad: np.ndarray, kind: str, name: str) -> np.ndarray:
    if kind == "at most" and name != "max_pole_radius":
        return np.sqrt(good * bad)
    return 0.5 * (good + bad)


def _text(name: str, kind: str, best: float, written: float, structure: str, space: str) -> str:
    spec = spec_info(name)
    unit = spec.unit_suffix
    relation = ">=" if kind == "at least" else "<="
    return (
        f"no {structure} in the whole searched space ({space}) meets every spec; {name} is binding: "
        f"with every other spec met, the best {spec.label} over that space is {best:.4g}{unit} "
        f"(spec {relation} {written:.6g}{unit}); the table holds that compromise (infeasible)"
    )


#: Most (shape, gain) candidates simulated per point by :func:`step_fallback`.
STEP_CANDIDATES = 60


def step_fallback(sched, points: np.ndarray, plant: Loop, limits: SpecLimits, objective: str, failing: np.ndarray) -> dict:
    """The best-ranked (shape, gain) over the whole space whose step response passes.

    For points whose crossover design misses overshoot or settling time
    (step-response specs are not gain sets): the coarse shapes' best gains and
    fractions of them (:func:`gainloom.design.crossover.ranked_alternatives`)
    are simulated in rank order, all points and candidates in one batch.
    Under ``design: worst-case`` a candidate must pass every spec at every
    tolerance sample too.

    Returns
    -------
    dict
        ``{point: (zeros, poles, params, gain, rank, count)}`` for the points
        where a candidate passes every spec.
    """
    from .analysis import analyse
    from .structures import LocusForm, coefficients_from_locus

    controller = sched.controller
    rows = np.asarray(failing)
    corners = tolerance_plants(sched, points[rows])
    shapes, gains = ranked_alternatives(
        plant.select(rows), controller.structure, tightened_limits(limits).select(rows), objective,
        target_crossover=crossover_target(controller), derivative_filter=controller.derivative_filter,
        corners=corners,
    )
    count = min(STEP_CANDIDATES, gains.shape[1])
    gains = gains[:, :count]
    j, k = np.nonzero(np.isfinite(gains))
    if j.size == 0:
        return {}
    form = LocusForm(gain=gains[j, k], zeros=shapes.zeros[j, k], poles=shapes.poles[j, k])
    coefficients = coefficients_from_locus(controller.structure, form)
    trial = analyse(plant.select(rows[j]), controller.structure, coefficients, limits.select(rows[j]))
    passed = trial.passed.copy()
    for corner in corners:  # worst case: every spec at every tolerance sample
        passed &= analyse(corner.select(j), controller.structure, coefficients, limits.select(rows[j])).passed
    out = {}
    for n in np.flatnonzero(passed):  # j, k ascend: the first passing one per point is the best ranked
        p = int(rows[j[n]])
        if p not in out:
            out[p] = (shapes.zeros[j[n], k[n]], shapes.poles[j[n], k[n]], shapes.params[j[n], k[n]],
                      float(gains[j[n], k[n]]), int(k[n]) + 1, int(np.count_nonzero(j == j[n])))
    return out


def step_verdicts(sched, points: np.ndarray, plant: Loop, structure: str, coefficients: dict, limits: SpecLimits,
                  nominal) -> tuple[np.ndarray, np.ndarray]:
    """Where overshoot and settling hold: on the nominal plant, and at every tolerance sample of a worst-case design.

    ``nominal`` is the analysis of ``coefficients`` on ``plant``.  Returns
    ``(nominal_ok, corners_ok)``, boolean per point (``corners_ok`` all true
    without worst-case corners or step-response specs).
    """
    from .analysis import analyse

    def ok(analysis) -> np.ndarray:
        return analysis.verdicts["max_overshoot"] & analysis.verdicts["max_settling_time"]

    corners_ok = np.ones(plant.points, dtype=bool)
    asked = np.any(np.isfinite(limits.max_overshoot)) or np.any(np.isfinite(limits.max_settling_time))
    for corner in tolerance_plants(sched, points) if asked else ():
        corners_ok &= ok(analyse(corner, structure, coefficients, limits, frequency=False))
    return ok(nominal), corners_ok

"""``design`` and ``verify``: the whole scheduler run on a schedule.

The design is done on the *sampled* loop: the schedule's continuous plant
discretised at each point with its hold, sample period and computation delay
(:func:`gainloom.lti.discretize.discretize_loop`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import DesignError, InputError
from ..lti.discretize import discretize_loop
from ..lti.filters import cascade, with_filter
from ..lti.loop import Loop
from ..names import (
    CROSSOVER_OBJECTIVES,
    DESIGN_STRATEGIES,
    SWEEP_OBJECTIVES,
    TUNING_RULES,
    unknown_name_message,
)
from .analysis import PointAnalysis, analyse
from .crossover_job import choose_by_crossover, step_fallback, step_verdicts, tightened_limits, uses_crossover
from .diagnose import compromise, diagnose
from .fallbacks import (
    boundary_warnings,
    compromise_warnings,
    shortfall,
    strategy_gain_warning,
    target_warnings,
)
from .filter_notes import auto_notch_report, resonance_note
from .measured_check import check_on_data, merge_data_verdict
from .results import DesignResult, DesignSettings, VerifyResult
from .search import OBJECTIVE_TEXT, Choice, GainSamples, choose_gains, objective_values, samples_in
from .spec_limits import SAMPLING_FRACTION, SpecLimits
from .strategies import make_shapes
from .structures import LocusForm, coefficients_from_locus
from .table import FilterTable, GainTable, TableAxis
from .tuning_rules import rule_shapes

__all__ = ["PointDesign", "Progress", "design", "design_points", "limits_at", "sampled_plant", "verify"]

#: Candidates re-tried on the step response when the chosen design's
#: overshoot or settling time misses its spec.
STEP_RETRIES = 24

Progress = Callable[[str, int, int], None]


def load_for_design(schedule: Any):
    from ..schedule import Schedule, load_schedule

    if isinstance(schedule, Schedule):
        return schedule
    if isinstance(schedule, (str, Path)):
        return load_schedule(schedule)
    raise InputError(f"expected a Schedule or a path to a schedule file; got {type(schedule).__name__}")


def sampled_plant(sched, points: np.ndarray, scale: dict[str, float] | None = None,
                  filters: tuple[np.ndarray, np.ndarray] | None = None) -> Loop:
    """The fixed part of the loop at ``points``: the discretised plant (hold,
    sample period, computation delay) followed by the ``controller.filters``.

    Every analysis multiplies the controller into this loop, so the filters
    are in the locus, margins, intervals, specs, between-point and tolerance
    checks through this one function.  The filters are evaluated at the
    nominal parameters whatever ``scale`` says (the firmware's filter does
    not follow a tolerance); the plant is scaled.  A schedule with a
    ``plant_sampler`` (the outer loop of a cascade) gets its plant from it:
    the inner closed loop as the outer loop samples it.  ``filters`` (the
    cascade ``(num, den)`` in ``z`` per point, :func:`table_filters`)
    replaces the schedule's sections: the filter as a gain table stores it.
    """
    points = np.asarray(points, dtype=float)
    models = None
    if sched.plant_sampler is not None:
        plant = sched.plant_sampler(points, scale)
    else:
        models = sched.evaluate(points, scale=scale)
        plant = discretize_loop(
            models.plant, models.sample_period, sched.sampling.method, delay=models.delay,
            prewarp=sched.sampling.prewarp,
        )
    if filters is not None:
        return with_filter(plant, *filters)
    values = sched.filters_at(points, None if scale else models)
    if values is None:
        return plant
    num, den = values.discrete(plant.ts)
    return with_filter(plant, num, den)


def table_filters(table: GainTable) -> tuple[np.ndarray, np.ndarray] | None:
    """The table's filter sections as one cascade in ``z`` per grid point (grid order), or ``None``."""
    if not table.filters:
        return None
    sections = []
    for section in table.filters:
        c = {name: grid.ravel() for name, grid in section.coefficients.items()}
        sections.append((np.stack([c["b0"], c["b1"], c["b2"]], axis=-1),
                         np.stack([np.ones_like(c["a1"]), c["a1"], c["a2"]], axis=-1)))
    return cascade(sections, int(np.prod(table.shape)))


def limits_at(sched, points: np.ndarray) -> SpecLimits:
    """Specs per point (overrides resolved)."""
    points = np.asarray(points, dtype=float)
    return SpecLimits.from_values(sched.spec_values(points), points.shape[0], poles=sched.specs.poles)


def _objective(controller) -> str:
    if controller.strategy == "shape-sweep":
        return controller.objective or "fastest"
    if controller.strategy == "dominant-pair":
        return "nearest-target"
    return "fastest"


def _target(controller) -> tuple[float, float] | None:
    if controller.target is None or controller.target.damping is None:
        return None
    return (float(controller.target.damping), float(controller.target.natural_frequency))


@dataclass(frozen=True, eq=False)
class PointDesign:
    """Per-point design at arbitrary operating points (before table checks).

    ``status`` follows from ``analysis``, so a design given new coefficients
    (:meth:`reanalysed`) cannot keep the verdict of the old ones.
    """

    points: np.ndarray
    plant: Loop
    limits: SpecLimits
    coefficients: dict[str, np.ndarray]
    analysis: PointAnalysis
    feasible: np.ndarray
    binding: tuple[str | None, ...]
    notes: tuple[tuple[str, ...], ...]
    intervals: list
    shape_params: np.ndarray
    #: per point: where the choice is not what the strategy or objective asked
    #: for (:mod:`gainloom.design.fallbacks`; targets, back-off and compromises
    #: are added on the final table by :func:`design`)
    warnings: tuple[tuple[str, ...], ...] = ()

    @property
    def status(self) -> tuple[str, ...]:
        """``"pass"`` or ``"fail"`` per point, from the analysis."""
        return tuple("pass" if ok else "fail" for ok in self.analysis.passed)

    def reanalysed(self, coefficients: dict[str, np.ndarray], analysis: PointAnalysis) -> PointDesign:
        """The same design with other coefficients and their analysis (everything else kept)."""
        return replace(self, coefficients=coefficients, analysis=analysis)


def _coefficients(structure: str, shapes, shape_index: np.ndarray, gain: np.ndarray) -> dict[str, np.ndarray]:
    P = shape_index.size
    rows = np.arange(P)
    form = LocusForm(gain=gain, zeros=shapes.zeros[rows, shape_index], poles=shapes.poles[rows, shape_index])
    return coefficients_from_locus(structure, form)


def _step_retry(plant, structure, shapes, choice: Choice, coefficients, limits, objective, target, failing):
    """Re-pick among sampled gains of the chosen shape where the step response fails."""
    notes = {}
    for p in failing:
        intervals = choice.intervals[p]
        if not intervals:
            continue
        gains = samples_in(intervals, STEP_RETRIES)
        gains = gains[np.isfinite(gains)]
        if gains.size == 0:
            continue
        s = int(choice.shape[p])
        count = gains.size
        sub_plant = plant.select(np.full(count, p))
        form = LocusForm(gain=gains, zeros=np.broadcast_to(shapes.zeros[p, s], (count,) + shapes.zeros.shape[2:]),
                         poles=np.broadcast_to(shapes.poles[p, s], (count,) + shapes.poles.shape[2:]))
        coefs = coefficients_from_locus(structure, form)
        trial = analyse(sub_plant, structure, coefs, limits.select(np.full(count, p)))
        good = np.flatnonzero(trial.passed)
        if good.size == 0:
            continue
        if objective in CROSSOVER_OBJECTIVES or target is None and objective == "nearest-target":
            # crossover objectives: the gain nearest the search's choice (crossover moves with it)
            scores = -np.abs(np.log(gains[good] / choice.gain[p]))
        else:
            scores = objective_values(trial.poles_z[good], trial.sample_period[good], objective, target, limits.poles)
        k = good[np.argmax(scores)]
        for name in coefficients:
            coefficients[name][p] = coefs[name][k]
        notes[p] = (
            f"step response of the objective's best gain missed overshoot/settling; "
            f"took K = {gains[k]:.6g}, the best of {count} sampled gains that passes"
        )
    return notes


def _step_whole_space(sched, points, plant, structure, shapes, coefficients, limits, objective, failing) -> dict:
    """Crossover designs missing overshoot/settling: the best (shape, gain) of the whole space that passes."""
    found = step_fallback(sched, points, plant, limits, objective, failing)
    notes = {}
    for p, (zeros, poles, params, gain, rank, count) in found.items():
        shapes.zeros[p, 0], shapes.poles[p, 0], shapes.params[p, 0] = zeros, poles, params
        form = LocusForm(gain=np.array([gain]), zeros=zeros[None], poles=poles[None])
        for name, value in coefficients_from_locus(structure, form).items():
            coefficients[name][p] = value[0]
        notes[p] = (
            f"the {objective} design missed overshoot/settling (step-response specs are not gain sets); took "
            f"K = {gain:.6g}, candidate {rank} of {count} (shape, gain) pairs over the whole space in objective "
            "order, the first whose step response passes"
        )
    return notes


#: Points per work unit of the per-point search.
CHUNK = 64


def _choose_chunk(args) -> Choice:
    """Search one chunk of points: tightened specs first, the written ones where that finds nothing."""
    sub_plant, sub_shapes, sub_limits, objective, target = args
    first = choose_gains(sub_plant, sub_shapes, sub_limits.tightened(), objective, target)
    retry = np.flatnonzero(~first.feasible)
    if retry.size:
        second = choose_gains(sub_plant, sub_shapes, sub_limits, objective, target)
        first = _merge_choice(first, second, retry)
    return first


def worker_count(chunks: int) -> int:
    """Worker processes for the search: ``GAINLOOM_WORKERS`` or the CPU count (max 8); 1 for one chunk."""
    import os

    if chunks <= 1:
        return 1
    text = os.environ.get("GAINLOOM_WORKERS")
    if text is not None:
        try:
            return max(1, int(text))
        except ValueError:
            raise InputError(f"GAINLOOM_WORKERS must be an integer; got {text!r}") from None
    return max(1, min(os.cpu_count() or 1, 8, chunks))


def _run_chunks(chunks, progress, total) -> list[Choice]:
    """Run the chunks in order, in worker processes (fork) when there are several.

    The exact interval solver is Python-heavy per loop, so threads would not
    help; forked processes share the loaded modules and return plain data.
    The result does not depend on the number of workers.
    """
    import multiprocessing

    workers = worker_count(len(chunks))
    done = 0
    results: list[Choice] = []
    if workers > 1 and "fork" in multiprocessing.get_all_start_methods():
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("fork")) as pool:
            for chunk, result in zip(chunks, pool.map(_choose_chunk, chunks)):
                results.append(result)
                done += chunk[0].points
                if progress is not None:
                    progress("design", done, total)
        return results
    for chunk in chunks:
        results.append(_choose_chunk(chunk))
        done += chunk[0].points
        if progress is not None:
            progress("design", done, total)
    return results


def _merge_choice(first: Choice, second: Choice, rows: np.ndarray) -> Choice:
    """``first`` with the entries at ``rows`` taken from ``second``."""
    shape, gain, feasible = first.shape.copy(), first.gain.copy(), first.feasible.copy()
    intervals, notes = list(first.intervals), [list(n) for n in first.notes]
    for r in rows:
        shape[r], gain[r], feasible[r] = second.shape[r], second.gain[r], second.feasible[r]
        intervals[r] = second.intervals[r]
        notes[r] = list(second.notes[r])
        if second.feasible[r]:
            notes[r].append("met the specs only without the design back-off (on the spec boundary)")
    samples = first.samples.with_rows(second.samples, rows)
    return Choice(shape=shape, gain=gain, feasible=feasible, intervals=intervals, notes=notes, samples=samples)


def _sweep_choice(plant, shapes, limits, objective, target, controller, notes, progress):
    """The locus-based choice (pole-region objectives), per chunk of points; fills ``notes``."""
    P = plant.points
    chunks = []
    for start in range(0, P, CHUNK):
        rows = np.arange(start, min(P, start + CHUNK))
        sub_shapes = type(shapes)(
            zeros=shapes.zeros[rows], poles=shapes.poles[rows], valid=shapes.valid[rows],
            gain=shapes.gain[rows], params=shapes.params[rows],
        )
        chunks.append((plant.select(rows), sub_shapes, limits.select(rows), objective, target))
    choices = _run_chunks(chunks, progress, P)
    choice = Choice(
        shape=np.concatenate([c.shape for c in choices]),
        gain=np.concatenate([c.gain for c in choices]),
        feasible=np.concatenate([c.feasible for c in choices]),
        intervals=[item for c in choices for item in c.intervals],
        notes=[item for c in choices for item in c.notes],
        samples=GainSamples.concatenate([c.samples for c in choices]),
    )
    for p in range(P):
        notes[p].extend(choice.notes[p])
    if controller.strategy == "dominant-pair" or controller.strategy in TUNING_RULES:
        asked = shapes.gain[np.arange(P), np.maximum(choice.shape, 0)]
        moved = choice.feasible & np.isfinite(asked) & ~np.isclose(choice.gain, asked, rtol=1e-12)
        own = "magnitude-condition" if controller.strategy == "dominant-pair" else controller.strategy
        how = "nearest the target" if controller.strategy == "dominant-pair" else "the fastest (objective fastest) with the rule's zero"
        for p in np.flatnonzero(moved):
            notes[p].append(
                f"the {own} gain K = {asked[p]:.6g} misses a spec; "
                f"chose K = {choice.gain[p]:.6g} {how} inside the feasible set"
            )
    # infeasible points: best compromise so the table stays complete
    shape_index = choice.shape.copy()
    gain = choice.gain.copy()
    infeasible = np.flatnonzero(~choice.feasible)
    if infeasible.size:
        s_best, k_best = compromise(choice.samples, limits, infeasible)
        shape_index[infeasible] = s_best
        gain[infeasible] = k_best
    return choice, shape_index, gain


def _certified(certified: dict, analysis: PointAnalysis, failed: np.ndarray) -> dict:
    """Binding spec and note of failed points of a crossover design.

    Points the search certified infeasible carry its note; a point the search
    found feasible that fails the re-check names the first spec it fails.
    """
    from ..spec_registry import SPEC_ORDER

    out = {}
    for p in failed:
        p = int(p)
        if p in certified:
            out[p] = certified[p]
            continue
        name = next((n for n in SPEC_ORDER if n in analysis.verdicts and not analysis.verdicts[n][p]), "stable")
        out[p] = (name, f"the search's choice fails {name} on the re-check with the written specs")
    return out


def design_points(sched, points: np.ndarray, progress: Progress | None = None) -> PointDesign:
    """Design gains at arbitrary operating points of a schedule.

    Parameters
    ----------
    sched : Schedule
    points : ndarray, shape (P, n_axes)
    progress : callable, optional
        ``progress(stage, done, total)`` for a progress display.

    Returns
    -------
    PointDesign
    """
    controller = sched.controller
    if controller.strategy not in DESIGN_STRATEGIES:
        raise DesignError(unknown_name_message("design strategy", controller.strategy, DESIGN_STRATEGIES))
    objective = _objective(controller)
    if objective not in SWEEP_OBJECTIVES:
        raise DesignError(unknown_name_message("objective", objective, SWEEP_OBJECTIVES))
    target = _target(controller)
    if controller.compare_continuous and uses_crossover(controller, objective):
        raise DesignError(
            f"compare_continuous is not available with objective {objective!r} (crossover objectives); "
            "remove compare_continuous or use a pole-region objective"
        )
    if sched.tolerances.design == "worst-case" and not uses_crossover(controller, objective):
        raise DesignError(
            "tolerances.design worst-case needs objective max-crossover or nearest-target with a crossover "
            f"target; objective is {objective!r} (use design: check, the default)"
        )
    points = np.asarray(points, dtype=float)
    P = points.shape[0]
    plant = sampled_plant(sched, points)
    limits = limits_at(sched, points)
    structure = controller.structure
    notes: list[list[str]] = [[] for _ in range(P)]
    warnings: list[list[str]] = [[] for _ in range(P)]
    certified: dict | None = None
    if uses_crossover(controller, objective):
        if progress is not None:
            progress("design", 0, P)
        run = choose_by_crossover(sched, points, plant, limits, objective)
        shapes, certified = run.shapes, run.binding
        shape_index = np.zeros(P, dtype=int)
        gain = run.gain
        choice = Choice(shape=shape_index, gain=np.where(run.feasible, gain, np.nan), feasible=run.feasible,
                        intervals=run.intervals, notes=run.notes, samples=GainSamples.empty(P))
        for p in range(P):
            notes[p].extend(run.notes[p])
            # a rule of the search dropped to meet the specs: the choice is not what the rules ask for
            warnings[p].extend(t for t in run.notes[p] if t.startswith("met the specs only with "))
        if progress is not None:
            progress("design", P, P)
    else:
        sweep = None if controller.sweep is None else (tuple(controller.sweep.range), int(controller.sweep.count))
        if controller.strategy in TUNING_RULES:
            shapes = rule_shapes(controller.strategy, sched.evaluate(points), sched.sampling.method,
                                 lambda p: sched.describe_point(points[p]))
        else:
            shapes = make_shapes(
                plant,
                structure,
                controller.strategy,
                zero_on=controller.zero_on,
                sweep=sweep,
                target=target,
                derivative_filter=controller.derivative_filter,
            )
        choice, shape_index, gain = _sweep_choice(plant, shapes, limits, objective, target, controller, notes, progress)
        if controller.strategy == "dominant-pair" or controller.strategy in TUNING_RULES:
            for p, text in _own_gain_warnings(plant, structure, shapes, choice, limits, controller.strategy).items():
                warnings[p].append(text)
    coefficients = _coefficients(structure, shapes, shape_index, gain)
    analysis = analyse(plant, structure, coefficients, limits)
    if certified is not None:
        nominal_ok, corners_ok = step_verdicts(sched, points, plant, structure, coefficients, limits, analysis)
    else:
        nominal_ok = analysis.verdicts["max_overshoot"] & analysis.verdicts["max_settling_time"]
        corners_ok = np.ones(P, dtype=bool)
    step_fail = np.flatnonzero(choice.feasible & ~(nominal_ok & corners_ok))
    if step_fail.size and certified is not None:
        retry_notes = _step_whole_space(sched, points, plant, structure, shapes, coefficients, limits, objective, step_fail)
        for p, text in retry_notes.items():
            notes[p].append(text)
            missed = [n for n in ("max_overshoot", "max_settling_time") if not analysis.verdicts[n][p]]
            where = shortfall(analysis, p, missed) if missed else "overshoot/settling at a tolerance sample (worst case)"
            warnings[p].append(f"the {objective} design fails {where}; {text}")
        if retry_notes:
            analysis = analyse(plant, structure, coefficients, limits)
    elif step_fail.size:
        retry_notes = _step_retry(plant, structure, shapes, choice, coefficients, limits, objective, target, step_fail)
        for p, text in retry_notes.items():
            notes[p].append(text)
            missed = [n for n in ("max_overshoot", "max_settling_time") if not analysis.verdicts[n][p]]
            warnings[p].append(f"the objective's best gain K = {analysis.gain[p]:.6g} fails {shortfall(analysis, p, missed)}; "
                               f"{text}")
        if retry_notes:
            analysis = analyse(plant, structure, coefficients, limits)
    passed = analysis.passed
    binding: list[str | None] = [None] * P
    failed = np.flatnonzero(~passed)
    if failed.size:
        found = diagnose(plant, shapes, choice, analysis, limits, failed) if certified is None else _certified(certified, analysis, failed)
        for p, (name, text) in found.items():
            binding[p] = name
            notes[p].append(text)
            resonance = resonance_note(analysis, p)
            if resonance is not None:
                notes[p].append(resonance)
    for p, extra in enumerate(auto_notch_report(sched, points)[0]):
        notes[p].extend(extra)
    for p in range(P):
        if passed[p] and controller.strategy != "dominant-pair":
            params = shapes.params[p, shape_index[p]]
            if params.size:
                notes[p].insert(0, "zero(s) at z = " + ", ".join(f"{v:.6g}" for v in np.ravel(params)))
    if analysis.cancelled is not None:
        for p in range(P):
            for c in analysis.cancelled[p][np.isfinite(analysis.cancelled[p])]:
                rate = -math.log(c) / float(plant.ts[p])
                notes[p].append(
                    f"the zero at z = {c:.6g} cancels a plant pole; that pole stays in the closed loop "
                    f"(decay {rate:.6g} 1/s): it is not in the reference response but load disturbances "
                    "decay at that rate; it is left out of the pole-region specs"
                )
    return PointDesign(
        points=points,
        plant=plant,
        limits=limits,
        coefficients=coefficients,
        analysis=analysis,
        feasible=choice.feasible,
        binding=tuple(binding),
        notes=tuple(tuple(n) for n in notes),
        intervals=choice.intervals,
        shape_params=shapes.params[np.arange(P), shape_index],
        warnings=tuple(tuple(w) for w in warnings),
    )


def _own_gain_warnings(plant, structure, shapes, choice: Choice, limits, strategy: str) -> dict[int, str]:
    """Points where the strategy's own gain misses a spec: which spec, by how much."""
    P = plant.points
    asked = shapes.gain[np.arange(P), np.maximum(choice.shape, 0)]
    moved = np.flatnonzero(choice.feasible & np.isfinite(asked) & ~np.isclose(np.nan_to_num(choice.gain, nan=-1.0), asked, rtol=1e-12))
    if moved.size == 0:
        return {}
    s = np.maximum(choice.shape[moved], 0)
    form = LocusForm(gain=asked[moved], zeros=shapes.zeros[moved, s], poles=shapes.poles[moved, s])
    trial = analyse(plant.select(moved), structure, coefficients_from_locus(structure, form), limits.select(moved))
    own = "magnitude-condition" if strategy == "dominant-pair" else strategy
    out = {}
    for q, p in enumerate(moved):
        if not trial.passed[q]:
            out[int(p)] = strategy_gain_warning(trial, q, float(choice.gain[p]), own)
    return out


def point_warnings(sched, point_design: PointDesign) -> tuple[tuple[str, ...], ...]:
    """Every per-point warning of a finished design (:mod:`gainloom.design.fallbacks`)."""
    analysis = point_design.analysis
    P = analysis.points
    out = [list(point_design.warnings[p]) if point_design.warnings else [] for p in range(P)]
    controller = sched.controller
    asks_target = controller.strategy == "dominant-pair" or _objective(controller) == "nearest-target"
    aimed = tightened_limits(analysis.limits) if uses_crossover(controller, _objective(controller)) else None
    extra = [
        target_warnings(analysis, controller.target if asks_target else None),
        boundary_warnings(analysis, aimed),
        compromise_warnings(analysis, point_design.status, point_design.binding),
    ]
    for found in extra:
        for p, text in found.items():
            out[p].append(text)
    return tuple(tuple(w) for w in out)


def sampling_warnings(sched, points: np.ndarray, plant: Loop, analysis: PointAnalysis | None = None) -> list[str]:
    """Warn where requested or achieved natural frequencies exceed a fraction of the sampling rate.

    Threshold: ``SAMPLING_FRACTION * 2 pi / ts`` (common practice, no source).
    """
    out = []
    ts = np.asarray(plant.ts, float)
    limit = SAMPLING_FRACTION * 2 * math.pi / ts
    values = sched.spec_values(points)
    requested = {
        "specs natural_frequency max": values.get("max_natural_frequency"),
        "specs natural_frequency min": values.get("min_natural_frequency"),
    }
    if sched.controller.target is not None and sched.controller.target.natural_frequency is not None:
        requested["controller target natural_frequency"] = np.full(ts.shape, sched.controller.target.natural_frequency)
    for label, value in requested.items():
        if value is None:
            continue
        value = np.asarray(value, float)
        over = np.flatnonzero(np.isfinite(value) & (value > limit))
        if over.size:
            p = over[0]
            out.append(
                f"{label} = {value[p]:.6g} rad/s exceeds {SAMPLING_FRACTION:g} x the sampling rate "
                f"({limit[p]:.6g} rad/s at ts = {ts[p]:.6g} s) at {over.size} point(s), first at "
                f"{sched.describe_point(points[p])}; sampled-data effects dominate there (common practice, no source)"
            )
    if analysis is not None:
        over = np.flatnonzero(np.isfinite(analysis.natural_frequency) & (analysis.natural_frequency > limit))
        if over.size:
            p = over[0]
            out.append(
                f"designed dominant natural frequency {analysis.natural_frequency[p]:.6g} rad/s exceeds "
                f"{SAMPLING_FRACTION:g} x the sampling rate at {over.size} point(s), first at "
                f"{sched.describe_point(points[p])} (common practice, no source)"
            )
    return out


def _table(sched, points_shape, axes_values, coefficients, plant) -> GainTable:
    axes = tuple(
        TableAxis(name=axis.name, unit=axis.unit, values=np.asarray(values, float))
        for axis, values in zip(sched.axes, axes_values)
    )
    shape = tuple(len(v) for v in axes_values)
    points = grid_points(list(axes_values))
    ts = np.asarray(plant.ts, float)
    return GainTable(
        structure=sched.controller.structure,
        axes=axes,
        coefficients={k: np.asarray(v, float).reshape(shape) for k, v in coefficients.items()},
        sample_period=ts.reshape(shape),
        output_limits=tuple(np.reshape(v, shape) for v in sched.output_limits_at(points)),
        filters=filter_tables(sched, points, ts, shape),
    )


def filter_tables(sched, points: np.ndarray, ts: np.ndarray, shape: tuple[int, ...]) -> tuple[FilterTable, ...]:
    """The ``controller.filters`` sections at the table's grid points, as the C tabulates them.

    The same discrete sections the analysis multiplies into the loop
    (:func:`sampled_plant`: nominal parameters, Tustin prewarped at each
    section's centre), split into ``b0, b1, b2, a1, a2`` per section.
    """
    values = sched.filters_at(points)
    if values is None:
        return ()
    tables = []
    for kind, (num, den) in zip(values.kinds, values.sections(ts)):
        grids = {"b0": num[:, 0], "b1": num[:, 1], "b2": num[:, 2], "a1": den[:, 1], "a2": den[:, 2]}
        tables.append(FilterTable(kind, {name: grid.reshape(shape) for name, grid in grids.items()}))
    return tuple(tables)


def grid_points(axes_values: list[np.ndarray]) -> np.ndarray:
    mesh = np.meshgrid(*axes_values, indexing="ij")
    return np.stack([m.ravel() for m in mesh], axis=-1)


def design(schedule: Any, progress: Progress | None = None) -> DesignResult:
    """Design the gain table of a schedule.

    Parameters
    ----------
    schedule : Schedule or str or Path
        A loaded schedule or the path of a schedule file.
    progress : callable, optional
        ``progress(stage, done, total)``; the CLI draws a counter on stderr.

    Returns
    -------
    DesignResult
        Gains (physical and coefficients), per-point analysis, status and
        binding spec of failed points, whole-table checks and warnings.
    """
    from .table_checks import run_table_checks

    sched = load_for_design(schedule)
    axes_values = [np.asarray(a.values, float) for a in sched.axes]
    points = grid_points(axes_values)
    point_design = design_points(sched, points, progress)
    report, point_design, axes_values = run_table_checks(sched, point_design, axes_values, progress=progress)
    table = _table(sched, None, axes_values, point_design.coefficients, point_design.plant)
    data_check = check_on_data(sched, point_design.points, sched.controller.structure, point_design.coefficients,
                               point_design.limits, point_design.analysis)
    status, notes, binding = merge_data_verdict(point_design.status, point_design.notes, point_design.binding,
                                                data_check)
    warnings = list(sched.warnings) + auto_notch_report(sched, point_design.points)[1]
    warnings += sampling_warnings(sched, point_design.points, point_design.plant, point_design.analysis)
    warnings += list(point_design.analysis.warnings)
    warnings += [] if data_check is None else list(data_check.warnings)
    continuous = None
    if sched.controller.compare_continuous:
        from .continuous import compare_continuous

        continuous = compare_continuous(sched, point_design)
    objective = _objective(sched.controller)
    strategy = DesignSettings.of(sched, objective, OBJECTIVE_TEXT[objective])
    return DesignResult(
        table=table,
        analysis=point_design.analysis,
        status=status,
        notes=notes,
        binding=binding,
        table_report=report,
        warnings=tuple(warnings),
        schedule_path=str(sched.path),
        schedule_sha256=str(sched.sha256),
        strategy=strategy,
        points=point_design.points,
        point_labels=tuple(sched.describe_point(p) for p in point_design.points),
        continuous=continuous,
        point_warnings=point_warnings(sched, point_design),
        data_check=data_check,
    )


def verify(schedule: Any, gains: Any, progress: Progress | None = None) -> VerifyResult:
    """Re-check a gains file (or a GainTable) against a schedule.

    The table's own breakpoints are analysed on the schedule's sampled plant
    (its current sample periods, hold and delay), followed by the
    whole-table checks (smoothness, between points, tolerances).  A table
    tuned by hand is judged the same way as a designed one.

    Parameters
    ----------
    schedule : Schedule or str or Path
    gains : str or Path or GainTable
    progress : callable, optional

    Returns
    -------
    VerifyResult
    """
    from .gainsfile import compromise_points, read_gains
    from .table_checks import run_table_checks

    sched = load_for_design(schedule)
    if isinstance(gains, GainTable):
        table, gains_path, marked = gains, "", []
    else:
        table, meta = read_gains(gains)
        gains_path, marked = str(gains), compromise_points(meta)
    names = tuple(a.name for a in sched.axes)
    if tuple(a.name for a in table.axes) != names:
        raise InputError(f"the gains file's axes {[a.name for a in table.axes]} are not the schedule's {list(names)}")
    warnings = list(sched.warnings) + auto_notch_report(sched, grid_points([a.values for a in table.axes]))[1]
    if table.structure != sched.controller.structure:
        warnings.append(
            f"gains file structure {table.structure!r} differs from the schedule's {sched.controller.structure!r}; "
            "checked as written in the gains file"
        )
    axes_values = [a.values for a in table.axes]
    points = grid_points(axes_values)
    # at the grid points the filter sections are judged as the table stores them (the C runs those)
    plant = sampled_plant(sched, points, filters=table_filters(table))
    if len(table.filters) != len(sched.controller.filters):
        warnings.append(
            f"the gains file tabulates {len(table.filters)} filter section(s), the schedule has "
            f"{len(sched.controller.filters)}; grid points checked with the gains file's, between points and "
            "tolerance corners with the schedule's"
        )
    limits = limits_at(sched, points)
    coefficients = {k: v.ravel() for k, v in table.coefficients.items()}
    if progress is not None:
        progress("verify", 0, points.shape[0])
    analysis = analyse(plant, table.structure, coefficients, limits)
    if progress is not None:
        progress("verify", points.shape[0], points.shape[0])
    stored_ts = table.sample_period.ravel()
    changed = np.flatnonzero(~np.isclose(stored_ts, plant.ts, rtol=1e-12, atol=0))
    if changed.size:
        p = changed[0]
        warnings.append(
            f"sample period differs from the gains file at {changed.size} point(s), first at "
            f"{sched.describe_point(points[p])}: file {stored_ts[p]:.6g} s, schedule {plant.ts[p]:.6g} s; "
            "checked with the schedule's period (the coefficients are per-sample quantities)"
        )
    # a point the design could not meet is a best compromise, whatever it scores now
    # (gainloom emit never marks such a table verified either); re-design to clear it
    marked = sorted(p for p in set(marked) if 0 <= p < points.shape[0])
    for p in marked:
        warnings.append(
            f"{sched.describe_point(points[p])}: the gains file marks this point compromise (its design met no "
            f"set of gains for every spec); counted as failing whatever the re-check finds "
            f"({'passes' if analysis.passed[p] else 'fails'} now); design the table again to replace it"
        )
    data_check = check_on_data(sched, points, table.structure, coefficients, limits, analysis)
    status, _, _ = merge_data_verdict(tuple("pass" if ok and p not in marked else "fail" for p, ok in enumerate(analysis.passed)),
                                      ((),) * points.shape[0], (None,) * points.shape[0], data_check)
    point_design = PointDesign(
        points=points, plant=plant, limits=limits, coefficients=coefficients, analysis=analysis,
        feasible=analysis.passed, binding=tuple([None] * points.shape[0]),
        notes=tuple(() for _ in range(points.shape[0])), intervals=[[] for _ in range(points.shape[0])],
        shape_params=np.zeros((points.shape[0], 0)),
    )
    report, _, _ = run_table_checks(sched, point_design, axes_values, progress=progress, redesign=False,
                                    structure=table.structure)
    warnings += sampling_warnings(sched, points, plant, analysis)
    warnings += list(analysis.warnings)
    warnings += [] if data_check is None else list(data_check.warnings)
    return VerifyResult(
        table=table,
        analysis=analysis,
        status=status,
        table_report=report,
        warnings=tuple(warnings),
        schedule_path=str(sched.path),
        schedule_sha256=str(sched.sha256),
        gains_path=gains_path,
        points=points,
        point_labels=tuple(sched.describe_point(p) for p in points),
        compromise_points=tuple(marked),
        data_check=data_check,
    )

"""Run the scheduled closed loop as the firmware will run it."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from ..design.lookup import interpolate_grid
from ..design.table import GainTable
from ..errors import InputError
from ..names import unknown_name_message
from .controller import SIMULATION_FORMATS, TableController
from .metrics import measure
from .plant import SampledPlant, sample_plant
from .result import SimulationResult, SpecCheck
from .scenario import Scenario
from .signals import RunInputs
from .timeline import sample_times

__all__ = ["run_scenario"]

# A run whose output passes this magnitude is stopped (it has diverged) so
# that the arithmetic never overflows.
_STOP_MAGNITUDE = 1e100


class ScheduleLike(Protocol):
    """What the simulator needs of a schedule: its axes and batched evaluation."""

    @property
    def axes(self) -> Any:  # pragma: no cover - protocol
        ...

    def evaluate(self, points: np.ndarray, scale: Any = None) -> Any:  # pragma: no cover - protocol
        ...


def _axis_names(axes: Any) -> tuple[str, ...]:
    return tuple(str(getattr(axis, "name", axis)) for axis in axes)


def _check_specs(scenario: Scenario, metrics) -> tuple[SpecCheck, ...]:
    specs = scenario.specs
    measured = {
        "max_overshoot": metrics.overshoot,
        "max_settling_time": metrics.settling_time,
        "max_error": metrics.max_error,
        "max_rms_error": metrics.rms_error,
        "max_saturation_fraction": metrics.saturation_fraction,
    }
    checks = []
    for name, value in measured.items():
        limit = getattr(specs, name)
        if limit is None:
            continue
        passed = value is not None and np.isfinite(value) and value <= limit
        checks.append(SpecCheck(name, limit, value, bool(passed)))
    return tuple(checks)


def _run_inputs(
    scenario: Scenario, axis_names: tuple[str, ...], points: np.ndarray, models: Any, times, reference
) -> RunInputs:
    """Feedforward and run-time limits of the scenario at the run's samples."""
    variables = {name: points[:, i] for i, name in enumerate(axis_names)}
    kinds = dict.fromkeys(axis_names, "scheduling variable")
    for name, values in (getattr(models, "parameters", None) or {}).items():
        if name not in variables:
            variables[name] = np.broadcast_to(np.asarray(values, dtype=float), times.shape)
            kinds[name] = "parameter"
    return RunInputs(scenario.feedforward, scenario.limit_steps, times, reference, variables, kinds)


def _input_warnings(
    controller: TableController, times: np.ndarray, feedforward: np.ndarray, requested: np.ndarray
) -> list[str]:
    """What the step did with the feedforward and run-time limits that the user may not expect."""
    warnings = []
    ignored = requested[:, 0] > requested[:, 1]
    if np.any(ignored):
        warnings.append(
            f"run-time limits with low > high at {np.count_nonzero(ignored)} samples (first at "
            f"t = {times[np.argmax(ignored)]:.6g} s): the step ignored them and used the table's, as the generated C does"
        )
    layout = controller.layout
    if layout is not None and layout.fmt.is_fixed:
        full = layout.output_full_scale
        beyond = (np.abs(feedforward) > full) | np.any(np.abs(requested) > full, axis=1)
        if np.any(beyond):
            warnings.append(
                f"feedforward or run-time limits beyond the output full scale {full:g} at {np.count_nonzero(beyond)} "
                f"samples (first at t = {times[np.argmax(beyond)]:.6g} s): they reached the step saturated at full "
                "scale (raise --output-full-scale if the firmware scales them otherwise)"
            )
    return warnings


def _check_arguments(
    schedule: ScheduleLike, table: GainTable, scenario: Scenario, number_format: str
) -> tuple[str, ...]:
    """Refuse arguments that cannot make a run; return the schedule's axis names."""
    if not isinstance(table, GainTable):
        raise InputError(f"table must be a GainTable; got {type(table).__name__}")
    if not isinstance(scenario, Scenario):
        raise InputError(f"scenario must be a Scenario; got {type(scenario).__name__}")
    if number_format not in SIMULATION_FORMATS:
        raise InputError(unknown_name_message("number format", str(number_format), SIMULATION_FORMATS))
    written = len(getattr(getattr(schedule, "controller", None), "filters", ()))
    if written != len(table.filters):
        # the table's sections are what the C runs: without them it would simulate another controller
        raise InputError(
            f"the schedule has {written} controller.filters section(s) and the gain table {len(table.filters)}; "
            "design the table again from this schedule"
        )
    schedule_axes = _axis_names(schedule.axes)
    unknown = [axis.name for axis in table.axes if axis.name not in schedule_axes]
    if unknown:
        raise InputError(
            f"the gain table is scheduled on {', '.join(unknown)}, which the schedule does not have "
            f"(schedule axes: {', '.join(schedule_axes)})"
        )
    extra = [name for name in scenario.trajectory if name not in schedule_axes]
    if extra:
        raise InputError(
            f"the scenario moves {', '.join(extra)}, which the schedule does not have "
            f"(schedule axes: {', '.join(schedule_axes)})"
        )
    asks_step = scenario.specs.max_overshoot is not None or scenario.specs.max_settling_time is not None
    if asks_step and not scenario.reference.jumps:
        raise InputError("overshoot and settling specs need a reference step; the scenario's reference has none")
    return schedule_axes


def _sample_along_path(models: Any, count: int) -> tuple[np.ndarray, SampledPlant]:
    """Sample period, shape ``(count,)`` (s), and the exact ZOH plant update at each of ``count`` samples."""
    plant = models.plant
    if plant.is_discrete:
        raise InputError("the schedule must give the continuous plant; it gave a discrete loop")
    if plant.points not in (1, count):
        raise InputError(f"the schedule gave {plant.points} plants for {count} points")
    plant = plant if plant.points == count else plant.select(np.zeros(count, dtype=int))
    period = np.broadcast_to(np.asarray(models.sample_period, dtype=float), (count,))
    delay = np.broadcast_to(np.asarray(models.delay, dtype=float), (count,))
    return period, sample_plant(plant, period, delay)


def _path_warnings(
    schedule: ScheduleLike, table: GainTable, table_points: np.ndarray, period: np.ndarray, sampled: SampledPlant
) -> list[str]:
    """Where the path leaves the table, the table's period or the delay differ, or the hold is not ZOH.

    ``table_points`` has shape ``(K, n_table_axes)``; ``period`` shape ``(K,)`` (s).
    """
    warnings = []
    for column, axis in enumerate(table.axes):
        low, high = float(np.min(table_points[:, column])), float(np.max(table_points[:, column]))
        if low < axis.values[0] or high > axis.values[-1]:
            warnings.append(
                f"{axis.name} goes to [{low:g}, {high:g}] {axis.unit}, outside the table's "
                f"[{axis.values[0]:g}, {axis.values[-1]:g}]: coefficients are clamped at the ends there"
            )
    table_period = interpolate_grid(tuple(a.values for a in table.axes), table.sample_period, table_points)
    mismatch = float(np.max(np.abs(table_period - period) / period))
    if mismatch > 1e-6:
        warnings.append(
            f"the table's sample period differs from the schedule's by up to {mismatch * 100:.3g} % along the path; "
            "the plant runs at the schedule's period with the table's coefficients"
        )
    if np.ptp(sampled.whole_delay) or np.ptp(sampled.fraction_delay / period) > 1e-9:
        warnings.append(
            "the loop delay in samples changes along the path; each interval uses the delay of its own point "
            "(exact at a frozen point, an approximation while it moves)"
        )
    method = getattr(getattr(schedule, "sampling", None), "method", "zoh")
    if method != "zoh":
        warnings.append(
            f"the schedule designs with the {method} hold equivalent; the simulation integrates the plant exactly "
            "under a zero-order hold (what a PWM or DAC output does)"
        )
    return warnings


@dataclass(eq=False)
class _Traces:
    """Per-sample records of one run, shape ``(K,)`` each (``requested`` ``(K, 2)``, ``states`` ``(K, n)``).

    NaN where the run stopped early; ``requested`` is NaN where no run-time limits were asked for.
    """

    output: np.ndarray
    control: np.ndarray
    unsaturated: np.ndarray
    feedforward: np.ndarray
    limit_low: np.ndarray
    limit_high: np.ndarray
    requested: np.ndarray
    states: np.ndarray

    @classmethod
    def empty(cls, count: int, state_count: int) -> _Traces:
        """All-NaN records for ``count`` samples and ``state_count`` controller states."""
        output, control, unsaturated, feedforward, limit_low, limit_high = (np.full(count, np.nan) for _ in range(6))
        requested = np.full((count, 2), np.nan)
        states = np.full((count, state_count), np.nan)
        return cls(output, control, unsaturated, feedforward, limit_low, limit_high, requested, states)


def _step_loop(
    controller: TableController,
    sampled: SampledPlant,
    inputs: RunInputs,
    reference: np.ndarray,
    disturbance: np.ndarray,
) -> _Traces:
    """Run controller and plant sample by sample over the ``K`` samples of ``reference``.

    Stops at the first output beyond :data:`_STOP_MAGNITUDE` (or non-finite);
    a state beyond it marks the rest of the output infinite.
    """
    count = reference.size
    traces = _Traces.empty(count, len(controller.state_names))
    output, control = traces.output, traces.control
    phi, late, early, load = sampled.phi, sampled.late, sampled.early, sampled.load
    c, d, whole = sampled.c, sampled.d, sampled.whole_delay
    x = np.zeros(sampled.order)
    previous_input = 0.0
    for k in range(count):
        y = float(c[k] @ x + d[k] * previous_input)
        if not np.isfinite(y) or abs(y) > _STOP_MAGNITUDE:
            break
        traces.feedforward[k], limits = inputs.at(k, y)
        output[k], (control[k], traces.unsaturated[k]) = y, controller.step(
            k, reference[k], y, traces.feedforward[k], limits
        )
        traces.limit_low[k], traces.limit_high[k] = controller.limits_in_force()
        if limits is not None:
            traces.requested[k] = limits
        traces.states[k] = controller.states()
        lag = k - whole[k]
        newer = control[lag] if lag >= 0 else 0.0
        older = control[lag - 1] if lag >= 1 else 0.0
        x = phi[k] @ x + late[k] * newer + early[k] * older + load[k] * disturbance[k]
        previous_input = newer + disturbance[k]
        if not np.all(np.abs(x) < _STOP_MAGNITUDE):
            output[k + 1:] = np.inf
            break
    return traces


def _error_scale_warnings(controller: TableController, reference: np.ndarray, output: np.ndarray) -> list[str]:
    """Fixed point only: where ``|r - y|`` (shape ``(K,)``) went beyond the error full scale."""
    layout = controller.layout
    if layout is None or not layout.fmt.is_fixed:
        return []
    error = np.abs(reference - output)
    beyond = np.isfinite(error) & (error > layout.error_full_scale)
    if not np.any(beyond):
        return []
    return [
        f"|r - y| reached {np.nanmax(error[np.isfinite(error)]):.4g}, beyond the error full scale "
        f"{layout.error_full_scale:g}, at {np.count_nonzero(beyond)} of {output.size} samples: the controller "
        "saw a saturated error there (raise --error-full-scale if the firmware scales it otherwise)"
    ]


def run_scenario(
    schedule: ScheduleLike,
    table: GainTable,
    scenario: Scenario,
    number_format: str = "float32",
    *,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
) -> SimulationResult:
    """Simulate the closed loop while the scheduling variables follow the scenario.

    At every sample: the scheduling variables are read from the scenario's
    path; the controller coefficients are interpolated from ``table`` as
    the generated C does (linear / bilinear, clamped at the axis ends) in
    ``number_format``; the controller runs one step on ``r - y`` with
    output saturation and conditional-integration anti-windup; the plant of
    the schedule at the current point is advanced one sample period exactly
    (zero-order hold, matrix exponential) with its dead time and the
    computation delay, in one fixed state-space realisation
    (:data:`gainloom.simulation.result.REALISATION`).  The period in force is
    the one of the current point.

    Parameters
    ----------
    schedule : Schedule
        Anything with ``axes`` and ``evaluate(points)`` returning the
        continuous plant (a batched ``Loop`` with ``dead_time``, s), the
        ``sample_period`` (s) and the computation ``delay`` (samples) at
        each point.
    table : GainTable
        The gain table the firmware will hold.
    scenario : Scenario
        Duration, paths of the scheduling variables, reference, load steps,
        specs.
    number_format : str
        Controller arithmetic, one of
        :data:`gainloom.simulation.SIMULATION_FORMATS` (default
        ``"float32"``).
    error_full_scale, output_full_scale : float, optional
        ``q15``/``q31`` only: physical error (output units) and controller
        output that full scale stands for, as for
        :func:`gainloom.codegen.layout_table` (defaults 1 and
        ``max(|u_min|, |u_max|)``).  Errors beyond full scale saturate, as
        they would in the firmware.

    Returns
    -------
    SimulationResult

    Notes
    -----
    A simulation is evidence, not proof: validate every table on hardware
    with current and speed limits and a safe test set-up.  gainloom does not
    replace functional-safety processes, local codes or licensed
    engineering judgement.
    """
    schedule_axes = _check_arguments(schedule, table, scenario, number_format)
    times = sample_times(
        scenario.duration, lambda t: schedule.evaluate(scenario.points(schedule_axes, t)).sample_period
    )
    points = scenario.points(schedule_axes, times)
    models = schedule.evaluate(points)
    period, sampled = _sample_along_path(models, times.size)
    table_points = scenario.points(tuple(axis.name for axis in table.axes), times)
    warnings = _path_warnings(schedule, table, table_points, period, sampled)

    controller = TableController(table, number_format, table_points, error_full_scale, output_full_scale)
    reference = scenario.reference(times)
    disturbance = scenario.disturbance(times)
    inputs = _run_inputs(scenario, schedule_axes, points, models, times, reference)
    traces = _step_loop(controller, sampled, inputs, reference, disturbance)
    warnings += _error_scale_warnings(controller, reference, traces.output)
    warnings += _input_warnings(controller, times, traces.feedforward, traces.requested)

    limits_in_force = (traces.limit_low, traces.limit_high)
    metrics = measure(times, period, reference, traces.output, traces.unsaturated, limits_in_force, scenario)
    return SimulationResult(
        number_format=number_format,
        structure=table.structure,
        axis_names=schedule_axes,
        output_limits=controller.limits,
        time=times,
        sample_period=np.array(period),
        points=points,
        reference=reference,
        output=traces.output,
        error=reference - traces.output,
        control=traces.control,
        unsaturated=traces.unsaturated,
        disturbance=disturbance,
        feedforward=traces.feedforward,
        limits_in_force=limits_in_force,
        gains={name: np.asarray(values, dtype=float) for name, values in controller.gains.items()},
        states={name: traces.states[:, i] for i, name in enumerate(controller.state_names)},
        metrics=metrics,
        checks=_check_specs(scenario, metrics),
        warnings=tuple(warnings),
        scenario=scenario.to_dict(),
    )

"""The scenario of a cascade run: where the loops sit, the speed-reference
step and the load step, with defaults from the outer loop's time scale.

The design job runs the defaults; ``gainloom simulate CASCADE`` runs them
with what the command line changes.  The run holds the operating point
(:mod:`.cascade`), so every scheduling variable gets one value.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..errors import InputError
from ..names import unknown_name_message
from .cascade import CascadeScenario
from .defaults import LOAD_STEP_FRACTION, SIMULATION_MAX_SAMPLES

__all__ = ["LOAD_STEP_AT", "RUN_LENGTH", "cascade_scenario"]

#: The load step hits at this many outer time scales ``T`` (the reference step has settled).
LOAD_STEP_AT = 3.0

#: The run ends after this many outer time scales ``T`` (the load step has been rejected).
RUN_LENGTH = 6.0


def _middle(axis: Any) -> float:
    return 0.5 * (float(axis.values[0]) + float(axis.values[-1]))


def _points(schedules: tuple[Any, Any], inner_at: dict[str, float] | None,
            point: dict[str, float]) -> tuple[dict[str, float], dict[str, float]]:
    """Each loop's operating point: the outer loop at the middle of its ranges, the inner at ``inner_at``
    and the shared variables; ``point`` overrides any variable of either loop (shared ones in both)."""
    inner_sched, outer_sched = schedules
    axes = {a.name: a for s in (outer_sched, inner_sched) for a in s.axes}
    for name, value in point.items():
        if name not in axes:
            raise InputError("--ramp: " + unknown_name_message("scheduling variable", name, tuple(axes)))
        low, high = float(axes[name].values[0]), float(axes[name].values[-1])
        if not (np.isfinite(value) and low <= value <= high):
            raise InputError(f"--ramp {name}: expected a value in its grid [{low:g}, {high:g}] "
                             f"(the tables are not extrapolated); got {value!r}")
    outer = {a.name: point.get(a.name, _middle(a)) for a in outer_sched.axes}
    inner = {name: point.get(name, outer.get(name, (inner_at or {}).get(name, 0.0)))
             for name in inner_sched.axis_names}
    return outer, inner


def cascade_scenario(
    schedules: tuple[Any, Any],
    inner_at: dict[str, float] | None,
    outer_limits: tuple[float, float],
    scale: float,
    *,
    duration: float | None = None,
    reference_step: float | None = None,
    load: tuple[float, float] | None = None,
    point: dict[str, float] | None = None,
) -> CascadeScenario:
    """The cascade run's scenario (module docstring), defaults filled in.

    With ``T = scale``: the outer reference steps at 0 s by 0.1 of the outer
    error full scale (1 output unit when none is set); a load of
    :data:`~gainloom.simulation.defaults.LOAD_STEP_FRACTION` times the larger
    outer output limit (inner measurement units, at the outer plant part's
    input) steps in at ``3 T``; the run ends at ``6 T``; ``T`` is shortened
    so that the run has at most
    :data:`~gainloom.simulation.defaults.SIMULATION_MAX_SAMPLES` inner samples.

    Parameters
    ----------
    schedules : tuple
        The inner and the outer loop's schedule.
    inner_at : dict of str to float or None
        The outer loop's ``inner_at`` (docs/cascade.md).
    outer_limits : tuple of float
        The outer table's output limits (their envelope when tabulated).
    scale : float
        The outer loop's time scale ``T``, s
        (:func:`~gainloom.simulation.defaults.time_scale_of`).
    duration, reference_step : float, optional
        Length of the run (s) and the outer reference step (outer units).
    load : (time, amplitude), optional
        The load step (s, inner measurement units); amplitude 0 for none.
    point : dict of str to float, optional
        Values of scheduling variables of either loop, each inside its grid.

    Returns
    -------
    CascadeScenario

    Raises
    ------
    InputError
        An unknown variable, a value outside its grid, a duration that is not
        positive or longer than the sample budget, a load time outside the run.
    """
    inner_sched, outer_sched = schedules
    base = float(inner_sched.sampling.period[0])
    scale = min(scale, SIMULATION_MAX_SAMPLES * base / RUN_LENGTH)
    outer_point, inner_point = _points(schedules, inner_at, dict(point or {}))
    if duration is None:
        duration = RUN_LENGTH * scale
    elif not (np.isfinite(duration) and 0 < duration <= SIMULATION_MAX_SAMPLES * base):
        raise InputError(f"--duration: expected a positive time of at most {SIMULATION_MAX_SAMPLES} inner "
                         f"samples ({SIMULATION_MAX_SAMPLES * base:g} s); got {duration!r}")
    if reference_step is None:
        full_scale = outer_sched.codegen.error_full_scale
        reference_step = 0.1 * full_scale if full_scale else 1.0
    elif not np.isfinite(reference_step):
        raise InputError(f"--reference: expected a finite number; got {reference_step!r}")
    if load is None:
        load = (LOAD_STEP_AT * scale, LOAD_STEP_FRACTION * max(abs(float(outer_limits[0])),
                                                               abs(float(outer_limits[1]))))
    elif not (np.isfinite(load[0]) and np.isfinite(load[1]) and 0 <= load[0] <= duration):
        raise InputError(f"--load-step: expected a time inside the run [0, {duration:g}] s and a finite "
                         f"amplitude; got {load[0]!r}:{load[1]!r}")
    return CascadeScenario(duration=float(duration), reference_step=float(reference_step),
                           load_time=float(load[0]), load_amplitude=float(load[1]),
                           outer_point=outer_point, inner_point=inner_point)

"""The scheduled simulation a design run does when no scenario is given.

:func:`default_scenario` builds it from the designed table alone (its time
scale, its output limits) and the schedule's axes, so every design job
exercises the table the way a slowly changing operating point does, with a
reference step and a load step; the job's log records the timeline.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .scenario import LoadStep, PiecewiseLinear, Scenario

__all__ = ["LOAD_STEP_FRACTION", "SIMULATION_MAX_SAMPLES", "SIMULATION_SPAN", "time_scale", "time_scale_of", "default_scenario"]

#: Default simulation timeline in units of the loop's time scale ``T``:
#: hold (reference step settles), ramp of the first variable, hold at its top.
#: The load step hits in the middle of the ramp.
SIMULATION_SPAN: dict[str, float] = {"hold": 3.0, "ramp": 10.0, "tail": 3.0}

#: Upper bound on the samples of the default simulation (the run is shortened
#: to fit and a note says so).
SIMULATION_MAX_SAMPLES = 100_000

#: Load step of the default simulation, as a fraction of the larger output
#: limit (common practice for a representative disturbance, no source).
LOAD_STEP_FRACTION = 0.1

#: Shortest time scale, in sample periods (a window needs enough samples).
_MIN_SCALE_SAMPLES = 20.0


def time_scale(result: Any) -> tuple[float, str]:
    """The loop's slowest time scale in seconds, and where it came from (:func:`time_scale_of`)."""
    analysis = result.analysis
    return time_scale_of(analysis.settling_time, analysis.decay, result.table.sample_period)


def time_scale_of(settling: Any, decay: Any, periods: Any) -> tuple[float, str]:
    """The slowest time scale of a designed table from its per-point figures.

    Parameters
    ----------
    settling, decay : array_like
        Designed 2 % settling time (s) and slowest closed-loop decay rate
        (1/s) per grid point; non-finite or non-positive entries are ignored.
    periods : array_like
        Sample period per grid point, s.

    Returns
    -------
    scale : float
        The largest settling time; else ``4 / smallest decay``; at least
        20 sample periods.
    basis : str
        Which of these it is, for the log.
    """
    floor = _MIN_SCALE_SAMPLES * float(np.max(np.asarray(periods, dtype=float)))
    settling = np.asarray(settling, dtype=float)
    settling = settling[np.isfinite(settling) & (settling > 0)]
    if settling.size:
        scale, basis = float(np.max(settling)), "largest designed 2 % settling time over the grid points"
    else:
        decay = np.asarray(decay, dtype=float)
        decay = decay[np.isfinite(decay) & (decay > 0)]
        if decay.size:
            # 2 % of a first-order decay: ln(50) ~ 3.9 time constants (closed form)
            scale, basis = 4.0 / float(np.min(decay)), "4 / smallest closed-loop decay rate (no finite settling time)"
        else:
            scale, basis = 50.0 * floor, "1000 sample periods (no stable grid point to take a time scale from)"
    if scale < floor:
        scale, basis = floor, f"{_MIN_SCALE_SAMPLES:g} sample periods (the designed settling time is shorter)"
    return scale, basis


def default_scenario(schedule: Any, result: Any) -> tuple[Any, dict[str, Any]]:
    """The scheduled simulation the full run does when none is given.

    With ``T`` the loop's time scale (the largest designed 2 % settling time
    over the grid points, at least 20 sample periods):

    - the first scheduling variable is held at its lowest breakpoint for
      ``3 T``, ramps linearly to its highest over ``10 T`` (slow against the
      loop, so the run sees the table the way a slowly changing operating
      point does), and is held there for ``3 T``; further variables are held
      at the middle of their ranges;
    - the reference is a unit step (1 output unit) at ``t = 0``;
    - one load step of ``0.1 * max(|u_min|, |u_max|)`` (controller-output
      units, at the plant input) hits in the middle of the ramp;
    - no scenario limits: the run passes when it is stable (no divergence,
      geometric growth or saturated oscillation); overshoot, settling, load
      recovery and saturation are measured and logged.

    The run is capped at :data:`SIMULATION_MAX_SAMPLES` samples at the
    shortest sample period (``T`` is reduced to fit, with a note).

    Parameters
    ----------
    schedule : Schedule
        The loaded schedule.
    result : DesignResult
        Its design (for the time scale and the output limits).

    Returns
    -------
    scenario : Scenario
    description : dict
        Plain data: the time scale and its basis, the timeline, notes.
    """
    scale, basis = time_scale(result)
    span = SIMULATION_SPAN
    total = sum(span.values())
    shortest = float(np.min(np.asarray(result.table.sample_period, dtype=float)))
    notes = []
    if total * scale / shortest > SIMULATION_MAX_SAMPLES:
        limited = SIMULATION_MAX_SAMPLES * shortest / total
        notes.append(
            f"time scale {scale:.6g} s shortened to {limited:.6g} s to keep the run within "
            f"{SIMULATION_MAX_SAMPLES} samples; the ramp is faster against the loop than intended"
        )
        scale = limited
    ramp_start = span["hold"] * scale
    ramp_end = ramp_start + span["ramp"] * scale
    duration = total * scale
    axes = list(schedule.axes)
    first = axes[0]
    low, high = float(np.min(first.values)), float(np.max(first.values))
    trajectory: dict[str, Any] = {first.name: PiecewiseLinear.ramp(low, high, ramp_start, ramp_end)}
    held = {}
    for axis in axes[1:]:
        middle = 0.5 * (float(np.min(axis.values)) + float(np.max(axis.values)))
        trajectory[axis.name] = middle
        held[axis.name] = middle
    limits = result.table.limit_envelope
    amplitude = LOAD_STEP_FRACTION * max(abs(float(limits[0])), abs(float(limits[1])))
    load_time = 0.5 * (ramp_start + ramp_end)
    if not (np.isfinite(amplitude) and amplitude > 0):
        notes.append(f"no load step: output limits {list(limits)} give no finite, positive size for it")
        amplitude = 0.0
    scenario = Scenario(
        duration=duration,
        trajectory=trajectory,
        reference=PiecewiseLinear.step(1.0),
        load_steps=(LoadStep(load_time, amplitude),) if amplitude > 0 else (),
    )
    description = {
        "kind": "default",
        "time_scale_s": scale,
        "time_scale_basis": basis,
        "ramp": {"variable": first.name, "from": low, "to": high, "start_s": ramp_start, "end_s": ramp_end},
        "held": held,
        "reference_step": 1.0,
        "load_step": {"time_s": load_time, "amplitude": amplitude},
        "duration_s": duration,
        "pass_rule": "stable (no divergence, growth or saturated oscillation); no scenario limits",
        "notes": notes,
    }
    return scenario, description

"""What a time-domain run is asked to do: a scenario of our own description.

A :class:`Scenario` names how long to run, how the scheduling variables move
(piecewise-linear paths in time), what the output should follow (the
reference), which load (input-disturbance) steps hit the plant, and what the
controller step gets besides the error: a feedforward term and run-time
output limits (:mod:`.signals`).  Optional :class:`ScenarioSpecs` turn the
run into a pass/fail check.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .signals import Feedforward, LimitStep

__all__ = ["LoadStep", "PiecewiseLinear", "Scenario", "ScenarioSpecs"]


def _finite(value: float, what: str) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a number; got {value!r}") from None
    if not math.isfinite(number):
        raise InputError(f"{what} must be finite; got {value!r}")
    return number


@dataclass(frozen=True, eq=False)
class PiecewiseLinear:
    """A signal of time given by breakpoints, held constant outside them.

    Parameters
    ----------
    times : array_like, shape (n,)
        Breakpoint times in seconds, non-decreasing.  Two equal consecutive
        times make a jump; at the jump the later value holds
        (right-continuous).
    values : array_like, shape (n,)
        Signal values at the breakpoints (units of the signal).
    """

    times: np.ndarray
    values: np.ndarray

    def __post_init__(self) -> None:
        times = np.atleast_1d(np.asarray(self.times, dtype=float))
        values = np.atleast_1d(np.asarray(self.values, dtype=float))
        if times.ndim != 1 or times.shape != values.shape or times.size == 0:
            raise InputError(
                f"a piecewise-linear signal needs matching 1-D times and values; got shapes {times.shape} and {values.shape}"
            )
        if not (np.all(np.isfinite(times)) and np.all(np.isfinite(values))):
            raise InputError("piecewise-linear breakpoints must be finite")
        if np.any(np.diff(times) < 0):
            raise InputError(f"breakpoint times must be non-decreasing; got {times.tolist()}")
        if np.any((times[2:] == times[1:-1]) & (times[1:-1] == times[:-2])):
            raise InputError("at most two breakpoints may share one time (a jump)")
        times.setflags(write=False)
        values.setflags(write=False)
        object.__setattr__(self, "times", times)
        object.__setattr__(self, "values", values)

    @classmethod
    def constant(cls, value: float) -> PiecewiseLinear:
        """A constant signal ``value``."""
        return cls([0.0], [_finite(value, "constant value")])

    @classmethod
    def ramp(cls, start: float, end: float, t_start: float, t_end: float) -> PiecewiseLinear:
        """``start`` until ``t_start`` s, linear to ``end`` at ``t_end`` s, then held."""
        t_start, t_end = _finite(t_start, "ramp start time"), _finite(t_end, "ramp end time")
        if not t_end > t_start:
            raise InputError(f"a ramp must end after it starts; got {t_start} s to {t_end} s")
        return cls([t_start, t_end], [_finite(start, "ramp start"), _finite(end, "ramp end")])

    @classmethod
    def step(cls, value: float, time: float = 0.0, initial: float = 0.0) -> PiecewiseLinear:
        """``initial`` before ``time`` s, ``value`` from ``time`` on (a jump)."""
        time = _finite(time, "step time")
        return cls([time, time], [_finite(initial, "step initial value"), _finite(value, "step value")])

    def __call__(self, t: np.ndarray) -> np.ndarray:
        """Evaluate at times ``t`` (s); returns an array of ``t``'s shape."""
        t = np.asarray(t, dtype=float)
        times, values = self.times, self.values
        # side="right" picks the last of two equal times, so a jump is
        # right-continuous and no segment of zero length is ever divided by.
        index = np.searchsorted(times, t, side="right") - 1
        inside = (index >= 0) & (index < times.size - 1)
        low = np.clip(index, 0, times.size - 1)
        high = np.clip(index + 1, 0, times.size - 1)
        span = np.where(inside, times[high] - times[low], 1.0)
        fraction = np.where(inside, (t - times[low]) / span, 0.0)
        result = values[low] + fraction * (values[high] - values[low])
        return np.where(index < 0, values[0], np.where(index >= times.size - 1, values[-1], result))

    @property
    def jumps(self) -> tuple[tuple[float, float, float], ...]:
        """``(time, before, after)`` for each jump, in time order."""
        same = np.flatnonzero(self.times[1:] == self.times[:-1])
        return tuple(
            (float(self.times[i]), float(self.values[i]), float(self.values[i + 1]))
            for i in same
            if self.values[i] != self.values[i + 1]
        )

    def to_dict(self) -> dict:
        """Breakpoints as plain lists."""
        return {"times": self.times.tolist(), "values": self.values.tolist()}


@dataclass(frozen=True)
class LoadStep:
    """A step of input disturbance (load) added to the plant input.

    Parameters
    ----------
    time : float
        When the step starts, s.  It takes effect at the first controller
        sample at or after this time (the simulator holds the disturbance
        over each sample interval, like the control signal).
    amplitude : float
        Size of the step in plant-input units (the controller output's
        units), added on top of earlier steps.
    """

    time: float
    amplitude: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "time", _finite(self.time, "load step time"))
        object.__setattr__(self, "amplitude", _finite(self.amplitude, "load step amplitude"))
        if self.time < 0:
            raise InputError(f"load step time must be >= 0 s; got {self.time}")


@dataclass(frozen=True)
class ScenarioSpecs:
    """Pass/fail limits a run is checked against; ``None`` means not checked.

    Parameters
    ----------
    max_overshoot : float, optional
        Largest allowed overshoot of the reference step, percent of the step.
    max_settling_time : float, optional
        Largest allowed settling time after the reference step, s.
    max_error : float, optional
        Largest allowed absolute tracking error in the error window, output units.
    max_rms_error : float, optional
        Largest allowed RMS tracking error in the error window, output units.
    max_saturation_fraction : float, optional
        Largest allowed fraction (0..1) of the run spent in output saturation.
    """

    max_overshoot: float | None = None
    max_settling_time: float | None = None
    max_error: float | None = None
    max_rms_error: float | None = None
    max_saturation_fraction: float | None = None

    def __post_init__(self) -> None:
        for name in ("max_overshoot", "max_settling_time", "max_error", "max_rms_error", "max_saturation_fraction"):
            value = getattr(self, name)
            if value is not None:
                value = _finite(value, name)
                if value < 0:
                    raise InputError(f"{name} must be >= 0; got {value}")
                object.__setattr__(self, name, value)

    def to_dict(self) -> dict:
        """The limits as a plain dict (``None`` where unchecked)."""
        return {
            "max_overshoot": self.max_overshoot,
            "max_settling_time": self.max_settling_time,
            "max_error": self.max_error,
            "max_rms_error": self.max_rms_error,
            "max_saturation_fraction": self.max_saturation_fraction,
        }


@dataclass(frozen=True, eq=False)
class Scenario:
    """One closed-loop run along a path of operating points.

    Parameters
    ----------
    duration : float
        Length of the run, s (samples at ``0 <= t <= duration``).
    trajectory : mapping of str to PiecewiseLinear or float
        Path of every scheduling variable in time, by axis name (a number
        holds the variable constant), in the axis's own unit.
    reference : PiecewiseLinear or float, optional
        What the output should follow (output units).  A number is a step
        from 0 at t = 0 to that value.  Default: unit step.
    load_steps : sequence of LoadStep, optional
        Input-disturbance steps.
    specs : ScenarioSpecs, optional
        Pass/fail limits.
    settle_band : float, optional
        Settling band as a fraction of the reference step (default 0.02,
        i.e. 2 %; common practice, no source).
    error_from : float, optional
        Start of the window (s) over which RMS and maximum tracking error
        are measured (default 0: the whole run).
    feedforward : Feedforward, optional
        Feedforward term of the controller step, added before saturation
        (default: none, i.e. 0).
    limit_steps : sequence of LimitStep, optional
        Run-time output limits of the controller step and when they change
        (default: none, the table's limits throughout).
    """

    duration: float
    trajectory: Mapping[str, PiecewiseLinear]
    reference: PiecewiseLinear = field(default_factory=lambda: PiecewiseLinear.step(1.0))
    load_steps: tuple[LoadStep, ...] = ()
    specs: ScenarioSpecs = field(default_factory=ScenarioSpecs)
    settle_band: float = 0.02
    error_from: float = 0.0
    feedforward: Feedforward | None = None
    limit_steps: tuple[LimitStep, ...] = ()

    def __post_init__(self) -> None:
        duration = _finite(self.duration, "duration")
        if duration <= 0:
            raise InputError(f"duration must be > 0 s; got {duration}")
        object.__setattr__(self, "duration", duration)
        if not isinstance(self.trajectory, Mapping) or not self.trajectory:
            raise InputError("a scenario needs a trajectory: a path for each scheduling variable")
        paths = {}
        for name, path in self.trajectory.items():
            if not isinstance(path, PiecewiseLinear):
                path = PiecewiseLinear.constant(_finite(path, f"value of scheduling variable {name!r}"))
            paths[str(name)] = path
        object.__setattr__(self, "trajectory", paths)
        reference = self.reference
        if not isinstance(reference, PiecewiseLinear):
            reference = PiecewiseLinear.step(_finite(reference, "reference"))
        object.__setattr__(self, "reference", reference)
        steps = tuple(self.load_steps)
        if not all(isinstance(s, LoadStep) for s in steps):
            raise InputError("load_steps must be LoadStep objects")
        object.__setattr__(self, "load_steps", tuple(sorted(steps, key=lambda s: s.time)))
        if not isinstance(self.specs, ScenarioSpecs):
            raise InputError("specs must be a ScenarioSpecs")
        band = _finite(self.settle_band, "settle_band")
        if not 0 < band < 1:
            raise InputError(f"settle_band is a fraction of the step, 0 < band < 1; got {band}")
        object.__setattr__(self, "settle_band", band)
        start = _finite(self.error_from, "error_from")
        if not 0 <= start < duration:
            raise InputError(f"error_from must lie in [0, duration) = [0, {duration}) s; got {start}")
        object.__setattr__(self, "error_from", start)
        if self.feedforward is not None and not isinstance(self.feedforward, Feedforward):
            raise InputError("feedforward must be a Feedforward")
        limit_steps = tuple(self.limit_steps)
        if not all(isinstance(s, LimitStep) for s in limit_steps):
            raise InputError("limit_steps must be LimitStep objects")
        limit_steps = tuple(sorted(limit_steps, key=lambda s: s.time))
        for before, after in itertools.pairwise(limit_steps):
            if before.time == after.time:
                raise InputError(f"two limit steps at {after.time:g} s; give one per time")
        object.__setattr__(self, "limit_steps", limit_steps)

    @property
    def event_times(self) -> tuple[float, ...]:
        """Times at which the run is disturbed, in order: reference
        breakpoints, load steps, limit steps and the feedforward's start."""
        times = {float(t) for t in self.reference.times} | {s.time for s in self.load_steps}
        times |= {s.time for s in self.limit_steps}
        if self.feedforward is not None:
            times.add(self.feedforward.start)
        return tuple(sorted(times))

    def points(self, axis_names: tuple[str, ...], times: np.ndarray) -> np.ndarray:
        """Scheduling-variable values at ``times`` (s), shape ``(K, len(axis_names))``."""
        missing = [name for name in axis_names if name not in self.trajectory]
        if missing:
            raise InputError(
                f"the scenario gives no path for scheduling variable(s) {', '.join(missing)}; "
                f"it has {', '.join(self.trajectory)}"
            )
        times = np.asarray(times, dtype=float)
        return np.stack([self.trajectory[name](times) for name in axis_names], axis=-1)

    def disturbance(self, times: np.ndarray) -> np.ndarray:
        """Summed load at ``times`` (s), plant-input units."""
        times = np.asarray(times, dtype=float)
        load = np.zeros_like(times)
        for step in self.load_steps:
            load = load + np.where(times >= step.time, step.amplitude, 0.0)
        return load

    def to_dict(self) -> dict:
        """The scenario as plain data (for the JSON log)."""
        return {
            "duration": self.duration,
            "trajectory": {name: path.to_dict() for name, path in self.trajectory.items()},
            "reference": self.reference.to_dict(),
            "load_steps": [{"time": s.time, "amplitude": s.amplitude} for s in self.load_steps],
            "specs": self.specs.to_dict(),
            "settle_band": self.settle_band,
            "error_from": self.error_from,
            "feedforward": None if self.feedforward is None else self.feedforward.to_dict(),
            "limit_steps": [s.to_dict() for s in self.limit_steps],
        }

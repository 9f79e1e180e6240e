"""Run a designed cascade at its rates, as the firmware runs it.

At a frozen operating point (every scheduling variable held), the inner
plant and the outer plant part are one continuous system: the inner
plant's output drives the plant part, and a load (in the inner loop's
measurement units, at the plant part's input) adds to it.  It is advanced
exactly over each inner period (zero-order hold, matrix exponential, the
inner loop's computation delay and dead time split at the fraction of a
sample).  Every inner period the inner controller steps on
``reference - measurement``; every ``N``-th the outer one steps first and its
output becomes the inner reference after the outer loop's own computation
delay, held in between.  Both controllers look up and step in the number
format of the C (:class:`gainloom.simulation.controller.TableController`),
with their output saturation and conditional-integration anti-windup; the
outer loop's output limits are therefore the inner loop's reference limits.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import InputError
from ..lti.convert import tf_to_ss
from ..lti.discretize import total_delay
from ..lti.expm import batched_expm
from .controller import TableController
from .metrics import SimulationMetrics, measure
from .plant import split_delay
from .scenario import LoadStep, PiecewiseLinear, Scenario

__all__ = ["CascadeScenario", "LoopRun", "CascadeRun", "held_signal", "run_cascade"]

#: A run whose signals pass this magnitude has diverged and is stopped.
_STOP_MAGNITUDE = 1e100


@dataclass(frozen=True)
class CascadeScenario:
    """A cascade run at a frozen operating point.

    Parameters
    ----------
    duration : float
        Length of the run, s.
    reference_step : float
        Step of the outer reference at t = 0 (outer output units, e.g. rad/s).
    load_time, load_amplitude : float
        Load step: when (s) and how large, in the inner loop's measurement
        units at the outer plant part's input (e.g. A of load torque / Kt).
    outer_point, inner_point : dict of str to float
        The operating point of each loop (every scheduling variable).
    """

    duration: float
    reference_step: float
    load_time: float
    load_amplitude: float
    outer_point: dict[str, float]
    inner_point: dict[str, float]

    def to_dict(self) -> dict[str, Any]:
        """Plain data for the log."""
        return {"duration_s": self.duration, "reference_step": self.reference_step,
                "load_step": {"time_s": self.load_time, "amplitude": self.load_amplitude},
                "outer_point": dict(self.outer_point), "inner_point": dict(self.inner_point)}


@dataclass(frozen=True, eq=False)
class LoopRun:
    """One loop's signals of a cascade run (at its own samples).

    Attributes
    ----------
    name : str
    time : ndarray
        Sample instants, s.
    reference, output, control, unsaturated : ndarray
        Reference, measurement, controller output after and before saturation.
    limits : tuple of float
        Output limits in force (physical units, as the format holds them).
    metrics : SimulationMetrics
    step_window : float or None
        Length of the window the reference step's overshoot and settling are
        measured in (to the next event: a later reference change or the load
        step, or the end of the run), s; ``None`` without a step.
    """

    name: str
    time: np.ndarray
    reference: np.ndarray
    output: np.ndarray
    control: np.ndarray
    unsaturated: np.ndarray
    limits: tuple[float, float]
    metrics: SimulationMetrics
    step_window: float | None = None

    def to_dict(self, series: bool = False) -> dict[str, Any]:
        """Plain data for the log: metrics and the limits (``series``: every sample too)."""
        data: dict[str, Any] = {"name": self.name, "samples": int(self.time.size),
                                "output_limits": list(self.limits), "metrics": self.metrics.to_dict(),
                                "step_window_s": self.step_window}
        if series:
            data["series"] = {key: _finite_list(getattr(self, key))
                              for key in ("time", "reference", "output", "control", "unsaturated")}
        return data


def _finite_list(values: np.ndarray) -> list[float | None]:
    """Samples as floats, ``None`` where a diverged run left no number (strict JSON)."""
    return [float(v) if np.isfinite(v) else None for v in values]


@dataclass(frozen=True, eq=False)
class CascadeRun:
    """A cascade run: one :class:`LoopRun` per loop, inner first."""

    number_format: str
    scenario: CascadeScenario
    loops: tuple[LoopRun, ...]

    @property
    def stable(self) -> bool:
        """No loop shows divergence, growth or a saturated oscillation."""
        return not any(loop.metrics.instability.detected for loop in self.loops)

    def to_dict(self, series: bool = False) -> dict[str, Any]:
        """Plain data for the log (``series``: every sample of every loop too)."""
        return {"number_format": self.number_format, "scenario": self.scenario.to_dict(), "stable": self.stable,
                "loops": [loop.to_dict(series) for loop in self.loops]}


def _state_space(loop: Any, what: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    A, B, C, D = tf_to_ss(loop.num, loop.den)
    if np.any(D != 0):
        raise InputError(f"the cascade simulation needs a strictly proper {what}; it has direct feedthrough")
    return A[0], B[0], C[0]


@dataclass(frozen=True, eq=False)
class _Update:
    """``x[k+1] = phi x + late u[k-d] + early u[k-d-1] + load w``; ``i = ci x``, ``w = cw x``."""

    phi: np.ndarray
    late: np.ndarray
    early: np.ndarray
    load: np.ndarray
    inner_out: np.ndarray
    outer_out: np.ndarray
    whole_delay: int


def _series_update(inner_plant: Any, part: Any, ts: float, delay: float) -> _Update:
    """The exact per-period update of inner plant and plant part in series."""
    Ae, Be, Ce = _state_space(inner_plant, "inner plant")
    Am, Bm, Cm = _state_space(part, "outer plant part")
    ne, nm = Ae.shape[0], Am.shape[0]
    n = ne + nm
    A = np.zeros((n, n))
    A[:ne, :ne], A[ne:, ne:], A[ne:, :ne] = Ae, Am, np.outer(Bm, Ce)
    inputs = np.zeros((n, 2))
    inputs[:ne, 0], inputs[ne:, 1] = Be, Bm  # controller output; load at the plant part's input
    whole, theta = split_delay(total_delay(inner_plant, np.array([ts]), np.array([delay])), np.array([ts]))
    steps = np.array([float(theta[0]), ts - float(theta[0])])
    # Van Loan's block form: exp([[A, B], [0, 0]] h) holds Phi(h) and Gamma(h) B
    augmented = np.zeros((2, n + 2, n + 2))
    augmented[:, :n, :n] = A[None] * steps[:, None, None]
    augmented[:, :n, n:] = inputs[None] * steps[:, None, None]
    block = batched_expm(augmented)
    phi_early, gamma_early = block[0, :n, :n], block[0, :n, n:]
    phi_late, gamma_late = block[1, :n, :n], block[1, :n, n:]
    return _Update(phi=phi_late @ phi_early, late=gamma_late[:, 0], early=phi_late @ gamma_early[:, 0],
                   load=gamma_late[:, 1] + phi_late @ gamma_early[:, 1],
                   inner_out=np.concatenate([Ce, np.zeros(nm)]), outer_out=np.concatenate([np.zeros(ne), Cm]),
                   whole_delay=int(whole[0]))


def _point(schedule: Any, values: dict[str, float]) -> np.ndarray:
    return np.array([[float(values[name]) for name in schedule.axis_names]])


def _controller(table: Any, schedule: Any, values: dict[str, float], count: int, number_format: str) -> Any:
    points = np.repeat(_point(schedule, values), count, axis=0)
    codegen = schedule.codegen
    fixed = number_format in ("q15", "q31")
    return TableController(table, number_format, points,
                           codegen.error_full_scale if fixed else None, codegen.output_full_scale if fixed else None)


def held_signal(times: np.ndarray, values: np.ndarray) -> PiecewiseLinear:
    """A sampled signal held between its changes, as a :class:`PiecewiseLinear` with a jump at each change.

    The inner loop's reference is the outer loop's held output: its changes
    are the events its overshoot and settling are measured between.
    """
    finite = np.isfinite(values)
    times, values = times[finite], values[finite]
    if values.size == 0:
        return PiecewiseLinear.constant(0.0)
    changes = np.flatnonzero(np.diff(values) != 0) + 1
    breaks_t = [float(times[0])] + [float(t) for k in changes for t in (times[k], times[k])]
    breaks_v = [float(values[0])] + [float(v) for k in changes for v in (values[k - 1], values[k])]
    return PiecewiseLinear(np.array(breaks_t), np.array(breaks_v))


def _loop_run(name: str, schedule: Any, time: np.ndarray, period: float, signals: dict[str, np.ndarray],
              limits: tuple[float, float], reference: PiecewiseLinear, loads: tuple[LoadStep, ...]) -> LoopRun:
    trajectory = {axis: PiecewiseLinear.constant(0.0) for axis in schedule.axis_names}
    scenario = Scenario(duration=float(time[-1]) if time[-1] > 0 else period, trajectory=trajectory,
                        reference=reference, load_steps=loads)
    metrics = measure(time, np.full(time.size, period), signals["reference"], signals["output"],
                      signals["unsaturated"], limits, scenario)
    window = None
    if metrics.step_time is not None:
        later = [t for t in scenario.event_times if t > metrics.step_time]
        window = (later[0] if later else float(time[-1]) + period) - metrics.step_time
    return LoopRun(name=name, time=time, limits=limits, metrics=metrics, step_window=window, **signals)


def run_cascade(cascade: Any, schedules: tuple[Any, ...], tables: tuple[Any, ...], scenario: CascadeScenario,
                number_format: str = "float32") -> CascadeRun:
    """Simulate a designed two-loop cascade (module docstring).

    Parameters
    ----------
    cascade : Cascade
    schedules, tables : tuple
        Each loop's schedule and gain table, inner first (as in
        :class:`gainloom.design.cascade.CascadeDesign`, or read from the
        design folder's gains files).
    scenario : CascadeScenario
    number_format : str
        Controller arithmetic (:data:`gainloom.simulation.SIMULATION_FORMATS`);
        fixed point uses each loop's ``codegen`` full scales.

    Returns
    -------
    CascadeRun
    """
    inner_sched, outer_sched = schedules
    inner_loop, outer_loop = cascade.loops
    inner_models = inner_sched.evaluate(_point(inner_sched, scenario.inner_point))
    outer_models = outer_sched.evaluate(_point(outer_sched, scenario.outer_point))
    ts = float(inner_models.sample_period[0])
    factor = outer_loop.rate_factor
    update = _series_update(inner_models.plant, outer_models.plant, ts, float(inner_models.delay[0]))
    count = int(np.floor(scenario.duration / ts + 1e-9)) + 1
    outer_count = (count - 1) // factor + 1
    inner_ctl = _controller(tables[0], inner_sched, scenario.inner_point, count, number_format)
    outer_ctl = _controller(tables[1], outer_sched, scenario.outer_point, outer_count, number_format)
    outer_delay = round(float(outer_models.delay[0]))
    inner = {k: np.full(count, np.nan) for k in ("reference", "output", "control", "unsaturated")}
    outer = {k: np.full(outer_count, np.nan) for k in ("reference", "output", "control", "unsaturated")}
    times = np.arange(count) * ts
    load = np.where(times >= scenario.load_time, scenario.load_amplitude, 0.0)
    x = np.zeros(update.phi.shape[0])
    reference = 0.0
    for k in range(count):
        if not np.all(np.abs(x) < _STOP_MAGNITUDE):
            break
        if k % factor == 0:
            m = k // factor
            outer["reference"][m], outer["output"][m] = scenario.reference_step, float(update.outer_out @ x)
            outer["control"][m], outer["unsaturated"][m] = outer_ctl.step(m, scenario.reference_step,
                                                                          outer["output"][m])
            reference = float(outer["control"][m - outer_delay]) if m >= outer_delay else 0.0
        inner["reference"][k], inner["output"][k] = reference, float(update.inner_out @ x)
        inner["control"][k], inner["unsaturated"][k] = inner_ctl.step(k, reference, inner["output"][k])
        lag = k - update.whole_delay
        newer = inner["control"][lag] if lag >= 0 else 0.0
        older = inner["control"][lag - 1] if lag >= 1 else 0.0
        x = update.phi @ x + update.late * newer + update.early * older + update.load * load[k]
    outer_times = times[::factor][:outer_count]
    loads = (LoadStep(scenario.load_time, scenario.load_amplitude),)
    runs = (
        _loop_run(inner_loop.name, inner_sched, times, ts, inner, inner_ctl.limits, held_signal(times, inner["reference"]),
                  ()),
        _loop_run(outer_loop.name, outer_sched, outer_times, factor * ts, outer, outer_ctl.limits,
                  PiecewiseLinear.step(scenario.reference_step), loads),
    )
    return CascadeRun(number_format=number_format, scenario=scenario, loops=runs)

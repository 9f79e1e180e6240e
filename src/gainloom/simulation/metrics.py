"""Numbers that judge a run: tracking error, overshoot, settling, saturation
and a growth detector for instability.

Definitions
-----------
- Tracking error ``e = r - y`` at the samples; RMS weighted by each
  sample's period, over ``t >= error_from``.
- Overshoot and settling refer to the reference's first jump (a step), in
  the window from the jump to the next event (a later reference breakpoint,
  load step, limit step or the feedforward's start) or the end of the run.  Overshoot: largest excursion past
  the new reference value, percent of the step.  Settling time: from the
  jump to the first sample after which ``|y - r|`` stays within
  ``settle_band * |step|`` to the window's end; ``None`` if it never does.
- Load responses: largest ``|r - y|`` from the load step to the next event,
  and the recovery time back into the same absolute band (band of the
  reference step, or of the largest ``|r|`` when there is no step, else
  of the peak deviation itself).
- Instability (first criterion that fires):
  ``diverged``: a non-finite value (a run is stopped once ``|y|`` passes
  1e100) or ``|e| > 1e6 * scale``, where scale is the largest of ``|r|``
  and of ``|y|`` over the first 3 samples after each event (the start, a
  other event): the size of the run's excitation;
  ``growing``: the run cut into 8 equal time windows, the peak ``|e|`` in
  each of the last three windows is at least 1.5 times that of the window
  before, and the last peak exceeds ``1e-6 * scale`` (geometric growth;
  linear or quadratic drift under a ramp does not fire);
  ``limit_cycle``: in each of the last two windows the controller output
  changes between unsaturated, low rail and high rail (the limits in force
  at its sample) at least 4 times (a
  saturated oscillation; a steady saturation at one rail is not flagged
  here, it shows in the saturation time).
  A loop whose growth is slower than 1.5 times per eighth of the run is
  not flagged: lengthen the run to see it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Instability", "LoadResponse", "SimulationMetrics", "measure"]

DIVERGENCE_FACTOR = 1e6
GROWTH_WINDOWS = 8
GROWTH_RATIO = 1.5
GROWTH_RUN = 3


@dataclass(frozen=True)
class Instability:
    """Verdict of the growth detector.

    Attributes
    ----------
    detected : bool
    kind : str or None
        ``"diverged"``, ``"growing"``, ``"limit_cycle"`` or ``None``.
    time : float or None
        When it was first seen, s.
    detail : str
        One line saying what fired.
    """

    detected: bool
    kind: str | None
    time: float | None
    detail: str


@dataclass(frozen=True)
class LoadResponse:
    """Response to one load step: peak ``|e|`` (output units) and recovery time (s, ``None`` if not)."""

    time: float
    amplitude: float
    peak_deviation: float
    recovery_time: float | None


@dataclass(frozen=True)
class SimulationMetrics:
    """Everything measured on one run (see the module docstring)."""

    rms_error: float
    max_error: float
    step_time: float | None
    step_size: float | None
    overshoot: float | None
    settling_time: float | None
    saturation_time: float
    saturation_fraction: float
    load_responses: tuple[LoadResponse, ...]
    instability: Instability

    def to_dict(self) -> dict:
        """Plain data for the JSON log."""
        return {
            "rms_error": self.rms_error,
            "max_error": self.max_error,
            "step_time": self.step_time,
            "step_size": self.step_size,
            "overshoot_percent": self.overshoot,
            "settling_time": self.settling_time,
            "saturation_time": self.saturation_time,
            "saturation_fraction": self.saturation_fraction,
            "load_responses": [
                {
                    "time": r.time,
                    "amplitude": r.amplitude,
                    "peak_deviation": r.peak_deviation,
                    "recovery_time": r.recovery_time,
                }
                for r in self.load_responses
            ],
            "instability": {
                "detected": self.instability.detected,
                "kind": self.instability.kind,
                "time": self.instability.time,
                "detail": self.instability.detail,
            },
        }


def _settle(times: np.ndarray, deviation: np.ndarray, band: float, start: float) -> float | None:
    """Time from ``start`` to the first sample after which ``deviation <= band`` holds."""
    outside = np.flatnonzero(~(deviation <= band))
    if outside.size == 0:
        return 0.0
    last = outside[-1]
    if last + 1 >= times.size:
        return None
    return float(times[last + 1] - start)


def _window(times: np.ndarray, start: float, stop: float) -> np.ndarray:
    return (times >= start) & (times < stop)


def measure(
    times: np.ndarray,
    periods: np.ndarray,
    reference: np.ndarray,
    output: np.ndarray,
    unsaturated: np.ndarray,
    limits: tuple[float | np.ndarray, float | np.ndarray],
    scenario,
) -> SimulationMetrics:
    """Measure one run.

    Parameters
    ----------
    times, periods : ndarray, shape (K,)
        Sample instants and the period of each sample, s.
    reference, output : ndarray, shape (K,)
        ``r`` and ``y`` at the samples (output units); ``y`` is NaN after
        a run stopped by divergence.
    unsaturated : ndarray, shape (K,)
        Controller output before saturation.
    limits : tuple of float or of ndarray, shape (K,)
        Output saturation ``(u_min, u_max)`` in force at each sample
        (tabulated or run-time limits vary).
    scenario : Scenario
        The scenario (events, band, error window).
    """
    error = reference - output
    finite = np.isfinite(error)
    window = times >= scenario.error_from
    usable = window & finite
    if np.any(usable):
        weights = periods[usable]
        rms = float(np.sqrt(np.sum(weights * error[usable] ** 2) / np.sum(weights)))
        peak = float(np.max(np.abs(error[usable])))
    else:
        rms = peak = float("nan")
    if not np.all(finite[window]):
        rms = peak = float("inf")

    events = list(scenario.event_times)
    end = float(times[-1]) + float(periods[-1])

    def next_event(after: float) -> float:
        later = [t for t in events if t > after]
        return later[0] if later else end

    step_time = step_size = overshoot = settling = None
    jumps = scenario.reference.jumps
    if jumps:
        step_time, before, after = jumps[0]
        step_size = after - before
        inside = _window(times, step_time, next_event(step_time))
        if np.any(inside) and np.all(finite[inside]):
            excursion = np.sign(step_size) * (output[inside] - after)
            overshoot = float(max(0.0, np.max(excursion)) / abs(step_size) * 100.0)
            settling = _settle(
                times[inside], np.abs(output[inside] - after), scenario.settle_band * abs(step_size), step_time
            )
    scale_ref = abs(step_size) if step_size else float(np.max(np.abs(reference)))

    responses = []
    for load in scenario.load_steps:
        inside = _window(times, load.time, next_event(load.time))
        if not np.any(inside) or not np.all(finite[inside]):
            responses.append(LoadResponse(load.time, load.amplitude, float("inf"), None))
            continue
        deviation = np.abs(error[inside])
        deviation_peak = float(np.max(deviation))
        band = scenario.settle_band * (scale_ref if scale_ref > 0 else deviation_peak)
        responses.append(
            LoadResponse(load.time, load.amplitude, deviation_peak, _settle(times[inside], deviation, band, load.time))
        )

    low, high = limits
    saturated = (unsaturated > high) | (unsaturated < low)
    saturation_time = float(np.sum(periods[saturated & np.isfinite(unsaturated)]))
    instability = detect_instability(times, periods, reference, output, unsaturated, limits, [0.0] + events)
    return SimulationMetrics(
        rms_error=rms,
        max_error=peak,
        step_time=step_time,
        step_size=step_size,
        overshoot=overshoot,
        settling_time=settling,
        saturation_time=saturation_time,
        saturation_fraction=saturation_time / scenario.duration,
        load_responses=tuple(responses),
        instability=instability,
    )


def detect_instability(
    times: np.ndarray,
    periods: np.ndarray,
    reference: np.ndarray,
    output: np.ndarray,
    unsaturated: np.ndarray,
    limits: tuple[float | np.ndarray, float | np.ndarray],
    events: list[float] | tuple[float, ...] = (0.0,),
) -> Instability:
    """Apply the three criteria of the module docstring in order.

    ``events`` are the times (s) of the start and the scenario's events;
    the output just after them sets the divergence scale.  ``limits`` are
    the limits in force, numbers or one per sample.
    """
    error = reference - output
    span = float(times[-1] + periods[-1])
    edges = np.linspace(0.0, span, GROWTH_WINDOWS + 1)
    starts = np.searchsorted(times, np.asarray(events, dtype=float))
    early = np.unique(np.clip(starts[:, np.newaxis] + np.arange(3), 0, times.size - 1))
    early_output = output[early]
    scale = max(
        float(np.max(np.abs(reference))),
        float(np.max(np.abs(early_output[np.isfinite(early_output)]), initial=0.0)),
        1e-12,
    )
    bad = np.flatnonzero(~np.isfinite(error) | (np.abs(np.nan_to_num(error, nan=np.inf)) > DIVERGENCE_FACTOR * scale))
    if bad.size:
        return Instability(
            True,
            "diverged",
            float(times[bad[0]]),
            f"|r - y| exceeded {DIVERGENCE_FACTOR:g} x {scale:.3g} (or became non-finite) at t = {times[bad[0]]:.6g} s",
        )
    which = np.clip(np.searchsorted(edges, times, side="right") - 1, 0, GROWTH_WINDOWS - 1)
    peaks = np.zeros(GROWTH_WINDOWS)
    np.maximum.at(peaks, which, np.abs(error))
    counts = np.bincount(which, minlength=GROWTH_WINDOWS)
    if np.all(counts > 0):
        recent = peaks[-(GROWTH_RUN + 1):]
        with np.errstate(divide="ignore", invalid="ignore"):
            ratios = recent[1:] / recent[:-1]
        if np.all(ratios >= GROWTH_RATIO) and recent[-1] > 1e-6 * scale:
            return Instability(
                True,
                "growing",
                float(edges[GROWTH_WINDOWS - GROWTH_RUN]),
                "peak |r - y| grew by "
                + ", ".join(f"{r:.3g}x" for r in ratios)
                + f" over the last {GROWTH_RUN} of {GROWTH_WINDOWS} windows (criterion: each >= {GROWTH_RATIO}x)",
            )
        low, high = limits
        rail = np.where(unsaturated > high, 1, np.where(unsaturated < low, -1, 0))
        toggles = [
            int(np.count_nonzero(np.diff(rail[which == w])))
            for w in (GROWTH_WINDOWS - 2, GROWTH_WINDOWS - 1)
        ]
        if min(toggles) >= 4:
            return Instability(
                True,
                "limit_cycle",
                float(edges[GROWTH_WINDOWS - 2]),
                f"the controller output changed between the rails and the linear range {toggles[0]} and {toggles[1]} times "
                "in the last 2 windows (criterion: at least 4 each)",
            )
    return Instability(False, None, None, "no divergence, growth or saturated oscillation detected")

"""The result of one scheduled time-domain run."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..plain import to_plain
from .metrics import SimulationMetrics

__all__ = ["REALISATION", "SimulationResult", "SpecCheck"]


#: The plant realisation the simulator carries the state in (see plant.py).
REALISATION = "controllable canonical (lti.convert.tf_to_ss, the scipy.signal.tf2ss convention), one realisation for every point"


@dataclass(frozen=True)
class SpecCheck:
    """One scenario spec against its measured value (``None``: not measurable, fails)."""

    name: str
    limit: float
    value: float | None
    passed: bool


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """One closed-loop run along a path of operating points.

    Attributes
    ----------
    number_format : str
        Arithmetic the controller ran in.
    structure : str
        Controller structure.
    axis_names : tuple of str
        Scheduling variables, in the columns of ``points``.
    output_limits : tuple of float
        Controller output saturation ``(u_min, u_max)`` of the table (its
        envelope when the limits are tabulated).
    time, sample_period : ndarray, shape (K,)
        Sample instants and the period in force at each, s.
    points : ndarray, shape (K, n_axes)
        Scheduling-variable values at the samples.
    reference, output, error : ndarray, shape (K,)
        ``r``, ``y`` and ``r - y`` (output units; NaN after divergence).
    control, unsaturated : ndarray, shape (K,)
        Controller output after and before saturation.
    disturbance : ndarray, shape (K,)
        Load added to the plant input.
    feedforward : ndarray, shape (K,)
        Feedforward the step got (0 where the scenario has none).
    limits_in_force : tuple of two ndarray, shape (K,)
        Output limits ``(low, high)`` the step used at each sample: the
        table's (tabulated ones at the sample's point) or the run-time
        limits of the scenario; saturation time is measured against them.
    gains : dict of str to ndarray, shape (K,)
        Interpolated coefficients as the controller used them.
    states : dict of str to ndarray, shape (K,)
        Controller states after each sample (e.g. ``integrator``).
    metrics : SimulationMetrics
    checks : tuple of SpecCheck
    warnings : tuple of str
    scenario : dict
        The scenario as plain data.
    """

    number_format: str
    structure: str
    axis_names: tuple[str, ...]
    output_limits: tuple[float, float]
    time: np.ndarray
    sample_period: np.ndarray
    points: np.ndarray
    reference: np.ndarray
    output: np.ndarray
    error: np.ndarray
    control: np.ndarray
    unsaturated: np.ndarray
    disturbance: np.ndarray
    feedforward: np.ndarray
    limits_in_force: tuple[np.ndarray, np.ndarray]
    gains: dict[str, np.ndarray]
    states: dict[str, np.ndarray]
    metrics: SimulationMetrics
    checks: tuple[SpecCheck, ...]
    warnings: tuple[str, ...]
    scenario: dict

    @property
    def stable(self) -> bool:
        """True when the growth detector saw no instability."""
        return not self.metrics.instability.detected

    @property
    def passed(self) -> bool:
        """True when the run is stable and every scenario spec holds."""
        return self.stable and all(check.passed for check in self.checks)

    def to_dict(self, series: bool = True) -> dict:
        """JSON-ready plain data (non-finite numbers as ``None``); ``series=False``
        leaves out the per-sample arrays."""
        data = {
            "number_format": self.number_format,
            "structure": self.structure,
            "axis_names": list(self.axis_names),
            "output_limits": list(self.output_limits),
            "plant_realisation": REALISATION,
            "samples": int(self.time.size),
            "passed": self.passed,
            "stable": self.stable,
            "metrics": self.metrics.to_dict(),
            "checks": [
                {"name": c.name, "limit": c.limit, "value": c.value, "passed": c.passed} for c in self.checks
            ],
            "warnings": list(self.warnings),
            "scenario": self.scenario,
        }
        if series:
            data["series"] = {
                "time": self.time,
                "sample_period": self.sample_period,
                "points": {name: self.points[:, i] for i, name in enumerate(self.axis_names)},
                "reference": self.reference,
                "output": self.output,
                "control": self.control,
                "unsaturated": self.unsaturated,
                "disturbance": self.disturbance,
                "feedforward": self.feedforward,
                "limit_low": self.limits_in_force[0],
                "limit_high": self.limits_in_force[1],
                "gains": self.gains,
                "states": self.states,
            }
        return to_plain(data, "null")

    def summary(self) -> list[str]:
        """Human-readable lines: verdict, metrics, checks, warnings."""
        m = self.metrics

        def num(value: float | None, unit: str = "") -> str:
            return "-" if value is None else f"{value:.6g}{unit}"

        verdict = "PASS" if self.passed else "FAIL"
        lines = [
            (f"{verdict}: {self.structure} controller in {self.number_format}, {self.time.size} samples "
             f"over {self.scenario['duration']:g} s"),
            f"tracking error: RMS {num(m.rms_error)}, max {num(m.max_error)}",
        ]
        if m.step_time is not None:
            lines.append(
                f"reference step of {m.step_size:g} at {m.step_time:g} s: overshoot {num(m.overshoot, ' %')}, "
                f"settling {num(m.settling_time, ' s') if m.settling_time is not None else 'not settled'} "
                f"(band {self.scenario['settle_band'] * 100:g} %)"
            )
        for load in m.load_responses:
            if load.recovery_time is None:
                recovery = "not recovered"
            elif load.recovery_time == 0.0:
                recovery = "stayed within the settling band"
            else:
                recovery = num(load.recovery_time, " s")
            lines.append(
                f"load step of {load.amplitude:g} at {load.time:g} s: peak deviation {num(load.peak_deviation)}, "
                f"recovery {recovery}"
            )
        low, high = (values[np.isfinite(values)] for values in self.limits_in_force)
        if low.size and (np.ptp(low) > 0 or np.ptp(high) > 0):
            where = f"at the limits in force (low {np.min(low):g} to {np.max(low):g}, high {np.min(high):g} to {np.max(high):g})"
        else:
            where = f"at limits [{self.output_limits[0]:g}, {self.output_limits[1]:g}]"
        lines.append(f"saturation: {num(m.saturation_time, ' s')} ({m.saturation_fraction * 100:.3g} % of the run) {where}")
        lines.append(f"stability: {f'UNSTABLE ({m.instability.kind})' if not self.stable else 'ok'}: "
                     f"{m.instability.detail}")
        for check in self.checks:
            mark = "ok" if check.passed else "FAILED"
            lines.append(f"spec {check.name} <= {check.limit:g}: {num(check.value)} {mark}")
        lines += [f"warning: {w}" for w in self.warnings]
        return lines

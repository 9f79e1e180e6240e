"""Specs resolved per operating point, and the closed forms that turn them
into a pole region.

Two standard second-order relations are used to turn time-domain specs into
pole-region bounds for the design (the verification re-checks both on a
discrete step response, because zeros and extra poles move the real values):

* percent overshoot -> damping ratio (exact for an underdamped second-order
  system without zeros; computed by ``schedule.spec_values.overshoot_to_damping``
  when the schedule resolves its specs)::

      zeta = -ln(OS) / sqrt(pi**2 + ln(OS)**2),   OS = overshoot / 100

* 2 % settling time -> decay rate (an *approximation*: the envelope
  ``exp(-zeta wn t)`` of a second-order step response falls under 2 % at
  ``t = ln(50)/(zeta wn) ~ 3.9/(zeta wn)``, rounded to 4)::

      sigma = zeta wn >= 4 / T_settle     (1/s)

In the z-plane a decay rate ``sigma`` is a circle of radius
``exp(-sigma ts)``.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

__all__ = [
    "overshoot_from_damping",
    "decay_from_settling",
    "SETTLING_CONSTANT",
    "SAMPLING_FRACTION",
    "SpecLimits",
]

#: Constant of the 2 % settling approximation ``T_s ~ 4 / (zeta wn)``.
SETTLING_CONSTANT = 4.0

#: Warn when a natural frequency exceeds this fraction of the sampling rate
#: ``2 pi / ts`` (common practice, no source: sample 10x or more faster than
#: the closed-loop bandwidth).
SAMPLING_FRACTION = 0.1

#: Design back-off: how far inside each bound the scheduler aims (damping
#: +0.01, relative bounds 2 %, gain margin +0.5 dB, phase margin +0.5 deg).
#: Our choice (no source): enough to survive interpolation between
#: refined points and float32 rounding, small against engineering margins.
#: Points that meet the specs only on the boundary are designed there and
#: say so in their notes.
BACKOFF = {"damping": 0.01, "relative": 0.02, "gain_margin_db": 0.5, "phase_margin_deg": 0.5}


def overshoot_from_damping(zeta: np.ndarray | float) -> np.ndarray:
    """Percent overshoot ``100 exp(-pi zeta / sqrt(1 - zeta^2))`` (second order)."""
    zeta = np.asarray(zeta, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        value = 100.0 * np.exp(-np.pi * zeta / np.sqrt(1 - zeta**2))
    return np.where(zeta >= 1, 0.0, value)


def decay_from_settling(settling_time: np.ndarray | float) -> np.ndarray:
    """Decay rate ``sigma = 4 / T_s`` [1/s] for a 2 % settling time ``T_s`` [s].

    The approximation ``T_s ~ 4 / (zeta wn)`` of a second-order envelope (see
    the module docstring); verification re-checks the step response.
    """
    return SETTLING_CONSTANT / np.asarray(settling_time, dtype=float)


def _array(values: dict[str, np.ndarray], key: str, count: int) -> np.ndarray:
    value = values.get(key)
    if value is None:
        return np.full(count, np.nan)
    return np.broadcast_to(np.asarray(value, dtype=float), (count,)).copy()


@dataclass(frozen=True, eq=False)
class SpecLimits:
    """Every spec at every point, NaN where not required (all shape (P,)).

    Parameters
    ----------
    min_damping : ndarray
        Damping ratio of every closed-loop pole, the stricter of the written
        ``min_damping`` and the one implied by ``max_overshoot``.
    min_decay : ndarray
        Decay rate ``-Re(s)`` [1/s] from ``max_settling_time`` (4/T_s).
    min_natural_frequency, max_natural_frequency : ndarray
        Bounds on the natural frequency of every closed-loop pole [rad/s]
        (the min bound applies to the dominant, slowest pole).
    max_pole_radius : ndarray
        Bound on ``|z|`` of every closed-loop pole.
    min_gain_margin : ndarray
        dB.
    min_phase_margin : ndarray
        degrees.
    min_delay_margin : ndarray
        seconds.
    max_sensitivity_peak : ndarray
        absolute (``Ms = max |1/(1 + L)|``).
    min_crossover : ndarray
        rad/s; ``|L| >= 1`` up to this frequency (judged on the lowest
        frequency where ``|L|`` falls below 1, ``Margins.crossover``).
    max_crossover : ndarray
        rad/s; ``|L| <= 1`` above this frequency (judged on the highest gain
        crossover, ``Margins.last_crossover``).
    min_bandwidth : ndarray
        rad/s; half-power bandwidth of ``T = L/(1 + L)``
        (:func:`gainloom.lti.bandwidth.closed_loop_bandwidth`).
    max_gain : ndarray
        Bound on the controller's instantaneous gain ``u[k]/e[k]`` (the locus
        gain ``K``: ``kp + ki_ts (+ kd_b)`` or ``kc``).
    system_type : ndarray
        Required number of open-loop integrators (poles at ``z = 1``).
    max_overshoot : ndarray
        Percent, re-checked on the discrete step response.
    max_settling_time : ndarray
        Seconds (2 % band), re-checked on the discrete step response.
    poles : str
        Which closed-loop poles the damping, decay and natural-frequency
        specs judge: ``"dominant"`` or ``"all"`` (``names.POLE_SELECTIONS``).
    """

    min_damping: np.ndarray
    min_decay: np.ndarray
    min_natural_frequency: np.ndarray
    max_natural_frequency: np.ndarray
    max_pole_radius: np.ndarray
    min_gain_margin: np.ndarray
    min_phase_margin: np.ndarray
    min_delay_margin: np.ndarray
    max_sensitivity_peak: np.ndarray
    max_gain: np.ndarray
    system_type: np.ndarray
    max_overshoot: np.ndarray
    max_settling_time: np.ndarray
    min_crossover: np.ndarray
    max_crossover: np.ndarray
    min_bandwidth: np.ndarray
    poles: str = "dominant"

    @classmethod
    def from_values(cls, values: dict[str, np.ndarray], count: int, poles: str = "dominant") -> SpecLimits:
        """Build from ``Schedule.spec_values(points)`` (keys as documented there).

        ``poles`` is the schedule's ``specs.poles`` (one choice for every point).
        """
        settle = _array(values, "max_settling_time", count)
        with np.errstate(divide="ignore", invalid="ignore"):
            decay = decay_from_settling(settle)
        overshoot = _array(values, "max_overshoot", count)
        # spec_values already gives the stricter of min_damping and the
        # damping implied by max_overshoot (schedule.spec_values.overshoot_to_damping)
        damping = _array(values, "min_damping", count)
        return cls(
            min_damping=damping,
            min_decay=decay,
            min_natural_frequency=_array(values, "min_natural_frequency", count),
            max_natural_frequency=_array(values, "max_natural_frequency", count),
            max_pole_radius=_array(values, "max_pole_radius", count),
            min_gain_margin=_array(values, "min_gain_margin", count),
            min_phase_margin=_array(values, "min_phase_margin", count),
            min_delay_margin=_array(values, "min_delay_margin", count),
            max_sensitivity_peak=_array(values, "max_sensitivity_peak", count),
            max_gain=_array(values, "max_gain", count),
            system_type=_array(values, "system_type", count),
            max_overshoot=overshoot,
            max_settling_time=settle,
            min_crossover=_array(values, "min_crossover", count),
            max_crossover=_array(values, "max_crossover", count),
            min_bandwidth=_array(values, "min_bandwidth", count),
            poles=poles,
        )

    @property
    def points(self) -> int:
        """Number of points."""
        return self.min_damping.shape[0]

    def select(self, index: np.ndarray) -> SpecLimits:
        """Limits at a subset (or repetition) of the points."""
        return self.replaced({name: value[index] for name, value in self.as_dict().items()})

    def replaced(self, arrays: dict[str, np.ndarray]) -> SpecLimits:
        """The same pole selection with these per-point arrays (every array field)."""
        return SpecLimits(**arrays, poles=self.poles)

    def tightened(self) -> SpecLimits:
        """The limits moved inside by the design back-off (see ``BACKOFF``).

        The scheduler picks gains against these so that a design is not left
        exactly on a spec boundary, where the firmware's interpolation
        between points and rounding would tip it over; the verdicts always
        use the limits as written.
        """
        b = BACKOFF
        return SpecLimits(
            min_damping=np.minimum(self.min_damping + b["damping"], 0.999),
            min_decay=self.min_decay * (1 + b["relative"]),
            min_natural_frequency=self.min_natural_frequency * (1 + b["relative"]),
            max_natural_frequency=self.max_natural_frequency / (1 + b["relative"]),
            max_pole_radius=self.max_pole_radius - b["relative"] * (1 - self.max_pole_radius),
            min_gain_margin=self.min_gain_margin + b["gain_margin_db"],
            min_phase_margin=self.min_phase_margin + b["phase_margin_deg"],
            min_delay_margin=self.min_delay_margin * (1 + b["relative"]),
            max_sensitivity_peak=self.max_sensitivity_peak / (1 + b["relative"]),
            max_gain=self.max_gain,
            system_type=self.system_type,
            max_overshoot=self.max_overshoot,
            max_settling_time=self.max_settling_time,
            min_crossover=self.min_crossover * (1 + b["relative"]),
            max_crossover=self.max_crossover / (1 + b["relative"]),
            min_bandwidth=self.min_bandwidth * (1 + b["relative"]),
            poles=self.poles,
        )

    def radius_bound(self, ts: np.ndarray) -> np.ndarray:
        """Pole-radius bound in z: the stricter of ``max_pole_radius`` and ``exp(-sigma ts)``."""
        from_decay = np.exp(-np.nan_to_num(self.min_decay, nan=0.0) * np.asarray(ts, float))
        from_decay = np.where(np.isnan(self.min_decay), np.nan, from_decay)
        return np.fmin(self.max_pole_radius, from_decay)

    def as_dict(self) -> dict[str, np.ndarray]:
        """Plain dict of the per-point arrays (every field but ``poles``)."""
        return {f.name: getattr(self, f.name) for f in fields(self) if f.name != "poles"}

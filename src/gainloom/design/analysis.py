"""Everything a reviewer reads about a set of coefficients at a set of points.

:func:`analyse` takes the discretised plant (hold and computation delay
included), a structure and table coefficients per point, and returns the
closed-loop poles in ``z`` and ``s``, damping, natural frequency, pole
radius, margins, a discrete step response's overshoot and settling time, and
a verdict on every spec.  Design uses it on its own choice; ``verify`` uses it
on a gains file, including one tuned by hand.

Pole-region verdicts (the same region the design searches):

* every closed-loop pole: ``|z| < 1`` (stable), damping ``>= min_damping``,
  decay rate ``-ln|z|/ts >= 4/T_s`` (settling approximation),
  ``|z| <= max_pole_radius``;
* a closed-loop pole left where a controller zero cancels a stable plant pole
  must be stable but is not judged by the region specs
  (:mod:`gainloom.design.cancel`);
* the dominant pole (largest ``|z|``, slowest): natural frequency inside
  ``[min_natural_frequency, max_natural_frequency]``.  The band is read on
  the dominant pole only: the fast closed-loop poles that the computation
  delay and the hold bring (near ``z = 0``, natural frequency near Nyquist)
  would otherwise fail every finite upper bound.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import SimpleNamespace

import numpy as np
import scipy.signal

from ..lti.bandwidth import closed_loop_bandwidth
from ..lti.closed_loop import closed_loop_poles
from ..lti.loop import Loop
from ..lti.margins import loop_margins
from ..lti.poles import damping_and_frequency
from ..spec_registry import SPEC_ORDER, SPECS
from .cancel import cancelled_zeros, mask_cancelled
from .dominant import judged_poles
from .pole_origin import pole_origins
from .spec_limits import SpecLimits
from .structures import locus_from_coefficients, open_loop, physical_from_coefficients

__all__ = ["SETTLING_BAND", "PointAnalysis", "analyse", "integrator_count", "judge", "pole_metrics", "step_metrics"]

#: Settling band of the step-response check (2 %, as ``max_settling_time``).
SETTLING_BAND = 0.02

#: Longest discrete step response simulated, in samples.
MAX_STEP_SAMPLES = 60000

#: Tolerance for counting an open-loop pole as an integrator (|z - 1|).
INTEGRATOR_TOLERANCE = 1e-9


@dataclass(frozen=True, eq=False)
class PointAnalysis:
    """Per-point analysis of a table (all arrays have leading shape (P,)).

    Attributes
    ----------
    structure : str
    coefficients : dict of str to ndarray
        Table coefficients.
    physical : dict of str to ndarray
        Physical gains (kp, ki [1/s], kd [s], tf [s]; lead/lag corners rad/s).
    gain : ndarray
        Controller instantaneous gain ``K`` (locus gain).
    sample_period : ndarray
        Seconds.
    poles_z, poles_s : ndarray of complex, shape (P, n)
        Closed-loop poles in ``z`` and their equivalents ``ln(z)/ts`` [rad/s],
        sorted by decreasing ``|z|``.
    damping : ndarray
        Smallest damping ratio over the judged closed-loop poles (dominant
        ones under ``specs: {poles: dominant}``, :mod:`gainloom.design.dominant`).
    damping_pole_s : ndarray of complex
        That least-damped judged pole as ``ln(z)/ts`` [rad/s]; among equal
        damping (e.g. all real) the slowest.
    damping_pole_frequency : ndarray
        Natural frequency ``|s|`` of the same pole, rad/s (the ``ωn`` that
        belongs to ``damping``).
    damping_pole_origin : tuple of str
        What that pole's locus branch starts at
        (:data:`gainloom.design.pole_origin.ORIGIN_KINDS`).
    damping_pole_start_z : ndarray of complex
        The open-loop pole (``z``) it starts at.
    natural_frequency : ndarray
        Natural frequency of the dominant (slowest) pole, rad/s.
    decay : ndarray
        Smallest decay rate ``-ln|z|/ts`` over the judged poles, 1/s.
    pole_radius : ndarray
        Largest ``|z|``.
    fastest_frequency : ndarray
        Largest natural frequency over the poles, rad/s.
    gain_margin_db, phase_margin, delay_margin, sensitivity_peak : ndarray
        dB, degrees, seconds, absolute.
    crossover : ndarray
        Lowest frequency where ``|L|`` falls below 1, rad/s (the gain
        crossover; ``min_crossover`` is judged on it).
    last_crossover : ndarray
        Highest frequency where ``|L|`` is 1, rad/s (``max_crossover`` is
        judged on it; equal to ``crossover`` for a loop with one crossover).
    bandwidth : ndarray
        Half-power bandwidth of ``T = L/(1 + L)``, rad/s.
    overshoot : ndarray
        Percent, from the discrete step response (NaN if unstable).
    settling_time : ndarray
        Seconds to stay within 2 % (NaN if unstable, inf beyond the horizon).
    system_type : ndarray of int
        Open-loop poles at ``z = 1``.
    values : dict of str to ndarray
        The measured value judged for each spec of ``SPEC_ORDER``.
    limits : SpecLimits
    verdicts : dict of str to ndarray of bool
        True where a spec holds or is not required.
    warnings : tuple of str
    cancelled : ndarray, shape (P, nz)
        Controller zeros that cancel a plant pole (NaN where none); the
        closed-loop pole left there is in ``poles_z`` but not in the region
        metrics (see :mod:`gainloom.design.cancel`).
    """

    structure: str
    coefficients: dict[str, np.ndarray]
    physical: dict[str, np.ndarray]
    gain: np.ndarray
    sample_period: np.ndarray
    poles_z: np.ndarray
    poles_s: np.ndarray
    damping: np.ndarray
    damping_pole_s: np.ndarray
    damping_pole_frequency: np.ndarray
    damping_pole_origin: tuple[str, ...]
    damping_pole_start_z: np.ndarray
    natural_frequency: np.ndarray
    decay: np.ndarray
    pole_radius: np.ndarray
    fastest_frequency: np.ndarray
    gain_margin_db: np.ndarray
    phase_margin: np.ndarray
    delay_margin: np.ndarray
    sensitivity_peak: np.ndarray
    crossover: np.ndarray
    last_crossover: np.ndarray
    bandwidth: np.ndarray
    overshoot: np.ndarray
    settling_time: np.ndarray
    system_type: np.ndarray
    values: dict[str, np.ndarray]
    limits: SpecLimits
    verdicts: dict[str, np.ndarray]
    warnings: tuple[str, ...] = field(default=())
    cancelled: np.ndarray | None = None

    @property
    def points(self) -> int:
        """Number of points."""
        return self.gain.shape[0]

    @property
    def passed(self) -> np.ndarray:
        """True at points where every spec holds."""
        out = np.ones(self.points, dtype=bool)
        for verdict in self.verdicts.values():
            out &= verdict
        return out

    def failed_specs(self, point: int) -> list[str]:
        """Names of the specs that fail at ``point``, in report order."""
        return [name for name in SPEC_ORDER if not self.verdicts[name][point]]


def pole_metrics(poles: np.ndarray, ts: np.ndarray, selection: str = "all") -> dict[str, np.ndarray]:
    """Region metrics of closed-loop poles (batched over leading axes).

    Parameters
    ----------
    poles : ndarray of complex, shape B + (n,)
        Poles in ``z`` (cancelled ones moved to ``z = 0``).
    ts : ndarray
        Sample period in seconds, broadcastable to ``B``.
    selection : str
        Which poles the damping and decay judge: ``"dominant"`` or ``"all"``
        (:func:`gainloom.design.dominant.judged_poles`).

    Returns
    -------
    dict with ``radius`` (max |z|), ``damping`` (min zeta over the judged
    poles), ``least_damped`` (index of that pole along the last axis; among
    equal damping the slowest), ``decay`` (min ``-ln|z|/ts`` over the judged
    poles, 1/s), ``dominant_frequency`` (wn of the largest-|z| pole, rad/s),
    ``fastest_frequency`` (max wn, rad/s), all shape ``B``.
    Non-finite poles (a biproper loop's root at infinity) count as unstable.
    """
    ts = np.asarray(ts, dtype=float)
    tsb = np.broadcast_to(ts[..., None] if ts.ndim else ts, poles.shape)
    if poles.shape[-1] == 0:
        empty = np.zeros(poles.shape[:-1])
        return {"radius": empty, "damping": empty + 1, "least_damped": empty.astype(int), "decay": empty + np.inf,
                "dominant_frequency": empty + np.inf, "fastest_frequency": empty}
    zeta, wn = damping_and_frequency(poles, tsb)
    magnitude = np.abs(poles)
    finite = np.isfinite(magnitude)
    magnitude = np.where(finite, magnitude, np.inf)
    zeta = np.where(finite, zeta, -1.0)
    zeta = np.where(np.isnan(zeta), -1.0, zeta)
    judged = judged_poles(poles, tsb, selection)
    judged_zeta = np.where(judged, zeta, np.inf)
    # least damped judged pole; ties (e.g. every pole real) go to the slowest
    least = np.lexsort((-magnitude, judged_zeta), axis=-1)[..., 0]
    damping = np.take_along_axis(judged_zeta, least[..., None], axis=-1)[..., 0]
    radius = magnitude.max(axis=-1)
    dominant = np.argmax(magnitude, axis=-1)
    dom_wn = np.take_along_axis(wn, dominant[..., None], axis=-1)[..., 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        slowest = np.max(np.where(judged, magnitude, 0.0), axis=-1)
        decay = -np.log(slowest) / np.broadcast_to(ts, radius.shape)
    return {
        "radius": radius,
        "damping": np.where(np.isfinite(damping), damping, 1.0),
        "least_damped": least,
        "decay": decay,
        "dominant_frequency": np.where(finite.all(axis=-1), dom_wn, np.nan),
        "fastest_frequency": np.where(finite, np.where(np.isfinite(wn), wn, np.inf), np.inf).max(axis=-1),
    }


def integrator_count(loop: Loop) -> np.ndarray:
    """Open-loop poles at ``z = 1`` per point (system type).

    Read on the delta-operator form when the loop has one (poles at
    ``g = 0``, per sample ``|g ts|``): a double pole at ``z = 1`` in a
    high-order z-polynomial (plant integrator, PI integrator, filters) comes
    out of the root finder about ``sqrt(eps)`` times the polynomial's scale
    away from 1, beyond the tolerance, while in ``g`` it is an exact zero.
    """
    from ..lti.polynomials import batched_roots

    if loop.delta_den is not None:
        roots = batched_roots(loop.delta_den) * np.asarray(loop.ts, float)[:, None]
        return np.sum(np.abs(roots) < INTEGRATOR_TOLERANCE, axis=-1)
    roots = batched_roots(loop.den)
    return np.sum(np.abs(roots - 1.0) < 1e-6, axis=-1)


def step_metrics(loop: Loop, max_samples: int = MAX_STEP_SAMPLES) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Overshoot and 2 % settling time of the unity-feedback step response.

    The closed loop ``T = L/(1 + L) = N/(D + N)`` is simulated sample by
    sample (``scipy.signal.lfilter``, one call per point) long enough for
    the slowest closed-loop pole to decay to 1e-4 (at most ``max_samples``).

    Returns
    -------
    overshoot : ndarray
        ``100 (max y - y_final)/|y_final|``, percent, ``>= 0``.
    settling_time : ndarray
        Seconds: time of the first sample after which ``|y - y_final|``
        stays within 2 % of ``|y_final|`` (``inf`` if the horizon ends first).
    final : ndarray
        ``y_final = T(1)``.
    Unstable points give NaN for all three.
    """
    points = loop.points
    overshoot = np.full(points, np.nan)
    settling = np.full(points, np.nan)
    final = np.full(points, np.nan)
    closed_den = loop.den + loop.num
    poles = closed_loop_poles(loop, np.ones((points, 1)))[:, 0, :]
    radius = np.max(np.abs(poles), axis=-1) if poles.shape[-1] else np.zeros(points)
    for p in range(points):
        if not radius[p] < 1:
            continue
        with np.errstate(divide="ignore"):
            needed = np.log(1e-4) / np.log(max(radius[p], 1e-300))
        count = int(min(max_samples, max(50, np.ceil(needed) + 20)))
        y_final = np.sum(loop.num[p]) / np.sum(closed_den[p])
        y = scipy.signal.lfilter(loop.num[p], closed_den[p], np.ones(count))
        final[p] = y_final
        scale = abs(y_final) if y_final != 0 else 1.0
        overshoot[p] = max(0.0, 100.0 * (np.max(y * np.sign(y_final or 1.0)) - abs(y_final)) / scale)
        outside = np.flatnonzero(np.abs(y - y_final) > SETTLING_BAND * scale)
        if outside.size == 0:
            settling[p] = 0.0
        elif outside[-1] >= count - 1 or needed > max_samples:
            settling[p] = np.inf
        else:
            settling[p] = (outside[-1] + 1) * float(loop.ts[p])
    return overshoot, settling, final


def _no_margins(count: int) -> SimpleNamespace:
    """Margins left uncomputed (``analyse(..., frequency=False)``): NaN everywhere."""
    nan = np.full(count, np.nan)
    return SimpleNamespace(gain_margin_db=nan, phase_margin=nan, delay_margin=nan, sensitivity_peak=nan,
                           crossover=nan, last_crossover=nan, warnings=())


def _at_least(value: np.ndarray, limit: np.ndarray) -> np.ndarray:
    return np.isnan(limit) | (value >= limit)


def _at_most(value: np.ndarray, limit: np.ndarray) -> np.ndarray:
    return np.isnan(limit) | (value <= limit)


def judge(values: dict[str, np.ndarray], limits: SpecLimits, *, step: bool = True) -> dict[str, np.ndarray]:
    """Verdict per spec of ``SPEC_ORDER``: True where it holds or is not required.

    ``values`` are the measured values of :attr:`PointAnalysis.values`
    (``stable`` holds the largest ``|z|``); without a step response
    (``step=False``) overshoot and settling are not judged.  A NaN value
    fails a required spec.
    """
    verdicts = {"stable": values["stable"] < 1}
    for spec in SPECS:
        if spec.limit_key is None:
            continue
        value, limit = values[spec.name], getattr(limits, spec.limit_key)
        verdicts[spec.name] = _at_least(value, limit) if spec.bound == "min" else _at_most(value, limit)
    if not step:
        for name in ("max_overshoot", "max_settling_time"):
            verdicts[name] = verdicts[name] | np.isnan(values[name])
    return verdicts


def analyse(
    plant: Loop,
    structure: str,
    coefficients: dict[str, np.ndarray],
    limits: SpecLimits,
    *,
    step: bool = True,
    frequency: bool = True,
    origins: bool = True,
) -> PointAnalysis:
    """Analyse table coefficients on the discretised plant at every point.

    Parameters
    ----------
    plant : Loop
        Discrete plant per point (hold and computation delay included).
    structure : str
        Controller structure.
    coefficients : dict of str to ndarray, shape (P,)
        Table coefficients.
    limits : SpecLimits
        Specs per point.
    step : bool
        Simulate the step response for overshoot and settling (default).
    frequency : bool
        Compute margins, crossovers and bandwidth (default).  ``False``
        leaves them NaN (a required frequency-domain spec then fails): for
        callers that judge no such spec, as the tolerance study on a
        schedule without one, where they are most of the cost.
    origins : bool
        Trace the least-damped pole back to the open-loop pole its branch
        starts at (default).  ``False`` reports ``"not traced"``: for the
        tolerance study, which reports no origin and where the trace (many
        root solves per loop) is most of the cost of a pole-only analysis.

    Returns
    -------
    PointAnalysis
    """
    ts = np.asarray(plant.ts, dtype=float)
    coefficients = {k: np.broadcast_to(np.asarray(v, float), (plant.points,)).copy() for k, v in coefficients.items()}
    loop = open_loop(plant, structure, coefficients)
    poles = closed_loop_poles(loop, np.ones((plant.points, 1)))[:, 0, :]
    order = np.argsort(-np.abs(poles), axis=-1, kind="stable")
    poles = np.take_along_axis(poles, order, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        poles_s = np.log(poles) / ts[:, None]
    form = locus_from_coefficients(structure, coefficients)
    zeros = np.where(np.all(np.isfinite(form.zeros), axis=-1, keepdims=True), form.zeros, 0.0)
    zeros[..., 0] = 1.0
    cancelled = cancelled_zeros(zeros, plant.den)
    full_radius = np.max(np.abs(poles), axis=-1) if poles.shape[-1] else np.zeros(plant.points)
    # cancelled plant poles stay in the report but not in the region specs
    metrics = pole_metrics(mask_cancelled(poles, cancelled), ts, limits.poles)
    least = metrics["least_damped"][:, None]
    damping_pole = np.take_along_axis(poles, least, axis=-1)[:, 0] if poles.shape[-1] else np.full(plant.points, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        damping_pole_s = np.log(damping_pole) / ts
    if origins:
        origin, start = pole_origins(loop, plant, damping_pole)
    else:
        origin, start = ("not traced",) * plant.points, np.full(plant.points, complex(np.nan, np.nan))
    if frequency:
        margins = loop_margins(loop, 1.0)
        bandwidth = closed_loop_bandwidth(loop, 1.0)
    else:
        margins = _no_margins(plant.points)
        bandwidth = np.full(plant.points, np.nan)
    if step:
        overshoot, settling, _ = step_metrics(loop)
    else:
        overshoot = settling = np.full(plant.points, np.nan)
    system_type = integrator_count(loop)
    values = {
        "stable": full_radius,
        "min_damping": metrics["damping"],
        "min_decay": metrics["decay"],
        "min_natural_frequency": metrics["dominant_frequency"],
        "max_natural_frequency": metrics["dominant_frequency"],
        "max_pole_radius": metrics["radius"],
        "min_gain_margin": np.asarray(margins.gain_margin_db, float),
        "min_phase_margin": np.asarray(margins.phase_margin, float),
        "min_delay_margin": np.asarray(margins.delay_margin, float),
        "max_sensitivity_peak": np.asarray(margins.sensitivity_peak, float),
        "min_crossover": np.asarray(margins.crossover, float),
        "max_crossover": np.asarray(margins.last_crossover, float),
        "min_bandwidth": bandwidth,
        "max_gain": np.abs(form.gain),
        "system_type": system_type.astype(float),
        "max_overshoot": overshoot,
        "max_settling_time": settling,
    }
    verdicts = judge(values, limits, step=step)
    # A NaN measurement (unstable) fails a required spec: comparisons with
    # NaN are False, which the _at_* helpers keep.
    return PointAnalysis(
        structure=structure,
        coefficients=coefficients,
        physical=physical_from_coefficients(structure, coefficients, ts),
        gain=np.asarray(form.gain, float),
        sample_period=ts,
        poles_z=poles,
        poles_s=poles_s,
        damping=metrics["damping"],
        damping_pole_s=damping_pole_s,
        damping_pole_frequency=np.abs(damping_pole_s),
        damping_pole_origin=origin,
        damping_pole_start_z=start,
        natural_frequency=metrics["dominant_frequency"],
        decay=metrics["decay"],
        pole_radius=metrics["radius"],
        fastest_frequency=metrics["fastest_frequency"],
        gain_margin_db=values["min_gain_margin"],
        phase_margin=values["min_phase_margin"],
        delay_margin=values["min_delay_margin"],
        sensitivity_peak=values["max_sensitivity_peak"],
        crossover=values["min_crossover"],
        last_crossover=values["max_crossover"],
        bandwidth=bandwidth,
        overshoot=overshoot,
        settling_time=settling,
        system_type=system_type,
        values=values,
        limits=limits,
        verdicts=verdicts,
        warnings=tuple(margins.warnings),
        cancelled=cancelled,
    )

"""The design re-judged on the measured data (schedules with ``plant.measured``).

The design runs on the models fitted to the data.  Here the table's
controller is applied to the raw samples of every measured grid point (with
the zero-order hold and the computation delay, on the data's own frequency
grid: :func:`gainloom.lti.data_margins.sampled_loop_on_data`) and the
frequency-domain specs are judged again on them.  A point that passes on
the model but fails on the data fails; so does a point whose margins the
data cannot show (crossover outside the data, a gap at a crossover).
Time-domain specs (damping, overshoot, settling) have no meaning on a
frequency response: they are judged on the model, and kept only where the
data back them (:mod:`gainloom.design.measured_time`): the data bound how
far the true step can be from the model's, and the model must meet its fit
tolerance near the crossover.

The fit error is reported per point over all samples and in the band that
matters, one octave either side of the data-judged crossover.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..lti.data_margins import DataMargins, data_margins, sampled_loop_on_data, step_deviation_bound
from ..lti.polynomials import polymul
from ..lti.sweep_fit import model_response, relative_error
from ..schedule.measured import grid_index
from .measured_time import time_domain_findings
from .spec_limits import SpecLimits
from .structures import controller_polynomials

__all__ = ["CROSSOVER_BAND", "DataCheck", "check_on_data", "merge_data_verdict"]

#: The band where the fit error matters: crossover / 2 .. crossover x 2.
CROSSOVER_BAND = 2.0


@dataclass(frozen=True, eq=False)
class DataCheck:
    """Frequency specs of the table judged on the measured data.

    Attributes
    ----------
    rows : ndarray of int, shape (P,)
        Index of each measured grid point among the design's points.
    margins : DataMargins
        Data-judged values per measured point.
    delay_margin : ndarray, shape (P,)
        ``PM / w_gc`` in seconds on the data.
    fit_error, band_error : ndarray, shape (P,)
        Largest relative fit error over the samples used by the fit, and
        over those within the crossover band (``nan`` without a crossover).
    band_rms : ndarray, shape (P,)
        rms relative fit error within the crossover band.
    step_bound : ndarray, shape (P,)
        Largest difference between the step responses of the loop on the
        data and on the model that the samples allow, fraction of the step
        (:func:`gainloom.lti.data_margins.step_deviation_bound`).
    failed : tuple of tuple of str
        Per point: specs the data fail, and "not judged" where the data
        cannot show the margins.
    labels : tuple of str
        The operating point of each row.
    between_rule : str
        How the plant between grid points was made (an assumption: nothing
        was measured there), for the log.
    """

    rows: np.ndarray
    margins: DataMargins
    delay_margin: np.ndarray
    fit_error: np.ndarray
    band_error: np.ndarray
    band_rms: np.ndarray
    step_bound: np.ndarray
    failed: tuple[tuple[str, ...], ...]
    labels: tuple[str, ...]
    between_rule: str

    @property
    def passed(self) -> bool:
        """True when every measured point passes on its data."""
        return not any(self.failed)

    @property
    def warnings(self) -> tuple[str, ...]:
        """What the data cannot tell or where their grid is coarse, per point (data, not ``warnings.warn``)."""
        return tuple(f"measured data at {self.labels[i]}: {note}" for i, notes in enumerate(self.margins.coverage)
                     for note in notes)

    def as_document(self) -> dict[str, Any]:
        """Plain data for the gains file (``measured``)."""
        m = self.margins
        points = []
        for i, row in enumerate(self.rows):
            points.append({
                "index": int(row), "label": self.labels[i], "passed": not self.failed[i],
                "failed": list(self.failed[i]), "coverage": list(m.coverage[i]),
                "gain_margin_db": float(m.gain_margin_db[i]), "phase_margin_deg": float(m.phase_margin[i]),
                "crossover_rad_s": float(m.crossover[i]), "last_crossover_rad_s": float(m.last_crossover[i]),
                "sensitivity_peak": float(m.sensitivity_peak[i]), "bandwidth_rad_s": float(m.bandwidth[i]),
                "delay_margin_s": float(self.delay_margin[i]),
                "fit_error": float(self.fit_error[i]), "fit_error_near_crossover": float(self.band_error[i]),
                "fit_rms_near_crossover": float(self.band_rms[i]), "step_deviation_bound": float(self.step_bound[i]),
            })
        return {"passed": self.passed, "between_points_model": self.between_rule, "points": points}


def _failures(m: DataMargins, delay_margin: np.ndarray, limits: SpecLimits) -> tuple[tuple[str, ...], ...]:
    """Per point, the frequency specs the data fail, each with value and limit."""
    checks = (
        ("min_gain_margin", m.gain_margin_db, limits.min_gain_margin, "dB", np.less),
        ("min_phase_margin", m.phase_margin, limits.min_phase_margin, "deg", np.less),
        ("min_delay_margin", delay_margin, limits.min_delay_margin, "s", np.less),
        ("max_sensitivity_peak", m.sensitivity_peak, limits.max_sensitivity_peak, "", np.greater),
        ("min_crossover", m.crossover, limits.min_crossover, "rad/s", np.less),
        ("max_crossover", m.last_crossover, limits.max_crossover, "rad/s", np.greater),
        ("min_bandwidth", m.bandwidth, limits.min_bandwidth, "rad/s", np.less),
    )
    out = []
    for p in range(m.judged.size):
        found = []
        if not m.judged[p]:
            found.append("not judged on the data: " + "; ".join(m.coverage[p]))
        for name, value, limit, unit, worse in checks:
            if np.isfinite(limit[p]) and np.isfinite(value[p]) and worse(value[p], limit[p]):
                found.append(f"{name} on the data: {value[p]:.4g} {unit} against {limit[p]:.4g}".replace("  ", " "))
        out.append(tuple(found))
    return tuple(out)


def check_on_data(sched, points: np.ndarray, structure: str, coefficients: dict[str, np.ndarray],
                  limits: SpecLimits, analysis=None) -> DataCheck | None:
    """Judge the table's frequency specs on the measured samples, and how far they back its time-domain ones.

    Parameters
    ----------
    sched : Schedule
    points : ndarray, shape (Q, n_axes)
        The design's operating points (the grid, plus any inserted by
        refinement, which have no data).
    structure : str
    coefficients : dict of str to ndarray (Q,)
    limits : SpecLimits
        Specs at ``points``.
    analysis : PointAnalysis, optional
        The analysis on the model at ``points``; its step overshoot and
        settling time are judged with the data's step bound.  Without it
        only the pole specs' trust is judged.

    Returns
    -------
    DataCheck or None
        ``None`` when the plant is not measured.
    """
    measured = sched.family.plant.measured
    if measured is None:
        return None
    rows = grid_index(np.asarray(sched.points, dtype=float), np.asarray(points, dtype=float))
    ts = np.asarray(sched.sampling.period, dtype=float)
    fit = measured.fit
    model = model_response(fit.num, fit.den, fit.dead_time, np.nan_to_num(measured.w, nan=1.0))
    loop, model_loop = (_loop_on(sched, structure, coefficients, rows, ts, plant)
                        for plant in (measured.response, np.where(np.isfinite(measured.w), model, np.nan)))
    margins = data_margins(measured.w, loop)
    with np.errstate(all="ignore"):
        delay_margin = np.where(np.isfinite(margins.phase_margin),
                                np.radians(np.mod(margins.phase_margin, 360.0)) / margins.gain_crossover, np.inf)
    error = relative_error(model, measured.response)
    used = np.isfinite(error) & ~fit.outliers
    wc = margins.gain_crossover[:, np.newaxis]
    band = used & (measured.w >= wc / CROSSOVER_BAND) & (measured.w <= wc * CROSSOVER_BAND)
    with np.errstate(all="ignore"):
        band_error = np.where(np.any(band, axis=1), np.max(np.where(band, error, 0.0), axis=1), np.nan)
        band_rms = np.sqrt(np.sum(np.where(band, error, 0.0) ** 2, axis=1) / np.sum(band, axis=1))
    step_bound = step_deviation_bound(measured.w, loop, model_loop, ts)
    selected = limits.select(rows)
    overshoot = settling = None
    if analysis is not None:
        overshoot, settling = (np.asarray(v, float)[rows] for v in (analysis.overshoot, analysis.settling_time))
    timed = time_domain_findings(selected, step_bound, band_rms, measured.settings.tolerance, overshoot, settling)
    frequency = _failures(margins, delay_margin, selected)
    return DataCheck(
        rows=rows, margins=margins, delay_margin=delay_margin,
        fit_error=np.max(np.where(used, error, 0.0), axis=1), band_error=band_error, band_rms=band_rms,
        step_bound=step_bound, failed=tuple(f + s for f, s in zip(frequency, timed)),
        labels=tuple(sched.describe_point(p) for p in sched.points), between_rule=measured.between_rule,
    )


def _loop_on(sched, structure: str, coefficients: dict[str, np.ndarray], rows: np.ndarray, ts: np.ndarray,
             plant: np.ndarray) -> np.ndarray:
    """The table's whole controller (C(z), then the filter sections) around ``plant`` samples at the grid points."""
    num, den = controller_polynomials(structure, {k: np.asarray(v, float)[rows] for k, v in coefficients.items()})
    filters = sched.filters_at(sched.points)
    if filters is not None:
        fnum, fden = filters.discrete(ts)
        num, den = polymul(num, fnum), polymul(den, fden)
    return sampled_loop_on_data(sched.family.plant.measured.w, plant, ts, np.asarray(sched.sampling.delay, float),
                                num, den)


def merge_data_verdict(status, notes, binding, check: DataCheck | None):
    """Status, notes and binding spec per design point with the data's verdict folded in.

    A point that fails on its data fails, with the data's findings as notes
    and ``measured_data`` as its binding reason.
    """
    if check is None or check.passed:
        return tuple(status), tuple(notes), tuple(binding)
    status, notes, binding = list(status), [list(n) for n in notes], list(binding)
    for i, row in enumerate(check.rows):
        if check.failed[i]:
            if status[row] == "pass":
                notes[row].append("passes on the fitted model but fails on the measured data")
                binding[row] = "measured_data"
            status[row] = "fail"
            notes[row].extend(check.failed[i])
    return tuple(status), tuple(tuple(n) for n in notes), tuple(binding)

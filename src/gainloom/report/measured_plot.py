"""``measured.png``: measured and fitted plant responses with the fit error.

Three panels, frequency in rad/s, one colour per operating point (at most
:data:`MAX_POINTS`: the first, the last and those of largest fit error):

* ``|P|`` in dB: the samples as dots, the fitted model as a line, and the
  band the fit tolerance allows around the model (``|model| (1 +- tol)``);
  samples left out of the fit as outliers are crosses;
* the phase of ``P`` in degrees (unwrapped), the same way;
* the relative fit error ``|model - data|/|data|`` per sample, with the
  tolerance line and, per point, the band around the data-judged crossover
  where the error matters (one octave either side).

:func:`measured_curves` computes, :func:`plot_measured` only draws.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..design.measured_check import CROSSOVER_BAND
from ..look import LIMIT, SERIES, new_figure, png_bytes
from ..lti.sweep_fit import model_response, relative_error

__all__ = ["MAX_POINTS", "MeasuredCurves", "measured_curves", "plot_measured"]

#: Most operating points drawn in one plot.
MAX_POINTS = 6
#: Model samples per decade of the drawn fit.
PER_DECADE = 60


@dataclass(frozen=True, eq=False)
class MeasuredCurves:
    """One point's data, model and fit error, ready to draw.

    Attributes
    ----------
    w, data : ndarray
        The samples (rad/s, complex response).
    outliers : ndarray of bool
        Samples left out of the fit.
    w_model, model : ndarray
        The fitted model on a dense grid over the data's band.
    error : ndarray
        Relative fit error per sample.
    crossover : float
        Data-judged gain crossover, rad/s (NaN when absent).
    """

    w: np.ndarray
    data: np.ndarray
    outliers: np.ndarray
    w_model: np.ndarray
    model: np.ndarray
    error: np.ndarray
    crossover: float


def measured_curves(measured, p: int, crossover: float = math.nan) -> MeasuredCurves:
    """Curves of grid point ``p`` of a :class:`~gainloom.schedule.measured.MeasuredPlant`."""
    keep = np.isfinite(measured.w[p])
    w, data = measured.w[p][keep], measured.response[p][keep]
    fit = measured.fit
    row = slice(p, p + 1)
    count = max(2, math.ceil(np.log10(w[-1] / w[0]) * PER_DECADE))
    w_model = np.geomspace(w[0], w[-1], count)
    model = model_response(fit.num[row], fit.den[row], fit.dead_time[row], w_model[np.newaxis, :])[0]
    at_data = model_response(fit.num[row], fit.den[row], fit.dead_time[row], w[np.newaxis, :])[0]
    return MeasuredCurves(w=w, data=data, outliers=fit.outliers[p][keep], w_model=w_model, model=model,
                          error=relative_error(at_data, data), crossover=float(crossover))


def _phase(values: np.ndarray) -> np.ndarray:
    return np.degrees(np.unwrap(np.angle(values)))


def _chosen(errors: np.ndarray) -> list[int]:
    """First, last, then the largest fit errors, at most MAX_POINTS, in grid order."""
    count = errors.size
    if count <= MAX_POINTS:
        return list(range(count))
    picked = {0, count - 1}
    for p in np.argsort(-errors):
        if len(picked) == MAX_POINTS:
            break
        picked.add(int(p))
    return sorted(picked)


def _draw(axes, curves: MeasuredCurves, colour: str, label: str, tolerance: float) -> None:
    ax_mag, ax_phase, ax_error = axes
    good = ~curves.outliers
    db = 20 * np.log10(np.abs(curves.data))
    model_db = 20 * np.log10(np.abs(curves.model))
    ax_mag.fill_between(curves.w_model, model_db + 20 * math.log10(1 - tolerance),
                        model_db + 20 * math.log10(1 + tolerance), color=colour, alpha=0.15, lw=0)
    ax_mag.semilogx(curves.w_model, model_db, color=colour, lw=1.3, label=label)
    ax_mag.semilogx(curves.w[good], db[good], ls="none", marker=".", ms=3.5, color=colour)
    ax_mag.semilogx(curves.w[~good], db[~good], ls="none", marker="x", ms=6, color=LIMIT)
    # the data's phase is unwrapped on its own and shifted by whole turns onto the model's
    phase_model = _phase(curves.model)
    phase_data = _phase(curves.data)
    turns = np.round((np.interp(curves.w[0], curves.w_model, phase_model) - phase_data[0]) / 360.0)
    phase_data = phase_data + 360.0 * turns
    spread = math.degrees(math.asin(min(tolerance, 1.0)))  # the phase a relative error of tol can turn
    ax_phase.fill_between(curves.w_model, phase_model - spread, phase_model + spread, color=colour, alpha=0.15,
                          lw=0)
    ax_phase.semilogx(curves.w_model, phase_model, color=colour, lw=1.3)
    ax_phase.semilogx(curves.w[good], phase_data[good], ls="none", marker=".", ms=3.5, color=colour)
    ax_phase.semilogx(curves.w[~good], phase_data[~good], ls="none", marker="x", ms=6, color=LIMIT)
    ax_error.loglog(curves.w, np.maximum(curves.error, 1e-5), marker=".", ms=3, lw=0.8, color=colour)
    if math.isfinite(curves.crossover) and curves.crossover > 0:
        ax_error.axvspan(curves.crossover / CROSSOVER_BAND, curves.crossover * CROSSOVER_BAND, color=colour,
                         alpha=0.08, lw=0)
        ax_mag.axvline(curves.crossover, color=colour, lw=0.7, ls=(0, (2, 2)))


def plot_measured(measured, labels: tuple[str, ...], crossover: np.ndarray | None = None) -> bytes:
    """Measured and fitted responses of a measured plant (see the module docstring).

    Parameters
    ----------
    measured : MeasuredPlant
        ``schedule.family.plant.measured``.
    labels : tuple of str
        The operating point of each grid point.
    crossover : ndarray, optional
        Data-judged gain crossover per grid point, rad/s
        (``DesignResult.data_check.margins.gain_crossover``).
    """
    figure = new_figure((9.0, 9.6))
    axes = [figure.add_axes((0.09, 0.70, 0.88, 0.24)), figure.add_axes((0.09, 0.41, 0.88, 0.24)),
            figure.add_axes((0.09, 0.12, 0.88, 0.24))]
    tolerance = measured.settings.tolerance
    for n, p in enumerate(_chosen(measured.fit.rms_error)):
        wc = math.nan if crossover is None else float(crossover[p])
        label = f"{labels[p]}: rms fit error {100 * measured.fit.rms_error[p]:.1f} %"
        _draw(axes, measured_curves(measured, p, wc), SERIES[n % len(SERIES)], label, tolerance)
    axes[2].axhline(tolerance, color=LIMIT, lw=0.9, ls=(0, (5, 3)))
    fit = measured.fit
    model = f"{fit.poles} pole{'s' if fit.poles != 1 else ''}, {fit.zeros} zero{'s' if fit.zeros != 1 else ''}"
    titles = (f"|P| [dB]: samples (dots), fitted model ({model}, dead time) and its ±{100 * tolerance:g} % band; "
              "x: outliers",
              "phase of P [deg] (unwrapped)",
              "relative fit error |model - data| / |data|; dashed: tolerance; shaded: crossover ±1 octave")
    for ax, title in zip(axes, titles):
        ax.set_title(title, fontsize=9, loc="left")
        ax.grid(True, which="both", color="#ececec", lw=0.5)
        ax.tick_params(labelsize=8)
    axes[2].set_xlabel("frequency ω [rad/s] (dotted, top: data-judged crossover)", fontsize=8.5)
    figure.legend(loc="lower center", ncol=2, fontsize=8, frameon=False)
    figure.suptitle("Measured plant: data and fitted model per operating point", fontsize=11, x=0.01, ha="left")
    return png_bytes(figure)

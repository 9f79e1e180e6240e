"""``frequency.png``: the sampled loop's frequency response at the chosen points.

Three panels, frequency in rad/s up to the Nyquist frequency ``pi/ts``:

* ``|L|`` in dB with the 0 dB line, the gain crossover ``wc`` marked and the
  gain margin drawn as a bar at the phase crossover (from ``|L|`` up to 0 dB);
* the phase of ``L`` (unwrapped, degrees) with the -180 deg line and the
  phase margin drawn as a bar at ``wc``;
* ``|S| = |1/(1 + L)|`` and ``|T| = |L/(1 + L)|`` in dB, the sensitivity
  peak ``Ms`` and the bandwidth ``wb`` (``|T| = |T(0)|/sqrt(2)``) marked;
* with ``controller.filters``, a fourth panel: ``|F|`` of the filter
  cascade alone in dB with each section's centre frequency marked (``L``
  above already includes ``F``).

:func:`frequency_curves` computes (with the functions the log's numbers come
from: :func:`gainloom.lti.margins.loop_margins` and
:func:`gainloom.lti.bandwidth.closed_loop_bandwidth`); :func:`plot_frequency`
only draws.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..look import LIMIT, SERIES, new_figure, png_bytes
from ..lti.bandwidth import closed_loop_bandwidth
from ..lti.loop import Loop
from ..lti.margins import frequency_response, loop_margins

__all__ = ["FrequencyCurves", "frequency_curves", "plot_frequency"]

#: Frequencies per curve.
SAMPLES = 800

#: Decades drawn below the lowest marked frequency.
DECADES_BELOW = 2.0


@dataclass(frozen=True, eq=False)
class FrequencyCurves:
    """Frequency response of one point's sampled loop and its marked numbers.

    Attributes
    ----------
    w : ndarray
        rad/s, up to the Nyquist frequency.
    loop, sensitivity, complementary : ndarray of complex
        ``L``, ``S = 1/(1 + L)``, ``T = L/(1 + L)`` at ``w``.
    crossover, phase_crossover, sensitivity_frequency, bandwidth, nyquist : float
        rad/s (NaN where absent).
    gain_margin_db, phase_margin_deg, sensitivity_peak : float
    """

    w: np.ndarray
    loop: np.ndarray
    sensitivity: np.ndarray
    complementary: np.ndarray
    crossover: float
    phase_crossover: float
    gain_margin_db: float
    phase_margin_deg: float
    sensitivity_peak: float
    sensitivity_frequency: float
    bandwidth: float
    nyquist: float


def _value(x: Any) -> float:
    x = float(np.asarray(x).ravel()[0])
    return x if math.isfinite(x) else float("nan")


def frequency_curves(loop: Loop, p: int) -> FrequencyCurves:
    """Curves and margins of point ``p`` of the discrete open loop ``L = C P``."""
    one = loop.select(np.array([p]))
    margins = loop_margins(one)
    bandwidth = _value(closed_loop_bandwidth(one))
    nyquist = math.pi / float(one.ts[0])
    marks = [_value(v) for v in (margins.crossover, margins.phase_crossover, margins.sensitivity_peak_frequency)]
    marks = [m for m in marks + [bandwidth] if m > 0 and math.isfinite(m)]
    low = min(marks, default=nyquist * 1e-3) * 10.0 ** -DECADES_BELOW
    w = np.geomspace(min(low, nyquist * 1e-4), nyquist, SAMPLES)
    num, den = frequency_response(one, w[np.newaxis, :])
    with np.errstate(divide="ignore", invalid="ignore"):
        L = (num / den)[0]
        S = den[0] / (den[0] + num[0])
        T = num[0] / (den[0] + num[0])
    return FrequencyCurves(
        w=w, loop=L, sensitivity=S, complementary=T,
        crossover=_value(margins.crossover), phase_crossover=_value(margins.phase_crossover),
        gain_margin_db=_value(margins.gain_margin_db), phase_margin_deg=_value(margins.phase_margin),
        sensitivity_peak=_value(margins.sensitivity_peak),
        sensitivity_frequency=_value(margins.sensitivity_peak_frequency),
        bandwidth=bandwidth, nyquist=nyquist,
    )


def _db(values: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        out = 20.0 * np.log10(np.abs(values))
    return np.where(np.isfinite(out), out, np.nan)


def _phase_deg(curves: FrequencyCurves) -> np.ndarray:
    """Unwrapped phase, shifted by whole turns so the crossover phase lies in (-360, 0]."""
    phase = np.degrees(np.unwrap(np.angle(curves.loop)))
    if math.isfinite(curves.crossover) and curves.crossover > 0:  # 0: |L| < 1 throughout
        at = np.interp(math.log(curves.crossover), np.log(curves.w), phase)
        phase = phase - 360.0 * math.ceil(at / 360.0)
    return phase


def _draw_point(axes, curves: FrequencyCurves, colour: str, style, label: str, n: int) -> None:
    ax_mag, ax_phase, ax_closed = axes
    lift = 9 * n  # labels of later points stacked above the first ones
    ax_mag.semilogx(curves.w, _db(curves.loop), color=colour, ls=style, lw=1.4, label=label)
    phase = _phase_deg(curves)
    ax_phase.semilogx(curves.w, phase, color=colour, ls=style, lw=1.4)
    ax_closed.semilogx(curves.w, _db(curves.sensitivity), color=colour, ls=style, lw=1.4)
    ax_closed.semilogx(curves.w, _db(curves.complementary), color=colour, ls=style, lw=0.9, alpha=0.75)
    if math.isfinite(curves.crossover) and curves.crossover > 0:  # 0: |L| < 1 throughout
        ax_mag.plot([curves.crossover], [0.0], marker="o", ms=5, color=colour)
        ax_mag.annotate(f"ωc {curves.crossover:.4g}", (curves.crossover, 0.0), xytext=(4, 4 + lift),
                        textcoords="offset points", fontsize=7, color=colour)
        if math.isfinite(curves.phase_margin_deg):
            at = np.interp(math.log(curves.crossover), np.log(curves.w), phase)
            ax_phase.vlines(curves.crossover, at - curves.phase_margin_deg, at, color=colour, lw=2.2)
            ax_phase.annotate(f"PM {curves.phase_margin_deg:.3g}°", (curves.crossover, at), xytext=(4, 2 + lift),
                              textcoords="offset points", fontsize=7, color=colour)
    if math.isfinite(curves.phase_crossover) and math.isfinite(curves.gain_margin_db) and curves.phase_crossover > 0:
        ax_mag.vlines(curves.phase_crossover, -curves.gain_margin_db, 0.0, color=colour, lw=2.2)
        ax_mag.annotate(f"GM {curves.gain_margin_db:.3g} dB", (curves.phase_crossover, -curves.gain_margin_db),
                        xytext=(4, -10 - lift), textcoords="offset points", fontsize=7, color=colour)
    if math.isfinite(curves.sensitivity_frequency):
        peak = 20 * math.log10(curves.sensitivity_peak)
        ax_closed.plot([curves.sensitivity_frequency], [peak], marker="^", ms=5, color=colour)
        ax_closed.annotate(f"Ms {curves.sensitivity_peak:.3g}", (curves.sensitivity_frequency, peak),
                           xytext=(4, 3 + lift), textcoords="offset points", fontsize=7, color=colour)
    if math.isfinite(curves.bandwidth):
        level = float(np.interp(math.log(curves.bandwidth), np.log(curves.w), _db(curves.complementary)))
        ax_closed.plot([curves.bandwidth], [level], marker="s", ms=4.5, color=colour)
        ax_closed.annotate(f"ωb {curves.bandwidth:.4g}", (curves.bandwidth, level), xytext=(4, -10 - lift),
                           textcoords="offset points", fontsize=7, color=colour)


def _draw_filter(ax, filters: Loop, centres: np.ndarray, p: int, w: np.ndarray, colour: str, style, n: int) -> None:
    """``|F|`` of point ``p``'s filter cascade on ``w``, each section's centre marked."""
    num, den = frequency_response(filters.select(np.array([p])), w[np.newaxis, :])
    with np.errstate(divide="ignore", invalid="ignore"):
        level = _db(num[0] / den[0])
    ax.semilogx(w, level, color=colour, ls=style, lw=1.4)
    for centre in centres[:, p]:
        at = float(np.interp(math.log(centre), np.log(w), level))
        ax.plot([centre], [at], marker="v", ms=5, color=colour)
        ax.annotate(f"{centre:.4g}", (centre, at), xytext=(6, 2 + 9 * n), textcoords="offset points", fontsize=7,
                    color=colour)


def plot_frequency(loop: Loop, chosen: list[tuple[int, str]], points: list[dict[str, Any]],
                   filters: tuple[Loop, np.ndarray] | None = None) -> bytes:
    """Frequency response of the sampled loop at the chosen points (see the module docstring).

    Parameters
    ----------
    loop : Loop
        Discrete open loop ``L = C F P`` per point (the table's coefficients).
    chosen : list of (int, str)
        Point index and role (first, last, worst).
    points : list of dict
        The log's per-point entries (labels).
    filters : (Loop, ndarray), optional
        The filter cascade ``F`` per point and the sections' centre
        frequencies, shape (sections, P), rad/s: drawn in a fourth panel.
    """
    figure = new_figure((9.0, 9.6 if filters is None else 12.4))
    if filters is None:
        frames = ((0.09, 0.70, 0.88, 0.24), (0.09, 0.41, 0.88, 0.24), (0.09, 0.12, 0.88, 0.24))
    else:
        frames = ((0.09, 0.765, 0.88, 0.18), (0.09, 0.545, 0.88, 0.18), (0.09, 0.325, 0.88, 0.18),
                  (0.09, 0.105, 0.88, 0.18))
    axes = [figure.add_axes(frame) for frame in frames]
    nyquist = []
    for n, (p, role) in enumerate(chosen):
        curves = frequency_curves(loop, p)
        nyquist.append(curves.nyquist)
        colour, style = SERIES[n % len(SERIES)], ("-", (0, (6, 3)), (0, (2, 2)))[n % 3]
        _draw_point(axes[:3], curves, colour, style, f"{role}: {points[p]['label']}", n)
        if filters is not None:
            _draw_filter(axes[3], filters[0], filters[1], p, curves.w, colour, style, n)
    axes[0].axhline(0.0, color=LIMIT, lw=0.9, ls=(0, (5, 3)))
    axes[1].axhline(-180.0, color=LIMIT, lw=0.9, ls=(0, (5, 3)))
    axes[2].axhline(0.0, color="#999999", lw=0.7)
    axes[2].axhline(20 * math.log10(1 / math.sqrt(2)), color="#999999", lw=0.7, ls=(0, (2, 2)))
    titles = ("|L| of the sampled loop [dB]: gain crossover ωc and gain margin (bar) [rad/s]",
              "phase of L [deg]: phase margin (bar) at ωc",
              "|S| (thick) and |T| (thin) [dB]: sensitivity peak Ms, bandwidth ωb at |T(0)| - 3.01 dB",
              "|F| of the filter sections after the controller [dB]: centre frequencies (triangles) [rad/s]")
    for ax, title in zip(axes, titles):
        for w in sorted(set(nyquist)):
            ax.axvline(w, color="#777777", lw=0.8, ls=(0, (1, 2)))
        ax.set_title(title, fontsize=9, loc="left")
        ax.grid(True, which="both", color="#ececec", lw=0.5)
        ax.tick_params(labelsize=8)
    axes[-1].set_xlabel("frequency ω [rad/s] (dotted: Nyquist π/ts)", fontsize=8.5)
    figure.legend(loc="lower center", ncol=min(3, max(1, len(chosen))), fontsize=8, frameon=False)
    included = "hold, delay and controller" if filters is None else "hold, delay, controller and filters"
    figure.suptitle(f"Frequency response of the sampled loop ({included} included)", fontsize=11,
                    x=0.01, ha="left")
    return png_bytes(figure)

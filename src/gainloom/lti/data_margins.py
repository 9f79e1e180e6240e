"""Margins, crossover, bandwidth and sensitivity peak judged on a frequency grid.

For loops known only at measured frequencies: nothing is extrapolated beyond
the samples.  Between neighbouring samples ``log |L|`` and the unwrapped phase
are interpolated linearly in ``log w`` (the straight-line pieces of a Bode
plot).  Conventions are those of :mod:`gainloom.lti.margins` (python-control's
``stability_margins``): ``PM = (arg L mod 360) - 180`` deg at a gain
crossover, smallest ``|PM|`` over the crossovers; ``GM = 1/|L|`` at a phase
crossover, the one nearest 0 dB; ``Ms = max |1/(1 + L)|`` (over the samples:
a lower bound of the true peak, so a coarse grid is reported); crossover is
the lowest frequency where ``|L|`` falls below 1, last crossover the highest
where it is 1; bandwidth the first frequency where ``|T| = |T(w_min)|/sqrt(2)``.

Data quality is part of the answer (``coverage`` per point): a crossover
outside the data's band, a gap in the data at the crossover, or a grid so
coarse there that the phase turns by more than :data:`COARSE_PHASE` between
neighbours.

The loop of a sampled controller on measured continuous-plant data is
``L(jw) = C(exp(jw ts)) H(jw) exp(-jw d ts) P(jw)`` with the zero-order hold
``H(jw) = (1 - exp(-jw ts))/(jw ts)`` (:func:`sampled_loop_on_data`).  It
neglects the aliased terms of the sampled plant, which are small where the
plant rolls off well before the Nyquist frequency; samples at or above the
Nyquist frequency are dropped.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from .polynomials import polyval_rows

__all__ = ["BAND_SAMPLES", "COARSE_PHASE", "GAP_RATIO", "DataMargins", "data_gaps", "data_margins",
           "sampled_loop_on_data", "step_deviation_bound", "zoh_response"]

#: Phase turn between the two samples around a crossover above which the
#: grid is called too coarse there, degrees (common practice, no source).
COARSE_PHASE = 20.0
#: A step between neighbouring samples this many times the row's median step
#: (in log w) is a gap in the data (common practice, no source).
GAP_RATIO = 4.0
#: Fewest samples within an octave either side of the crossover (four per
#: octave) below which the grid is called thin there (common practice, no
#: source: a Bode corner needs a few samples per octave to be seen).
BAND_SAMPLES = 8


@dataclass(frozen=True, eq=False)
class DataMargins:
    """Margins of a batch of loops judged on their frequency samples.

    All arrays have shape ``(P,)``; ``nan`` where a value could not be
    judged (see ``coverage``).

    Attributes
    ----------
    gain_margin_db : ndarray
        ``inf`` when the data hold no phase crossover.
    phase_crossover : ndarray
        rad/s.
    phase_margin : ndarray
        Degrees; ``inf`` with no gain crossover.
    gain_crossover : ndarray
        Frequency of the reported phase margin, rad/s.
    crossover, last_crossover : ndarray
        rad/s (conventions of :mod:`gainloom.lti.margins`).
    sensitivity_peak, sensitivity_peak_frequency : ndarray
        ``Ms`` over the samples and where it is, rad/s.
    bandwidth : ndarray
        rad/s; ``inf`` when ``|T|`` stays above the half-power level in the data.
    coverage : tuple of tuple of str
        Per point: why a value could not be judged or is uncertain.
    judged : ndarray of bool
        Crossover and margins within the data, without a gap at a crossover.
    """

    gain_margin_db: np.ndarray
    phase_crossover: np.ndarray
    phase_margin: np.ndarray
    gain_crossover: np.ndarray
    crossover: np.ndarray
    last_crossover: np.ndarray
    sensitivity_peak: np.ndarray
    sensitivity_peak_frequency: np.ndarray
    bandwidth: np.ndarray
    coverage: tuple[tuple[str, ...], ...]
    judged: np.ndarray


def zoh_response(w: np.ndarray, ts: np.ndarray) -> np.ndarray:
    """``(1 - exp(-jw ts))/(jw ts)`` (1 at ``w = 0``); ``w`` (P, M), ``ts`` (P,)."""
    x = np.asarray(w, dtype=float) * np.asarray(ts, dtype=float)[:, np.newaxis]
    with np.errstate(all="ignore"):
        value = -np.expm1(-1j * x) / (1j * x)
    return np.where(x == 0, 1.0 + 0j, value)


def sampled_loop_on_data(
    w: np.ndarray,
    plant: np.ndarray,
    ts: np.ndarray,
    delay: np.ndarray,
    controller_num: np.ndarray,
    controller_den: np.ndarray,
) -> np.ndarray:
    """The loop of a discrete controller around measured plant data.

    Parameters
    ----------
    w : ndarray, shape (P, M)
        Frequencies of the data, rad/s (``nan`` pads).
    plant : ndarray of complex, shape (P, M)
        Measured plant response from the actuator command to the measured
        output (``nan`` where missing).
    ts : ndarray, shape (P,)
        Sample period, s.
    delay : ndarray, shape (P,)
        Computation delay, samples (may be fractional).
    controller_num, controller_den : ndarray, shape (P, k + 1)
        ``C(z)`` in descending powers of ``z``.

    Returns
    -------
    ndarray of complex, shape (P, M)
        ``L(jw)``; ``nan`` at or above the Nyquist frequency and where the
        data are missing.
    """
    w = np.asarray(w, dtype=float)
    ts = np.asarray(ts, dtype=float)
    z = np.exp(1j * w * ts[:, np.newaxis])
    c_num, c_den = polyval_rows(controller_num, z), polyval_rows(controller_den, z)
    with np.errstate(all="ignore"):  # nan pads stay nan
        delay_factor = np.exp(-1j * w * (ts * np.asarray(delay, float))[:, np.newaxis])
        loop = (c_num / c_den) * zoh_response(w, ts) * delay_factor * plant
    with np.errstate(invalid="ignore"):
        below_nyquist = w * ts[:, np.newaxis] < np.pi
    return np.where(below_nyquist, loop, np.nan)


def step_deviation_bound(w: np.ndarray, loop_a: np.ndarray, loop_b: np.ndarray, ts: np.ndarray) -> np.ndarray:
    """Largest difference of two sampled loops' unit-step responses that their samples allow.

    For closed loops ``T = L/(1 + L)`` with ``T_a(1) = T_b(1)`` the step
    responses differ at every sample instant by at most

        (1/pi) int_0^(pi/ts) |T_a - T_b| ts / (2 sin(w ts / 2)) dw

    (the inverse z-transform of ``(T_a - T_b) z/(z - 1)`` on the unit circle,
    bounded by the integral of its modulus).  The integral is taken over
    the samples only, by the trapezoidal rule in ``log w``; what lies outside
    the measured band is not counted, so it is a bound over the band: small
    below it where both loops have integral action, small above it where
    both have rolled off.

    Parameters
    ----------
    w : ndarray, shape (P, M)
        Frequencies, rad/s, rising (``nan`` pads).
    loop_a, loop_b : ndarray of complex, shape (P, M)
        The two loops' ``L`` at ``w`` (``nan`` where missing, e.g. at or
        above the Nyquist frequency).
    ts : ndarray, shape (P,)
        Sample period, s.

    Returns
    -------
    ndarray, shape (P,)
        Fraction of the step; ``nan`` where fewer than two samples are usable.
    """
    w = np.asarray(w, dtype=float)
    theta = w * np.asarray(ts, dtype=float)[:, np.newaxis]
    with np.errstate(all="ignore"):
        difference = np.abs(loop_a / (1 + loop_a) - loop_b / (1 + loop_b)) * (theta / 2) / np.sin(theta / 2)
        lw = np.log(w)
    usable = np.isfinite(difference) & np.isfinite(lw)
    pair = usable[:, 1:] & usable[:, :-1]
    pieces = np.where(pair, 0.5 * (difference[:, 1:] + difference[:, :-1]) * (lw[:, 1:] - lw[:, :-1]), 0.0)
    return np.where(np.sum(pair, axis=1) > 0, np.sum(pieces, axis=1) / np.pi, np.nan)


def data_gaps(w: np.ndarray) -> np.ndarray:
    """Neighbouring samples (k, k + 1) farther apart than :data:`GAP_RATIO` times the row's median step in ``log w``.

    Parameters
    ----------
    w : ndarray, shape (P, M)
        Frequencies, rad/s, rising along each row (``nan`` pads).

    Returns
    -------
    ndarray of bool, shape (P, M - 1)
    """
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a row without two samples has no median: no gap
        lw = np.log(np.asarray(w, dtype=float))
        step = lw[:, 1:] - lw[:, :-1]
        median = np.nanmedian(step, axis=1, keepdims=True)
        return np.isfinite(step) & (step > GAP_RATIO * median)


def _compress(w: np.ndarray, loop: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Move each row's valid samples to the front (order kept); pads are ``nan``."""
    valid = np.isfinite(w) & np.isfinite(loop) & (w > 0) & (np.abs(loop) > 0)
    order = np.argsort(~valid, axis=1, kind="stable")
    w_c = np.take_along_axis(np.where(valid, w, np.nan), order, axis=1)
    l_c = np.take_along_axis(np.where(valid, loop, np.nan), order, axis=1)
    return w_c, l_c, np.take_along_axis(valid, order, axis=1)


def _unwrapped_phase(loop: np.ndarray, valid: np.ndarray) -> np.ndarray:
    """Phase in degrees unwrapped along each row, starting in (-360, 0]."""
    angle = np.angle(np.where(valid, loop, 1.0))
    last = np.maximum(np.sum(valid, axis=1) - 1, 0)
    fill = np.take_along_axis(angle, last[:, np.newaxis], axis=1)
    angle = np.where(valid, angle, fill)  # pads repeat the last value, adding no turn
    phase = np.degrees(np.unwrap(angle, axis=1))
    start = phase[:, :1]
    return phase - 360.0 * np.ceil(start / 360.0)


def _crossings(values: np.ndarray, pair_ok: np.ndarray) -> np.ndarray:
    """Sample pairs (k, k + 1) where ``values`` changes sign or reaches zero: shape (P, M - 1)."""
    a, b = values[:, :-1], values[:, 1:]
    return pair_ok & (((a > 0) & (b <= 0)) | ((a <= 0) & (b > 0)))


def _interpolate(lw: np.ndarray, f: np.ndarray, pairs: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Where the line through ``f`` crosses zero on each pair: ``log w`` and ``y`` there."""
    f0, f1 = f[:, :-1], f[:, 1:]
    with np.errstate(all="ignore"):
        t = np.where(pairs, f0 / (f0 - f1), np.nan)
    t = np.clip(t, 0.0, 1.0)
    at = lw[:, :-1] + t * (lw[:, 1:] - lw[:, :-1])
    return at, y[:, :-1] + t * (y[:, 1:] - y[:, :-1])


def _pick(key: np.ndarray, *values: np.ndarray) -> list[np.ndarray]:
    """Per row, the values at the smallest finite ``key`` (``nan`` rows when none)."""
    key = np.where(np.isfinite(key), key, np.inf)
    index = np.argmin(key, axis=1)[:, np.newaxis]
    found = np.isfinite(np.take_along_axis(key, index, axis=1))[:, 0]
    return [np.where(found, np.take_along_axis(v, index, axis=1)[:, 0], np.nan) for v in values]


def _edge(pairs: np.ndarray, lw_at: np.ndarray, last: bool) -> np.ndarray:
    """Frequency of the first (or last) crossing per row, ``nan`` when none."""
    count = pairs.shape[1]
    index = np.where(pairs, np.arange(count), -1 if last else count)
    chosen = np.max(index, axis=1) if last else np.min(index, axis=1)
    ok = (chosen >= 0) & (chosen < count)
    value = np.take_along_axis(lw_at, np.clip(chosen, 0, count - 1)[:, np.newaxis], axis=1)[:, 0]
    return np.where(ok, np.exp(value), np.nan)


def data_margins(w: np.ndarray, loop: np.ndarray) -> DataMargins:
    """Margins of loops known at frequency samples.

    Parameters
    ----------
    w : ndarray, shape (P, M)
        Frequencies, rad/s, increasing along each row (``nan`` pads).
    loop : ndarray of complex, shape (P, M)
        ``L(jw)`` at ``w`` (``nan`` where missing).

    Returns
    -------
    DataMargins
    """
    w_c, l_c, valid = _compress(np.asarray(w, float), np.asarray(loop, complex))
    with np.errstate(all="ignore"):
        lw = np.log(w_c)
        lmag = np.log(np.abs(l_c))
    phase = _unwrapped_phase(l_c, valid)
    pair_ok = valid[:, :-1] & valid[:, 1:]
    gap = data_gaps(w_c)

    gain_pairs = _crossings(lmag, pair_ok)
    lw_gc, phase_gc = _interpolate(lw, lmag, gain_pairs, phase)
    pm_all = np.where(gain_pairs, np.mod(phase_gc, 360.0) - 180.0, np.nan)
    pm, w_gc = _pick(np.abs(pm_all), pm_all, np.exp(lw_gc))
    pm = np.where(np.any(gain_pairs, axis=1), pm, np.inf)

    # phase crossovers: the unwrapped phase passes -180 - 360 k
    turns = np.floor((phase + 180.0) / 360.0)
    phase_pairs = pair_ok & (turns[:, :-1] != turns[:, 1:])
    level = -180.0 + 360.0 * np.maximum(turns[:, :-1], turns[:, 1:])
    lw_pc, lmag_pc = _phase_cross(lw, lmag, phase[:, :-1] - level, phase[:, 1:] - level, phase_pairs)
    gm_db_all = np.where(phase_pairs, -20.0 * lmag_pc / np.log(10.0), np.nan)
    gm_db, w_pc = _pick(np.abs(gm_db_all), gm_db_all, np.exp(lw_pc))
    gm_db = np.where(np.any(phase_pairs, axis=1), gm_db, np.inf)

    falls = pair_ok & (lmag[:, :-1] >= 0) & (lmag[:, 1:] < 0)
    crossover = _edge(falls, _interpolate(lw, lmag, falls, lmag)[0], last=False)
    last_crossover = _edge(gain_pairs, lw_gc, last=True)

    with np.errstate(all="ignore"):
        sensitivity = np.where(valid, np.abs(1.0 / (1.0 + l_c)), -np.inf)
    peak = np.argmax(sensitivity, axis=1)[:, np.newaxis]
    ms = np.take_along_axis(sensitivity, peak, axis=1)[:, 0]
    w_ms = np.take_along_axis(w_c, peak, axis=1)[:, 0]
    bandwidth = _bandwidth(lw, l_c, pair_ok)
    coverage, judged = _coverage(w_c, valid, lmag, phase, gain_pairs, phase_pairs, gap, gm_db)
    resolution = _resolution(w_c, valid, phase, gap, peak[:, 0], w_gc)
    coverage = tuple(a + b for a, b in zip(coverage, resolution))
    return DataMargins(
        gain_margin_db=gm_db, phase_crossover=w_pc, phase_margin=pm, gain_crossover=w_gc,
        crossover=np.where(judged, crossover, np.nan), last_crossover=np.where(judged, last_crossover, np.nan),
        sensitivity_peak=ms, sensitivity_peak_frequency=w_ms, bandwidth=bandwidth, coverage=coverage,
        judged=judged,
    )


def _phase_cross(lw, lmag, f0, f1, pairs):
    """``log w`` and ``log |L|`` where the phase line between a pair reaches its crossing level."""
    with np.errstate(all="ignore"):
        t = np.clip(np.where(pairs, f0 / (f0 - f1), np.nan), 0.0, 1.0)
    return lw[:, :-1] + t * (lw[:, 1:] - lw[:, :-1]), lmag[:, :-1] + t * (lmag[:, 1:] - lmag[:, :-1])


def _bandwidth(lw: np.ndarray, l_c: np.ndarray, pair_ok: np.ndarray) -> np.ndarray:
    """First frequency where ``|T|`` falls to ``|T(w_min)|/sqrt(2)``; ``inf`` if it never does."""
    with np.errstate(all="ignore"):
        t_mag = np.log(np.abs(l_c / (1.0 + l_c)))
    excess = t_mag - (t_mag[:, :1] - 0.5 * np.log(2.0))
    falls = pair_ok & (excess[:, :-1] >= 0) & (excess[:, 1:] < 0)
    found = _edge(falls, _interpolate(lw, excess, falls, excess)[0], last=False)
    return np.where(np.any(falls, axis=1), found, np.inf)


def _coverage(w_c, valid, lmag, phase, gain_pairs, phase_pairs, gap, gm_db):
    """Per point: what the data cannot tell, and whether the margins could be judged."""
    notes: list[tuple[str, ...]] = []
    judged = np.ones(w_c.shape[0], dtype=bool)
    last = np.sum(valid, axis=1) - 1
    turn = np.abs(np.diff(phase, axis=1))
    for p in range(w_c.shape[0]):
        found: list[str] = []
        if last[p] < 1:
            notes.append(("fewer than two usable samples",))
            judged[p] = False
            continue
        low, high = w_c[p, 0], w_c[p, last[p]]
        if lmag[p, last[p]] > 0:
            found.append(f"|L| is still above 1 at the highest usable frequency {high:.4g} rad/s: the crossover is "
                         "beyond the data")
            judged[p] = False
        if not np.any(gain_pairs[p]) and lmag[p, 0] < 0:
            found.append(f"|L| is below 1 already at the lowest frequency {low:.4g} rad/s: the crossover is below "
                         "the data")
            judged[p] = False
        for kind, pairs in (("gain", gain_pairs[p]), ("phase", phase_pairs[p])):
            for k in np.flatnonzero(pairs):
                span = f"{w_c[p, k]:.4g} .. {w_c[p, k + 1]:.4g} rad/s"
                if gap[p, k]:
                    found.append(f"a gap in the data ({span}) holds a {kind} crossover")
                    judged[p] = False
                elif turn[p, k] > COARSE_PHASE:
                    found.append(f"the grid is coarse at the {kind} crossover ({span}): the phase turns "
                                 f"{turn[p, k]:.0f} deg between samples (more than {COARSE_PHASE:g})")
        if not np.any(phase_pairs[p]):
            found.append(f"no phase crossover below {high:.4g} rad/s: the gain margin is judged only up to there "
                         f"(|L| there is {20 * lmag[p, last[p]] / np.log(10):.1f} dB)")
        notes.append(tuple(found))
    return tuple(notes), judged


def _resolution(w_c, valid, phase, gap, peak, w_gc):
    """Per point: where the grid is too thin to trust a value judged on the samples.

    The sensitivity peak is the largest sample of ``|1/(1 + L)|``, a lower
    bound of the true peak: a gap beside it, or a phase turn of more than
    :data:`COARSE_PHASE` to a neighbour, is noted; so are fewer than
    :data:`BAND_SAMPLES` samples within an octave either side of the
    crossover, the band the margins and the fit error near crossover rest on.
    """
    notes = []
    last = np.sum(valid, axis=1) - 1
    for p in range(w_c.shape[0]):
        found = []
        k = int(peak[p])
        sides = [j for j in (k - 1, k) if 0 <= j < last[p]]
        turn = max((abs(phase[p, j + 1] - phase[p, j]) for j in sides), default=0.0)
        where = f"{w_c[p, k]:.4g} rad/s"
        if any(gap[p, j] for j in sides):
            found.append(f"a gap in the data borders the sensitivity peak at {where}: Ms is judged on the samples "
                         "and may be higher in the gap")
        elif turn > COARSE_PHASE:
            found.append(f"the grid is coarse at the sensitivity peak at {where}: the phase turns {turn:.0f} deg to "
                         f"a neighbour (more than {COARSE_PHASE:g}); Ms is judged on the samples and may be higher")
        if np.isfinite(w_gc[p]):
            count = int(np.sum(valid[p] & (w_c[p] >= w_gc[p] / 2) & (w_c[p] <= 2 * w_gc[p])))
            if count < BAND_SAMPLES:
                found.append(f"only {count} samples within an octave of the crossover {w_gc[p]:.4g} rad/s (fewer "
                             f"than {BAND_SAMPLES}): the margins and the fit error there rest on few samples")
        notes.append(tuple(found))
    return tuple(notes)

"""Gain, phase and delay margins and the sensitivity peak, batched over points.

For each operating point the loop ``L = K N/D`` is evaluated on a dense
frequency grid (logarithmic, plus clusters of points around every lightly
damped open- and closed-loop root), crossovers are bracketed by sign changes
on the grid and refined by vectorised bisection in ``log w`` to the last bits
of a double, and the sensitivity peak is refined by a vectorised
golden-section search around the grid maximum.  No polynomial in ``w`` is
formed, so continuous dead time and delta-operator forms are handled the same
way as plain loops.

Conventions (the same as python-control's ``stability_margins``):

- gain margin ``GM = 1/|L(j w_pc)|`` at a phase crossover ``w_pc`` (where
  ``L`` is real and negative, including ``w = 0`` and, for discrete loops, the
  Nyquist frequency ``pi/ts``); with several crossovers the one closest to
  0 dB (smallest ``|log GM|``) is reported: it is the smallest change of gain,
  up or down, that puts a closed-loop pole on the stability boundary;
- phase margin ``PM = (arg L(j w_gc) mod 360 deg) - 180 deg`` at a gain
  crossover ``|L| = 1``; with several crossovers the smallest ``|PM|``;
- delay margin: at each gain crossover the extra pure delay that turns the
  phase by ``PM`` (taken in ``[0, 360)`` deg) is ``PM/w_gc``; the smallest over
  the crossovers is reported.  It is zero where the closed loop is already
  unstable.  For discrete loops it is given in seconds and in (fractional)
  samples of ``ts``;
- sensitivity peak ``Ms = max_w |1/(1 + L)|`` (python-control's ``sm`` is
  ``1/Ms``);
- crossover (the ``min_crossover`` spec): the lowest frequency at which
  ``|L|`` falls below 1, so ``|L| >= 1`` on all of ``(0, crossover]``; it is
  0 when ``|L| < 1`` already at the lowest frequency of the grid;
- last crossover (the ``max_crossover`` spec): the highest frequency at which
  ``|L|`` is still 1, so ``|L| <= 1`` everywhere above it; 0 when ``|L| <= 1``
  at every frequency, the Nyquist frequency ``pi/ts`` (discrete) or ``inf``
  (continuous) when ``|L| > 1`` up to the end.
  For the usual loop (integrator, one crossing) both equal python-control's
  ``wgc``; with a resonance poking above 0 dB they bracket every crossover,
  and each spec is judged on the end that makes it hold everywhere.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial

import numpy as np

from ..errors import InputError
from .closed_loop import closed_loop_poles
from .loop import Loop
from .polynomials import batched_roots, polyval_rows

__all__ = ["Margins", "loop_margins", "frequency_response"]

_BASE_POINTS = 1200
_CLUSTER = np.concatenate([-np.geomspace(8.0, 0.02, 9), [0.0], np.geomspace(0.02, 8.0, 9)])
_BISECTIONS = 56
_GOLDEN_STEPS = 60


@dataclass(frozen=True, eq=False)
class Margins:
    """Stability margins of a batch of loops at one gain each.

    All arrays have shape ``(P,)``.  Missing crossovers give ``inf`` margins
    and ``nan`` frequencies.

    Attributes
    ----------
    gain_margin : ndarray
        Gain margin as a factor (``inf`` with no phase crossover).
    gain_margin_db : ndarray
        The same in dB (``20 log10``).
    phase_crossover : ndarray
        Frequency of the reported gain margin, rad/s.
    phase_margin : ndarray
        Phase margin in degrees, in ``[-180, 180)`` (``inf`` with no gain
        crossover).
    gain_crossover : ndarray
        Frequency of the reported phase margin, rad/s.
    delay_margin : ndarray
        Extra pure delay the loop tolerates, seconds (0 if the closed loop is
        unstable at this gain, ``inf`` with no gain crossover).
    delay_margin_samples : ndarray or None
        The delay margin in samples of ``ts`` (discrete loops only).
    sensitivity_peak : ndarray
        ``Ms = max |1/(1 + L)|`` (dimensionless).
    sensitivity_peak_frequency : ndarray
        Frequency of ``Ms``, rad/s.
    stable : ndarray of bool
        Closed-loop poles of the rational loop all strictly stable.
    gain : ndarray
        The loop gain ``K`` the margins were computed at.
    crossover : ndarray
        Lowest frequency where ``|L|`` falls below 1, rad/s (see the module
        notes; 0 when ``|L| < 1`` from the start).
    last_crossover : ndarray
        Highest frequency where ``|L|`` is 1, rad/s (``|L| <= 1`` above it).
    warnings : tuple of str
        Conditions a reader of the numbers must know (data, not ``warnings``).
    """

    gain_margin: np.ndarray
    gain_margin_db: np.ndarray
    phase_crossover: np.ndarray
    phase_margin: np.ndarray
    gain_crossover: np.ndarray
    delay_margin: np.ndarray
    delay_margin_samples: np.ndarray | None
    sensitivity_peak: np.ndarray
    sensitivity_peak_frequency: np.ndarray
    stable: np.ndarray
    gain: np.ndarray
    crossover: np.ndarray
    last_crossover: np.ndarray
    warnings: tuple[str, ...] = ()


def frequency_response(loop: Loop, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator of the loop on the unit circle / imaginary axis.

    Parameters
    ----------
    loop : Loop
        ``P`` loops.
    w : ndarray, shape (P, M)
        Frequencies in rad/s.

    Returns
    -------
    (ndarray, ndarray) of complex, shape (P, M)
        ``N`` and ``D`` at ``s = j w`` (continuous, with the dead-time factor
        ``exp(-j w tau)`` folded into ``N``) or at ``z = exp(j w ts)``
        (evaluated in ``g = expm1(j w ts)/ts`` when the delta form is
        present, which avoids the cancellation near ``z = 1``).
    """
    w = np.asarray(w, dtype=float)
    if loop.ts is None:
        s = 1j * w
        num = polyval_rows(loop.num, s) * np.exp(-1j * w * loop.dead_time[:, np.newaxis])
        return num, polyval_rows(loop.den, s)
    ts = loop.ts[:, np.newaxis]
    delta = loop.delta()
    if delta is not None:
        g = np.expm1(1j * w * ts) / ts
        return polyval_rows(delta[0], g), polyval_rows(delta[1], g)
    z = np.exp(1j * w * ts)
    return polyval_rows(loop.num, z), polyval_rows(loop.den, z)


def _continuous_equivalent(roots: np.ndarray, ts: np.ndarray | None) -> np.ndarray:
    """Map roots to the s-plane (``log(z)/ts`` for discrete); drop z = 0 and infinities."""
    roots = np.where(np.isfinite(roots), roots, np.nan)
    if ts is None:
        return roots
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.log(roots) / ts[:, np.newaxis]
    return np.where(np.isfinite(s), s, np.nan)


def frequency_grid(loop: Loop, gains: np.ndarray) -> np.ndarray:
    """Per-point frequency grid, rad/s, shape (P, M), sorted, strictly positive."""
    points = loop.points
    features = [batched_roots(loop.den)]
    lead = np.flatnonzero(np.any(loop.num != 0, axis=0))
    if lead.size and loop.num.shape[1] - lead[0] > 1:
        sub = loop.num[:, lead[0]:]
        if np.all(sub[:, 0] != 0):
            features.append(batched_roots(sub))
    features.append(closed_loop_poles(loop, gains[:, np.newaxis])[:, 0, :])
    s = _continuous_equivalent(np.concatenate(features, axis=1), loop.ts)
    mag = np.abs(s)
    mag = np.where(mag > 0, mag, np.nan)
    with np.errstate(invalid="ignore"):
        low = np.nanmin(np.where(np.isnan(mag), np.inf, mag), axis=1)
        high = np.nanmax(np.where(np.isnan(mag), 0.0, mag), axis=1)
    low = np.where(np.isfinite(low), low, 1.0)
    high = np.where(high > 0, high, 1.0)
    low = low * 1e-3
    high = high * 1e3
    if loop.dead_time is not None:
        # Dead time turns the phase without bound; cover several turns past the
        # rational features.
        tau = loop.dead_time
        high = np.where(tau > 0, np.maximum(high, 60.0 / np.where(tau > 0, tau, 1.0)), high)
    if loop.ts is not None:
        nyquist = np.pi / loop.ts
        high = nyquist
        low = np.minimum(low, nyquist * 1e-6)
    base = np.exp(np.linspace(np.log(low), np.log(high), _BASE_POINTS, axis=1))
    # Clusters around every oscillatory feature: resonances are narrower than
    # any affordable uniform grid.
    centre = np.abs(s.imag)
    width = np.maximum(np.abs(s.real), 1e-9 * centre)
    cluster = centre[:, :, np.newaxis] + width[:, :, np.newaxis] * _CLUSTER
    cluster = cluster.reshape(points, -1)
    cluster = np.where(np.isfinite(cluster), cluster, low[:, np.newaxis])
    grid = np.concatenate([base, np.clip(cluster, low[:, np.newaxis], high[:, np.newaxis])], axis=1)
    grid = np.sort(grid, axis=1)
    if loop.is_discrete:
        grid[:, -1] = high  # the Nyquist frequency exactly
    return grid


def bisect_rows(func, lo: np.ndarray, hi: np.ndarray, f_lo: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Vectorised bisection in log w on brackets where ``func`` changes sign."""
    a, b = np.log(lo), np.log(hi)
    sign_a = np.signbit(f_lo)
    for _ in range(_BISECTIONS):
        mid = 0.5 * (a + b)
        f_mid = func(np.exp(mid), rows)
        same = np.signbit(f_mid) == sign_a
        a = np.where(same, mid, a)
        b = np.where(same, b, mid)
    return np.exp(0.5 * (a + b))


def sign_change_brackets(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(row, column) of every sign change between grid columns j and j + 1."""
    sign = np.signbit(values)
    change = sign[:, 1:] != sign[:, :-1]
    rows, columns = np.nonzero(change)
    return rows, columns


def _worst_by_row(points: int, rows: np.ndarray, key: np.ndarray, *values: np.ndarray):
    """For each row pick the entry with the smallest ``key``; ``nan`` rows get (inf, nan...)."""
    best_key = np.full(points, np.inf)
    np.minimum.at(best_key, rows, key)
    picked = [np.full(points, np.nan) for _ in values]
    if rows.size:
        is_best = key == best_key[rows]
        # First best entry per row (deterministic).
        order = np.flatnonzero(is_best)
        first_rows, first = np.unique(rows[order], return_index=True)
        chosen = order[first]
        for out, value in zip(picked, values):
            out[first_rows] = value[chosen]
    return best_key, picked


def _crossover_ends(grid, num, den, rows, w_gc, discrete: bool) -> tuple[np.ndarray, np.ndarray]:
    """Lowest frequency where ``|L|`` falls below 1 and highest where it is 1 (module notes)."""
    points = grid.shape[0]
    above_first = np.abs(num[:, 0]) >= np.abs(den[:, 0])
    above_last = np.abs(num[:, -1]) > np.abs(den[:, -1])
    first = np.full(points, np.inf)
    last = np.zeros(points)
    np.minimum.at(first, rows, w_gc)
    np.maximum.at(last, rows, w_gc)
    # no downward crossing on the grid: |L| >= 1 throughout, up to the end
    first = np.where(np.isfinite(first), first, grid[:, -1] if discrete else np.inf)
    first = np.where(above_first, first, 0.0)
    last = np.where(above_last, grid[:, -1] if discrete else np.inf, last)
    return first, last


def _checked_gains(loop: Loop, gain: object) -> np.ndarray:
    """The loop gain per point, shape ``(P,)``, refusing a non-Loop, a non-finite or a zero gain."""
    if not isinstance(loop, Loop):
        raise InputError(f"expected a gainloom Loop; got {type(loop).__name__}")
    gains = np.broadcast_to(np.asarray(gain, dtype=float), (loop.points,)).copy()
    if gains.ndim != 1 or not np.all(np.isfinite(gains)) or np.any(gains == 0):
        raise InputError(f"gain must be finite and non-zero, scalar or one per point; got {gain!r}")
    return gains


def _scaled_response(loop: Loop, gains: np.ndarray, w: np.ndarray, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``K N(jw)`` and ``D(jw)`` of the points ``rows`` (shape ``(R,)``) at ``w`` (``R * m`` values, rad/s).

    Both come back in the shape of ``w``; row ``i`` of ``w`` reshaped to ``(R, m)`` belongs to ``rows[i]``.
    """
    sub = loop.select(rows)
    num, den = frequency_response(sub, w.reshape(rows.size, -1))
    return (gains[rows][:, np.newaxis] * num).reshape(w.shape), den.reshape(w.shape)


def _log_gain_ratio(loop: Loop, gains: np.ndarray, w: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``log|K N| - log|D|`` at ``w``: its sign changes at a gain crossover."""
    n, d = _scaled_response(loop, gains, w, rows)
    return np.log(np.abs(n)) - np.log(np.abs(d))


def _phase_indicator(loop: Loop, gains: np.ndarray, w: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``Im(K N conj D)`` at ``w``: the sign of ``Im L`` without the poles of ``L``."""
    n, d = _scaled_response(loop, gains, w, rows)
    return (n * np.conj(d)).imag


def _refine_sign_changes(grid: np.ndarray, values: np.ndarray, func) -> tuple[np.ndarray, np.ndarray]:
    """Rows and frequencies (rad/s) of every sign change of ``values`` (shape ``(P, m)`` on ``grid``),
    bisected on ``func(w, rows)``."""
    r, c = sign_change_brackets(values)
    if r.size == 0:
        return r, np.zeros(0)
    return r, bisect_rows(func, grid[r, c], grid[r, c + 1], values[r, c], r)


def _phase_crossovers(
    loop: Loop, gains: np.ndarray, grid: np.ndarray, num: np.ndarray, den: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Rows and frequencies (rad/s) where ``L`` crosses the real axis, the end points where it is real and
    negative included (``w = 0`` and, for discrete loops, Nyquist)."""
    p_rows, w_pc = _refine_sign_changes(grid, (num * np.conj(den)).imag, partial(_phase_indicator, loop, gains))
    points = loop.points
    end_w = [np.zeros(points)]
    if loop.ts is not None:
        end_w.append(np.pi / loop.ts)
    for w_end in end_w:
        n_end, d_end = _scaled_response(loop, gains, w_end.reshape(points, 1), np.arange(points))
        value = (n_end * np.conj(d_end)).real[:, 0]
        finite = np.abs(d_end[:, 0]) > 0
        rows = np.flatnonzero(finite & (value < 0))
        p_rows = np.concatenate([p_rows, rows])
        w_pc = np.concatenate([w_pc, w_end[rows]])
    return p_rows, w_pc


def _gain_margin(
    loop: Loop, gains: np.ndarray, p_rows: np.ndarray, w_pc: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Worst gain margin per point (shape ``(P,)``, ``inf`` without a phase crossover) and its frequency.

    Only crossings of the negative real axis count.
    """
    if p_rows.size:
        n_pc, d_pc = _scaled_response(loop, gains, w_pc, p_rows)
        ratio = n_pc / d_pc
        negative = ratio.real < 0
        p_rows, w_pc, ratio = p_rows[negative], w_pc[negative], ratio[negative]
        gm_each = 1.0 / np.abs(ratio)
    else:
        gm_each = np.zeros(0)
    gm_key, (gm, wpc) = _worst_by_row(loop.points, p_rows, np.abs(np.log(gm_each)), gm_each, w_pc)
    return np.where(np.isfinite(gm_key), gm, np.inf), wpc


def _phase_and_delay_margins(
    loop: Loop, gains: np.ndarray, g_rows: np.ndarray, w_gc: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Worst phase margin (deg), its crossover (rad/s) and the smallest delay margin (s), each ``(P,)``."""
    if g_rows.size:
        n_gc, d_gc = _scaled_response(loop, gains, w_gc, g_rows)
        phase = np.angle(n_gc / d_gc, deg=True)
        pm_each = np.remainder(phase, 360.0) - 180.0
        lag = np.deg2rad(np.remainder(pm_each, 360.0))
        dm_each = lag / w_gc
    else:
        pm_each = dm_each = np.zeros(0)
    pm_key, (pm, wgc) = _worst_by_row(loop.points, g_rows, np.abs(pm_each), pm_each, w_gc)
    pm = np.where(np.isfinite(pm_key), pm, np.inf)
    dm = np.full(loop.points, np.inf)
    np.minimum.at(dm, g_rows, dm_each)
    return pm, wgc, dm


def _distinct_neighbours(grid: np.ndarray, col: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``log w`` of the nearest grid values below and above ``grid[p, col[p]]`` that differ from it, ``(P,)`` each.

    The grid may repeat values, so the neighbours are those of the run of equal values.
    """
    points, m = grid.shape
    rows = np.arange(points)
    index = np.broadcast_to(np.arange(m), grid.shape)
    starts = grid[:, 1:] != grid[:, :-1]
    run_start = np.maximum.accumulate(np.where(np.c_[np.ones(points, bool), starts], index, 0), axis=1)
    run_end = m - 1 - np.maximum.accumulate(
        np.where(np.c_[starts, np.ones(points, bool)][:, ::-1], index, 0), axis=1
    )[:, ::-1]
    a = np.log(grid[rows, np.maximum(run_start[rows, col] - 1, 0)])
    b = np.log(grid[rows, np.minimum(run_end[rows, col] + 1, m - 1)])
    return a, b


def _golden_maximum(func, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Mid-point of the final bracket of a golden-section search for the maximum of ``func`` on ``[a, b]``."""
    ratio = (np.sqrt(5.0) - 1.0) / 2.0
    x1 = b - ratio * (b - a)
    x2 = a + ratio * (b - a)
    f1, f2 = func(x1), func(x2)
    for _ in range(_GOLDEN_STEPS):
        left = f1 >= f2  # maximum lies in [a, x2]
        b = np.where(left, x2, b)
        a = np.where(left, a, x1)
        new = np.where(left, b - ratio * (b - a), a + ratio * (b - a))
        f_new = func(new)
        x2, f2, x1, f1 = (
            np.where(left, x1, new),
            np.where(left, f1, f_new),
            np.where(left, new, x2),
            np.where(left, f_new, f2),
        )
    return 0.5 * (a + b)


def _sensitivity_at(loop: Loop, gains: np.ndarray, rows: np.ndarray, logw: np.ndarray) -> np.ndarray:
    """``|S| = |D| / |D + K N|`` of the points ``rows`` at ``log w``."""
    n, d = _scaled_response(loop, gains, np.exp(logw), rows)
    return np.abs(d) / np.abs(d + n)


def _sensitivity_peak(
    loop: Loop, gains: np.ndarray, grid: np.ndarray, num: np.ndarray, den: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Peak of ``|S|`` per point and its frequency (rad/s), ``(P,)`` each: grid maximum, then golden section
    in ``log w`` between its distinct neighbours (kept only where it improves on the grid)."""
    sens = np.abs(den) / np.abs(den + num)
    sens = np.where(np.isnan(sens), np.inf, sens)
    col = np.argmax(sens, axis=1)
    rows = np.arange(loop.points)
    a, b = _distinct_neighbours(grid, col)
    f_sens = partial(_sensitivity_at, loop, gains, rows)
    w_opt = np.exp(_golden_maximum(f_sens, a, b))
    ms_opt = f_sens(np.log(w_opt))
    use_grid = ~(ms_opt > sens[rows, col])
    return np.where(use_grid, sens[rows, col], ms_opt), np.where(use_grid, grid[rows, col], w_opt)


def _stability(
    loop: Loop, gains: np.ndarray, dm: np.ndarray
) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Closed-loop stability per point from the poles, the delay margin zeroed where unstable, and warnings.

    With continuous dead time the poles are those of the rational part only, so an unstable point with
    dead time keeps its delay margin and the verdict carries a warning.
    """
    poles = closed_loop_poles(loop, gains[:, np.newaxis])[:, 0, :]
    if loop.is_discrete:
        stable = np.all(np.abs(poles) < 1.0, axis=1)
    else:
        stable = np.all(poles.real < 0.0, axis=1)
    warnings: list[str] = []
    has_dead_time = (not loop.is_discrete) and np.any(loop.dead_time > 0)
    if has_dead_time:
        warnings.append(
            "continuous dead time: 'stable' and the zero delay margin of unstable points refer to the "
            "rational part only; discretise the loop for a pole-based stability verdict"
        )
        dm = np.where(stable | (loop.dead_time > 0), dm, 0.0)
    else:
        dm = np.where(stable, dm, 0.0)
    return stable, dm, warnings


def loop_margins(loop: Loop, gain: object = 1.0) -> Margins:
    """Gain, phase and delay margins and the sensitivity peak of every point.

    Parameters
    ----------
    loop : Loop
        ``P`` loops ``N/D`` (continuous, possibly with ``dead_time`` in
        seconds, or discrete with any computation delay already in the
        polynomials).
    gain : float or array_like, shape (P,)
        Loop gain ``K`` (dimensionless) at which the margins are taken:
        the loop examined is ``K N/D``.

    Returns
    -------
    Margins
        Per-point margins; see the module notes for the conventions when
        several crossovers exist (the worst is reported).

    Notes
    -----
    The crossover frequencies are exact to about 1e-12 relative provided the
    grid brackets them; the grid spans three decades beyond the slowest and
    fastest open- and closed-loop roots (to Nyquist for discrete loops) and
    clusters points around every lightly damped root.  Two crossovers closer
    together than the grid spacing there can be missed (then both are, and
    the margin reported is that of the next crossover).
    """
    gains = _checked_gains(loop, gain)
    grid = frequency_grid(loop, gains)
    num, den = frequency_response(loop, grid)
    num = gains[:, np.newaxis] * num

    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g_rows, w_gc = _refine_sign_changes(
            grid, np.log(np.abs(num)) - np.log(np.abs(den)), partial(_log_gain_ratio, loop, gains)
        )
        p_rows, w_pc = _phase_crossovers(loop, gains, grid, num, den)
        gm, wpc = _gain_margin(loop, gains, p_rows, w_pc)
        pm, wgc, dm = _phase_and_delay_margins(loop, gains, g_rows, w_gc)
        crossover, last_crossover = _crossover_ends(grid, num, den, g_rows, w_gc, loop.is_discrete)
        ms, wms = _sensitivity_peak(loop, gains, grid, num, den)
        gm_db = 20.0 * np.log10(gm)

    stable, dm, warnings = _stability(loop, gains, dm)
    return Margins(
        gain_margin=gm,
        gain_margin_db=gm_db,
        phase_crossover=wpc,
        phase_margin=pm,
        gain_crossover=wgc,
        delay_margin=dm,
        delay_margin_samples=dm / loop.ts if loop.is_discrete else None,
        sensitivity_peak=ms,
        sensitivity_peak_frequency=wms,
        stable=stable,
        gain=gains,
        crossover=crossover,
        last_crossover=last_crossover,
        warnings=tuple(warnings),
    )

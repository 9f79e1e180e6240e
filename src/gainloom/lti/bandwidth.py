"""Closed-loop bandwidth of unity-feedback loops, batched over points.

The bandwidth of ``T = K L/(1 + K L)`` is the lowest frequency at which
``|T(j w)|`` falls to ``|T(0)|/sqrt(2)`` (the half-power or -3.01 dB
point).  This is python-control's ``bandwidth(T, dbdrop)`` with
``dbdrop = 20 log10(1/sqrt(2))``; its default ``dbdrop = -3`` sits 0.01 dB
lower.  ``T`` is evaluated as ``K N/(D + K N)`` on the same frequency grid
as the margins (:mod:`gainloom.lti.margins`), which clusters points around
every lightly damped closed-loop pole, and the crossing is refined by
bisection in ``log w``.

Values: ``nan`` where ``T(0) = 0`` (a loop with a zero at ``s = 0`` /
``z = 1``) or is not finite (a closed-loop pole at ``s = 0``); ``inf``
where ``|T|`` never falls that far (for a discrete loop, not up to the
Nyquist frequency ``pi/ts``).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from .loop import Loop
from .margins import bisect_rows, frequency_grid, frequency_response, sign_change_brackets

__all__ = ["closed_loop_bandwidth", "HALF_POWER"]

#: ``|T|/|T(0)|`` at the bandwidth.
HALF_POWER = 1.0 / math.sqrt(2.0)


def closed_loop_bandwidth(loop: Loop, gain: object = 1.0) -> np.ndarray:
    """Half-power bandwidth of ``T = K N/(D + K N)`` at every point.

    Parameters
    ----------
    loop : Loop
        ``P`` open loops ``N/D`` (continuous, possibly with dead time, or
        discrete with the computation delay in the polynomials).
    gain : float or array_like, shape (P,)
        Loop gain ``K`` (finite, non-zero).

    Returns
    -------
    ndarray, shape (P,)
        Bandwidth in rad/s (see the module notes for ``nan`` and ``inf``).
    """
    if not isinstance(loop, Loop):
        raise InputError(f"expected a gainloom Loop; got {type(loop).__name__}")
    gains = np.broadcast_to(np.asarray(gain, dtype=float), (loop.points,)).copy()
    if gains.ndim != 1 or not np.all(np.isfinite(gains)) or np.any(gains == 0):
        raise InputError(f"gain must be finite and non-zero, scalar or one per point; got {gain!r}")
    points = loop.points
    grid = frequency_grid(loop, gains)

    def magnitude(w: np.ndarray, rows: np.ndarray) -> np.ndarray:
        num, den = frequency_response(loop.select(rows), w.reshape(rows.size, -1))
        num = gains[rows][:, np.newaxis] * num
        return (np.abs(num) / np.abs(den + num)).reshape(w.shape)

    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        dc = magnitude(np.zeros((points, 1)), np.arange(points))[:, 0]
        level = dc * HALF_POWER
        defined = np.isfinite(dc) & (dc > 0)

        def excess(w: np.ndarray, rows: np.ndarray) -> np.ndarray:
            # positive while |T| is above the half-power level
            return np.log(magnitude(w, rows)) - np.log(level[rows]).reshape((-1,) + (1,) * (w.ndim - 1))

        values = excess(grid, np.arange(points))
        values = np.where(np.isnan(values), -np.inf, values)
        # |T| below the level already at the grid's first frequency: bracket from w -> 0
        starts_below = values[:, 0] < 0
        rows, cols = sign_change_brackets(values)
        downward = values[rows, cols] >= 0
        rows, cols = rows[downward], cols[downward]
        first = np.full(points, -1)
        order = np.unique(rows, return_index=True)
        first[order[0]] = cols[order[1]]
        found = np.flatnonzero(defined & (first >= 0) & ~starts_below)
        out = np.where(defined, np.inf, np.nan)
        if found.size:
            c = first[found]
            out[found] = bisect_rows(excess, grid[found, c], grid[found, c + 1], values[found, c], found)
        low = np.flatnonzero(defined & starts_below)
        if low.size:
            out[low] = bisect_rows(excess, grid[low, 0] * 1e-9, grid[low, 0], np.ones(low.size), low)
    return out

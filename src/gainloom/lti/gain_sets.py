"""Gain sets of frequency-domain specs for loops of fixed shape, batched over rows.

For a loop ``K H(z)`` of fixed shape ``H`` only the gain ``K > 0`` is free.
Every frequency-domain spec is then a set of gains, read off the frequency
response ``H(e^{j w ts})`` on a dense grid ``0 < w <= pi/ts``:

* a gain crossover at ``w`` happens for exactly one gain, ``k(w) = 1/|H(w)|``,
  and the phase there, ``arg H(w)``, does not depend on ``K``.  So the phase
  margin ``PM(w) = (arg H mod 360 deg) - 180 deg`` (the convention of
  :mod:`gainloom.lti.margins`), the delay margin ``PM(w)/w`` and the
  crossover frequency itself are functions of ``w`` alone, and a spec on them
  rules out the gains ``k(w)`` of every frequency where it fails.  Each run of
  failing grid frequencies rules out the gain interval it spans (its ends
  found by bisection on the response).  The spec is asked of *every*
  crossover, which implies it for the one :func:`~gainloom.lti.margins.loop_margins`
  reports.
* ``|1 + K H(w)| < 1/Ms`` is a quadratic inequality in ``K`` at each ``w``;
  its solutions over a run of frequencies form one interval (they move
  continuously with ``w``).
* ``|K H/(1 + K H)| >= 1/sqrt(2)`` (closed-loop -3 dB) is the quadratic
  ``K^2 |H|^2 - 2 K Re H - 1 >= 0``: ``K`` at least its positive root; a
  bandwidth of at least ``wb`` needs that for every ``w <= wb``.

The result for each row is a sorted list of open intervals ``(low, high)`` of
gains that meet the spec (``high`` may be ``inf``).  Gain margin and pole
regions are not here: :mod:`gainloom.lti.intervals` gives them exactly.
Run edges are exact to the bisection; a feature narrower than the grid
spacing (80 frequencies per decade) can still be missed, so callers re-check
their choice with :func:`~gainloom.lti.margins.loop_margins`.
"""

from __future__ import annotations

import math

import numpy as np

from .loop import Loop
from .margins import frequency_response

__all__ = [
    "ResponseGrid",
    "response_grid",
    "phase_margin_gains",
    "delay_margin_gains",
    "crossover_band_gains",
    "sensitivity_gains",
    "bandwidth_gains",
    "crossover_at",
    "intersect",
    "intersect_all",
]

Intervals = list[tuple[float, float]]

#: Grid frequencies per decade of the response (3 % spacing).
PER_DECADE = 80
#: Bisection steps on each run edge (to ~1e-9 of the grid spacing).
EDGE_BISECTIONS = 30


class ResponseGrid:
    """Frequency response of ``R`` loops of fixed shape on a log grid.

    Attributes
    ----------
    w : ndarray, shape (R, M)
        Frequencies, rad/s, increasing, the last one Nyquist ``pi/ts``.
    h : ndarray of complex, shape (R, M)
        ``H(e^{j w ts})``.
    log_k : ndarray, shape (R, M)
        ``-log|H|``: the log of the gain whose crossover is at ``w``.
    log_k0 : ndarray, shape (R,)
        ``-log|H(1)|`` (``-inf`` for a loop with an integrator).
    """

    def __init__(self, loop: Loop, w: np.ndarray, h: np.ndarray, h0: np.ndarray):
        self.loop = loop
        self.w = w
        self.h = h
        with np.errstate(divide="ignore"):
            self.log_k = -np.log(np.abs(h))
            self.log_k0 = -np.log(np.abs(h0))


def response_grid(loop: Loop, low: np.ndarray) -> ResponseGrid:
    """Sample a discrete loop's response from ``low`` (rad/s, per row) to Nyquist.

    Parameters
    ----------
    loop : Loop
        ``R`` discrete loops ``H`` (the gain ``K`` left out).
    low : ndarray, shape (R,)
        Lowest grid frequency, rad/s; gains whose only crossovers lie below
        it are judged as if crossing at ``low``'s neighbourhood and at
        ``w = 0`` (see :func:`phase_margin_gains`).
    """
    nyquist = np.pi / np.asarray(loop.ts, float)
    low = np.minimum(np.asarray(low, float), nyquist * 1e-3)
    decades = float(np.max(np.log10(nyquist / low)))
    count = max(int(math.ceil(decades * PER_DECADE)), 64)
    t = np.linspace(0.0, 1.0, count)
    w = np.exp(np.log(low)[:, None] + t[None, :] * np.log(nyquist / low)[:, None])
    w[:, -1] = nyquist
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        num, den = frequency_response(loop, w)
        h = num / den
        n0, d0 = frequency_response(loop, np.zeros((loop.points, 1)))
        h0 = n0[:, 0] / d0[:, 0]
    h0 = np.where(np.isfinite(h0), h0, np.inf)
    return ResponseGrid(loop, w, h, h0)


def _runs_to_gains(bad: np.ndarray, low: np.ndarray, high: np.ndarray, first_extra: np.ndarray) -> list[Intervals]:
    """Good gain intervals from per-frequency bad gain ranges.

    ``bad`` (R, M): grid frequencies that fail; ``low``/``high``: log-gain
    range each failing frequency rules out (already widened by the run-edge
    interpolation); ``first_extra`` (R,): log gain added to a run that starts
    at the first grid frequency (the ``w -> 0`` end).
    """
    R, M = bad.shape
    rows, cols = np.nonzero(bad)
    out: list[Intervals] = []
    if rows.size == 0:
        return [[(0.0, math.inf)] for _ in range(R)]
    start = np.ones(rows.size, dtype=bool)
    start[1:] = (rows[1:] != rows[:-1]) | (cols[1:] != cols[:-1] + 1)
    begin = np.flatnonzero(start)
    lo = np.minimum.reduceat(low[rows, cols], begin)
    hi = np.maximum.reduceat(high[rows, cols], begin)
    run_row = rows[begin]
    at_zero = cols[begin] == 0
    lo = np.where(at_zero, np.fmin(lo, first_extra[run_row]), lo)
    hi = np.where(at_zero, np.fmax(hi, first_extra[run_row]), hi)
    bad_by_row: list[list[tuple[float, float]]] = [[] for _ in range(R)]
    for r, a, b in zip(run_row, np.exp(lo), np.exp(hi)):
        bad_by_row[r].append((float(a), float(b)))
    for spans in bad_by_row:
        out.append(_complement(spans))
    return out


def _complement(bad: list[tuple[float, float]]) -> Intervals:
    """Open intervals of ``(0, inf)`` outside the union of closed ``bad`` ranges."""
    good: Intervals = []
    edge = 0.0
    for a, b in sorted(bad):
        if a > edge:
            good.append((edge, a))
        edge = max(edge, b)
    if edge < math.inf:
        good.append((edge, math.inf))
    return good


def _slack_values(slack_fn, h: np.ndarray, w: np.ndarray, rows: np.ndarray | None) -> np.ndarray:
    """``slack_fn(h, w, rows)`` with NaN counted as failing; rows None: the whole grid."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        slack = slack_fn(h, w, rows)
    return np.where(np.isnan(slack), -1.0, np.clip(slack, -1e300, 1e300))


def _edge_gains(grid: ResponseGrid, slack_fn, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Log gain at the frequency where the slack changes sign between grid columns j and j + 1.

    Vectorised bisection in ``log w`` on the loop's own response (a linear
    interpolation would be off by degrees across a lightly damped resonance).
    """
    a = np.log(grid.w[rows, cols])
    b = np.log(grid.w[rows, cols + 1])
    sub = grid.loop.select(rows)
    sign_a = np.signbit(_slack_values(slack_fn, grid.h[rows, cols], grid.w[rows, cols], rows))
    for _ in range(EDGE_BISECTIONS):
        mid = 0.5 * (a + b)
        w = np.exp(mid)[:, None]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            num, den = frequency_response(sub, w)
        same = np.signbit(_slack_values(slack_fn, (num / den)[:, 0], w[:, 0], rows)) == sign_a
        a = np.where(same, mid, a)
        b = np.where(same, b, mid)
    w = np.exp(0.5 * (a + b))[:, None]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        num, den = frequency_response(sub, w)
        return -np.log(np.abs(num / den))[:, 0]


def _crossing_gains(grid: ResponseGrid, slack_fn) -> list[Intervals]:
    """Gains whose every crossover has ``slack_fn(H(w), w, rows) >= 0`` (per-frequency, K-free)."""
    slack = _slack_values(slack_fn, grid.h, grid.w, None)
    log_k = np.where(np.isfinite(grid.log_k), grid.log_k, np.inf)
    bad = slack < 0
    low = np.where(bad, log_k, np.inf)
    high = np.where(bad, log_k, -np.inf)
    # the edge of each failing run between its grid neighbours, to the last bits
    change = bad[:, :-1] != bad[:, 1:]
    edge = np.full(change.shape, np.nan)
    rows, cols = np.nonzero(change)
    if rows.size:
        edge[rows, cols] = _edge_gains(grid, slack_fn, rows, cols)
    edge = np.where(np.isfinite(edge), edge, np.nan)
    left = np.c_[edge, np.full(edge.shape[0], np.nan)]   # edge to the right of point j
    right = np.c_[np.full(edge.shape[0], np.nan), edge]  # edge to the left of point j
    for e in (left, right):
        low = np.where(bad & np.isfinite(e), np.fmin(low, e), low)
        high = np.where(bad & np.isfinite(e), np.fmax(high, e), high)
    return _runs_to_gains(bad, low, high, grid.log_k0)


def _phase_margin(h: np.ndarray) -> np.ndarray:
    """``PM(w) = (arg H mod 360 deg) - 180 deg`` (the convention of lti.margins)."""
    return np.remainder(np.angle(h, deg=True), 360.0) - 180.0


def phase_margin_gains(grid: ResponseGrid, min_pm: np.ndarray) -> list[Intervals]:
    """Gains whose every gain crossover has ``PM >= min_pm`` (deg, per row; NaN: any)."""
    need = np.nan_to_num(np.asarray(min_pm, float), nan=-np.inf)
    return _crossing_gains(grid, lambda h, w, rows: _phase_margin(h) - _at(need, rows))


def delay_margin_gains(grid: ResponseGrid, min_delay: np.ndarray) -> list[Intervals]:
    """Gains whose every gain crossover tolerates an extra delay ``>= min_delay`` (s)."""
    need = np.asarray(min_delay, float)

    def slack(h, w, rows):
        n = _at(need, rows)
        delay = np.deg2rad(np.remainder(_phase_margin(h), 360.0)) / w
        # relative slack keeps the bisection well scaled
        return np.where(np.isfinite(n) & (n > 0), delay / np.where(n > 0, n, 1.0) - 1.0, 1.0)

    return _crossing_gains(grid, slack)


def crossover_band_gains(grid: ResponseGrid, low: np.ndarray, high: np.ndarray) -> list[Intervals]:
    """Gains whose every gain crossover lies in ``[low, high]`` rad/s (NaN: unbounded)."""
    low, high = np.asarray(low, float), np.asarray(high, float)
    with np.errstate(divide="ignore"):
        lo = np.where(np.isnan(low), -np.inf, np.log(np.where(np.isnan(low), 1.0, low)))
        hi = np.where(np.isnan(high), np.inf, np.log(np.where(np.isnan(high), 1.0, high)))
    return _crossing_gains(grid, lambda h, w, rows: np.minimum(np.log(w) - _at(lo, rows), _at(hi, rows) - np.log(w)))


def _at(values: np.ndarray, rows: np.ndarray | None) -> np.ndarray:
    """Per-row spec values against the whole grid (rows None: shape (R, 1)) or edge rows."""
    return values[:, None] if rows is None else values[rows]


def sensitivity_gains(grid: ResponseGrid, max_ms: np.ndarray) -> list[Intervals]:
    """Gains with ``|1/(1 + K H(w))| <= max_ms`` at every grid frequency."""
    ms = np.asarray(max_ms, float)[:, None]
    a = np.abs(grid.h) ** 2
    b = 2.0 * grid.h.real
    c = 1.0 - 1.0 / ms**2
    with np.errstate(invalid="ignore", divide="ignore"):
        disc = b * b - 4.0 * a * c
        root = np.sqrt(disc)
        k1 = (-b - root) / (2.0 * a)
        k2 = (-b + root) / (2.0 * a)
        bad = np.isfinite(ms) & (disc > 0) & (b < 0) & (a > 0)
        low = np.where(bad, np.log(np.maximum(k1, 1e-300)), np.inf)
        high = np.where(bad, np.log(np.maximum(k2, 1e-300)), -np.inf)
    return _runs_to_gains(bad, low, high, np.full(bad.shape[0], np.nan))


def bandwidth_gains(loop: Loop, min_bandwidth: np.ndarray, grid: ResponseGrid) -> list[Intervals]:
    """Gains whose closed loop ``|T| >= 1/sqrt(2)`` on ``(0, min_bandwidth]`` rad/s."""
    wb = np.asarray(min_bandwidth, float)
    out: list[Intervals] = []
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        num, den = frequency_response(loop, np.nan_to_num(wb, nan=1.0)[:, None])
        h_end = num[:, 0] / den[:, 0]
        h = np.concatenate([grid.h, h_end[:, None]], axis=1)
        w = np.concatenate([grid.w, wb[:, None]], axis=1)
        a = np.abs(h) ** 2
        k_plus = (h.real + np.sqrt(h.real**2 + a)) / a
        k_plus = np.where(w <= wb[:, None], k_plus, 0.0)
        need = np.nanmax(np.where(np.isfinite(k_plus), k_plus, np.inf), axis=1)
    for value, bound in zip(need, wb):
        out.append([(0.0, math.inf)] if not np.isfinite(bound) else ([(float(value), math.inf)] if np.isfinite(value) else []))
    return out


def crossover_at(grid: ResponseGrid, gains: np.ndarray) -> np.ndarray:
    """Highest gain crossover (rad/s) of ``K H`` for gains ``(R, C)``.

    ``0`` where ``|K H| < 1`` at every grid frequency, Nyquist where
    ``|K H| >= 1`` up to it (then there is no crossover below Nyquist).
    """
    log_g = np.log(np.asarray(gains, float))
    log_k = np.where(np.isfinite(grid.log_k), grid.log_k, np.inf)
    above = log_k[:, None, :] <= log_g[..., None]  # |K H| >= 1
    M = log_k.shape[1]
    any_above = above.any(axis=-1)
    last = M - 1 - np.argmax(above[..., ::-1], axis=-1)
    nxt = np.minimum(last + 1, M - 1)
    rows = np.arange(log_k.shape[0])[:, None]
    k0, k1 = log_k[rows, last], log_k[rows, nxt]
    lw0, lw1 = np.log(grid.w[rows, last]), np.log(grid.w[rows, nxt])
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.clip((log_g - k0) / (k1 - k0), 0.0, 1.0)
    t = np.where(np.isfinite(t), t, 0.0)
    w = np.exp(lw0 + t * (lw1 - lw0))
    return np.where(any_above, w, 0.0)


def intersect(a: Intervals, b: Intervals) -> Intervals:
    """Intersection of two sorted lists of open intervals."""
    out: Intervals = []
    i = j = 0
    while i < len(a) and j < len(b):
        lo, hi = max(a[i][0], b[j][0]), min(a[i][1], b[j][1])
        if lo < hi:
            out.append((lo, hi))
        if a[i][1] < b[j][1]:
            i += 1
        else:
            j += 1
    return out


def intersect_all(*sets: list[Intervals]) -> list[Intervals]:
    """Row-wise intersection of several per-row interval lists."""
    out = [list(s) for s in sets[0]]
    for other in sets[1:]:
        out = [intersect(x, y) for x, y in zip(out, other)]
    return out

"""Exact gain intervals: stable gains and gains meeting a spec region.

Method (see also docs/exact-intervals.md):

1. Candidate gains are the gains at which a closed-loop root of ``D + K N``
   lies on a boundary curve of the region (imaginary axis or unit circle for
   plain stability; rays, lines, circles, log-spirals and ``wn`` contours for
   specs), solved by :mod:`gainloom.lti.boundary` -- polynomial roots and
   Newton polishing for lines and circles, bracketing (bisection) for the
   transcendental z-plane curves; never read off a gain grid.  Gains where
   the leading coefficient ``d0 + K n0`` vanishes (a root through infinity)
   are candidates too.
2. Between consecutive candidates (and beyond the last) no root crosses the
   boundary, so membership is constant; it is decided at one interior gain
   per sub-interval by batched closed-loop roots, all loops and all
   sub-intervals in one eigenvalue call.
3. Adjacent member sub-intervals are merged: a candidate where a root only
   touches the boundary, or that belongs to a part of a curve that does not
   bound the region, does not split an interval.

Intervals are open.  Extra candidates cost one more root evaluation; a
missed one could hide an unstable island, which is why the sampled curves
use a fine grid (geometric near ``z = 1``).  A loop with a numerator and
denominator root in common *on* a boundary curve has a closed-loop root
pinned there for every gain; it is reported with no intervals.

Cost: one Python pass per loop for the candidate gains (a few numpy calls
per curve, plus a batched bisection of the sampled z-plane curves), then a
single batched root computation for every loop together.

Fast sampling: every discrete loop is solved in the delta variable
``g = (z - 1)/ts``: circles ``|z| = r`` become circles through
``(r - 1)/ts`` and ``-(r + 1)/ts`` with ``r - 1`` formed by ``expm1``;
spirals and ``wn`` contours are evaluated as ``expm1(s ts)/ts``; membership
uses roots in ``g`` read through ``s = log1p(ts g)/ts``, so poles crowding
near ``z = 1`` keep their digits.  When the loop is given in ``g`` too
(``delta=(delta_num, delta_den)``, or a :class:`~gainloom.lti.loop.Loop`
carrying it) those coefficients are used; otherwise the z polynomials are
shifted to ``g`` exactly (rational arithmetic), which removes the
root-finding and evaluation error near ``z = 1`` but cannot restore digits
the z coefficients lost when they were rounded -- at ``ts |pole|`` around
``1e-5`` and below, give the delta form.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from ..errors import InputError
from .boundary import (
    Crossings,
    circle_crossings,
    expm1_complex,
    line_crossings,
    log1p_complex,
    sampled_crossings,
)
from .loop import Loop
from .polynomials import batched_roots
from .regions import SpecRegion, s_from_log, spiral_s, wn_contour_arcs

__all__ = [
    "GainInterval", "stable_gain_intervals", "spec_gain_intervals", "damping_gain_intervals", "region_crossings", "CURVE_NAMES",
]

#: Names of the boundary curves of a spec region, as keys of
#: :func:`region_crossings`: stability (imaginary axis / unit circle), decay
#: (``Re s = -min_decay`` / ``|z| = exp(-min_decay ts)``), damping (ray /
#: log-spiral), wn_low and wn_high (circles / contours), radius
#: (``|z| = max_pole_radius``).
CURVE_NAMES: tuple[str, ...] = ("stability", "decay", "damping", "wn_low", "wn_high", "radius")

#: Grid of the sampled curves: points per arc (uniform), plus geometric
#: points towards the real-axis end of the spiral where poles crowd.
_GRID_UNIFORM = 2001
_GRID_GEOMETRIC = 600


@dataclass(frozen=True)
class GainInterval:
    """An open interval of loop gains ``low < K < high``.

    Attributes
    ----------
    low, high : float
        Ends of the interval (``high`` may be ``inf``; ``low`` may be
        ``-inf`` for negative gains).
    """

    low: float
    high: float

    def contains(self, gain: object) -> np.ndarray:
        """Whether each gain lies strictly inside the interval."""
        gain = np.asarray(gain, dtype=float)
        return (gain > self.low) & (gain < self.high)

    def to_dict(self) -> dict[str, float | None]:
        """Plain dict; an unbounded end is ``None``."""
        return {
            "low": None if math.isinf(self.low) else float(self.low),
            "high": None if math.isinf(self.high) else float(self.high),
        }


def _spiral_grid() -> np.ndarray:
    grid = np.concatenate(
        [math.pi * np.logspace(-12, 0, _GRID_GEOMETRIC), np.linspace(0.0, math.pi, _GRID_UNIFORM)]
    )
    return np.unique(grid)


def _curve_crossings(
    nums: np.ndarray, dens: np.ndarray, region: SpecRegion, ts: np.ndarray | None, delta: bool
) -> dict[str, list[Crossings]]:
    """Crossings of every boundary curve of ``region``, all loops at once.

    Returns ``{curve name: one Crossings per loop}`` with names from
    :data:`CURVE_NAMES`.
    """
    zeta, sigma = region.min_damping, region.min_decay
    low, high = region.wn_range
    frequencies = [(name, wn) for name, wn in (("wn_low", low), ("wn_high", high)) if 0.0 < wn < math.inf]
    found: dict[str, list[Crossings]] = {}
    if ts is None:
        found["stability"] = line_crossings(nums, dens, 0.0, 1j)
        if sigma > 0:
            found["decay"] = line_crossings(nums, dens, -sigma, 1j)
        if zeta > 0:
            found["damping"] = line_crossings(nums, dens, 0.0, complex(-zeta, math.sqrt(1.0 - zeta**2)))
        for name, wn in frequencies:
            found[name] = circle_crossings(nums, dens, wn, -wn)
        return found

    # z-plane: map points z = exp(s ts) into the polynomial's variable.
    if delta:
        def from_s(s: np.ndarray, period: np.ndarray) -> np.ndarray:
            return expm1_complex(s * period) / period

        def circle(right_minus_one: np.ndarray, radius: np.ndarray) -> list[Crossings]:
            return circle_crossings(nums, dens, right_minus_one / ts, -(1.0 + radius) / ts)
    else:
        def from_s(s: np.ndarray, period: np.ndarray) -> np.ndarray:
            return np.exp(s * period)

        def circle(right_minus_one: np.ndarray, radius: np.ndarray) -> list[Crossings]:
            return circle_crossings(nums, dens, radius, -radius)

    ones = np.ones_like(ts)
    found["stability"] = circle(0.0 * ones, ones)
    if sigma > 0:
        found["decay"] = circle(np.expm1(-sigma * ts), np.exp(-sigma * ts))
    if region.max_pole_radius is not None and region.max_pole_radius < 1.0:
        r = region.max_pole_radius
        found["radius"] = circle((r - 1.0) * ones, r * ones)
    if zeta > 0:
        grid = _spiral_grid()
        column = ts[:, None]
        ends = from_s(spiral_s(np.array([[0.0, math.pi]]), zeta, column), column).real

        def spiral(u: np.ndarray, rows: np.ndarray) -> np.ndarray:
            period = ts[rows]
            return from_s(spiral_s(u, zeta, period), period)

        found["damping"] = sampled_crossings(nums, dens, spiral, grid, real_points=ends)
    for name, wn in frequencies:
        grid, ends = _wn_grid(wn, ts, from_s)

        def contour(psi: np.ndarray, rows: np.ndarray, wn: float = wn) -> np.ndarray:
            return from_s(wn * np.exp(1j * psi), ts[rows])

        found[name] = sampled_crossings(nums, dens, contour, grid, real_points=ends)
    return found


def _wn_grid(wn: float, ts: np.ndarray, from_s) -> tuple[np.ndarray, np.ndarray]:
    """Per-loop angle grids over the arcs of ``|s| = wn`` inside the principal strip.

    Two arcs (``wn ts > pi``) get half the points each with a ``nan`` between
    them, so the cell across the gap is skipped; the arc ends are real-axis
    points of the z-plane contour.
    """
    grid = np.empty((ts.size, _GRID_UNIFORM))
    ends = np.full((ts.size, 4), np.nan)
    half = (_GRID_UNIFORM - 1) // 2
    for p, period in enumerate(ts):
        arcs = wn_contour_arcs(wn, float(period))
        if len(arcs) == 1:
            grid[p] = np.linspace(0.0, math.pi, _GRID_UNIFORM)
        else:
            (a1, b1), (a2, b2) = arcs
            grid[p, :half] = np.linspace(a1, b1, half)
            grid[p, half] = np.nan
            grid[p, half + 1 :] = np.linspace(a2, b2, _GRID_UNIFORM - half - 1)
        edges = np.array([a for arc in arcs for a in arc])
        ends[p, : edges.size] = from_s(wn * np.exp(1j * edges), period).real
    return grid, ends


def candidate_gains(num: np.ndarray, den: np.ndarray, crossings: list[Crossings], sign: float) -> np.ndarray | None:
    """Sorted distinct candidate gains of one sign (as positive numbers), or None if pinned.

    Parameters
    ----------
    num, den : ndarray, shape (n + 1,)
        One loop in the variable its crossings were solved in
        (:func:`working_polynomials`).
    crossings : list of Crossings
        The loop's crossings of every boundary curve that splits the gains.
    sign : float
        ``1.0`` for positive gains, ``-1.0`` for negative ones.

    Returns
    -------
    ndarray or None
        The crossing gains and the gain where ``d0 + K n0`` vanishes, of
        that sign, as magnitudes; None when a root is pinned to a curve.
    """
    if any(c.fixed for c in crossings):
        return None
    gains = np.concatenate([c.gains for c in crossings] + [np.zeros(0)]) * sign
    if num[0] != 0.0:
        gains = np.append(gains, -den[0] / num[0] * sign)
    scale = float(np.max(np.abs(den)) / max(float(np.max(np.abs(num))), 1e-300))
    gains = np.sort(gains[np.isfinite(gains) & (gains > 1e-13 * scale)])
    if gains.size > 1:
        keep = np.concatenate([[True], np.diff(gains) > 1e-9 * gains[1:]])
        gains = gains[keep]
    return gains


def interior_gains(edges: np.ndarray, scale: float) -> np.ndarray:
    """One interior gain per sub-interval of (0, e1, ..., em, inf).

    Parameters
    ----------
    edges : ndarray
        Sorted positive candidate gains (:func:`candidate_gains`).
    scale : float
        Gain tested when there is no edge.

    Returns
    -------
    ndarray, shape (m + 1,)
        Midpoints, and twice the last edge beyond it.
    """
    if edges.size == 0:
        return np.array([scale])
    bounds = np.concatenate([[0.0], edges])
    return np.concatenate([0.5 * (bounds[:-1] + bounds[1:]), [2.0 * edges[-1]]])


def merge_members(edges: np.ndarray, member: np.ndarray, sign: float) -> list[GainInterval]:
    """Open intervals from sub-interval memberships, adjacent members merged.

    Parameters
    ----------
    edges : ndarray, shape (m,)
        Sorted positive edges splitting ``(0, inf)``.
    member : ndarray of bool, shape (m + 1,)
        Membership of each sub-interval.
    sign : float
        ``-1.0`` maps the intervals to negative gains.

    Returns
    -------
    list of GainInterval
    """
    bounds = np.concatenate([[0.0], edges, [math.inf]])
    intervals: list[tuple[float, float]] = []
    start = None
    for i, inside in enumerate(member):
        if inside and start is None:
            start = bounds[i]
        if not inside and start is not None:
            intervals.append((start, bounds[i]))
            start = None
    if start is not None:
        intervals.append((start, math.inf))
    if sign > 0:
        return [GainInterval(float(a), float(b)) for a, b in intervals]
    return [GainInterval(-float(b), -float(a) if a != 0 else 0.0) for a, b in reversed(intervals)]


def _normalise(num: object, den: object, ts: object, delta: object) -> tuple[Loop, bool]:
    if isinstance(num, Loop):
        if den is not None or ts is not None or delta is not None:
            raise InputError("given a Loop, leave den, ts and delta unset: they come from the loop")
        if np.any(num.dead_time != 0):
            raise InputError(
                "the loop carries dead time outside its rational part; discretise it (or replace the "
                "delay by a rational approximation) before asking for gain intervals"
            )
        return num, False
    if den is None:
        raise InputError("den is required unless num is a Loop")
    num_a, den_a = np.asarray(num, dtype=float), np.asarray(den, dtype=float)
    single = num_a.ndim <= 1 and den_a.ndim <= 1
    if delta is not None:
        try:
            delta_num, delta_den = delta
        except (TypeError, ValueError):
            raise InputError("delta must be a pair (delta_num, delta_den)") from None
        if ts is None:
            raise InputError("the delta form (delta=...) is for discrete loops; give the sample period ts")
    else:
        delta_num = delta_den = None
    loop = Loop(num=num_a, den=den_a, ts=ts, delta_num=delta_num, delta_den=delta_den)
    if loop.delta_den is not None and not np.all(loop.delta_den[:, 0] != 0):
        raise InputError("leading coefficient of delta_den is zero")
    return loop, single


def _shift_to_delta(poly: np.ndarray, ts: float) -> np.ndarray:
    """Coefficients in ``g`` of ``p(1 + ts g)``, computed exactly.

    Rational arithmetic on the float coefficients: the result is the same
    polynomial as the given z polynomial, rounded once at the end, with no
    cancellation in between.
    """
    step = Fraction(ts)
    ascending = [Fraction(0)]
    for coeff in poly.tolist():
        shifted = [Fraction(0)] * (len(ascending) + 1)
        for k, value in enumerate(ascending):
            shifted[k] += value
            shifted[k + 1] += value * step
        shifted[0] += Fraction(coeff)
        ascending = shifted
    return np.array([float(v) for v in reversed(ascending[: poly.size])])


def working_polynomials(loop: Loop) -> tuple[np.ndarray, np.ndarray, bool]:
    """Polynomials to solve in: ``s``; or ``g`` for every discrete loop.

    A given delta form is used as it is (its coefficients carry digits the
    z coefficients have lost).  Otherwise the z polynomials are shifted to
    ``g`` exactly: that cannot restore digits lost when the z coefficients
    were rounded, but it removes the error of finding clustered roots near
    ``z = 1`` and of evaluating the z polynomials there.
    """
    if loop.ts is None:
        return loop.num, loop.den, False
    if loop.delta_den is not None:
        return loop.delta_num, loop.delta_den, True
    nums = np.stack([_shift_to_delta(row, float(t)) for row, t in zip(loop.num, loop.ts)])
    dens = np.stack([_shift_to_delta(row, float(t)) for row, t in zip(loop.den, loop.ts)])
    return nums, dens, True


def _intervals(
    loop: Loop, region: SpecRegion, signs: tuple[float, ...]
) -> list[list[GainInterval]]:
    nums, dens, use_delta = working_polynomials(loop)
    plans = []  # (loop index, sign, edges) per searched side
    rows, gains = [], []
    per_curve = _curve_crossings(nums, dens, region, None if loop.ts is None else np.asarray(loop.ts), use_delta)
    for i in range(loop.points):
        crossings = [curve[i] for curve in per_curve.values()]
        scale = float(np.max(np.abs(dens[i])) / max(float(np.max(np.abs(nums[i]))), 1e-300))
        for sign in signs:
            edges = candidate_gains(nums[i], dens[i], crossings, sign)
            plans.append((i, sign, edges))
            if edges is None:
                continue
            tests = interior_gains(edges, scale) * sign
            rows.append(np.full(tests.size, i))
            gains.append(tests)
    member_all = np.zeros(0, dtype=bool)
    if rows:
        row_index = np.concatenate(rows)
        test_gain = np.concatenate(gains)
        polys = dens[row_index] + test_gain[:, None] * nums[row_index]
        roots = batched_roots(polys)
        if loop.ts is None:
            member = region._contains_s(roots)
        else:
            ts_rows = loop.ts[row_index][:, None]
            if use_delta:
                s = s_from_log(log1p_complex(ts_rows * roots), ts_rows)
                z_abs = np.abs(1.0 + ts_rows * roots)
            else:
                with np.errstate(divide="ignore"):
                    s = s_from_log(np.log(roots), ts_rows)
                z_abs = np.abs(roots)
            member = region._contains_s(s, z_abs=z_abs)
        member_all = np.all(member, axis=-1)
    results: list[list[GainInterval]] = [[] for _ in range(loop.points)]
    offset = 0
    for i, sign, edges in plans:
        if edges is None:
            continue
        count = edges.size + 1
        results[i].extend(merge_members(edges, member_all[offset : offset + count], sign))
        offset += count
    for intervals in results:
        intervals.sort(key=lambda interval: interval.low)
    return results


def _prepare_spec(num: object, den: object, region: object, ts: object, delta: object) -> tuple[Loop, bool, SpecRegion]:
    if not isinstance(region, SpecRegion):
        raise InputError(f"region must be a SpecRegion; got {type(region).__name__}")
    if isinstance(num, Loop):
        own = num.ts
        if region.ts is not None and (own is None or not np.allclose(own, region.ts, rtol=1e-12, atol=0.0)):
            found = "a continuous loop" if own is None else f"ts={np.asarray(own).tolist()}"
            raise InputError(f"the region's ts={region.ts} conflicts with the loop ({found})")
    elif ts is None:
        ts = region.ts
    elif region.ts is not None:
        given = np.asarray(ts, dtype=float)
        if not np.allclose(given, region.ts, rtol=1e-12, atol=0.0):
            raise InputError(f"ts={given.tolist()} conflicts with the region's ts={region.ts}; give one of them")
    loop, single = _normalise(num, den, ts, delta)
    if loop.ts is None and region.max_pole_radius is not None:
        raise InputError("max_pole_radius applies to discrete loops; these loops have no sample period")
    return loop, single, region


def spec_gain_intervals(
    num: object,
    den: object | None,
    region: SpecRegion,
    ts: object = None,
    delta: tuple[object, object] | None = None,
) -> list[GainInterval] | list[list[GainInterval]]:
    """Gain intervals ``K > 0`` for which all closed-loop poles lie in ``region``.

    Parameters
    ----------
    num, den : array_like, shape (n + 1,) or (P, n + 1)
        Loop numerator(s) and denominator(s) of ``K N/D``, descending powers
        of ``s`` or ``z``; a leading batch axis gives ``P`` loops.  ``num``
        may instead be a :class:`~gainloom.lti.loop.Loop` (``den=None``):
        its sample periods and delta form are used, and one list per point
        is returned.
    region : SpecRegion
        The spec region (damping, decay in 1/s, ``wn`` in rad/s, pole
        radius).  Its ``ts`` is used when ``ts`` is not given.
    ts : float or array_like of shape (P,), optional
        Sample period(s) in seconds; ``None`` (and ``region.ts`` None) for
        continuous loops.  Must agree with ``region.ts`` when both are given.
    delta : (array_like, array_like), optional
        The same discrete loop(s) in ``g = (z - 1)/ts``.  Discrete loops are
        always solved in ``g``; without this the z coefficients are shifted
        to ``g`` exactly, which cannot restore digits they lost to rounding.
        Give it at fast sampling (``ts |pole|`` around ``1e-4`` and below).

    Returns
    -------
    list of GainInterval, or list (one per loop) of lists
        Open intervals, sorted; empty when no positive gain works.

    Notes
    -----
    Endpoints are solved on the region's boundary curves (see the module
    docstring); membership between endpoints is decided by batched roots.
    The Python work is one pass per loop for the endpoints; the roots of all
    loops are computed in one call.
    """
    loop, single, region = _prepare_spec(num, den, region, ts, delta)
    results = _intervals(loop, region, (1.0,))
    return results[0] if single else results


def stable_gain_intervals(
    num: object,
    den: object | None = None,
    ts: object = None,
    negative: bool = False,
    delta: tuple[object, object] | None = None,
) -> list[GainInterval] | list[list[GainInterval]]:
    """Gain intervals for which the closed loop ``D + K N`` is stable.

    Parameters
    ----------
    num, den : array_like, shape (n + 1,) or (P, n + 1)
        Loop numerator(s) and denominator(s), descending powers of ``s``
        (``ts=None``) or ``z``; a leading batch axis gives ``P`` loops.
        ``num`` may instead be a :class:`~gainloom.lti.loop.Loop`
        (``den=None``): its sample periods and delta form are used, and one
        list per point is returned.
    ts : float or array_like of shape (P,), optional
        Sample period(s) in seconds for discrete loops.
    negative : bool
        Also return intervals of ``K < 0`` (as ``low < high <= 0``), listed
        before the positive ones.  ``K = 0`` itself is never inside an
        interval: a positive interval starts at 0 (exclusive) when the open
        loop is stable.
    delta : (array_like, array_like), optional
        The discrete loop(s) in ``g = (z - 1)/ts``, for fast sampling (see
        :func:`spec_gain_intervals`).

    Returns
    -------
    list of GainInterval, or list (one per loop) of lists

    Notes
    -----
    Endpoints solve ``D(jw) + K N(jw) = 0`` (s) or the same on ``|z| = 1``
    (z) exactly, with Newton polishing (about 1e-12 relative); stability
    between endpoints is decided by batched roots at one gain per
    sub-interval.
    """
    loop, single = _normalise(num, den, ts, delta)
    signs = (-1.0, 1.0) if negative else (1.0,)
    results = _intervals(loop, SpecRegion(), signs)
    return results[0] if single else results


def region_crossings(
    num: object,
    den: object | None,
    region: SpecRegion,
    ts: object = None,
    delta: tuple[object, object] | None = None,
) -> dict[str, Crossings] | list[dict[str, Crossings]]:
    """Gains at which a closed-loop root lies on each boundary curve of ``region``.

    The same solutions :func:`spec_gain_intervals` builds its intervals
    from, by curve, for annotating root-locus plots or explaining which spec
    binds.

    Parameters
    ----------
    num, den, region, ts, delta
        As for :func:`spec_gain_intervals`.

    Returns
    -------
    dict or list of dict
        ``{curve name: Crossings}`` (names from :data:`CURVE_NAMES`, only
        the curves the region has); one dict per loop for batch input.
        Gains of any sign; points in ``s`` or ``z``.
    """
    loop, single, region = _prepare_spec(num, den, region, ts, delta)
    nums, dens, use_delta = working_polynomials(loop)
    per_curve = _curve_crossings(nums, dens, region, None if loop.ts is None else np.asarray(loop.ts), use_delta)
    out = []
    for i in range(loop.points):
        found = {}
        for name, crossings in per_curve.items():
            c = crossings[i]
            if use_delta:
                # Report z-plane points: z = 1 + ts g.
                ts = float(loop.ts[i])
                c = Crossings(c.gains, 1.0 + ts * c.points, 1.0 + ts * c.fixed_points)
            found[name] = c
        out.append(found)
    return out[0] if single else out


def damping_gain_intervals(loop: Loop, zetas: list[float], point: int = 0) -> dict[float, list[tuple[float, float]]]:
    """Per damping ratio, the gains ``K > 0`` putting every closed-loop pole in the stable region with at least that damping.

    Exact boundary solver (:func:`spec_gain_intervals`) on one point of
    ``loop``, in its delta form when it has one.

    Parameters
    ----------
    loop : Loop
        Open loops ``N/D`` (s or z).
    zetas : list of float
        Damping ratios in ``[0, 1)``.
    point : int
        Which point of the batch.

    Returns
    -------
    dict of float to list of (float, float)
        ``(low, high)`` gain intervals per damping ratio (``inf`` for no upper end).
    """
    ts = None if loop.ts is None else float(loop.ts[point])
    found = {}
    for zeta in zetas:
        region = SpecRegion(min_damping=zeta, ts=ts)
        intervals = spec_gain_intervals(loop.num[point], loop.den[point], region, delta=loop.delta(point))
        found[zeta] = [(float(i.low), float(i.high)) for i in intervals]
    return found

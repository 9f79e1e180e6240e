"""Gain sets of ``min_damping`` judged on the dominant closed-loop poles.

Under ``specs: {poles: dominant}`` (:mod:`gainloom.design.dominant`) a pole
is left out of the damping spec when it is *fast*: ``0 < |z| <= 1/F``
(``F = FAST_FACTOR``) and ``|z| <= r^R`` with ``r`` the largest pole radius
(``R = DOMINANCE_RATIO``: its decay rate at least ``R`` times the slowest
pole's).  For one K-free loop ``N/D`` the set of gains ``K > 0`` at which
the loop is stable and every judged pole has ``zeta >= min_damping`` is
built like the exact intervals of :mod:`gainloom.lti.intervals`:

1. Edges: the gains at which a closed-loop root crosses the unit circle,
   the constant-damping log-spiral, the circle ``|z| = 1/F`` (a pole starts
   or stops being fast) or the circle ``|z| = F^(-1/R)``, and the gain where
   a root passes through infinity; all solved on the curves
   (:func:`gainloom.lti.intervals.region_crossings`), none read off a grid.
2. Between two edges no root crosses any of these curves, so which poles
   are stable, which are below the damping limit and which lie inside
   ``|z| <= 1/F`` does not change; the membership is decided by the roots at
   one interior gain, *except* where every pole lies inside
   ``|z| < F^(-1/R)``: only there can the ratio condition
   ``|z| <= r^R`` of a fast, under-damped pole change (outside that circle
   ``r^R > 1/F >= |z|`` holds by itself).  That happens only in a loop
   whose slowest pole shrinks by more than ``F^(1/R)`` (1.7) per sample, a
   deadbeat-like design.
3. In those sub-intervals the pair condition between two roots is not a
   curve crossing; it is bracketed by ``BRACKET_SAMPLES`` geometric gains
   and every change of membership between neighbours is bisected to
   relative ``2^-BISECTIONS`` of its cell.  Two changes inside one cell
   would be missed there (the one place the set is sampled); everywhere
   else the set is exact to the accuracy of the curve crossings.
"""

from __future__ import annotations

import math
from typing import cast

import numpy as np

from ..errors import InputError
from ..lti.boundary import Crossings
from ..lti.closed_loop import closed_loop_poles
from ..lti.intervals import candidate_gains, interior_gains, merge_members, region_crossings, working_polynomials
from ..lti.loop import Loop
from ..lti.poles import damping_and_frequency
from ..lti.regions import SpecRegion
from .analysis import pole_metrics
from .dominant import DOMINANCE_RATIO, FAST_FACTOR

__all__ = ["BRACKET_SAMPLES", "SLOW_EDGE", "dominant_damping_sets"]

#: Radius beyond which a pole keeps ``|z| <= 1/FAST_FACTOR`` poles out of
#: the ratio condition: ``r^DOMINANCE_RATIO >= 1/FAST_FACTOR`` (0.577).
SLOW_EDGE = FAST_FACTOR ** (-1.0 / DOMINANCE_RATIO)
#: Gains sampled per sub-interval where only the ratio condition can change.
BRACKET_SAMPLES = 64
#: Bisection steps on a change of membership between two samples.
BISECTIONS = 50
#: Span sampled beyond the last edge (relative).
LAST_SPAN = 1e6


def _status(loop: Loop, rows: np.ndarray, gains: np.ndarray, min_damping: float) -> tuple[np.ndarray, np.ndarray]:
    """Membership, and whether only the ratio condition decides it, at one gain per entry of ``rows``."""
    poles = closed_loop_poles(loop.select(rows), gains[:, None])[:, 0, :]
    ts = np.asarray(loop.ts, float)[rows]
    metrics = pole_metrics(poles, ts, "dominant")
    member = (metrics["radius"] < 1.0) & (metrics["damping"] >= min_damping)
    zeta, _ = damping_and_frequency(np.where(np.isfinite(poles), poles, 0.0), ts[:, None])
    magnitude = np.abs(poles)
    bad = (magnitude > 0) & ~(zeta >= min_damping)
    inside = magnitude <= 1.0 / FAST_FACTOR
    varying = (metrics["radius"] < SLOW_EDGE) & np.any(bad & inside, axis=-1) & ~np.any(bad & ~inside, axis=-1)
    return member, varying


def _edges(loop: Loop, min_damping: float) -> list[np.ndarray | None]:
    """Sorted edges of every row (None: a root pinned to the unit circle or the spiral)."""
    nums, dens, _ = working_polynomials(loop)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        # a Loop gives one dict per row
        first = cast(list[dict[str, Crossings]], region_crossings(
            loop, None, SpecRegion(min_damping=min_damping, max_pole_radius=1.0 / FAST_FACTOR)))
        second = cast(list[dict[str, Crossings]], region_crossings(loop, None, SpecRegion(max_pole_radius=SLOW_EDGE)))
    out: list[np.ndarray | None] = []
    for i, (a, b) in enumerate(zip(first, second)):
        if a["stability"].fixed or a["damping"].fixed:
            out.append(None)
            continue
        # a root pinned to a dominance circle never crosses it: no edge there
        circles = [Crossings(c.gains, c.points, np.zeros(0, complex)) for c in (a["radius"], b["radius"])]
        out.append(candidate_gains(nums[i], dens[i], [a["stability"], a["damping"], *circles], 1.0))
    return out


def _bracket(loop: Loop, rows: np.ndarray, lows: np.ndarray, highs: np.ndarray, min_damping: float):
    """Transitions (gain, membership after it) inside each bracketed sub-interval; and membership at its start."""
    top = np.where(np.isfinite(highs), highs * (1 - 1e-9), lows * LAST_SPAN)
    bottom = np.where(lows > 0, lows * (1 + 1e-9), top * 1e-9)
    samples = np.exp(np.linspace(np.log(bottom), np.log(top), BRACKET_SAMPLES, axis=1))  # (B, M)
    member, _ = _status(loop, np.repeat(rows, BRACKET_SAMPLES), samples.ravel(), min_damping)
    member = member.reshape(samples.shape)
    b, k = np.nonzero(member[:, 1:] != member[:, :-1])
    a, c = np.log(samples[b, k]), np.log(samples[b, k + 1])
    start = member[b, k]
    for _ in range(BISECTIONS):
        mid = 0.5 * (a + c)
        now, _ = _status(loop, rows[b], np.exp(mid), min_damping)
        same = now == start
        a, c = np.where(same, mid, a), np.where(same, c, mid)
    transitions: list[list[tuple[float, bool]]] = [[] for _ in rows]
    for j, gain, after in zip(b, np.exp(0.5 * (a + c)), ~start):
        transitions[j].append((float(gain), bool(after)))
    return transitions, member[:, 0]


def dominant_damping_sets(loop: Loop, min_damping: float) -> list[list[tuple[float, float]]]:
    """Gains ``K > 0`` at which every dominant closed-loop pole has ``zeta >= min_damping`` (and the loop is stable).

    Parameters
    ----------
    loop : Loop
        K-free discrete open loops ``N/D`` (rows), in their delta form when
        they have one.
    min_damping : float
        Damping ratio limit, ``0 < min_damping < 1``.

    Returns
    -------
    list of list of (float, float)
        Open gain intervals per row (``inf`` for no upper end); empty where
        none, or where a root is pinned to the unit circle or the spiral.
    """
    if loop.ts is None:
        raise InputError("dominant poles are defined for discrete loops; this loop has no sample period")
    edges = _edges(loop, min_damping)
    scale = np.max(np.abs(loop.den), axis=1) / np.maximum(np.max(np.abs(loop.num), axis=1), 1e-300)
    plan = [(i, e, interior_gains(e, float(scale[i]))) for i, e in enumerate(edges) if e is not None]
    if not plan:
        return [[] for _ in edges]
    rows = np.concatenate([np.full(t.size, i) for i, _, t in plan])
    member, varying = _status(loop, rows, np.concatenate([t for _, _, t in plan]), min_damping)
    bounds = [np.concatenate([[0.0], e, [math.inf]]) for _, e, _ in plan]
    lows = np.concatenate([b[:-1] for b in bounds])
    highs = np.concatenate([b[1:] for b in bounds])
    where = np.flatnonzero(varying)
    refined: dict[int, tuple[list[tuple[float, bool]], bool]] = {}
    if where.size:
        found, first = _bracket(loop, rows[where], lows[where], highs[where], min_damping)
        refined = {int(j): (t, bool(f)) for j, t, f in zip(where, found, first)}
    out: list[list[tuple[float, float]]] = [[] for _ in edges]
    offset = 0
    for i, _, t in plan:
        cuts: list[float] = []
        inside: list[bool] = []
        for j in range(offset, offset + t.size):
            if j > offset:
                cuts.append(float(lows[j]))
            if j in refined:
                transitions, start = refined[j]
                inside.append(start)
                for gain, after in transitions:
                    cuts.append(gain)
                    inside.append(after)
            else:
                inside.append(bool(member[j]))
        offset += t.size
        merged = merge_members(np.asarray(cuts), np.asarray(inside), 1.0)
        out[i] = [(iv.low, iv.high) for iv in merged]
    return out

"""The outer loop's plant with the designed inner loop in place, and the
cascade design: inner loop first, then the outer loop on that plant.

At an outer operating point the outer loop drives the inner loop's
reference ``r`` (held over ``N`` inner samples) and reads its own
measurement ``w`` every ``N``-th inner sample.  At the inner period ``ts``
(hold ``zoh``, the inner loop's computation delay and dead time):

- ``G_iv = B_i / A_i``: the inner plant ``P_i`` (controller output ``v`` to
  the inner measurement ``i``), sampled;
- ``G_wv = B_w / A_w``: the series ``P_o P_i`` (``v`` to ``w``) sampled as
  one continuous system, so ``w`` is exact at every inner sample;
- ``C = C_n / C_d``: the inner controller with the inner table's gains
  interpolated at the inner operating point, as the firmware does.

Then ``W/R = C G_wv / (1 + C G_iv)``.  The poles of ``G_wv`` are those of
``G_iv`` and of ``P_o`` sampled (``A_w = A_i A_o``, ``A_o`` from the poles
``e^(p ts)``), so the open-loop inner poles cancel exactly and

    W/R = C_n B_w / (A_o (C_d A_i + C_n B_i)),

which :func:`gainloom.lti.multirate.lift` takes to the outer period
``N ts``; the outer loop's computation delay then multiplies by ``z^-d``.
Derivation: docs/cascade.md.

Under the inner loop's ``tolerances`` the inner plant is scaled at each
corner while the inner gains stay those of the table (the firmware does not
know the unit's inductance).  The outer schedule carries the inner
tolerances beside its own, named ``<inner loop>.<parameter>``
(:func:`with_inner_tolerances`), so its table check, its worst-case design
and the cascade check see every combination of inner and outer corners.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import partial
from typing import Any

import numpy as np

from ..errors import DesignError
from ..lti.convert import poly_from_roots
from ..lti.discretize import discretize_loop
from ..lti.loop import Loop
from ..lti.multirate import lift
from ..lti.polynomials import batched_roots, pad_left, polymul
from ..schedule.model import Tolerances
from .engine import Progress, design
from .lookup import interpolate_table
from .structures import controller_polynomials
from .table import GainTable

__all__ = ["CascadeDesign", "design_cascade", "inner_points_at", "outer_plant", "split_scale", "with_inner_loop",
           "with_inner_tolerances"]

#: Relative agreement asked of ``A_w`` and ``A_i A_o`` (the same poles
#: computed two ways); a miss is a bug, not bad input.
_POLE_AGREEMENT = 1e-6


def inner_points_at(outer_points: np.ndarray, outer_axes: tuple[str, ...], inner_axes: tuple[str, ...],
                    inner_at: dict[str, float]) -> np.ndarray:
    """Inner operating points for outer ones: shared variables from the outer
    point, the others at ``inner_at``; shape ``(Q, len(inner_axes))``."""
    outer_points = np.asarray(outer_points, dtype=float).reshape(-1, len(outer_axes))
    columns = []
    for name in inner_axes:
        if name in outer_axes:
            columns.append(outer_points[:, outer_axes.index(name)])
        else:
            columns.append(np.full(outer_points.shape[0], float(inner_at[name])))
    return np.stack(columns, axis=1)


def _series(inner: Loop, part: Loop) -> Loop:
    """``P_o P_i`` as one continuous loop (the inner plant's dead time kept)."""
    return Loop(num=polymul(inner.num, part.num), den=polymul(inner.den, part.den), dead_time=inner.dead_time)


def _with_delay(num: np.ndarray, den: np.ndarray, delay: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Multiply by ``z^-d`` per point: ``den z^M``, ``num z^(M - d)``."""
    delay = np.broadcast_to(np.asarray(np.round(delay), dtype=int), (den.shape[0],))
    most = int(delay.max()) if delay.size else 0
    width = den.shape[1] + most
    den_out = np.concatenate([den, np.zeros((den.shape[0], most))], axis=1)
    num_out = np.zeros((num.shape[0], width))
    for shift in np.unique(most - delay):
        rows = np.flatnonzero(most - delay == shift)
        shifted = np.concatenate([num[rows], np.zeros((rows.size, int(shift)))], axis=1)
        num_out[rows] = pad_left(shifted, width)
    return num_out, den_out


def outer_plant(outer_sched: Any, inner_sched: Any, inner_table: GainTable, factor: int,
                outer_points: np.ndarray, inner_points: np.ndarray,
                scale: dict[str, Any] | None = None, inner_scale: dict[str, Any] | None = None) -> Loop:
    """The outer loop's sampled plant with the inner loop closed (module docstring).

    Parameters
    ----------
    outer_sched, inner_sched : Schedule
        The outer loop (its plant is the part from the inner measurement to
        its own) and the inner loop.
    inner_table : GainTable
        The inner loop's designed table, interpolated at ``inner_points``.
    factor : int
        Outer sample period over the inner one.
    outer_points : ndarray, shape (Q, n_outer)
    inner_points : ndarray, shape (Q, n_inner)
        Where each of the ``Q`` outer plants sees the inner loop.
    scale : dict, optional
        Tolerance factors of the outer loop's parameters.
    inner_scale : dict, optional
        Tolerance factors of the inner loop's parameters (its own names):
        the inner plant at that corner, closed by the table's gains.

    Returns
    -------
    Loop
        Discrete, ``ts = factor * inner ts``, hold ``zoh``, ``delay`` = the
        outer loop's computation delay (outer samples).
    """
    outer = outer_sched.evaluate(outer_points, scale=scale)
    inner = inner_sched.evaluate(inner_points, scale=inner_scale)
    ts = np.asarray(inner.sample_period, dtype=float)
    g_iv = discretize_loop(inner.plant, ts, "zoh", delay=inner.delay)
    g_wv = discretize_loop(_series(inner.plant, outer.plant), ts, "zoh", delay=inner.delay)
    part_poles = batched_roots(np.asarray(outer.plant.den, dtype=float)) * ts[:, None]
    a_o = poly_from_roots(np.exp(part_poles))
    a_i = np.asarray(g_iv.den)
    expected = polymul(a_i, a_o)
    if not np.allclose(np.asarray(g_wv.den), expected, rtol=_POLE_AGREEMENT, atol=_POLE_AGREEMENT):
        raise DesignError("internal: the sampled series plant's poles are not the inner and outer poles sampled")
    gains = interpolate_table(inner_table, inner_points)
    c_n, c_d = controller_polynomials(inner_table.structure, gains)
    num = polymul(c_n, np.asarray(g_wv.num))
    den = polymul(a_o, polymul(c_d, a_i) + polymul(c_n, np.asarray(g_iv.num)))
    num, den = lift(pad_left(num, den.shape[1]), den, factor)
    delay = np.asarray(outer.delay, dtype=float)
    num, den = _with_delay(num, den, delay)
    return Loop(num=num, den=den, ts=factor * ts, hold="zoh", delay=delay)


def split_scale(scale: dict[str, Any] | None, inner_name: str) -> tuple[dict[str, Any] | None, dict[str, Any] | None]:
    """Tolerance factors of an outer schedule split into the outer loop's and the inner loop's.

    Parameters
    ----------
    scale : dict or None
        Factors by parameter name; the inner loop's are named
        ``<inner_name>.<parameter>`` (:func:`with_inner_tolerances`).
    inner_name : str
        The inner loop's name.

    Returns
    -------
    outer, inner : dict or None
        The outer loop's factors and the inner loop's (by its own names);
        None where there are none.
    """
    if not scale:
        return None, None
    prefix = f"{inner_name}."
    outer = {k: v for k, v in scale.items() if not k.startswith(prefix)}
    inner = {k[len(prefix):]: v for k, v in scale.items() if k.startswith(prefix)}
    return outer or None, inner or None


def with_inner_tolerances(outer: Tolerances, inner_name: str, inner: Tolerances) -> Tolerances:
    """The outer loop's tolerances with the inner loop's beside them.

    The inner parameters are named ``<inner_name>.<parameter>`` (a dot
    cannot occur in a parameter name, so no name can clash); the outer
    loop's ``samples``, ``design`` and study settings apply to the whole
    box, so its corners are every combination of inner and outer corners.
    """
    if not inner.parameters:
        return outer
    merged = dict(outer.parameters)
    merged.update({f"{inner_name}.{name}": bounds for name, bounds in inner.parameters.items()})
    return replace(outer, parameters=merged)


def with_inner_loop(outer_loop: Any, inner_sched: Any, inner_table: GainTable, inner_name: str) -> Any:
    """The outer loop's schedule whose sampled plant has the inner loop in place.

    Parameters
    ----------
    outer_loop : CascadeLoop
        The outer loop of a loaded cascade (``rate_factor``, ``inner_at``).
    inner_sched : Schedule
    inner_table : GainTable
        The inner loop's designed table.
    inner_name : str
        The inner loop's name (prefix of its tolerance parameters).

    Returns
    -------
    Schedule
        The outer schedule with ``plant_sampler`` set: every stage that
        samples its plant (design, between points, tolerances, quantisation,
        the log) sees the inner loop closed at ``inner_at``; its tolerances
        hold the inner loop's too (:func:`with_inner_tolerances`), so the
        plant at a corner has the inner plant at its corner.
    """
    sched = outer_loop.schedule
    outer_axes, inner_axes = sched.axis_names, inner_sched.axis_names

    def sampler(points: np.ndarray, scale: dict[str, Any] | None) -> Loop:
        inner_points = inner_points_at(points, outer_axes, inner_axes, outer_loop.inner_at)
        outer_scale, inner_scale = split_scale(scale, inner_name)
        return outer_plant(sched, inner_sched, inner_table, outer_loop.rate_factor, points, inner_points,
                           outer_scale, inner_scale)

    tolerances = with_inner_tolerances(sched.tolerances, inner_name, inner_sched.tolerances)
    return replace(sched, plant_sampler=sampler, tolerances=tolerances)


@dataclass(frozen=True, eq=False)
class CascadeDesign:
    """A designed cascade.

    Attributes
    ----------
    cascade : Cascade
    schedules : tuple of Schedule
        One per loop, inner first; the outer ones with the inner loop in
        their sampled plant (:func:`with_inner_loop`).
    results : tuple of DesignResult
        One per loop, inner first.
    checks : CascadeChecks
        The whole-cascade checks (:mod:`gainloom.design.cascade_checks`).
    """

    cascade: Any
    schedules: tuple[Any, ...]
    results: tuple[Any, ...]
    checks: Any

    @property
    def passed(self) -> bool:
        """Every loop's design and every cascade check pass."""
        return all(r.passed for r in self.results) and self.checks.passed


def design_cascade(cascade: Any, progress: Progress | None = None) -> CascadeDesign:
    """Design a cascade: the inner loop, then the outer loop on the inner loop as designed.

    Parameters
    ----------
    cascade : Cascade
        From :func:`gainloom.load_cascade`.
    progress : callable, optional
        ``progress(stage, done, total)``; stages are prefixed with the loop name.

    Returns
    -------
    CascadeDesign
    """
    from .cascade_checks import check_cascade

    schedules = [cascade.loops[0].schedule]
    results = [design(schedules[0], progress=_named(progress, cascade.loops[0].name))]
    for inner, loop in zip(cascade.loops, cascade.loops[1:]):
        sched = with_inner_loop(loop, schedules[-1], results[-1].table, inner.name)
        schedules.append(sched)
        results.append(design(sched, progress=_named(progress, loop.name)))
    checks = check_cascade(cascade, tuple(schedules), tuple(results))
    return CascadeDesign(cascade=cascade, schedules=tuple(schedules), results=tuple(results), checks=checks)


def _named(progress: Progress | None, name: str) -> Progress | None:
    if progress is None:
        return None
    return partial(_report, progress, name)


def _report(progress: Progress, name: str, stage: str, done: int, total: int) -> None:
    progress(f"{name}: {stage}", done, total)

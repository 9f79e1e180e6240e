"""Whole-cascade checks: each outer loop with the inner loop in place
wherever the inner loop can be, and the bandwidth separation of neighbours.

The outer design sees the inner loop at one operating point (``inner_at``,
plus the shared variables).  The inner loop's other variables (say current
and temperature under a speed loop) move independently of the outer point,
so every outer grid point is checked again with the inner loop closed at
every inner breakpoint and every midpoint between neighbouring breakpoints
of those variables (its gains interpolated as the firmware does): every
outer spec must hold there too.  At the same pairs the inner loop's gain
crossover over the outer loop's is the bandwidth separation, judged against
``cascade.min_crossover_ratio`` when one is written.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

import numpy as np

from .analysis import analyse
from .cascade import outer_plant
from .engine import limits_at, sampled_plant
from .lookup import interpolate_table

__all__ = ["CascadeChecks", "LoopPairCheck", "check_cascade", "inner_values"]

#: Failing pairs listed in the log per loop pair (the count is always given).
MAX_LISTED = 20


def inner_values(values: np.ndarray) -> np.ndarray:
    """Breakpoints and the midpoints between neighbours, in increasing order."""
    values = np.asarray(values, dtype=float)
    middles = 0.5 * (values[:-1] + values[1:])
    return np.sort(np.concatenate([values, middles]))


@dataclass(frozen=True)
class LoopPairCheck:
    """An outer loop checked with its inner loop in place.

    Attributes
    ----------
    inner, outer : str
        Loop names.
    pairs : int
        Outer grid points times inner points checked.
    failures : tuple of dict
        Up to :data:`MAX_LISTED` failing pairs: outer point, inner point,
        the specs that fail.
    failed_pairs : int
        How many pairs fail an outer spec.
    min_gain_margin_db, min_phase_margin : float
        Smallest outer margins over the pairs (dB, degrees).
    min_crossover_ratio : float
        Smallest inner/outer gain-crossover ratio over the pairs.
    worst_separation : dict
        Where that ratio is smallest: points and both crossovers (rad/s).
    required_ratio : float or None
        ``cascade.min_crossover_ratio`` (None: reported, not judged).
    """

    inner: str
    outer: str
    pairs: int
    failures: tuple[dict[str, Any], ...]
    failed_pairs: int
    min_gain_margin_db: float
    min_phase_margin: float
    min_crossover_ratio: float
    worst_separation: dict[str, Any]
    required_ratio: float | None

    @property
    def separation_passed(self) -> bool:
        """The bandwidth separation meets ``min_crossover_ratio`` (True when none is asked)."""
        if self.required_ratio is None:
            return True
        return bool(self.min_crossover_ratio >= self.required_ratio)

    @property
    def passed(self) -> bool:
        """Every outer spec holds at every pair and the separation is met."""
        return self.failed_pairs == 0 and self.separation_passed

    def to_dict(self) -> dict[str, Any]:
        """Plain data for the verification log."""
        return {
            "inner": self.inner,
            "outer": self.outer,
            "passed": self.passed,
            "pairs_checked": self.pairs,
            "outer_specs_with_inner": {
                "passed": self.failed_pairs == 0,
                "failed_pairs": self.failed_pairs,
                "failures": list(self.failures),
                "min_gain_margin_db": self.min_gain_margin_db,
                "min_phase_margin_deg": self.min_phase_margin,
            },
            "bandwidth_separation": {
                "passed": self.separation_passed,
                "min_crossover_ratio": self.min_crossover_ratio,
                "required": self.required_ratio,
                "worst": self.worst_separation,
            },
        }


@dataclass(frozen=True)
class CascadeChecks:
    """Every loop pair's check, inner pair first."""

    pairs: tuple[LoopPairCheck, ...]

    @property
    def passed(self) -> bool:
        """Every pair passes."""
        return all(p.passed for p in self.pairs)

    def to_dict(self) -> dict[str, Any]:
        """Plain data for the verification log (the ``cascade`` section's checks)."""
        return {"passed": self.passed, "pairs": [p.to_dict() for p in self.pairs]}


def _pairs(outer_sched: Any, outer_points: np.ndarray, inner_sched: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Outer row index, outer points and inner points of every pair."""
    outer_axes = outer_sched.axis_names
    own = [inner_values(a.values) if a.name not in outer_axes else None for a in inner_sched.axes]
    combos = list(itertools.product(*[v if v is not None else [np.nan] for v in own]))
    rows, inner_points = [], []
    for q, point in enumerate(outer_points):
        for combo in combos:
            inner_point = [point[outer_axes.index(a.name)] if v is None else c
                           for a, v, c in zip(inner_sched.axes, own, combo)]
            rows.append(q)
            inner_points.append(inner_point)
    rows = np.asarray(rows, dtype=int)
    return rows, outer_points[rows], np.asarray(inner_points, dtype=float)


def check_pair(inner_loop: Any, outer_loop: Any, inner_sched: Any, outer_sched: Any, inner_result: Any,
               outer_result: Any, required_ratio: float | None) -> LoopPairCheck:
    """Check one outer loop with its inner loop in place (module docstring)."""
    outer_points = np.asarray(outer_result.points, dtype=float)
    rows, outer_at, inner_at = _pairs(outer_sched, outer_points, inner_sched)
    plant = outer_plant(outer_sched, inner_sched, inner_result.table, outer_loop.rate_factor, outer_at, inner_at)
    table = outer_result.table
    outer_gains = interpolate_table(table, outer_at)
    outer = analyse(plant, table.structure, outer_gains, limits_at(outer_sched, outer_at))
    inner_table = inner_result.table
    inner_gains = interpolate_table(inner_table, inner_at)
    inner = analyse(sampled_plant(inner_sched, inner_at), inner_table.structure, inner_gains,
                    limits_at(inner_sched, inner_at), step=False)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(outer.crossover > 0, inner.crossover / outer.crossover, np.inf)
    ratio = np.where(np.isnan(ratio), -np.inf, ratio)  # no crossover found counts as failing
    worst = int(np.argmin(ratio))
    failed = np.flatnonzero(~outer.passed)
    failures = tuple(
        {
            "outer_point": outer_sched.describe_point(outer_at[k]),
            "inner_point": inner_sched.describe_point(inner_at[k]),
            "failed_specs": outer.failed_specs(int(k)),
        }
        for k in failed[:MAX_LISTED]
    )
    return LoopPairCheck(
        inner=inner_loop.name,
        outer=outer_loop.name,
        pairs=int(rows.size),
        failures=failures,
        failed_pairs=int(failed.size),
        min_gain_margin_db=float(np.nanmin(outer.gain_margin_db)),
        min_phase_margin=float(np.nanmin(outer.phase_margin)),
        min_crossover_ratio=float(ratio[worst]),
        worst_separation={
            "outer_point": outer_sched.describe_point(outer_at[worst]),
            "inner_point": inner_sched.describe_point(inner_at[worst]),
            "inner_crossover": float(inner.crossover[worst]),
            "outer_crossover": float(outer.crossover[worst]),
        },
        required_ratio=required_ratio,
    )


def check_cascade(cascade: Any, schedules: tuple[Any, ...], results: tuple[Any, ...]) -> CascadeChecks:
    """Check every neighbouring pair of loops of a designed cascade.

    Parameters
    ----------
    cascade : Cascade
    schedules : tuple of Schedule
        One per loop, inner first (outer ones with their ``plant_sampler``).
    results : tuple of DesignResult
        One per loop, inner first.

    Returns
    -------
    CascadeChecks
    """
    required = cascade.cascade.min_crossover_ratio
    pairs = tuple(
        check_pair(cascade.loops[k], cascade.loops[k + 1], schedules[k], schedules[k + 1], results[k],
                   results[k + 1], required)
        for k in range(len(cascade.loops) - 1)
    )
    return CascadeChecks(pairs=pairs)

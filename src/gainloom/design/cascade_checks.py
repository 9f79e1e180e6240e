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

Under tolerances every pair is checked again at every tolerance corner of
the outer schedule, which holds the inner loop's tolerances beside its own
(:func:`gainloom.design.cascade.with_inner_tolerances`): the inner plant at
its corner closed by the inner table's gains, the outer plant part at its
corner, the outer table's gains.  Per outer grid point the worst pair and
corner is reported with the spec that binds there.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..spec_registry import SPEC_ORDER
from .analysis import PointAnalysis, analyse
from .cascade import outer_plant, split_scale
from .engine import limits_at, sampled_plant
from .lookup import interpolate_table
from .table_checks import tolerance_scales

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
    corners : int
        Tolerance corners (or samples) each pair is checked at besides the
        nominal plants; 0 without tolerances.
    failures : tuple of dict
        Up to :data:`MAX_LISTED` failing pairs: outer point, inner point,
        corner, the specs that fail.
    failed_pairs : int
        How many pairs and corners fail an outer spec.
    min_gain_margin_db, min_phase_margin : float
        Smallest outer margins over the pairs (dB, degrees).
    min_crossover_ratio : float
        Smallest inner/outer gain-crossover ratio over the pairs.
    worst_separation : dict
        Where that ratio is smallest: points, corner and both crossovers (rad/s).
    required_ratio : float or None
        ``cascade.min_crossover_ratio`` (None: reported, not judged).
    worst_per_point : tuple of dict
        Per outer grid point, the pair and corner where the outer specs are
        worst (most failing specs, then the least relative slack): inner
        point, corner, failing specs, the binding spec and its slack,
        both margins.
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
    corners: int = 0
    worst_per_point: tuple[dict[str, Any], ...] = ()

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
            "corners_checked": self.corners,
            "outer_specs_with_inner": {
                "passed": self.failed_pairs == 0,
                "failed_pairs": self.failed_pairs,
                "failures": list(self.failures),
                "min_gain_margin_db": self.min_gain_margin_db,
                "min_phase_margin_deg": self.min_phase_margin,
                "worst_per_point": list(self.worst_per_point),
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


def corner_label(scale: dict[str, float] | None) -> str:
    """``"nominal"`` or the factors on nominal, e.g. ``"current.L x0.8, J x1.2"``."""
    if not scale:
        return "nominal"
    return ", ".join(f"{name} x{factor:.4g}" for name, factor in sorted(scale.items()))


def binding_spec(analysis: PointAnalysis) -> tuple[np.ndarray, list[str]]:
    """Per point, the smallest relative slack over the required specs and which spec has it.

    Slack is ``(value - bound) / |bound|`` for a lower bound and
    ``(bound - value) / |bound|`` for an upper one (negative: failing).
    ``stable`` and ``system_type`` have no scale and are named only when
    they fail (slack -inf).
    """
    names, columns = [], []
    with np.errstate(divide="ignore", invalid="ignore"):
        for name in SPEC_ORDER:
            if name in ("stable", "system_type"):
                slack = np.where(analysis.verdicts[name], np.inf, -np.inf)
            else:
                bound = np.asarray(getattr(analysis.limits, name), dtype=float)
                value = np.asarray(analysis.values[name], dtype=float)
                sign = 1.0 if name.startswith("min_") else -1.0
                slack = sign * (value - bound) / np.where(bound == 0, 1.0, np.abs(bound))
                slack = np.where(np.isnan(bound), np.inf, np.where(np.isnan(slack), -np.inf, slack))
            names.append(name)
            columns.append(slack)
    table = np.stack(columns, axis=1)
    which = np.argmin(table, axis=1)
    least = table[np.arange(table.shape[0]), which]
    return least, [names[k] if v != np.inf else "" for k, v in zip(which, least)]  # "": nothing required


@dataclass(frozen=True)
class _CornerRun:
    """The outer loop, and the inner loop's crossover, at every pair for one corner."""

    scale: dict[str, float] | None
    outer: PointAnalysis
    ratio: np.ndarray
    inner_crossover: np.ndarray
    slack: np.ndarray
    binding: list[str]


def _run_corner(loops: tuple[Any, Any], inner_sched: Any, outer_sched: Any, inner_table: Any, outer_table: Any,
                points: tuple[np.ndarray, np.ndarray], scale: dict[str, float] | None) -> _CornerRun:
    """Analyse every pair with both plants at one tolerance corner (the tables' gains)."""
    (inner_loop, outer_loop), (outer_at, inner_at) = loops, points
    outer_scale, inner_scale = split_scale(scale, inner_loop.name)
    plant = outer_plant(outer_sched, inner_sched, inner_table, outer_loop.rate_factor, outer_at, inner_at,
                        outer_scale, inner_scale)
    outer = analyse(plant, outer_table.structure, interpolate_table(outer_table, outer_at),
                    limits_at(outer_sched, outer_at))
    inner = analyse(sampled_plant(inner_sched, inner_at, inner_scale), inner_table.structure,
                    interpolate_table(inner_table, inner_at), limits_at(inner_sched, inner_at), step=False)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(outer.crossover > 0, inner.crossover / outer.crossover, np.inf)
    ratio = np.where(np.isnan(ratio), -np.inf, ratio)  # no crossover found counts as failing
    slack, binding = binding_spec(outer)
    return _CornerRun(scale=scale, outer=outer, ratio=ratio, inner_crossover=inner.crossover, slack=slack,
                      binding=binding)


def _worst_per_point(runs: list[_CornerRun], rows: np.ndarray, describe: tuple[Any, Any],
                     points: tuple[np.ndarray, np.ndarray]) -> tuple[dict[str, Any], ...]:
    """Per outer grid point, the pair and corner with the most failing specs, then the least slack."""
    counts = np.stack([sum((~v).astype(int) for v in r.outer.verdicts.values()) for r in runs])
    slack = np.stack([r.slack for r in runs])
    entries = []
    for q in np.unique(rows):
        cols = np.flatnonzero(rows == q)
        c_idx, k_idx = np.meshgrid(np.arange(len(runs)), cols, indexing="ij")
        c_flat, k_flat = c_idx.ravel(), k_idx.ravel()
        best = int(np.lexsort((slack[c_flat, k_flat], -counts[c_flat, k_flat]))[0])
        c, k = int(c_flat[best]), int(k_flat[best])
        run = runs[c]
        entries.append({
            "outer_point": describe[0](points[0][k]),
            "inner_point": describe[1](points[1][k]),
            "corner": dict(sorted((run.scale or {}).items())),
            "corner_label": corner_label(run.scale),
            "failed_specs": run.outer.failed_specs(k),
            "binding_spec": run.binding[k],
            "binding_slack": float(run.slack[k]),
            "gain_margin_db": float(run.outer.gain_margin_db[k]),
            "phase_margin_deg": float(run.outer.phase_margin[k]),
        })
    return tuple(entries)


def check_pair(inner_loop: Any, outer_loop: Any, inner_sched: Any, outer_sched: Any, inner_result: Any,
               outer_result: Any, required_ratio: float | None) -> LoopPairCheck:
    """Check one outer loop with its inner loop in place, nominal and at every corner (module docstring)."""
    rows, outer_at, inner_at = _pairs(outer_sched, np.asarray(outer_result.points, dtype=float), inner_sched)
    points = (outer_at, inner_at)
    scales: list[dict[str, float] | None] = [None, *tolerance_scales(outer_sched.tolerances)]
    runs = [_run_corner((inner_loop, outer_loop), inner_sched, outer_sched, inner_result.table, outer_result.table, points, s)
            for s in scales]
    describe = (outer_sched.describe_point, inner_sched.describe_point)
    failed = [(r, int(k)) for r in runs for k in np.flatnonzero(~r.outer.passed)]
    failures = tuple(
        {
            "outer_point": describe[0](outer_at[k]),
            "inner_point": describe[1](inner_at[k]),
            "corner": corner_label(r.scale),
            "failed_specs": r.outer.failed_specs(k),
        }
        for r, k in failed[:MAX_LISTED]
    )
    ratios = np.stack([r.ratio for r in runs])
    c, worst = np.unravel_index(int(np.argmin(ratios)), ratios.shape)
    run = runs[int(c)]
    return LoopPairCheck(
        inner=inner_loop.name,
        outer=outer_loop.name,
        pairs=int(rows.size),
        failures=failures,
        failed_pairs=len(failed),
        min_gain_margin_db=float(min(np.nanmin(r.outer.gain_margin_db) for r in runs)),
        min_phase_margin=float(min(np.nanmin(r.outer.phase_margin) for r in runs)),
        min_crossover_ratio=float(run.ratio[worst]),
        worst_separation={
            "outer_point": describe[0](outer_at[worst]),
            "inner_point": describe[1](inner_at[worst]),
            "corner": corner_label(run.scale),
            "inner_crossover": float(run.inner_crossover[worst]),
            "outer_crossover": float(run.outer.crossover[worst]),
        },
        required_ratio=required_ratio,
        corners=len(scales) - 1,
        worst_per_point=_worst_per_point(runs, rows, describe, points),
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

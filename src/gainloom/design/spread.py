"""Statistical tolerance study: how often a table violates its specs under
random parameter spread.

Every operating point of a gains file is analysed on ``N`` random draws of
the schedule's parameter tolerances (``tolerances: {samples: N,
distribution: uniform | normal, seed: S}``), with the table's coefficients at
that point.  Per point and per spec the result is the fraction of violating
draws with a Clopper-Pearson interval (:mod:`gainloom.design.confidence`) and
the worst draw found (parameter factors and spec value).

Draws
-----
``uniform``: each parameter's factor uniform on ``[1 - minus, 1 + plus]``,
independently.  ``normal``: factor ``1 + (t / 3) z`` with ``z`` standard
normal and ``t`` the tolerance on that side (``minus`` below nominal,
``plus`` above: a split normal whose median is nominal), ``z`` clipped at
+-6 (probability 2e-9 per draw, from the normal tail).

Determinism
-----------
The draws of point ``p`` come in blocks of :data:`DRAW_BLOCK`; block ``b``
has its own generator ``numpy.random.default_rng(SeedSequence(seed,
spawn_key=(p, b)))`` (the ``b``-th child of the ``p``-th child of
``SeedSequence(seed)``), and always draws the whole block before the last
one is cut to length.  So draw ``d`` of point ``p`` is the same number
whatever the chunking or the number of workers, and counts are integer sums:
the result is identical bit for bit.

Work units
----------
A :class:`StudyUnit` is plain arrays: grid indices, operating points and
coefficients of some points, and a range of draw blocks.  The batched core
(:func:`gainloom.design.analysis.analyse`) sees points x draws flattened into
one batch.  Units run in forked local processes, the schedule reaching them
once per process, not per unit; or on a Dask cluster, the schedule sent
once per worker (:mod:`gainloom.design.cluster`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import InputError
from ..spec_registry import SPEC_ORDER
from .analysis import analyse
from .confidence import CONFIDENCE, clopper_pearson
from .slack import spec_badness, spec_limit

__all__ = [
    "DRAW_BLOCK",
    "SpreadResult",
    "StudyUnit",
    "UnitResult",
    "draw_factors",
    "run_study",
    "run_unit",
    "study_units",
]

#: Draws per seeded stream block: the grain of chunking along draws.
DRAW_BLOCK = 256

#: Loops (points x draws) per work unit by default: large enough for the
#: batched core to run at full speed, small enough to keep a unit's memory
#: in the tens of megabytes.
UNIT_LOOPS = 8192

#: Normal draws are clipped at this many sigma.
NORMAL_CLIP = 6.0

#: Specs judged on the frequency response: a study needs the (costly)
#: margins only when one of them is required.
FREQUENCY_SPECS = ("min_gain_margin", "min_phase_margin", "min_delay_margin", "max_sensitivity_peak",
                   "min_crossover", "max_crossover", "min_bandwidth")


@dataclass(frozen=True)
class StudyUnit:
    """One work unit: some points of the table x a range of draw blocks.

    Attributes
    ----------
    point_index : ndarray of int, shape (p,)
        Flat grid index of each point (keys its random stream).
    points : ndarray, shape (p, n_axes)
    coefficients : dict of str to ndarray, shape (p,)
    first_block, blocks : int
        Draw blocks ``first_block .. first_block + blocks - 1``.
    """

    point_index: np.ndarray
    points: np.ndarray
    coefficients: dict[str, np.ndarray]
    first_block: int
    blocks: int


@dataclass(frozen=True)
class UnitResult:
    """Counts and worst draws of one unit (or of several merged), per point and spec.

    Attributes
    ----------
    point_index : ndarray of int, shape (p,)
    draws : ndarray of int, shape (p,)
    violations : ndarray of int, shape (p, S)
    any_violations : ndarray of int, shape (p,)
        Draws that violate at least one spec.
    worst_badness : ndarray, shape (p, S)
        How far the worst draw is on the wrong side (``inf`` where the
        value is not a number, e.g. overshoot of an unstable loop).
    worst_draw : ndarray of int, shape (p, S)
    worst_value : ndarray, shape (p, S)
    worst_factors : ndarray, shape (p, S, n_parameters)
    """

    point_index: np.ndarray
    draws: np.ndarray
    violations: np.ndarray
    any_violations: np.ndarray
    worst_badness: np.ndarray
    worst_draw: np.ndarray
    worst_value: np.ndarray
    worst_factors: np.ndarray


def draw_factors(tolerances, point: int, block: int) -> np.ndarray:
    """Scale factors of one block of draws of one point.

    Parameters
    ----------
    tolerances : Tolerances
        The schedule's section (parameters, distribution, seed).
    point, block : int
        Flat grid index and block number.

    Returns
    -------
    ndarray, shape (DRAW_BLOCK, n_parameters)
        Factors on the nominal values, parameters in sorted name order.
    """
    names = sorted(tolerances.parameters)
    minus = np.array([tolerances.parameters[n][0] for n in names])
    plus = np.array([tolerances.parameters[n][1] for n in names])
    rng = np.random.default_rng(np.random.SeedSequence(tolerances.seed, spawn_key=(point, block)))
    if tolerances.distribution == "normal":
        z = np.clip(rng.standard_normal((DRAW_BLOCK, len(names))), -NORMAL_CLIP, NORMAL_CLIP)
        return 1.0 + np.where(z < 0, minus, plus) / 3.0 * z
    return (1.0 - minus) + rng.random((DRAW_BLOCK, len(names))) * (minus + plus)


def _block_count(draws: int) -> int:
    return -(-draws // DRAW_BLOCK)


def study_units(points: np.ndarray, coefficients: dict[str, np.ndarray], draws: int,
                chunk_points: int | None = None, chunk_blocks: int | None = None) -> list[StudyUnit]:
    """Split the study into units of ``chunk_points`` points x ``chunk_blocks`` blocks.

    Defaults keep each unit near :data:`UNIT_LOOPS` loops.
    """
    blocks = _block_count(draws)
    if chunk_blocks is None:
        chunk_blocks = max(1, min(blocks, UNIT_LOOPS // DRAW_BLOCK))
    if chunk_points is None:
        chunk_points = max(1, UNIT_LOOPS // (chunk_blocks * DRAW_BLOCK))
    if chunk_points < 1 or chunk_blocks < 1:
        raise InputError(f"chunks need at least one point and one block; got {chunk_points} x {chunk_blocks}")
    units = []
    for start in range(0, points.shape[0], chunk_points):
        rows = np.arange(start, min(start + chunk_points, points.shape[0]))
        for first in range(0, blocks, chunk_blocks):
            units.append(StudyUnit(
                point_index=rows, points=points[rows], coefficients={k: v[rows] for k, v in coefficients.items()},
                first_block=first, blocks=min(chunk_blocks, blocks - first),
            ))
    return units


def run_unit(sched, structure: str, specs: tuple[str, ...], draws: int, unit: StudyUnit) -> UnitResult:
    """Analyse one unit: its points x its draws flattened into one batch.

    Parameters
    ----------
    sched : Schedule
    structure : str
        Controller structure of the table.
    specs : tuple of str
        Specs reported (names of ``SPEC_ORDER``).
    draws : int
        Draws per point in the whole study (cuts the last block).
    unit : StudyUnit
    """
    from .engine import limits_at, sampled_plant

    names = sorted(sched.tolerances.parameters)
    first = unit.first_block * DRAW_BLOCK
    last = min((unit.first_block + unit.blocks) * DRAW_BLOCK, draws)
    count = last - first
    factors = np.concatenate([
        np.concatenate([draw_factors(sched.tolerances, int(p), b)
                        for b in range(unit.first_block, unit.first_block + unit.blocks)])[:count]
        for p in unit.point_index
    ])  # (p * count, n): point-major
    owner = np.repeat(np.arange(unit.point_index.size), count)
    draw = np.tile(np.arange(first, last), unit.point_index.size)
    rows = unit.points[owner]
    plant = sampled_plant(sched, rows, scale={n: factors[:, j] for j, n in enumerate(names)})
    limits = limits_at(sched, rows)
    step = "max_overshoot" in specs or "max_settling_time" in specs
    frequency = any(s in specs for s in FREQUENCY_SPECS)
    analysis = analyse(plant, structure, {k: v[owner] for k, v in unit.coefficients.items()}, limits,
                       step=step, frequency=frequency, origins=False)
    shape = (unit.point_index.size, count)
    failed = np.stack([~analysis.verdicts[s] for s in specs], axis=-1).reshape(shape + (len(specs),))
    badness = np.stack([spec_badness(s, analysis.values[s], spec_limit(limits, s)) for s in specs], axis=-1)
    badness = badness.reshape(shape + (len(specs),))
    worst = np.argmax(badness, axis=1)  # first (lowest draw) among equals
    take = worst[:, None, :]
    values = np.stack([analysis.values[s] for s in specs], axis=-1).reshape(shape + (len(specs),))
    return UnitResult(
        point_index=unit.point_index,
        draws=np.full(unit.point_index.size, count),
        violations=failed.sum(axis=1),
        any_violations=failed.any(axis=-1).sum(axis=1),
        worst_badness=np.take_along_axis(badness, take, axis=1)[:, 0, :],
        worst_draw=np.take_along_axis(draw.reshape(shape)[..., None], take, axis=1)[:, 0, :],
        worst_value=np.take_along_axis(values, take, axis=1)[:, 0, :],
        worst_factors=factors.reshape(shape + (len(names),))[np.arange(shape[0])[:, None], worst, :],
    )


def merge_results(total: int, parts: list[UnitResult], specs: int, parameters: int) -> UnitResult:
    """Combine unit results into one per point of the grid (order-independent).

    Counts add; the worst draw is the one furthest on the wrong side, the
    lowest draw index among equals, so the order of the parts does not matter.
    """
    out = UnitResult(
        point_index=np.arange(total), draws=np.zeros(total, int), violations=np.zeros((total, specs), int),
        any_violations=np.zeros(total, int), worst_badness=np.full((total, specs), -np.inf),
        # no draw yet: below every badness (-inf included) on ties, so the lowest draw index wins
        worst_draw=np.full((total, specs), np.iinfo(np.int64).max), worst_value=np.full((total, specs), np.nan),
        worst_factors=np.full((total, specs, parameters), np.nan),
    )
    for part in parts:
        rows = part.point_index
        out.draws[rows] += part.draws
        out.violations[rows] += part.violations
        out.any_violations[rows] += part.any_violations
        old_bad, old_draw = out.worst_badness[rows], out.worst_draw[rows]
        better = (part.worst_badness > old_bad) | ((part.worst_badness == old_bad) & (part.worst_draw < old_draw))
        out.worst_badness[rows] = np.where(better, part.worst_badness, old_bad)
        out.worst_draw[rows] = np.where(better, part.worst_draw, old_draw)
        out.worst_value[rows] = np.where(better, part.worst_value, out.worst_value[rows])
        out.worst_factors[rows] = np.where(better[..., None], part.worst_factors, out.worst_factors[rows])
    return out


@dataclass(frozen=True)
class SpreadResult:
    """The study over a table: per point and spec, violation fraction and worst draw.

    Attributes
    ----------
    axis_names : tuple of str
    points : ndarray, shape (P, n_axes)
    point_labels : tuple of str
    specs : tuple of str
        Specs required at some point (``stable`` always), ``SPEC_ORDER``.
    parameters : tuple of str
        Toleranced parameters, sorted.
    nominal : ndarray, shape (P, n_parameters)
        Nominal parameter values at each point.
    limits : ndarray, shape (P, S)
        The bound of each spec at each point (NaN where not required).
    draws, distribution, seed, confidence
        How the study was drawn; ``confidence`` is the two-sided level of
        the Clopper-Pearson intervals.
    totals : UnitResult
        Merged counts and worst draws.
    table : GainTable
        The table studied (its axes shape the grid).
    """

    axis_names: tuple[str, ...]
    points: np.ndarray
    point_labels: tuple[str, ...]
    specs: tuple[str, ...]
    parameters: tuple[str, ...]
    nominal: np.ndarray
    limits: np.ndarray
    draws: int
    distribution: str
    seed: int
    confidence: float
    totals: UnitResult
    table: Any

    @property
    def fraction(self) -> np.ndarray:
        """Violating fraction per point and spec, shape (P, S)."""
        return self.totals.violations / self.totals.draws[:, None]

    @property
    def any_fraction(self) -> np.ndarray:
        """Fraction of draws violating at least one spec, shape (P,)."""
        return self.totals.any_violations / self.totals.draws

    def interval(self) -> tuple[np.ndarray, np.ndarray]:
        """Clopper-Pearson bounds per point and spec, shape (P, S) each."""
        return clopper_pearson(self.totals.violations, self.totals.draws[:, None], self.confidence)

    def any_interval(self) -> tuple[np.ndarray, np.ndarray]:
        """Clopper-Pearson bounds of the any-spec fraction, shape (P,) each."""
        return clopper_pearson(self.totals.any_violations, self.totals.draws, self.confidence)

    @property
    def passed(self) -> bool:
        """True when no draw at any point violates a spec."""
        return not bool(self.totals.any_violations.any())

    def to_dict(self) -> dict[str, Any]:
        """Plain data for ``--json`` (fractions, intervals, worst draws)."""
        low, high = self.interval()
        any_low, any_high = self.any_interval()
        points = []
        for p in range(self.points.shape[0]):
            specs = {}
            for s, name in enumerate(self.specs):
                specs[name] = {
                    "violations": int(self.totals.violations[p, s]),
                    "fraction": float(self.fraction[p, s]),
                    "interval": [float(low[p, s]), float(high[p, s])],
                    "limit": float(self.limits[p, s]),
                    "worst": self.worst(p, s),
                }
            points.append({
                "point": {a: float(v) for a, v in zip(self.axis_names, self.points[p])},
                "draws": int(self.totals.draws[p]),
                "any_spec": {
                    "violations": int(self.totals.any_violations[p]),
                    "fraction": float(self.any_fraction[p]),
                    "interval": [float(any_low[p]), float(any_high[p])],
                },
                "specs": specs,
            })
        return {
            "draws_per_point": self.draws, "distribution": self.distribution, "seed": self.seed,
            "interval": {"method": "clopper-pearson", "confidence": self.confidence},
            "parameters": list(self.parameters), "specs": list(self.specs),
            "passed": self.passed, "points": points,
        }

    def worst(self, p: int, s: int) -> dict[str, Any]:
        """The worst draw of spec ``s`` at point ``p``: draw index, spec value, factors and parameter values."""
        factors = self.totals.worst_factors[p, s]
        return {
            "draw": int(self.totals.worst_draw[p, s]),
            "value": float(self.totals.worst_value[p, s]),
            "factors": {n: float(f) for n, f in zip(self.parameters, factors)},
            "parameters": {n: float(v) for n, v in zip(self.parameters, self.nominal[p] * factors)},
        }


def reported_specs(limits) -> tuple[str, ...]:
    """Specs required at some point (``stable`` always), in report order."""
    return tuple(s for s in SPEC_ORDER if s == "stable" or np.isfinite(getattr(limits, s)).any())


def run_study(schedule, gains, *, progress=None, workers: int | None = None,
              chunk_points: int | None = None, chunk_blocks: int | None = None, cluster: str | None = None,
              notes: list[str] | None = None) -> SpreadResult:
    """Run the statistical tolerance study of a gains table on a schedule.

    Parameters
    ----------
    schedule : Schedule or str or Path
        With ``tolerances.samples`` a number of draws and parameters toleranced.
    gains : GainTable or str or Path
        The gains to judge (axes as the schedule's); a path is a gains file.
    progress : callable, optional
        ``progress(stage, done, total)`` in loops analysed.
    workers : int, optional
        Local processes; default ``GAINLOOM_WORKERS`` or the CPU count.
    chunk_points, chunk_blocks : int, optional
        Unit size (points x blocks of :data:`DRAW_BLOCK` draws); the result
        does not depend on it.
    cluster : str, optional
        Address of a Dask scheduler: the units run there, with the same
        result bit for bit (``workers`` is then ignored).
    notes : list of str, optional
        Receives what the engine reports (e.g. a lost worker's units rerun).

    Returns
    -------
    SpreadResult
    """
    from .engine import grid_points, limits_at, load_for_design, worker_count
    from .gainsfile import read_gains
    from .pool import map_units
    from .table import GainTable

    sched = load_for_design(schedule)
    table = gains if isinstance(gains, GainTable) else read_gains(gains)[0]
    tolerances = sched.tolerances
    if tolerances.draws is None:
        raise InputError(f"{sched.path}: tolerances.samples must be a number of random draws for the study "
                         "(e.g. samples: 10000); docs/tolerances.md")
    if not tolerances.parameters:
        raise InputError(f"{sched.path}: tolerances.parameters is empty: nothing to draw")
    if tuple(a.name for a in table.axes) != sched.axis_names:
        raise InputError(f"the gains file's axes {[a.name for a in table.axes]} are not the schedule's "
                         f"{list(sched.axis_names)}")
    points = grid_points([a.values for a in table.axes])
    limits = limits_at(sched, points)
    specs = reported_specs(limits)
    parameters = tuple(sorted(tolerances.parameters))
    coefficients = {k: np.asarray(v, float).ravel() for k, v in table.coefficients.items()}
    units = study_units(points, coefficients, tolerances.draws, chunk_points, chunk_blocks)
    count = worker_count(len(units)) if workers is None else max(1, workers)
    parts = map_units(run_unit, (sched, table.structure, specs, tolerances.draws), units, count,
                      progress, tolerances.draws * points.shape[0], cluster=cluster, notes=notes)
    nominal = sched.evaluate(points).parameters
    return SpreadResult(
        axis_names=sched.axis_names, points=points,
        point_labels=tuple(sched.describe_point(q) for q in points), specs=specs, parameters=parameters,
        nominal=np.stack([nominal[n] for n in parameters], axis=-1),
        limits=np.stack([spec_limit(limits, s) for s in specs], axis=-1),
        draws=tolerances.draws, distribution=tolerances.distribution, seed=tolerances.seed,
        confidence=CONFIDENCE, totals=merge_results(points.shape[0], parts, len(specs), len(parameters)),
        table=table,
    )

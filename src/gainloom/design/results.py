"""Result objects of ``design`` and ``verify``.

Plain frozen data: the gain table, the per-point analysis, per-point status
and notes (binding spec and best reachable value at failed points), the
whole-table checks and warnings.  ``as_document`` gives the JSON/YAML-ready
form written into the gains file.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from ..spec_registry import SPEC_ORDER, spec_info
from .table import GainTable
from .table_findings import BetweenFailure, CornerResult, InsertedBreakpoint, MonotoneFinding, StepFinding

if TYPE_CHECKING:  # pragma: no cover
    from ..schedule import Schedule
    from .analysis import PointAnalysis
    from .measured_check import DataCheck

__all__ = ["DesignResult", "DesignSettings", "TableReport", "VerifyResult", "point_document"]


def _float(value: Any) -> Any:
    value = float(value)
    return value


def _complex_list(values: np.ndarray) -> list[list[float]]:
    return [[float(v.real), float(v.imag)] for v in np.ravel(values)]


@dataclass(frozen=True, eq=False)
class TableReport:
    """Whole-table checks.

    Attributes
    ----------
    smoothness : tuple of StepFinding
        Coefficient steps between neighbours beyond ``max_relative_step``
        (after smoothing).
    monotone : tuple of MonotoneFinding
        Monotonicity violations.
    smoothing : tuple of str
        Where the smoothness/monotone limits forced a worse design.
    between : tuple of BetweenFailure
        Intermediate operating points that fail with the interpolated
        coefficients.
    between_checked : int
        How many intermediate points were checked.
    inserted : tuple of InsertedBreakpoint
        Grid points inserted by refinement.
    tolerances : tuple of CornerResult
        The grid points with a failing tolerance corner, at their worst corner.
    tolerance_corners : int
        How many corners/samples were checked per point.
    tolerance_worst : tuple of CornerResult
        Every grid point at its worst corner.
    """

    smoothness: tuple[StepFinding, ...] = ()
    monotone: tuple[MonotoneFinding, ...] = ()
    smoothing: tuple[str, ...] = ()
    between: tuple[BetweenFailure, ...] = ()
    between_checked: int = 0
    inserted: tuple[InsertedBreakpoint, ...] = ()
    tolerances: tuple[CornerResult, ...] = ()
    tolerance_corners: int = 0
    tolerance_worst: tuple[CornerResult, ...] = ()

    @property
    def passed(self) -> bool:
        """True when no whole-table check failed."""
        return not (self.smoothness or self.monotone or self.between or self.tolerances)

    def as_document(self) -> dict[str, Any]:
        """Plain data for the gains file."""
        return {
            "passed": self.passed,
            "smoothness": [e.to_dict() for e in self.smoothness],
            "monotone": [e.to_dict() for e in self.monotone],
            "smoothing": list(self.smoothing),
            "between_points": {"checked": self.between_checked, "failing": [e.to_dict() for e in self.between]},
            "inserted": [e.to_dict() for e in self.inserted],
            "tolerances": {
                "samples_per_point": self.tolerance_corners,
                "failing": [e.to_dict() for e in self.tolerances],
                "worst": [e.to_dict() for e in self.tolerance_worst],
            },
        }


@dataclass(frozen=True)
class DesignSettings:
    """The controller and sampling settings a table was designed with (the gains file's ``design``).

    Attributes
    ----------
    structure, strategy : str
        As in the schedule's ``controller`` section.
    objective : str
        The objective the strategy optimised (defaults filled).
    objective_meaning : str
        One sentence on what that objective asks for.
    zero_on : str or None
        ``pole-cancel`` only: the plant pole the zero cancels.
    target : dict of str to float or None
        The ``controller.target`` keys that were given.
    sweep_range : tuple of float or None
        ``shape-sweep`` only: the swept shape range and ...
    sweep_count : int or None
        ... how many shapes.
    derivative_filter : float or None
        Derivative filter time constant (s), ``pd``/``pid`` only.
    sampling_method : str
        Hold (discretisation) method.
    prewarp : float or None
        Tustin prewarp frequency (rad/s).
    filters : tuple of dict
        ``controller.filters`` as written (:meth:`FilterSection.as_written`).
    """

    structure: str
    strategy: str
    objective: str
    objective_meaning: str
    zero_on: str | None
    target: dict[str, float] | None
    sweep_range: tuple[float, ...] | None
    sweep_count: int | None
    derivative_filter: float | None
    sampling_method: str
    prewarp: float | None
    filters: tuple[dict[str, str], ...]

    @classmethod
    def of(cls, sched: Schedule, objective: str, objective_meaning: str) -> DesignSettings:
        """The settings of ``sched`` with the objective the engine resolved."""
        controller = sched.controller
        target = None if controller.target is None else {
            k: v for k, v in (("damping", controller.target.damping),
                              ("natural_frequency", controller.target.natural_frequency),
                              ("crossover", controller.target.crossover)) if v is not None}
        sweep = controller.sweep
        return cls(
            structure=controller.structure, strategy=controller.strategy, objective=objective,
            objective_meaning=objective_meaning, zero_on=controller.zero_on, target=target,
            sweep_range=None if sweep is None else tuple(sweep.range),
            sweep_count=None if sweep is None else sweep.count,
            derivative_filter=controller.derivative_filter, sampling_method=sched.sampling.method,
            prewarp=sched.sampling.prewarp, filters=tuple(section.as_written() for section in controller.filters),
        )

    def to_dict(self) -> dict[str, Any]:
        """Plain data, keys in the gains file's order."""
        return {
            "structure": self.structure,
            "strategy": self.strategy,
            "objective": self.objective,
            "objective_meaning": self.objective_meaning,
            "zero_on": self.zero_on,
            "target": None if self.target is None else dict(self.target),
            "sweep": None if self.sweep_range is None else {"range": list(self.sweep_range), "count": self.sweep_count},
            "derivative_filter": self.derivative_filter,
            "sampling": {"method": self.sampling_method, "prewarp": self.prewarp},
            "filters": [dict(f) for f in self.filters],
        }


def point_document(analysis: PointAnalysis, index: int) -> dict[str, Any]:
    """Per-point analysis as plain data (one entry of the gains file's ``points``)."""
    p = index
    specs = {}
    limits = analysis.limits.as_dict()
    for name in SPEC_ORDER:
        key = spec_info(name).limit_key
        limit = 1.0 if key is None else float(limits[key][p])
        if key is not None and np.isnan(limit):
            continue
        specs[name] = {
            "value": _float(analysis.values[name][p]),
            "limit": limit,
            "pass": bool(analysis.verdicts[name][p]),
        }
    return {
        "coefficients": {k: _float(v[p]) for k, v in analysis.coefficients.items()},
        "physical": {k: _float(v[p]) for k, v in analysis.physical.items()},
        "gain": _float(analysis.gain[p]),
        "poles_z": _complex_list(analysis.poles_z[p]),
        "poles_s": _complex_list(analysis.poles_s[p]),
        "damping": _float(analysis.damping[p]),
        "damping_pole": {
            "s": _complex_list(analysis.damping_pole_s[p])[0],
            "natural_frequency": _float(analysis.damping_pole_frequency[p]),
            "origin": analysis.damping_pole_origin[p],
            "start_z": _complex_list(analysis.damping_pole_start_z[p])[0],
        },
        "natural_frequency": _float(analysis.natural_frequency[p]),
        "decay": _float(analysis.decay[p]),
        "pole_radius": _float(analysis.pole_radius[p]),
        "gain_margin_db": _float(analysis.gain_margin_db[p]),
        "phase_margin_deg": _float(analysis.phase_margin[p]),
        "delay_margin_s": _float(analysis.delay_margin[p]),
        "sensitivity_peak": _float(analysis.sensitivity_peak[p]),
        "crossover_rad_s": _float(analysis.crossover[p]),
        "last_crossover_rad_s": _float(analysis.last_crossover[p]),
        "bandwidth_rad_s": _float(analysis.bandwidth[p]),
        "overshoot_percent": _float(analysis.overshoot[p]),
        "settling_time_s": _float(analysis.settling_time[p]),
        "system_type": int(analysis.system_type[p]),
        "cancelled_zeros_z": [] if analysis.cancelled is None else [
            float(c) for c in analysis.cancelled[p] if np.isfinite(c)],
        "specs": specs,
    }


@dataclass(frozen=True, eq=False)
class DesignResult:
    """What :func:`gainloom.design_table` returns.

    Attributes
    ----------
    table : GainTable
        The coefficients on the schedule's grid.
    analysis : PointAnalysis
        Per-point analysis of the table on the sampled plant.
    status : tuple of str
        ``"pass"`` or ``"fail"`` per point.
    notes : tuple of tuple of str
        Per point: binding spec and best reachable values where it failed,
        strategy remarks otherwise.
    binding : tuple of str or None
        Binding spec name per failed point (None where it passed).
    table_report : TableReport
        Whole-table checks.
    warnings : tuple of str
        Everything the engineer must read (data, not ``warnings.warn``).
    schedule_path, schedule_sha256 : str
    strategy : DesignSettings
        The controller and sampling settings used (structure, strategy, objective ...).
    points : ndarray, shape (P, n_axes)
        Operating points (grid order, first axis slowest).
    point_labels : tuple of str
        Human-readable operating point per index.
    continuous : dict or None
        The ``compare_continuous`` report.
    point_warnings : tuple of tuple of str
        Per point: where the choice is not what the objective or target asked
        for, naming the spec or target and the shortfall
        (:mod:`gainloom.design.fallbacks`); failing points say the table holds
        a best compromise.
    data_check : DataCheck or None
        With a measured plant: the frequency specs judged on the raw data
        (:mod:`gainloom.design.measured_check`); its failures are in
        ``status``.
    """

    table: GainTable
    analysis: PointAnalysis
    status: tuple[str, ...]
    notes: tuple[tuple[str, ...], ...]
    binding: tuple[str | None, ...]
    table_report: TableReport
    warnings: tuple[str, ...]
    schedule_path: str
    schedule_sha256: str
    strategy: DesignSettings
    points: np.ndarray
    point_labels: tuple[str, ...]
    continuous: dict[str, Any] | None = None
    point_warnings: tuple[tuple[str, ...], ...] = ()
    data_check: DataCheck | None = None

    @property
    def points_passed(self) -> bool:
        """True when every grid point meets every spec."""
        return all(s == "pass" for s in self.status)

    @property
    def passed(self) -> bool:
        """True when every point passes and the whole-table checks pass."""
        return self.points_passed and self.table_report.passed

    @property
    def exit_code(self) -> int:
        """CLI exit code: 0 all pass, 1 some spec fails."""
        return 0 if self.passed else 1

    def as_document(self) -> dict[str, Any]:
        """The per-point analysis and checks as plain data (gains-file body)."""
        entries = []
        for p in range(self.analysis.points):
            entry = {
                "index": p,
                "at": {name: float(v) for name, v in zip((a.name for a in self.table.axes), self.points[p])},
                "status": self.status[p],
            }
            if self.binding[p] is not None:
                entry["binding"] = self.binding[p]
            # a failing point holds the best compromise, not a design
            entry["compromise"] = self.status[p] == "fail"
            entry["notes"] = list(self.notes[p])
            entry["warnings"] = list(self.point_warnings[p]) if self.point_warnings else []
            entry.update(point_document(self.analysis, p))
            entries.append(entry)
        return {
            "passed": self.passed,
            "points": entries,
            "table_checks": self.table_report.as_document(),
            "warnings": list(self.warnings),
            "continuous": self.continuous,
            "measured": None if self.data_check is None else self.data_check.as_document(),
        }


@dataclass(frozen=True, eq=False)
class VerifyResult:
    """What :func:`gainloom.verify` returns: a gains file re-checked on a schedule.

    Attributes
    ----------
    table : GainTable
        The table read from the gains file.
    analysis : PointAnalysis
        Its analysis on the schedule's sampled plant at every grid point.
    status : tuple of str
    table_report : TableReport
    warnings : tuple of str
    schedule_path, schedule_sha256 : str
    gains_path : str
    points : ndarray
    point_labels : tuple of str
    compromise_points : tuple of int
        Flat indices of the points the gains file marks ``compromise``: their
        status is ``fail`` whatever the re-check finds.
    data_check : DataCheck or None
        With a measured plant: the frequency specs judged on the raw data;
        its failures are in ``status``.
    """

    table: GainTable
    analysis: PointAnalysis
    status: tuple[str, ...]
    table_report: TableReport
    warnings: tuple[str, ...]
    schedule_path: str
    schedule_sha256: str
    gains_path: str
    points: np.ndarray
    point_labels: tuple[str, ...]
    compromise_points: tuple[int, ...] = ()
    data_check: DataCheck | None = None

    @property
    def passed(self) -> bool:
        """True when every point and every whole-table check passes."""
        return all(s == "pass" for s in self.status) and self.table_report.passed

    @property
    def exit_code(self) -> int:
        """CLI exit code: 0 all pass, 1 some spec fails."""
        return 0 if self.passed else 1

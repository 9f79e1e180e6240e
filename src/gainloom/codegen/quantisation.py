"""Re-check a gain table after its coefficients are rounded as the C stores them.

:func:`check_quantisation` lays the table out in a number format with
:func:`gainloom.codegen.layout.layout_table` (the single place where the
emitted C's integers / float32 values are made), takes the stored values
back to physical units (:attr:`CoefficientLayout.physical`, exact in
float64), and runs the design layer's independent verification
(:func:`gainloom.design.engine.verify`) twice on the schedule's sampled
plant: once on the table as designed and once on the rounded table.  Both
runs do the per-point analysis, the between-point check (coefficients
interpolated as the firmware does) and the tolerance corners, so the
comparison is like with like.

What is compared, per grid point: closed-loop pole positions (largest
``|dz|`` after matching each rounded pole to one unrounded pole), smallest
damping ratio, gain/phase/delay margins, sensitivity peak and every spec's
verdict.  A spec that held before rounding and fails after it, at a grid
point, an intermediate point or a tolerance corner, is *broken by rounding*
and fails the check.

The filter sections' poles and zeros are compared before and after
rounding as well (:mod:`.filter_rounding`): a stored pole pair on or outside
the unit circle fails the check, a notch centre moved beyond the tolerance
is a warning.  The rounded table's grid points are verified with its stored
sections (``verify`` uses a table's own filter sections there).

Only the coefficients are rounded here.  The axis breakpoints the C stores
may differ from the designed ones by a few LSB of the axis format; the
largest such offset is reported (``axis_offsets``) but the plant is
evaluated at the designed breakpoints.  The fixed-point controller's signal
rounding (states in Q3.28, error and output in Q15/Q31) is a nonlinear
effect (limit cycles, dead band) that a pole analysis cannot show; the
time-domain simulation in the same format covers it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment

from ..design.table import FilterTable, GainTable, TableAxis, filter_coefficient_name
from ..errors import InputError
from ..spec_registry import SPEC_ORDER
from .filter_rounding import SectionRounding, check_filter_rounding
from .layout import TableLayout, layout_table

__all__ = ["QuantisationResult", "PointChange", "check_quantisation", "dequantised_table", "pole_shift"]

#: Quantities compared per point: (label, attribute of PointAnalysis, unit,
#: direction in which a larger value is better (+1) or worse (-1)).
COMPARED: tuple[tuple[str, str, str, int], ...] = (
    ("damping", "damping", "", +1),
    ("pole_radius", "pole_radius", "", -1),
    ("gain_margin_db", "gain_margin_db", "dB", +1),
    ("phase_margin_deg", "phase_margin", "deg", +1),
    ("delay_margin_s", "delay_margin", "s", +1),
    ("sensitivity_peak", "sensitivity_peak", "", -1),
)


def pole_shift(before: np.ndarray, after: np.ndarray) -> float:
    """Largest ``|z_after - z_before|`` with the poles paired one to one.

    The pairing minimises the sum of distances (``scipy.optimize.
    linear_sum_assignment``), so a pole is never compared with a far one just
    because the sort order of two nearly equal magnitudes swapped.

    Parameters
    ----------
    before, after : ndarray of complex, shape (n,)
        Closed-loop poles in ``z`` (dimensionless).

    Returns
    -------
    float
        The largest distance in the z-plane; ``inf`` when a pole is not
        finite on one side only, 0 for empty sets.
    """
    before = np.asarray(before, dtype=complex)
    after = np.asarray(after, dtype=complex)
    if before.size == 0:
        return 0.0
    finite_b, finite_a = np.isfinite(before), np.isfinite(after)
    if np.count_nonzero(finite_b) != np.count_nonzero(finite_a):
        return float("inf")
    b, a = before[finite_b], after[finite_a]
    if b.size == 0:
        return 0.0
    cost = np.abs(a[:, None] - b[None, :])
    rows, cols = linear_sum_assignment(cost)
    return float(np.max(cost[rows, cols]))


@dataclass(frozen=True)
class PointChange:
    """Change caused by rounding at one grid point.

    Attributes
    ----------
    index : int
        Point index (grid order, first axis slowest).
    label : str
        The operating point in words.
    max_pole_shift : float
        Largest ``|dz|`` of the closed-loop poles.
    before, after : dict of str to float
        The :data:`COMPARED` quantities before and after rounding.
    broken : tuple of str
        Specs that held before and fail after rounding here.
    """

    index: int
    label: str
    max_pole_shift: float
    before: dict[str, float]
    after: dict[str, float]
    broken: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class QuantisationResult:
    """Outcome of :func:`check_quantisation`.

    Attributes
    ----------
    number_format : str
    layout : TableLayout
        The stored table (integers or float32) exactly as emitted.
    table : GainTable
        The dequantised table (stored values back in physical units).
    original, rounded : VerifyResult
        The design layer's verification of the table as designed and as stored.
    points : tuple of PointChange
    worst : dict
        Per compared quantity: the point where rounding made it worst
        (``{index, label, before, after, change}``, ``change`` signed so
        that negative is worse).
    broken : list of dict
        Every spec broken by rounding: ``{where, point, spec}`` with
        ``where`` in ``grid``, ``between``, ``tolerance``, ``smoothness``,
        ``monotone``.
    axis_offsets : dict of str to float
        Largest ``|stored - designed|`` breakpoint per axis (axis units).
    coefficient_errors : dict of str to float
        Largest ``|stored - designed|`` per coefficient (physical units).
    full_scale : dict
        ``error_full_scale`` and ``output_full_scale`` used (fixed point).
    filters : tuple of SectionRounding
        Each filter section's poles and zeros before and after rounding.
    """

    number_format: str
    layout: TableLayout
    table: GainTable
    original: Any
    rounded: Any
    points: tuple[PointChange, ...]
    worst: dict[str, dict[str, Any]]
    broken: list[dict[str, Any]]
    axis_offsets: dict[str, float]
    coefficient_errors: dict[str, float]
    full_scale: dict[str, float | None] = field(default_factory=dict)
    filters: tuple[SectionRounding, ...] = ()

    @property
    def passed(self) -> bool:
        """True when rounding breaks no spec anywhere and leaves every filter pole inside the unit circle."""
        return not self.broken and not self.filter_failures

    @property
    def filter_failures(self) -> list[str]:
        """Filter pole pairs that rounding puts on or outside the unit circle."""
        return [text for section in self.filters for text in section.failures]

    @property
    def filter_warnings(self) -> list[str]:
        """Notch centres (low-pass pole frequencies) that rounding moves beyond the tolerance."""
        return [text for section in self.filters for text in section.warnings]

    @property
    def max_pole_shift(self) -> float:
        """Largest ``|dz|`` over all grid points."""
        return max((p.max_pole_shift for p in self.points), default=0.0)

    def as_document(self) -> dict[str, Any]:
        """Plain data for the verification log."""
        coefficients = []
        for item in self.layout.coefficients + self.layout.filter_tables:
            coefficients.append({
                "name": item.name,
                "frac": item.frac,
                "scale": float(item.scale),
                "max_abs_error": self.coefficient_errors[item.name],
            })
        return {
            "number_format": self.number_format,
            "passed": self.passed,
            "rounded_table_passed": bool(self.rounded.passed),
            "full_scale": dict(self.full_scale),
            "coefficients": coefficients,
            "axis_offsets": dict(self.axis_offsets),
            "max_pole_shift": self.max_pole_shift,
            "points": [
                {
                    "index": p.index,
                    "label": p.label,
                    "max_pole_shift": p.max_pole_shift,
                    "before": p.before,
                    "after": p.after,
                    "broken": list(p.broken),
                }
                for p in self.points
            ],
            "worst": self.worst,
            "broken": self.broken,
            "filters": [section.to_dict() for section in self.filters],
        }


def dequantised_table(layout: TableLayout) -> GainTable:
    """The designed table with every coefficient replaced by its stored value.

    Breakpoints, sample periods and output limits stay as designed (see the
    module notes); coefficients are :attr:`CoefficientLayout.physical`.
    """
    table = layout.table
    coefficients = {c.name: np.asarray(c.physical, dtype=float) for c in layout.coefficients}
    stored = {c.name: np.asarray(c.physical, dtype=float) for c in layout.filter_tables}
    filters = tuple(FilterTable(section.kind, {name: stored[filter_coefficient_name(i, name)]
                                               for name in section.coefficients})
                    for i, section in enumerate(table.filters))
    axes = tuple(TableAxis(a.name, a.unit, a.values) for a in table.axes)
    return GainTable(table.structure, axes, coefficients, table.sample_period, table.output_limits, filters)


def _quantities(analysis, p: int) -> dict[str, float]:
    return {label: float(getattr(analysis, attribute)[p]) for label, attribute, _, _ in COMPARED}


def _failing_set(report) -> tuple[set, set]:
    between = {(tuple(sorted(e.point.items())), spec) for e in report.between for spec in e.failed}
    tolerance = {(tuple(sorted(e.point.items())), spec) for e in report.tolerances for spec in e.failed}
    return between, tolerance


def check_quantisation(
    schedule: Any,
    table: GainTable,
    number_format: str,
    *,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
    baseline: Any = None,
) -> QuantisationResult:
    """Verify a gain table again after rounding it to a number format.

    Parameters
    ----------
    schedule : Schedule or str or Path
        The schedule the table was designed for.
    table : GainTable
        The table as designed (float64 coefficients).
    number_format : str
        ``"float32"``, ``"q15"`` or ``"q31"``.
    error_full_scale, output_full_scale : float, optional
        Fixed point only, as for :func:`gainloom.emit_c`: physical error and
        output that full scale stands for.  They decide the normalisation
        of the gain coefficients and therefore their rounding.
    baseline : DesignResult or VerifyResult, optional
        The unrounded table already analysed on this schedule (e.g. the
        design result of this very table), so it is not verified twice;
        verified here when omitted.

    Returns
    -------
    QuantisationResult

    Raises
    ------
    CodegenError
        When a coefficient does not fit the format (as the emitter would).
    """
    from ..design.engine import verify
    from ..schedule import Schedule, load_schedule

    sched = schedule if isinstance(schedule, Schedule) else load_schedule(schedule)
    layout = layout_table(table, number_format, error_full_scale=error_full_scale,
                          output_full_scale=output_full_scale)
    rounded_table = dequantised_table(layout)
    original = verify(sched, table) if baseline is None else baseline
    if original.table is not table:
        raise InputError("baseline must be the analysis of this very table")
    rounded = verify(sched, rounded_table)
    a0, a1 = original.analysis, rounded.analysis

    changes = []
    broken: list[dict[str, Any]] = []
    for p in range(a0.points):
        names = tuple(s for s in SPEC_ORDER if a0.verdicts[s][p] and not a1.verdicts[s][p])
        changes.append(PointChange(
            index=p,
            label=original.point_labels[p],
            max_pole_shift=pole_shift(a0.poles_z[p], a1.poles_z[p]),
            before=_quantities(a0, p),
            after=_quantities(a1, p),
            broken=names,
        ))
        broken += [{"where": "grid", "point": original.point_labels[p], "spec": s} for s in names]
    between0, tolerance0 = _failing_set(original.table_report)
    between1, tolerance1 = _failing_set(rounded.table_report)
    for where, new in (("between", between1 - between0), ("tolerance", tolerance1 - tolerance0)):
        for point, spec in sorted(new):
            label = ", ".join(f"{k} = {v:.6g}" for k, v in point)
            broken.append({"where": where, "point": label, "spec": spec})
    # Rounding can also reorder two nearly equal neighbours (monotone) or
    # widen a step past the smoothness limit.
    def keys(report, where):
        return {(e.coefficient, e.axis, e.index) for e in getattr(report, where)}

    for where in ("smoothness", "monotone"):
        for coefficient, axis, index in sorted(keys(rounded.table_report, where) - keys(original.table_report, where)):
            broken.append({"where": where, "point": f"{axis} index {list(index)}", "spec": f"{where} of {coefficient}"})

    worst: dict[str, dict[str, Any]] = {}
    for label, attribute, unit, sense in COMPARED:
        v0 = np.asarray(getattr(a0, attribute), float)
        v1 = np.asarray(getattr(a1, attribute), float)
        with np.errstate(invalid="ignore"):
            change = sense * (v1 - v0)  # negative: worse
        finite = np.isfinite(change)
        if not finite.any():
            worst[label] = {"index": None, "label": None, "before": None, "after": None, "change": 0.0, "unit": unit}
            continue
        p = int(np.flatnonzero(finite)[np.argmin(change[finite])])
        worst[label] = {
            "index": p,
            "label": original.point_labels[p],
            "before": float(v0[p]),
            "after": float(v1[p]),
            "change": float(change[p]),
            "unit": unit,
        }
    shifts = [c.max_pole_shift for c in changes]
    p = int(np.argmax(shifts)) if shifts else 0
    worst["pole_shift"] = {"index": p, "label": original.point_labels[p] if shifts else None,
                           "value": float(shifts[p]) if shifts else 0.0, "unit": ""}

    axis_offsets = {
        a.name: float(np.max(np.abs(a.stored_physical - a.values))) for a in layout.axes
    }
    designed = {**table.coefficients, **table.filter_grids}
    coefficient_errors = {
        c.name: float(np.max(np.abs(c.physical - designed[c.name]))) for c in layout.coefficients + layout.filter_tables
    }
    return QuantisationResult(
        number_format=layout.fmt.name,
        layout=layout,
        table=rounded_table,
        original=original,
        rounded=rounded,
        points=tuple(changes),
        worst=worst,
        broken=broken,
        axis_offsets=axis_offsets,
        coefficient_errors=coefficient_errors,
        full_scale={"error_full_scale": layout.error_full_scale, "output_full_scale": layout.output_full_scale},
        filters=check_filter_rounding(table, layout, list(original.point_labels)),
    )

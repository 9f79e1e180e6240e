"""The numbers that go into the C: a GainTable laid out in one number format.

:func:`layout_table` is the single place where a :class:`GainTable` becomes
stored integers (Q15/Q31) or float32 values.  The C templates, the Python
mirror and the host harness all read the same :class:`TableLayout`, so the
table the firmware interpolates is exactly the one the mirror checks.

Signal scaling of the fixed-point variants
------------------------------------------
The error input ``e`` and the output ``u`` are Q15 (``int16_t``) or Q31
(``int32_t``) fractions of two full-scale values:

- ``e_physical = e_q * 2**-15 * error_full_scale`` (Q31: ``2**-31``),
- ``u_physical = u_q * 2**-15 * output_full_scale``.

``output_full_scale`` defaults to ``max(|u_min|, |u_max|)`` and must cover
both output limits; ``error_full_scale`` defaults to 1 (one unit of the
measured variable).  Coefficients that carry the loop gain (``kp``,
``ki_ts``, ``kd_b``, ``kc``) are stored normalised, multiplied by
``error_full_scale / output_full_scale``; the dimensionless ones (``kd_a``,
``zc*``, ``pc*``) are stored as they are.  Internal signals (integrator,
derivative and section states, and the sums before saturation) are ``int32_t``
Q3.28 of output full scale (:data:`~gainloom.codegen.qformat.STATE_FRAC`):
they saturate at 8 times full scale.

Axis inputs of the fixed-point variants are ``int32_t`` with a per-axis
number of fraction bits ``frac``: the firmware passes
``round(x_physical * 2**frac)``.  ``frac`` is chosen so the largest breakpoint
magnitude is at most ``2**30``.  Uniform axes are stored as
``q0 + i * step`` exactly (index lookup is then one multiplication by the
step's reciprocal), so
their breakpoints may differ from the rounded physical ones by up to
``(n - 1) / 2`` LSB of the axis format; non-uniform axes are rounded point by
point.  The float32 variant takes physical units throughout.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..c_names import validate_fragment
from ..design.table import GainTable, TableAxis
from ..errors import CodegenError
from .qformat import (
    STATE_FRAC,
    NumberFormat,
    choose_frac,
    dequantize,
    index_reciprocal,
    number_format,
    quantize,
    segment_reciprocals,
)

__all__ = ["GAIN_COEFFICIENTS", "LIMIT_TABLES", "AxisLayout", "CoefficientLayout", "TableLayout", "layout_table"]

#: Coefficients that carry the loop gain (output units per error unit); they
#: are normalised by ``error_full_scale / output_full_scale`` in fixed point.
GAIN_COEFFICIENTS: frozenset[str] = frozenset({"kp", "ki_ts", "kd_b", "kc"})

#: Names of the tabulated output limits in the tables and ``<prefix>_gains_t``.
LIMIT_TABLES: tuple[str, str] = ("u_min", "u_max")

_FLOAT32_MAX = float(np.finfo(np.float32).max)
#: Largest axis breakpoint magnitude in the fixed-point axis format.
_AXIS_LIMIT_BITS = 31  # choose_frac(..., 31) keeps |q| <= 2**30 - 1


@dataclass(frozen=True, eq=False)
class AxisLayout:
    """One axis as stored in the C.

    Parameters
    ----------
    name, unit : str
        From the :class:`TableAxis`.
    values : ndarray of float
        The designed breakpoints (physical units).
    stored : ndarray
        ``int64`` (fixed point, axis format) or ``float32`` breakpoints.
    frac : int or None
        Fraction bits of the fixed-point axis input; ``None`` for float32.
    uniform : bool
        Stored breakpoints are evenly spaced: O(1) index lookup.
    step : int or float
        Stored spacing (uniform axes; 0 otherwise).
    inv_step : float
        ``float32(1 / step)`` for uniform float32 axes (0 otherwise).
    weight_shift, weight_scale : ndarray of int64 or None
        Fixed point: per-segment normalising shift and reciprocal of the
        width (:func:`~gainloom.codegen.qformat.segment_reciprocals`);
        ``None`` for float32.
    index_scale, index_shift : int
        Uniform fixed-point axes: reciprocal of the step for the segment
        index (:func:`~gainloom.codegen.qformat.index_reciprocal`); 0
        otherwise.
    """

    name: str
    unit: str
    values: np.ndarray
    stored: np.ndarray
    frac: int | None
    uniform: bool
    step: int | float
    inv_step: float
    weight_shift: np.ndarray | None = None
    weight_scale: np.ndarray | None = None
    index_scale: int = 0
    index_shift: int = 0

    @property
    def size(self) -> int:
        """Number of breakpoints."""
        return int(self.stored.size)

    @property
    def stored_physical(self) -> np.ndarray:
        """Stored breakpoints in physical units (float64)."""
        if self.frac is None:
            return self.stored.astype(float)
        return dequantize(self.stored, self.frac)


@dataclass(frozen=True, eq=False)
class CoefficientLayout:
    """One coefficient array as stored in the C.

    Parameters
    ----------
    name : str
        Coefficient name (``names.CONTROLLER_COEFFICIENTS``).
    stored : ndarray
        Grid-shaped ``int64`` (fixed point) or ``float32`` values.
    frac : int or None
        Fraction bits of the array (fixed point); ``None`` for float32.
    scale : float
        Physical value per stored (normalised) value: ``output_full_scale /
        error_full_scale`` for gain coefficients in fixed point, else 1.
    """

    name: str
    stored: np.ndarray
    frac: int | None
    scale: float

    @property
    def physical(self) -> np.ndarray:
        """Stored values back in physical units (float64)."""
        if self.frac is None:
            return self.stored.astype(float)
        return dequantize(self.stored, self.frac) * self.scale


@dataclass(frozen=True, eq=False)
class TableLayout:
    """A :class:`GainTable` laid out in one number format.

    Parameters
    ----------
    table : GainTable
        The designed table.
    fmt : NumberFormat
        Number format.
    axes : tuple of AxisLayout
    coefficients : tuple of CoefficientLayout
        In ``table.coefficient_names`` order.
    error_full_scale, output_full_scale : float or None
        Signal full-scale values (fixed point); ``None`` for float32.
    limits : tuple
        Output limits as stored: Q3.28 integers (fixed point) or float32;
        for tabulated limits their envelope (lowest ``u_min``, highest
        ``u_max``).
    limit_tables : tuple of CoefficientLayout
        Tabulated limits ``u_min``, ``u_max`` (empty when the limits are
        constant), stored in the output's format (Q15/Q31 of output full
        scale, or float32) and looked up with the coefficients.
    filter_tables : tuple of CoefficientLayout
        The filter sections' ``f<n>_b0 .. f<n>_a2`` (:attr:`GainTable.filter_grids`),
        dimensionless, each array with its own power-of-two scaling like the
        controller coefficients, looked up with them.
    """

    table: GainTable
    fmt: NumberFormat
    axes: tuple[AxisLayout, ...]
    coefficients: tuple[CoefficientLayout, ...]
    error_full_scale: float | None
    output_full_scale: float | None
    limits: tuple
    limit_tables: tuple[CoefficientLayout, ...] = ()
    filter_tables: tuple[CoefficientLayout, ...] = ()

    @property
    def looked_up(self) -> tuple[CoefficientLayout, ...]:
        """Everything the lookup interpolates: the coefficients, the filter sections, then any tabulated limits."""
        return self.coefficients + self.filter_tables + self.limit_tables

    @property
    def sections(self) -> int:
        """Number of filter sections after the controller."""
        return len(self.table.filters)

    @property
    def structure(self) -> str:
        """Controller structure."""
        return self.table.structure

    def coefficient(self, name: str) -> CoefficientLayout:
        """Return the layout of coefficient ``name``."""
        for item in self.coefficients:
            if item.name == name:
                return item
        raise CodegenError(f"no coefficient {name!r} in a {self.structure} table")


def _axis_layout(axis: TableAxis, fmt: NumberFormat) -> AxisLayout:
    validate_fragment("axis name", axis.name)
    values = axis.values
    uniform = axis.is_uniform
    if not fmt.is_fixed:
        if np.max(np.abs(values)) > _FLOAT32_MAX:
            raise CodegenError(f"axis {axis.name!r} has breakpoints beyond the float32 range")
        stored = values.astype(np.float32)
        if not np.all(np.diff(stored) > 0):
            raise CodegenError(
                f"axis {axis.name!r}: breakpoints are not strictly increasing once rounded to float32 "
                f"(spacing too fine for their magnitude); got {stored.tolist()}"
            )
        step = float(np.float32((values[-1] - values[0]) / (values.size - 1))) if uniform else 0.0
        inv_step = float(np.float32(1.0 / step)) if uniform else 0.0
        return AxisLayout(axis.name, axis.unit, values, stored, None, uniform, step, inv_step)
    frac = choose_frac(float(np.max(np.abs(values))), _AXIS_LIMIT_BITS)
    if uniform:
        first = int(quantize(values[0], frac, 64))
        step = int(quantize((values[-1] - values[0]) / (values.size - 1), frac, 64))
        stored = first + step * np.arange(values.size, dtype=np.int64)
    else:
        step = 0
        stored = quantize(values, frac, 64)
    if not np.all(np.diff(stored) > 0) or np.max(np.abs(stored)) >= 2**31 - 1:
        raise CodegenError(
            f"axis {axis.name!r}: breakpoints do not stay strictly increasing in the int32 axis format "
            f"with {frac} fraction bits (spacing too fine for their magnitude)"
        )
    weight_shift, weight_scale = segment_reciprocals(stored, fmt.interp_frac)
    index_scale, index_shift = index_reciprocal(step) if uniform else (0, 0)
    return AxisLayout(axis.name, axis.unit, values, stored, frac, uniform, step, 0.0,
                      weight_shift, weight_scale, index_scale, index_shift)


def _coefficient_layout(name: str, values: np.ndarray, fmt: NumberFormat, gain_scale: float) -> CoefficientLayout:
    validate_fragment("coefficient name", name)
    if not fmt.is_fixed:
        if np.max(np.abs(values)) > _FLOAT32_MAX:
            raise CodegenError(f"coefficient {name!r} exceeds the float32 range")
        return CoefficientLayout(name, values.astype(np.float32), None, 1.0)
    scale = gain_scale if name in GAIN_COEFFICIENTS else 1.0
    normalised = values / scale
    largest = float(np.max(np.abs(normalised)))
    frac = choose_frac(largest, fmt.bits)
    if frac < 0:
        hint = (
            " (normalised by error_full_scale / output_full_scale: raise output_full_scale or lower error_full_scale)"
            if name in GAIN_COEFFICIENTS
            else ""
        )
        raise CodegenError(
            f"coefficient {name!r} reaches {largest:.6g}{hint}; {fmt.name} tables hold magnitudes below "
            f"{fmt.q_max + 1}"
        )
    return CoefficientLayout(name, quantize(normalised, frac, fmt.bits), frac, scale)


def layout_table(
    table: GainTable,
    number_format: str,
    *,
    error_full_scale: float | None = None,
    output_full_scale: float | None = None,
) -> TableLayout:
    """Lay a gain table out in one number format.

    Parameters
    ----------
    table : GainTable
        The designed table.
    number_format : str
        One of :data:`gainloom.names.NUMBER_FORMATS`.
    error_full_scale : float, optional
        Fixed point only: physical error (units of the measured variable)
        that the Q15/Q31 error input's full scale stands for.  Default 1.
    output_full_scale : float, optional
        Fixed point only: physical output (units of ``u``) of full scale.
        Default ``max(|u_min|, |u_max|)``; must be at least that.

    Returns
    -------
    TableLayout

    Raises
    ------
    CodegenError
        When a value does not fit the format, a name is not a valid C
        identifier fragment, or full-scale values are given for float32.
    """
    fmt = number_format if isinstance(number_format, NumberFormat) else _format(number_format)
    low, high = table.limit_envelope
    if not fmt.is_fixed:
        if error_full_scale is not None or output_full_scale is not None:
            raise CodegenError("full-scale values apply to q15 and q31 only; float32 works in physical units")
        axes = tuple(_axis_layout(axis, fmt) for axis in table.axes)
        coefficients = tuple(
            _coefficient_layout(name, table.coefficients[name], fmt, 1.0) for name in table.coefficient_names
        )
        limit_tables = ()
        if table.limits_vary:
            limit_tables = tuple(CoefficientLayout(name, grid.astype(np.float32), None, 1.0)
                                 for name, grid in zip(LIMIT_TABLES, table.limit_grids))
        filters = tuple(_coefficient_layout(name, grid, fmt, 1.0) for name, grid in table.filter_grids.items())
        return TableLayout(table, fmt, axes, coefficients, None, None, (np.float32(low), np.float32(high)),
                           limit_tables, filters)
    error_fs = 1.0 if error_full_scale is None else float(error_full_scale)
    output_fs = max(abs(low), abs(high)) if output_full_scale is None else float(output_full_scale)
    for label, value in (("error_full_scale", error_fs), ("output_full_scale", output_fs)):
        if not (np.isfinite(value) and value > 0):
            raise CodegenError(f"{label} must be finite and positive; got {value}")
    if output_fs < max(abs(low), abs(high)):
        raise CodegenError(
            f"output_full_scale {output_fs:g} does not cover the output limits ({low:g}, {high:g}); "
            f"use at least {max(abs(low), abs(high)):g}"
        )
    gain_scale = output_fs / error_fs
    axes = tuple(_axis_layout(axis, fmt) for axis in table.axes)
    coefficients = tuple(
        _coefficient_layout(name, table.coefficients[name], fmt, gain_scale) for name in table.coefficient_names
    )
    limits = tuple(int(quantize(value / output_fs, STATE_FRAC, 32)) for value in (low, high))
    if not limits[0] < limits[1]:
        raise CodegenError(f"output limits ({low:g}, {high:g}) collapse in Q3.28 of full scale {output_fs:g}")
    limit_tables = ()
    if table.limits_vary:
        frac = fmt.signal_frac
        limit_tables = tuple(CoefficientLayout(name, quantize(grid / output_fs, frac, fmt.bits), frac, output_fs)
                             for name, grid in zip(LIMIT_TABLES, table.limit_grids))
        if not np.all(limit_tables[0].stored < limit_tables[1].stored):
            raise CodegenError(f"tabulated output limits collapse somewhere in {fmt.name} of full scale {output_fs:g}")
    filters = tuple(_coefficient_layout(name, grid, fmt, 1.0) for name, grid in table.filter_grids.items())
    return TableLayout(table, fmt, axes, coefficients, error_fs, output_fs, limits, limit_tables, filters)


def _format(name: str) -> NumberFormat:
    return number_format(name)

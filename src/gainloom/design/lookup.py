"""Gain-table interpolation as the firmware does it, in floating point.

One implementation for every floating-point use: the between-point checks
of the design, the ``float64`` reference simulation and the sample-period
comparison.  The fixed-point formats (Q15, Q31) are looked up by the
code-generation layer's bit-exact mirror of the C
(:func:`gainloom.codegen.mirror.lookup_gains`).  Per axis the segment is found and the position in it taken as
a fraction ``t``, clamped to the table's ends::

    i = segment with values[i] <= x < values[i+1]   (first/last at the ends)
    t = (x - values[i]) / (values[i+1] - values[i]),  clamped to [0, 1]

1-D:  ``c = c[i] + t (c[i+1] - c[i])``.
2-D (bilinear, second axis first, as the C): ``c0`` and ``c1`` along the
second axis on rows ``i`` and ``i + 1``, then ``c = c0 + ti (c1 - c0)``.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .table import GainTable

__all__ = ["axis_segments", "interpolate_grid", "interpolate_grids", "interpolate_table"]


def axis_segments(values: np.ndarray, x: np.ndarray, dtype: type = np.float64) -> tuple[np.ndarray, np.ndarray]:
    """Segment index and clamped fraction of ``x`` on one axis.

    Parameters
    ----------
    values : ndarray, shape (n,)
        Strictly increasing breakpoints (axis units).
    x : ndarray, shape (K,)
        Query values (axis units).
    dtype : numpy float type
        Arithmetic type (``np.float32`` or ``np.float64``).

    Returns
    -------
    index : ndarray of int, shape (K,)
        ``i`` in ``0 .. n - 2``.
    fraction : ndarray of dtype, shape (K,)
        ``t`` in ``[0, 1]``.
    """
    values = np.asarray(values).astype(dtype)
    x = np.asarray(x).astype(dtype)
    if values.size < 2:
        raise InputError("an axis needs at least two breakpoints to interpolate")
    index = np.clip(np.searchsorted(values, x, side="right") - 1, 0, values.size - 2)
    low = values[index]
    high = values[index + 1]
    fraction = (x - low) / (high - low)
    fraction = np.clip(fraction, dtype(0), dtype(1)).astype(dtype)
    return index, fraction


def interpolate_grid(
    axes_values: tuple[np.ndarray, ...], grid: np.ndarray, points: np.ndarray, dtype: type = np.float64
) -> np.ndarray:
    """Interpolate one grid of values at many points.

    Parameters
    ----------
    axes_values : tuple of ndarray
        Breakpoints of each axis (one or two axes).
    grid : ndarray
        Values on the grid, shape ``tuple(len(v) for v in axes_values)``.
    points : ndarray, shape (K, n_axes)
        Query points (axis units), columns in axis order.
    dtype : numpy float type
        Arithmetic type.

    Returns
    -------
    ndarray of dtype, shape (K,)
    """
    grid = np.asarray(grid).astype(dtype)
    points = np.asarray(points)
    if points.ndim != 2 or points.shape[1] != len(axes_values):
        raise InputError(f"points must have shape (K, {len(axes_values)}); got {points.shape}")
    if len(axes_values) == 1:
        i, t = axis_segments(axes_values[0], points[:, 0], dtype)
        return grid[i] + t * (grid[i + 1] - grid[i])
    if len(axes_values) == 2:
        i, ti = axis_segments(axes_values[0], points[:, 0], dtype)
        j, tj = axis_segments(axes_values[1], points[:, 1], dtype)
        row0 = grid[i, j] + tj * (grid[i, j + 1] - grid[i, j])
        row1 = grid[i + 1, j] + tj * (grid[i + 1, j + 1] - grid[i + 1, j])
        return row0 + ti * (row1 - row0)
    raise InputError(f"interpolation supports one or two axes; got {len(axes_values)}")


def interpolate_grids(
    axes_values: tuple[np.ndarray, ...], grids: dict[str, np.ndarray], points: np.ndarray, dtype: type = np.float64
) -> dict[str, np.ndarray]:
    """Several grids on the same axes at the same points (see :func:`interpolate_grid`).

    Returns
    -------
    dict of str to ndarray of dtype, shape (K,)
        One entry per grid, in the order of ``grids``.
    """
    return {name: interpolate_grid(axes_values, grid, points, dtype) for name, grid in grids.items()}


def interpolate_table(table: GainTable, points: np.ndarray, dtype: type = np.float64) -> dict[str, np.ndarray]:
    """Every coefficient of ``table`` at ``points``, in table order.

    Parameters
    ----------
    table : GainTable
        The gain table.
    points : ndarray, shape (K, n_axes)
        Scheduling-variable values, columns in the table's axis order.
    dtype : numpy float type
        Arithmetic type (the table values are first rounded to it, as the
        emitted C table stores them).

    Returns
    -------
    dict of str to ndarray of dtype, shape (K,)
    """
    grids = {name: table.coefficients[name] for name in table.coefficient_names}
    return interpolate_grids(tuple(axis.values for axis in table.axes), grids, points, dtype)

"""The gain table: what design produces and code generation consumes.

Kept deliberately small: the axes, the controller structure and the
difference-equation coefficients on the grid.  Per-point analysis (poles,
margins, spec verdicts) travels in the design result, not here.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..names import (
    CONTROLLER_COEFFICIENTS,
    CONTROLLER_STRUCTURES,
    FILTER_COEFFICIENTS,
    FILTER_KINDS,
    unknown_name_message,
)

__all__ = ["FilterTable", "GainTable", "TableAxis", "filter_coefficient_name"]


@dataclass(frozen=True, eq=False)
class TableAxis:
    """One scheduling axis of a table.

    Parameters
    ----------
    name : str
        Scheduling variable name (a valid C identifier fragment).
    unit : str
        Unit, for comments and the log (e.g. ``"rpm"``).
    values : ndarray, shape (n,)
        Strictly increasing breakpoints.
    """

    name: str
    unit: str
    values: np.ndarray

    def __post_init__(self) -> None:
        values = np.asarray(self.values, dtype=float)
        if values.ndim != 1 or values.size < 2 or not np.all(np.diff(values) > 0):
            raise InputError(f"axis {self.name!r} needs two or more strictly increasing values; got {values}")
        object.__setattr__(self, "values", values)

    @property
    def is_uniform(self) -> bool:
        """True when breakpoints are evenly spaced (to 1e-9 relative)."""
        steps = np.diff(self.values)
        return bool(np.allclose(steps, steps[0], rtol=1e-9, atol=0.0))


def filter_coefficient_name(section: int, coefficient: str) -> str:
    """Table name of a filter coefficient: ``f<section + 1>_<coefficient>`` (``f1_b0``, ...)."""
    return f"f{section + 1}_{coefficient}"


@dataclass(frozen=True, eq=False)
class FilterTable:
    """One discrete filter section after the controller, tabulated on the grid.

    Parameters
    ----------
    kind : str
        One of :data:`gainloom.names.FILTER_KINDS`.
    coefficients : dict of str to ndarray
        Exactly :data:`gainloom.names.FILTER_COEFFICIENTS` (``b0, b1, b2,
        a1, a2`` of ``(b0 z^2 + b1 z + b2) / (z^2 + a1 z + a2)``), each of
        the grid's shape.
    """

    kind: str
    coefficients: dict[str, np.ndarray]

    def __post_init__(self) -> None:
        if self.kind not in FILTER_KINDS:
            raise InputError(unknown_name_message("filter kind", self.kind, FILTER_KINDS))
        if tuple(sorted(self.coefficients)) != tuple(sorted(FILTER_COEFFICIENTS)):
            raise InputError(f"a filter section has coefficients {', '.join(FILTER_COEFFICIENTS)}; "
                             f"got {', '.join(self.coefficients)}")
        arrays = {name: np.asarray(self.coefficients[name], dtype=float) for name in FILTER_COEFFICIENTS}
        if not all(np.all(np.isfinite(a)) for a in arrays.values()):
            raise InputError(f"{self.kind} section coefficients must be finite")
        object.__setattr__(self, "coefficients", arrays)


@dataclass(frozen=True, eq=False)
class GainTable:
    """Controller coefficients on a 1-D or 2-D grid of operating points.

    Parameters
    ----------
    structure : str
        One of :data:`gainloom.names.CONTROLLER_STRUCTURES`.
    axes : tuple of TableAxis
        One or two axes; the grid is their product, first axis slowest.
    coefficients : dict of str to ndarray
        Exactly the names in ``CONTROLLER_COEFFICIENTS[structure]``, each of
        the grid's shape ``tuple(len(a.values) for a in axes)``.
    sample_period : ndarray
        Sample period in seconds at each grid point (grid shape).
    output_limits : tuple
        Controller output saturation ``(u_min, u_max)``, ``u_min < u_max`` at
        every point: two floats, or two arrays of the grid's shape when the
        limits vary across the table (e.g. ``bus / sqrt(3)``); limits equal
        at every point are stored as floats.
    filters : tuple of FilterTable
        Discrete filter sections after the controller (``controller.filters``),
        in cascade order; empty without filters.
    """

    structure: str
    axes: tuple[TableAxis, ...]
    coefficients: dict[str, np.ndarray]
    sample_period: np.ndarray
    output_limits: tuple
    filters: tuple[FilterTable, ...] = ()

    def __post_init__(self) -> None:
        if self.structure not in CONTROLLER_STRUCTURES:
            raise InputError(unknown_name_message("controller structure", self.structure, CONTROLLER_STRUCTURES))
        if len(self.axes) not in (1, 2):
            raise InputError(f"a table has one or two axes; got {len(self.axes)}")
        shape = self.shape
        expected = CONTROLLER_COEFFICIENTS[self.structure]
        if tuple(sorted(self.coefficients)) != tuple(sorted(expected)):
            raise InputError(
                f"{self.structure} coefficients must be {', '.join(expected)}; got {', '.join(self.coefficients)}"
            )
        coefficients = {}
        for name in expected:
            array = np.asarray(self.coefficients[name], dtype=float)
            if array.shape != shape or not np.all(np.isfinite(array)):
                raise InputError(f"coefficient {name!r} must be finite with grid shape {shape}; got {array.shape}")
            coefficients[name] = array
        object.__setattr__(self, "coefficients", coefficients)
        ts = np.broadcast_to(np.asarray(self.sample_period, dtype=float), shape).copy()
        if not np.all(np.isfinite(ts) & (ts > 0)):
            raise InputError("sample periods must be finite and positive")
        object.__setattr__(self, "sample_period", ts)
        if len(self.output_limits) != 2:
            raise InputError(f"output limits must be (u_min, u_max); got {self.output_limits!r}")
        try:
            low, high = (np.broadcast_to(np.asarray(v, dtype=float), shape) for v in self.output_limits)
        except ValueError:
            raise InputError(f"output limits must be numbers or arrays of the grid shape {shape}") from None
        if not (np.all(np.isfinite(low)) and np.all(np.isfinite(high)) and np.all(low < high)):
            raise InputError(
                f"output limits must be finite with u_min < u_max at every point; got {low.ravel()[:4]}, "
                f"{high.ravel()[:4]}"
            )
        limits: tuple[float, float] | tuple[np.ndarray, np.ndarray]
        if np.all(low == low.flat[0]) and np.all(high == high.flat[0]):
            limits = (float(low.flat[0]), float(high.flat[0]))
        else:
            limits = (low.copy(), high.copy())
        object.__setattr__(self, "output_limits", limits)
        object.__setattr__(self, "filters", tuple(self.filters))
        for section in self.filters:
            if any(array.shape != shape for array in section.coefficients.values()):
                raise InputError(f"{section.kind} section coefficients must have the grid shape {shape}")

    @property
    def shape(self) -> tuple[int, ...]:
        """Grid shape, one entry per axis."""
        return tuple(axis.values.size for axis in self.axes)

    @property
    def limits_vary(self) -> bool:
        """True when the output limits differ between points (tabulated)."""
        return isinstance(self.output_limits[0], np.ndarray)

    @property
    def limit_grids(self) -> tuple[np.ndarray, np.ndarray]:
        """``(u_min, u_max)`` as arrays of the grid's shape."""
        low, high = (np.broadcast_to(np.asarray(v, dtype=float), self.shape) for v in self.output_limits)
        return low, high

    @property
    def limit_envelope(self) -> tuple[float, float]:
        """The lowest ``u_min`` and the highest ``u_max`` over the table."""
        low, high = self.limit_grids
        return float(np.min(low)), float(np.max(high))

    @property
    def coefficient_names(self) -> tuple[str, ...]:
        """Coefficient names in table order."""
        return CONTROLLER_COEFFICIENTS[self.structure]

    @property
    def filter_grids(self) -> dict[str, np.ndarray]:
        """Every filter coefficient by table name (``f1_b0``, ...), in cascade order."""
        return {filter_coefficient_name(i, name): section.coefficients[name]
                for i, section in enumerate(self.filters) for name in FILTER_COEFFICIENTS}

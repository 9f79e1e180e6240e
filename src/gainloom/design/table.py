"""The gain table: what design produces and code generation consumes.

Kept deliberately small: the axes, the controller structure and the
difference-equation coefficients on the grid.  Per-point analysis (poles,
margins, spec verdicts) travels in the design result, not here.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..names import CONTROLLER_COEFFICIENTS, CONTROLLER_STRUCTURES, unknown_name_message

__all__ = ["TableAxis", "GainTable"]


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
    output_limits : tuple of float
        Controller output saturation ``(u_min, u_max)``, ``u_min < u_max``.
    """

    structure: str
    axes: tuple[TableAxis, ...]
    coefficients: dict[str, np.ndarray]
    sample_period: np.ndarray
    output_limits: tuple[float, float]

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
        low, high = (float(v) for v in self.output_limits)
        if not low < high:
            raise InputError(f"output limits must satisfy u_min < u_max; got {low}, {high}")
        object.__setattr__(self, "output_limits", (low, high))

    @property
    def shape(self) -> tuple[int, ...]:
        """Grid shape, one entry per axis."""
        return tuple(axis.values.size for axis in self.axes)

    @property
    def coefficient_names(self) -> tuple[str, ...]:
        """Coefficient names in table order."""
        return CONTROLLER_COEFFICIENTS[self.structure]

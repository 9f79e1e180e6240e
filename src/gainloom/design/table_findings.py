"""What the whole-table checks find: one frozen record per finding.

:class:`gainloom.design.results.TableReport` holds tuples of these; each
``to_dict()`` gives the plain data of the gains file and the verification
log, keys in the order those files have always had.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

__all__ = ["BetweenFailure", "CornerResult", "InsertedBreakpoint", "MonotoneFinding", "StepFinding"]


@dataclass(frozen=True)
class StepFinding:
    """A coefficient step between neighbours beyond ``table.max_relative_step``.

    Attributes
    ----------
    coefficient : str
    axis : str
        The axis along which the step is taken.
    index : tuple of int
        Grid index of the first of the two neighbours.
    step : float
        Relative step.
    limit : float
        ``table.max_relative_step``.
    """

    coefficient: str
    axis: str
    index: tuple[int, ...]
    step: float
    limit: float

    def to_dict(self) -> dict[str, Any]:
        """Plain data (``index`` as a list)."""
        return {"coefficient": self.coefficient, "axis": self.axis, "index": list(self.index),
                "step": self.step, "limit": self.limit}


@dataclass(frozen=True)
class MonotoneFinding:
    """A coefficient that moves against its ``table.monotone`` direction.

    Attributes
    ----------
    coefficient, axis : str
    index : tuple of int
        Grid index of the first of the two neighbours.
    direction : str
        ``increasing`` or ``decreasing`` (as asked).
    change : float
        The difference to the next neighbour (of the wrong sign).
    """

    coefficient: str
    axis: str
    index: tuple[int, ...]
    direction: str
    change: float

    def to_dict(self) -> dict[str, Any]:
        """Plain data (``index`` as a list)."""
        return {"coefficient": self.coefficient, "axis": self.axis, "index": list(self.index),
                "direction": self.direction, "change": self.change}


@dataclass(frozen=True)
class BetweenFailure:
    """An intermediate operating point that fails with the interpolated coefficients.

    Attributes
    ----------
    interval : tuple of int
        Lower grid index of the cell along each axis.
    point : dict of str to float
        The operating point (axis name -> value).
    failed : tuple of str
        Specs it fails, in report order.
    """

    interval: tuple[int, ...]
    point: dict[str, float]
    failed: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        """Plain data (lists for the tuples)."""
        return {"interval": list(self.interval), "point": dict(self.point), "failed": list(self.failed)}


@dataclass(frozen=True)
class InsertedBreakpoint:
    """A grid point inserted by ``table.refine``.

    Attributes
    ----------
    axis : str
    value : float
    """

    axis: str
    value: float

    def to_dict(self) -> dict[str, Any]:
        """Plain data."""
        return {"axis": self.axis, "value": self.value}


@dataclass(frozen=True)
class CornerResult:
    """A grid point at its worst tolerance corner (or sample).

    Attributes
    ----------
    point : dict of str to float
        The operating point (axis name -> value).
    worst_corner : int
        Index of the corner: most failed specs, then lowest damping.
    scale : dict of str to float
        Parameter factors of that corner.
    damping : float
        Damping ratio there.
    failed : tuple of str
        Specs failed there (empty when the point passes every corner).
    """

    point: dict[str, float]
    worst_corner: int
    scale: dict[str, float]
    damping: float
    failed: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        """Plain data (``failed`` as a list)."""
        return {"point": dict(self.point), "worst_corner": self.worst_corner, "scale": dict(self.scale),
                "damping": self.damping, "failed": list(self.failed)}

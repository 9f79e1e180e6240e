"""The loaded schedule as plain frozen data.

Section dataclasses mirror the YAML keys (snake_case, defaults filled) so the
design, codegen and report layers read one validated object instead of the
file.  The operating-point family itself (parameters, plant, sampling) is kept
as a compiled recipe so it can be evaluated at any point, not just the grid.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from ..lti.loop import Loop

if TYPE_CHECKING:  # pragma: no cover
    from .family import Family

__all__ = [
    "Axis",
    "CodegenSection",
    "ControllerSection",
    "FilterSection",
    "PointModels",
    "Sampling",
    "Schedule",
    "SpecOverride",
    "SpecSection",
    "Sweep",
    "TableChecks",
    "Target",
    "Tolerances",
]


@dataclass(frozen=True, eq=False)
class Axis:
    """One scheduling variable.

    Parameters
    ----------
    name : str
        Identifier used in expressions.
    unit : str
        Unit for display only (``""`` when not given).
    values : ndarray, shape (n,)
        Grid values, strictly increasing, at least two.
    """

    name: str
    unit: str
    values: np.ndarray


@dataclass(frozen=True, eq=False)
class Sampling:
    """Sampling of the loop at every grid point.

    Parameters
    ----------
    period : ndarray, shape (P,)
        Sample period in seconds.
    method : str
        Hold/discretisation method, one of :data:`gainloom.names.HOLD_METHODS`.
    delay : ndarray, shape (P,)
        Computation delay in samples (fractional only with ``zoh``).
    prewarp : float or None
        Tustin prewarp frequency in rad/s.
    """

    period: np.ndarray
    method: str
    delay: np.ndarray
    prewarp: float | None


@dataclass(frozen=True)
class Target:
    """Design target: a dominant closed-loop pair (damping ratio and natural
    frequency, rad/s) or a gain crossover (rad/s); the unused part is None."""

    damping: float | None = None
    natural_frequency: float | None = None
    crossover: float | None = None


@dataclass(frozen=True)
class Sweep:
    """Range of the controller-zero location in z swept by ``shape-sweep``.

    Parameters
    ----------
    range : tuple of float
        ``(low, high)``, ``-1 < low < high < 1``.
    count : int
        Number of locations, at least 2.
    """

    range: tuple[float, float]
    count: int


@dataclass(frozen=True, eq=False)
class FilterSection:
    """One ``controller.filters`` entry: a second-order section after the controller.

    Parameters
    ----------
    kind : str
        ``names.FILTER_KINDS``: ``"notch"`` or ``"low_pass"``.
    values : dict of str to Expression
        The section's keys (``names.FILTER_KEYS``) as expressions of the
        scheduling variables and parameters: frequency rad/s, notch depth
        dB and width rad/s, low-pass damping ratio.
    auto : bool
        A notch placed on the plant's lightly damped pole pair at each point
        (``notch: auto``); ``values`` then holds only what was written
        besides the frequency.
    node : Node
        Where the section was written, for errors.
    """

    kind: str
    values: dict[str, Any]
    auto: bool
    node: Any = field(repr=False)

    def as_written(self) -> dict[str, str]:
        """The section as written: ``kind`` and each key's expression (``frequency: auto`` when automatic)."""
        text = {"kind": self.kind}
        if self.auto:
            text["frequency"] = "auto"
        text.update({key: expression.source for key, expression in self.values.items()})
        return text


@dataclass(frozen=True)
class ControllerSection:
    """The ``controller`` section, defaults filled.

    ``objective`` is set only for ``shape-sweep``, ``zero_on`` only for
    ``pole-cancel``, ``sweep`` only for ``shape-sweep`` (defaulted), ``target``
    for ``dominant-pair`` and ``nearest-target``; ``derivative_filter``
    (seconds) only for ``pd``/``pid``.  ``filters``: second-order sections
    in cascade after the controller, in the order written.  ``output_limits`` is ``(low, high)``
    in actuator units: numbers, or expressions of the scheduling variables
    and parameters (:class:`~gainloom.schedule.expressions.Expression`)
    when they vary across the schedule; :meth:`Schedule.output_limits_at`
    evaluates them.
    """

    structure: str
    strategy: str
    output_limits: tuple
    objective: str | None = None
    zero_on: str | None = None
    target: Target | None = None
    sweep: Sweep | None = None
    derivative_filter: float | None = None
    compare_continuous: bool = False
    filters: tuple[FilterSection, ...] = ()


@dataclass(frozen=True)
class SpecOverride:
    """One ``specs.overrides`` entry.

    Parameters
    ----------
    where : dict of str to (float, float)
        Closed range per scheduling variable; a point matches when it is in
        every range.
    set : dict of str to value
        Spec keys and their values in that region (``None`` = not required
        there; ``natural_frequency`` is a ``(min, max)`` pair).
    """

    where: dict[str, tuple[float, float]]
    set: dict[str, Any]


@dataclass(frozen=True)
class SpecSection:
    """The ``specs`` section: ``None`` means "not required".

    Units: ``max_overshoot`` percent, ``max_settling_time`` s (2 %),
    ``natural_frequency`` rad/s ``(min, max)`` (either may be ``None``),
    ``min_gain_margin`` dB, ``min_phase_margin`` degrees,
    ``min_delay_margin`` s, ``max_sensitivity_peak`` absolute,
    ``max_gain`` in the units of the controller coefficients,
    ``min_crossover``, ``max_crossover`` and ``min_bandwidth`` rad/s.
    ``poles`` says which closed-loop poles the damping, decay and
    natural-frequency specs judge: ``"dominant"`` (default) or ``"all"``
    (``names.POLE_SELECTIONS``; see docs/design.md).
    """

    min_damping: float | None = None
    max_overshoot: float | None = None
    max_settling_time: float | None = None
    natural_frequency: tuple[float | None, float | None] | None = None
    max_pole_radius: float | None = None
    min_gain_margin: float | None = None
    min_phase_margin: float | None = None
    min_delay_margin: float | None = None
    max_sensitivity_peak: float | None = None
    system_type: int | None = None
    max_gain: float | None = None
    min_crossover: float | None = None
    max_crossover: float | None = None
    min_bandwidth: float | None = None
    poles: str = "dominant"
    overrides: tuple[SpecOverride, ...] = ()


@dataclass(frozen=True)
class TableChecks:
    """The ``table`` section (whole-table checks).

    Parameters
    ----------
    max_relative_step : float or None
        Largest allowed relative change of a coefficient between neighbours.
    monotone : dict of str to str
        Coefficient name -> ``"increasing"`` or ``"decreasing"``.
    between_points : int
        Intermediate points checked per grid interval (default 3).
    refine_max_inserted : int
        ``table.refine.max_inserted``: bound on automatically inserted grid
        points; 0 = refinement off (default).
    """

    max_relative_step: float | None = None
    monotone: dict[str, str] = field(default_factory=dict)
    between_points: int = 3
    refine_max_inserted: int = 0


@dataclass(frozen=True)
class Tolerances:
    """The ``tolerances`` section.

    Parameters
    ----------
    parameters : dict of str to (float, float)
        Independent parameter -> ``(minus, plus)`` relative magnitudes: the
        parameter ranges over ``[1 - minus, 1 + plus]`` times its nominal value.
    samples : str or (int, int)
        ``"corners"`` or ``(count, seed)`` for space-filling samples (the
        design's table check).
    design : str
        ``"check"`` (the table is checked at every sample) or
        ``"worst-case"`` (each point is designed so that every spec holds at
        every sample), ``names.TOLERANCE_DESIGNS``.
    draws : int or None
        Random draws per operating point of the statistical study
        (``samples: N``; ``gainloom spread``), ``None`` when not asked for.
        The design's table check then keeps the corners.
    distribution : str
        ``names.TOLERANCE_DISTRIBUTIONS``: ``uniform`` over the tolerance box,
        or ``normal`` with the tolerance as 3 sigma.
    seed : int
        Seed of the study's random draws.
    """

    parameters: dict[str, tuple[float, float]] = field(default_factory=dict)
    samples: str | tuple[int, int] = "corners"
    design: str = "check"
    draws: int | None = None
    distribution: str = "uniform"
    seed: int = 0


@dataclass(frozen=True)
class CodegenSection:
    """The ``codegen`` section: C identifier prefix, number format and the
    physical full-scale values of the fixed-point error and output signals
    (``None``: code generation's defaults, 1.0 for the error and the larger
    output-limit magnitude for the output)."""

    prefix: str
    format: str
    error_full_scale: float | None = None
    output_full_scale: float | None = None


@dataclass(frozen=True, eq=False)
class PointModels:
    """Everything the schedule says at a set of operating points.

    Parameters
    ----------
    points : ndarray, shape (Q, n_axes)
        The operating points (scheduling-variable values).
    parameters : dict of str to ndarray, shape (Q,)
        Every parameter, tolerance scale applied.
    plant : Loop
        Continuous plant, batched over the points, ``dead_time`` set (s).
    sample_period : ndarray, shape (Q,)
        Sample period in seconds.
    delay : ndarray, shape (Q,)
        Computation delay in samples.
    """

    points: np.ndarray
    parameters: dict[str, np.ndarray]
    plant: Loop
    sample_period: np.ndarray
    delay: np.ndarray


@dataclass(frozen=True, eq=False)
class Schedule:
    """A validated schedule file.

    Build it with :func:`gainloom.load_schedule`.  Grid arrays are indexed by
    operating point ``p`` in product order, first axis slowest
    (``points.reshape(grid_shape + (n_axes,))`` recovers the grid).
    """

    path: str
    sha256: str
    name: str
    description: str
    axes: tuple[Axis, ...]
    points: np.ndarray
    grid_shape: tuple[int, ...]
    parameters: dict[str, np.ndarray]
    plant: Loop
    sampling: Sampling
    controller: ControllerSection
    specs: SpecSection
    table_checks: TableChecks
    tolerances: Tolerances
    codegen: CodegenSection
    warnings: tuple[str, ...]
    family: Family = field(repr=False)
    #: ``sampler(points, scale) -> Loop``: the sampled plant when it is not
    #: the family's plant discretised alone (the outer loop of a cascade sees
    #: the inner closed loop, :mod:`gainloom.design.cascade`); None otherwise.
    plant_sampler: Any = field(default=None, repr=False)

    @property
    def axis_names(self) -> tuple[str, ...]:
        """Names of the scheduling variables, slowest first."""
        return tuple(axis.name for axis in self.axes)

    def describe_point(self, point: np.ndarray) -> str:
        """Return e.g. ``"speed=3000 rpm, load=0.5"`` for one operating point."""
        return self.family.describe(np.asarray(point, dtype=float))

    def evaluate(self, points: np.ndarray, scale: dict[str, float] | None = None) -> PointModels:
        """Evaluate parameters, plant and sampling at arbitrary operating points.

        Parameters
        ----------
        points : ndarray, shape (Q, n_axes)
            Scheduling-variable values (units as in the schedule), e.g.
            points between grid points.
        scale : dict of str to float or ndarray (Q,), optional
            Factors applied to named independent parameters before any
            dependent expression is evaluated (tolerance corners; one factor
            per point for the statistical study's draws).

        Returns
        -------
        PointModels

        Raises
        ------
        ScheduleError
            An expression is not finite at one of the points, or tabulated
            data do not cover it (the message names the point).
        InputError
            Bad ``points`` shape or a scale on an unknown or dependent parameter.
        """
        return self.family.evaluate(points, scale)

    def filters_at(self, points: np.ndarray, models: PointModels | None = None):
        """The ``controller.filters`` sections at operating points, or ``None`` without filters.

        Parameters
        ----------
        points : ndarray, shape (Q, n_axes)
        models : PointModels, optional
            The nominal evaluation at ``points`` when the caller has it.
            Filters are always evaluated at nominal parameters: the
            firmware's filter does not follow a tolerance.

        Returns
        -------
        FilterValues or None
            See :mod:`gainloom.schedule.filters`.
        """
        from .filters import evaluate_filters

        if not self.controller.filters:
            return None
        if models is None:
            models = self.evaluate(points)
        return evaluate_filters(self.family, self.controller.filters, models.points, models.parameters,
                                models.plant.den, models.sample_period)

    def output_limits_at(self, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Output limits ``(low, high)`` at operating points, shape (Q,) each.

        Numbers are repeated; expressions are evaluated with the parameters
        at ``points`` (so a refined table gets its limits at the inserted
        breakpoints too).
        """
        points = np.asarray(points, dtype=float).reshape(-1, len(self.axes))
        varying = any(not isinstance(v, (int, float)) for v in self.controller.output_limits)
        parameters = self.evaluate(points).parameters if varying else {}
        return self.family.output_limits(self.controller.output_limits, points, parameters)

    def spec_values(self, points: np.ndarray) -> dict[str, np.ndarray]:
        """Spec bounds at each point with overrides resolved.

        Parameters
        ----------
        points : ndarray, shape (Q, n_axes)

        Returns
        -------
        dict of str to ndarray, shape (Q,)
            Keys: ``min_damping`` (the stricter of the written damping and the
            one implied by ``max_overshoot``), ``max_overshoot`` (percent),
            ``max_settling_time``, ``min_natural_frequency``,
            ``max_natural_frequency``, ``max_pole_radius``,
            ``min_gain_margin``, ``min_phase_margin``, ``min_delay_margin``,
            ``max_sensitivity_peak``, ``system_type``, ``max_gain``,
            ``min_crossover``, ``max_crossover``, ``min_bandwidth``.  NaN
            where a spec is not required.
        """
        from ..errors import InputError
        from .spec_values import resolve_specs

        points = np.asarray(points, dtype=float)
        if points.ndim == 1 and len(self.axes) == 1:
            points = points[:, np.newaxis]
        if points.ndim != 2 or points.shape[1] != len(self.axes):
            raise InputError(f"points must have shape (Q, {len(self.axes)}); got {points.shape}")
        return resolve_specs(self.specs, self.axis_names, points)

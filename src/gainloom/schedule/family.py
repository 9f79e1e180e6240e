"""The compiled plant family: parameters, plant and sampling as functions of the
operating point.

A :class:`Family` is built once from the validated YAML nodes and evaluated on
any array of operating points at once (the grid at load time, points between
grid points or tolerance corners later).  Every value is checked where it is
computed; a bad value raises :class:`~gainloom.errors.ScheduleError` at the
YAML node that defined it and names the first offending operating point.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from ..errors import InputError, ScheduleError
from ..limits import MAX_DELAY_SAMPLES, SAMPLE_PERIOD_RANGE
from ..lti.convert import poly_from_roots, ss_to_tf
from ..lti.loop import Loop
from .expressions import Expression
from .model import Axis, PointModels
from .nodes import Node

if TYPE_CHECKING:  # pragma: no cover
    from .measured import MeasuredPlant

__all__ = ["Family", "Pair", "ParameterDef", "PlantRecipe", "TableDef", "describe_point"]

#: Name of the sample period inside ``sampling.delay`` and ``plant.dead_time``.
SAMPLE_PERIOD_NAME = "ts"

# Relative slack when checking that tabulated data cover a value: only
# round-off, never extrapolation.
_COVER_SLACK = 1e-12
# A delay counts as integer within this many samples.
_INTEGER_SLACK = 1e-9


@dataclass(frozen=True, eq=False)
class TableDef:
    """Tabulated parameter: linear interpolation of ``y`` over ``over`` at ``x``."""

    over: str
    x: np.ndarray
    y: np.ndarray
    node: Node
    over_node: Node
    x_node: Node


@dataclass(frozen=True, eq=False)
class ParameterDef:
    """One parameter: an expression or a table, plus what it depends on."""

    name: str
    node: Node
    expression: Expression | None
    table: TableDef | None
    depends_on: frozenset

    @property
    def independent(self) -> bool:
        """True when the definition names no other parameter."""
        return not self.depends_on


@dataclass(frozen=True, eq=False)
class Pair:
    """A complex-conjugate pair ``re +- j im`` in a zero/pole list."""

    re: Expression
    im: Expression
    node: Node


@dataclass(frozen=True, eq=False)
class PlantRecipe:
    """How to build the plant's coefficients from evaluated names."""

    kind: Literal["transfer_function", "zpk", "state_space", "measured"]
    numerator: tuple[Expression, ...] = ()
    denominator: tuple[Expression, ...] = ()
    numerator_node: Node | None = None
    zeros: tuple[Expression | Pair, ...] = ()
    poles: tuple[Expression | Pair, ...] = ()
    gain: Expression | None = None
    matrices: dict[str, tuple[tuple[Expression, ...], ...]] | None = None
    dead_time: Expression | None = None
    #: ``plant.measured``: the data and the models fitted to them
    measured: MeasuredPlant | None = None


def describe_point(axes: tuple[Axis, ...], point: np.ndarray) -> str:
    """``"speed=3000 rpm, load=0.5"`` for one operating point."""
    parts = []
    for axis, value in zip(axes, np.atleast_1d(point)):
        parts.append(f"{axis.name}={float(value):g}" + (f" {axis.unit}" if axis.unit else ""))
    return ", ".join(parts)


@dataclass(frozen=True, eq=False)
class Family:
    """Compiled operating-point family of one schedule file."""

    file: str
    axes: tuple[Axis, ...]
    parameters: tuple[ParameterDef, ...]  # dependency order
    plant: PlantRecipe
    period: Expression
    delay: Expression | None
    method: str
    prewarp: Expression | None

    # -- helpers --------------------------------------------------------------
    def describe(self, point: np.ndarray) -> str:
        """``"speed=3000 rpm, load=0.5"`` for one operating point."""
        return describe_point(self.axes, point)

    def _first_bad(self, bad: np.ndarray, points: np.ndarray) -> str:
        index = int(np.flatnonzero(bad)[0])
        more = int(np.count_nonzero(bad)) - 1
        text = f"at {self.describe(points[index])}"
        return text + (f" (and {more} more point{'s' if more > 1 else ''})" if more else "")

    def _checked(
        self,
        expression: Expression,
        env: dict[str, np.ndarray],
        points: np.ndarray,
        what: str,
        *,
        positive: bool = False,
        non_negative: bool = False,
    ) -> np.ndarray:
        value = expression.evaluate(env, points.shape[0])
        bad = ~np.isfinite(value)
        if np.any(bad):
            index = int(np.flatnonzero(bad)[0])
            kind = "infinite (division by zero or overflow)" if np.isinf(value[index]) else "not a number (e.g. sqrt or log of a negative value)"
            raise expression.node.error(f"{what} {expression.source!r} is {kind} {self._first_bad(bad, points)}")
        if positive and np.any(value <= 0):
            bad = value <= 0
            index = int(np.flatnonzero(bad)[0])
            shown = f"found {value[index]:g}" if expression.constant else f"{expression.source!r} = {value[index]:g}"
            raise expression.node.error(f"{what} must be positive; {shown} {self._first_bad(bad, points)}")
        if non_negative and np.any(value < 0):
            bad = value < 0
            index = int(np.flatnonzero(bad)[0])
            raise expression.node.error(
                f"{what} must not be negative; {expression.source!r} = {value[index]:g} {self._first_bad(bad, points)}"
            )
        return value

    def output_limits(
        self, limits: tuple, points: np.ndarray, parameters: dict[str, np.ndarray]
    ) -> tuple[np.ndarray, np.ndarray]:
        """``controller.output_limits`` at ``points``: numbers, or expressions of
        the scheduling variables and parameters (e.g. ``bus / sqrt(3)``).

        Parameters
        ----------
        limits : tuple
            ``(low, high)``, each a float or an :class:`Expression`.
        points : ndarray, shape (Q, n_axes)
        parameters : dict of str to ndarray
            Parameter values at ``points``.

        Returns
        -------
        low, high : ndarray, shape (Q,)

        Raises
        ------
        ScheduleError
            At the limit's line: a non-finite value, or ``low >= high``, with
            the first operating point where it happens.
        """
        env = {axis.name: points[:, i] for i, axis in enumerate(self.axes)} | dict(parameters)
        values = []
        for which, limit in zip(("lower", "upper"), limits):
            if isinstance(limit, Expression):
                values.append(self._checked(limit, env, points, f"{which} output limit"))
            else:
                values.append(np.full(points.shape[0], float(limit)))
        low, high = values
        bad = ~(low < high)
        if np.any(bad):
            index = int(np.flatnonzero(bad)[0])
            node = next((v.node for v in limits if isinstance(v, Expression)), None)
            message = (
                f"output_limits must satisfy low < high at every operating point; found "
                f"[{low[index]:g}, {high[index]:g}] {self._first_bad(bad, points)}"
            )
            raise node.error(message) if node is not None else ScheduleError(message, file=self.file)
        return low, high

    # -- evaluation -----------------------------------------------------------
    def evaluate(self, points: np.ndarray, scale: dict[str, float] | None = None) -> PointModels:
        """Evaluate the family at ``points`` (shape (Q, n_axes)); see :meth:`Schedule.evaluate`."""
        points = np.asarray(points, dtype=float)
        if points.ndim == 1 and len(self.axes) == 1:
            points = points[:, np.newaxis]
        if points.ndim != 2 or points.shape[1] != len(self.axes) or points.shape[0] == 0:
            raise InputError(
                f"points must have shape (Q, {len(self.axes)}) with Q >= 1 (one column per scheduling "
                f"variable: {', '.join(a.name for a in self.axes)}); got {points.shape}"
            )
        if not np.all(np.isfinite(points)):
            raise InputError("operating points must be finite")
        scale = dict(scale or {})
        by_name = {p.name: p for p in self.parameters}
        for name, factor in scale.items():
            if name not in by_name:
                raise InputError(f"cannot scale unknown parameter {name!r}; parameters: {', '.join(by_name) or 'none'}")
            if not by_name[name].independent:
                raise InputError(
                    f"cannot scale parameter {name!r}: it is computed from {', '.join(sorted(by_name[name].depends_on))}"
                )
            if not np.all(np.isfinite(factor)):
                raise InputError(f"scale of {name!r} must be finite; got {factor}")
        count = points.shape[0]
        env: dict[str, np.ndarray] = {axis.name: points[:, i].copy() for i, axis in enumerate(self.axes)}
        values: dict[str, np.ndarray] = {}
        for parameter in self.parameters:
            if parameter.expression is not None:
                value = self._checked(parameter.expression, env, points, f"parameter {parameter.name}")
            else:
                value = self._interpolate(parameter.table, env, points)
            if parameter.name in scale:
                # a number, or one factor per point (the statistical study's draws)
                value = value * np.asarray(scale[parameter.name], dtype=float)
            env[parameter.name] = value
            values[parameter.name] = value

        ts = self._checked(self.period, env, points, "sample period", positive=True)
        low, high = SAMPLE_PERIOD_RANGE
        bad = (ts < low) | (ts > high)
        if np.any(bad):
            index = int(np.flatnonzero(bad)[0])
            raise self.period.node.error(
                f"sample period {ts[index]:.3g} s {self._first_bad(bad, points)} is outside {low:g} .. {high:g} s "
                "(limits in docs/schedule-format.md)"
            )
        env_ts = dict(env)
        env_ts[SAMPLE_PERIOD_NAME] = ts
        delay = np.zeros(count)
        if self.delay is not None:
            delay = self._checked(self.delay, env_ts, points, "computation delay", non_negative=True)
            if self.method != "zoh":
                self._refuse_fraction(delay, self.delay.node, points, "computation delay")
        dead_time = np.zeros(count)
        if self.plant.dead_time is not None:
            dead_time = self._checked(self.plant.dead_time, env_ts, points, "dead time", non_negative=True)
            if self.method != "zoh":
                self._refuse_fraction(delay + dead_time / ts, self.plant.dead_time.node, points, "dead time plus computation delay")
        measured = None
        if self.plant.measured is not None:
            measured = self.plant.measured.models_at(points, self._first_bad)
            dead_time = measured[2]
        self._check_delay_samples(delay, dead_time, ts, points)
        if self.prewarp is not None:
            prewarp = self._checked(self.prewarp, env, points, "prewarp frequency", positive=True)
            bad = prewarp * ts >= np.pi
            if np.any(bad):
                index = int(np.flatnonzero(bad)[0])
                raise self.prewarp.node.error(
                    f"prewarp frequency {prewarp[index]:g} rad/s is at or above the Nyquist frequency "
                    f"pi/ts = {np.pi / ts[index]:g} rad/s ({0.5 / ts[index]:g} Hz) {self._first_bad(bad, points)}"
                )
        num, den = measured[:2] if measured is not None else self._plant_coefficients(env, points)
        plant = Loop(num=num, den=den, dead_time=dead_time)
        return PointModels(points=points, parameters=values, plant=plant, sample_period=ts, delay=delay)

    def _check_delay_samples(self, delay: np.ndarray, dead_time: np.ndarray, ts: np.ndarray, points: np.ndarray) -> None:
        """Refuse more delay samples than :data:`MAX_DELAY_SAMPLES`: each is one more discrete pole."""
        with np.errstate(over="ignore"):
            total = delay + dead_time / ts
        bad = ~(total <= MAX_DELAY_SAMPLES)
        if not np.any(bad):
            return
        index = int(np.flatnonzero(bad)[0])
        if dead_time[index] > 0:
            source = self.plant.dead_time if self.plant.dead_time is not None else self.plant.measured
            node = source.node  # type: ignore[union-attr]
            detail = f"{'fitted ' if self.plant.measured is not None else ''}dead time {dead_time[index]:.3g} s / ts {ts[index]:.3g} s"
            detail += f" + computation delay {delay[index]:g}" if delay[index] else ""
        else:
            node = self.delay.node  # type: ignore[union-attr]
            detail = "computation delay"
        raise node.error(
            f"{detail} is {total[index]:.4g} samples {self._first_bad(bad, points)}; at most {MAX_DELAY_SAMPLES} "
            "are accepted (each sample is one more pole of the discrete loop; limits in docs/schedule-format.md)"
        )

    def _refuse_fraction(self, delay: np.ndarray, node: Node, points: np.ndarray, what: str) -> None:
        bad = np.abs(delay - np.round(delay)) > _INTEGER_SLACK
        if np.any(bad):
            index = int(np.flatnonzero(bad)[0])
            raise node.error(
                f"{what} is {delay[index]:g} samples {self._first_bad(bad, points)}, a fraction of a sample; "
                f"only method 'zoh' supports fractional delay (modified z-transform), not {self.method!r}"
            )

    def _interpolate(self, table: TableDef, env: dict[str, np.ndarray], points: np.ndarray) -> np.ndarray:
        over = env[table.over]
        low, high = table.x[0], table.x[-1]
        slack = _COVER_SLACK * max(abs(low), abs(high), 1.0)
        bad = (over < low - slack) | (over > high + slack)
        if np.any(bad):
            index = int(np.flatnonzero(bad)[0])
            raise table.x_node.error(
                f"tabulated data over {table.over!r} cover {low:g} .. {high:g} but {table.over} = "
                f"{over[index]:g} {self._first_bad(bad, points)}; extend the table (no extrapolation)"
            )
        return np.interp(over, table.x, table.y)

    def _plant_coefficients(self, env: dict[str, np.ndarray], points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        recipe = self.plant
        count = points.shape[0]
        if recipe.kind == "transfer_function":
            num = np.stack([self._checked(e, env, points, "numerator coefficient") for e in recipe.numerator], axis=1)
            den = np.stack([self._checked(e, env, points, "denominator coefficient") for e in recipe.denominator], axis=1)
            bad = den[:, 0] == 0
            if np.any(bad):
                raise recipe.denominator[0].node.error(
                    f"leading denominator coefficient {recipe.denominator[0].source!r} is zero "
                    f"{self._first_bad(bad, points)}; the plant order must not change across the grid"
                )
        elif recipe.kind == "zpk":
            num = self._factors(recipe.zeros, env, points, "zero")
            den = self._factors(recipe.poles, env, points, "pole")
            gain = self._checked(recipe.gain, env, points, "gain")
            bad = gain == 0
            if np.any(bad):
                raise recipe.gain.node.error(f"plant gain is zero {self._first_bad(bad, points)}")
            num = num * gain[:, np.newaxis]
        else:
            num, den = self._state_space(env, points)
        bad = np.all(num == 0, axis=1)
        if np.any(bad):
            node = recipe.numerator_node or (recipe.gain.node if recipe.gain is not None else None)
            if node is not None:
                raise node.error(f"plant numerator is identically zero {self._first_bad(bad, points)}")
        return num, den.reshape(count, -1)

    def _factors(self, roots: tuple[Expression | Pair, ...], env: dict[str, np.ndarray], points: np.ndarray, what: str) -> np.ndarray:
        count = points.shape[0]
        columns = []
        for root in roots:
            if isinstance(root, Pair):
                re = self._checked(root.re, env, points, f"{what} real part")
                im = np.abs(self._checked(root.im, env, points, f"{what} imaginary part"))
                columns += [re + 1j * im, re - 1j * im]
            else:
                columns.append(self._checked(root, env, points, what).astype(complex))
        if not columns:
            return np.ones((count, 1))
        return poly_from_roots(np.stack(columns, axis=1))

    def _state_space(self, env: dict[str, np.ndarray], points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """SISO state space to transfer function, batched over the points.

        Uses :func:`gainloom.lti.convert.ss_to_tf` (characteristic polynomial
        from batched eigenvalues, numerator from Markov parameters, so exact
        zeros of a low-degree numerator stay exact).
        """
        matrices = self.plant.matrices
        assert matrices is not None
        arrays = {}
        for key, rows in matrices.items():
            arrays[key] = np.stack(
                [np.stack([self._checked(e, env, points, f"{key} entry") for e in row], axis=-1) for row in rows],
                axis=-2,
            )
        with np.errstate(all="ignore"):
            num, den = ss_to_tf(arrays["A"], arrays["B"][:, :, 0], arrays["C"][:, 0, :], arrays["D"][:, 0, 0])
        bad = ~(np.all(np.isfinite(num), axis=1) & np.all(np.isfinite(den), axis=1))
        if np.any(bad):
            raise matrices["A"][0][0].node.error(
                f"state-space to transfer-function conversion is not finite {self._first_bad(bad, points)}"
            )
        return num, den

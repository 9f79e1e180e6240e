"""Run-time inputs of the controller step that a scenario drives.

The generated step takes two optional inputs besides the error: a
feedforward term added before saturation (a back-EMF or decoupling
voltage, say) and run-time output limits (from the measured bus voltage,
say).  A scenario gives them as expressions of the run's signals, checked
and evaluated by the schedule's own safe evaluator
(:mod:`gainloom.schedule.expressions`, never ``eval``):

- :class:`Feedforward`: one expression, switched on at a time (zero before);
- :class:`LimitStep`: from a time on, the step gets the run-time limits
  ``(low, high)`` (two expressions), or none again (the table's limits).

An expression may use :data:`SIGNAL_NAMES` (time, reference, measured
output of the current sample), the scheduling variables and the schedule's
parameters at the current operating point.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import yaml

from ..errors import InputError, ScheduleError
from ..schedule.expressions import Expression, parse_expression
from ..schedule.nodes import Node

__all__ = ["SIGNAL_NAMES", "Feedforward", "LimitStep", "RunInputs", "SignalExpression"]

#: Names of the run's own signals an expression may use, with what they are.
SIGNAL_NAMES: dict[str, str] = {
    "t": "time of the sample (s)",
    "r": "reference at the sample",
    "y": "measured plant output at the sample",
}

_STR_TAG = "tag:yaml.org,2002:str"


def _located(error: ScheduleError, what: str) -> InputError:
    """The expression's error as an option error: the option and the character."""
    at = "" if error.column is None or error.column <= 1 else f" (at character {error.column})"
    return InputError(f"{what}: {error.message}{at}")


@dataclass(frozen=True, eq=False)
class SignalExpression:
    """A checked expression of the run's signals, the scheduling variables
    and the schedule's parameters.

    Build it with :meth:`parse`.

    Parameters
    ----------
    what : str
        What the expression is, for messages (e.g. ``"--feedforward"``).
    expression : Expression
        The whitelisted tree.
    """

    what: str
    expression: Expression

    @classmethod
    def parse(cls, value: SignalExpression | str | float, what: str) -> SignalExpression:
        """Read a number or an expression text.

        Raises
        ------
        InputError
            Wrong type, a syntax error or a construct outside the whitelist;
            the message names ``what`` and the character where it went wrong.
        """
        if isinstance(value, SignalExpression):
            return value
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise InputError(f"{what}: expected a number or an expression; got {type(value).__name__}")
        if isinstance(value, (int, float)):
            if not math.isfinite(value):
                raise InputError(f"{what}: expected a finite number; got {value!r}")
            value = repr(float(value))
        # A plain one-line scalar node, so columns map onto characters of the text.
        start, end = yaml.Mark(what, 0, 0, 0, None, None), yaml.Mark(what, len(value), 0, len(value), None, None)
        node = Node(yaml.ScalarNode(_STR_TAG, value, start, end), "", what)
        try:
            return cls(what, parse_expression(node, "value"))
        except ScheduleError as error:
            raise _located(error, what) from None

    @property
    def text(self) -> str:
        """The expression as written."""
        return self.expression.source

    @property
    def names(self) -> frozenset:
        """Names the expression uses."""
        return self.expression.names

    def check_names(self, schedule_names: Mapping[str, str]) -> None:
        """Refuse unknown names and names that mean two things.

        Parameters
        ----------
        schedule_names : mapping of str to str
            Scheduling variables and parameters of the schedule, name -> what
            it is ("scheduling variable", "parameter").
        """
        clash = sorted(self.names & set(SIGNAL_NAMES) & set(schedule_names))
        if clash:
            name = clash[0]
            raise InputError(
                f"{self.what}: {name!r} in {self.text!r} is both the run's {SIGNAL_NAMES[name]} and "
                f"{schedule_names[name]} {name!r} of the schedule; rename it in the schedule"
            )
        known = {**schedule_names, **dict.fromkeys(SIGNAL_NAMES, "signals of the run")}
        try:
            self.expression.check_names(known)
        except ScheduleError as error:
            raise _located(error, self.what) from None

    def evaluate(self, env: Mapping[str, np.ndarray], times: np.ndarray) -> np.ndarray:
        """Values at ``times.size`` samples; ``env`` holds every name used.

        Raises
        ------
        InputError
            A value is not finite (the message gives the first such time).
        """
        values = self.expression.evaluate(env, times.size)
        bad = ~np.isfinite(values)
        if np.any(bad):
            first = int(np.argmax(bad))
            raise InputError(
                f"{self.what}: {self.text!r} is not finite at t = {float(times[first]):.6g} s "
                f"({np.count_nonzero(bad)} of {values.size} samples)"
            )
        return values

    def to_dict(self) -> str:
        """The expression as written."""
        return self.text


def _time(value: float, what: str) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a number; got {value!r}") from None
    if not (math.isfinite(number) and number >= 0):
        raise InputError(f"{what} must be a finite time >= 0 s; got {value!r}")
    return number


@dataclass(frozen=True, eq=False)
class Feedforward:
    """The feedforward term of the controller step, added before saturation.

    Parameters
    ----------
    value : SignalExpression, str or float
        Controller-output units: a number or an expression of
        :data:`SIGNAL_NAMES`, the scheduling variables and the schedule's
        parameters, e.g. ``"ke * speed"`` for a back-EMF.
    start : float, optional
        When it is switched on, s (zero before; default 0).  Like a load
        step, it takes effect at the first sample at or after this time.
    """

    value: SignalExpression
    start: float = 0.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", SignalExpression.parse(self.value, "feedforward"))
        object.__setattr__(self, "start", _time(self.start, "feedforward start"))

    def to_dict(self) -> dict:
        """Plain data for the JSON log."""
        return {"value": self.value.to_dict(), "start": self.start}


@dataclass(frozen=True, eq=False)
class LimitStep:
    """From ``time`` on, the step gets run-time output limits (or none again).

    Parameters
    ----------
    time : float
        When the limits change, s; they take effect at the first sample at
        or after this time and hold until the next limit step.
    low, high : SignalExpression, str, float or None
        The run-time limits (controller-output units), numbers or
        expressions like those of :class:`Feedforward`.  Both ``None``: no
        run-time limits from ``time`` on (the table's, as when the C step
        gets a null pointer).  Where ``low > high`` the step ignores them
        and uses the table's, as the generated C does (a warning says so).
    """

    time: float
    low: SignalExpression | None = None
    high: SignalExpression | None = None

    def __post_init__(self) -> None:
        time = _time(self.time, "limit step time")
        object.__setattr__(self, "time", time)
        if (self.low is None) != (self.high is None):
            raise InputError(
                f"limit step at {time:g} s: give both limits (low and high), or neither to return to the table's"
            )
        if self.low is not None:
            object.__setattr__(self, "low", SignalExpression.parse(self.low, f"limit step at {time:g} s, low"))
            object.__setattr__(self, "high", SignalExpression.parse(self.high, f"limit step at {time:g} s, high"))

    @property
    def releases(self) -> bool:
        """True when the step returns to the table's limits."""
        return self.low is None

    def to_dict(self) -> dict:
        """Plain data for the JSON log (``None`` limits: the table's)."""
        return {
            "time": self.time,
            "low": None if self.low is None else self.low.to_dict(),
            "high": None if self.high is None else self.high.to_dict(),
        }


class RunInputs:
    """Feedforward and run-time limits of every sample of one run.

    Everything that does not depend on the measured output is evaluated for
    all samples at once; an expression using ``y`` is evaluated at its
    sample, once ``y`` is known.

    Parameters
    ----------
    feedforward : Feedforward or None
    limit_steps : sequence of LimitStep, in time order
    times, reference : ndarray, shape (K,)
        Sample instants (s) and the reference at them.
    variables : mapping of str to ndarray, shape (K,)
        Scheduling variables and the schedule's parameters at the samples.
    kinds : mapping of str to str
        What each name of ``variables`` is, for messages.
    """

    def __init__(
        self,
        feedforward: Feedforward | None,
        limit_steps: tuple[LimitStep, ...],
        times: np.ndarray,
        reference: np.ndarray,
        variables: Mapping[str, np.ndarray],
        kinds: Mapping[str, str],
    ) -> None:
        self.times = np.asarray(times, dtype=float)
        count = self.times.size
        self._env = {**variables, "t": self.times, "r": np.asarray(reference, dtype=float)}
        # which expression holds at each sample: index into the list, -1 none
        self._expressions: list[SignalExpression] = []
        self._feedforward = np.full(count, -1)
        if feedforward is not None:
            self._feedforward[self.times >= feedforward.start] = self._add(feedforward.value, kinds)
        self._low, self._high = np.full(count, -1), np.full(count, -1)
        for step in limit_steps:
            after = self.times >= step.time
            low = -1 if step.releases else self._add(step.low, kinds)
            high = -1 if step.releases else self._add(step.high, kinds)
            self._low[after], self._high[after] = low, high
        # values of everything that does not need y, for all samples where it holds
        self._values = [
            None if "y" in expression.names else self._evaluate(expression, self._users(index))
            for index, expression in enumerate(self._expressions)
        ]

    def _add(self, expression: SignalExpression, kinds: Mapping[str, str]) -> int:
        expression.check_names(kinds)
        self._expressions.append(expression)
        return len(self._expressions) - 1

    def _users(self, index: int) -> np.ndarray:
        return (self._feedforward == index) | (self._low == index) | (self._high == index)

    def _evaluate(self, expression: SignalExpression, where: np.ndarray) -> np.ndarray:
        values = np.zeros(self.times.size)
        env = {name: self._env[name][where] for name in expression.names}
        values[where] = expression.evaluate(env, self.times[where])
        return values

    def _at(self, index: int, k: int, measured: float) -> float:
        values = self._values[index]
        if values is not None:
            return float(values[k])
        expression = self._expressions[index]
        env = {name: self._env[name][k:k + 1] for name in expression.names if name != "y"}
        env["y"] = np.array([measured])
        return float(expression.evaluate(env, self.times[k:k + 1])[0])

    def at(self, k: int, measured: float) -> tuple[float, tuple[float, float] | None]:
        """Feedforward and run-time limits (``None``: the table's) at sample ``k``."""
        index = self._feedforward[k]
        feedforward = 0.0 if index < 0 else self._at(index, k, measured)
        if self._low[k] < 0:
            return feedforward, None
        return feedforward, (self._at(self._low[k], k, measured), self._at(self._high[k], k, measured))

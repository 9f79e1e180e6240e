"""Published PI tuning rules of drive current and speed loops as design strategies.

Both rules read the continuous plant of each point as one dominant element
plus small lags, and lump the small lags, the dead time, the computation
delay and the hold into one equivalent time constant (the "sum of small
time constants")::

    T_sigma = sum(1/|p| for the plant's other poles) + dead_time
              + delay * ts + ts / 2 (zero-order hold only)

The half sample is the average delay of a zero-order hold; other hold
methods are models without that lag and add nothing.

* ``modulus-optimum``: plant ``K / ((1 + s T1)(1 + s T_sigma))`` with the
  slowest pole ``-1/T1`` dominant.  PI zero on that pole, ``Ti = T1``, and
  ``Kp = T1 / (2 K T_sigma)``, which makes the closed loop second order with
  damping ``1/sqrt(2)`` (4.3 % overshoot, phase margin 65.5 deg, crossover
  0.455/T_sigma).  Source: the modulus (amplitude) optimum of drive control
  texts, e.g. Schroeder, Elektrische Antriebe - Regelung von
  Antriebssystemen (from memory).
* ``symmetric-optimum``: near-integrating plant ``K_I / (s (1 + s T_sigma))``
  (a slowest pole at or near zero is taken as an integrator,
  ``K_I = lim (s - p1) G(s)`` at ``s = 0``).  ``Ti = a^2 T_sigma``,
  ``Kp = 1 / (a K_I T_sigma)`` with ``a = 2``: crossover ``1/(a T_sigma)``
  at the geometric mean of ``1/Ti`` and ``1/T_sigma``, phase margin
  ``atan((a^2 - 1)/(2 a)) = 36.9 deg``.  Source: the symmetric optimum of
  the same texts (from memory; originally Kessler).

The discrete PI is the table form ``kp + ki_ts z/(z - 1)`` with the same
``kp`` and ``ki_ts = kp ts / Ti`` (DEVELOPERS.md, "Discrete controller
forms").  Both rules apply to plants with real poles in the closed left
half-plane, no finite zeros and a positive gain; anything else is refused.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..errors import DesignError
from ..lti.polynomials import batched_roots
from .search import Shapes

__all__ = ["SYMMETRIC_SPACING", "RuleModel", "rule_model", "rule_pi", "rule_shapes"]

#: Symmetric-optimum spacing ``a`` (``Ti = a^2 T_sigma``); 2 is the standard rule.
SYMMETRIC_SPACING = 2.0

#: A pole counts as real when its imaginary part is below this fraction of its magnitude.
REAL_TOLERANCE = 1e-9


@dataclass(frozen=True, eq=False)
class RuleModel:
    """The plant as the rules see it, per point (arrays of shape (P,)).

    Attributes
    ----------
    gain : ndarray
        DC gain ``K`` (``inf`` where the slowest pole is at zero).
    large : ndarray
        Dominant time constant ``T1 = 1/|p1|`` in s (``inf`` at an integrator).
    integrator_gain : ndarray
        ``K_I = lim (s - p1) G(s)`` at ``s = 0`` (``K/T1`` for a stable ``p1``), 1/s per plant unit.
    small : ndarray
        Sum of small time constants ``T_sigma`` in s (see the module docstring).
    """

    gain: np.ndarray
    large: np.ndarray
    integrator_gain: np.ndarray
    small: np.ndarray


def _refuse(strategy: str, label: str, what: str) -> DesignError:
    return DesignError(
        f"strategy {strategy} needs a plant of real stable poles (or one at 0), no zeros and a positive gain, "
        f"K / ((1 + s T1)(1 + s T2)...); at {label} {what}"
    )


def rule_model(strategy: str, plant, ts: np.ndarray, delay: np.ndarray, method: str,
               describe: Callable[[int], str]) -> RuleModel:
    """Decompose the continuous plant of every point for a tuning rule.

    Parameters
    ----------
    strategy : {"modulus-optimum", "symmetric-optimum"}
    plant : Loop
        Continuous plant, P points, ``dead_time`` set.
    ts, delay : ndarray, shape (P,)
        Sample period (s) and computation delay (samples).
    method : str
        Hold method (``ts/2`` is counted for ``zoh`` only).
    describe : callable
        ``describe(p)`` names point ``p`` for error messages.

    Raises
    ------
    DesignError
        The plant at some point is not of the form the rule assumes.
    """
    num, den = np.asarray(plant.num, float), np.asarray(plant.den, float)
    P = num.shape[0]
    poles = batched_roots(den)
    out = {k: np.empty(P) for k in ("gain", "large", "integrator_gain", "small")}
    hold = 0.5 if method == "zoh" else 0.0
    for p in range(P):
        if np.any(num[p, :-1] != 0):
            raise _refuse(strategy, describe(p), "the plant has finite zeros")
        row = poles[p]
        if np.any(np.abs(row.imag) > REAL_TOLERANCE * np.maximum(np.abs(row), 1e-300)) or np.any(row.real > 0):
            raise _refuse(strategy, describe(p), f"its poles are {', '.join(f'{r:.6g}' for r in row)}")
        real = np.sort(-row.real)  # magnitudes, slowest first
        if strategy == "modulus-optimum" and real[0] == 0:
            raise _refuse(strategy, describe(p), "the plant integrates (pole at 0); use symmetric-optimum")
        fast = real[1:]
        if np.any(fast == 0):
            raise _refuse(strategy, describe(p), "the plant has two poles at 0")
        k_int = num[p, -1] / (den[p, 0] * np.prod(fast))
        if k_int <= 0:
            raise _refuse(strategy, describe(p), f"the gain is {k_int:.6g} (not positive)")
        out["integrator_gain"][p] = k_int
        out["large"][p] = np.inf if real[0] == 0 else 1.0 / real[0]
        out["gain"][p] = np.inf if real[0] == 0 else k_int / real[0]
        out["small"][p] = np.sum(1.0 / fast) + plant.dead_time[p] + (delay[p] + hold) * ts[p]
        if out["small"][p] <= 0:
            raise _refuse(strategy, describe(p), "there is no small time constant, delay or hold (T_sigma = 0)")
    return RuleModel(**out)


def rule_pi(strategy: str, model: RuleModel, ts: np.ndarray) -> dict[str, np.ndarray]:
    """PI table coefficients ``kp``, ``ki_ts`` of a rule (see the module docstring)."""
    t_sigma = model.small
    if strategy == "modulus-optimum":
        ti = model.large
        kp = model.large / (2.0 * model.gain * t_sigma)
    elif strategy == "symmetric-optimum":
        a = SYMMETRIC_SPACING
        ti = a * a * t_sigma
        kp = 1.0 / (a * model.integrator_gain * t_sigma)
    else:
        raise DesignError(f"unknown tuning rule {strategy!r}")
    return {"kp": kp, "ki_ts": kp * np.asarray(ts, float) / ti}


def rule_shapes(strategy: str, models, method: str, describe: Callable[[int], str]) -> Shapes:
    """The rule's PI as one candidate shape per point, its gain as the strategy's own gain.

    Locus form ``K (z - c)/(z - 1)`` with ``K = kp + ki_ts`` and ``c = kp/K``.

    Parameters
    ----------
    strategy : {"modulus-optimum", "symmetric-optimum"}
    models : PointModels
        ``Schedule.evaluate`` at the points.
    method : str
        Hold method.
    describe : callable
        ``describe(p)`` names point ``p``.
    """
    ts = np.asarray(models.sample_period, float)
    model = rule_model(strategy, models.plant, ts, np.asarray(models.delay, float), method, describe)
    coefficients = rule_pi(strategy, model, ts)
    gain = coefficients["kp"] + coefficients["ki_ts"]
    zero = coefficients["kp"] / gain
    P = ts.size
    return Shapes(
        zeros=np.stack([np.ones(P), -zero], axis=-1)[:, None, :],
        poles=np.ones((P, 1, 1)),
        valid=np.ones((P, 1), dtype=bool),
        gain=gain[:, None],
        params=zero[:, None, None],
    )

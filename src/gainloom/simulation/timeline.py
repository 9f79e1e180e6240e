"""Sample instants of a run whose sample period follows the operating point.

The firmware samples at ``t[k+1] = t[k] + T(p(t[k]))``: the period in force
is the one of the operating point at the current sample.  Because the points
along the path come from the schedule in one batched call, the instants are
found by fixed-point iteration on the whole sequence: guess the instants,
evaluate the periods there, rebuild the instants by cumulative sum, repeat.
Each round makes at least one more instant exact (the recursion is causal),
and with a period that changes slowly along the path the rest converge in a
few rounds.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from ..errors import InputError

__all__ = ["MAX_SAMPLES", "sample_times"]

#: Refuse runs longer than this many samples (a typo in duration or period).
MAX_SAMPLES = 2_000_000

_ROUNDS = 60


def sample_times(duration: float, period_at: Callable[[np.ndarray], np.ndarray]) -> np.ndarray:
    """Sample instants ``0 = t[0] < t[1] < ... <= duration``.

    Parameters
    ----------
    duration : float
        Length of the run, s.
    period_at : callable
        Maps sample instants (s, shape (K,)) to the sample period in force
        there (s, shape (K,)).

    Returns
    -------
    ndarray, shape (K,)
        Instants in seconds with ``t[k+1] - t[k] = period_at(t)[k]`` to
        1e-9 of the smallest period.
    """
    end = duration * (1.0 + 1e-12)

    def periods_at(times: np.ndarray) -> np.ndarray:
        periods = np.asarray(period_at(times), dtype=float).reshape(-1)
        periods = np.broadcast_to(periods, times.shape) if periods.size == 1 else periods
        if periods.shape != times.shape or not np.all(np.isfinite(periods) & (periods > 0)):
            raise InputError("the schedule gave a sample period that is not finite and positive along the path")
        return periods

    first = periods_at(np.zeros(1))[0]
    times = _grid(0.0, first, duration)
    for _ in range(_ROUNDS):
        periods = periods_at(times)
        rebuilt = np.concatenate([[0.0], np.cumsum(periods[:-1])])
        following = rebuilt[-1] + periods[-1]
        if following <= end:
            # The guess ended too early: continue the grid at the last period.
            times = np.concatenate([rebuilt, _grid(following, float(np.min(periods)), duration)])
            continue
        keep = rebuilt <= end
        converged = np.all(np.abs(rebuilt - times) <= 1e-9 * float(np.min(periods)))
        times = rebuilt[keep]
        if converged:
            return times
    raise InputError(
        "the sample period changes too fast along the path for the sample instants to settle; "
        "use a slower trajectory or a schedule whose period varies smoothly"
    )


def _grid(start: float, step: float, duration: float) -> np.ndarray:
    count = int(np.floor((duration - start) / step * (1.0 + 1e-12))) + 1
    if count > MAX_SAMPLES:
        raise InputError(
            f"the run would take {count} samples ({duration} s at {step} s); the limit is {MAX_SAMPLES}"
        )
    return start + step * np.arange(max(count, 1))

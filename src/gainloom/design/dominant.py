"""Which closed-loop poles the damping and decay specs judge.

With ``specs: {poles: dominant}`` (the default) a closed-loop pole is left
out of ``min_damping`` (and ``max_overshoot``'s damping bound) and of the
decay rate from ``max_settling_time`` when it is

* at ``z = 0`` exactly: a deadbeat pole brought by the computation delay or
  the hold (and every cancelled pole, which :func:`gainloom.design.cancel.mask_cancelled`
  moves there), or
* *fast*: it shrinks by at least ``FAST_FACTOR`` per sample (``|z| <= 1/3``,
  below 2 % within four samples) **and** decays at least ``DOMINANCE_RATIO``
  times faster than the slowest judged pole (``-ln|z|/ts``; ``|z|`` at most
  the square of the slowest pole's).  The second condition keeps the slowest
  poles judged even in a loop where every pole is fast (a deadbeat-like
  design).

Everything else is a *dominant* pole.  The slowest pole is always one, so
the decay rate (the smallest over the judged poles), the pole radius and
the natural frequency of the slowest pole are the same under both
selections; only the damping changes: a pole at ``z = -0.2`` (an
"oscillation at Nyquist" gone within two samples) no longer binds it.  With
``poles: all`` every pole but the cancelled ones is judged.

Both thresholds are our choice (no source).  The usual continuous-time rule
of thumb neglects a pole five to ten times farther from the imaginary axis
than the dominant ones (common practice, no source); in a sampled loop the
per-sample test is the stronger one (such a pole is gone within a few
samples, faster than the firmware can act on it), so a ratio of two to the
slowest pole suffices to keep a genuinely slow pole judged.
"""

from __future__ import annotations

import numpy as np

from ..names import POLE_SELECTIONS

__all__ = ["DOMINANCE_RATIO", "FAST_FACTOR", "judged_poles"]

#: A fast pole decays at least this many times faster than the slowest pole.
DOMINANCE_RATIO = 2.0

#: A fast pole shrinks by at least this factor per sample (``|z| <= 1/3``).
FAST_FACTOR = 3.0


def judged_poles(poles: np.ndarray, ts: np.ndarray, selection: str) -> np.ndarray:
    """Mask of the closed-loop poles the damping and decay specs judge.

    Parameters
    ----------
    poles : ndarray of complex, shape B + (n,)
        Closed-loop poles in ``z`` (cancelled ones already moved to ``z = 0``).
    ts : ndarray
        Sample period [s], broadcastable to ``B + (n,)``.
    selection : str
        ``"dominant"`` or ``"all"`` (``names.POLE_SELECTIONS``).

    Returns
    -------
    ndarray of bool, shape B + (n,)
        True for a judged pole.  Under ``"all"``: every pole except those at
        ``z = 0`` (cancelled or deadbeat: damping 1, infinite decay, they
        never bind anyway).  Non-finite poles are always judged (they fail).
    """
    if selection not in POLE_SELECTIONS:
        raise ValueError(f"unknown pole selection {selection!r}; known: {', '.join(POLE_SELECTIONS)}")
    magnitude = np.abs(poles)
    finite = np.isfinite(magnitude)
    judged = ~finite | (magnitude > 0)
    if selection == "all" or poles.shape[-1] == 0:
        return judged
    with np.errstate(divide="ignore", invalid="ignore"):
        decay = -np.log(np.where(finite, magnitude, 1.0)) / np.broadcast_to(ts, poles.shape)
    slowest = np.min(np.where(judged & finite, decay, np.inf), axis=-1, keepdims=True)
    fast = (magnitude <= 1.0 / FAST_FACTOR) & (decay >= DOMINANCE_RATIO * slowest)
    return judged & ~(finite & fast)

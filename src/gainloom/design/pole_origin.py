"""Where a closed-loop pole comes from: the open-loop pole its locus branch starts at.

A closed-loop pole of ``D + K N`` moves continuously with the loop gain and
starts, at ``K -> 0``, on an open-loop pole: a plant pole, a controller pole
(the integrator at ``z = 1``, a derivative-filter or lead/lag pole), or a
pole at ``z = 0`` that the computation delay or the hold put into the
sampled plant.  The branch is followed back from the designed gain by
scaling the loop gain down geometrically (``TRACK_STEPS`` steps over
``TRACK_DECADES`` decades), each step taking the nearest root.  Where two
branches meet (a breakaway point) the pole comes from both; the one named
is the branch the nearest-root walk follows.
"""

from __future__ import annotations

import numpy as np

from ..lti.closed_loop import closed_loop_poles
from ..lti.filters import RESONANCE_DAMPING
from ..lti.loop import Loop
from ..lti.polynomials import batched_roots

__all__ = ["ORIGIN_KINDS", "pole_origins"]

#: What a closed-loop pole can come from.  ``resonance`` is a plant pole of
#: a lightly damped pair (s-plane damping below
#: :data:`gainloom.lti.filters.RESONANCE_DAMPING`); the filter sections after
#: the controller are part of the sampled plant here (the loop's fixed part).
ORIGIN_KINDS: tuple[str, ...] = ("plant pole", "resonance", "controller pole", "delay or hold")

TRACK_STEPS = 80
TRACK_DECADES = 12.0

#: An open-loop pole this close to ``z = 0`` is a delay or hold pole.
ZERO_POLE = 1e-9


def pole_origins(loop: Loop, plant: Loop, poles: np.ndarray) -> tuple[tuple[str, ...], np.ndarray]:
    """Origin of one closed-loop pole per point.

    Parameters
    ----------
    loop : Loop
        Open loop ``C P`` at its designed gain (closed loop ``D + N``).
    plant : Loop
        The discrete plant of the same points (its poles are the plant's;
        the rest of the open-loop poles are the controller's).
    poles : ndarray of complex, shape (P,)
        The closed-loop pole (in ``z``) whose origin is asked.

    Returns
    -------
    kinds : tuple of str
        One of ``ORIGIN_KINDS`` per point (``""`` where the pole is not finite).
    start : ndarray of complex, shape (P,)
        The open-loop pole (``z``) the branch starts at.
    """
    factors = np.geomspace(1.0, 10.0 ** -TRACK_DECADES, TRACK_STEPS)
    ladder = closed_loop_poles(loop, factors)  # (P, G, n)
    current = np.asarray(poles, dtype=complex)
    for g in range(1, TRACK_STEPS):
        distance = np.abs(ladder[:, g, :] - current[:, None])
        distance = np.where(np.isfinite(distance), distance, np.inf)
        current = np.take_along_axis(ladder[:, g, :], np.argmin(distance, axis=-1)[:, None], axis=-1)[:, 0]
    plant_poles = batched_roots(plant.den)
    open_poles = batched_roots(loop.den)
    to_plant = np.min(np.abs(plant_poles - current[:, None]), axis=-1, initial=np.inf)
    # the open-loop pole nearest the walk's end is where the branch starts
    nearest = np.argmin(np.where(np.isfinite(open_poles), np.abs(open_poles - current[:, None]), np.inf), axis=-1)
    start = np.take_along_axis(open_poles, nearest[:, None], axis=-1)[:, 0]
    to_start = np.abs(start - current)
    resonant = _lightly_damped(start, loop.ts)
    kinds = []
    for p in range(loop.points):
        if not np.isfinite(poles[p]):
            kinds.append("")
        elif abs(start[p]) <= ZERO_POLE:
            kinds.append("delay or hold")
        elif to_plant[p] <= to_start[p] * (1 + 1e-9) + 1e-12:
            kinds.append("resonance" if resonant[p] else "plant pole")
        else:
            kinds.append("controller pole")
    return tuple(kinds), start


def _lightly_damped(z: np.ndarray, ts: np.ndarray | None) -> np.ndarray:
    """True where the open-loop pole ``z`` is one of a complex pair damped below ``RESONANCE_DAMPING``."""
    if ts is None:
        s = np.asarray(z, dtype=complex)
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            s = np.log(np.asarray(z, dtype=complex)) / np.asarray(ts, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        damping = -s.real / np.abs(s)
    return np.isfinite(damping) & (np.abs(s.imag) > 0) & (damping < RESONANCE_DAMPING)

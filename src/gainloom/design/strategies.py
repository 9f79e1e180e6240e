"""Candidate controller shapes for each design strategy (``names.DESIGN_STRATEGIES``).

* ``pole-cancel``: the controller zero(s) on the slowest (or fastest) stable
  real plant pole(s) in ``z``; the gain is then chosen inside the exact
  feasible set by the objective (default ``fastest``: the largest smallest
  decay rate that still meets every spec).
* ``dominant-pair``: the target pole ``z_t = exp(s_t ts)`` with
  ``s_t = -zeta wn + j wn sqrt(1 - zeta^2)`` is put on the root locus by the
  angle condition ``arg C(z_t) P(z_t) = -180 deg``, solved for the free
  controller zero (PI, PD; PID: second zero, the first cancels the slowest
  plant pole) or pole (lead/lag: zero on the slowest plant pole); the gain by
  the magnitude condition ``|K Z(z_t) P(z_t) / Q(z_t)| = 1``.  When that gain
  misses a spec, the objective ``nearest-target`` chooses inside the feasible
  set instead (noted).
* ``shape-sweep``: the zero(s) swept over ``sweep.range`` in ``z``
  (``sweep.count`` locations; two zeros sweep all ordered pairs), the best
  shape and gain by the objective.

Lead and lag poles, where the strategy does not place them, follow a fixed
ratio of continuous-equivalent corner frequencies (our convention, common
practice, no source): lead pole 10 times faster than its zero
(``pc = zc**10``), lag pole 10 times slower (``pc = zc**0.1``).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import DesignError
from ..lti.convert import poly_from_roots
from ..lti.loop import Loop
from ..lti.polynomials import batched_roots
from .search import Shapes
from .structures import filter_pole, zero_count

__all__ = ["make_shapes", "LEAD_RATIO", "stable_real_poles"]

#: Continuous-equivalent corner ratio of lead and lag sections.
LEAD_RATIO = 10.0

#: A plant pole counts as real when its imaginary part is below this
#: (relative to its magnitude), and as stable and usable when inside
#: ``0 < z < 1 - 1e-12`` (delay poles at ``z = 0`` are not cancelled).
REAL_TOLERANCE = 1e-9


def stable_real_poles(plant: Loop) -> list[np.ndarray]:
    """Stable real plant poles ``0 < z < 1`` per point, slowest (largest z) first."""
    roots = batched_roots(plant.den)
    out = []
    for row in roots:
        real = row[np.abs(row.imag) <= REAL_TOLERANCE * np.maximum(np.abs(row), 1e-300)].real
        real = real[(real > 1e-12) & (real < 1 - 1e-12)]
        out.append(np.sort(real)[::-1])
    return out


def _controller_poles(structure: str, kd_a: np.ndarray, zeros: np.ndarray) -> np.ndarray:
    """Fixed poles for each shape; lead/lag by the corner ratio. zeros: (P, S, nz) roots."""
    P, S = zeros.shape[:2]
    a = np.broadcast_to(kd_a[:, None], (P, S))
    if structure == "p":
        return np.zeros((P, S, 0))
    if structure == "pi":
        return np.ones((P, S, 1))
    if structure == "pd":
        return a[..., None].copy()
    if structure == "pid":
        return np.stack([np.ones((P, S)), a], axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        if structure == "lead":
            return np.clip(zeros, 0, None) ** LEAD_RATIO
        if structure == "lag":
            return np.clip(zeros, 0, None) ** (1 / LEAD_RATIO)
        # leadlag: first section lead, second lag
        return np.stack([np.clip(zeros[..., 0], 0, None) ** LEAD_RATIO, np.clip(zeros[..., 1], 0, None) ** (1 / LEAD_RATIO)], axis=-1)


def _valid(structure: str, roots: np.ndarray, poles: np.ndarray) -> np.ndarray:
    """Realisable shapes: PI/PID zeros in [0, 1) (kp, ki >= 0), PD zero in (kd_a, 1),
    lead zero > pole, lag zero < pole, all finite and inside the unit disc."""
    ok = np.all(np.isfinite(roots), axis=-1) & np.all(np.abs(roots) < 1, axis=-1)
    ok &= np.all(np.isfinite(poles), axis=-1)
    if structure in ("pi", "pid"):
        ok &= np.all((roots >= 0) & (roots < 1), axis=-1)
    if structure == "pd":
        ok &= (roots[..., 0] > poles[..., 0]) & (roots[..., 0] < 1)
    if structure == "lead":
        ok &= roots[..., 0] > poles[..., 0]
    if structure == "lag":
        ok &= roots[..., 0] < poles[..., 0]
    return ok


def pack_shapes(structure: str, roots: np.ndarray, poles: np.ndarray, gain: np.ndarray | None = None) -> Shapes:
    P, S = roots.shape[:2]
    zeros = poly_from_roots(np.nan_to_num(roots, nan=0.0))
    valid = _valid(structure, roots, poles)
    return Shapes(
        zeros=zeros,
        poles=np.nan_to_num(poles, nan=0.0),
        valid=valid,
        gain=np.full((P, S), np.nan) if gain is None else gain,
        params=roots,
    )


def _cancel_roots(plant: Loop, count: int, which: str) -> np.ndarray:
    poles = stable_real_poles(plant)
    out = np.full((plant.points, 1, count), np.nan)
    for p, real in enumerate(poles):
        chosen = real if which == "slowest" else real[::-1]
        k = min(count, chosen.size)
        out[p, 0, :k] = chosen[:k]
    return out


def _angle(value: np.ndarray) -> np.ndarray:
    return np.angle(value)


def _dominant_pair(plant: Loop, structure: str, kd_a: np.ndarray, target: tuple[float, float]) -> Shapes:
    zeta, wn = target
    s_t = complex(-zeta * wn, wn * math.sqrt(max(1.0 - zeta * zeta, 0.0)))
    ts = plant.ts
    z_t = np.exp(s_t * ts)  # (P,)
    plant_value = np.array([np.polyval(n, z) / np.polyval(d, z) for n, d, z in zip(plant.num, plant.den, z_t)])
    P = plant.points
    nz = zero_count(structure)
    if structure == "leadlag":
        raise DesignError("strategy dominant-pair places one free zero or pole; use pole-cancel or shape-sweep for leadlag")
    roots = np.full((P, 1, nz), np.nan)
    # known part of the controller (fixed poles, cancelling zero) and the
    # angle the free element must contribute
    if structure == "p":
        poles = np.zeros((P, 1, 0))
        # no free element: the target is generally not on the locus of K P,
        # so the objective nearest-target picks the gain
        return pack_shapes(structure, roots, poles)
    cancel = _cancel_roots(plant, 1, "slowest")[:, 0, 0]
    if structure in ("pi", "pd", "pid"):
        fixed = _controller_poles(structure, kd_a, roots)[:, 0, :]  # (P, nq)
        known = np.ones(P, dtype=complex)
        for k in range(fixed.shape[1]):
            known /= z_t - fixed[:, k]
        if structure == "pid":
            known *= z_t - cancel
        needed = -np.pi - _angle(plant_value) - _angle(known)  # angle of (z_t - c)
        needed = np.mod(needed + np.pi, 2 * np.pi) - np.pi
        with np.errstate(divide="ignore", invalid="ignore"):
            c = z_t.real - z_t.imag / np.tan(needed)
        c = np.where((needed > 0) & (needed < np.pi), c, np.nan)
        if structure == "pid":
            pair = np.sort(np.stack([cancel, c], axis=-1), axis=-1)[:, ::-1]
            roots[:, 0, :] = pair
        else:
            roots[:, 0, 0] = c
        poles = _controller_poles(structure, kd_a, np.nan_to_num(roots))
        free_value = known * (z_t - c)
        gain = 1.0 / np.abs(free_value * plant_value)
    else:  # lead / lag: zero cancels the slowest plant pole, pole from the angle condition
        roots[:, 0, 0] = cancel
        needed = -(-np.pi - _angle(plant_value) - _angle(z_t - cancel))  # angle of (z_t - p)
        needed = np.mod(needed + np.pi, 2 * np.pi) - np.pi
        with np.errstate(divide="ignore", invalid="ignore"):
            pole = z_t.real - z_t.imag / np.tan(needed)
        pole = np.where((needed > 0) & (needed < np.pi), pole, np.nan)
        poles = pole[:, None, None]
        gain = np.abs(z_t - pole) / np.abs((z_t - cancel) * plant_value)
    shapes = pack_shapes(structure, roots, poles, gain[:, None])
    return Shapes(shapes.zeros, shapes.poles, shapes.valid & np.isfinite(gain)[:, None], np.where(np.isfinite(gain), gain, np.nan)[:, None], shapes.params)


def make_shapes(
    plant: Loop,
    structure: str,
    strategy: str,
    *,
    zero_on: str | None = None,
    sweep: tuple[tuple[float, float], int] | None = None,
    target: tuple[float, float] | None = None,
    derivative_filter: float | None = None,
) -> Shapes:
    """Candidate shapes per point for a strategy.

    Parameters
    ----------
    plant : Loop
        Discrete plant (P points).
    structure, strategy : str
    zero_on : {"slowest", "fastest"}, optional
        pole-cancel target.
    sweep : ((low, high), count), optional
        shape-sweep zero locations in z.
    target : (damping, natural frequency rad/s), optional
        dominant-pair target.
    derivative_filter : float, optional
        Derivative filter time constant tf [s] (pd, pid).

    Returns
    -------
    Shapes
    """
    P = plant.points
    kd_a = filter_pole(derivative_filter if derivative_filter is not None else 0.0, plant.ts)
    nz = zero_count(structure)
    if strategy == "dominant-pair":
        if target is None:
            raise DesignError("strategy dominant-pair needs controller.target")
        return _dominant_pair(plant, structure, kd_a, target)
    if nz == 0:
        roots = np.zeros((P, 1, 0))
        return pack_shapes(structure, roots, _controller_poles(structure, kd_a, roots))
    if strategy == "pole-cancel":
        roots = _cancel_roots(plant, nz, zero_on or "slowest")
        if nz == 2:
            roots = np.sort(roots, axis=-1)
        return pack_shapes(structure, roots, _controller_poles(structure, kd_a, roots))
    if strategy == "shape-sweep":
        (low, high), count = sweep if sweep is not None else ((0.5, 0.999), 24)
        values = np.linspace(low, high, count)
        if nz == 1:
            roots = np.broadcast_to(values[None, :, None], (P, count, 1)).copy()
        else:
            i, j = np.triu_indices(count)
            pairs = np.stack([values[i], values[j]], axis=-1)
            roots = np.broadcast_to(pairs[None], (P,) + pairs.shape).copy()
        return pack_shapes(structure, roots, _controller_poles(structure, kd_a, roots))
    raise DesignError(f"unknown strategy {strategy!r}")

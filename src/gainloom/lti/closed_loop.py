"""Closed-loop poles of many loops at many gains, in one batched call.

The closed-loop poles of the unity-feedback loop ``K N/D`` are the roots of
``D + K N``.  They are computed for every operating point and every gain at
once as eigenvalues of stacked companion matrices
(:func:`gainloom.lti.polynomials.batched_roots`).

Discrete loops that carry the delta-operator form (``Loop.delta_num``,
``Loop.delta_den`` in ``g = (z - 1)/ts``) are solved in ``g`` and mapped back
with ``z = 1 + ts g``.  At fast sampling the poles crowd around ``z = 1`` and
the expanded z-coefficients of a high-order loop have lost most of their
digits before any root finder sees them; coefficients in ``g`` stay close to
the continuous ones and keep their digits.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .loop import Loop
from .polynomials import as_poly_batch, batched_roots, pad_left

__all__ = ["closed_loop_poles", "closed_loop_poles_from_coeffs", "closed_loop_polynomials"]


def _gain_grid(gains: object, points: int) -> np.ndarray:
    """Return gains as shape (P, G), checking the shape against ``points``."""
    gains = np.asarray(gains, dtype=float)
    if gains.ndim == 0:
        gains = gains.reshape(1)
    if gains.ndim == 1:
        gains = np.broadcast_to(gains, (points, gains.shape[0]))
    elif gains.ndim != 2 or gains.shape[0] not in (1, points):
        raise InputError(
            f"gains must have shape (G,) or (P, G) with P = {points} points; got shape {gains.shape}"
        )
    else:
        gains = np.broadcast_to(gains, (points, gains.shape[1]))
    if not np.all(np.isfinite(gains)):
        raise InputError("gains must be finite")
    return gains


def closed_loop_polynomials(num: np.ndarray, den: np.ndarray, gains: np.ndarray) -> np.ndarray:
    """``D + K N`` for each point's own row of gains.

    Parameters
    ----------
    num, den : ndarray, shape (P, n + 1)
        Loop numerators (left-padded) and denominators.
    gains : ndarray, shape (P, G)
        Loop gains per point (dimensionless loop multipliers).

    Returns
    -------
    ndarray, shape (P, G, n + 1)
    """
    num = pad_left(np.asarray(num, dtype=float), np.shape(den)[-1])
    return den[:, np.newaxis, :] + gains[:, :, np.newaxis] * num[:, np.newaxis, :]


def _roots_with_infinite(poly: np.ndarray, lead_terms: np.ndarray) -> np.ndarray:
    """Roots of a batch of polynomials whose leading coefficient may vanish.

    Where ``d0 + K n0 = 0`` (a biproper loop at ``K = -d0/n0``) a root has left
    for infinity; it is returned as ``inf`` so every batch keeps ``n`` roots.
    ``lead_terms`` is ``|d0| + |K n0|``, the size of the two terms before
    they cancel.
    """
    n = poly.shape[-1] - 1
    # A leading coefficient lost to cancellation at the level of rounding is
    # the same event as an exact zero: the root is beyond any plot.
    vanished = np.abs(poly[..., 0]) <= 8 * np.finfo(float).eps * lead_terms
    if n == 0 or not np.any(vanished):
        return batched_roots(poly)
    roots = np.empty(poly.shape[:-1] + (n,), dtype=complex)
    keep = ~vanished
    if np.any(keep):
        roots[keep] = batched_roots(poly[keep])
    lower_poly = poly[vanished][:, 1:]
    lower = _roots_with_infinite(lower_poly, np.abs(lower_poly[:, 0]))
    roots[vanished] = np.concatenate([lower, np.full(lower.shape[:-1] + (1,), np.inf + 0j)], axis=-1)
    return roots


def closed_loop_poles_from_coeffs(
    num: object,
    den: object,
    gains: object,
    ts: object = None,
    *,
    delta: bool = False,
) -> np.ndarray:
    """Roots of ``D + K N`` straight from coefficient arrays.

    Parameters
    ----------
    num, den : array_like, shape (P, n + 1) or (n + 1,)
        Loop numerator and denominator, descending powers of ``s`` or ``z``
        (or of ``g = (z - 1)/ts`` when ``delta`` is true).
    gains : array_like, shape (G,) or (P, G)
        Loop gains ``K`` (dimensionless); negative gains give the
        complementary locus.
    ts : array_like, shape (P,), or float, optional
        Sample period in seconds; needed only with ``delta``.
    delta : bool
        The coefficients are in ``g``: roots are mapped to ``z = 1 + ts g``.

    Returns
    -------
    ndarray of complex, shape (P, G, n)
        Closed-loop poles in ``s`` (rad/s) or ``z``, unordered within a gain;
        ``inf`` where a root has gone to infinity.
    """
    num = as_poly_batch(num)
    den = as_poly_batch(den)
    points = max(num.shape[0], den.shape[0])
    if num.shape[-1] > den.shape[-1]:
        raise InputError(
            f"improper loop: numerator has {num.shape[-1]} coefficients, denominator only {den.shape[-1]}"
        )
    num = np.broadcast_to(pad_left(num, den.shape[-1]), (points, den.shape[-1]))
    den = np.broadcast_to(den, (points, den.shape[-1]))
    gains = _gain_grid(gains, points)
    poly = closed_loop_polynomials(num, den, gains)
    lead_terms = np.abs(den[:, np.newaxis, 0]) + np.abs(gains * num[:, np.newaxis, 0])
    roots = _roots_with_infinite(poly, lead_terms)
    if delta:
        if ts is None:
            raise InputError("delta-operator coefficients need the sample period ts")
        period = np.broadcast_to(np.asarray(ts, dtype=float), (points,))
        # z = 1 + ts g: the digits of g survive because 1 is added last.
        with np.errstate(invalid="ignore"):
            roots = np.where(np.isfinite(roots), 1.0 + period[:, np.newaxis, np.newaxis] * roots, np.inf + 0j)
    return roots


def closed_loop_poles(loop: Loop, gains: object) -> np.ndarray:
    """Closed-loop poles of every operating point at every gain.

    Parameters
    ----------
    loop : Loop
        A batch of ``P`` loops ``N/D`` in ``s`` or ``z``.  Discrete loops with
        a delta-operator form are solved in ``g = (z - 1)/ts`` (accurate at
        fast sampling) and the roots returned in ``z``.
    gains : array_like, shape (G,) or (P, G)
        Loop gains ``K`` (dimensionless multipliers of ``N/D``); a 1-D array
        is shared by all points.  Negative gains give the complementary
        (``K < 0``) locus.

    Returns
    -------
    ndarray of complex, shape (P, G, n)
        Roots of ``D + K N``: poles in ``s`` (rad/s) for continuous loops, in
        ``z`` for discrete ones; unordered within a gain (see
        :func:`gainloom.lti.trace.trace_locus` for continuous branches);
        ``inf`` where a root of a biproper loop has gone to infinity.

    Notes
    -----
    Continuous ``dead_time`` is not part of the rational loop and is ignored
    here; discretise the loop to include it.
    """
    if not isinstance(loop, Loop):
        raise InputError(f"expected a gainloom Loop; got {type(loop).__name__}")
    if loop.is_discrete and loop.delta_den is not None:
        return closed_loop_poles_from_coeffs(loop.delta_num, loop.delta_den, gains, loop.ts, delta=True)
    return closed_loop_poles_from_coeffs(loop.num, loop.den, gains)

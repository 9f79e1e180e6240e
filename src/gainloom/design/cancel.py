"""Pole-zero cancellation: a controller zero placed on a plant pole.

When a controller zero sits on a stable plant pole (the pole-cancel
strategy, or any design that lands there), the closed loop keeps a pole at
that location for every gain: ``D + K N`` has the common factor.  That pole
does not appear in the reference-to-output response (it is cancelled there)
but it does in the response to load disturbances entering at the plant
input, and it decays only as fast as the plant pole itself.

gainloom's convention (documented in docs/design.md): such a *cancelled*
pole is kept in every report and must be stable, but it is left out of the
pole-region specs (damping, decay/settling, pole radius, natural-frequency
band), which are about the response the designer shapes; each point with a
cancellation says so in its notes, with the cancelled pole's decay rate.

Numerically, a controller zero ``c`` counts as cancelling a plant pole ``p``
when ``|p - c| <= CANCEL_TOLERANCE |1 - c|`` (0.1 % of the zero's distance to
``z = 1``, i.e. about 0.1 % of its continuous-equivalent frequency), and the
closed-loop pole nearest ``c`` within the same tolerance is the cancelled one.
"""

from __future__ import annotations

import numpy as np

from ..lti.loop import Loop
from ..lti.polynomials import batched_roots, pad_left

__all__ = ["CANCEL_TOLERANCE", "cancelled_zeros", "mask_cancelled", "deflate"]

#: Relative tolerance of a cancellation (see the module docstring).
CANCEL_TOLERANCE = 1e-3


def cancelled_zeros(zeros: np.ndarray, plant_den: np.ndarray) -> np.ndarray:
    """Controller zeros that cancel a stable real plant pole.

    Parameters
    ----------
    zeros : ndarray, shape (R, nz + 1)
        Monic controller numerators in ``z``.
    plant_den : ndarray, shape (R, n + 1)
        Plant denominators.

    Returns
    -------
    ndarray, shape (R, nz)
        The cancelling zero locations, NaN where a zero cancels nothing.
    """
    zeros = np.asarray(zeros, dtype=float)
    R, nz = zeros.shape[0], zeros.shape[-1] - 1
    out = np.full((R, nz), np.nan)
    if nz == 0:
        return out
    with np.errstate(invalid="ignore"):
        c = batched_roots(zeros)
        p = batched_roots(np.asarray(plant_den, dtype=float))
    real = np.abs(c.imag) <= 1e-12
    c = c.real
    distance = np.min(np.abs(p[:, None, :] - c[:, :, None]), axis=-1)
    scale = np.abs(1.0 - c)
    hit = real & (c > 0) & (c < 1) & (distance <= CANCEL_TOLERANCE * scale)
    out[hit] = c[hit]
    return out


def mask_cancelled(poles: np.ndarray, cancelled: np.ndarray) -> np.ndarray:
    """Closed-loop poles with each cancelled one replaced by ``z = 0``.

    ``z = 0`` meets every damping, decay and radius bound and is never the
    dominant pole, so the region metrics ignore it.

    Parameters
    ----------
    poles : ndarray of complex, shape (R, ..., n)
    cancelled : ndarray, shape (R, nz)
        From :func:`cancelled_zeros`.
    """
    poles = np.array(poles, dtype=complex, copy=True)
    if cancelled.shape[-1] == 0 or not np.any(np.isfinite(cancelled)):
        return poles
    extra = poles.ndim - 2
    for k in range(cancelled.shape[-1]):
        c = cancelled[:, k].reshape((-1,) + (1,) * extra)
        with np.errstate(invalid="ignore"):
            distance = np.abs(poles - c[..., None])
        distance = np.where(np.isfinite(distance), distance, np.inf)
        index = np.argmin(distance, axis=-1)
        nearest = np.take_along_axis(distance, index[..., None], axis=-1)[..., 0]
        hit = np.isfinite(c) & (nearest <= CANCEL_TOLERANCE * np.abs(1.0 - np.nan_to_num(c)))
        hit = np.broadcast_to(hit, index.shape)
        chosen = np.take_along_axis(poles, index[..., None], axis=-1)[..., 0]
        np.put_along_axis(poles, index[..., None], np.where(hit, 0.0, chosen)[..., None], axis=-1)
    return poles


def _divide(poly: np.ndarray, root: float) -> np.ndarray:
    quotient, _ = np.polydiv(poly, np.array([1.0, -root]))
    return quotient


def deflate(loop: Loop, cancelled: np.ndarray) -> list[tuple[np.ndarray, Loop]]:
    """The loops with every cancelled factor ``(z - c)`` divided out of ``N`` and ``D``.

    Rows are grouped by how many factors were removed (a batch has one
    order); returns ``(rows, loop)`` pairs covering every row once.  The
    delta-operator form is divided by ``(g - (c - 1)/ts)`` alike.
    """
    counts = np.sum(np.isfinite(cancelled), axis=-1) if cancelled.size else np.zeros(loop.points, dtype=int)
    groups = []
    for count in np.unique(counts):
        rows = np.flatnonzero(counts == count)
        sub = loop.select(rows)
        if count == 0:
            groups.append((rows, sub))
            continue
        nums, dens, dnums, ddens = [], [], [], []
        for j, r in enumerate(rows):
            num = np.trim_zeros(np.asarray(sub.num[j]), "f")
            den = np.asarray(sub.den[j])
            dnum = None if sub.delta_num is None else np.trim_zeros(np.asarray(sub.delta_num[j]), "f")
            dden = None if sub.delta_den is None else np.asarray(sub.delta_den[j])
            for c in cancelled[r][np.isfinite(cancelled[r])]:
                num, den = _divide(num, c), _divide(den, c)
                if dden is not None:
                    g = (c - 1.0) / float(sub.ts[j])
                    dnum, dden = _divide(dnum, g), _divide(dden, g)
            nums.append(num)
            dens.append(den)
            dnums.append(dnum)
            ddens.append(dden)
        width = max(d.size for d in dens)
        delta = None if ddens[0] is None else (_stacked(dnums, width), _stacked(ddens, width))
        groups.append((rows, Loop(
            num=_stacked(nums, width), den=_stacked(dens, width), ts=sub.ts, hold=sub.hold,
            delay=sub.delay, prewarp=sub.prewarp,
            delta_num=None if delta is None else delta[0], delta_den=None if delta is None else delta[1],
        )))
    return groups


def _stacked(polys: list[np.ndarray], width: int) -> np.ndarray:
    """Polynomials of mixed length as one left-padded ``(n, width)`` array."""
    return np.stack([pad_left(poly, width) for poly in polys])

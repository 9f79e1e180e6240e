"""Batched polynomial helpers shared by the whole math core.

Polynomials are coefficient arrays in descending powers, batched along the
leading axes: shape ``(..., n + 1)``.  Nothing here loops in Python over the
batch.
"""

from __future__ import annotations

from math import comb

import numpy as np

__all__ = ["as_poly_batch", "batched_roots", "characteristic", "pad_left", "polymul", "polyval_rows", "z_to_delta"]


def as_poly_batch(coeffs: object) -> np.ndarray:
    """Return ``coeffs`` as a float array of at least two dimensions.

    A 1-D coefficient list becomes a batch of one: shape ``(1, n + 1)``.
    """
    array = np.asarray(coeffs, dtype=float)
    if array.ndim == 0:
        array = array.reshape(1, 1)
    elif array.ndim == 1:
        array = array[np.newaxis, :]
    return array


def pad_left(coeffs: np.ndarray, length: int) -> np.ndarray:
    """Prepend zeros on the last axis so it has ``length`` coefficients.

    Padding with leading zeros keeps the polynomial's value: it only raises
    the nominal degree, which is how numerators are aligned with
    denominators.
    """
    coeffs = np.asarray(coeffs, dtype=float)
    extra = length - coeffs.shape[-1]
    if extra < 0:
        raise ValueError(f"cannot pad {coeffs.shape[-1]} coefficients down to {length}")
    if extra == 0:
        return coeffs.copy()
    # concatenate, not np.pad: this runs in every Loop construction and
    # np.pad's generality cost more than the padding itself
    return np.concatenate([np.zeros(coeffs.shape[:-1] + (extra,)), coeffs], axis=-1)


def polymul(a: object, b: object) -> np.ndarray:
    """Batched product of polynomials (descending coefficients, last axis).

    Leading axes broadcast; the result is float, or complex when either
    factor is.  The degree is small (controller times plant), so the loop
    runs over coefficients, never over the batch.
    """
    a = np.asarray(a)
    b = np.asarray(b)
    shape = np.broadcast_shapes(a.shape[:-1], b.shape[:-1])
    out = np.zeros(shape + (a.shape[-1] + b.shape[-1] - 1,), dtype=np.result_type(a, b, float))
    for i in range(a.shape[-1]):
        out[..., i : i + b.shape[-1]] += a[..., i : i + 1] * b
    return out


def batched_roots(coeffs: np.ndarray) -> np.ndarray:
    """Roots of many polynomials of one degree at once.

    Parameters
    ----------
    coeffs : ndarray, shape (..., n + 1)
        Descending coefficients; the leading coefficient must be non-zero
        in every polynomial of the batch.

    Returns
    -------
    ndarray of complex, shape (..., n)
        Eigenvalues of the companion matrices, in no particular order.
    """
    coeffs = np.asarray(coeffs, dtype=float)
    n = coeffs.shape[-1] - 1
    batch = coeffs.shape[:-1]
    if n == 0:
        return np.zeros(batch + (0,), dtype=complex)
    lead = coeffs[..., :1]
    if np.any(lead == 0):
        raise ValueError("leading coefficient is zero in part of the batch")
    companion = np.zeros(batch + (n, n))
    companion[..., 0, :] = -coeffs[..., 1:] / lead
    if n > 1:
        companion[..., np.arange(1, n), np.arange(n - 1)] = 1.0
    return np.linalg.eigvals(companion).astype(complex)


def characteristic(num: np.ndarray, den: np.ndarray, gains: np.ndarray) -> np.ndarray:
    """Closed-loop characteristic polynomials ``D + K N`` for many gains.

    Parameters
    ----------
    num : ndarray, shape (..., m + 1)
        Loop numerator(s), ``m <= n``.
    den : ndarray, shape (..., n + 1)
        Loop denominator(s).
    gains : ndarray, shape (G,)
        Loop gains ``K``.

    Returns
    -------
    ndarray, shape (..., G, n + 1)
    """
    num = np.asarray(num, dtype=float)
    den = np.asarray(den, dtype=float)
    gains = np.asarray(gains, dtype=float)
    num = pad_left(num, den.shape[-1])
    return den[..., np.newaxis, :] + gains[:, np.newaxis] * num[..., np.newaxis, :]


def z_to_delta(poly: np.ndarray, ts: np.ndarray) -> np.ndarray:
    """Substitute ``z = 1 + ts g`` into descending ``poly`` (exact algebra).

    ``ts`` broadcasts against the batch axes of ``poly``.
    """
    poly = np.asarray(poly, dtype=float)
    n = poly.shape[-1] - 1
    ascending = poly[..., ::-1]
    ts = np.asarray(ts, dtype=float)[..., None]
    out = np.zeros(np.broadcast_shapes(poly.shape[:-1], ts.shape[:-1]) + (n + 1,))
    for j in range(n + 1):
        # coefficient of g^j: ts^j * sum_{k>=j} a_k C(k, j)
        total = sum(ascending[..., k] * comb(k, j) for k in range(j, n + 1))
        out[..., j] = total * ts[..., 0] ** j
    return out[..., ::-1]


def polyval_rows(coeffs: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Evaluate (P, n + 1) descending polynomials at (P, M) points, row by row (Horner over the order only).

    Returns
    -------
    ndarray of complex, shape (P, M)
    """
    acc = np.broadcast_to(np.asarray(coeffs)[:, :1].astype(complex), np.shape(x)).copy()
    for k in range(1, coeffs.shape[1]):
        acc = acc * x + coeffs[:, k : k + 1]
    return acc

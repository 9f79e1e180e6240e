"""Batched conversions between transfer-function, zero-pole-gain and state-space forms.

Every function works on a batch of SISO systems, one per operating point,
with the batch on the leading axis.  Conventions:

* **Transfer function**: ``num``, ``den`` of shape ``(P, n + 1)``, descending
  powers.  Numerators may carry leading zeros (a lower degree than ``den``);
  they are left-padded to the denominator's length.
* **Zero-pole-gain**: ``zeros`` of shape ``(P, n)`` (complex), where the
  ``n - m`` zeros a point of numerator degree ``m`` does not have are stored
  as ``inf`` ("zeros at infinity"); ``poles`` of shape ``(P, n)``; ``gain`` of
  shape ``(P,)``, the ratio of the leading non-zero numerator coefficient to
  the leading denominator coefficient.  An all-zero numerator has gain 0 and
  all its zeros at infinity.  Roots at the origin are detected from exact
  trailing zero coefficients and reported as exact zeros, so that maps such
  as ``exp(p ts)`` send them exactly to 1.
* **State space**: the *controllable canonical form* (scipy's ``tf2ss``
  convention): ``A`` has ``-a_1 ... -a_n`` on its first row and ones on the
  sub-diagonal, ``B = e_1``, ``C = b_i - b_0 a_i``, ``D = b_0`` for the monic
  denominator ``s^n + a_1 s^(n-1) + ...``.  It is exact (no rounding beyond
  normalising by the leading coefficient) and needs no per-point
  factorisation, which is why it is used instead of a balanced form.  Its
  entries can span many decades for high-order plants; ``scaled=True``
  applies a diagonal frequency scaling that keeps them near the pole
  magnitudes (used by discretisation).
  Shapes: ``A`` ``(P, n, n)``, ``B`` and ``C`` ``(P, n)``, ``D`` ``(P,)``.

Conversions to python-control objects live on :class:`gainloom.lti.loop.Loop`
(``to_control``/``from_control``); nothing here duplicates them.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .polynomials import as_poly_batch, batched_roots, pad_left

__all__ = [
    "tf_to_ss",
    "ss_to_tf",
    "tf_to_zpk",
    "zpk_to_tf",
    "poly_from_roots",
    "roots_with_origin",
    "char_poly",
]


def _tf_batch(num: object, den: object) -> tuple[np.ndarray, np.ndarray]:
    num = as_poly_batch(num)
    den = as_poly_batch(den)
    if num.ndim != 2 or den.ndim != 2:
        raise InputError(f"num and den must be 1-D or 2-D; got shapes {num.shape} and {den.shape}")
    if num.shape[1] > den.shape[1]:
        raise InputError(
            f"improper transfer function: numerator has {num.shape[1]} coefficients, "
            f"denominator only {den.shape[1]}"
        )
    points = max(num.shape[0], den.shape[0])
    if num.shape[0] not in (1, points) or den.shape[0] not in (1, points):
        raise InputError(f"num has {num.shape[0]} points but den has {den.shape[0]}")
    if np.any(den[:, 0] == 0):
        bad = int(np.flatnonzero(den[:, 0] == 0)[0])
        raise InputError(f"leading denominator coefficient is zero at point {bad}")
    num = np.broadcast_to(pad_left(num, den.shape[1]), (points, den.shape[1]))
    den = np.broadcast_to(den, (points, den.shape[1]))
    return np.array(num, dtype=float), np.array(den, dtype=float)


def poly_from_roots(roots: np.ndarray, real: bool = True) -> np.ndarray:
    """Monic polynomials from batches of roots.

    Parameters
    ----------
    roots : array_like, shape (..., n)
        Roots (complex allowed).  An ``inf`` root contributes the factor 1
        instead of ``(x - r)``: the result then has a leading zero, i.e. a
        lower degree, which is how zeros at infinity are carried.
    real : bool
        Return the real part (the roots come in conjugate pairs).

    Returns
    -------
    ndarray, shape (..., n + 1)
        Descending coefficients; leading coefficient 1 unless some roots are
        infinite.
    """
    roots = np.asarray(roots, dtype=complex)
    batch, n = roots.shape[:-1], roots.shape[-1]
    poly = np.zeros(batch + (n + 1,), dtype=complex)
    poly[..., -1] = 1.0
    # One multiplication per root position (the degree), not per point.
    for index in range(n):
        root = roots[..., index]
        finite = np.isfinite(root)
        lead = np.where(finite, 1.0, 0.0)[..., np.newaxis]
        tail = np.where(finite, -root, 1.0)[..., np.newaxis]
        shifted = np.concatenate([poly[..., 1:], np.zeros(batch + (1,), dtype=complex)], axis=-1)
        poly = lead * shifted + tail * poly
    return poly.real if real else poly


def char_poly(matrices: np.ndarray) -> np.ndarray:
    """Characteristic polynomials ``det(x I - M)`` of a batch of real matrices.

    Computed from batched eigenvalues; shape ``(..., n, n)`` -> ``(..., n + 1)``.
    """
    matrices = np.asarray(matrices, dtype=float)
    n = matrices.shape[-1]
    if n == 0:
        return np.ones(matrices.shape[:-2] + (1,))
    return poly_from_roots(np.linalg.eigvals(matrices))


def roots_with_origin(coeffs: np.ndarray) -> np.ndarray:
    """Roots of a batch of polynomials that may have leading or trailing zeros.

    Parameters
    ----------
    coeffs : array_like, shape (P, n + 1)
        Descending coefficients.

    Returns
    -------
    ndarray of complex, shape (P, n)
        Leading zero coefficients give roots at ``inf`` (degree drop);
        trailing zero coefficients give exact zeros (roots at the origin);
        the rest are eigenvalues of the trimmed companion matrices.  An
        all-zero polynomial has every root at ``inf``.

    Notes
    -----
    Points are grouped by their (leading, trailing) zero counts and each
    group's roots are computed in one batched call, so the Python loop runs
    over the distinct structures (usually one or two), not over points.
    """
    coeffs = as_poly_batch(coeffs)
    points, width = coeffs.shape
    n = width - 1
    roots = np.full((points, n), np.inf, dtype=complex)
    nonzero = coeffs != 0
    lead = np.where(nonzero.any(axis=1), np.argmax(nonzero, axis=1), width)
    trail = np.where(nonzero.any(axis=1), np.argmax(nonzero[:, ::-1], axis=1), 0)
    for lz, tz in sorted(set(zip(lead.tolist(), trail.tolist()))):
        if lz >= width:
            continue  # zero polynomial: all roots at infinity
        rows = np.flatnonzero((lead == lz) & (trail == tz))
        trimmed = coeffs[rows, lz : width - tz]
        finite_roots = batched_roots(trimmed)
        k = finite_roots.shape[1]
        roots[rows, lz : lz + k] = finite_roots
        roots[rows, lz + k : lz + k + tz] = 0.0
    return roots


def tf_to_zpk(num: object, den: object) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Zeros, poles and gain of a batch of transfer functions.

    Parameters
    ----------
    num, den : array_like, shape (P, m + 1), (P, n + 1)
        Descending coefficients (``m <= n``); leading numerator zeros allowed.

    Returns
    -------
    zeros : ndarray of complex, shape (P, n)
        Finite zeros, then ``inf`` for each zero at infinity.
    poles : ndarray of complex, shape (P, n)
    gain : ndarray, shape (P,)
        Leading non-zero numerator coefficient over the leading denominator
        coefficient (0 for a zero numerator).
    """
    num, den = _tf_batch(num, den)
    zeros = roots_with_origin(num)
    # Put finite zeros first, infinite ones last, for readability.
    order = np.argsort(~np.isfinite(zeros), axis=1, kind="stable")
    zeros = np.take_along_axis(zeros, order, axis=1)
    poles = roots_with_origin(den)
    nonzero = num != 0
    first = np.argmax(nonzero, axis=1)
    lead_num = np.where(nonzero.any(axis=1), num[np.arange(num.shape[0]), first], 0.0)
    return zeros, poles, lead_num / den[:, 0]


def zpk_to_tf(zeros: object, poles: object, gain: object) -> tuple[np.ndarray, np.ndarray]:
    """Transfer functions from batched zeros, poles and gains.

    Parameters
    ----------
    zeros : array_like, shape (P, m)
        Zeros; ``inf`` entries are zeros at infinity (``m <= n``).
    poles : array_like, shape (P, n)
        Poles, all finite.
    gain : array_like, shape (P,) or scalar

    Returns
    -------
    num, den : ndarray, shape (P, n + 1)
        Monic ``den``; ``num`` left-padded to the same length.
    """
    zeros = np.atleast_2d(np.asarray(zeros, dtype=complex))
    poles = np.atleast_2d(np.asarray(poles, dtype=complex))
    if zeros.shape[1] > poles.shape[1]:
        raise InputError(f"improper: {zeros.shape[1]} zeros but only {poles.shape[1]} poles")
    if not np.all(np.isfinite(poles)):
        raise InputError("poles must be finite")
    den = poly_from_roots(poles)
    num = poly_from_roots(zeros) * np.asarray(gain, dtype=float).reshape(-1, 1)
    points = max(num.shape[0], den.shape[0])
    num = np.broadcast_to(pad_left(num, den.shape[1]), (points, den.shape[1])).copy()
    return num, np.broadcast_to(den, (points, den.shape[1])).copy()


def tf_to_ss(
    num: object, den: object, scaled: bool = False
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Controllable canonical realisations of a batch of transfer functions.

    Parameters
    ----------
    num, den : array_like, shape (P, m + 1), (P, n + 1)
        Descending coefficients, ``m <= n``; leading numerator zeros allowed.
    scaled : bool
        Apply the diagonal similarity ``T = diag(w^(n-1), ..., w, 1)`` with
        ``w = max_k |a_k|^(1/k)`` (a bound on the pole magnitudes, 1 if every
        ``a_k`` is zero), so ``A = w * companion(roots / w)``.  The transfer
        function is unchanged; the entries of ``A`` stay near the pole
        magnitudes instead of spanning ``w^n``, which helps the matrix
        exponential's accuracy and speed.  ``False`` gives scipy's ``tf2ss``
        form exactly.

    Returns
    -------
    A : ndarray, shape (P, n, n)
    B, C : ndarray, shape (P, n)
        Input and output vectors.
    D : ndarray, shape (P,)
        Direct feedthrough.
    """
    num_batch, den_batch = _tf_batch(num, den)
    lead = den_batch[:, :1]
    numer = num_batch / lead
    denom = den_batch / lead
    points, width = denom.shape
    n = width - 1
    d = numer[:, 0]
    A = np.zeros((points, n, n))
    if n:
        A[:, 0, :] = -denom[:, 1:]
        if n > 1:
            A[:, np.arange(1, n), np.arange(n - 1)] = 1.0
    B = np.zeros((points, n))
    if n:
        B[:, 0] = 1.0
    C = numer[:, 1:] - d[:, np.newaxis] * denom[:, 1:]
    if scaled and n:
        powers = np.arange(1, n + 1)
        with np.errstate(divide="ignore"):
            bound = np.max(np.abs(denom[:, 1:]) ** (1.0 / powers), axis=1)
        w = np.where(bound > 0, bound, 1.0)
        # T^-1 A T has entries A_ij w^(i - j); B -> T^-1 B, C -> C T.
        exponent = np.arange(n)[:, None] - np.arange(n)[None, :]
        A = A * w[:, None, None] ** exponent
        B = B * w[:, None] ** -(n - 1.0 - np.arange(n))
        C = C * w[:, None] ** (n - 1.0 - np.arange(n))
    return A, B, C, d


def ss_to_tf(
    A: np.ndarray, B: np.ndarray, C: np.ndarray, D: np.ndarray, den: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Transfer functions of a batch of SISO state-space systems.

    The numerator comes from the Markov parameters ``h_0 = D``,
    ``h_k = C A^(k-1) B``: since ``N(x) / den(x) = sum_k h_k x^-k``, the
    numerator coefficients are ``N_i = sum_{j <= i} den_j h_(i-j)``.
    Unlike the ``char(A - B C) - char(A)`` identity this keeps exact zeros
    exact (a numerator of lower degree stays so, rather than gaining a
    rounding residue that reads as a zero near infinity).

    Parameters
    ----------
    A : array_like, shape (P, n, n)
    B, C : array_like, shape (P, n)
    D : array_like, shape (P,)
    den : array_like, shape (P, n + 1), optional
        ``char(A)`` when the caller knows it more exactly (e.g. with roots at
        the origin placed exactly); computed from eigenvalues otherwise.

    Returns
    -------
    num, den : ndarray, shape (P, n + 1)
        Monic denominator, numerator padded to the same length.
    """
    A = np.asarray(A, dtype=float)
    B = np.asarray(B, dtype=float)
    C = np.asarray(C, dtype=float)
    D = np.asarray(D, dtype=float)
    if den is None:
        den = char_poly(A)
    den = np.asarray(den, dtype=float)
    n = A.shape[-1]
    parameters = [D]
    vector = B
    for _ in range(n):  # over the order, batched over points
        parameters.append(np.einsum("...i,...i->...", C, vector))
        vector = np.einsum("...ij,...j->...i", A, vector)
    markov = np.stack(parameters, axis=-1)  # (..., n + 1)
    num = np.zeros(np.broadcast_shapes(markov.shape, den.shape))
    for i in range(n + 1):
        num[..., i] = np.sum(den[..., : i + 1] * markov[..., i::-1], axis=-1)
    return num, den

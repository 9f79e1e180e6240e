"""Algebraic stability tests: the Routh array (s-plane) and the Jury test (z-plane).

Both work on one real polynomial in descending powers.  They are the
textbook tabular tests, kept readable so a reviewer can compare the table
with a hand calculation; batched verdicts over many gains use
:func:`gainloom.lti.polynomials.batched_roots` instead (see
:mod:`gainloom.lti.intervals`).

Special cases of the Routh array
--------------------------------
* A zero first-column element in a row that is not all zeros is replaced by
  a small positive number ``eps`` (the textbook epsilon method, carried out
  numerically, not as a formal limit).  The default ``eps`` is ``1e-9``
  times the largest magnitude in the array so far; the sign pattern is then
  the limit pattern for all but contrived polynomials.  The result records
  that the replacement happened (``epsilon_rows``).
* A row of zeros means the row above is the auxiliary polynomial ``A(s)``
  (even or odd, roots symmetric about the origin).  The zero row is replaced
  by the coefficients of ``dA/ds``; the auxiliary polynomial is returned.
  Sign changes below the auxiliary row count the roots of ``A`` in the right
  half-plane; by the symmetry of ``A``, ``deg A - 2 * that`` roots lie on the
  imaginary axis.

"Zero" means at most ``1e-12`` times the largest magnitude seen so far in the
array (the entries are computed in floating point).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError

__all__ = ["RouthResult", "JuryResult", "routh_array", "jury_test"]

#: Relative size below which a Routh entry counts as zero.
ZERO_TOLERANCE = 1e-12


def _as_poly(coeffs: object, what: str) -> np.ndarray:
    poly = np.asarray(coeffs, dtype=float)
    if poly.ndim != 1:
        raise InputError(f"{what} takes one polynomial as a 1-D coefficient array; got shape {poly.shape}")
    if not np.all(np.isfinite(poly)):
        raise InputError(f"{what}: coefficients must be finite; got {poly.tolist()}")
    poly = np.trim_zeros(poly, "f")
    if poly.size < 2:
        raise InputError(f"{what} needs a polynomial of degree >= 1; got coefficients {np.asarray(coeffs).tolist()}")
    return poly


@dataclass(frozen=True)
class RouthResult:
    """The Routh array of one polynomial and what it says.

    Attributes
    ----------
    array : ndarray, shape (n + 1, ceil((n + 1) / 2))
        Row ``i`` belongs to power ``s^(n - i)``; entries as used (after any
        epsilon replacement or derivative row).
    rhp : int
        Number of roots with positive real part (sign changes in the first
        column).
    imaginary : int or None
        Number of roots on the imaginary axis when a row of zeros told us
        (``0`` when no row of zeros occurred and no epsilon was needed;
        ``None`` when an epsilon replacement leaves it undetermined).
    lhp : int or None
        Number of roots with negative real part (``n - rhp - imaginary``)
        when ``imaginary`` is known.
    auxiliary : ndarray or None
        The (first) auxiliary polynomial, descending powers of ``s``, when a
        row of zeros occurred.
    auxiliaries : tuple of ndarray
        All auxiliary polynomials in the order met (repeated imaginary roots
        give more than one).
    epsilon_rows : tuple of int
        Rows whose zero first element was replaced by ``eps``.
    stable : bool
        True when every root has negative real part.
    """

    array: np.ndarray
    rhp: int
    imaginary: int | None
    lhp: int | None
    auxiliary: np.ndarray | None
    auxiliaries: tuple[np.ndarray, ...] = field(default_factory=tuple)
    epsilon_rows: tuple[int, ...] = field(default_factory=tuple)

    @property
    def stable(self) -> bool:
        return self.rhp == 0 and self.imaginary == 0


def _sign_changes(column: np.ndarray) -> int:
    signs = np.sign(column)
    signs = signs[signs != 0]
    return int(np.count_nonzero(signs[1:] != signs[:-1]))


def routh_array(coeffs: object, eps: float | None = None) -> RouthResult:
    """Build the Routh array of a real polynomial in ``s``.

    Parameters
    ----------
    coeffs : array_like, shape (n + 1,)
        Descending coefficients; leading zeros are dropped.  A negative
        leading coefficient is fine (the whole array changes sign).
    eps : float, optional
        Value that replaces a zero first-column element (epsilon method).
        Default: ``1e-9`` times the largest magnitude in the array so far.

    Returns
    -------
    RouthResult

    Notes
    -----
    See the module docstring for the special cases.  For a verdict over many
    polynomials at once prefer batched roots; this function is the readable
    table.

    References
    ----------
    E. J. Routh, *A Treatise on the Stability of a Given State of Motion*,
    Macmillan, 1877.
    """
    poly = _as_poly(coeffs, "routh_array")
    if eps is not None and not (np.isfinite(eps) and eps > 0):
        raise InputError(f"eps must be a finite positive number; got {eps}")
    n = poly.size - 1
    width = (n + 2) // 2
    table = np.zeros((n + 1, width))
    table[0, : len(poly[0::2])] = poly[0::2]
    table[1, : len(poly[1::2])] = poly[1::2]
    scale = float(np.max(np.abs(poly)))
    auxiliaries: list[np.ndarray] = []
    aux_rows: list[int] = []
    epsilon_rows: list[int] = []

    def fix_row(i: int, size: np.ndarray) -> None:
        # ``size`` bounds the terms that were subtracted to make each entry:
        # an entry below ZERO_TOLERANCE of it is rounding noise, i.e. zero.
        row = table[i]
        row[np.abs(row) <= ZERO_TOLERANCE * size] = 0.0
        if not np.any(row):
            # Row of zeros: the row above is the auxiliary polynomial of
            # power n - i + 1 (only every other power present).
            power = n - i + 1
            above = table[i - 1]
            aux = np.zeros(power + 1)
            count = power // 2 + 1
            aux[0::2] = above[:count]
            auxiliaries.append(aux)
            aux_rows.append(i - 1)
            derivative = np.polyder(aux)  # odd/even polynomial of degree power - 1
            values = derivative[0::2]
            row[: values.size] = values
        if row[0] == 0.0:
            epsilon_rows.append(i)
            largest = max(scale, float(np.max(np.abs(table[: i + 1]))))
            row[0] = eps if eps is not None else 1e-9 * largest

    fix_row(1, np.zeros(width))
    for i in range(2, n + 1):
        upper, lower = table[i - 2], table[i - 1]
        pivot = lower[0]
        first = pivot * upper[1:]
        second = upper[0] * lower[1:]
        table[i, : width - 1] = (first - second) / pivot
        fix_row(i, np.concatenate([(np.abs(first) + np.abs(second)) / abs(pivot), [0.0]]))

    rhp = _sign_changes(table[:, 0])
    if auxiliaries:
        # Roots of the first auxiliary polynomial: its right-half-plane ones
        # show as sign changes from its row down; the rest of its roots
        # beyond the mirrored pairs sit on the imaginary axis.
        first = aux_rows[0]
        degree = auxiliaries[0].size - 1
        aux_rhp = _sign_changes(table[first:, 0])
        imaginary = degree - 2 * aux_rhp
        # Repeated imaginary-axis roots (more rows of zeros) are inside the
        # first auxiliary polynomial already.
    elif epsilon_rows:
        imaginary = None
    else:
        imaginary = 0
    lhp = None if imaginary is None else n - rhp - imaginary
    return RouthResult(
        array=table,
        rhp=rhp,
        imaginary=imaginary,
        lhp=lhp,
        auxiliary=auxiliaries[0] if auxiliaries else None,
        auxiliaries=tuple(auxiliaries),
        epsilon_rows=tuple(epsilon_rows),
    )


@dataclass(frozen=True)
class JuryResult:
    """The Jury table of one polynomial in ``z`` and its verdict.

    Attributes
    ----------
    table : list of ndarray
        Row pairs of the Jury table: ``table[0]`` is ``a_0 .. a_n``
        (ascending powers), ``table[1]`` its reverse, then each reduced row
        and its reverse, down to the row of three elements.
    stable : bool
        True when all roots lie strictly inside the unit circle.
    conditions : tuple of (str, bool)
        Every condition in the order tested, with whether it holds.
    failed : str or None
        Name of the first failing condition, e.g. ``"P(1) > 0"``.
    failed_index : int or None
        Its 0-based position in ``conditions``.
    """

    table: list[np.ndarray]
    stable: bool
    conditions: tuple[tuple[str, bool], ...]
    failed: str | None
    failed_index: int | None


def jury_test(coeffs: object) -> JuryResult:
    """Jury stability test of a real polynomial ``P(z)``.

    Parameters
    ----------
    coeffs : array_like, shape (n + 1,)
        Descending coefficients ``a_n .. a_0``; leading zeros are dropped and
        the polynomial is scaled so ``a_n > 0``.

    Returns
    -------
    JuryResult
        Conditions, in order: ``|a0| < an``, ``P(1) > 0``,
        ``(-1)^n P(-1) > 0``, then one per reduced row, ``|b0| > |b(n-1)|``,
        ``|c0| > |c(n-2)|``, ... (the row letters run on from ``b``).
        Equality counts as failing: a root on the unit circle is not
        asymptotically stable.

    References
    ----------
    E. I. Jury, *Theory and Application of the z-Transform Method*, Wiley,
    1964.
    """
    poly = _as_poly(coeffs, "jury_test")
    if poly[0] < 0:
        poly = -poly
    n = poly.size - 1
    ascending = poly[::-1].copy()  # a_0 .. a_n
    value_at_one = float(np.sum(poly))
    value_at_minus_one = float(np.polyval(poly, -1.0))
    conditions: list[tuple[str, bool]] = [
        ("|a0| < an", bool(abs(ascending[0]) < ascending[-1])),
        ("P(1) > 0", bool(value_at_one > 0)),
        ("(-1)^n P(-1) > 0", bool((-1) ** n * value_at_minus_one > 0)),
    ]
    table = [ascending.copy(), ascending[::-1].copy()]
    row = ascending
    letters = "bcdefghijklmnopqrstuvwxy"
    k = 0
    while row.size > 3:
        m = row.size - 1
        # b_k = a_0 a_k - a_n a_(n-k), k = 0 .. n-1 (determinant form).
        reduced = row[0] * row[:m] - row[m] * row[m:0:-1]
        table.extend([reduced.copy(), reduced[::-1].copy()])
        letter = letters[k % len(letters)]
        conditions.append(
            (f"|{letter}0| > |{letter}{reduced.size - 1}|", bool(abs(reduced[0]) > abs(reduced[-1])))
        )
        row = reduced
        k += 1
    failed_index = next((i for i, (_, ok) in enumerate(conditions) if not ok), None)
    return JuryResult(
        table=table,
        stable=failed_index is None,
        conditions=tuple(conditions),
        failed=None if failed_index is None else conditions[failed_index][0],
        failed_index=failed_index,
    )

"""Number formats of the emitted tables and the integer arithmetic they use.

Definitions (the Qm.n notation of DSP practice, as in ARM's CMSIS-DSP
documentation of ``q15_t`` / ``q31_t``, from memory):

- A **Qm.n** number is a two's-complement integer ``q`` of ``m + n + 1`` bits
  (sign bit included) that represents ``q * 2**-n``.  Q15 is Q0.15 in an
  ``int16_t`` (range ``[-1, 1 - 2**-15]``), Q31 is Q0.31 in an ``int32_t``.
- gainloom stores each coefficient **array** with its own number of fraction
  bits ``frac`` (``frac >= 0``): element ``q`` represents ``q * 2**-frac``.
  For Q15 ``frac = 15 - e`` where ``e`` is the array's exponent, so the
  array is Q(e).(15 - e) in 16 bits; Q31 likewise in 32 bits.
  :func:`choose_frac` picks the largest ``frac`` for which the largest
  magnitude rounds to at most ``2**(bits-1) - 1``.  No headroom bit is kept
  because linear and bilinear interpolation are convex combinations of table
  entries: an interpolated value never exceeds the array's largest magnitude.
- **Rounding** everywhere (table quantisation in Python, every right shift in
  the generated C) is to nearest with **ties away from zero**.  The C helper
  takes the magnitude as an unsigned 64-bit value, adds half an LSB and
  shifts the unsigned value, then restores the sign; it never right-shifts a
  negative number (implementation-defined in C99 6.5.7p5).
- **Saturation**: every narrowing conversion clamps to the destination range
  (``[-2**(b-1), 2**(b-1) - 1]``) instead of wrapping.

The functions here are the Python mirror of the C helpers; they work on
numpy ``int64`` arrays (or Python ints) and give bit-identical results as long
as intermediate magnitudes stay below ``2**63``, which the callers guarantee
(documented at each use).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import CodegenError
from ..names import NUMBER_FORMATS, unknown_name_message

__all__ = [
    "NumberFormat",
    "number_format",
    "STATE_FRAC",
    "saturate",
    "rshift_round",
    "quantize",
    "dequantize",
    "choose_frac",
    "mul_frac",
    "lerp_fixed",
    "segment_reciprocals",
    "index_reciprocal",
    "weight_fixed",
]

#: Fraction bits of the controller's internal signals (states and sums) in
#: both fixed-point variants: ``int32_t`` Q3.28 of full scale, i.e. internal
#: signals may reach 8 times full scale before they saturate.
STATE_FRAC = 28


@dataclass(frozen=True)
class NumberFormat:
    """One number format of the emitted C.

    Parameters
    ----------
    name : str
        ``"float32"``, ``"q15"`` or ``"q31"``.
    bits : int
        Storage width of coefficients and signals (32 for float32).
    c_type : str
        C type of coefficients and of the error/output signals.
    interp_frac : int
        Fraction bits of the interpolation weight ``t`` (fixed point only):
        ``t`` runs over ``[0, 2**interp_frac]``.  15 for Q15; 30 for Q31 so
        that ``(b - a) * t`` stays below ``2**63``.
    """

    name: str
    bits: int
    c_type: str
    interp_frac: int

    @property
    def is_fixed(self) -> bool:
        """True for Q15 and Q31."""
        return self.name != "float32"

    @property
    def signal_frac(self) -> int:
        """Fraction bits of the error input and output (15 or 31)."""
        return self.bits - 1

    @property
    def q_max(self) -> int:
        """Largest storable integer, ``2**(bits-1) - 1``."""
        return (1 << (self.bits - 1)) - 1

    @property
    def q_min(self) -> int:
        """Smallest storable integer, ``-2**(bits-1)``."""
        return -(1 << (self.bits - 1))


_FORMATS = {
    "float32": NumberFormat("float32", 32, "float", 0),
    "q15": NumberFormat("q15", 16, "int16_t", 15),
    "q31": NumberFormat("q31", 32, "int32_t", 30),
}


def number_format(name: str) -> NumberFormat:
    """Return the :class:`NumberFormat` called ``name``.

    Raises
    ------
    CodegenError
        For a name not in :data:`gainloom.names.NUMBER_FORMATS`.
    """
    try:
        return _FORMATS[name]
    except (KeyError, TypeError):
        raise CodegenError(unknown_name_message("number format", str(name), NUMBER_FORMATS)) from None


def saturate(value, bits: int):
    """Clamp integers to the two's-complement range of ``bits`` bits.

    Parameters
    ----------
    value : int or ndarray of int64
        Integers to clamp.
    bits : int
        Destination width (16, 32 or 64).
    """
    low, high = -(1 << (bits - 1)), (1 << (bits - 1)) - 1
    if isinstance(value, np.ndarray):
        return np.clip(value, low, high).astype(np.int64)
    return min(max(int(value), low), high)


def rshift_round(value, shift: int):
    """Return ``value / 2**shift`` rounded to nearest, ties away from zero.

    Mirrors the C helper ``<prefix>_rshift_round``.  ``shift`` is 1 to 62 and
    ``|value| < 2**63 - 2**(shift-1)``.

    Parameters
    ----------
    value : int or ndarray of int64
        Signed integers.
    shift : int
        Number of bits to drop.
    """
    if not 1 <= shift <= 62:
        raise CodegenError(f"shift must be 1..62; got {shift}")
    half = 1 << (shift - 1)
    if isinstance(value, np.ndarray):
        value = value.astype(np.int64)
        magnitude = (np.abs(value) + half) >> shift
        return np.where(value < 0, -magnitude, magnitude)
    value = int(value)
    magnitude = (abs(value) + half) >> shift
    return -magnitude if value < 0 else magnitude


def quantize(values, frac: int, bits: int) -> np.ndarray:
    """Quantise real values to integers representing ``q * 2**-frac``.

    Round to nearest, ties away from zero, then saturate to ``bits`` bits.

    Parameters
    ----------
    values : array_like of float
        Finite real values (in the units the format is normalised to).
    frac : int
        Fraction bits (may be negative for very large axis values).
    bits : int
        Storage width.

    Returns
    -------
    ndarray of int64
    """
    scaled = np.ldexp(np.asarray(values, dtype=float), frac)
    # floor(|x| + 0.5) is exact below 2**52; from 2**52 on every float64 is
    # an integer already, so rounding is the identity there.
    rounded = np.where(np.abs(scaled) < 2.0**52, np.sign(scaled) * np.floor(np.abs(scaled) + 0.5), scaled)
    low, high = -(2.0 ** (bits - 1)), 2.0 ** (bits - 1) - 1
    return np.clip(rounded, low, high).astype(np.int64)


def dequantize(q, frac: int) -> np.ndarray:
    """Return the real values ``q * 2**-frac`` (exact in float64 for |q| < 2**53)."""
    return np.ldexp(np.asarray(q, dtype=float), -frac)


def choose_frac(max_abs: float, bits: int, *, max_frac: int = 62) -> int:
    """Largest fraction-bit count for which ``max_abs`` fits ``bits`` bits.

    Parameters
    ----------
    max_abs : float
        Largest magnitude in the array (>= 0).
    bits : int
        Storage width.
    max_frac : int
        Upper bound (tiny arrays: more fraction bits than this would overflow
        the 64-bit shifts of the generated C).

    Returns
    -------
    int
        ``frac`` with ``round(max_abs * 2**frac) <= 2**(bits-1) - 1``; for an
        all-zero array, ``bits - 1``.  May be negative; callers check their
        own lower bound.
    """
    if not math.isfinite(max_abs) or max_abs < 0:
        raise CodegenError(f"largest magnitude must be finite and >= 0; got {max_abs}")
    top = bits - 1
    if max_abs == 0.0:
        return top
    _, exponent = math.frexp(max_abs)  # max_abs < 2**exponent
    frac = min(top - exponent, max_frac)
    if int(quantize(max_abs, frac, bits + 1)) > (1 << top) - 1:
        frac -= 1
    return frac


def mul_frac(coefficient, signal, frac: int, bits: int = 32):
    """``saturate(round(coefficient * signal / 2**frac))`` as the C ``<prefix>_mul``.

    Parameters
    ----------
    coefficient : int or ndarray
        Coefficient integers (``frac`` fraction bits).
    signal : int or ndarray
        Signal integers (any fraction bits; the result keeps them).
    frac : int
        0 to 62.
    bits : int
        Width of the saturated result.
    """
    product: int | np.ndarray
    if isinstance(coefficient, np.ndarray) or isinstance(signal, np.ndarray):
        product = np.asarray(coefficient, dtype=np.int64) * np.asarray(signal, dtype=np.int64)
    else:
        product = int(coefficient) * int(signal)
    if frac > 0:
        product = rshift_round(product, frac)
    return saturate(product, bits)


def lerp_fixed(a, b, t, interp_frac: int):
    """``a + round((b - a) * t / 2**interp_frac)``: fixed-point linear interpolation.

    ``t`` is in ``[0, 2**interp_frac]``; the result lies between ``a`` and
    ``b`` (so it needs no saturation) and equals ``a`` at ``t = 0`` and ``b``
    at ``t = 2**interp_frac``.
    """
    a = np.asarray(a, dtype=np.int64)
    b = np.asarray(b, dtype=np.int64)
    return a + rshift_round((b - a) * np.asarray(t, dtype=np.int64), interp_frac)


def segment_reciprocals(breakpoints: np.ndarray, interp_frac: int) -> tuple[np.ndarray, np.ndarray]:
    """Per-segment normalising shifts and reciprocals: the weight without a division.

    For a segment of width ``w`` (``1 <= w < 2**31``) the shift is
    ``L = 32 - bitlength(w)``, so ``W = w << L`` lies in ``[2**31, 2**32)``,
    and the reciprocal is ``r = floor(2**(F + 32) / W)`` with ``F =
    interp_frac``; ``r <= 2**(F + 1)`` fits 32 bits.  :func:`weight_fixed`
    then gives ``t = floor((d << L) * r / 2**32)`` for an offset ``0 <= d <
    w``: never above the exact ``floor(d * 2**F / w)`` and at most one below
    it (the floor of ``r`` loses less than one unit times ``d * 2**L / 2**32
    < 1``), so ``0 <= t < 2**F`` inside a segment.

    Parameters
    ----------
    breakpoints : ndarray of int64
        Strictly increasing stored breakpoints (``|a| <= 2**30``).
    interp_frac : int
        Fraction bits ``F`` of the weight (at most 30).

    Returns
    -------
    shift, scale : ndarray of int64, shape (n - 1,)
    """
    widths = [int(w) for w in np.diff(np.asarray(breakpoints, dtype=np.int64))]
    if any(w < 1 or w >= 2**31 for w in widths):
        raise CodegenError("segment widths must be 1 .. 2**31 - 1 in the axis format")
    shift = [32 - w.bit_length() for w in widths]
    scale = [(1 << (interp_frac + 32)) // (w << s) for w, s in zip(widths, shift)]
    return np.array(shift, dtype=np.int64), np.array(scale, dtype=np.int64)


def index_reciprocal(step: int) -> tuple[int, int]:
    """Reciprocal of a uniform axis step for the segment index without a division.

    Returns ``(scale, shift)`` with ``shift = 30 + bitlength(step)`` and
    ``scale = floor(2**shift / step)`` (in ``(2**30, 2**31]``); then
    ``floor(D * scale / 2**shift)`` for ``0 <= D < 2**31`` is
    ``floor(D / step)`` or one less (the floor of ``scale`` costs less than
    ``D / 2**shift < 1``).  The C steps up once where needed.
    """
    if not 1 <= step < 2**31:
        raise CodegenError(f"uniform axis step must be 1 .. 2**31 - 1; got {step}")
    shift = 30 + int(step).bit_length()
    return (1 << shift) // int(step), shift


def weight_fixed(offset, shift, scale):
    """``floor((offset << shift) * scale / 2**32)``: the interpolation weight
    as the C computes it (see :func:`segment_reciprocals`).

    ``offset << shift`` is below ``2**32`` and ``scale`` at most ``2**31``,
    so the product stays below ``2**63`` (exact in ``int64``).
    """
    offset = np.asarray(offset, dtype=np.int64)
    return ((offset << np.asarray(shift, dtype=np.int64)) * np.asarray(scale, dtype=np.int64)) >> 32

"""Q15/Q31 number formats and the integer arithmetic mirrored in the C.

References: the Qm.n definition of DSP practice (a (m+n+1)-bit two's
complement integer q standing for q * 2**-n; ARM CMSIS-DSP documents q15_t
as 1.15 and q31_t as 1.31 fractions, from memory), Python's decimal module
(ROUND_HALF_UP rounds ties away from zero) and arbitrary-precision Python
integers as the exact reference for numpy int64 arithmetic.
"""

from decimal import ROUND_HALF_UP, Decimal, localcontext
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainloom import CodegenError
from gainloom.codegen.qformat import (
    choose_frac,
    dequantize,
    lerp_fixed,
    mul_frac,
    number_format,
    quantize,
    rshift_round,
    saturate,
)


def _round_half_away(value: Fraction) -> int:
    # Reference: decimal ROUND_HALF_UP = round half away from zero (Python docs).
    with localcontext() as context:
        context.prec = 200
        exact = Decimal(value.numerator) / Decimal(value.denominator)
        return int(exact.quantize(Decimal(1), rounding=ROUND_HALF_UP))


def test_q15_and_q31_definitions():
    # Qm.n definition (from memory, see module docstring): Q15 0.5 = 2**14,
    # -1.0 = -2**15, the largest value 1 - 2**-15 = 32767; 1.0 does not fit
    # and saturates to 32767 (saturating conversion).
    assert quantize(0.5, 15, 16) == 16384
    assert quantize(-1.0, 15, 16) == -32768
    assert quantize(1.0 - 2.0**-15, 15, 16) == 32767
    assert quantize(1.0, 15, 16) == 32767
    assert quantize(-2.0, 15, 16) == -32768
    assert quantize(0.25, 31, 32) == 2**29
    assert quantize(-1.0, 31, 32) == -(2**31)
    assert quantize(1.0, 31, 32) == 2**31 - 1
    np.testing.assert_array_equal(dequantize(np.array([16384, -32768]), 15), [0.5, -1.0])
    fmt = number_format("q15")
    assert (fmt.q_min, fmt.q_max, fmt.signal_frac, fmt.c_type) == (-32768, 32767, 15, "int16_t")
    assert number_format("q31").c_type == "int32_t"


def test_every_registered_number_format_is_defined():
    # The registry in gainloom.names is what --help, docs and validation
    # list; each name must resolve to a format whose name is that name.
    from gainloom.names import NUMBER_FORMATS

    assert [number_format(name).name for name in NUMBER_FORMATS] == list(NUMBER_FORMATS)


@pytest.mark.parametrize(
    ("lsb", "expected"), [(0.5, 1), (-0.5, -1), (1.5, 2), (2.5, 3), (-2.5, -3), (0.49, 0), (-0.51, -1)]
)
def test_quantize_rounds_ties_away_from_zero(lsb, expected):
    # Reference: ties away from zero (2.5 -> 3, not banker's 2), decimal ROUND_HALF_UP.
    assert quantize(lsb * 2.0**-15, 15, 16) == expected
    assert expected == _round_half_away(Fraction(lsb))


@settings(max_examples=300, deadline=None)
@given(st.floats(-4.0, 4.0, allow_nan=False), st.integers(0, 40))
def test_quantize_matches_decimal_rounding_then_saturation(value, frac):
    expected = _round_half_away(Fraction(value) * 2**frac)
    expected = min(max(expected, -(2**15)), 2**15 - 1)
    assert int(quantize(value, frac, 16)) == expected


@settings(max_examples=400, deadline=None)
@given(st.integers(-(2**62), 2**62), st.integers(1, 62))
def test_rshift_round_matches_exact_rounding(value, shift):
    expected = _round_half_away(Fraction(value, 2**shift))
    assert rshift_round(value, shift) == expected
    # numpy int64 path is bit-identical to the Python-int path
    assert int(rshift_round(np.array([value], dtype=np.int64), shift)[0]) == expected


def test_rshift_round_refuses_bad_shifts():
    with pytest.raises(CodegenError, match="shift must be 1..62"):
        rshift_round(5, 0)


@settings(max_examples=300, deadline=None)
@given(st.integers(-(2**31), 2**31 - 1), st.integers(-(2**31), 2**31 - 1), st.integers(0, 62))
def test_mul_frac_is_int64_product_rounded_then_saturated(coefficient, signal, frac):
    # Reference: exact product in Python integers, rounded half away, saturated
    # to int32; and numpy int64 intermediate (|product| < 2**62 fits).
    exact = coefficient * signal
    rounded = _round_half_away(Fraction(exact, 2**frac)) if frac else exact
    expected = min(max(rounded, -(2**31)), 2**31 - 1)
    assert mul_frac(coefficient, signal, frac) == expected
    product64 = np.int64(coefficient) * np.int64(signal)
    assert int(product64) == exact
    array_result = mul_frac(np.array([coefficient]), np.array([signal]), frac)
    assert int(array_result[0]) == expected


def test_saturate_clamps_instead_of_wrapping():
    # int16 saturation: 40000 -> 32767, -40000 -> -32768 (not the wrapped -25536)
    assert saturate(40000, 16) == 32767
    assert saturate(-40000, 16) == -32768
    np.testing.assert_array_equal(saturate(np.array([2**40, -(2**40), 5]), 32), [2**31 - 1, -(2**31), 5])


@settings(max_examples=300, deadline=None)
@given(st.floats(1e-12, 1e9, allow_nan=False), st.sampled_from([16, 32]))
def test_choose_frac_is_the_largest_that_fits(value, bits):
    # Definition: the largest frac with round(value * 2**frac) <= 2**(bits-1) - 1.
    frac = choose_frac(value, bits)
    top = 2 ** (bits - 1) - 1
    if frac < 62:
        assert _round_half_away(Fraction(value) * Fraction(2) ** frac) <= top
        assert _round_half_away(Fraction(value) * Fraction(2) ** (frac + 1)) > top
    assert choose_frac(0.0, bits) == bits - 1


@settings(max_examples=300, deadline=None)
@given(
    st.integers(-(2**31) + 1, 2**31 - 1),
    st.integers(-(2**31) + 1, 2**31 - 1),
    st.integers(0, 2**30),
)
def test_lerp_fixed_matches_exact_rational_interpolation(a, b, t):
    # Reference: a + round_half_away((b - a) t / 2**30) computed exactly.
    expected = a + _round_half_away(Fraction((b - a) * t, 2**30))
    result = int(lerp_fixed(a, b, t, 30))
    assert result == expected
    assert min(a, b) <= result <= max(a, b)
    assert int(lerp_fixed(a, b, 0, 30)) == a and int(lerp_fixed(a, b, 2**30, 30)) == b


@pytest.mark.parametrize("interp_frac", [15, 30])
def test_division_free_weight_is_the_exact_floor_or_one_below(interp_frac):
    # Reference: exact integer floor division in Python (unbounded
    # integers), the quotient the removed 64-bit division computed.
    from gainloom.codegen.qformat import segment_reciprocals, weight_fixed

    rng = np.random.default_rng(7)
    widths = np.concatenate([[1, 2, 3, 2**15, 2**16 + 1, 2**30, 2**31 - 1], rng.integers(1, 2**31, 200)])
    for w in widths:
        w = int(w)
        shift, scale = segment_reciprocals(np.array([-(2**30), -(2**30) + w]), interp_frac)
        assert 0 <= int(scale[0]) <= 2 ** (interp_frac + 1) and 0 <= int(shift[0]) <= 31
        offsets = np.unique(np.clip(np.concatenate([[0, 1, w // 2, w - 2, w - 1], rng.integers(0, w, 50)]), 0, w - 1))
        t = weight_fixed(offsets, shift[0], scale[0])
        exact = np.array([(int(d) << interp_frac) // w for d in offsets])
        assert np.all((t == exact) | (t == exact - 1)), w
        assert np.all((t >= 0) & (t < 2**interp_frac)) and int(t[0]) == 0  # offsets[0] is 0


def test_the_q15_split_product_equals_the_64_bit_product():
    # Reference: Python integers; the C's Q15 weight forms two 32-bit products
    # (offset high and low halves) instead of one 64-bit product.
    from gainloom.codegen.qformat import segment_reciprocals

    rng = np.random.default_rng(3)
    for w in [1, 2, 77, 2**16, 2**31 - 1, *rng.integers(1, 2**31, 300)]:
        shift, scale = segment_reciprocals(np.array([0, int(w)]), 15)
        r = int(scale[0])
        for d in {0, int(w) - 1, int(rng.integers(0, w))}:
            offset = d << int(shift[0])
            assert offset < 2**32 and r <= 2**16
            high, low = (offset >> 16) * r, ((offset & 0xFFFF) * r) >> 16
            assert high < 2**32 and high + low < 2**32
            assert (high + low) >> 16 == (offset * r) >> 32


def test_uniform_index_estimate_is_the_quotient_or_one_below():
    # Reference: exact integer floor division (Python integers).
    from gainloom.codegen.qformat import index_reciprocal

    rng = np.random.default_rng(11)
    for step in [1, 2, 3, 1000, 2**20 + 7, 2**30, 2**31 - 1, *rng.integers(1, 2**31, 100)]:
        scale, shift = index_reciprocal(int(step))
        assert scale <= 2**31
        for d in [0, int(step) - 1, int(step), 2**31 - 1, *rng.integers(0, 2**31, 30)]:
            estimate = (int(d) * scale) >> shift
            assert estimate in (int(d) // int(step), int(d) // int(step) - 1), (step, d)

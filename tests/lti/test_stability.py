"""Routh array and Jury test against textbook examples and numpy.roots."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainloom import InputError
from gainloom.lti.stability import jury_test, routh_array


def _rhp_by_numpy(poly):
    # Reference: numpy.roots (companion-matrix eigenvalues).
    return int(np.sum(np.roots(poly).real > 0))


def test_routh_zero_first_column_textbook_example():
    # s^5 + 2s^4 + 2s^3 + 4s^2 + 11s + 10: zero first-column element in the
    # s^3 row, epsilon method gives two sign changes, so 2 RHP roots
    # (textbook example, from memory); checked against numpy.roots too.
    poly = [1, 2, 2, 4, 11, 10]
    result = routh_array(poly)
    assert result.rhp == 2
    assert result.rhp == _rhp_by_numpy(poly)
    assert result.epsilon_rows == (2,)
    assert result.auxiliary is None
    assert not result.stable


def test_routh_row_of_zeros_textbook_example():
    # s^5 + 7s^4 + 6s^3 + 42s^2 + 8s + 56: row of zeros at s^3, auxiliary
    # polynomial 7s^4 + 42s^2 + 56 with roots +-j sqrt(2), +-j 2; no RHP
    # roots, four on the imaginary axis (textbook example, from memory).
    poly = [1, 7, 6, 42, 8, 56]
    result = routh_array(poly)
    np.testing.assert_allclose(result.auxiliary, [7, 0, 42, 0, 56])
    assert result.rhp == 0
    assert result.imaginary == 4
    assert result.lhp == 1
    # Reference: numpy.roots -- four roots with |Re| ~ 0, at |Im| = sqrt 2 and 2.
    roots = np.roots(poly)
    on_axis = roots[np.abs(roots.real) < 1e-8]
    assert on_axis.size == 4
    np.testing.assert_allclose(np.sort(np.abs(on_axis.imag)), [np.sqrt(2)] * 2 + [2, 2], rtol=1e-8)
    assert not result.stable


def test_routh_derivative_row_replaces_zero_row():
    # The zero row is replaced by dA/ds = 28 s^3 + 84 s (definition of the
    # textbook method, from memory).
    result = routh_array([1, 7, 6, 42, 8, 56])
    np.testing.assert_allclose(result.array[2, :2], [28, 84])


def test_routh_auxiliary_with_mirrored_real_roots():
    # s^4 - 1 = (s - 1)(s + 1)(s^2 + 1): row of zeros immediately; one RHP
    # root and two on the imaginary axis (factorisation by hand).
    result = routh_array([1, 0, 0, 0, -1])
    assert result.rhp == 1
    assert result.imaginary == 2
    assert result.lhp == 1


def test_routh_third_order_closed_form():
    # s^3 + a2 s^2 + a1 s + a0 is stable iff all a > 0 and a2 a1 > a0
    # (Routh closed form for cubics, textbook); K/(s(s+1)(s+2)) at K = 6 is
    # the marginal case with roots +-j sqrt(2).
    assert routh_array([1, 3, 2, 5.9]).stable
    assert routh_array([1, 3, 2, 6.1]).rhp == 2
    marginal = routh_array([1, 3, 2, 6])
    assert marginal.imaginary == 2 and marginal.rhp == 0
    aux_roots = np.roots(marginal.auxiliary)  # 3 s^2 + 6: +-j sqrt(2)
    np.testing.assert_allclose(aux_roots.real, 0.0, atol=1e-12)
    np.testing.assert_allclose(np.abs(aux_roots.imag), np.sqrt(2), rtol=1e-12)


@st.composite
def polynomials_off_axis(draw, margin):
    """Real polynomials of order 2-8 whose roots keep |Re| >= margin."""
    seed = draw(st.integers(0, 2**32 - 1))
    order = draw(st.integers(2, 8))
    rng = np.random.default_rng(seed)
    roots = []
    while len(roots) < order:
        re = rng.uniform(margin, 3.0) * rng.choice([-1.0, 1.0])
        if order - len(roots) >= 2 and rng.random() < 0.5:
            im = rng.uniform(0.1, 3.0)
            roots += [re + 1j * im, re - 1j * im]
        else:
            roots.append(re)
    return np.real(np.poly(roots)) * rng.uniform(0.2, 5.0) * rng.choice([-1.0, 1.0]), np.asarray(roots)


@settings(max_examples=120, deadline=None)
@given(polynomials_off_axis(margin=0.05))
def test_routh_counts_match_numpy_roots(case):
    poly, roots = case
    result = routh_array(poly)
    # Reference: the roots the polynomial was built from (numpy.poly), same
    # as numpy.roots here since they are well away from the axis.
    assert result.rhp == int(np.sum(roots.real > 0))
    assert result.stable == bool(np.all(roots.real < 0))


@st.composite
def polynomials_off_circle(draw, margin):
    """Real polynomials in z of order 2-8 with ||z| - 1| >= margin for every root."""
    seed = draw(st.integers(0, 2**32 - 1))
    order = draw(st.integers(2, 8))
    stable_bias = draw(st.floats(0.0, 1.0))
    rng = np.random.default_rng(seed)
    roots = []
    while len(roots) < order:
        if rng.random() < stable_bias:
            radius = rng.uniform(0.0, 1.0 - margin)
        else:
            radius = rng.uniform(1.0 + margin, 2.5)
        if order - len(roots) >= 2 and rng.random() < 0.5:
            angle = rng.uniform(0.05, np.pi - 0.05)
            roots += [radius * np.exp(1j * angle), radius * np.exp(-1j * angle)]
        else:
            roots.append(radius * rng.choice([-1.0, 1.0]))
    scale = rng.uniform(0.2, 3.0) * rng.choice([-1.0, 1.0])
    return np.real(np.poly(roots)) * scale, np.asarray(roots)


@settings(max_examples=120, deadline=None)
@given(polynomials_off_circle(margin=0.05))
def test_jury_verdict_matches_numpy_roots(case):
    poly, roots = case
    result = jury_test(poly)
    # Reference: the roots the polynomial was built from (numpy.poly).
    assert result.stable == bool(np.all(np.abs(roots) < 1.0))
    assert (result.failed is None) == result.stable


def test_jury_first_failing_condition_names():
    # (z - 2)(z - 0.1): a real root beyond +1 makes P(1) < 0 while
    # |a0| = 0.2 < 1 (Jury conditions, textbook definition, from memory).
    result = jury_test(np.poly([2.0, 0.1]))
    assert (result.failed, result.failed_index) == ("P(1) > 0", 1)
    # (z + 2)(z + 0.1): a real root beyond -1 breaks (-1)^n P(-1) > 0.
    result = jury_test(np.poly([-2.0, -0.1]))
    assert (result.failed, result.failed_index) == ("(-1)^n P(-1) > 0", 2)
    # A complex pair at radius 1.2 with a root at 0.1: |a0| = 0.144 < 1 and
    # P(+-1) have the right signs, so the table row must fail (Jury's
    # theorem: all conditions together are necessary and sufficient).
    roots = [1.2 * np.exp(1j * 1.0), 1.2 * np.exp(-1j * 1.0), 0.1]
    result = jury_test(np.real(np.poly(roots)))
    assert (result.failed, result.failed_index) == ("|b0| > |b2|", 3)


def test_jury_table_rows_follow_the_determinant_rule():
    # b_k = a0 a_k - a_n a_(n-k) (Jury table definition, from memory),
    # computed by hand for z^3 - 0.5 z^2 + 0.2 z - 0.1.
    poly = [1.0, -0.5, 0.2, -0.1]
    a = poly[::-1]  # a0..a3
    result = jury_test(poly)
    expected_b = [a[0] * a[k] - a[3] * a[3 - k] for k in range(3)]
    np.testing.assert_allclose(result.table[2], expected_b)
    np.testing.assert_allclose(result.table[3], expected_b[::-1])
    # Reference: numpy.roots; all three roots inside the unit circle.
    assert result.stable == bool(np.all(np.abs(np.roots(poly)) < 1))


def test_jury_marginal_root_is_not_stable():
    # (z - 1)(z - 0.5): a root on the unit circle fails P(1) > 0 (P(1) = 0).
    result = jury_test(np.poly([1.0, 0.5]))
    assert not result.stable and result.failed == "P(1) > 0"


@pytest.mark.parametrize("bad", [[1.0], [0.0, 0.0], [[1.0, 2.0]], [1.0, np.inf]])
def test_bad_polynomials_are_refused(bad):
    with pytest.raises(InputError):
        routh_array(bad)
    with pytest.raises(InputError):
        jury_test(bad)


@pytest.mark.parametrize(
    "factors",
    [
        [[1, 0, 4], [1, 1], [1, 2]],  # +-2j, -1, -2
        [[1, 0, 1], [1, 0, 9], [1, 3]],  # +-j, +-3j, -3
        [[1, 0, -1], [1, 2], [1, 5]],  # +-1 mirrored, -2, -5
        [[1, 0, 4], [1, -1], [1, 3]],  # +-2j, +1, -3
        [[1, 0, 0, 0, 16], [1, 1]],  # quadrantal quadruple, -1
    ],
)
def test_routh_imaginary_roots_from_auxiliary_polynomial(factors):
    # Products with roots mirrored about the origin give a row of zeros;
    # reference: numpy.roots of the product (roots listed by hand beside).
    poly = np.array([1.0])
    for factor in factors:
        poly = np.polymul(poly, factor)
    result = routh_array(poly)
    roots = np.roots(poly)
    assert result.auxiliary is not None
    assert result.rhp == int(np.sum(roots.real > 1e-7))
    assert result.imaginary == int(np.sum(np.abs(roots.real) <= 1e-7))
    assert result.lhp == int(np.sum(roots.real < -1e-7))

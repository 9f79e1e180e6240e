"""Batched tf / zpk / ss conversions against scipy.signal."""

import numpy as np
import pytest
import scipy.signal as signal

from gainloom import InputError
from gainloom.lti.convert import (
    char_poly,
    poly_from_roots,
    roots_with_origin,
    ss_to_tf,
    tf_to_ss,
    tf_to_zpk,
    zpk_to_tf,
)

# A batch of four third-order plants: zeros, an integrator, a leading-zero
# numerator (lower degree), complex poles.
NUM = np.array(
    [
        [0.0, 1.0, 3.0, 2.0],
        [0.0, 0.0, 2.0, 8.0],
        [0.0, 0.0, 0.0, 5.0],
        [1.5, 0.0, 1.0, 4.0],
    ]
)
DEN = np.array(
    [
        [1.0, 6.0, 11.0, 6.0],
        [2.0, 3.0, 1.0, 0.0],
        [1.0, 0.4, 4.0, 1.0],
        [1.0, 2.0, 3.0, 4.0],
    ]
)


def _sorted(values):
    return np.sort_complex(np.asarray(values, dtype=complex))


def test_tf_to_ss_matches_scipy_tf2ss():
    A, B, C, D = tf_to_ss(NUM, DEN)
    for p in range(NUM.shape[0]):
        # Reference: scipy.signal.tf2ss (reference library) uses the same
        # controllable canonical form.
        ra, rb, rc, rd = signal.tf2ss(np.trim_zeros(NUM[p], "f"), DEN[p])
        np.testing.assert_allclose(A[p], ra, rtol=1e-14)
        np.testing.assert_allclose(B[p], rb.ravel(), rtol=1e-14)
        np.testing.assert_allclose(C[p], rc.ravel(), rtol=1e-13, atol=1e-15)
        np.testing.assert_allclose(D[p], rd.ravel()[0], rtol=1e-14)


def test_ss_to_tf_matches_scipy_ss2tf_on_random_systems():
    rng = np.random.default_rng(3)
    A = rng.normal(size=(6, 4, 4))
    B = rng.normal(size=(6, 4))
    C = rng.normal(size=(6, 4))
    D = rng.normal(size=6)
    num, den = ss_to_tf(A, B, C, D)
    for p in range(6):
        # Reference: scipy.signal.ss2tf (reference library).
        rnum, rden = signal.ss2tf(A[p], B[p][:, None], C[p][None, :], D[p : p + 1][None, :])
        np.testing.assert_allclose(den[p], rden, rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(num[p], rnum.ravel(), rtol=1e-9, atol=1e-11)


def test_tf_ss_round_trip_keeps_leading_zero_numerators():
    A, B, C, D = tf_to_ss(NUM, DEN)
    num, den = ss_to_tf(A, B, C, D)
    lead = DEN[:, :1]
    # Reference: the input itself (the realisation must reproduce it).
    np.testing.assert_allclose(den, DEN / lead, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(num, NUM / lead, rtol=1e-10, atol=1e-12)
    # Leading zeros of the numerator stay exact zeros (Markov parameters
    # of a canonical realisation are exact where they vanish).
    assert num[2, 0] == 0 and num[2, 1] == 0 and num[2, 2] == 0


def test_tf_to_zpk_matches_scipy_tf2zpk():
    zeros, poles, gain = tf_to_zpk(NUM, DEN)
    for p in range(NUM.shape[0]):
        # Reference: scipy.signal.tf2zpk (reference library).
        rz, rp, rk = signal.tf2zpk(np.trim_zeros(NUM[p], "f"), DEN[p])
        finite = zeros[p][np.isfinite(zeros[p])]
        np.testing.assert_allclose(_sorted(finite), _sorted(rz), rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(_sorted(poles[p]), _sorted(rp), rtol=1e-10, atol=1e-12)
        assert gain[p] == pytest.approx(rk, rel=1e-14)
        # Missing zeros are carried as zeros at infinity.
        assert np.sum(~np.isfinite(zeros[p])) == 3 - len(rz)


def test_roots_at_origin_are_exact():
    # s^2 (s + 1)(s + 3) and 1 / s^3: exact zeros, not rounding residues.
    roots = roots_with_origin(np.array([[1.0, 4.0, 3.0, 0.0, 0.0], [0.0, 1.0, 0.0, 0.0, 0.0]]))
    assert np.sum(roots[0] == 0) == 2
    np.testing.assert_allclose(_sorted(roots[0][roots[0] != 0]), [-3, -1])
    assert np.sum(roots[1] == 0) == 3 and np.sum(np.isinf(roots[1])) == 1


def test_zpk_to_tf_inverts_tf_to_zpk():
    zeros, poles, gain = tf_to_zpk(NUM, DEN)
    num, den = zpk_to_tf(zeros, poles, gain)
    # Reference: the input itself, normalised to a monic denominator.
    np.testing.assert_allclose(den, DEN / DEN[:, :1], rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(num, NUM / DEN[:, :1], rtol=1e-10, atol=1e-12)


def test_zpk_to_tf_matches_scipy_zpk2tf():
    z = np.array([[-1.0 + 2j, -1.0 - 2j]])
    p = np.array([[-3.0, -0.5 + 1j, -0.5 - 1j]])
    num, den = zpk_to_tf(z, p, 4.0)
    # Reference: scipy.signal.zpk2tf (reference library).
    rnum, rden = signal.zpk2tf(z[0], p[0], 4.0)
    np.testing.assert_allclose(den[0], rden, rtol=1e-14)
    np.testing.assert_allclose(num[0], np.concatenate([[0.0], rnum]), rtol=1e-14)


def test_poly_from_roots_and_char_poly_match_numpy_poly():
    rng = np.random.default_rng(11)
    M = rng.normal(size=(3, 5, 5))
    # Reference: numpy.poly (reference library) of each matrix.
    for p in range(3):
        np.testing.assert_allclose(char_poly(M)[p], np.poly(M[p]), rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(poly_from_roots(np.array([1.0, 2.0, 3.0])), np.poly([1, 2, 3]))


def test_zero_numerator_has_zero_gain_and_all_zeros_at_infinity():
    zeros, _, gain = tf_to_zpk([[0.0, 0.0]], [[1.0, 2.0]])
    assert gain[0] == 0 and np.all(np.isinf(zeros))


def test_conversions_refuse_improper_and_bad_leading_coefficient():
    with pytest.raises(InputError, match="improper"):
        tf_to_ss([1, 2, 3], [1, 2])
    with pytest.raises(InputError, match="leading denominator"):
        tf_to_zpk([1], [0, 1])


def test_scaled_realisation_has_the_same_transfer_function_and_small_entries():
    # Poles 10..1000 rad/s: the plain companion matrix holds 1e9-sized entries.
    den = np.real(np.poly([-10.0, -100.0, -300.0, -1000.0]))
    num = np.array([0.0, 0.0, 5.0, 50.0, 900.0])
    A, B, C, D = tf_to_ss(num, den, scaled=True)
    back_num, back_den = ss_to_tf(A, B, C, D)
    # Reference: the input polynomials (a similarity keeps the transfer function).
    np.testing.assert_allclose(back_den[0], den, rtol=1e-10)
    np.testing.assert_allclose(back_num[0], num, rtol=1e-10, atol=1e-9)
    assert np.abs(A).max() < 1e4 < np.abs(tf_to_ss(num, den)[0]).max()

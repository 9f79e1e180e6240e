"""Pole-zero cancellation helpers against numpy.roots."""

import numpy as np

from gainloom import Loop
from gainloom.design.cancel import cancelled_zeros, deflate, mask_cancelled
from gainloom.lti.polynomials import polymul


def test_cancellation_detected_masked_and_deflated():
    plant_den = np.array([[1.0, -1.7, 0.72]])  # poles 0.9 and 0.8
    zeros = np.array([[1.0, -0.9]])  # controller zero on 0.9
    assert cancelled_zeros(zeros, plant_den)[0, 0] == 0.9
    assert np.isnan(cancelled_zeros(np.array([[1.0, -0.5]]), plant_den)[0, 0])
    num = polymul(zeros, np.array([[0.0, 0.01, 0.005]]))
    den = polymul(np.array([[1.0, -1.0]]), plant_den)
    loop = Loop(num=num, den=den, ts=1e-3)
    K = 3.0
    # reference: numpy.roots of D + K N has 0.9 as a root for every K
    full = np.roots(den[0] + K * np.concatenate([[0.0], num[0]])[-den.shape[1]:])
    assert np.min(np.abs(full - 0.9)) < 1e-9
    masked = mask_cancelled(full[None, :], np.array([[0.9]]))
    assert np.sum(masked == 0) == 1 and np.sum(np.abs(masked - 0.9) < 1e-9) == 0
    (rows, reduced), = deflate(loop, np.array([[0.9]]))
    assert reduced.order == loop.order - 1
    rest = np.roots(reduced.den[0] + K * reduced.num[0])
    expected = np.sort_complex(full[np.abs(full - 0.9) > 1e-9])
    np.testing.assert_allclose(np.sort_complex(rest), expected, rtol=1e-9, atol=1e-12)

"""Notch and low-pass sections: against scipy.signal and closed forms."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from gainloom import InputError, Loop
from gainloom.lti.discretize import discretize_loop
from gainloom.lti.filters import (
    cascade,
    lightly_damped_pair,
    low_pass_continuous,
    notch_continuous,
    notch_damping,
    tustin_prewarped,
    with_filter,
)
from gainloom.lti.polynomials import batched_roots

# invented sections: centre 300 Hz and 1.2 kHz at 8 kHz and 20 kHz sampling
W0 = np.array([2 * np.pi * 300, 2 * np.pi * 1200, 2 * np.pi * 300])
TS = np.array([1 / 8000, 1 / 8000, 1 / 20000])
DEPTH = np.array([20.0, 35.0, 6.0])
WIDTH = np.array([0.4, 0.1, 1.5]) * W0


def _response(num, den, w, ts):
    return np.polyval(num, np.exp(1j * w * ts)) / np.polyval(den, np.exp(1j * w * ts))


def _prewarped_fs(w0, ts):
    # scipy.signal.bilinear substitutes s = 2 fs (z - 1)/(z + 1); prewarping at
    # w0 is that substitution with 2 fs = w0 / tan(w0 ts / 2) (Tustin with
    # frequency prewarping, e.g. scipy's own docs of cont2discrete "bilinear").
    return w0 / np.tan(w0 * ts / 2) / 2


def test_discrete_notch_matches_scipy_bilinear_with_prewarp():
    num, den = notch_continuous(W0, DEPTH, WIDTH)
    num_z, den_z = tustin_prewarped(num, den, W0, TS)
    w = np.geomspace(10.0, 0.99 * np.pi / TS.min(), 400)
    for p in range(W0.size):
        b, a = scipy.signal.bilinear(num[p], den[p], fs=_prewarped_fs(W0[p], TS[p]))
        # reference: scipy.signal.bilinear and scipy.signal.freqz
        np.testing.assert_allclose(num_z[p], b / a[0], rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(den_z[p], a / a[0], rtol=1e-12, atol=1e-12)
        _, h = scipy.signal.freqz(b, a, worN=w * TS[p])
        np.testing.assert_allclose(_response(num_z[p], den_z[p], w, TS[p]), h, rtol=1e-9, atol=1e-12)


def test_notch_depth_at_the_centre_is_exact_after_prewarping():
    num_z, den_z = tustin_prewarped(*notch_continuous(W0, DEPTH, WIDTH), W0, TS)
    for p in range(W0.size):
        centre = _response(num_z[p], den_z[p], W0[p], TS[p])
        # closed form: |N(j w0)| = zeta_z/zeta_p = 10^(-depth/20), real and positive
        # (both quadratics are 2 j zeta w0^2 there); prewarping maps w0 onto itself
        np.testing.assert_allclose(centre, 10 ** (-DEPTH[p] / 20), rtol=1e-10)
        assert abs(np.angle(centre)) < 1e-9


def test_notch_half_depth_width_closed_form():
    num, den = notch_continuous(W0, DEPTH, WIDTH)
    num_z, den_z = tustin_prewarped(num, den, W0, TS)
    # closed form: the half-depth frequencies w1 < w2 satisfy w2 - w1 = W and
    # w1 w2 = w0^2, so w1,2 = sqrt(w0^2 + W^2/4) -+ W/2 (module docstring);
    # after Tustin with prewarp c = w0/tan(w0 ts/2) a continuous frequency wc
    # is reached at the digital frequency (2/ts) atan(wc/c)
    c = W0 / np.tan(W0 * TS / 2)
    for sign in (-1, 1):
        wc = np.sqrt(W0**2 + WIDTH**2 / 4) + sign * WIDTH / 2
        continuous = [abs(np.polyval(num[p], 1j * wc[p]) / np.polyval(den[p], 1j * wc[p])) for p in range(W0.size)]
        np.testing.assert_allclose(continuous, 10 ** (-DEPTH / 40), rtol=1e-10)
        wd = 2 / TS * np.arctan(wc / c)
        gain = [abs(_response(num_z[p], den_z[p], wd[p], TS[p])) for p in range(W0.size)]
        np.testing.assert_allclose(gain, 10 ** (-DEPTH / 40), rtol=1e-9)


def test_notch_unity_gain_far_from_the_centre_and_damping_ratio():
    zeta_z, zeta_p = notch_damping(W0, DEPTH, WIDTH)
    np.testing.assert_allclose(zeta_z / zeta_p, 10 ** (-DEPTH / 20), rtol=1e-12)
    num_z, den_z = tustin_prewarped(*notch_continuous(W0, DEPTH, WIDTH), W0, TS)
    # closed form: N(0) = 1 (z = 1) and N(inf) = 1 (z = -1 under Tustin)
    np.testing.assert_allclose(np.polyval(num_z.T, 1.0) / np.polyval(den_z.T, 1.0), 1.0, rtol=1e-12)
    np.testing.assert_allclose(np.polyval(num_z.T, -1.0) / np.polyval(den_z.T, -1.0), 1.0, rtol=1e-9)


def test_low_pass_against_scipy_and_closed_form():
    zeta = np.array([0.7, 0.3, 1.0])
    num, den = low_pass_continuous(W0, zeta)
    num_z, den_z = tustin_prewarped(num, den, W0, TS)
    for p in range(W0.size):
        b, a = scipy.signal.bilinear(num[p], den[p], fs=_prewarped_fs(W0[p], TS[p]))  # scipy.signal.bilinear
        np.testing.assert_allclose(num_z[p], b / a[0], rtol=1e-12, atol=1e-14)
        np.testing.assert_allclose(den_z[p], a / a[0], rtol=1e-12, atol=1e-14)
        # closed form: L(0) = 1, |L(j w0)| = 1/(2 zeta), phase -90 deg
        np.testing.assert_allclose(np.polyval(num_z[p], 1.0) / np.polyval(den_z[p], 1.0), 1.0, rtol=1e-12)
        at = _response(num_z[p], den_z[p], W0[p], TS[p])
        np.testing.assert_allclose(abs(at), 1 / (2 * zeta[p]), rtol=1e-10)
        np.testing.assert_allclose(np.angle(at, deg=True), -90.0, atol=1e-8)


def test_cascade_is_the_product_of_the_responses():
    first = tustin_prewarped(*notch_continuous(W0, DEPTH, WIDTH), W0, TS)
    second = tustin_prewarped(*low_pass_continuous(3 * W0, np.full(3, 0.6)), 3 * W0, TS)
    num, den = cascade([first, second], 3)
    assert num.shape == den.shape == (3, 5)
    w = np.linspace(50.0, 2e4, 50)
    for p in range(3):
        expected = _response(first[0][p], first[1][p], w, TS[p]) * _response(second[0][p], second[1][p], w, TS[p])
        np.testing.assert_allclose(_response(num[p], den[p], w, TS[p]), expected, rtol=1e-10)


def test_frequency_at_nyquist_is_refused():
    num, den = notch_continuous(W0[:1], DEPTH[:1], WIDTH[:1])
    with pytest.raises(InputError, match="Nyquist"):
        tustin_prewarped(num, den, np.array([np.pi / TS[0]]), TS[:1])


def test_lightly_damped_pair_is_the_least_damped_complex_pair():
    # closed form: s^2 + 2 zeta wn s + wn^2 has |s| = wn and damping zeta
    pairs = [(1900.0, 0.03), (300.0, 0.5)]
    den = np.poly([-5000.0] + [r for wn, z in pairs for r in np.roots([1, 2 * z * wn, wn**2])]).real
    real_only = np.poly([-1.0, -2.0, -3.0, -4.0, -5.0])
    frequency, damping = lightly_damped_pair(np.stack([den, real_only]), 0.2)
    np.testing.assert_allclose([frequency[0], damping[0]], [1900.0, 0.03], rtol=1e-9)
    assert np.isnan(frequency[1]) and np.isnan(damping[1])  # only real poles


def test_with_filter_keeps_the_delta_form_consistent():
    # invented plant: 1/(s (s + 50)) with ZOH at 8 kHz and one sample of delay
    plant = discretize_loop(Loop(num=[[0, 0, 50.0]], den=[[1.0, 50.0, 0.0]]), 1 / 8000, "zoh", delay=1)
    assert plant.delta_den is not None
    num, den = tustin_prewarped(*notch_continuous(W0[:1], DEPTH[:1], WIDTH[:1]), W0[:1], TS[:1])
    loop = with_filter(plant, num, den)
    roots_z = np.sort_complex(batched_roots(loop.den)[0])
    roots_delta = np.sort_complex(1 + plant.ts[0] * batched_roots(loop.delta_den)[0])
    np.testing.assert_allclose(roots_delta, roots_z, atol=1e-7)  # same loop in z and in g = (z - 1)/ts
    w = np.linspace(10.0, 2e4, 30)
    expected = _response(plant.num[0], plant.den[0], w, TS[0]) * _response(num[0], den[0], w, TS[0])
    np.testing.assert_allclose(_response(loop.num[0], loop.den[0], w, TS[0]), expected, rtol=1e-8)

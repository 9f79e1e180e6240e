"""Rational-with-delay fits of measured responses (lti/sweep_fit.py)."""

import control as ct
import numpy as np
import pytest

from gainloom.errors import InputError
from gainloom.lti.sweep_fit import fit_response, model_response

# An invented speed-loop plant: Kt / ((J s + B)(tau s + 1)) exp(-s Td), J grows with the load.
KT, B, TAU, TD = 0.35, 5e-3, 5e-4, 1.5e-4
J = 2.5e-3 * np.array([1.0, 2.0, 3.0, 4.0])


def _known(w):
    num = np.zeros((J.size, 3))
    num[:, 2] = KT
    den = np.stack([J * TAU, J + B * TAU, np.full(J.size, B)], axis=1)
    return num, den, model_response(num, den, np.full(J.size, TD), w)


def _grid(count=200):
    return np.geomspace(2 * np.pi * 0.5, 2 * np.pi * 1000, count)[np.newaxis, :].repeat(J.size, axis=0)


def _noisy(h, seed=1, magnitude=0.01, phase_deg=0.5):
    rng = np.random.default_rng(seed)
    return h * (1 + magnitude * rng.standard_normal(h.shape)) * np.exp(
        1j * np.radians(phase_deg) * rng.standard_normal(h.shape))


def test_model_response_matches_python_control():
    w = _grid(50)
    num, den, h = _known(w)
    for p in range(J.size):
        # python-control's frequency_response of the rational part, times the delay factor
        rational = ct.frequency_response(ct.tf(num[p], den[p]), w[p])
        ref = rational.magnitude * np.exp(1j * rational.phase) * np.exp(-1j * w[p] * TD)
        np.testing.assert_allclose(h[p], ref, rtol=1e-10)


def test_fit_recovers_the_known_plant_from_noisy_data():
    w = _grid()
    _num, _den, h = _known(w)
    fit = fit_response(w, _noisy(h), poles=2, zeros=0)
    # the poles are -B/J and -1/tau (closed form of the invented plant)
    for p in range(J.size):
        found = np.sort(np.roots(fit.den[p]).real)
        np.testing.assert_allclose(found, np.sort([-1 / TAU, -B / J[p]]), rtol=0.03)
    np.testing.assert_allclose(fit.num[:, -1] / fit.den[:, -1], KT / B, rtol=0.02)  # DC gain Kt/B
    np.testing.assert_allclose(fit.dead_time, TD, atol=5e-6)
    # 1 % magnitude and 0.5 deg noise: rms relative error near sqrt(0.01^2 + 0.0087^2) = 1.3 %
    assert np.all(fit.rms_error < 0.02) and np.all(fit.rms_error > 0.008)
    assert not fit.outliers.any()


def test_noise_free_fit_is_exact():
    w = _grid(80)
    _num, den, h = _known(w)
    fit = fit_response(w, h, poles=2, zeros=0)
    assert np.all(fit.max_error < 1e-6)
    np.testing.assert_allclose(fit.den, den / den[:, :1], rtol=1e-6)


def test_isolated_bad_samples_are_set_aside():
    w = _grid()
    _, _, h = _known(w)
    data = _noisy(h)
    data[0, 50] *= 3.0  # a spike (+9.5 dB)
    data[1, 120] *= 0.2  # a drop-out (-14 dB)
    data[2, 80] *= np.exp(1j * np.radians(40))  # a phase glitch
    fit = fit_response(w, data, poles=2, zeros=0)
    assert sorted(map(tuple, np.argwhere(fit.outliers))) == [(0, 50), (1, 120), (2, 80)]
    np.testing.assert_allclose(fit.dead_time, TD, atol=5e-6)


def test_unmodelled_resonance_shows_in_the_fit_error():
    # A lightly damped pair at 300 Hz (zeta 0.05, invented) that a 2-pole model cannot
    # follow: the fit error says so (the data-judged margins keep every sample anyway),
    # and the right order (4 poles, 2 zeros) fits it to the noise without outliers.
    w = _grid(300)
    _, _, h = _known(w)
    wr, zeta = 2 * np.pi * 300, 0.05
    s = 1j * w
    data = _noisy(h * (s**2 + 2 * 0.3 * wr * s + wr**2) / (s**2 + 2 * zeta * wr * s + wr**2))
    low = fit_response(w, data, poles=2, zeros=0)
    assert np.all(low.rms_error > 0.2) and np.all(low.max_error > 0.5)
    right = fit_response(w, data, poles=4, zeros=2)
    assert np.all(right.rms_error < 0.02) and not right.outliers.any()
    np.testing.assert_allclose(right.dead_time, TD, atol=5e-6)


def test_too_few_samples_is_refused():
    w = _grid(7)
    _, _, h = _known(w)
    with pytest.raises(InputError, match="cannot determine 5 unknowns"):
        fit_response(w, h, poles=2, zeros=1)

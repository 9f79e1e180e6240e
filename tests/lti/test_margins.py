"""Margins against python-control, closed forms and brute force."""

import warnings

import control
import numpy as np
import pytest

from gainloom import InputError, Loop
from gainloom.lti.margins import frequency_response, loop_margins


def _random_continuous(seed, count):
    # Loops of our own invention: two real poles, a lightly damped pair, one zero.
    rng = np.random.default_rng(seed)
    systems = []
    for _ in range(count):
        wn = rng.uniform(3, 8)
        pair = [complex(-0.1 * wn, wn), complex(-0.1 * wn, -wn)]
        den = np.poly(np.r_[-rng.uniform(0.2, 20, 2), pair]).real
        num = np.poly(-rng.uniform(0.5, 10, 1)) * rng.uniform(1, 50)
        systems.append(control.tf(num, den))
    return systems


def test_continuous_margins_match_python_control():
    systems = _random_continuous(1, 8)
    margins = loop_margins(Loop.from_control(systems))
    for i, sys in enumerate(systems):
        # Reference: python-control stability_margins (polynomial method);
        # its sm is 1/Ms.
        gm, pm, sm, wpc, wgc, wms = control.stability_margins(sys, method="poly")
        np.testing.assert_allclose(margins.gain_margin[i], gm, rtol=1e-9)
        if np.isfinite(gm):
            np.testing.assert_allclose(margins.phase_crossover[i], wpc, rtol=1e-9)
            np.testing.assert_allclose(margins.gain_margin_db[i], 20 * np.log10(gm), rtol=1e-9)
        np.testing.assert_allclose(margins.phase_margin[i], pm, rtol=1e-8)
        if np.isfinite(pm):
            np.testing.assert_allclose(margins.gain_crossover[i], wgc, rtol=1e-9)
        np.testing.assert_allclose(1.0 / margins.sensitivity_peak[i], sm, rtol=1e-8)
        np.testing.assert_allclose(margins.sensitivity_peak_frequency[i], wms, rtol=1e-5)


def test_discrete_margins_match_python_control_with_zoh_and_delay():
    # Integrating plant a/(s (s + b)) under ZOH plus one sample of computation
    # delay: one gain crossover and one phase crossover below Nyquist.
    rng = np.random.default_rng(5)
    systems = []
    for _ in range(6):
        a, b, ts = rng.uniform(20, 200), rng.uniform(5, 40), rng.uniform(1e-3, 5e-3)
        plant = control.sample_system(control.tf([a], [1.0, b, 0.0]), ts, "zoh")
        systems.append(plant * control.tf([1.0], [1.0, 0.0], ts))
    # One batch needs one order: all are 3rd order here.
    margins = loop_margins(Loop.from_control(systems))
    for i, sys in enumerate(systems):
        # Reference: python-control stability_margins on the same z-domain loop
        # (it evaluates the loop at its pole z = 1 internally and warns: not ours).
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            gm, pm, sm, wpc, wgc, wms = control.stability_margins(sys, method="poly")
        np.testing.assert_allclose(margins.gain_margin[i], gm, rtol=1e-8)
        np.testing.assert_allclose(margins.phase_crossover[i], wpc, rtol=1e-8)
        np.testing.assert_allclose(margins.phase_margin[i], pm, rtol=1e-7)
        # python-control roots a polynomial in z and keeps ~8 digits here; our
        # crossover is checked directly below (|L| = 1 evaluated by python-control).
        np.testing.assert_allclose(margins.gain_crossover[i], wgc, rtol=1e-6)
        at_gc = sys(np.exp(1j * margins.gain_crossover[i] * sys.dt))
        assert abs(abs(at_gc) - 1.0) < 1e-12
        np.testing.assert_allclose(1.0 / margins.sensitivity_peak[i], sm, rtol=1e-7)
        assert margins.stable[i]
        assert margins.delay_margin_samples[i] == pytest.approx(margins.delay_margin[i] / sys.dt)


def test_discrete_delay_margin_in_samples_brackets_instability():
    # Reference: python-control feedback() poles with extra z^-d delays; the
    # loop must stay stable for d < delay margin (samples) and go unstable
    # for the first whole d beyond it (fractional delays lie between).
    ts = 2e-3
    plant = control.sample_system(control.tf([5000.0], [1.0, 40.0, 0.0]), ts, "zoh")
    margins = loop_margins(Loop.from_control(plant))
    d_max = margins.delay_margin_samples[0]
    assert 2 < d_max < 10
    below = plant * control.tf([1.0], [1.0] + [0.0] * int(np.floor(d_max)), ts)
    above = plant * control.tf([1.0], [1.0] + [0.0] * (int(np.floor(d_max)) + 1), ts)
    assert np.all(np.abs(control.feedback(below, 1).poles()) < 1)
    assert np.any(np.abs(control.feedback(above, 1).poles()) > 1)


def test_integrator_closed_forms():
    # Textbook closed forms for L = K/s: |L| = 1 at w = K, PM = 90 deg,
    # delay margin (pi/2)/K; no phase crossover (GM infinite).
    k = 7.0
    margins = loop_margins(Loop(num=[0.0, 1.0], den=[1.0, 0.0]), gain=k)
    assert margins.gain_crossover[0] == pytest.approx(k, rel=1e-12)
    assert margins.phase_margin[0] == pytest.approx(90.0, rel=1e-12)
    assert margins.delay_margin[0] == pytest.approx(np.pi / 2 / k, rel=1e-12)
    assert np.isinf(margins.gain_margin[0]) and np.isnan(margins.phase_crossover[0])


def test_triple_lag_gain_margin_closed_form():
    # Textbook closed form for L = K/(s + 1)^3: phase -180 deg at w = sqrt(3),
    # |L| = K/8 there, so GM = 8/K.
    k = np.array([1.0, 2.0, 4.0])
    loop = Loop(num=[[0, 0, 0, 1.0]] * 3, den=[[1.0, 3.0, 3.0, 1.0]] * 3)
    margins = loop_margins(loop, gain=k)
    np.testing.assert_allclose(margins.phase_crossover, np.sqrt(3.0), rtol=1e-12)
    np.testing.assert_allclose(margins.gain_margin, 8.0 / k, rtol=1e-12)


def test_dead_time_gain_margin_closed_form():
    # Closed form for L = K exp(-s tau)/s: phase -90 - w tau deg reaches -180
    # at w = pi/(2 tau) where |L| = K/w, so GM = pi/(2 tau K).
    tau, k = 0.01, 20.0
    margins = loop_margins(Loop(num=[0.0, 1.0], den=[1.0, 0.0], dead_time=tau), gain=k)
    assert margins.phase_crossover[0] == pytest.approx(np.pi / (2 * tau), rel=1e-10)
    assert margins.gain_margin[0] == pytest.approx(np.pi / (2 * tau * k), rel=1e-10)
    assert margins.warnings  # the stability verdict ignores dead time: said so


def test_sensitivity_peak_against_dense_grid():
    # Reference: brute force, |1/(1 + L)| on 2 million log-spaced points.
    systems = _random_continuous(11, 4)
    loop = Loop.from_control(systems)
    margins = loop_margins(loop)
    w = np.geomspace(1e-2, 1e3, 2_000_000)
    for i, sys in enumerate(systems):
        resp = sys(1j * w)
        brute = np.max(1.0 / np.abs(1.0 + resp))
        assert margins.sensitivity_peak[i] >= brute * (1 - 1e-12)
        assert margins.sensitivity_peak[i] == pytest.approx(brute, rel=1e-6)


def test_unstable_closed_loop_has_zero_delay_margin():
    # K/(s + 1)^3 with K = 10 > 8 is closed-loop unstable (Routh, textbook).
    margins = loop_margins(Loop(num=[0, 0, 0, 1.0], den=[1.0, 3.0, 3.0, 1.0]), gain=10.0)
    assert not margins.stable[0]
    assert margins.delay_margin[0] == 0.0
    assert margins.gain_margin[0] < 1.0


def test_frequency_response_matches_python_control_discrete():
    # Reference: python-control evaluation of the same z-domain loop.
    ts = 0.01
    sys = control.tf([0.1, 0.05], [1.0, -1.2, 0.5], ts)
    w = np.array([[0.3, 3.0, 100.0]])
    num, den = frequency_response(Loop.from_control(sys), w)
    np.testing.assert_allclose((num / den)[0], sys(np.exp(1j * w[0] * ts)), rtol=1e-12)


def test_zero_gain_is_refused():
    with pytest.raises(InputError, match="non-zero"):
        loop_margins(Loop(num=[1.0], den=[1.0, 1.0]), gain=0.0)


def test_fast_sampled_margins_through_the_delta_form():
    # An 8th-order plant of our own under ZOH at ts = 1 us.  Textbook
    # approximation: the ZOH acts as a half-sample delay, so the phase margin
    # drops by w_gc ts/2 and the crossover frequencies barely move.  The same
    # loop evaluated from its expanded z-coefficients (no delta form) has lost
    # its slow poles and gives nonsense: the reason the delta form exists.
    from dataclasses import replace

    from gainloom.lti.discretize import discretize_loop

    poles = [-2.0, -15.0, complex(-40, 300), complex(-40, -300), -900.0,
             complex(-2500, 4000), complex(-2500, -4000), -12000.0]
    zeros = [-60.0, -5000.0]
    k0 = np.real(np.prod([-p for p in poles])) / np.prod([-z for z in zeros])
    plant = Loop(num=k0 * np.poly(zeros), den=np.real(np.poly(poles)))
    ts = 1e-6
    discrete = discretize_loop(plant, ts, "zoh")
    for k in (3.0, 20.0):
        cont, disc = loop_margins(plant, k), loop_margins(discrete, k)
        np.testing.assert_allclose(disc.gain_crossover, cont.gain_crossover, rtol=1e-6)
        expected_pm = cont.phase_margin - np.degrees(cont.gain_crossover * ts / 2)
        np.testing.assert_allclose(disc.phase_margin, expected_pm, atol=1e-5)
        np.testing.assert_allclose(disc.gain_margin, cont.gain_margin, rtol=1e-3)
        assert disc.stable[0] and cont.stable[0]
        naive = loop_margins(replace(discrete, delta_num=None, delta_den=None), k)
        assert not naive.stable[0] or abs(naive.gain_margin[0] / cont.gain_margin[0] - 1) > 0.1

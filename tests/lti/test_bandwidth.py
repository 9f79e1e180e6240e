"""Closed-loop bandwidth and gain crossover against python-control and closed forms."""

from __future__ import annotations

import math
import warnings

import control
import numpy as np
import pytest

from gainloom import Loop
from gainloom.lti.bandwidth import HALF_POWER, closed_loop_bandwidth
from gainloom.lti.margins import loop_margins

#: python-control's dbdrop that matches the half-power definition.
HALF_POWER_DB = 20 * math.log10(1 / math.sqrt(2))


def _loops(seed: int, count: int) -> list:
    # Loops of our own invention: an integrator, a real pole, a zero.
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(count):
        pole, zero, gain = rng.uniform(2, 50), rng.uniform(0.5, 20), rng.uniform(5, 200)
        out.append(control.tf(gain * np.array([1, zero]), np.polymul([1, 0], [1, pole])))
    return out


def test_continuous_bandwidth_matches_python_control():
    systems = _loops(3, 10)
    bandwidth = closed_loop_bandwidth(Loop.from_control(systems))
    for i, sys in enumerate(systems):
        # Reference: python-control bandwidth of the closed loop feedback(L, 1)
        reference = control.bandwidth(control.feedback(sys, 1), dbdrop=HALF_POWER_DB)
        np.testing.assert_allclose(bandwidth[i], reference, rtol=1e-9)


def test_crossover_matches_python_control_margin():
    systems = _loops(4, 10)
    margins = loop_margins(Loop.from_control(systems))
    for i, sys in enumerate(systems):
        # Reference: python-control margin(); one gain crossover, so the
        # lowest and the highest are the same frequency wgc
        _, _, _, wgc = control.margin(sys)
        np.testing.assert_allclose(margins.crossover[i], wgc, rtol=1e-9)
        np.testing.assert_allclose(margins.last_crossover[i], wgc, rtol=1e-9)


@pytest.mark.parametrize("k", [0.3, 7.0, 4000.0])
def test_integrator_loop_closed_forms(k):
    # Textbook closed form: L = k/s has |L(jw)| = k/w, crossover w = k; the
    # closed loop k/(s + k) is first order with its -3 dB point at its pole k.
    loop = Loop(num=[k], den=[1.0, 0.0])
    np.testing.assert_allclose(loop_margins(loop).crossover, k, rtol=1e-12)
    np.testing.assert_allclose(closed_loop_bandwidth(loop), k, rtol=1e-12)


def test_first_order_closed_loop_bandwidth_is_its_pole():
    # Textbook closed form: L = a/(s + b) closes to a/(s + a + b): bandwidth a + b.
    a, b = np.array([0.5, 3.0, 40.0]), np.array([1.0, 2.0, 0.1])
    loop = Loop(num=a[:, None], den=np.stack([np.ones(3), b], axis=1))
    np.testing.assert_allclose(closed_loop_bandwidth(loop), a + b, rtol=1e-12)
    # |L(0)| = a/b < 1 for the first loop: no frequency keeps |L| >= 1
    crossover = loop_margins(loop).crossover
    assert crossover[0] == 0.0
    np.testing.assert_allclose(crossover[1:], np.sqrt(a[1:] ** 2 - b[1:] ** 2), rtol=1e-12)


@pytest.mark.parametrize("zeta", [0.2, 0.5, 0.707, 1.0])
def test_second_order_bandwidth_closed_form(zeta):
    # Textbook closed form (from memory): T = wn^2/(s^2 + 2 zeta wn s + wn^2)
    # has bandwidth wn sqrt(1 - 2 zeta^2 + sqrt(4 zeta^4 - 4 zeta^2 + 2)).
    wn = 150.0
    loop = Loop(num=[wn**2], den=[1.0, 2 * zeta * wn, 0.0])
    expected = wn * math.sqrt(1 - 2 * zeta**2 + math.sqrt(4 * zeta**4 - 4 * zeta**2 + 2))
    np.testing.assert_allclose(closed_loop_bandwidth(loop), expected, rtol=1e-10)


@pytest.mark.parametrize("k", [0.05, 0.3, 0.55])
def test_discrete_first_order_closed_form(k):
    # Closed form: L = k/(z - 1) closes to k/(z - a), a = 1 - k, T(1) = 1;
    # |T(e^jwts)|^2 = k^2/(1 - 2a cos(w ts) + a^2) = 1/2 at
    # cos(w ts) = (1 + a^2 - 2 k^2)/(2a).
    ts = 1e-3
    a = 1 - k
    expected = math.acos((1 + a**2 - 2 * k**2) / (2 * a)) / ts
    loop = Loop(num=[k], den=[1.0, -1.0], ts=ts)
    np.testing.assert_allclose(closed_loop_bandwidth(loop), expected, rtol=1e-10)


def test_discrete_bandwidth_on_python_control_response():
    # A ZOH speed loop with a lag and one sample of delay, PI (invented).
    ts = 1e-3
    plant = control.c2d(control.tf([40.0], [0.02, 1, 0]), ts) * control.tf([1], [1, 0], ts)
    pi = control.tf([0.8, -0.76], [1, -1], ts)
    sys = pi * plant
    loop = Loop.from_control([sys])
    bandwidth = float(closed_loop_bandwidth(loop)[0])
    closed = control.feedback(sys, 1)
    # Reference: python-control frequency response of the closed loop: the
    # magnitude is |T(1)|/sqrt(2) at the bandwidth and above it below
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        dc = abs(control.evalfr(closed, 1.0))
        at = control.frequency_response(closed, [bandwidth]).magnitude.ravel()[0]
        below = control.frequency_response(closed, np.geomspace(1e-3, bandwidth * (1 - 1e-6), 4000)).magnitude.ravel()
    np.testing.assert_allclose(at, HALF_POWER * dc, rtol=1e-9)
    assert np.all(below > HALF_POWER * dc)


def test_undefined_and_unbounded_bandwidth():
    # L = 0.9/(z - 1): the smallest |T|, at Nyquist, is 0.9/1.1 > 1/sqrt(2): inf
    assert closed_loop_bandwidth(Loop(num=[0.9], den=[1.0, -1.0], ts=0.01))[0] == np.inf
    # T = 1/z (L = 1/(z - 1)): |T| = 1 at every frequency, never drops: inf
    # (python-control's convention); a zero at s = 0 gives T(0) = 0: nan.
    assert closed_loop_bandwidth(Loop(num=[1.0], den=[1.0, -1.0], ts=0.01))[0] == np.inf
    assert np.isnan(closed_loop_bandwidth(Loop(num=[1.0, 0.0], den=[1.0, 1.0]))[0])


def test_resonance_gives_several_crossovers():
    # Invented: integrator and a lightly damped mode whose peak lifts |L|
    # above 1 again.  Reference: |L| on a dense python-control frequency grid.
    sys = control.tf([2.0], [1, 0]) * control.tf([100.0**2], [1, 2 * 0.01 * 100, 100.0**2])
    margins = loop_margins(Loop.from_control([sys]))
    w = np.geomspace(0.1, 1000, 400001)
    magnitude = control.frequency_response(sys, w).magnitude.ravel()
    above = magnitude >= 1
    lowest = w[np.argmax(~above)]
    highest = w[len(w) - 1 - np.argmax(above[::-1])]
    assert margins.crossover[0] < margins.last_crossover[0]
    np.testing.assert_allclose(margins.crossover[0], lowest, rtol=1e-4)
    np.testing.assert_allclose(margins.last_crossover[0], highest, rtol=1e-4)

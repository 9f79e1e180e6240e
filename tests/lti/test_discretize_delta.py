"""The delta-operator form g = (z - 1)/ts: consistency and fast-sampling accuracy."""

import mpmath
import numpy as np
import pytest

from gainloom import Loop
from gainloom.lti.discretize import discrete_roots, discretize_loop
from gainloom.lti.polynomials import batched_roots


def _delta_to_z(coeffs, ts):
    """Substitute g = (z - 1)/ts and clear ts: sum_i c_i (z - 1)^(N-i) ts^i.

    Independent re-derivation with numpy.polynomial algebra (numpy.polymul).
    """
    width = len(coeffs)
    out = np.zeros(width)
    for i, c in enumerate(coeffs):
        term = np.array([1.0])
        for _ in range(width - 1 - i):
            term = np.polymul(term, [1.0, -1.0])
        term = term * ts**i * c
        out[width - len(term) :] += term
    return out


CASES = [
    ("zoh", 0.0, None),
    ("zoh", 2.0, None),
    ("zoh", 1.4, None),
    ("foh", 1.0, None),
    ("tustin", 0.0, None),
    ("tustin", 1.0, 40.0),
    ("matched", 1.0, None),
    ("impulse", 0.0, None),
]
NUM = np.array([[0.0, 0.0, 2.0, 6.0], [0.0, 5.0, 1.0, 20.0], [0.0, 0.0, 0.0, 30.0]])
DEN = np.array([[1.0, 4.0, 3.0, 0.0], [1.0, 3.0, 40.0, 60.0], [1.0, 9.0, 26.0, 24.0]])


@pytest.mark.parametrize(("method", "delay", "prewarp"), CASES)
def test_delta_form_agrees_with_z_form_at_moderate_ts(method, delay, prewarp):
    ts = np.array([0.01, 0.02, 0.005])
    loop = discretize_loop(Loop(NUM, DEN), ts, method, delay=delay, prewarp=prewarp)
    for p in range(loop.points):
        den = _delta_to_z(loop.delta_den[p], ts[p])
        num = _delta_to_z(loop.delta_num[p], ts[p])
        # Reference: the directly computed z form (independent path: expm of
        # the plant matrix / substitution in z) after monic normalisation.
        np.testing.assert_allclose(den / den[0], loop.den[p], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(num / den[0], loop.num[p], rtol=1e-7, atol=1e-12)


POLES = np.array([-3, -7, -12 + 5j, -12 - 5j, -20, -30 + 10j, -30 - 10j, -45])


def _exact_poles(den):
    # Reference: roots of the float coefficients at 50 digits (mpmath).
    mpmath.mp.dps = 50
    return [mpmath.mpc(r) for r in mpmath.polyroots([mpmath.mpf(float(c)) for c in den], maxsteps=400, extraprec=400)]


def _relative_errors(computed, reference):
    computed = list(computed)
    errors = []
    for ref in reference:
        index = int(np.argmin([abs(c - ref) for c in computed]))
        errors.append(abs(computed.pop(index) - ref) / abs(ref))
    return np.array(errors)


def test_delta_poles_beat_z_polynomial_roots_at_fast_sampling():
    den = np.real(np.poly(POLES))
    num = 1e3 * np.real(np.poly([-5.0, -15.0]))
    ts = 1e-6
    loop = discretize_loop(Loop(num, den), ts, "zoh")
    exact = _exact_poles(den)
    # Reference: exp(p ts) - 1 at 50 digits (mpmath.expm1): the ZOH pole map.
    reference = [complex(mpmath.expm1(p * ts)) for p in exact]
    from_delta = batched_roots(loop.delta_den)[0] * ts  # z - 1 = ts g
    from_z = batched_roots(loop.den)[0] - 1.0
    delta_error = _relative_errors(from_delta, reference)
    z_error = _relative_errors(from_z, reference)
    assert delta_error.max() < 1e-10
    # The z polynomial has lost (nearly) all digits of z - 1 at this rate.
    assert z_error.max() > 1e-3
    assert delta_error.max() < 1e-6 * z_error.max()


def test_tustin_delta_poles_at_fast_sampling():
    den = np.real(np.poly(POLES))
    ts = 1e-6
    loop = discretize_loop(Loop([1.0], den), ts, "tustin")
    exact = _exact_poles(den)
    # Reference: the bilinear pole map z = (1 + p ts/2)/(1 - p ts/2), so
    # g = (z - 1)/ts = p / (1 - p ts/2), at 50 digits (mpmath).
    reference = [complex(p / (1 - p * ts / 2)) for p in exact]
    errors = _relative_errors(batched_roots(loop.delta_den)[0], reference)
    assert errors.max() < 1e-8


def test_discrete_roots_maps_delta_roots_and_keeps_delay_poles_at_zero():
    loop = discretize_loop(Loop([3.0], [1.0, 3.0]), 1e-6, "zoh", delay=2)
    roots = np.sort_complex(discrete_roots(loop.den, loop.delta_den, loop.ts)[0])
    # Reference: z^2 (z - exp(-3 ts)) (ZOH pole map plus two delay poles),
    # exp computed by numpy.
    np.testing.assert_array_equal(roots[:2], [0.0, 0.0])
    assert roots[2].real - 1.0 == pytest.approx(np.expm1(-3e-6), rel=1e-9)


@pytest.mark.parametrize("delay", [0.0, 0.5, 2.3])
def test_delta_form_frequency_response_at_fast_sampling(delay):
    den = np.real(np.poly(POLES))
    num = 1e3 * np.real(np.poly([-5.0, -15.0]))
    ts = 1e-6
    loop = discretize_loop(Loop(num, den), ts, "zoh", delay=delay)
    for w in (1.0, 10.0, 100.0):
        z = np.exp(1j * w * ts)
        g = (z - 1) / ts
        from_delta = np.polyval(loop.delta_num[0], g) / np.polyval(loop.delta_den[0], g)
        # Reference (textbook fact, sampled-data frequency response): a ZOH
        # equivalent is G(jw) sinc(w ts / 2) e^{-j w ts / 2} plus aliased
        # terms G(j(w + 2 pi k / ts)), here below 1e-30 (relative degree 6);
        # the delay multiplies by e^{-j w ts delay}.
        x = w * ts / 2
        plant = np.polyval(num, 1j * w) / np.polyval(den, 1j * w)
        expected = plant * np.sin(x) / x * np.exp(-1j * w * ts * (delay + 0.5))
        assert abs(from_delta / expected - 1) < 1e-9

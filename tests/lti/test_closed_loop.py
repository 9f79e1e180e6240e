"""Closed-loop poles: batched, and accurate at fast sampling via the delta form."""

import control
import mpmath
import numpy as np
import pytest

from gainloom import InputError, Loop
from gainloom.lti.closed_loop import closed_loop_poles, closed_loop_poles_from_coeffs

# An 8th-order plant of our own invention (distinct real and complex poles,
# two real zeros), sampled at 1 MHz: the fast-sampling case of a motor drive.
POLES = [-2.0, -15.0, complex(-40.0, 300.0), complex(-40.0, -300.0), -900.0,
         complex(-2500.0, 4000.0), complex(-2500.0, -4000.0), -12000.0]
ZEROS = [-60.0, -5000.0]
TS = 1e-6
GAINS = np.array([0.05, 0.5, 3.0, 20.0])


def _mp_polymul(a, b):
    out = [mpmath.mpc(0)] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            out[i + j] += x * y
    return out


def _mp_poly_from_roots(roots):
    poly = [mpmath.mpc(1)]
    for r in roots:
        poly = _mp_polymul(poly, [mpmath.mpc(1), -r])
    return poly


def _mp_polyval(poly, x):
    acc = mpmath.mpc(0)
    for c in poly:
        acc = acc * x + c
    return acc


def _mp_zoh_delta_reference(gain_scale=1.0):
    """Exact ZOH of K0 prod(s - zeros)/prod(s - poles) at 50 digits, in g = (z - 1)/T.

    Reference (textbook closed form, derived here): with distinct poles,
    G(s)/s = G(0)/s + sum_i r_i/(s - p_i), r_i = Res_{p_i} G / p_i, and the ZOH
    equivalent G(z) = (1 - 1/z) Z{G(s)/s} = G(0) + sum_i r_i (z - 1)/(z - e^{p_i T}).
    In g: z - 1 = T g and z - e^{pT} = T (g - q), q = expm1(p T)/T, so
    G(g) = G(0) + sum_i r_i g/(g - q_i).  Computed in mpmath at 50 digits.
    """
    mpmath.mp.dps = 50
    T = mpmath.mpf(TS)
    p = [mpmath.mpc(x) for x in POLES]
    zr = [mpmath.mpc(x) for x in ZEROS]
    # Scale so the static gain is 1 (plain numbers, K is then the DC loop gain).
    k0 = mpmath.mpf(gain_scale) * mpmath.fprod([-x for x in p]) / mpmath.fprod([-x for x in zr])
    num_s = [k0 * c for c in _mp_poly_from_roots(zr)]
    den_s = _mp_poly_from_roots(p)
    dden = [c * (len(den_s) - 1 - i) for i, c in enumerate(den_s[:-1])]
    g0 = _mp_polyval(num_s, 0) / _mp_polyval(den_s, 0)
    r = [_mp_polyval(num_s, pi) / _mp_polyval(dden, pi) / pi for pi in p]
    q = [mpmath.expm1(pi * T) / T for pi in p]
    den_g = _mp_poly_from_roots(q)
    num_g = [g0 * c for c in den_g]
    for i, ri in enumerate(r):
        others = _mp_poly_from_roots([qj for j, qj in enumerate(q) if j != i])
        term = [ri * c for c in others] + [mpmath.mpc(0)]  # times g
        offset = len(num_g) - len(term)
        for k, c in enumerate(term):
            num_g[offset + k] += c
    # Same loop in z: substitute g = (z - 1)/T (each g-power becomes (z-1)^k / T^k).
    n = len(den_g) - 1

    def to_z(poly_g):
        out = [mpmath.mpc(0)] * (n + 1)
        for i, c in enumerate(poly_g):
            k = n - i
            term = [c * T ** (n - k)]  # multiply through by T^n
            for _ in range(k):
                term = _mp_polymul(term, [mpmath.mpc(1), mpmath.mpc(-1)])
            term = [mpmath.mpc(0)] * (n + 1 - len(term)) + term
            out = [a + b for a, b in zip(out, term)]
        return out

    # The loop is strictly proper: the leading numerator coefficient is zero
    # exactly (here it is 50-digit rounding dust).
    num_g[0] = mpmath.mpc(0)
    return num_g, den_g, to_z(num_g), to_z(den_g)


def _mp_closed_loop_reference(num_g, den_g, gain):
    """Closed-loop poles in z at 50 digits: mpmath.polyroots of D_g + K N_g, z = 1 + T g."""
    mpmath.mp.dps = 50
    poly = [d + mpmath.mpf(gain) * n for d, n in zip(den_g, num_g)]
    poly = [mpmath.mpf(mpmath.re(c)) for c in poly]  # imaginary parts are rounding dust
    roots = mpmath.polyroots(poly, maxsteps=400, extraprec=200)
    return [1 + mpmath.mpf(TS) * g for g in roots]


def _to_float(poly):
    return np.array([float(mpmath.re(c)) for c in poly])


@pytest.fixture(scope="module")
def fast_loop():
    num_g, den_g, num_z, den_z = _mp_zoh_delta_reference()
    refs = [_mp_closed_loop_reference(num_g, den_g, k) for k in GAINS]
    with_delta = Loop(num=_to_float(num_z), den=_to_float(den_z), ts=TS, hold="zoh",
                      delta_num=_to_float(num_g), delta_den=_to_float(den_g))
    naive = Loop(num=_to_float(num_z), den=_to_float(den_z), ts=TS, hold="zoh")
    return with_delta, naive, refs


def _worst_relative_error(z_poles, refs):
    """Largest error in g = (z - 1)/T relative to |g|: what a continuous-time
    reading of the pole (damping, frequency) would see."""
    worst = 0.0
    for poles_at_k, ref in zip(z_poles, refs):
        ref_g = [(r - 1) / mpmath.mpf(TS) for r in ref]
        ours_g = (poles_at_k - 1.0) / TS
        for rg in ref_g:
            rgc = complex(rg)
            err = np.min(np.abs(ours_g - rgc)) / abs(rgc)
            worst = max(worst, float(err))
    return worst


def test_delta_form_matches_50_digit_reference_at_fast_sampling(fast_loop):
    with_delta, naive, refs = fast_loop
    poles = closed_loop_poles(with_delta, GAINS)[0]
    assert poles.shape == (GAINS.size, 8)
    # Reference: mpmath.polyroots at 50 digits on the exact ZOH loop (above).
    delta_error = _worst_relative_error(poles, refs)
    assert delta_error < 1e-8
    naive_poles = closed_loop_poles(naive, GAINS)[0]
    naive_error = _worst_relative_error(naive_poles, refs)
    # The point of the delta form: the expanded z-polynomial, rounded to
    # doubles, has lost the slow poles (errors of order 1 and worse).
    assert naive_error > 1e-3
    assert naive_error > 1e4 * delta_error


def test_poles_are_batched_over_points_and_gains():
    # Reference: python-control feedback(K G, 1).poles(), one loop and gain at a time.
    rng = np.random.default_rng(3)
    den = np.column_stack([np.ones(6), rng.uniform(0.5, 3, (6, 4))])
    num = np.column_stack([np.zeros(6), np.zeros(6), rng.uniform(0.5, 2, (6, 3))])
    loop = Loop(num=num, den=den)
    gains = rng.uniform(-0.3, 5.0, (6, 5))
    poles = closed_loop_poles(loop, gains)
    assert poles.shape == (6, 5, 4)
    for p in range(6):
        plant = loop.to_control(p)
        for g in range(5):
            expected = np.sort_complex(control.feedback(gains[p, g] * plant, 1).poles())
            np.testing.assert_allclose(np.sort_complex(poles[p, g]), expected, rtol=1e-8, atol=1e-10)


def test_discrete_loop_without_delta_uses_z_coefficients():
    # Reference: numpy.roots of D + K N for a 2nd-order z loop.
    loop = Loop(num=[0.0, 0.5, 0.2], den=[1.0, -1.5, 0.7], ts=0.01)
    poles = closed_loop_poles(loop, [0.0, 1.0])
    np.testing.assert_allclose(np.sort_complex(poles[0, 0]), np.sort_complex(np.roots([1, -1.5, 0.7])))
    np.testing.assert_allclose(np.sort_complex(poles[0, 1]), np.sort_complex(np.roots([1, -1.0, 0.9])))


def test_biproper_root_at_infinity_is_reported_as_inf():
    # (s + 2)/(s + 1) at K = -1: D + K N = -1, the only root has gone to infinity
    # (closed form: s = -(1 + 2K)/(1 + K)).
    poles = closed_loop_poles_from_coeffs([1.0, 2.0], [1.0, 1.0], [-1.0, 1.0])
    assert np.isinf(poles[0, 0, 0])
    np.testing.assert_allclose(poles[0, 1, 0], -1.5)


def test_bad_gain_shapes_are_refused():
    loop = Loop(num=[[1.0], [2.0]], den=[[1.0, 1.0], [1.0, 2.0]])
    with pytest.raises(InputError, match="shape"):
        closed_loop_poles(loop, np.ones((3, 4)))
    with pytest.raises(InputError, match="finite"):
        closed_loop_poles(loop, [np.nan])


def test_discretised_loop_from_the_discretiser_matches_the_50_digit_reference(fast_loop):
    # The whole chain: gainloom's ZOH discretiser (delta form) then
    # closed_loop_poles, against the same 50-digit mpmath reference.
    from gainloom.lti.discretize import discretize_loop

    _, _, refs = fast_loop
    k0 = np.prod([-p for p in POLES]).real / np.prod([-z for z in ZEROS])
    plant = Loop(num=k0 * np.poly(ZEROS), den=np.real(np.poly(POLES)))
    discrete = discretize_loop(plant, TS, "zoh")
    assert discrete.delta_den is not None
    assert _worst_relative_error(closed_loop_poles(discrete, GAINS)[0], refs) < 1e-8

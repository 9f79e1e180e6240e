"""Hold equivalents against scipy.signal and textbook closed forms."""

import numpy as np
import pytest
import scipy.signal as signal

from gainloom import InputError, Loop, discretize
from gainloom.lti.discretize import discretize_loop

# Plants exercising integrators, repeated poles, complex poles and zeros.
PLANTS = {
    "first_order": ([3.0], [1.0, 3.0]),
    "integrator": ([2.0], [1.0, 0.0]),
    "double_integrator": ([1.0], [1.0, 0.0, 0.0]),
    "repeated": ([1.0, 4.0], [1.0, 4.0, 4.0]),
    "complex_with_zero": ([2.0, 1.0, 5.0], [1.0, 1.2, 9.0, 3.0]),
    "integrator_lead": ([5.0, 10.0], [1.0, 7.0, 10.0, 0.0]),
    "biproper": ([2.0, 3.0], [1.0, 5.0]),
}
SCIPY_METHOD = {"zoh": "zoh", "foh": "foh", "tustin": "bilinear", "impulse": "impulse"}


def _scipy(num, den, ts, method):
    num_d, den_d, _ = signal.cont2discrete((num, den), ts, method=SCIPY_METHOD[method])
    return np.ravel(num_d), np.ravel(den_d)


@pytest.mark.parametrize("method", ["zoh", "foh", "tustin", "impulse"])
@pytest.mark.parametrize("name", sorted(PLANTS))
@pytest.mark.parametrize("ts", [1e-3, 0.05])
def test_matches_scipy_cont2discrete(method, name, ts):
    num, den = PLANTS[name]
    if method == "impulse" and len(num) == len(den):
        pytest.skip("impulse invariance needs a strictly proper plant (scipy refuses too)")
    num_z, den_z = discretize(num, den, ts, method)
    # Reference: scipy.signal.cont2discrete (reference library), same method.
    ref_num, ref_den = _scipy(num, den, ts, method)
    ref_num = np.concatenate([np.zeros(len(ref_den) - len(ref_num)), ref_num])
    np.testing.assert_allclose(den_z, ref_den, rtol=1e-9, atol=1e-12)
    # Both sides carry rounding noise of a few eps relative to the largest
    # coefficient (state-space to transfer-function step), hence the atol.
    np.testing.assert_allclose(num_z, ref_num, rtol=1e-7, atol=max(1e-10 * np.max(np.abs(ref_num)), 1e-13 * np.max(np.abs(ref_den))))


def test_unknown_method_lists_registry():
    with pytest.raises(InputError, match="unknown hold method 'zho'.*did you mean 'zoh'"):
        discretize([1], [1, 1], 0.1, "zho")


def test_loop_provenance():
    loop = discretize_loop(Loop([1.0], [1.0, 1.0], dead_time=0.05), 0.1, delay=1)
    assert loop.hold == "zoh" and loop.delay[0] == 1.5 and loop.ts[0] == 0.1
    assert loop.delta_den is not None


# ---------------------------------------------------------------- closed forms
# Hold-equivalent tables of standard digital-control texts (e.g. Franklin,
# Powell & Workman, "Digital Control of Dynamic Systems", ZOH-equivalent
# table; the entries below are from memory and re-derived by hand).


@pytest.mark.parametrize("a", [0.5, 3.0, 40.0])
@pytest.mark.parametrize("ts", [1e-3, 0.1])
def test_zoh_first_order_lag_closed_form(a, ts):
    num_z, den_z = discretize([a], [1.0, a], ts, "zoh")
    e = np.exp(-a * ts)
    # Closed form (from memory): a/(s+a) -> (1 - e^{-a ts}) / (z - e^{-a ts}).
    # (scipy.linalg.expm's scaling and squaring is good to a few 1e-13 here.)
    np.testing.assert_allclose(den_z, [1.0, -e], rtol=1e-11, atol=1e-15)
    np.testing.assert_allclose(num_z, [0.0, 1.0 - e], rtol=1e-11)


@pytest.mark.parametrize("ts", [1e-4, 0.02, 0.5])
def test_zoh_integrator_and_double_integrator_closed_forms(ts):
    num_z, den_z = discretize([1.0], [1.0, 0.0], ts, "zoh")
    # Closed form (from memory): 1/s -> ts / (z - 1).
    np.testing.assert_allclose(den_z, [1.0, -1.0], rtol=1e-15)
    np.testing.assert_allclose(num_z, [0.0, ts], rtol=1e-13)
    num_z, den_z = discretize([1.0], [1.0, 0.0, 0.0], ts, "zoh")
    # Closed form (from memory): 1/s^2 -> ts^2 (z + 1) / (2 (z - 1)^2).
    np.testing.assert_allclose(den_z, [1.0, -2.0, 1.0], rtol=1e-15)
    np.testing.assert_allclose(num_z, [0.0, ts**2 / 2, ts**2 / 2], rtol=1e-12)


@pytest.mark.parametrize("ts", [1e-3, 0.05])
def test_zoh_motor_type_plant_closed_form(ts):
    # K / (s (s + a)), a position loop of a motor with viscous damping.
    K, a = 6.0, 4.0
    num_z, den_z = discretize([K], [1.0, a, 0.0], ts, "zoh")
    e = np.exp(-a * ts)
    # Closed form (from memory, ZOH table entry a/(s(s+a))):
    #   (K/a^2) [ (a ts - 1 + e) z + (1 - e - a ts e) ] / ((z - 1)(z - e))
    b1 = K / a**2 * (a * ts - 1.0 + e)
    b0 = K / a**2 * (1.0 - e - a * ts * e)
    np.testing.assert_allclose(den_z, [1.0, -(1.0 + e), e], rtol=1e-13)
    np.testing.assert_allclose(num_z, [0.0, b1, b0], rtol=1e-8)


def test_zoh_underdamped_second_order_closed_form():
    # wn^2 / (s^2 + 2 zeta wn s + wn^2): poles exp(p ts) = r e^{+-j wd ts}.
    wn, zeta, ts = 30.0, 0.2, 0.01
    num_z, den_z = discretize([wn**2], [1.0, 2 * zeta * wn, wn**2], ts, "zoh")
    sigma, wd = zeta * wn, wn * np.sqrt(1 - zeta**2)
    r = np.exp(-sigma * ts)
    # Closed form (from memory): den = z^2 - 2 r cos(wd ts) z + r^2; the ZOH
    # numerator b1 z + b0 with b1 = 1 - r (cos + (sigma/wd) sin),
    # b0 = r^2 + r ((sigma/wd) sin - cos), argument wd ts.
    c, s = np.cos(wd * ts), np.sin(wd * ts)
    np.testing.assert_allclose(den_z, [1.0, -2 * r * c, r**2], rtol=1e-13)
    b1 = 1 - r * (c + sigma / wd * s)
    b0 = r**2 + r * (sigma / wd * s - c)
    np.testing.assert_allclose(num_z, [0.0, b1, b0], rtol=1e-10)


@pytest.mark.parametrize("d", [1, 2, 3])
def test_whole_sample_delay_multiplies_by_z_to_minus_d(d):
    a, ts = 2.0, 0.1
    num_z, den_z = discretize([a], [1.0, a], ts, "zoh", delay=d)
    e = np.exp(-a * ts)
    # Closed form: z^-d (1 - e) / (z - e) = (1 - e) / (z^d (z - e)).
    np.testing.assert_allclose(den_z, np.concatenate([[1.0, -e], np.zeros(d)]), rtol=1e-13)
    expected = np.zeros(d + 2)
    expected[-1] = 1.0 - e
    np.testing.assert_allclose(num_z, expected, rtol=1e-11)


def test_dead_time_is_absorbed_into_the_delay():
    # 2 ms of dead time at ts = 1 ms is two samples (fact of the z-transform:
    # e^{-s L} with L = k ts is z^-k), so equal to delay=2.
    plant = Loop([3.0], [1.0, 3.0], dead_time=2e-3)
    with_dead_time = discretize_loop(plant, 1e-3, "tustin")
    with_delay = discretize_loop(Loop([3.0], [1.0, 3.0]), 1e-3, "tustin", delay=2)
    np.testing.assert_allclose(with_dead_time.num, with_delay.num, rtol=1e-14)
    np.testing.assert_allclose(with_dead_time.den, with_delay.den, rtol=1e-14)
    assert with_dead_time.delay[0] == 2.0


def test_tustin_integrator_closed_form():
    ts = 0.01
    num_z, den_z = discretize([1.0], [1.0, 0.0], ts, "tustin")
    # Closed form: s = (2/ts)(z-1)/(z+1) gives 1/s = (ts/2)(z+1)/(z-1).
    np.testing.assert_allclose(den_z, [1.0, -1.0], rtol=1e-15)
    np.testing.assert_allclose(num_z, [ts / 2, ts / 2], rtol=1e-14)


@pytest.mark.parametrize("name", ["first_order", "complex_with_zero", "integrator_lead", "biproper"])
@pytest.mark.parametrize("prewarp", [5.0, 300.0])
def test_tustin_prewarp_matches_python_control(name, prewarp):
    import control

    num, den = PLANTS[name]
    ts = 0.004
    num_z, den_z = discretize(num, den, ts, "tustin", prewarp=prewarp)
    # Reference: python-control sample_system(method="bilinear",
    # prewarp_frequency=...) (reference library).
    ref = control.sample_system(control.tf(num, den), ts, method="bilinear", prewarp_frequency=prewarp)
    ref_num = np.ravel(ref.num[0][0])
    ref_den = np.ravel(ref.den[0][0])
    scale = ref_den[0]
    np.testing.assert_allclose(den_z, ref_den / scale, rtol=1e-10, atol=1e-13)
    ref_num = np.concatenate([np.zeros(len(den_z) - len(ref_num)), ref_num]) / scale
    np.testing.assert_allclose(num_z, ref_num, rtol=1e-9, atol=1e-12)
    # Second reference: scipy.signal.bilinear with fs = w / (2 tan(w ts / 2))
    # is the same substitution (reference library).
    fs = prewarp / (2 * np.tan(prewarp * ts / 2))
    snum, sden = signal.bilinear(num, den, fs=fs)
    np.testing.assert_allclose(den_z, sden / sden[0], rtol=1e-10, atol=1e-13)


def test_tustin_prewarp_matches_frequency_response_at_the_prewarp_frequency():
    num, den = [100.0], [1.0, 2.0, 100.0]
    ts, w = 0.02, 12.0
    num_z, den_z = discretize(num, den, ts, "tustin", prewarp=w)
    z = np.exp(1j * w * ts)
    # Definition of prewarping (textbook fact): G_d(e^{j w ts}) = G(j w).
    expected = np.polyval(num, 1j * w) / np.polyval(den, 1j * w)
    assert np.polyval(num_z, z) / np.polyval(den_z, z) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("w", [np.pi / 1e-3, 5000.0])
def test_prewarp_at_or_past_nyquist_is_refused(w):
    with pytest.raises(InputError) as info:
        discretize([1.0], [1.0, 1.0], 1e-3, "tustin", prewarp=w)
    message = str(info.value)
    # Nyquist for ts = 1 ms: pi/ts = 3141.59 rad/s = 500 Hz (definition).
    assert "ts = 0.001 s" in message and "3141.59 rad/s" in message and "500 Hz" in message


def test_prewarp_with_another_method_is_refused():
    with pytest.raises(InputError, match="only to method 'tustin'"):
        discretize([1.0], [1.0, 1.0], 1e-3, "zoh", prewarp=10.0)


@pytest.mark.parametrize("method", ["foh", "tustin", "matched", "impulse"])
def test_fractional_delay_is_refused_except_with_zoh(method):
    with pytest.raises(InputError, match="only supported with method 'zoh'"):
        discretize([1.0], [1.0, 1.0], 1e-3, method, delay=0.5)


def test_impulse_refuses_direct_feedthrough():
    with pytest.raises(InputError, match="strictly proper"):
        discretize([1.0, 2.0], [1.0, 5.0], 1e-3, "impulse")


@pytest.mark.parametrize("kwargs", [{"ts": -1.0}, {"ts": np.nan}, {"delay": -1.0}, {"prewarp": -3.0, "method": "tustin"}])
def test_bad_numbers_are_refused(kwargs):
    args = {"ts": 1e-3, **kwargs}
    with pytest.raises(InputError):
        discretize([1.0], [1.0, 1.0], **args)


def test_already_discrete_plant_is_refused():
    with pytest.raises(InputError, match="already discrete"):
        discretize_loop(Loop([1.0], [1.0, -0.5], ts=0.1), 0.1)


# ------------------------------------------------------------- matched pole-zero


@pytest.mark.parametrize("a", [1.0, 25.0])
def test_matched_first_order_lag_closed_form(a):
    ts = 0.01
    num_z, den_z = discretize([a], [1.0, a], ts, "matched")
    e = np.exp(-a * ts)
    # Closed form (matched pole-zero rule, zero at infinity to z = -1, DC
    # gain matched; from memory): K (z + 1) / (z - e), K = (1 - e) / 2.
    np.testing.assert_allclose(den_z, [1.0, -e], rtol=1e-14)
    np.testing.assert_allclose(num_z, [(1 - e) / 2, (1 - e) / 2], rtol=1e-13)


def test_matched_agrees_with_python_control_when_no_zero_is_at_infinity():
    import control

    num, den, ts = [2.0, 4.0, 10.0], [1.0, 3.0, 20.0], 0.01
    num_z, den_z = discretize(num, den, ts, "matched")
    # Reference: python-control sample_system(method="matched") (reference
    # library); conventions agree when every zero is finite and there is no
    # pole at s = 0.
    ref = control.sample_system(control.tf(num, den), ts, method="matched")
    scale = ref.den[0][0][0]
    np.testing.assert_allclose(den_z, np.ravel(ref.den[0][0]) / scale, rtol=1e-12)
    np.testing.assert_allclose(num_z, np.ravel(ref.num[0][0]) / scale, rtol=1e-12)


def test_matched_integrator_matches_low_frequency_asymptote_without_nan():
    # K / (s (s + a)): the velocity constant K/a must be kept (our documented
    # convention): lim_{z->1} ((z-1)/ts) G_d(z) = lim_{s->0} s G(s) = K/a.
    K, a, ts = 6.0, 4.0, 0.01
    num_z, den_z = discretize([K], [1.0, a, 0.0], ts, "matched")
    assert np.all(np.isfinite(num_z)) and np.all(np.isfinite(den_z))
    e = np.exp(-a * ts)
    # Poles: exp(0) = 1 and exp(-a ts) (matched rule).
    np.testing.assert_allclose(np.sort(np.roots(den_z).real), [e, 1.0], rtol=1e-12)
    # Both zeros at infinity go to z = -1.
    np.testing.assert_allclose(np.roots(num_z), [-1.0, -1.0], atol=1e-7)
    reduced_den = np.polydiv(den_z, [1.0, -1.0])[0]
    velocity = np.polyval(num_z, 1.0) / np.polyval(reduced_den, 1.0) / ts
    assert velocity == pytest.approx(K / a, rel=1e-12)


def test_matched_zero_at_origin_maps_to_z_equal_one():
    # s / (s + 2): a washout; zero exactly at z = 1, high-frequency gain
    # unaffected, no NaN.
    num_z, den_z = discretize([1.0, 0.0], [1.0, 2.0], 0.05, "matched")
    assert np.all(np.isfinite(num_z))
    assert np.polyval(num_z, 1.0) == 0.0
    # Low-frequency asymptote kept: G ~ s/2 near 0 and G_d ~ g/2 near z = 1
    # (documented convention) -> num_z[0] (z - 1) / (z - e) ~ num_z[0] ts g / (1 - e).
    e = np.exp(-2.0 * 0.05)
    assert num_z[0] * 0.05 / (1 - e) == pytest.approx(0.5, rel=1e-12)


# ------------------------------------------------------------------- batching


def test_batch_with_per_point_ts_and_delay_equals_per_point_results():
    num = np.array([[0.0, 1.0, 2.0], [0.0, 0.0, 5.0], [1.0, 0.5, 3.0]])
    den = np.array([[1.0, 3.0, 2.0], [1.0, 0.0, 0.0], [1.0, 2.0, 9.0]])
    ts = np.array([1e-3, 5e-3, 2e-2])
    for method, delay in [("zoh", np.array([0.0, 1.0, 2.5])), ("tustin", np.array([2.0, 0.0, 1.0]))]:
        loop = discretize_loop(Loop(num, den), ts, method, delay=delay)
        for p in range(3):
            single_num, single_den = discretize(num[p], den[p], ts[p], method, delay=delay[p])
            # Reference: per-point results; the batch may carry extra common
            # powers of z, so compare the rational functions by cross-multiplying.
            lhs = np.polymul(loop.num[p], single_den)
            rhs = np.polymul(single_num, loop.den[p])
            width = max(len(lhs), len(rhs))
            np.testing.assert_allclose(
                np.concatenate([np.zeros(width - len(lhs)), lhs]),
                np.concatenate([np.zeros(width - len(rhs)), rhs]),
                rtol=1e-9,
                atol=1e-14,
            )


def test_foh_double_integrator_closed_form():
    ts = 0.05
    num_z, den_z = discretize([1.0], [1.0, 0.0, 0.0], ts, "foh")
    # Closed form (triangle-hold equivalent of 1/s^2, from memory):
    #   ts^2 (z^2 + 4 z + 1) / (6 (z - 1)^2).
    np.testing.assert_allclose(den_z, [1.0, -2.0, 1.0], rtol=1e-15)
    np.testing.assert_allclose(num_z, ts**2 / 6 * np.array([1.0, 4.0, 1.0]), rtol=1e-12)


def test_one_plant_is_repeated_for_per_point_sample_periods():
    loop = discretize_loop(Loop([2.0], [1.0, 2.0]), np.array([1e-3, 1e-2]), "zoh")
    # Closed form (as above): 2/(s+2) -> (1 - e^{-2 ts})/(z - e^{-2 ts}).
    np.testing.assert_allclose(loop.den[:, 1], -np.exp(-2 * np.array([1e-3, 1e-2])), rtol=1e-12)
    assert loop.points == 2


def test_leading_zeros_are_ignored_when_judging_properness():
    # 1/(s+1) written with leading zeros on both sides is the same plant.
    num_z, den_z = discretize([0.0, 0.0, 1.0], [0.0, 1.0, 1.0], 0.1, "zoh")
    # Closed form (as above): (1 - e^{-ts}) / (z - e^{-ts}).
    np.testing.assert_allclose(den_z, [1.0, -np.exp(-0.1)], rtol=1e-12)
    np.testing.assert_allclose(num_z, [0.0, 1.0 - np.exp(-0.1)], rtol=1e-10)

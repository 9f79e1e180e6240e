"""Properties of the hold equivalents on random stable plants (hypothesis)."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from gainloom import Loop
from gainloom.lti.discretize import discretize_loop

# Poles with real parts in [-50, -0.5] rad/s, imaginary parts up to 40 rad/s.
real_pole = st.floats(-50.0, -0.5)
complex_pair = st.tuples(st.floats(-50.0, -0.5), st.floats(0.5, 40.0))


@st.composite
def stable_plants(draw, max_order=4):
    reals = draw(st.lists(real_pole, min_size=0, max_size=max_order))
    pairs = draw(st.lists(complex_pair, min_size=0, max_size=(max_order - len(reals)) // 2))
    poles = list(reals) + [complex(a, b) for a, b in pairs] + [complex(a, -b) for a, b in pairs]
    if not poles:
        poles = [draw(real_pole)]
    n = len(poles)
    zeros = draw(st.lists(st.floats(-60.0, 60.0).filter(lambda v: abs(v) > 0.1), min_size=0, max_size=n - 1))
    gain = draw(st.floats(0.1, 100.0))
    den = np.real(np.poly(poles))
    num = gain * np.real(np.poly(zeros)) if zeros else np.array([gain])
    return num, den, np.array(poles)


sample_period = st.floats(1e-3, 0.05)


@settings(max_examples=40, deadline=None)
@given(stable_plants(), sample_period)
def test_zoh_maps_each_pole_to_exp_p_ts(plant, ts):
    num, den, poles = plant
    loop = discretize_loop(Loop(num, den), ts, "zoh")
    # Reference: the ZOH pole map z = exp(p ts) (textbook fact), computed by
    # numpy.exp and expanded with numpy.poly.
    expected = np.real(np.poly(np.exp(poles * ts)))
    np.testing.assert_allclose(loop.den[0], expected, rtol=1e-9, atol=1e-11)
    # The delta form's poles are (exp(p ts) - 1)/ts (numpy.expm1).
    expected_delta = np.real(np.poly(np.expm1(poles * ts) / ts))
    scale = np.abs(expected_delta).max()
    np.testing.assert_allclose(loop.delta_den[0], expected_delta, rtol=1e-8, atol=1e-10 * scale)


@settings(max_examples=40, deadline=None)
@given(stable_plants(), sample_period, st.sampled_from(["zoh", "tustin", "matched"]))
def test_dc_gain_is_preserved_for_stable_plants(plant, ts, method):
    num, den, _ = plant
    loop = discretize_loop(Loop(num, den), ts, method)
    continuous = num[-1] / den[-1]
    # Reference: G(s = 0) (textbook fact: ZOH is step invariant, Tustin maps
    # s = 0 to z = 1, matched pole-zero matches DC by construction).
    # In z the DC gain is a ratio of coefficient sums that cancel at fast
    # sampling (sum of den ~ ts^n); allow for that conditioning.
    den_sum = np.sum(loop.den[0])
    discrete = np.sum(loop.num[0]) / den_sum
    condition = np.sum(np.abs(loop.den[0])) / abs(den_sum)
    assert np.isclose(discrete, continuous, rtol=1e-13 * condition + 1e-10)
    # The delta form at g = 0 needs no such allowance.
    assert np.isclose(loop.delta_num[0, -1] / loop.delta_den[0, -1], continuous, rtol=1e-9)


@settings(max_examples=20, deadline=None)
@given(
    st.lists(stable_plants(max_order=3), min_size=2, max_size=4),
    st.data(),
    st.sampled_from(["zoh", "foh", "tustin", "matched"]),
)
def test_batched_results_equal_per_point_results(plants, data, method):
    order = max(len(d) for _, d, _ in plants) - 1
    plants = [p for p in plants if len(p[1]) - 1 == order]
    num = np.stack([np.concatenate([np.zeros(order + 1 - len(n)), n]) for n, _, _ in plants])
    den = np.stack([d for _, d, _ in plants])
    points = len(plants)
    ts = np.array(data.draw(st.lists(sample_period, min_size=points, max_size=points)))
    delay_values = st.sampled_from([0.0, 1.0, 2.0, 0.25, 1.5] if method == "zoh" else [0.0, 1.0, 2.0])
    delay = np.array(data.draw(st.lists(delay_values, min_size=points, max_size=points)))
    batch = discretize_loop(Loop(num, den), ts, method, delay=delay)
    for p in range(points):
        single = discretize_loop(Loop(num[p], den[p]), ts[p], method, delay=delay[p])
        # Reference: the same point discretised alone; compare the rational
        # functions (the batch may hold extra common powers of z) by
        # evaluation on the unit circle.
        z = np.exp(1j * np.linspace(0.1, 3.0, 7))
        batch_value = np.polyval(batch.num[p], z) / np.polyval(batch.den[p], z)
        single_value = np.polyval(single.num[0], z) / np.polyval(single.den[0], z)
        np.testing.assert_allclose(batch_value, single_value, rtol=1e-9, atol=1e-12)

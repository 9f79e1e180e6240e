"""Stable and spec gain intervals against closed forms, sympy, mpmath and numpy roots."""

import math

import control
import mpmath
import numpy as np
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from gainloom import InputError
from gainloom.lti.intervals import GainInterval, spec_gain_intervals, stable_gain_intervals
from gainloom.lti.regions import SpecRegion


def _roots(num, den, gain):
    # Reference: numpy.roots of D + K N.
    num = np.concatenate([np.zeros(len(den) - len(num)), num])
    return np.roots(np.asarray(den, float) + gain * num)


def _real_poly(rng, order, centre=-0.5, spread=1.5):
    roots = []
    while len(roots) < order:
        if order - len(roots) >= 2 and rng.random() < 0.4:
            pair = complex(rng.normal(centre, spread), abs(rng.normal(0.0, spread)) + 0.05)
            roots += [pair, pair.conjugate()]
        else:
            roots.append(rng.normal(centre, spread))
    return np.real(np.poly(roots)) if roots else np.ones(1)


# -- closed forms -------------------------------------------------------------


def test_type_one_cubic_is_stable_below_six():
    # K/(s(s+1)(s+2)) is stable for 0 < K < 6 (Routh, standard textbook result).
    intervals = stable_gain_intervals([1.0], [1.0, 3.0, 2.0, 0.0])
    assert len(intervals) == 1
    assert intervals[0].low == 0.0
    np.testing.assert_allclose(intervals[0].high, 6.0, rtol=1e-12)


@pytest.mark.parametrize(("a", "b"), [(1.0, 2.0), (0.2, 50.0), (5.0, 5.0), (1e-3, 1e3)])
def test_general_type_one_cubic(a, b):
    # K/(s(s+a)(s+b)) is stable for 0 < K < a b (a + b) (Routh closed form).
    intervals = stable_gain_intervals([1.0], np.poly([0.0, -a, -b]))
    assert len(intervals) == 1 and intervals[0].low == 0.0
    np.testing.assert_allclose(intervals[0].high, a * b * (a + b), rtol=1e-10)


def test_negative_gains_of_a_stable_cubic():
    # K/((s+1)(s+2)(s+3)): s^3 + 6 s^2 + 11 s + 6 + K is stable iff
    # 6 + K > 0 and 66 > 6 + K, i.e. -6 < K < 60 (Routh closed form by hand).
    den = np.poly([-1.0, -2.0, -3.0])
    positive = stable_gain_intervals([1.0], den)
    assert [(i.low, round(i.high, 9)) for i in positive] == [(0.0, 60.0)]
    both = stable_gain_intervals([1.0], den, negative=True)
    assert len(both) == 2
    np.testing.assert_allclose([both[0].low, both[0].high], [-6.0, 0.0], atol=1e-12)
    assert both[0].high <= 0.0 and both[1].low == 0.0


def test_unstable_open_loop_starts_at_first_stabilising_gain():
    # K (s + 2)/((s - 1)(s + 3)): s^2 + (2 + K) s + 2K - 3 is stable iff
    # K > 3/2 (second-order Routh: all coefficients positive), for all larger K.
    intervals = stable_gain_intervals([1.0, 2.0], np.poly([1.0, -3.0]))
    assert len(intervals) == 1
    np.testing.assert_allclose(intervals[0].low, 1.5, rtol=1e-12)
    assert intervals[0].high == math.inf


def test_zoh_double_pole_loop_jury_limit_by_sympy():
    # ZOH of K/(s(s+1)) at ts = 1, derived independently in sympy: the step
    # response is y(t) = t - 1 + e^-t, G(z) = (1 - 1/z) Z{y(kT)}; then the
    # Jury conditions for z^2 + a1 z + a0 (|a0| < 1, 1 + a1 + a0 > 0,
    # 1 - a1 + a0 > 0) give the stable K range.
    z, k = sympy.symbols("z k")
    t = sympy.Integer(1)
    e = sympy.exp(-t)
    step_z = t * z / (z - 1) ** 2 - z / (z - 1) + z / (z - e)
    plant = sympy.cancel(sympy.together((z - 1) / z * step_z))
    num_z, den_z = sympy.fraction(plant)
    num_p, den_p = sympy.Poly(num_z, z), sympy.Poly(den_z, z)
    lead = den_p.LC()
    char = sympy.Poly((den_p + k * num_p).as_expr() / lead, z)
    a1, a0 = char.all_coeffs()[1], char.all_coeffs()[2]
    limits = [sympy.solve(sympy.Eq(expr, 0), k) for expr in (a0 - 1, 1 + a1 + a0, 1 - a1 + a0)]
    candidates = sorted(float(v) for sol in limits for v in sol if float(v) > 0)
    reference = candidates[0]  # the first positive limit is |a0| = 1 here
    num = [float(c / lead) for c in num_p.all_coeffs()]
    den = [float(c / lead) for c in den_p.all_coeffs()]
    intervals = stable_gain_intervals(num, den, ts=1.0)
    assert len(intervals) == 1 and intervals[0].low == 0.0
    np.testing.assert_allclose(intervals[0].high, reference, rtol=1e-12)
    # Cross-check the discretisation with python-control's c2d (reference library).
    sampled = control.c2d(control.tf([1.0], [1.0, 1.0, 0.0]), 1.0, "zoh")
    np.testing.assert_allclose(np.asarray(sampled.num[0][0], float) / sampled.den[0][0][0], num[-2:], rtol=1e-12)


def test_damping_half_on_type_one_cubic():
    # K/(s(s+1)(s+2)) reaches zeta = 0.5 on the dominant pair at K ~ 1.04
    # (textbook root-locus example, from memory); checked here against the
    # exact condition: the closed loop has a root at w(-0.5 + j sqrt(3)/2).
    region = SpecRegion(min_damping=0.5)
    intervals = spec_gain_intervals([1.0], [1.0, 3.0, 2.0, 0.0], region)
    assert len(intervals) == 1 and intervals[0].low == 0.0
    high = intervals[0].high
    assert abs(high - 1.04) < 0.01
    roots = _roots([1.0], [1.0, 3.0, 2.0, 0.0], high)
    pair = roots[np.argmax(roots.imag)]
    assert abs(-pair.real / abs(pair) - 0.5) < 1e-9


# -- properties ----------------------------------------------------------------


@st.composite
def s_loops(draw):
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    order = draw(st.integers(2, 8))
    zeros = draw(st.integers(0, order - 1))
    den = _real_poly(rng, order, centre=draw(st.floats(-1.5, 0.5)))
    num = _real_poly(rng, zeros) * rng.uniform(0.3, 3.0) * rng.choice([1.0, -1.0])
    return num, den


@st.composite
def z_loops(draw):
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    order = draw(st.integers(2, 8))
    zeros = draw(st.integers(0, order - 1))
    roots = []
    while len(roots) < order:
        radius = rng.uniform(0.0, 1.3)
        if order - len(roots) >= 2 and rng.random() < 0.5:
            pair = radius * np.exp(1j * rng.uniform(0.05, 3.0))
            roots += [pair, np.conj(pair)]
        else:
            roots.append(radius * rng.choice([1.0, -1.0]))
    den = np.real(np.poly(roots))
    num = _real_poly(rng, zeros, centre=0.0, spread=0.8) * rng.uniform(0.05, 1.0)
    return num, den


def _check_stability_intervals(num, den, intervals, unstable, on_boundary):
    for interval in intervals:
        for end in (interval.low, interval.high):
            if end == 0.0 or math.isinf(end):
                continue
            roots = _roots(num, den, end)
            # At an end a closed-loop root is on the boundary (or a root went
            # through infinity: leading coefficient zero).
            lead = den[0] + end * np.concatenate([np.zeros(len(den) - len(num)), num])[0]
            assert np.min(on_boundary(roots)) <= 1e-7 or abs(lead) <= 1e-9 * abs(den[0])
        # Strictly inside: stable.
        low = interval.low
        high = interval.high if math.isfinite(interval.high) else max(2 * abs(low), 1.0) * 10
        for frac in (0.01, 0.3, 0.5, 0.7, 0.99):
            gain = low + frac * (high - low)
            assert not np.any(unstable(_roots(num, den, gain))), (gain, interval)
        # Just outside: unstable (ends where membership changes).
        for end, step in ((interval.low, -1), (interval.high, 1)):
            if end == 0.0 or math.isinf(end):
                continue
            gain = end + step * 1e-6 * abs(end)
            assert np.any(unstable(_roots(num, den, gain))), (gain, interval)


def _check_against_gain_grid(num, den, intervals, unstable):
    # Independent reference: numpy roots on a dense log-spaced gain grid.
    scale = float(np.max(np.abs(den)) / np.max(np.abs(num)))
    gains = scale * np.logspace(-4, 4, 400)
    ends = np.array([e for i in intervals for e in (i.low, i.high) if 0 < e < math.inf])
    for gain in gains:
        if ends.size and np.min(np.abs(ends - gain)) <= 1e-5 * gain:
            continue
        inside = any(i.low < gain < i.high for i in intervals)
        assert inside == (not np.any(unstable(_roots(num, den, gain)))), gain


@settings(max_examples=40, deadline=None)
@given(s_loops())
def test_s_plane_intervals_properties(loop):
    num, den = loop
    intervals = stable_gain_intervals(num, den)
    assert all(i.low < i.high for i in intervals)
    assert all(a.high <= b.low for a, b in zip(intervals, intervals[1:]))

    def on_axis(roots):
        return np.abs(roots.real) / np.maximum(1.0, np.abs(roots))

    _check_stability_intervals(num, den, intervals, lambda r: r.real > 0, on_axis)
    _check_against_gain_grid(num, den, intervals, lambda r: r.real >= 0)


@settings(max_examples=40, deadline=None)
@given(z_loops())
def test_z_plane_intervals_properties(loop):
    num, den = loop
    intervals = stable_gain_intervals(num, den, ts=0.01)

    def on_circle(roots):
        return np.abs(np.abs(roots) - 1.0)

    _check_stability_intervals(num, den, intervals, lambda r: np.abs(r) > 1, on_circle)
    _check_against_gain_grid(num, den, intervals, lambda r: np.abs(r) >= 1)


@settings(max_examples=25, deadline=None)
@given(st.one_of(s_loops().map(lambda loop: (loop, None)), z_loops().map(lambda loop: (loop, 0.01))))
def test_negative_intervals_properties(case):
    (num, den), ts = case
    intervals = stable_gain_intervals(num, den, ts=ts, negative=True)
    negatives = [i for i in intervals if i.high <= 0]
    assert all(i.low < i.high <= 0 for i in negatives)
    # Negative gains K are positive gains of the loop -N/D (definition;
    # a consistency check, no outside reference).
    mirrored = stable_gain_intervals(-np.asarray(num), den, ts=ts)
    assert len(mirrored) == len(negatives)
    for neg, pos in zip(sorted(negatives, key=lambda i: -i.high), mirrored):
        np.testing.assert_allclose([-neg.high, -neg.low], [pos.low, pos.high], rtol=1e-12)


@st.composite
def spec_loops(draw):
    """Loops whose locus passes through typical spec regions: open-loop poles
    and zeros mostly in the left half-plane at 0.3-5 rad/s."""
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    order = draw(st.integers(2, 6))
    zeros = draw(st.integers(0, order - 1))

    def roots(count, allow_rhp):
        out = []
        while len(out) < count:
            wn = rng.uniform(0.3, 5.0)
            if count - len(out) >= 2 and rng.random() < 0.4:
                zeta = rng.uniform(-0.2 if allow_rhp else 0.05, 0.9)
                pair = wn * complex(-zeta, math.sqrt(1 - zeta**2))
                out += [pair, pair.conjugate()]
            else:
                out.append(-wn if (not allow_rhp or rng.random() < 0.8) else wn)
        return out

    den = np.real(np.poly(roots(order, True)))
    num = np.atleast_1d(np.real(np.poly(roots(zeros, False)))) * rng.uniform(0.3, 3.0)
    return num, den


def _margins(region, s):
    """Signed distances (positive = inside) to each spec of the region, relative."""
    mod = np.abs(s)
    out = [(-s.real) / np.maximum(mod, 1e-300) - region.min_damping, (-s.real - region.min_decay) / np.maximum(1, mod)]
    low, high = region.wn_range
    if low > 0:
        out.append((mod - low) / max(low, 1.0))
    if math.isfinite(high):
        out.append((high - mod) / max(high, 1.0))
    out.append(-s.real / np.maximum(1, mod))
    return np.array(out)


@settings(max_examples=30, deadline=None)
@given(
    spec_loops(),
    st.floats(0.0, 0.7),
    st.floats(0.0, 0.3),
    st.floats(0.0, 0.3),
    st.floats(8.0, 30.0),
    st.sampled_from([None, 0.05]),
)
def test_spec_intervals_properties(loop, zeta, sigma, wn_low, wn_high, ts):
    num, den = loop
    region = SpecRegion(min_damping=zeta, min_decay=sigma, wn_range=(wn_low, wn_high), ts=ts)
    if ts is not None:
        # A z loop: the closed loop's poles of the s-loop mapped by exp(s ts)
        # are not those of a z loop with the same coefficients, so use the
        # ZOH of the s loop via python-control (reference library).
        sampled = control.c2d(control.tf(num, den), ts, "zoh")
        num = np.asarray(sampled.num[0][0], float)
        den = np.asarray(sampled.den[0][0], float)
    intervals = spec_gain_intervals(num, den, region)

    def inside(roots):
        return bool(np.all(region.contains(roots)))

    def boundary_distance(roots):
        s = roots if ts is None else np.log(roots.astype(complex)) / ts
        return float(np.min(np.abs(_margins(region, s))))

    for interval in intervals:
        high = interval.high if math.isfinite(interval.high) else 10 * max(interval.low, 1.0)
        for frac in (0.02, 0.5, 0.98):
            gain = interval.low + frac * (high - interval.low)
            assert inside(_roots(num, den, gain)), (gain, interval)
        for end, step in ((interval.low, -1), (interval.high, 1)):
            if end == 0.0 or math.isinf(end):
                continue
            assert boundary_distance(_roots(num, den, end)) <= 1e-6
            assert not inside(_roots(num, den, end * (1 + step * 1e-6))), (end, interval)
    _check_spec_by_gain_grid(num, den, region, intervals, count=200)


# -- batches, fast sampling, input errors ---------------------------------------


def _assert_same_intervals(got, expected):
    assert len(got) == len(expected)
    for a, b in zip(got, expected):
        np.testing.assert_allclose([a.low, a.high], [b.low, b.high], rtol=1e-12, atol=0.0)


def test_batch_matches_loop_by_loop():
    # Consistency check (no outside reference): a (P, n+1) batch with one
    # sample period per loop gives what each loop gives alone.  The loops
    # are ZOH discretisations from python-control (reference library).
    rng = np.random.default_rng(3)
    dens = np.stack([np.poly([0.0, -rng.uniform(0.5, 2), -rng.uniform(2, 5)]) for _ in range(6)])
    nums = np.stack([[0.0, 1.0, rng.uniform(1, 3)] for _ in range(6)])
    ts = np.linspace(0.01, 0.06, 6)
    sampled = [control.c2d(control.tf(n, d), t, "zoh") for n, d, t in zip(nums, dens, ts)]
    num_z = np.stack([np.concatenate([[0.0], s.num[0][0]])[-4:] for s in sampled])
    den_z = np.stack([s.den[0][0] for s in sampled])
    batch = stable_gain_intervals(num_z, den_z, ts=ts)
    assert len(batch) == 6
    for i in range(6):
        _assert_same_intervals(batch[i], stable_gain_intervals(num_z[i], den_z[i], ts=ts[i]))
    region = SpecRegion(min_damping=0.4)
    batch = spec_gain_intervals(nums, dens, region)
    for i in range(6):
        _assert_same_intervals(batch[i], spec_gain_intervals(nums[i], dens[i], region))
    region = SpecRegion(min_damping=0.4, wn_range=(0.5, 60.0))
    batch = spec_gain_intervals(num_z, den_z, region, ts=ts)
    for i in range(6):
        _assert_same_intervals(batch[i], spec_gain_intervals(num_z[i], den_z[i], region, ts=ts[i]))


def _zoh_cubic_delta(ts):
    """ZOH of 1/(s(s+1)(s+2)) at ts, in z and in g = (z-1)/ts, via sympy.

    Partial fractions of 1/(s^2 (s+1)(s+2)) = 1/(2 s^2) - 3/(4 s) + 1/(s+1)
    - 1/(4 (s+2)) (by hand), step-invariant transform term by term.
    """
    z, g = sympy.symbols("z g")
    T = sympy.Rational(ts)
    a, b = sympy.exp(-T), sympy.exp(-2 * T)
    step = (
        sympy.Rational(1, 2) * T * z / (z - 1) ** 2
        - sympy.Rational(3, 4) * z / (z - 1)
        + z / (z - a)
        - sympy.Rational(1, 4) * z / (z - b)
    )
    plant = sympy.cancel(sympy.together((z - 1) / z * step))
    num, den = sympy.fraction(plant)
    num_z, den_z = sympy.Poly(num, z), sympy.Poly(den, z)
    lead = den_z.LC()
    num_g = sympy.Poly(num_z.as_expr().subs(z, 1 + T * g), g)
    den_g = sympy.Poly(den_z.as_expr().subs(z, 1 + T * g), g)
    lead_g = den_g.LC()
    digits = 60
    return {
        "num_z": [float(sympy.N(c / lead, digits)) for c in num_z.all_coeffs()],
        "den_z": [float(sympy.N(c / lead, digits)) for c in den_z.all_coeffs()],
        "num_g": [sympy.N(c / lead_g, digits) for c in num_g.all_coeffs()],
        "den_g": [sympy.N(c / lead_g, digits) for c in den_g.all_coeffs()],
    }


def test_fast_sampling_with_delta_form():
    ts = 1e-4
    loop = _zoh_cubic_delta(ts)
    dn = np.array([float(c) for c in loop["num_g"]])
    dd = np.array([float(c) for c in loop["den_g"]])
    intervals = stable_gain_intervals(loop["num_z"], loop["den_z"], ts=ts, delta=(dn, dd))
    assert len(intervals) == 1 and intervals[0].low == 0.0
    high = intervals[0].high
    # As ts -> 0 the ZOH limit approaches the continuous K = 6 (textbook).
    assert abs(high - 6.0) < 0.01
    # Reference: mpmath roots at 60 digits of the exact g polynomial.
    mpmath.mp.dps = 60
    num_g = [mpmath.mpf(str(c)) for c in loop["num_g"]]
    den_g = [mpmath.mpf(str(c)) for c in loop["den_g"]]
    num_g = [mpmath.mpf(0)] * (len(den_g) - len(num_g)) + num_g

    def stable(gain):
        poly = [d + mpmath.mpf(gain) * n for d, n in zip(den_g, num_g)]
        roots = mpmath.polyroots(poly, maxsteps=200, extraprec=200)
        return all(abs(1 + mpmath.mpf(ts) * r) < 1 for r in roots)

    assert stable(high * (1 - 1e-9))
    assert not stable(high * (1 + 1e-9))
    # Without the delta form the answer is still produced (digits lost).
    plain = stable_gain_intervals(loop["num_z"], loop["den_z"], ts=ts)
    assert len(plain) >= 1 and abs(plain[0].high - high) < 1e-3 * high


def test_gain_interval_to_dict():
    assert GainInterval(0.0, math.inf).to_dict() == {"low": 0.0, "high": None}
    assert GainInterval(-2.0, 0.0).to_dict() == {"low": -2.0, "high": 0.0}


def test_pinned_root_gives_no_interval():
    # N and D share s = 0: a closed-loop root stays at 0 for all K (by hand).
    assert stable_gain_intervals([1.0, 3.0, 0.0], np.poly([0.0, -1.0, -2.0])) == []


def test_conflicting_and_bad_inputs_are_refused():
    with pytest.raises(InputError, match="conflicts"):
        spec_gain_intervals([1.0], [1.0, 1.0], SpecRegion(ts=0.01), ts=0.02)
    with pytest.raises(InputError, match="max_pole_radius"):
        spec_gain_intervals([1.0], [1.0, 1.0], SpecRegion(max_pole_radius=0.9))
    with pytest.raises(InputError, match="delta"):
        stable_gain_intervals([1.0], [1.0, 1.0], delta=([1.0], [1.0, 1.0]))
    with pytest.raises(InputError, match="improper"):
        stable_gain_intervals([1.0, 2.0, 3.0], [1.0, 1.0])
    with pytest.raises(InputError):
        spec_gain_intervals([1.0], [1.0, 1.0], region="fast")


def test_fast_sampling_spec_region_with_delta_form():
    # ZOH of 1/(s(s+1)(s+2)) at ts = 1e-5 in g (sympy, exact).  The decay
    # spec sigma >= 0.1 first holds when the real pole passes s = -0.1, at
    # K = -D(-0.1) = 0.1 * 0.9 * 1.9 = 0.171 for the continuous loop (by
    # hand); the ZOH loop at this rate must agree to about ts.
    ts = 1e-5
    loop = _zoh_cubic_delta(ts)
    dn = np.array([float(c) for c in loop["num_g"]])
    dd = np.array([float(c) for c in loop["den_g"]])
    region = SpecRegion(min_damping=0.5, min_decay=0.1, wn_range=(0.05, 50.0), ts=ts)
    intervals = spec_gain_intervals(loop["num_z"], loop["den_z"], region, delta=(dn, dd))
    assert len(intervals) == 1
    low, high = intervals[0].low, intervals[0].high
    assert abs(low - 0.171) < 1e-5 * 0.171 * 10
    # zeta = 0.5 limit of the continuous loop, K ~ 1.037 (textbook, from memory).
    assert abs(high - 1.037) < 1e-3
    # Reference: 60-digit mpmath roots of the exact g polynomial, read
    # through s = log(1 + ts g)/ts, on both sides of each end.
    mpmath.mp.dps = 60
    num_g = [mpmath.mpf(str(c)) for c in loop["num_g"]]
    den_g = [mpmath.mpf(str(c)) for c in loop["den_g"]]
    num_g = [mpmath.mpf(0)] * (len(den_g) - len(num_g)) + num_g

    def inside(gain):
        poly = [d + mpmath.mpf(gain) * n for d, n in zip(den_g, num_g)]
        roots = mpmath.polyroots(poly, maxsteps=200, extraprec=200)
        s = np.array([complex(mpmath.log(1 + mpmath.mpf(ts) * r) / ts) for r in roots])
        return bool(np.all(region.with_period(None).contains(s)))

    for end in (low, high):
        assert inside(end * (1 - 1e-7)) != inside(end * (1 + 1e-7))
    assert inside(0.5 * (low + high))


def test_loop_object_is_accepted():
    # The Loop carries ts and the delta form; same answer as the arrays.
    from gainloom import Loop

    loop = _zoh_cubic_delta(1e-4)
    dn = np.array([float(c) for c in loop["num_g"]])
    dd = np.array([float(c) for c in loop["den_g"]])
    batch = Loop(num=loop["num_z"], den=loop["den_z"], ts=1e-4, delta_num=dn, delta_den=dd)
    by_loop = stable_gain_intervals(batch)
    by_arrays = stable_gain_intervals(loop["num_z"], loop["den_z"], ts=1e-4, delta=(dn, dd))
    assert len(by_loop) == 1
    _assert_same_intervals(by_loop[0], by_arrays)
    with pytest.raises(InputError, match="conflicts"):
        spec_gain_intervals(batch, None, SpecRegion(ts=2e-4))
    with pytest.raises(InputError, match="dead time"):
        stable_gain_intervals(Loop(num=[1.0], den=[1.0, 1.0], dead_time=0.01))


def test_root_through_infinity_bounds_an_interval():
    # K (3 - s)/(s + 1): (1 - K) s + 1 + 3K has its root at
    # s = -(1 + 3K)/(1 - K): stable for -1/3 < K < 1, and at K = 1 the root
    # passes through infinity (by hand).
    intervals = stable_gain_intervals([-1.0, 3.0], [1.0, 1.0], negative=True)
    assert len(intervals) == 2
    np.testing.assert_allclose([intervals[0].low, intervals[0].high], [-1 / 3, 0.0], rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose([intervals[1].low, intervals[1].high], [0.0, 1.0], rtol=1e-12, atol=1e-15)


def _to_delta(poly, ts):
    """Coefficients in g of p(1 + ts g) (numpy polynomial composition)."""
    out = np.zeros(1)
    for c in poly:
        out = np.polyadd(np.polymul(out, [ts, 1.0]), [c])
    return out


@settings(max_examples=25, deadline=None)
@given(z_loops(), st.sampled_from([0.0, 0.3]), st.sampled_from([0.0, 2.0]))
def test_delta_and_z_forms_agree_at_moderate_sampling(loop, zeta, sigma):
    # At ts = 0.05 nothing crowds: the loop written in g = (z - 1)/ts
    # (reference: numpy composition) must give the same intervals as in z.
    num, den = loop
    ts = 0.05
    delta = (_to_delta(num, ts), _to_delta(den, ts))
    region = SpecRegion(min_damping=zeta, min_decay=sigma, ts=ts)
    in_z = spec_gain_intervals(num, den, region)
    in_g = spec_gain_intervals(num, den, region, delta=delta)
    assert len(in_z) == len(in_g)
    for a, b in zip(in_z, in_g):
        np.testing.assert_allclose([a.low, a.high], [b.low, b.high], rtol=1e-7)


def _check_spec_by_gain_grid(num, den, region, intervals, span=(-4, 4), count=600, scale=None):
    # Independent reference: numpy roots and SpecRegion.contains on a dense
    # log-spaced gain grid, skipping gains within 1e-5 of an end.
    if scale is None:
        scale = float(np.max(np.abs(den)) / np.max(np.abs(num)))
    ends = np.array([e for i in intervals for e in (i.low, i.high) if 0 < e < math.inf])
    for gain in scale * np.logspace(*span, count):
        if ends.size and np.min(np.abs(ends - gain)) <= 1e-5 * gain:
            continue
        inside = any(i.low < gain < i.high for i in intervals)
        assert inside == bool(np.all(region.contains(_roots(num, den, gain)))), gain


def test_wn_contour_clipped_to_the_principal_strip():
    # K/((z + 0.6)(z - 0.4)) at ts = 0.05 with wn <= 65 rad/s: 65 ts > pi, so
    # the z-plane contour is two arcs ending on the negative real axis at
    # z = -a, ln a = -sqrt((65 ts)^2 - pi^2) (wn of -a is
    # sqrt(ln^2 a + pi^2)/ts, principal log).  The pole leaving -0.6
    # (wn 63.7) crosses -a on its way to the breakaway at -0.1, at
    # K = -(z + 0.6)(z - 0.4) (by hand); the pair z = -0.1 +- jy comes back
    # in where |ln z| = wn ts (solved with mpmath.findroot), with
    # K = |z|^2 + 0.24, and leaves the unit circle at K = 1.24 (by hand).
    ts, wn = 0.05, 65.0
    num, den = [1.0], np.poly([-0.6, 0.4])
    region = SpecRegion(wn_range=(1.0, wn), ts=ts)
    intervals = spec_gain_intervals(num, den, region)
    z_edge = -math.exp(-math.sqrt((wn * ts) ** 2 - math.pi**2))
    first_high = -(z_edge + 0.6) * (z_edge - 0.4)
    mpmath.mp.dps = 30
    y = mpmath.findroot(lambda y: abs(mpmath.log(mpmath.mpc(-0.1, y))) - wn * ts, (0.01, 0.99), solver="illinois")
    second_low = float(0.01 + y**2 + 0.24)
    assert len(intervals) == 2
    np.testing.assert_allclose(
        [intervals[0].low, intervals[0].high, intervals[1].low, intervals[1].high],
        [0.0, first_high, second_low, 1.24],
        rtol=1e-10,
    )
    _check_spec_by_gain_grid(num, den, region, intervals)


@pytest.mark.parametrize("wn_high", [40.0, 80.0, 200.0])
def test_zoh_loop_spec_region_by_gain_grid(wn_high):
    # ZOH of 20/(s(s+4)) via python-control (reference library), checked
    # against roots on a dense gain grid.
    ts = 0.05
    sampled = control.c2d(control.tf([20.0], [1.0, 4.0, 0.0]), ts, "zoh")
    num = np.asarray(sampled.num[0][0], float)
    den = np.asarray(sampled.den[0][0], float)
    region = SpecRegion(min_damping=0.1, wn_range=(1.0, wn_high), ts=ts)
    intervals = spec_gain_intervals(num, den, region)
    assert intervals
    _check_spec_by_gain_grid(num, den, region, intervals)


def test_region_crossings_by_curve():
    # K/(s(s+1)(s+2)): imaginary axis at K = 6 (Routh, textbook), zeta = 0.5
    # ray near K = 1.04 (textbook example, from memory), Re s = -0.1 at
    # K = 0.171 (real pole, by hand: -D(-0.1)).
    from gainloom.lti.intervals import region_crossings

    region = SpecRegion(min_damping=0.5, min_decay=0.1)
    found = region_crossings([1.0], [1.0, 3.0, 2.0, 0.0], region)
    assert set(found) == {"stability", "decay", "damping"}
    assert np.any(np.isclose(found["stability"].gains, 6.0, rtol=1e-12))
    assert np.any(np.isclose(found["decay"].gains, 0.171, rtol=1e-12))
    assert np.any(np.abs(found["damping"].gains - 1.04) < 0.01)


def test_rounded_z_coefficients_at_fast_sampling_still_give_the_decay_endpoint():
    # ZOH of 1/(s(s+1)(s+2)) at ts = 1e-4 given only by its rounded z
    # coefficients (sympy, then float).  The decay spec sigma >= 0.1 starts
    # near K = 0.171 (continuous loop, by hand: -D(-0.1)); the rounding of
    # the z coefficients costs about 1e-3 relative here.
    ts = 1e-4
    loop = _zoh_cubic_delta(ts)
    region = SpecRegion(min_decay=0.1, ts=ts)
    intervals = spec_gain_intervals(loop["num_z"], loop["den_z"], region)
    assert intervals and abs(intervals[0].low - 0.171) < 2e-3 * 0.171


def test_discrete_pi_with_computation_delay():
    # ZOH of 500/(s(s+50)) at 1 kHz (python-control c2d, reference library),
    # the PI form kp + ki_ts z/(z-1) (kp = 1, ki_ts = 0.01) and one sample of
    # computation delay 1/z: the loop has a pole at z = 0 and a double pole
    # at z = 1.  Checked against numpy roots on a dense gain grid; the run
    # must not warn (z = 0 poles read as s = -inf).  The delay pole ends up
    # on the negative real axis with wn = sqrt(ln^2 a + pi^2)/ts near
    # 6000-8900 rad/s (principal log), hence the wide wn range below.
    ts = 1e-3
    plant = control.c2d(control.tf([500.0], [1.0, 50.0, 0.0]), ts, "zoh")
    controller = control.tf([1.01, -1.0], [1.0, -1.0], ts) * control.tf([1.0], [1.0, 0.0], ts)
    loop = plant * controller
    num = np.asarray(loop.num[0][0], float)
    den = np.asarray(loop.den[0][0], float)
    stable = stable_gain_intervals(num, den, ts=ts)
    assert len(stable) == 1 and stable[0].low < 1e-6
    for gain in np.logspace(-3, 2.5, 300):
        if abs(gain - stable[0].high) < 1e-6 * gain:
            continue
        roots = _roots(num, den, gain)
        assert (stable[0].low < gain < stable[0].high) == bool(np.all(np.abs(roots) < 1)), gain
    for region in (
        SpecRegion(min_damping=0.5, ts=ts),
        SpecRegion(min_damping=0.3, max_pole_radius=0.995, ts=ts),
        SpecRegion(min_damping=0.2, min_decay=2.0, wn_range=(1.0, 1e4), ts=ts),
    ):
        intervals = spec_gain_intervals(num, den, region)
        assert intervals
        _check_spec_by_gain_grid(num, den, region, intervals, span=(-3, 2.5), count=400, scale=1.0)

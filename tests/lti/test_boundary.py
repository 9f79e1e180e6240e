"""Boundary-curve crossing gains against closed forms, numpy roots and mpmath."""

import math

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainloom import InputError
from gainloom.lti.boundary import (
    circle_crossings,
    expm1_complex,
    imaginary_axis_crossings,
    line_crossings,
    log1p_complex,
    sampled_crossings,
    unit_circle_crossings,
)
from gainloom.lti.regions import spiral_s


def _closed_loop_roots(num, den, gain):
    # Reference: numpy.roots of D + K N.
    num = np.concatenate([np.zeros(len(den) - len(num)), num])
    return np.roots(np.asarray(den, float) + gain * num)


def test_third_order_type_one_loop_crosses_at_six():
    # K/(s(s+1)(s+2)): Routh gives the imaginary-axis crossing at K = 6,
    # w = sqrt(2) (standard textbook result, from memory).
    crossings = imaginary_axis_crossings([1.0], [1.0, 3.0, 2.0, 0.0])
    positive = crossings.gains > 0
    np.testing.assert_allclose(crossings.gains[positive], [6.0], rtol=1e-13)
    np.testing.assert_allclose(crossings.points[positive], [1j * math.sqrt(2)], rtol=1e-13)
    # The open-loop pole at s = 0 is the K = 0 crossing (real-axis point).
    assert 0.0 in crossings.gains


@pytest.mark.parametrize(("a", "b"), [(1.0, 2.0), (0.5, 30.0), (3.0, 3.0), (1e-2, 4e2)])
def test_general_cubic_crossing_closed_form(a, b):
    # K/(s(s+a)(s+b)): crossing at K = a b (a + b), w = sqrt(a b) (Routh
    # closed form, textbook).
    den = np.poly([0.0, -a, -b])
    crossings = imaginary_axis_crossings([1.0], den)
    positive = crossings.gains > 0
    np.testing.assert_allclose(crossings.gains[positive], [a * b * (a + b)], rtol=1e-12)
    np.testing.assert_allclose(crossings.points[positive].imag, [math.sqrt(a * b)], rtol=1e-12)


def _real_poly(rng, order, centre=-0.5, spread=1.5):
    """Real monic polynomial with random real roots and conjugate pairs."""
    roots = []
    while len(roots) < order:
        if order - len(roots) >= 2 and rng.random() < 0.4:
            pair = complex(rng.normal(centre, spread), abs(rng.normal(0.0, spread)) + 0.05)
            roots += [pair, pair.conjugate()]
        else:
            roots.append(rng.normal(centre, spread))
    return np.real(np.poly(roots)) if roots else np.ones(1)


@st.composite
def loops(draw):
    """Random loops of order 2-8 (stable and unstable open loops)."""
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    order = draw(st.integers(2, 8))
    zeros = draw(st.integers(0, order - 1))
    den = _real_poly(rng, order)
    num = _real_poly(rng, zeros) * rng.uniform(0.3, 3.0)
    return num, den


@settings(max_examples=60, deadline=None)
@given(loops())
def test_imaginary_axis_gains_put_a_root_on_the_axis(loop):
    num, den = loop
    crossings = imaginary_axis_crossings(num, den)
    for gain, point in zip(crossings.gains, crossings.points):
        roots = _closed_loop_roots(num, den, gain)
        scale = max(1.0, float(np.max(np.abs(roots))))
        # The reported point is a closed-loop root (numpy.roots) ...
        assert np.min(np.abs(roots - point)) <= 1e-6 * scale
        # ... on the imaginary axis.
        assert abs(point.real) <= 1e-12 * max(1.0, abs(point))


@settings(max_examples=60, deadline=None)
@given(loops(), st.floats(0.2, 4.0))
def test_circle_gains_put_a_root_on_the_circle(loop, radius):
    num, den = loop
    crossings = circle_crossings(num, den, radius, -radius)
    for gain, point in zip(crossings.gains, crossings.points):
        roots = _closed_loop_roots(num, den, gain)
        assert np.min(np.abs(roots - point)) <= 1e-6 * max(1.0, float(np.max(np.abs(roots))))
        assert abs(abs(point) - radius) <= 1e-12 * radius


@settings(max_examples=60, deadline=None)
@given(loops(), st.floats(0.05, 0.95))
def test_damping_ray_gains_put_a_root_on_the_ray(loop, zeta):
    num, den = loop
    direction = complex(-zeta, math.sqrt(1 - zeta**2))
    crossings = line_crossings(num, den, 0.0, direction)
    for gain, point in zip(crossings.gains, crossings.points):
        roots = _closed_loop_roots(num, den, gain)
        assert np.min(np.abs(roots - point)) <= 1e-6 * max(1.0, float(np.max(np.abs(roots))))
        if abs(point) > 1e-9:
            # damping ratio -Re s/|s| of the point (definition)
            assert abs(-point.real / abs(point) - zeta) <= 1e-10


def test_spiral_crossings_have_the_right_damping():
    # ZOH-like discrete loop with an integrator: K (z + 0.8)/((z - 1)(z - 0.6)(z - 0.3)).
    num = [1.0, 0.8]
    den = np.poly([1.0, 0.6, 0.3])
    ts, zeta = 0.01, 0.4
    grid = np.linspace(0.0, math.pi, 3001)
    ends = np.exp(spiral_s(np.array([0.0, math.pi]), zeta, ts) * ts).real
    crossings = sampled_crossings(num, den, lambda u, rows: np.exp(spiral_s(u, zeta, ts) * ts), grid, real_points=ends)
    complex_points = crossings.points[np.abs(crossings.points.imag) > 1e-9]
    assert complex_points.size >= 1
    for gain, point in zip(crossings.gains, crossings.points):
        roots = _closed_loop_roots(num, den, gain)
        assert np.min(np.abs(roots - point)) <= 1e-6
    s = np.log(complex_points) / ts
    # damping ratio of s = ln(z)/ts (definition of the z-plane spiral)
    np.testing.assert_allclose(-s.real / np.abs(s), zeta, rtol=1e-9)


def test_unit_circle_zoh_double_integrator_limit():
    # ZOH of K/(s(s+1)) at ts = 1: num = e^-1 z + 1 - 2 e^-1,
    # den = (z - 1)(z - e^-1) (ZOH closed form, from memory); the unit-circle
    # crossing is where the constant term reaches 1:
    # K = (1 - e^-1)/(1 - 2 e^-1) (Jury |a0| < 1 for a quadratic).
    e = math.exp(-1.0)
    crossings = unit_circle_crossings([e, 1 - 2 * e], np.poly([1.0, e]))
    complex_gain = crossings.gains[np.abs(crossings.points.imag) > 1e-9]
    np.testing.assert_allclose(complex_gain, [(1 - e) / (1 - 2 * e)], rtol=1e-13)


def test_delta_unit_circle_agrees_with_z_unit_circle():
    # Same loop written in g = (z - 1)/ts: substitute z = 1 + ts g
    # (numpy.polynomial composition as the reference).
    ts = 0.1
    num_z = np.array([0.2, 0.1])
    den_z = np.poly([1.0, 0.7, 0.2])
    map_g = np.array([ts, 1.0])

    def to_g(p):
        out = np.zeros(1)
        for c in p:
            out = np.polyadd(np.polymul(out, map_g), [c])
        return out

    in_z = unit_circle_crossings(num_z, den_z)
    in_g = unit_circle_crossings(to_g(num_z), to_g(den_z), ts=ts, delta=True)
    np.testing.assert_allclose(in_g.gains, in_z.gains, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(1 + ts * in_g.points, in_z.points, rtol=1e-10, atol=1e-12)


def test_common_root_on_the_axis_is_fixed():
    # N = s (s + 3), D = s (s + 1)(s + 2): the closed loop keeps s = 0 for
    # every K (factor by hand).
    crossings = imaginary_axis_crossings([1.0, 3.0, 0.0], np.poly([0.0, -1.0, -2.0]))
    assert crossings.fixed
    np.testing.assert_allclose(crossings.fixed_points, [0.0], atol=1e-12)


def test_zero_of_numerator_on_the_axis_is_not_a_finite_gain():
    # N = s^2 + 4 has zeros at +-2j: Im(D conj N) vanishes there, but no
    # finite K puts a closed-loop root there (K -> inf); D = (s+1)^3.
    crossings = imaginary_axis_crossings([1.0, 0.0, 4.0], np.poly([-1.0, -1.0, -1.0]))
    assert np.all(np.isfinite(crossings.gains))
    for gain in crossings.gains:
        roots = _closed_loop_roots([1.0, 0.0, 4.0], np.poly([-1.0, -1.0, -1.0]), gain)
        assert np.min(np.abs(roots.real)) < 1e-8


def test_complex_expm1_and_log1p_match_mpmath():
    # Reference: mpmath at 40 digits.
    mpmath.mp.dps = 40
    values = np.array([1e-10 + 1e-9j, -3e-7 + 2e-6j, 0.3 - 0.2j, -1e-12 - 5e-13j])
    for x in values:
        exact = mpmath.expm1(mpmath.mpc(x.real, x.imag))
        got = expm1_complex(np.array([x]))[0]
        assert abs(got - complex(exact)) <= 1e-15 * abs(complex(exact))
        exact = mpmath.log(1 + mpmath.mpc(x.real, x.imag))
        got = log1p_complex(np.array([x]))[0]
        assert abs(got - complex(exact)) <= 1e-15 * abs(complex(exact))


def test_bad_curves_are_refused():
    with pytest.raises(InputError):
        circle_crossings([1.0], [1.0, 1.0], -1.0, 1.0)
    with pytest.raises(InputError):
        line_crossings([1.0], [1.0, 1.0], 0.0, 0.0)
    with pytest.raises(InputError):
        unit_circle_crossings([1.0], [1.0, 1.0], delta=True)
    with pytest.raises(InputError):
        imaginary_axis_crossings([1.0, 2.0, 3.0], [1.0, 1.0])


def test_batched_input_matches_loop_by_loop():
    # Same loops one at a time and as a (P, n+1) batch with per-loop circles.
    rng = np.random.default_rng(11)
    dens = np.stack([_real_poly(rng, 4) for _ in range(5)])
    nums = np.stack([np.concatenate([[0.0, 0.0], _real_poly(rng, 2)]) for _ in range(5)])
    radii = rng.uniform(0.5, 3.0, 5)
    batch = circle_crossings(nums, dens, radii, -radii)
    lines = line_crossings(nums, dens, -radii, 1j)
    assert len(batch) == 5 and len(lines) == 5
    for p in range(5):
        one = circle_crossings(nums[p], dens[p], radii[p], -radii[p])
        np.testing.assert_allclose(batch[p].gains, one.gains, rtol=1e-12, atol=1e-14)
        one = line_crossings(nums[p], dens[p], -radii[p], 1j)
        np.testing.assert_allclose(lines[p].gains, one.gains, rtol=1e-12, atol=1e-14)


def _coarse_grid_misses(num, den, points):
    exact = unit_circle_crossings(num, den)
    grid = np.linspace(0.0, math.pi, points)
    sampled = sampled_crossings(num, den, lambda t, rows: np.exp(1j * t), grid, real_points=[1.0, -1.0])
    missed = []
    for gain, point in zip(exact.gains, exact.points):
        others = exact.points[exact.points != point]
        if others.size and np.min(np.abs(others - point)) < 1e-3:
            continue  # a near-tangent pair: may legitimately merge
        if not (sampled.gains.size and np.min(np.abs(sampled.gains - gain)) <= 1e-8 * max(1.0, abs(gain))):
            missed.append(gain)
    return missed


@settings(max_examples=60, deadline=None)
@given(loops())
def test_sampled_solver_on_a_coarse_grid_matches_the_exact_circle(loop):
    # The unit circle sampled by angle on a deliberately coarse grid (17
    # points) must give the same gains as the exact half-angle polynomial
    # solution: pairs of crossings inside one cell are found by resampling.
    num, den = loop
    assert _coarse_grid_misses(num, den, 17) == []


def test_two_crossings_in_one_grid_cell_are_both_found():
    # A loop with unit-circle crossings at angles 2.399 and 2.499 rad, both
    # inside the cell [3 pi/4, 13 pi/16] of a 17-point grid (found by a
    # seeded search; without resampling both are missed).
    rng = np.random.default_rng(41)
    order = rng.integers(2, 9)
    zeros = rng.integers(0, order)
    den = _real_poly(rng, order)
    num = _real_poly(rng, zeros) * rng.uniform(0.3, 3)
    angles = np.sort(np.angle(unit_circle_crossings(num, den).points))
    assert np.any(np.isclose(angles, 2.3985, atol=1e-3)) and np.any(np.isclose(angles, 2.4990, atol=1e-3))
    assert _coarse_grid_misses(num, den, 17) == []

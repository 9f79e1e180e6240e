"""Branch tracing: continuity, angle condition, breakaways, crossings, asymptotes."""

import sys
import warnings
from pathlib import Path

import control
import numpy as np
import pytest
from scipy.integrate import solve_ivp

from gainloom import InputError, Loop
from gainloom.lti.trace import angle_residual, trace_covering, trace_locus

ANGLE_TOL_DEG = 1e-4  # stated tolerance of the angle condition on traced points


def _branches(tr, p):
    return tr.gains[p, : tr.counts[p]], tr.roots[p, : tr.counts[p]]


def test_angle_condition_holds_on_every_traced_point():
    # Reference: the angle condition of the root locus (textbook): arg L = 180
    # deg for K > 0 and 0 deg for K < 0, evaluated here independently from
    # python-control's evaluation of L at each traced root.
    rng = np.random.default_rng(4)
    systems = []
    for _ in range(5):
        poles = np.r_[-rng.uniform(0.5, 20, 3), complex(-1, 4), complex(-1, -4)]
        systems.append(control.tf(np.poly(-rng.uniform(1, 10, 2)), np.real(np.poly(poles))))
    loop = Loop.from_control(systems)
    for negative in (False, True):
        tr = trace_locus(loop, negative=negative)
        assert tr.max_residual < ANGLE_TOL_DEG
        for p, plant in enumerate(systems):
            gains, roots = _branches(tr, p)
            k = gains[1:, np.newaxis]
            with warnings.catch_warnings():  # far roots at large K under/overflow polyval
                warnings.simplefilter("ignore", RuntimeWarning)
                value = plant(roots[1:].ravel()).reshape(roots[1:].shape)
            target = 0.0 if negative else 180.0
            phase = np.degrees(np.angle(value))
            miss = np.abs((phase - target + 180.0) % 360.0 - 180.0)
            finite = np.isfinite(miss) & (np.abs(k) > 0)
            # Outside evaluation loses digits where a root sits on an open-loop
            # pole (tiny gains); restrict to roots that have moved.
            moved = np.min(np.abs(roots[1:, :, np.newaxis] - plant.poles()[np.newaxis, np.newaxis, :]), axis=2) > 1e-6
            assert np.all(miss[finite & moved] < 1e-6)


def test_breakaway_of_double_integrator_with_lag_is_resolved_without_swaps():
    # K/(s (s + 2)): s^2 + 2 s + K = 0; breakaway at s = -1 for K = 1 (closed
    # form); for K > 1 the roots are -1 +- j sqrt(K - 1).
    tr = trace_locus(Loop(num=[0.0, 0.0, 1.0], den=[1.0, 2.0, 0.0]))
    gains, roots = _branches(tr, 0)
    # A sample lands close to the breakaway gain (steps there are bounded).
    assert np.min(np.abs(gains - 1.0)) < 2e-3
    after = gains > 1.0 + 1e-9
    im = roots[after].imag
    # No branch swaps: each branch keeps the sign of its imaginary part.
    assert np.all(im[:, 0] * im[0, 0] > 0) and np.all(im[:, 1] * im[0, 1] > 0)
    np.testing.assert_allclose(np.abs(roots[after].imag).max(axis=1), np.sqrt(gains[after] - 1.0), rtol=1e-6)
    np.testing.assert_allclose(roots[after].real, -1.0, atol=1e-6)


def test_branches_follow_the_locus_ode_through_a_near_miss():
    # Reference: scipy solve_ivp integration of dr/dK = -N(r)/(D'(r) + K N'(r))
    # (implicit differentiation of D + K N = 0) from each open-loop pole.
    # Two lightly damped pairs close together: branches pass near each other.
    poles = [complex(-1.0, 5.0), complex(-1.0, -5.0), complex(-1.3, 5.6), complex(-1.3, -5.6)]
    den = np.real(np.poly(poles))
    num = np.r_[0.0, np.real(np.poly([-0.5, -8.0, -20.0]))]
    # Up to K = 4, before the lower pair breaks in on the real axis (K ~ 4.6).
    tr = trace_locus(Loop(num=num, den=den), k_max=4.0)
    gains, roots = _branches(tr, 0)
    dnum, dden = np.polyder(num), np.polyder(den)
    k0 = gains[1]
    for b in range(4):
        def rhs(k, y):
            r = y[0] + 1j * y[1]
            v = -np.polyval(num, r) / (np.polyval(dden, r) + k * np.polyval(dnum, r))
            return [v.real, v.imag]
        start = roots[1, b]
        sol = solve_ivp(rhs, (k0, gains[-1]), [start.real, start.imag], t_eval=gains[1:],
                        rtol=1e-10, atol=1e-12)
        assert sol.success
        ode = sol.y[0] + 1j * sol.y[1]
        np.testing.assert_allclose(roots[1:, b], ode, atol=1e-5 * np.abs(den).max())


def test_continuous_crossing_gain_matches_routh():
    # K/(s + 1)^3 crosses the imaginary axis at K = 8 (Routh array, textbook).
    tr = trace_locus(Loop(num=[0, 0, 0, 1.0], den=[1.0, 3.0, 3.0, 1.0]))
    assert tr.crossing_gains[0].size == 1
    assert tr.crossing_gains[0][0] == pytest.approx(8.0, rel=1e-6)
    # A traced sample sits on the boundary: roots +- j sqrt(3) (closed form).
    gains, roots = _branches(tr, 0)
    at = np.argmin(np.abs(gains - 8.0))
    assert np.min(np.abs(roots[at] - 1j * np.sqrt(3.0))) < 1e-5


def test_discrete_crossing_gain_matches_jury():
    # K/((z - 1)(z - 0.5)): z^2 - 1.5 z + 0.5 + K; the Jury conditions of a
    # second-order polynomial (textbook) give stability for 0 < K < 0.5.
    tr = trace_locus(Loop(num=[0, 0, 1.0], den=[1.0, -1.5, 0.5], ts=0.01))
    assert tr.discrete
    assert tr.crossing_gains[0][0] == pytest.approx(0.5, rel=1e-6)


def test_trace_covering_reaches_a_gain_far_past_the_default_range():
    # K/(s + 1)^3: the closed loop (s + 1)^3 + K has roots s = -1 + K^(1/3) e^(j pi/3)
    # and s = -1 - K^(1/3) (closed form), at any K, however far past the asymptotic start.
    loop = Loop(num=[0, 0, 0, 1.0], den=[1.0, 3.0, 3.0, 1.0])
    far = 50.0 * float(trace_locus(loop).k_max[0])
    tr = trace_covering(loop, [far, -3.0])
    gains, roots = _branches(tr, 0)
    assert gains[-1] >= 2.0 * far
    at = np.argmin(np.abs(gains - far))
    cube = np.cbrt(gains[at])
    expected = np.array([-1 - cube, -1 + cube * np.exp(1j * np.pi / 3), -1 + cube * np.exp(-1j * np.pi / 3)])
    assert all(np.min(np.abs(roots[at] - e)) < 1e-6 * cube for e in expected)
    # gains already inside the default range leave the default trace alone
    assert float(trace_covering(loop, [1.0]).k_max[0]) == float(trace_locus(loop).k_max[0])


def test_asymptotic_regime_at_k_max():
    # (s + 2)/(s (s + 1)(s + 5)(s + 8)): centroid (sum p - sum z)/(n - m) =
    # (-14 + 2)/3 = -4 and asymptote angles 60, 180, 300 deg (textbook rules).
    den = np.poly([0.0, -1.0, -5.0, -8.0])
    num = np.r_[0.0, 0.0, 0.0, 1.0, 2.0]
    tr = trace_locus(Loop(num=num, den=den))
    roots = tr.roots[0, tr.counts[0] - 1]
    scale = 8.0
    to_zero = np.min(np.abs(roots + 2.0))
    assert to_zero < 0.01 * scale
    far = roots[np.abs(roots + 4.0) > 2 * scale]
    assert far.size == 3
    angles = np.sort(np.degrees(np.angle(far + 4.0)) % 360.0)
    np.testing.assert_allclose(angles, [60.0, 180.0, 300.0], atol=5.0)


def test_steps_are_bounded_relative_to_plot_scale():
    # max_step is a fraction of the plot scale (largest |pole|, |zero|, |centroid|);
    # inside the plot region every move is at most that.
    den = np.poly([-1.0, -3.0, complex(-2, 6), complex(-2, -6)]).real
    num = np.r_[0.0, 0.0, 0.0, 1.0, 4.0]
    tr = trace_locus(Loop(num=num, den=den), max_step=0.02)
    gains, roots = _branches(tr, 0)
    scale = np.abs(np.roots(den)).max()
    inside = (np.abs(roots[1:]) <= scale) & (np.abs(roots[:-1]) <= scale)
    steps = np.abs(np.diff(roots, axis=0))[inside]
    assert steps.max() <= 0.02 * scale * (1 + 1e-9)
    assert np.all(np.diff(gains) > 0)


def test_batch_equals_one_by_one():
    # Decisions are per loop: tracing a batch gives each loop's own result.
    den = np.array([np.poly([-1.0, -2.0, -6.0]), np.poly([0.0, -4.0, -9.0]), np.poly([1.0, -3.0, -5.0])])
    num = np.array([[0, 0, 1.0, 3.0], [0, 0, 0, 5.0], [0, 1.0, 2.0, 2.0]])
    batch = trace_locus(Loop(num=num, den=den))
    for p in range(3):
        alone = trace_locus(Loop(num=num[p], den=den[p]))
        np.testing.assert_array_equal(_branches(batch, p)[0], _branches(alone, 0)[0])
        np.testing.assert_allclose(_branches(batch, p)[1], _branches(alone, 0)[1], rtol=1e-12, atol=1e-12)


def test_delta_form_loop_is_traced_in_g_and_returned_in_z():
    # Reference: exact ZOH of 1/((s + 1)(s + 20)(s + 300)) at ts = 1e-6 in the
    # delta operator (textbook closed form, G(g) = G(0) + sum r_i g/(g - q_i),
    # q_i = expm1(p_i ts)/ts, r_i = residue of G(s)/s at p_i); the traced
    # poles at each gain equal numpy.roots of the same delta polynomial.
    ts = 1e-6
    p = np.array([-1.0, -20.0, -300.0])
    k0 = 6000.0
    r = np.array([k0 / (pi * np.prod(pi - np.delete(p, i))) for i, pi in enumerate(p)])
    q = np.expm1(p * ts) / ts
    den_g = np.poly(q)
    num_g = (k0 / np.prod(-p)) * den_g
    for i in range(3):
        num_g = num_g + np.r_[r[i] * np.poly(np.delete(q, i)), 0.0]
    num_g[0] = 0.0  # strictly proper: exactly zero
    loop = Loop(num=[0, 0, 0, 1.0], den=[1.0, -3, 3, -1], ts=ts, delta_num=num_g, delta_den=den_g)
    tr = trace_locus(loop)
    gains, roots = _branches(tr, 0)
    assert tr.max_residual < ANGLE_TOL_DEG
    for g_index in (len(gains) // 3, len(gains) - 1):
        expected = 1.0 + ts * np.roots(den_g + gains[g_index] * num_g)
        got = roots[g_index]
        for e in expected:
            assert np.min(np.abs((got - e) / ts)) < 1e-6 * np.max(np.abs(q))


def test_angle_residual_is_zero_on_exact_roots_and_not_elsewhere():
    # Closed form: s^2 + 2 s + 2 K ... for L = 1/(s (s + 2)) at K = 2 the roots
    # are -1 +- j; the point -1 + 2j is on the locus (Re = -1 line) at K = 5,
    # but -0.5 + j is not on it.
    num, den = np.array([[0.0, 0.0, 1.0]]), np.array([[1.0, 2.0, 0.0]])
    on = angle_residual(num, den, np.array([2.0]), np.array([[-1 + 1j, -1 - 1j]]))
    assert np.all(on < 1e-12)
    off = angle_residual(num, den, np.array([2.0]), np.array([[-0.5 + 1j]]))
    assert off[0, 0] > 1.0


def test_bad_input_is_refused():
    with pytest.raises(InputError, match="max_step"):
        trace_locus(Loop(num=[1.0], den=[1.0, 1.0]), max_step=2.0)
    with pytest.raises(InputError, match="k_max"):
        trace_locus(Loop(num=[1.0], den=[1.0, 1.0]), k_max=0.0)


def test_benchmark_smoke_runs_on_a_few_loops():
    # The benchmark script must keep working; no timing is asserted here.
    sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "benchmarks"))
    try:
        import locus
    finally:
        sys.path.pop(0)
    figures = locus.run(loops=5, seed=1)
    assert figures["loops"] == 5
    assert figures["ours_max_residual_deg"] < ANGLE_TOL_DEG


def test_cancelled_pole_zero_pair_and_biproper_loop():
    # (s + 1)/((s + 1)(s - 1)): the closed loop is (s + 1)(s - 1 + K); the
    # moving root crosses the imaginary axis at K = 1 (closed form).
    tr = trace_locus(Loop(num=[0.0, 1.0, 1.0], den=[1.0, 0.0, -1.0]))
    assert tr.crossing_gains[0] == pytest.approx([1.0], rel=1e-6)
    assert np.isfinite(tr.k_max[0]) and tr.k_max[0] > 1.0
    # (s + 3)/(s + 2) with K < 0: root -(2 + 3K)/(1 + K) (closed form) crosses
    # s = 0 at K = -2/3 and passes through infinity at K = -1 (not a crossing).
    tr = trace_locus(Loop(num=[1.0, 3.0], den=[1.0, 2.0]), negative=True)
    assert tr.crossing_gains[0] == pytest.approx([-2.0 / 3.0], rel=1e-6)
    gains, roots = _branches(tr, 0)
    finite = np.isfinite(roots[:, 0])
    np.testing.assert_allclose(roots[finite, 0], -(2 + 3 * gains[finite]) / (1 + gains[finite]), rtol=1e-9)


def test_fast_sampled_delta_loop_crossing_is_found_at_default_settings():
    # 8th-order plant of our own under ZOH at ts = 1 us with one sample of
    # delay (gainloom's discretiser, delta form).  The plot scale is set by
    # the far sampling zeros, yet the slow branches must not swap and the
    # first crossing must be found.  Reference: closed_loop_poles (checked
    # against 50-digit mpmath in test_closed_loop.py) just below and above it.
    from gainloom.lti.closed_loop import closed_loop_poles
    from gainloom.lti.discretize import discretize_loop

    poles = [-2.0, -15.0, complex(-40, 300), complex(-40, -300), -900.0,
             complex(-2500, 4000), complex(-2500, -4000), -12000.0]
    zeros = [-60.0, -5000.0]
    k0 = np.real(np.prod([-p for p in poles])) / np.prod([-z for z in zeros])
    plant = Loop(num=k0 * np.poly(zeros), den=np.real(np.poly(poles)))
    loop = discretize_loop(plant, 1e-6, "zoh", delay=1.0)
    tr = trace_locus(loop)
    k_cross = tr.crossing_gains[0][0]
    below = np.abs(closed_loop_poles(loop, [k_cross * (1 - 1e-5)])).max()
    above = np.abs(closed_loop_poles(loop, [k_cross * (1 + 1e-5)])).max()
    assert below < 1.0 < above
    # No sample before the crossing is unstable (nothing was skipped).
    gains, roots = _branches(tr, 0)
    early = (gains > 0) & (gains < k_cross * (1 - 1e-5))
    assert np.all(np.abs(roots[early]) < 1.0)

"""Root-locus facts against textbook results, sympy, and properties of D + K N."""

import json
import math

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

import gainloom
from gainloom.errors import InputError
from gainloom.lti.facts import cluster_roots, locus_facts, normalize_angle


def angles_close(a, b, tol=1e-6):
    return abs(float(normalize_angle(a - b))) < tol or abs(abs(float(normalize_angle(a - b))) - 360) < tol


# ---------------------------------------------------------------------------
# Worked examples


def test_three_pole_type_one_loop():
    # K/(s(s+1)(s+2)): centroid -1, asymptotes +-60 and 180 deg, breakaway at
    # s = -1 + 1/sqrt(3) with K = 2/(3 sqrt(3)) (standard textbook results,
    # from memory; the K value is -D/N at that point, closed form).
    facts = gainloom.locus_facts([1.0], [1.0, 3.0, 2.0, 0.0])
    assert facts.centroid == pytest.approx(-1.0, abs=1e-14)
    assert facts.asymptote_angles == pytest.approx((-60.0, 60.0, 180.0))
    assert [p.value for p in facts.poles] == pytest.approx([-2.0, -1.0, 0.0])
    assert facts.segments == ((-math.inf, -2.0), (-1.0, 0.0))
    (brk,) = facts.breakaways
    assert brk.point == pytest.approx(-1 + 1 / math.sqrt(3), abs=1e-12)
    assert brk.gain == pytest.approx(2 / (3 * math.sqrt(3)), rel=1e-12)  # 0.3849
    assert brk.kind == "breakaway"
    # Imaginary-axis crossing at w = sqrt(2) with K = 6 (Routh: 3 * 2 = K;
    # standard result, from memory), so the stable gains are 0 < K < 6.
    (cross,) = facts.crossings
    assert cross.omega == pytest.approx(math.sqrt(2), rel=1e-12)
    assert cross.point == pytest.approx(1j * math.sqrt(2), rel=1e-12)
    assert cross.gain == pytest.approx(6.0, rel=1e-12)
    assert cross.theta is None
    ((lo, hi),) = facts.stable_gain_intervals
    assert lo == 0.0 and hi == pytest.approx(6.0, rel=1e-12)


def test_complex_poles_with_real_zero():
    # K(s+2)/(s^2+2s+3): break-in at -2 - sqrt(3); departure at
    # -1 +- j sqrt(2) is ~ +-144.74 deg (from memory; closed form:
    # 180 + arg(p - z) - arg(p - p*) = 180 + atan(sqrt 2) - 90).
    facts = locus_facts([1.0, 2.0], [1.0, 2.0, 3.0])
    (brk,) = facts.breakaways
    assert brk.point == pytest.approx(-2 - math.sqrt(3), abs=1e-12)
    assert brk.kind == "break-in"
    # K = -D/N at the point (closed form): 2 + 2 sqrt(3)
    assert brk.gain == pytest.approx(2 + 2 * math.sqrt(3), rel=1e-12)
    upper = [d for d in facts.departures if d.at.imag > 0][0]
    assert upper.angles[0] == pytest.approx(90 + math.degrees(math.atan(math.sqrt(2))), abs=1e-9)
    lower = [d for d in facts.departures if d.at.imag < 0][0]
    assert lower.angles[0] == pytest.approx(-upper.angles[0], abs=1e-12)
    assert facts.segments == ((-math.inf, -2.0),)
    assert facts.asymptote_angles == (180.0,)


def test_departure_angle_against_sympy_angle_condition():
    # L = K (s + 1)/((s^2 + 2 s + 5)(s + 4)(s + 0.5)); departure at -1 + 2j
    # from the angle condition evaluated by sympy (independent of our code):
    # theta = 180 + sum arg(p - z_i) - sum_{j != p} arg(p - p_j).
    s = sp.symbols("s")
    p = -1 + 2 * sp.I
    zeros = [-1]
    others = [-1 - 2 * sp.I, -4, sp.Rational(-1, 2)]
    theta = 180 + sum(sp.deg(sp.arg(p - z)) for z in zeros) - sum(sp.deg(sp.arg(p - q)) for q in others)
    expected = float(normalize_angle(float(sp.N(theta, 30))))
    den = sp.Poly(sp.expand((s**2 + 2 * s + 5) * (s + 4) * (s + sp.Rational(1, 2))), s).all_coeffs()
    facts = locus_facts([1.0, 1.0], [float(c) for c in den])
    upper = [d for d in facts.departures if d.at.imag > 0][0]
    assert upper.at == pytest.approx(complex(-1, 2), abs=1e-12)
    assert upper.angles[0] == pytest.approx(expected, abs=1e-9)


def test_arrival_angle_at_complex_zero_against_sympy():
    # L = K (s^2 + 2 s + 10)/(s (s + 3) (s + 6)); arrival at -1 + 3j by the
    # angle condition (sympy): theta = 180 - arg(z - z*) + sum arg(z - p_j).
    z = -1 + 3 * sp.I
    poles = [0, -3, -6]
    theta = 180 - sp.deg(sp.arg(z - sp.conjugate(z))) + sum(sp.deg(sp.arg(z - q)) for q in poles)
    expected = float(normalize_angle(float(sp.N(theta, 30))))
    facts = locus_facts([1.0, 2.0, 10.0], np.poly([0.0, -3.0, -6.0]))
    upper = [a for a in facts.arrivals if a.at.imag > 0][0]
    assert upper.angles[0] == pytest.approx(expected, abs=1e-9)


def test_repeated_pole_splits_into_m_angles():
    # K/(s+1)^3: three branches leave -1 at -60, 60, 180 deg (angle
    # condition 3 theta = -180 mod 360; from memory).
    facts = locus_facts([1.0], np.poly([-1.0, -1.0, -1.0]))
    (pole,) = facts.poles
    assert pole.multiplicity == 3 and pole.value == pytest.approx(-1.0, abs=1e-12)
    (dep,) = facts.departures
    assert dep.angles == pytest.approx((-60.0, 60.0, 180.0), abs=1e-9)
    # No breakaway is reported at the triple pole itself (K = 0 there).
    assert facts.breakaways == ()


def test_double_integrator_with_lead_zero_departs_vertically():
    # K (s + 1)/s^2: the double pole at 0 departs at +-90 deg, and the
    # branches break in at s = -2 with K = 4 (closed forms: B = -s(s+2),
    # K = -D/N = 4 at s = -2).
    facts = locus_facts([1.0, 1.0], [1.0, 0.0, 0.0])
    (dep,) = facts.departures
    assert dep.multiplicity == 2
    assert dep.angles == pytest.approx((-90.0, 90.0))
    (brk,) = facts.breakaways
    assert brk.point == pytest.approx(-2.0) and brk.gain == pytest.approx(4.0) and brk.kind == "break-in"


def test_negative_gain_locus_is_the_complement_on_the_real_axis():
    # Complementary locus (K < 0): real-axis rule with an even count
    # (textbook rule, from memory); asymptotes at 360 q/(n-m).
    facts = locus_facts([1.0], [1.0, 3.0, 2.0, 0.0], negative=True)
    assert facts.segments == ((-2.0, -1.0), (0.0, math.inf))
    assert facts.asymptote_angles == pytest.approx((-120.0, 0.0, 120.0))
    (brk,) = facts.breakaways
    # The other root of 3 s^2 + 6 s + 2 = 0 (closed form): -1 - 1/sqrt(3).
    assert brk.point == pytest.approx(-1 - 1 / math.sqrt(3), abs=1e-12)
    assert brk.gain == pytest.approx(-2 / (3 * math.sqrt(3)), rel=1e-12)


def test_negative_leading_numerator_flips_the_rules():
    # -K/(s(s+1)(s+2)) for K > 0 is the K < 0 locus of K/(s(s+1)(s+2))
    # (same polynomial D + K N), so every fact must agree.
    a = locus_facts([-1.0], [1.0, 3.0, 2.0, 0.0])
    b = locus_facts([1.0], [1.0, 3.0, 2.0, 0.0], negative=True)
    assert a.segments == b.segments
    assert a.asymptote_angles == pytest.approx(b.asymptote_angles)
    assert a.breakaways[0].point == pytest.approx(b.breakaways[0].point)
    assert a.breakaways[0].gain == pytest.approx(-b.breakaways[0].gain)


def test_z_plane_breakaway_and_break_in_against_sympy():
    # L = K (z + 0.5)/((z - 1)(z - 0.5)): roots of N'D - ND' and K = -D/N
    # solved exactly by sympy (the algebra is the same in z).
    z = sp.symbols("z")
    n_expr = z + sp.Rational(1, 2)
    d_expr = (z - 1) * (z - sp.Rational(1, 2))
    points = sp.solve(sp.diff(n_expr, z) * d_expr - n_expr * sp.diff(d_expr, z), z)
    expected = sorted((float(p), float(-d_expr.subs(z, p) / n_expr.subs(z, p))) for p in points)
    facts = locus_facts([1.0, 0.5], [1.0, -1.5, 0.5], ts=0.01)
    got = sorted((b.point.real, b.gain) for b in facts.breakaways)
    assert len(got) == 2
    for (p, k), (gp, gk) in zip(expected, got):
        assert gp == pytest.approx(p, abs=1e-12) and gk == pytest.approx(k, rel=1e-10)
    kinds = {round(b.point.real, 3): b.kind for b in facts.breakaways}
    assert kinds[round(expected[1][0], 3)] == "breakaway"  # between the poles 0.5 and 1
    assert kinds[round(expected[0][0], 3)] == "break-in"
    assert facts.plane == "z"
    assert facts.segments == ((-math.inf, -0.5), (0.5, 1.0))


def test_unit_circle_crossings_against_closed_form():
    # D + K N = z^2 + (K - 1.5) z + 0.5 + 0.5 K.  Complex roots on |z| = 1
    # need a product of roots 0.5 + 0.5 K = 1, so K = 1 and
    # cos(theta) = -(K - 1.5)/2 = 0.25; a root at z = -1 needs
    # 1 - (K - 1.5) + 0.5 + 0.5 K = 0, so K = 6 (closed form, Jury-type
    # boundary conditions).
    ts = 0.01
    facts = locus_facts([1.0, 0.5], [1.0, -1.5, 0.5], ts=ts)
    got = sorted((c.gain, c.theta, c.omega) for c in facts.crossings)
    assert len(got) == 2
    assert got[0][0] == pytest.approx(1.0, rel=1e-12)
    assert got[0][1] == pytest.approx(math.acos(0.25), rel=1e-12)
    assert got[0][2] == pytest.approx(math.acos(0.25) / ts, rel=1e-12)
    assert got[1][0] == pytest.approx(6.0, rel=1e-12)
    assert got[1][1] == pytest.approx(math.pi, rel=1e-12)
    # The pole at z = 1 moves inside at once (segment (0.5, 1)), so the loop
    # is stable for 0 < K < 1.
    ((lo, hi),) = facts.stable_gain_intervals
    assert lo == 0.0 and hi == pytest.approx(1.0, rel=1e-12)


def test_delta_form_gives_the_same_facts_at_moderate_sampling():
    # z = 1 + ts g applied to the loop above: N(z) = z + 0.5 becomes
    # ts g + 1.5, D(z) = (z - 1)(z - 0.5) becomes ts g (ts g + 0.5)
    # (exact substitution); divide both by ts^2 to make D monic in g.
    ts = 0.01
    delta_num = np.array([ts, 1.5]) / ts**2
    delta_den = np.polymul([ts, 0.0], [ts, 0.5]) / ts**2
    plain = locus_facts([1.0, 0.5], [1.0, -1.5, 0.5], ts=ts)
    with_delta = locus_facts([1.0, 0.5], [1.0, -1.5, 0.5], ts=ts, delta=(delta_num, delta_den))
    assert [p.value for p in with_delta.poles] == pytest.approx([p.value for p in plain.poles], abs=1e-12)
    assert [c.gain for c in with_delta.crossings] == pytest.approx([c.gain for c in plain.crossings], rel=1e-9)


def test_off_axis_breakaways_of_symmetric_four_pole_loop():
    # K/((s^2 + 2s + 2)(s^2 + 2s + 5))... here the classic symmetric case
    # K/(s (s+2) (s^2 + 2 s + 2)) has N'D - ND' = -(4 s^3 + 12 s^2 + 12 s + 4)
    # = -4 (s+1)^3 ... not off-axis.  Use K/((s+1)^2 + 1)((s+1)^2 + 4)): by
    # symmetry about s = -1, B = -D' has roots -1 and -1 +- j sqrt(5/2)
    # (closed form of d/dx[(x^2+1)(x^2+4)] = 2x(2x^2+5)), x = s + 1.
    den = np.polymul([1.0, 2.0, 2.0], [1.0, 2.0, 5.0])
    facts = locus_facts([1.0], den)
    # At x = +-j sqrt(5/2): K = -D = -(1 - 5/2)(4 - 5/2) = 9/4 > 0 (real).
    off = [b for b in facts.breakaways if b.kind == "off-axis"]
    assert sorted(b.point.imag for b in off) == pytest.approx([-math.sqrt(2.5), math.sqrt(2.5)], abs=1e-9)
    assert all(b.point.real == pytest.approx(-1.0, abs=1e-9) for b in off)
    assert all(b.gain == pytest.approx(2.25, rel=1e-9) for b in off)
    # x = 0 gives K = -D(-1) = -4 < 0: not on the K > 0 locus.
    assert all(b.kind == "off-axis" for b in facts.breakaways)


def test_cluster_tolerance_merges_numerical_repeats_only():
    # numpy's eigenvalue roots of (s+3)^5 spread by ~1e-3; a double root at
    # 1000 next to a double at 1 stay two groups; 0.9989 and 0.999 stay apart.
    (five,) = cluster_roots(np.roots(np.poly([-3.0] * 5)))
    assert five.multiplicity == 5 and five.value == pytest.approx(-3.0, abs=1e-9)
    groups = cluster_roots(np.roots(np.poly([-1000.0, -1000.0, -1.0, -1.0])))
    assert [g.multiplicity for g in groups] == [2, 2]
    assert len(cluster_roots(np.roots(np.poly([0.999, 0.9989, 0.5])))) == 3


def test_to_dict_is_strict_json_with_documented_keys():
    facts = locus_facts([1.0, 2.0], [1.0, 2.0, 3.0])
    data = facts.to_dict()
    text = json.dumps(data, allow_nan=False)
    assert json.loads(text) == data
    assert set(data) == {
        "plane", "ts", "gain_sign", "num", "den", "poles", "zeros", "real_axis_segments",
        "asymptotes", "breakaways", "crossings", "departure_angles", "arrival_angles",
        "stable_gain_intervals", "warnings",
    }
    assert data["real_axis_segments"] == [[None, -2.0]]
    for key in data:
        assert key in type(facts).to_dict.__doc__


def test_near_cancellation_is_reported_as_a_warning():
    facts = locus_facts([1.0, 1.0], np.poly([-1.0, -2.0, 0.0]))
    assert any("cancel" in w for w in facts.warnings)


@pytest.mark.parametrize(
    "num,den,match",
    [
        ([1, 2, 3], [1, 2], "improper"),
        ([0, 0], [1, 2], "identically zero"),
        ([1], [3], "no poles"),
        ([1], [1, np.inf], "finite"),
    ],
)
def test_bad_loops_are_refused(num, den, match):
    with pytest.raises(InputError, match=match):
        locus_facts(num, den)


def test_bad_sample_period_is_refused():
    with pytest.raises(InputError, match="sample period"):
        locus_facts([1.0], [1.0, -0.5], ts=-1.0)


# ---------------------------------------------------------------------------
# Properties over random loops of order 2-8


@st.composite
def random_loops(draw):
    order = draw(st.integers(2, 8))
    coord = st.floats(-4.0, 4.0, allow_nan=False).map(lambda v: round(v, 3))
    poles = []
    while len(poles) < order:
        if order - len(poles) >= 2 and draw(st.booleans()):
            re, im = draw(coord), draw(st.floats(0.2, 4.0).map(lambda v: round(v, 3)))
            poles += [complex(re, im), complex(re, -im)]
        else:
            poles.append(complex(draw(coord), 0.0))
    n_zeros = draw(st.integers(0, order - 1))
    zeros = [complex(draw(coord), 0.0) for _ in range(n_zeros)]
    roots = poles + zeros
    gaps = [abs(a - b) for i, a in enumerate(roots) for b in roots[i + 1:]]
    assume(not gaps or min(gaps) > 0.1)
    gain_sign = draw(st.sampled_from([1.0, -1.0]))
    num = gain_sign * np.real(np.poly(zeros)) if zeros else np.array([gain_sign])
    return num, np.real(np.poly(poles)), draw(st.booleans())


@given(random_loops())
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
def test_breakaways_are_double_roots_of_the_closed_loop(loop):
    num, den, negative = loop
    facts = locus_facts(num, den, negative=negative)
    for brk in facts.breakaways:
        assert (brk.gain < 0) == negative
        # Independent: roots of D + K N by numpy's eigenvalue solver.
        closed = np.polyadd(den, brk.gain * num)
        roots = np.roots(closed)
        scale = max(1.0, abs(brk.point))
        near = np.sort(np.abs(roots - brk.point))
        assert near[1] < 1e-4 * scale * max(1.0, np.max(np.abs(roots))), (brk, roots)
        if brk.kind in ("breakaway", "break-in"):
            # |K(x)| = |D/N| along the real axis peaks at a breakaway and dips
            # at a break-in (magnitude condition, evaluated directly).
            x, h = brk.point.real, 1e-3 * max(1.0, abs(brk.point.real))
            side = np.abs(np.polyval(den, [x - h, x + h]) / np.polyval(num, [x - h, x + h]))
            if brk.kind == "breakaway":
                assert np.all(side < abs(brk.gain)), (brk, side)
            else:
                assert np.all(side > abs(brk.gain)), (brk, side)


@given(random_loops(), st.booleans())
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
def test_crossings_are_closed_loop_roots(loop, sampled):
    num, den, negative = loop
    ts = None
    if sampled:
        # Reuse the random polynomial as a z-plane loop (scaled into and
        # around the unit disc, so crossings exist).
        den = den * (0.25 ** np.arange(den.size))
        num = num * (0.25 ** np.arange(den.size - num.size, den.size))
        ts = 0.05
    facts = locus_facts(num, den, ts=ts, negative=negative)
    for cross in facts.crossings:
        assert (cross.gain < 0) == negative
        if ts is None:
            assert cross.point.real == 0.0
        else:
            assert abs(cross.point) == pytest.approx(1.0, abs=1e-14)
            assert cross.omega == pytest.approx(cross.theta / ts)
        # Independent: numpy roots of D + K N contain the reported point.
        roots = np.roots(np.polyadd(den, cross.gain * num))
        assert np.min(np.abs(roots - cross.point)) < 1e-6 * max(1.0, np.max(np.abs(roots))), (cross, roots)


@given(random_loops())
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
def test_departure_angles_match_small_gain_root_motion(loop):
    num, den, negative = loop
    facts = locus_facts(num, den, negative=negative)
    poles = np.array([p.value for p in facts.poles])
    for dep in facts.departures:
        p = dep.at
        assert dep.multiplicity == 1  # the strategy keeps poles apart
        others = np.abs(np.concatenate([poles[poles != p], np.roots(num) if len(num) > 1 else []]) - p)
        reach = 1e-5 * (others.min() if others.size else 1.0)
        # First-order motion dp = -K N(p)/D'(p): choose |K| for a step of
        # about `reach`, far above rounding and far below other roots.
        k = reach * abs(np.polyval(np.polyder(den), p) / np.polyval(num, p))
        k = -k if negative else k
        roots = np.roots(np.polyadd(den, k * num))
        moved = roots[np.argmin(np.abs(roots - p))]
        direction = math.degrees(np.angle(moved - p))
        assert angles_close(direction, dep.angles[0], tol=0.05), (dep, direction)


@given(random_loops())
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
def test_real_axis_segments_agree_with_real_gain_sign(loop):
    # A real x is on the locus iff K = -D(x)/N(x) has the requested sign
    # (magnitude condition with a real point): sample points in each
    # reported segment and in the gaps between them.
    num, den, negative = loop
    facts = locus_facts(num, den, negative=negative)
    xs = np.linspace(-6.0, 6.0, 241) + 0.0123
    k = -np.polyval(den, xs) / np.polyval(num, xs)
    on = (k < 0) if negative else (k > 0)
    inside = np.zeros_like(xs, dtype=bool)
    for lo, hi in facts.segments:
        inside |= (xs > lo) & (xs < hi)
    assert np.array_equal(on, inside)


@pytest.mark.parametrize("m", [2, 3])
def test_repeated_pole_angles_match_small_gain_root_motion(m):
    # Independent numeric check: roots of D + K N at a tiny gain (numpy)
    # leave a pole of multiplicity m along m rays.  L = K (s + 2)/((s + 1)^m (s + 4)).
    num = np.array([1.0, 2.0])
    den = np.poly([-1.0] * m + [-4.0])
    facts = locus_facts(num, den)
    (dep,) = [d for d in facts.departures if d.multiplicity == m]
    k = 1e-9
    roots = np.roots(np.polyadd(den, k * num))
    near = roots[np.argsort(np.abs(roots + 1.0))[:m]]
    observed = sorted(float(normalize_angle(math.degrees(np.angle(r + 1.0)))) for r in near)
    for got, want in zip(observed, dep.angles):
        assert angles_close(got, want, tol=1.0), (observed, dep.angles)


def test_departure_angle_matches_traced_branch():
    # The tracer (gainloom.lti.trace, an independent path: batched roots
    # matched along the gain) leaves -1 + j sqrt(2) of K(s+2)/(s^2+2s+3) in
    # the reported direction.
    from gainloom.lti.loop import Loop
    from gainloom.lti.trace import trace_locus

    facts = locus_facts([1.0, 2.0], [1.0, 2.0, 3.0])
    traced = trace_locus(Loop(num=[1.0, 2.0], den=[1.0, 2.0, 3.0]))
    roots = traced.roots[0, : int(traced.counts[0])]
    pole = complex(-1.0, math.sqrt(2.0))
    branch = int(np.argmin(np.abs(roots[0] - pole)))
    moved = roots[1:, branch]
    first = moved[np.abs(moved - pole) > 1e-9][0]
    direction = math.degrees(np.angle(first - pole))
    upper = [d for d in facts.departures if d.at.imag > 0][0]
    assert angles_close(direction, upper.angles[0], tol=2.0), (direction, upper.angles)


def test_three_branches_meet_at_one_real_point():
    # D + K N = s^3 + 3 s^2 + 3 s + K = (s + 1)^3 + (K - 1): a triple
    # closed-loop root at s = -1 when K = 1 (closed form), where three
    # branches meet; neither a plain breakaway nor a break-in.
    facts = locus_facts([1.0], [1.0, 3.0, 3.0, 0.0])
    (brk,) = facts.breakaways
    assert brk.point == pytest.approx(-1.0, abs=1e-6)
    assert brk.gain == pytest.approx(1.0, rel=1e-9)
    assert brk.kind == "meeting"


def test_delay_pole_from_the_delta_form_is_exactly_at_the_origin():
    # One sample of computation delay is a factor z^-1 (definition of the
    # delay): its pole is exactly z = 0, not an eps-sized mapping residue.
    from gainloom import Loop
    from gainloom.lti.discretize import discretize_loop

    sampled = discretize_loop(Loop([1.0], [1.0, 3.0, 2.0, 0.0]), 0.1, method="zoh", delay=1)
    facts = locus_facts(sampled.num[0], sampled.den[0], ts=0.1, delta=(sampled.delta_num[0], sampled.delta_den[0]))
    assert any(p.value == 0 for p in facts.poles)

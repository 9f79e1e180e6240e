"""Spec regions: membership in s and z, conventions, and boundary images."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainloom import InputError
from gainloom.lti.regions import SpecRegion


def test_s_plane_membership_by_definition():
    # zeta = -Re s/|s|, sigma = -Re s, wn = |s| (definitions).
    region = SpecRegion(min_damping=0.5, min_decay=1.0, wn_range=(1.0, 10.0))
    poles = np.array(
        [
            -2 + 2j,  # zeta 0.707, sigma 2, wn 2.83: inside
            -1 + 3j,  # zeta 0.316: too little damping
            -0.5,  # sigma 0.5: too slow
            -20.0,  # wn 20: too fast
            1 + 0j,  # unstable
            -3 - 1j,  # inside
        ]
    )
    np.testing.assert_array_equal(region.contains(poles), [True, False, False, False, False, True])


def test_contains_is_vectorised_and_keeps_shape():
    # zeta of -1 + 1j is 0.707, of -1 + 10j about 0.0995 (definition).
    region = SpecRegion(min_damping=0.3)
    poles = np.array([[-1 + 1j, -1 + 10j], [-0.1, 0.1]])
    np.testing.assert_array_equal(region.contains(poles), [[True, False], [True, False]])


def test_damping_ray_maps_onto_z_spiral():
    # A pole on the s-plane ray s = w(-zeta + j sqrt(1 - zeta^2)) maps under
    # z = exp(s ts) onto the constant-damping log-spiral (definition of the
    # mapping; the spiral is drawn from the same formula, so check instead
    # that |z| = exp(-zeta/sqrt(1-zeta^2) * angle(z)), the spiral's polar
    # equation derived by hand).
    zeta, ts = 0.4, 0.01
    root = math.sqrt(1 - zeta**2)
    w = np.linspace(1.0, 0.99 * math.pi / (ts * root), 50)
    z = np.exp(w * (-zeta + 1j * root) * ts)
    np.testing.assert_allclose(np.abs(z), np.exp(-zeta / root * np.angle(z)), rtol=1e-12)
    spiral = SpecRegion(min_damping=zeta, ts=ts).boundary_curves(n=2000)[1]
    np.testing.assert_allclose(np.abs(spiral), np.exp(-zeta / root * np.angle(spiral)), rtol=1e-9, atol=1e-12)
    # The poles on the ray are on the boundary: slightly more damping is in,
    # slightly less is out, in both planes.
    tighter = SpecRegion(min_damping=zeta + 1e-6, ts=ts)
    looser = SpecRegion(min_damping=zeta - 1e-6, ts=ts)
    assert not np.any(tighter.contains(z)) and np.all(looser.contains(z))
    assert not np.any(tighter.with_period(None).contains(np.log(z) / ts))


@settings(max_examples=60, deadline=None)
@given(
    st.integers(0, 2**32 - 1),
    st.floats(0.0, 0.9),
    st.floats(0.0, 3.0),
    st.floats(0.0, 5.0),
    st.floats(10.0, 200.0),
    st.floats(1e-3, 0.02),
)
def test_contains_agrees_in_s_and_z(seed, zeta, sigma, wn_low, wn_high, ts):
    # The same poles, given as s in the principal strip or as z = exp(s ts),
    # are classified alike (the z-plane reading is defined through ln z/ts).
    rng = np.random.default_rng(seed)
    s = rng.uniform(-300, 30, 200) + 1j * rng.uniform(-0.999, 0.999, 200) * math.pi / ts
    z = np.exp(s * ts)
    s_region = SpecRegion(min_damping=zeta, min_decay=sigma, wn_range=(wn_low, wn_high))
    z_region = s_region.with_period(ts)
    in_s = s_region.contains(s)
    in_z = z_region.contains(z)
    # Skip poles within rounding of a boundary.
    mod = np.abs(s)
    margin = np.min(
        np.abs(
            np.stack(
                [-s.real / mod - zeta, -s.real - sigma, mod - wn_low, wn_high - mod, s.real]
            )
        ),
        axis=0,
    )
    clear = margin > 1e-6 * np.maximum(1.0, mod)
    np.testing.assert_array_equal(in_s[clear], in_z[clear])


def test_z_plane_conventions():
    region = SpecRegion(min_damping=0.5, ts=0.001)
    # z = 0 has zeta = 1 (documented convention): inside a damping spec ...
    assert region.contains([0.0])[0]
    # ... but its wn is infinite, so any finite wn limit excludes it.
    assert not SpecRegion(wn_range=(0.0, 1e5), ts=0.001).contains([0.0])[0]
    # A real negative pole -a is s = (ln a + j pi)/ts (principal log):
    # zeta = -ln a / sqrt(ln^2 a + pi^2) < 1 (by hand).
    a = 0.2
    zeta = -math.log(a) / math.hypot(math.log(a), math.pi)
    assert SpecRegion(min_damping=zeta - 1e-9, ts=0.001).contains([-a])[0]
    assert not SpecRegion(min_damping=zeta + 1e-9, ts=0.001).contains([-a])[0]
    # z = 1 (s = 0) is never inside: strict stability.
    assert not SpecRegion(ts=0.001).contains([1.0])[0]


def test_pole_radius_spec():
    # |z| <= 0.9 (definition of the radius spec); all three are stable.
    region = SpecRegion(max_pole_radius=0.9, ts=0.01)
    np.testing.assert_array_equal(region.contains([0.85, 0.95j, -0.89]), [True, False, True])
    with pytest.raises(InputError, match="max_pole_radius"):
        SpecRegion(max_pole_radius=0.9).contains([-1.0])


def test_boundary_curves_lie_on_their_specs():
    ts = 0.002
    region = SpecRegion(min_damping=0.3, min_decay=50.0, wn_range=(100.0, 2500.0), max_pole_radius=0.95, ts=ts)
    curves = region.boundary_curves(n=300)
    # decay circle, two spirals, wn contours (high one clipped: 2500*0.002 > pi
    # so two arcs, each with its mirror), radius circle
    assert len(curves) == 1 + 2 + 2 + 4 + 1
    np.testing.assert_allclose(np.abs(curves[0]), math.exp(-50.0 * ts), rtol=1e-12)
    for arc in curves[3:5]:
        np.testing.assert_allclose(np.abs(np.log(arc)) / ts, 100.0, rtol=1e-9)
    for arc in curves[5:9]:
        s = np.log(arc) / ts
        np.testing.assert_allclose(np.abs(s), 2500.0, rtol=1e-9)
        assert np.all(np.abs(s.imag) <= math.pi / ts * (1 + 1e-12))
    np.testing.assert_allclose(np.abs(curves[-1]), 0.95)
    s_curves = region.with_period(None).boundary_curves(n=50)
    np.testing.assert_allclose(s_curves[0].real, -50.0)
    ray = s_curves[1][1:]
    np.testing.assert_allclose(-ray.real / np.abs(ray), 0.3, rtol=1e-12)


@pytest.mark.parametrize(
    "kwargs",
    [
        {"min_damping": 1.0},
        {"min_damping": -0.1},
        {"min_decay": -1.0},
        {"wn_range": (5.0, 1.0)},
        {"wn_range": "fast"},
        {"max_pole_radius": 1.5},
        {"ts": 0.0},
    ],
)
def test_bad_regions_are_refused(kwargs):
    with pytest.raises(InputError):
        SpecRegion(**kwargs)

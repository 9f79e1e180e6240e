"""Damping ratio and natural frequency of s- and z-plane poles."""

import cmath
import math

import control
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainloom.errors import InputError
from gainloom.lti.poles import damping_and_frequency


def second_order_poles(zeta, wn):
    # Standard second-order form s^2 + 2 zeta wn s + wn^2 (textbook closed
    # form): poles -zeta wn +- j wn sqrt(1 - zeta^2) for |zeta| < 1.
    return np.array([complex(-zeta * wn, wn * math.sqrt(1 - zeta**2)), complex(-zeta * wn, -wn * math.sqrt(1 - zeta**2))])


@pytest.mark.parametrize("zeta,wn", [(0.1, 3.0), (0.5, 1.0), (0.707, 20.0), (0.0, 5.0), (-0.3, 2.0), (0.99, 0.01)])
def test_s_plane_second_order_closed_form(zeta, wn):
    z_out, wn_out = damping_and_frequency(second_order_poles(zeta, wn))
    np.testing.assert_allclose(z_out, [zeta, zeta], atol=1e-12)
    np.testing.assert_allclose(wn_out, [wn, wn], rtol=1e-12)


def test_s_plane_real_poles():
    # A stable real pole is fully damped, an unstable one has zeta = -1
    # (definition zeta = -Re p / |p|).
    zeta, wn = damping_and_frequency([-4.0, 3.0])
    np.testing.assert_allclose(zeta, [1.0, -1.0])
    np.testing.assert_allclose(wn, [4.0, 3.0])


def test_origin_and_unit_point_conventions():
    # Documented conventions (our choice, see module docstring).
    assert damping_and_frequency(0.0) == (1.0, 0.0)
    zeta, wn = damping_and_frequency([1.0, 0.0], ts=0.01)
    np.testing.assert_array_equal(zeta, [1.0, 1.0])
    np.testing.assert_array_equal(wn, [0.0, np.inf])


@given(
    zeta=st.floats(-0.95, 0.999),
    wn=st.floats(0.1, 100.0),
    ts=st.floats(1e-4, 0.05),
)
@settings(max_examples=60, deadline=None)
def test_z_plane_matches_pole_mapping_z_equals_exp_s_ts(zeta, wn, ts):
    # Pole mapping z = exp(s ts) (exact for sampled modes; textbook closed
    # form).  Keep the s pole inside the primary strip |Im s| < pi/ts.
    p = second_order_poles(zeta, wn)
    if abs(p[0].imag) * ts >= math.pi * 0.999:
        return
    z = np.exp(p * ts)
    z_out, wn_out = damping_and_frequency(z, ts=ts)
    np.testing.assert_allclose(z_out, zeta, atol=1e-8)
    np.testing.assert_allclose(wn_out, wn, rtol=1e-8)


def test_negative_real_z_pole():
    # ln(-r) = ln r + j pi (principal log): wn = sqrt(ln r^2 + pi^2)/ts,
    # zeta = -ln r / sqrt(ln r^2 + pi^2) (closed form).
    r, ts = 0.5, 0.1
    zeta, wn = damping_and_frequency(-r, ts=ts)
    assert wn == pytest.approx(math.sqrt(math.log(r) ** 2 + math.pi**2) / ts, rel=1e-14)
    assert zeta == pytest.approx(-math.log(r) / math.sqrt(math.log(r) ** 2 + math.pi**2), rel=1e-14)
    assert 0 < zeta < 1


def test_unit_circle_gives_zero_damping():
    # |z| = 1 <=> Re(ln z) = 0 <=> zeta = 0 (definition).
    theta = np.linspace(0.05, math.pi, 9)
    zeta, wn = damping_and_frequency(np.exp(1j * theta), ts=0.002)
    np.testing.assert_allclose(zeta, 0.0, atol=1e-14)
    np.testing.assert_allclose(wn, theta / 0.002, rtol=1e-12)


def test_broadcast_shapes_and_per_point_periods():
    poles = np.array([[0.9 + 0.1j, 0.5], [-0.2, 0.99j]])
    ts = np.array([[0.1], [0.01]])
    zeta, wn = damping_and_frequency(poles, ts=ts)
    assert zeta.shape == wn.shape == (2, 2)
    # Independent: cmath principal log, same definition.
    for i in range(2):
        for j in range(2):
            s = cmath.log(poles[i, j]) / ts[i, 0]
            assert wn[i, j] == pytest.approx(abs(s), rel=1e-12)
            assert zeta[i, j] == pytest.approx(-s.real / abs(s), rel=1e-12)


def test_agrees_with_python_control_damp_where_conventions_agree():
    # python-control damp() maps z poles with s = log(z)/dt as well.  It
    # differs at s = 0 / z = 1 (it divides 0 by 0 and returns NaN with a
    # warning), so those are left out here.
    sys_c = control.tf([1.0], np.poly([-1 + 2j, -1 - 2j, -3, 0.5]).real)
    wn_ref, zeta_ref, poles = control.damp(sys_c, doprint=False)
    zeta, wn = damping_and_frequency(poles)
    np.testing.assert_allclose(zeta, zeta_ref, rtol=1e-12)
    np.testing.assert_allclose(wn, wn_ref, rtol=1e-12)

    sys_d = control.tf([1.0], np.poly([0.5, -0.5, 0.9 + 0.1j, 0.9 - 0.1j]).real, 0.1)
    wn_ref, zeta_ref, poles = control.damp(sys_d, doprint=False)
    zeta, wn = damping_and_frequency(poles, ts=0.1)
    np.testing.assert_allclose(zeta, zeta_ref, rtol=1e-12)
    np.testing.assert_allclose(wn, wn_ref, rtol=1e-12)


def test_bad_period_and_nan():
    with pytest.raises(InputError, match="sample period"):
        damping_and_frequency([0.5], ts=0.0)
    with pytest.raises(InputError, match="broadcast"):
        damping_and_frequency(np.ones((2, 3)), ts=[0.1, 0.2])
    zeta, wn = damping_and_frequency([complex(np.nan, 0.0)])
    assert np.isnan(zeta[0]) and np.isnan(wn[0])

"""Controller structures: C(z) against the difference equations of DEVELOPERS.md,
conversions between locus form, table coefficients and physical gains, and the
open loop against python-control."""

import control
import numpy as np
import pytest
import scipy.signal

from gainloom import InputError, Loop
from gainloom.design import structures as st
from gainloom.names import CONTROLLER_COEFFICIENTS, CONTROLLER_STRUCTURES

COEFFS = {
    "p": {"kp": 1.7},
    "pi": {"kp": 0.8, "ki_ts": 0.05},
    "pd": {"kp": 0.8, "kd_b": 2.0, "kd_a": 0.6},
    "pid": {"kp": 0.8, "ki_ts": 0.05, "kd_b": 2.0, "kd_a": 0.6},
    "lead": {"kc": 3.0, "zc": 0.9, "pc": 0.5},
    "lag": {"kc": 1.5, "zc": 0.95, "pc": 0.99},
    "leadlag": {"kc": 2.0, "zc1": 0.9, "pc1": 0.5, "zc2": 0.95, "pc2": 0.99},
}


def simulate_difference_equations(structure, c, e):
    """The difference equations exactly as DEVELOPERS.md writes them (no saturation)."""
    u = np.zeros_like(e)
    x = d = v = v2 = 0.0
    e_prev = w_prev = 0.0
    for k, ek in enumerate(e):
        if structure == "p":
            u[k] = c["kp"] * ek
        elif structure == "pi":
            x = x + c["ki_ts"] * ek
            u[k] = c["kp"] * ek + x
        elif structure == "pd":
            d = c["kd_a"] * d + c["kd_b"] * (ek - e_prev)
            u[k] = c["kp"] * ek + d
        elif structure == "pid":
            x = x + c["ki_ts"] * ek
            d = c["kd_a"] * d + c["kd_b"] * (ek - e_prev)
            u[k] = c["kp"] * ek + x + d
        elif structure in ("lead", "lag"):
            v = c["pc"] * v + c["kc"] * (ek - c["zc"] * e_prev)
            u[k] = v
        else:
            v = c["pc1"] * v + c["kc"] * (ek - c["zc1"] * e_prev)
            v2 = c["pc2"] * v2 + (v - c["zc2"] * w_prev)
            w_prev = v
            u[k] = v2
        e_prev = ek
    return u


@pytest.mark.parametrize("structure", CONTROLLER_STRUCTURES)
def test_controller_polynomials_match_difference_equations(structure):
    # Reference: scipy.signal.dlsim of C(z) versus a direct simulation of the
    # difference equations written in DEVELOPERS.md ("Discrete controller forms").
    c = COEFFS[structure]
    num, den = st.controller_polynomials(structure, c)
    e = np.random.default_rng(3).normal(size=40)
    _, y = scipy.signal.dlsim((num[0] if num.ndim > 1 else num, den, 1.0), e)
    np.testing.assert_allclose(y[:, 0], simulate_difference_equations(structure, c, e), rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("structure", CONTROLLER_STRUCTURES)
def test_locus_form_round_trip_and_value(structure):
    # Reference: the rational function's value at test points z, computed by
    # numpy.polyval from the coefficient form (closed form of C(z)).
    c = {k: np.array([v, v * 0.97]) for k, v in COEFFS[structure].items()}
    form = st.locus_from_coefficients(structure, c)
    back = st.coefficients_from_locus(structure, form)
    for name in CONTROLLER_COEFFICIENTS[structure]:
        np.testing.assert_allclose(back[name], c[name], rtol=1e-12, atol=1e-14)
    num, den = st.controller_polynomials(structure, c)
    z = 0.3 + 0.7j
    for p in range(2):
        value = np.polyval(num[p], z) / np.polyval(den[p], z)
        locus = form.gain[p] * np.polyval(form.zeros[p], z) / np.polyval(form.denominator[p], z)
        assert abs(value - locus) < 1e-12 * abs(value)


@pytest.mark.parametrize("structure", CONTROLLER_STRUCTURES)
def test_physical_round_trip(structure):
    ts = np.array([1e-4, 2e-4])
    c = {k: np.array([v, v]) for k, v in COEFFS[structure].items()}
    phys = st.physical_from_coefficients(structure, c, ts)
    back = st.coefficients_from_physical(structure, phys, ts)
    for name in CONTROLLER_COEFFICIENTS[structure]:
        np.testing.assert_allclose(back[name], c[name], rtol=1e-12)


def test_pi_physical_gains_definition():
    # DEVELOPERS.md: ki_ts = ki * ts; the integrator is backward Euler, so
    # C(z) = kp + ki ts z/(z-1) (closed form).
    ts = 1e-3
    c = st.coefficients_from_physical("pi", {"kp": 2.0, "ki": 50.0}, ts)
    assert c["ki_ts"] == pytest.approx(0.05)
    pd = st.coefficients_from_physical("pd", {"kp": 1.0, "kd": 0.01, "tf": 0.002}, ts)
    assert pd["kd_a"] == pytest.approx(2 / 3)
    assert pd["kd_b"] == pytest.approx(0.01 / 0.003)


@pytest.mark.parametrize("structure", CONTROLLER_STRUCTURES)
def test_delta_form_is_the_same_rational_function(structure):
    # Reference: closed form C(z) evaluated at z = 1 + ts g (numpy.polyval).
    ts = 1e-3
    num, den = st.controller_polynomials(structure, COEFFS[structure])
    dnum, dden = st.controller_delta_polynomials(structure, COEFFS[structure], np.array(ts))
    g = (0.93 + 0.2j - 1) / ts
    z = 1 + ts * g
    a = np.polyval(np.ravel(num), z) / np.polyval(np.ravel(den), z)
    b = np.polyval(np.ravel(dnum), g) / np.polyval(np.ravel(dden), g)
    assert abs(a - b) < 1e-10 * abs(a)


def test_open_loop_matches_python_control_series():
    # Reference: python-control series() and feedback() closed-loop poles.
    ts = 1e-3
    plant = control.c2d(control.tf([200.0], [1.0, 30.0, 200.0]), ts)
    loop = Loop.from_control([plant, plant])
    c = {"kp": np.array([0.5, 1.0]), "ki_ts": np.array([0.01, 0.02])}
    open_ = st.open_loop(loop, "pi", c)
    assert open_.points == 2 and np.all(open_.ts == ts)
    for p in range(2):
        controller = control.tf([c["kp"][p] + c["ki_ts"][p], -c["kp"][p]], [1.0, -1.0], ts)
        expected = np.sort_complex(control.feedback(controller * plant, 1).poles())
        got = np.sort_complex(np.roots(open_.den[p] + open_.num[p]))
        np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-12)


def test_open_loop_refuses_continuous_plant_and_bad_names():
    with pytest.raises(InputError, match="discretise"):
        st.open_loop(Loop(num=[1.0], den=[1.0, 1.0]), "p", {"kp": 1.0})
    with pytest.raises(InputError, match="unknown controller structure"):
        st.controller_polynomials("pidd", {"kp": 1.0})
    with pytest.raises(InputError, match="missing"):
        st.controller_polynomials("pi", {"kp": 1.0})


def test_continuous_pid_locus_to_physical():
    # Closed form: K (s + c)/s = K + K c / s, so kp = K, ki = K c.
    g = st.continuous_physical_from_locus("pi", np.array(2.0), np.array([1.0, 5.0]))
    assert g["kp"] == pytest.approx(2.0) and g["ki"] == pytest.approx(10.0)
    # PID: value of kp + ki/s + kd s/(tf s + 1) equals K Z(s)/(s (s + 1/tf)).
    tf = 0.01
    K, Z = 3.0, np.array([1.0, 40.0, 300.0])
    g = st.continuous_physical_from_locus("pid", np.array(K), Z, tf)
    s = 7.0 + 3.0j
    value = g["kp"] + g["ki"] / s + g["kd"] * s / (tf * s + 1)
    locus = K * np.polyval(Z, s) / (s * (s + 1 / tf))
    assert abs(value - locus) < 1e-10 * abs(value)

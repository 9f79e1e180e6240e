"""Models interpolated through gain, poles and zeros on log scales (lti/root_blend.py)."""

import control as ct
import numpy as np
import pytest

from gainloom.lti.root_blend import coefficients_at, root_coordinates


def _blend(num, den, t):
    coordinates = root_coordinates(np.asarray(num, float), np.asarray(den, float))
    assert coordinates is not None
    values = (1 - t) * coordinates.values[0] + t * coordinates.values[1]
    return coefficients_at(coordinates, values[np.newaxis, :])


def test_grid_points_come_back_as_they_went_in():
    # a pair, two real poles, a real zero and a complex zero pair (mixed structure, same at both points)
    den = np.array([np.poly([-2, -300, -40 + 90j, -40 - 90j]).real, np.poly([-1, -310, -35 + 80j, -35 - 80j]).real])
    num = np.array([[0, 5.0, 1.5e3, 9e6, 2e8], [0, 4.0, 1.1e3, 7e6, 1.7e8]])
    coordinates = root_coordinates(num, den)
    assert coordinates is not None
    back_num, back_den = coefficients_at(coordinates, coordinates.values)
    # the same transfer functions: responses agree with python-control's on the inputs
    w = np.geomspace(0.1, 1e4, 50)
    for p in range(2):
        expected = ct.frequency_response(ct.tf(num[p], den[p]), w)
        got = ct.frequency_response(ct.tf(back_num[p], back_den[p]), w)
        np.testing.assert_allclose(got.complex, expected.complex, rtol=1e-9)


def test_a_pole_that_moves_as_one_over_inertia_goes_geometrically():
    # P = 1 / (J s + B): pole -B/J, gain 1/J.  Midway between J = 1 and 2 the blend gives the
    # geometric mean, J = sqrt(2) (closed form of log-linear interpolation), where the
    # coefficients give the arithmetic mean of 1/J (J = 4/3): 6.1 % and 12.5 % above the
    # truth at J = 1.5 (textbook algebra).
    b = 0.5
    num = np.array([[0.0, 1.0], [0.0, 0.5]])
    den = np.array([[1.0, b], [1.0, b / 2]])
    blend_num, blend_den = _blend(num, den, 0.5)
    assert blend_den[0, 1] == pytest.approx(b / np.sqrt(2), rel=1e-12)
    assert blend_num[0, 1] == pytest.approx(1 / np.sqrt(2), rel=1e-12)
    assert blend_num[0, 1] / (1 / 1.5) - 1 == pytest.approx(0.0607, abs=1e-4)
    assert 0.5 * (num[0, 1] + num[1, 1]) / (1 / 1.5) - 1 == pytest.approx(0.125, abs=1e-4)


def test_pairs_keep_their_damping_between_points():
    # a resonance moving from 300 to 600 rad/s at damping 0.05: midway 424 rad/s (geometric), zeta 0.05
    den = np.array([[1.0, 2 * 0.05 * 300, 300.0**2], [1.0, 2 * 0.05 * 600, 600.0**2]])
    num = np.array([[0.0, 0.0, 300.0**2], [0.0, 0.0, 600.0**2]])
    _, blend_den = _blend(num, den, 0.5)
    pole = np.roots(blend_den[0])[0]
    assert abs(pole) == pytest.approx(np.sqrt(300 * 600), rel=1e-12)
    assert -pole.real / abs(pole) == pytest.approx(0.05, rel=1e-12)
    # the coefficients give wn = sqrt((300^2 + 600^2)/2) = 474 and zeta 0.0474: another resonance
    linear = 0.5 * (den[0] + den[1])
    assert np.sqrt(linear[2]) == pytest.approx(474.3, abs=0.1)


def test_the_blend_stays_stable_where_the_coefficient_segment_does_not():
    # two stable cubics s^3 + a s^2 + b s + c whose coefficient segment leaves the
    # Hurwitz set: Routh's condition a b > c fails at t = 0.95 (textbook closed form);
    # both have one real pole and one pair, so the blend applies
    first = np.poly([-24.0, -10 + 10j, -10 - 10j]).real  # a = 44, b = 680, c = 4800
    second = np.poly([-0.2, -0.1 + 0.5j, -0.1 - 0.5j]).real
    t = 0.95
    a, b, c = ((1 - t) * first + t * second)[1:]
    assert a * b < c
    den = np.array([first, second])
    num = np.array([[0, 0, 0, 4800.0], [0, 0, 0, second[-1]]])
    for t in np.linspace(0, 1, 41):
        _, blend_den = _blend(num, den, t)
        assert np.max(np.roots(blend_den[0]).real) < 0  # roots from numpy, not from the blend


def test_different_structures_are_refused():
    # a real pair at one point, a complex pair at the other: no common coordinates
    den = np.array([np.poly([-1.0, -4.0]).real, np.poly([-2 + 1j, -2 - 1j]).real])
    assert root_coordinates(np.array([[0, 0, 1.0], [0, 0, 1.0]]), den) is None
    # a gain that changes sign
    assert root_coordinates(np.array([[0, 1.0], [0, -1.0]]), np.array([[1.0, 1.0], [1.0, 2.0]])) is None

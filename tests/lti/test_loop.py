"""The loop representation and the batched polynomial helpers."""

import control
import numpy as np
import pytest

from gainloom import InputError, Loop
from gainloom.lti.polynomials import batched_roots, characteristic


def test_batched_roots_match_numpy_roots():
    # Reference: numpy.roots (reference library), polynomial by polynomial.
    rng = np.random.default_rng(7)
    coeffs = rng.normal(size=(5, 3, 7))
    coeffs[..., 0] += 3.0
    roots = batched_roots(coeffs)
    for index in np.ndindex(coeffs.shape[:-1]):
        expected = np.sort_complex(np.roots(coeffs[index]))
        np.testing.assert_allclose(np.sort_complex(roots[index]), expected, rtol=1e-9, atol=1e-12)


def test_characteristic_is_den_plus_gain_times_num():
    num = np.array([[2.0, 1.0]])
    den = np.array([[1.0, 3.0, 2.0]])
    poly = characteristic(num, den, np.array([0.0, 0.5]))
    np.testing.assert_allclose(poly[0, 0], [1, 3, 2])
    np.testing.assert_allclose(poly[0, 1], [1, 4, 2.5])


def test_loop_round_trips_through_python_control():
    # Reference: python-control feedback() closed-loop poles.
    plant = control.tf([1.0, 2.0], [1.0, 0.5, 3.0, 1.0], 1e-3)
    loop = Loop.from_control(plant)
    assert loop.is_discrete and loop.points == 1 and loop.order == 3
    back = loop.to_control()
    np.testing.assert_allclose(
        np.sort_complex(control.feedback(back, 1).poles()),
        np.sort_complex(control.feedback(plant, 1).poles()),
    )


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"num": [1, 2, 3], "den": [1, 2]}, "improper"),
        ({"num": [1], "den": [0, 1]}, "leading denominator"),
        ({"num": [1], "den": [1, 1], "ts": 0.0}, "sample period"),
        ({"num": [np.nan], "den": [1, 1]}, "finite"),
    ],
)
def test_loop_refuses_bad_coefficients(kwargs, fragment):
    with pytest.raises(InputError, match=fragment):
        Loop(**kwargs)

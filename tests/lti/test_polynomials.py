"""The batched polynomial helpers against numpy's one-at-a-time versions."""

from __future__ import annotations

import numpy as np

from gainloom.lti.polynomials import polymul


def test_polymul_matches_numpy_row_by_row_with_broadcasting_and_complex_factors():
    rng = np.random.default_rng(7)
    a = rng.normal(size=(4, 1, 3))
    b = rng.normal(size=(5, 4)) + 1j * rng.normal(size=(5, 4))
    product = polymul(a, b)
    assert product.shape == (4, 5, 6) and np.iscomplexobj(product)
    for i in range(4):
        for j in range(5):
            # reference: numpy.polymul, descending coefficients, one pair at a time
            np.testing.assert_allclose(product[i, j], np.polymul(a[i, 0], b[j]), rtol=1e-14, atol=1e-14)


def test_polymul_of_integer_coefficients_is_float():
    # (z - 1)(z + 2) = z^2 + z - 2 (closed form)
    product = polymul(np.array([[1, -1]]), np.array([[1, 2]]))
    assert product.dtype == np.float64
    np.testing.assert_array_equal(product, [[1.0, 1.0, -2.0]])

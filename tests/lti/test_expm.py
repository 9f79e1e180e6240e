"""Batched matrix exponential against scipy.linalg.expm (reference library)."""

import numpy as np
import pytest
import scipy.linalg

from gainloom.lti.expm import batched_expm


@pytest.mark.parametrize(("scale", "unstable"), [(1e-6, True), (1e-2, True), (1.0, True), (30.0, True), (1e3, False)])
def test_matches_scipy_expm_across_scales(scale, unstable):
    # Reference: scipy.linalg.expm, matrix by matrix.
    rng = np.random.default_rng(11)
    stack = rng.normal(size=(40, 6, 6)) * scale
    stack[:: 3 if unstable else 1] -= 4 * scale * np.eye(6)  # some stable, some not
    ours = batched_expm(stack)
    for a, e in zip(stack, ours):
        ref = scipy.linalg.expm(a)
        np.testing.assert_allclose(e, ref, rtol=1e-9 * max(1.0, scale), atol=1e-12 * np.abs(ref).max())


def test_closed_forms():
    # Closed forms: exp of a rotation generator is a rotation; exp of a
    # nilpotent Jordan block is I + N (matrix exponential series).
    theta = 0.7
    rotation = np.array([[0.0, -theta], [theta, 0.0]])
    nilpotent = np.array([[0.0, 2.0], [0.0, 0.0]])
    got = batched_expm(np.stack([rotation, nilpotent]))
    np.testing.assert_allclose(got[0], [[np.cos(theta), -np.sin(theta)], [np.sin(theta), np.cos(theta)]], atol=1e-15)
    np.testing.assert_allclose(got[1], [[1.0, 2.0], [0.0, 1.0]], atol=1e-15)


def test_mixed_scales_in_one_stack_do_not_interfere():
    small = np.diag([-1e-3, -2e-3])
    large = np.diag([-50.0, 40.0])
    got = batched_expm(np.stack([small, large]))
    np.testing.assert_allclose(got[0], np.diag(np.exp([-1e-3, -2e-3])), rtol=1e-14)
    np.testing.assert_allclose(got[1], np.diag(np.exp([-50.0, 40.0])), rtol=1e-12)

"""Dominant-pole selection for the damping spec, re-checked with numpy roots."""

from __future__ import annotations

import math

import numpy as np
import pytest

from gainloom import Loop
from gainloom.design.analysis import analyse, pole_metrics
from gainloom.design.dominant import DOMINANCE_RATIO, FAST_FACTOR, judged_poles
from gainloom.design.spec_limits import SpecLimits

TS = 1e-4
# Invented sampled plant: a slow pole at z = 0.99, two samples of delay
# (z = 0 twice) and a sampling zero at z = -1: P = (z + 1)/(z^2 (z - 0.99)).
PLANT = Loop(num=[0.0, 0.0, 1.0, 1.0], den=[1.0, -0.99, 0.0, 0.0], ts=TS, hold="zoh", delay=2.0)
KP = 0.05


def _limits(selection: str) -> SpecLimits:
    values = {"min_damping": np.array([0.6])}
    return SpecLimits.from_values(values, 1, poles=selection)


def _closed_loop_roots() -> np.ndarray:
    # Independent path: numpy's polynomial arithmetic and np.roots on D + kp N.
    return np.roots(np.polyadd([1.0, -0.99, 0.0, 0.0], KP * np.array([1.0, 1.0]))).astype(complex)


def _zeta(z: complex) -> float:
    # Textbook definition: s = ln(z)/ts, zeta = -Re(s)/|s|.
    s = np.log(complex(z)) / TS
    return -s.real / abs(s)


def test_delay_pole_near_minus_0_2_binds_only_under_all():
    roots = _closed_loop_roots()
    negative = roots[np.argmin(roots.real)]
    assert -0.25 < negative.real < -0.15 and abs(negative.imag) < 1e-12  # the delay branch
    dominant = analyse(PLANT, "p", {"kp": np.array([KP])}, _limits("dominant"), step=False)
    every = analyse(PLANT, "p", {"kp": np.array([KP])}, _limits("all"), step=False)
    # under "all" the least damped pole is the delay branch on the negative real axis
    np.testing.assert_allclose(every.damping[0], min(_zeta(r) for r in roots), rtol=1e-9)
    assert every.damping[0] < 0.6 and not every.verdicts["min_damping"][0]
    assert every.damping_pole_origin[0] == "delay or hold"
    np.testing.assert_allclose(every.damping_pole_s[0], np.log(negative) / TS, rtol=1e-9)
    # under "dominant" that pole is fast: |z| <= 1/3, decaying > 2x faster than the slowest
    assert dominant.verdicts["min_damping"][0]
    slow = roots[np.argmax(np.abs(roots))]
    np.testing.assert_allclose(dominant.damping_pole_s[0], np.log(slow) / TS, rtol=1e-9)
    assert dominant.damping_pole_origin[0] == "plant pole"
    # the zeta and wn reported belong to the same pole
    np.testing.assert_allclose(dominant.damping_pole_frequency[0], abs(np.log(slow)) / TS, rtol=1e-12)
    np.testing.assert_allclose(every.damping_pole_frequency[0], abs(np.log(negative)) / TS, rtol=1e-12)


def test_selection_matches_its_definition_on_random_poles():
    rng = np.random.default_rng(7)
    radius = rng.uniform(0.0, 0.999, (200, 5))
    angle = rng.uniform(-math.pi, math.pi, (200, 5))
    poles = radius * np.exp(1j * angle)
    poles[:20, 0] = 0.0  # deadbeat poles
    mask = judged_poles(poles, TS, "dominant")
    for row, judged in zip(poles, mask):
        decay = -np.log(np.maximum(np.abs(row), 1e-300)) / TS
        nonzero = np.abs(row) > 0
        slowest = decay[nonzero].min()
        # definition in gainloom.design.dominant (docs/design.md)
        fast = (np.abs(row) <= 1 / FAST_FACTOR) & (decay >= DOMINANCE_RATIO * slowest)
        np.testing.assert_array_equal(judged, nonzero & ~fast)
        assert judged[np.argmin(np.where(nonzero, decay, np.inf))]  # the slowest is always judged
    assert np.all(judged_poles(poles, TS, "all") == (np.abs(poles) > 0))


def test_decay_and_radius_do_not_depend_on_the_selection():
    rng = np.random.default_rng(8)
    poles = rng.uniform(0.05, 0.99, (50, 4)) * np.exp(1j * rng.uniform(-3, 3, (50, 4)))
    a = pole_metrics(poles, TS, "dominant")
    b = pole_metrics(poles, TS, "all")
    np.testing.assert_array_equal(a["decay"], b["decay"])
    np.testing.assert_array_equal(a["radius"], b["radius"])
    assert np.all(a["damping"] >= b["damping"])


def test_unknown_selection_is_refused():
    with pytest.raises(ValueError, match="known: dominant, all"):
        judged_poles(np.zeros((1, 2), complex), TS, "slowest")

"""Spec closed forms and the discrete step-response check."""

import math

import control
import numpy as np
import pytest

from gainloom import Loop
from gainloom.design.analysis import step_metrics
from gainloom.design.spec_limits import SpecLimits, decay_from_settling, overshoot_from_damping
from gainloom.schedule import overshoot_to_damping


def test_overshoot_damping_relation():
    # Standard second-order relation: zeta = 0.5 overshoots 16.3 % (textbook
    # table, from memory; closed form exp(-pi zeta / sqrt(1 - zeta^2))).
    assert overshoot_from_damping(0.5) == pytest.approx(100 * math.exp(-math.pi * 0.5 / math.sqrt(0.75)))
    assert overshoot_from_damping(0.5) == pytest.approx(16.3, abs=0.05)
    # and it inverts the schedule's overshoot -> damping conversion
    for os_ in (1.0, 5.0, 10.0, 25.0):
        assert overshoot_from_damping(overshoot_to_damping(os_)) == pytest.approx(os_, rel=1e-12)


def test_settling_approximation():
    # T_s ~ 4/(zeta wn) for the 2 % band (standard approximation, from memory)
    assert decay_from_settling(0.05) == pytest.approx(80.0)


def test_limits_tightened_inside():
    values = {"min_damping": np.array([0.5, np.nan]), "min_gain_margin": np.array([6.0, 6.0])}
    limits = SpecLimits.from_values(values, 2)
    tight = limits.tightened()
    assert tight.min_damping[0] > 0.5 and np.isnan(tight.min_damping[1])
    assert np.all(tight.min_gain_margin > 6.0)


def test_step_metrics_match_python_control_step_info():
    # Reference: control.step_info (2 % settling, percent overshoot) on the
    # same discrete closed loop.
    ts = 0.001
    plant = control.c2d(control.tf([400.0], [1.0, 8.0, 0.0]), ts)
    loop = Loop.from_control([plant, 3.0 * plant])
    overshoot, settling, final = step_metrics(loop)
    for p, gain in enumerate((1.0, 3.0)):
        closed = control.feedback(gain * plant, 1)
        info = control.step_info(closed, T=np.arange(0, 4, ts), SettlingTimeThreshold=0.02)
        assert overshoot[p] == pytest.approx(info["Overshoot"], abs=1e-6)
        assert abs(settling[p] - info["SettlingTime"]) <= 1.5 * ts
        assert final[p] == pytest.approx(1.0)


def test_step_metrics_of_unstable_loop_are_nan():
    loop = Loop(num=[[0.0, 3.0]], den=[[1.0, -0.5]], ts=0.01)  # closed-loop pole at z = -2.5
    overshoot, settling, _ = step_metrics(loop)
    assert np.isnan(overshoot[0]) and np.isnan(settling[0])

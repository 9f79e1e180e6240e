"""lti/gain_sets.py: gain sets of frequency-domain specs, judged by python-control.

For a fixed PI shape on an invented R-L plant with one sample of delay (ZOH),
gains are sampled across seven decades; each one's membership in a set must
agree with ``control.stability_margins`` at that gain (phase margin, delay
margin = PM / crossover, sensitivity peak = 1 / stability margin) and with the
closed-loop -3 dB frequency of ``control.feedback`` read off ``control.frequency_response``.
Gains within 1e-6 (relative) of a set's end are skipped: the end itself is
on the spec boundary.
"""

import math

import control
import numpy as np
import pytest

from gainloom.lti import gain_sets as gs
from gainloom.lti.discretize import discretize_loop
from gainloom.lti.loop import Loop

TS = 1.0 / 16000
ZERO = 0.98  # PI zero in z


def shape_loop():
    plant = discretize_loop(Loop(num=np.array([[0.0, 1.0]]), den=np.array([[1.5e-3, 0.5]])), TS, "zoh", delay=1.0)
    num = np.polymul([1.0, -ZERO], plant.num[0])
    den = np.polymul([1.0, -1.0], plant.den[0])
    return Loop(num=num[None, :], den=den[None, :], ts=np.array([TS])), control.tf(num, den, TS)


def member(sets, k):
    inside = any(lo * (1 + 1e-6) < k < hi * (1 - 1e-6) for lo, hi in sets)
    near = any(abs(k / e - 1) < 1e-6 for lo, hi in sets for e in (lo, hi) if 0 < e < math.inf)
    return None if near else inside


GAINS = np.geomspace(0.01, 1e5, 120)


def stable(sys, k):
    return bool(np.all(np.abs(control.feedback(k * sys, 1).poles()) < 1))


@pytest.mark.parametrize("spec", ["phase", "delay", "sensitivity"])
def test_margin_sets_agree_with_python_control(spec):
    loop, sys = shape_loop()
    grid = gs.response_grid(loop, np.array([1.0]))
    if spec == "phase":
        sets = gs.phase_margin_gains(grid, np.array([45.0]))[0]
    elif spec == "delay":
        sets = gs.delay_margin_gains(grid, np.array([2.5 * TS]))[0]
    else:
        sets = gs.sensitivity_gains(grid, np.array([1.6]))[0]
    checked = 0
    for k in GAINS:
        verdict = member(sets, k)
        if verdict is None or not stable(sys, k):
            continue  # the sets speak of stable loops; stability is the exact solver's job
        gm, pm, sm, wpc, wgc, wms = control.stability_margins(k * sys, method="poly")
        if spec == "phase":
            truth = pm >= 45.0  # control.stability_margins phase margin, deg
        elif spec == "delay":
            truth = math.radians(pm) / wgc >= 2.5 * TS if np.isfinite(wgc) else True
        else:
            truth = 1.0 / sm <= 1.6  # python-control's sm is 1/Ms
        assert verdict == truth, (spec, k, pm, wgc, 1 / sm)
        checked += 1
    assert checked > 40


def test_bandwidth_set_agrees_with_the_closed_loop_response():
    loop, sys = shape_loop()
    grid = gs.response_grid(loop, np.array([1.0]))
    wb = 3000.0
    sets = gs.bandwidth_gains(loop, np.array([wb]), grid)[0]
    w = np.geomspace(1.0, wb, 400)
    for k in GAINS[::5]:
        verdict = member(sets, k)
        if verdict is None or not stable(sys, k):
            continue
        # control.frequency_response of T = kL/(1 + kL): |T| >= 1/sqrt(2) on (0, wb]
        mag = np.abs(control.frequency_response(control.feedback(k * sys, 1), w).complex).ravel()
        assert verdict == bool(np.all(mag >= 1 / math.sqrt(2) - 1e-9)), k


def test_crossover_at_matches_python_control():
    loop, sys = shape_loop()
    grid = gs.response_grid(loop, np.array([1.0]))
    gains = np.array([[1.0, 5.0, 20.0]])
    found = gs.crossover_at(grid, gains)[0]
    for k, w in zip(gains[0], found):
        *_, wgc, _ = control.stability_margins(k * sys, method="poly")
        assert w == pytest.approx(wgc, rel=1e-3)  # control.stability_margins gain crossover

"""Crossover and bandwidth specs in a design, re-checked with python-control."""

from __future__ import annotations

import math
import warnings

import control
import numpy as np
import pytest

import gainloom

# Invented speed loop: torque constant 0.05 N m/A, inertia rising with speed.
SCHEDULE = """\
name: spec-check
variables:
  - name: speed
    unit: rpm
    values: [0, 1500, 3000]
parameters:
  Kt: 0.05
  J: "2.0e-4 * (1 + speed / 6000)"
  B: 1.0e-4
plant:
  transfer_function:
    numerator: ["Kt"]
    denominator: ["J", "B"]
sampling:
  period: 1.0e-4
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: pole-cancel
  output_limits: [-10, 10]
specs:
  min_phase_margin: 50
  min_gain_margin: 8
{extra}
"""


def _design(tmp_path, extra: str):
    path = tmp_path / "loop.yaml"
    path.write_text(SCHEDULE.format(extra=extra), encoding="utf-8")
    return gainloom.design_table(path)


def _reference_loop(result, p: int):
    # Independent path: python-control's ZOH of the continuous plant, one
    # sample of delay, and the PI's C(z) = kp + ki_ts z/(z - 1).
    ts = 1e-4
    speed = result.points[p, 0]
    J = 2.0e-4 * (1 + speed / 6000)
    plant = control.c2d(control.tf([0.05], [J, 1.0e-4]), ts) * control.tf([1], [1, 0], ts)
    kp = result.table.coefficients["kp"].ravel()[p]
    ki_ts = result.table.coefficients["ki_ts"].ravel()[p]
    return control.tf([kp + ki_ts, -kp], [1, -1], ts) * plant


def test_max_crossover_is_met_and_matches_python_control(tmp_path):
    result = _design(tmp_path, "  max_crossover: 1000\n  min_bandwidth: 500")
    assert result.status == ("pass",) * 3
    for p in range(3):
        loop = _reference_loop(result, p)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _, _, _, wgc = control.margin(loop)
        # Reference: python-control margin() gain crossover of the same loop
        assert result.analysis.crossover[p] == pytest.approx(wgc, rel=1e-6)
        assert result.analysis.last_crossover[p] <= 1000
        # Reference: |T| from python-control at the reported bandwidth is half power
        closed = control.feedback(loop, 1)
        dc = abs(control.evalfr(closed, 1.0))
        at = control.frequency_response(closed, [result.analysis.bandwidth[p]]).magnitude.ravel()[0]
        assert at == pytest.approx(dc / math.sqrt(2), rel=1e-7)
        assert result.analysis.bandwidth[p] >= 500
    document = result.as_document()["points"][0]
    assert document["specs"]["max_crossover"]["limit"] == 1000
    assert document["specs"]["max_crossover"]["value"] == pytest.approx(document["last_crossover_rad_s"])
    assert document["crossover_rad_s"] == pytest.approx(float(result.analysis.crossover[0]))


def test_unreachable_crossover_fails_and_names_the_spec(tmp_path):
    # A PI behind one sample of delay at 10 kHz with PM >= 50 deg cannot cross
    # over at 20,000 rad/s (a third of Nyquist, 31,416 rad/s)
    result = _design(tmp_path, "  min_crossover: 20000")
    assert set(result.status) == {"fail"}
    assert set(result.binding) == {"min_crossover"}
    assert all(any("gain crossover" in n for n in notes) for notes in result.notes)
    assert np.all(result.analysis.crossover < 20000)

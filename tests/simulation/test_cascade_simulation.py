"""The cascade run against the lifted outer loop closed in python-control,
and its saturation and load behaviour on the servo demo."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import control
import numpy as np
import pytest

from gainloom import design_cascade, load_cascade
from gainloom.design.cascade import inner_points_at, outer_plant
from gainloom.design.lookup import interpolate_table
from gainloom.job.cascade_job import default_cascade_scenario
from gainloom.simulation.cascade import run_cascade
from gainloom.simulation.cascade_plot import plot_cascade

DEMO = Path(__file__).resolve().parents[2] / "schedules" / "servo_cascade.yaml"


def _tables(design):
    return tuple(result.table for result in design.results)


@pytest.fixture(scope="module")
def demo():
    return design_cascade(load_cascade(DEMO))


def test_small_step_matches_the_lifted_loop_closed_by_python_control(demo):
    # A 1 rad/s step saturates nothing, so the run is linear: the speed at the
    # speed-loop samples must be the step response of C_o P / (1 + C_o P)
    # (python-control feedback and step_response; PI as in DEVELOPERS.md,
    # kp + ki_ts z / (z - 1)) with P the lifted plant.
    scenario = replace(default_cascade_scenario(demo), reference_step=1.0, load_time=1.0, duration=0.05)
    run = run_cascade(demo.cascade, demo.schedules, _tables(demo), scenario, "float64")
    speed = run.loops[1]
    assert speed.metrics.saturation_fraction == 0 and run.loops[0].metrics.saturation_fraction == 0
    inner, outer = demo.schedules
    point = np.array([[scenario.outer_point[n] for n in outer.axis_names]])
    inner_point = inner_points_at(point, outer.axis_names, inner.axis_names, demo.cascade.loops[1].inner_at)
    plant = outer_plant(outer, inner, demo.results[0].table, 8, point, inner_point)
    ts = float(plant.ts[0])
    gains = interpolate_table(demo.results[1].table, point)
    kp, ki_ts = float(gains["kp"][0]), float(gains["ki_ts"][0])
    pi = control.tf([kp + ki_ts, -kp], [1.0, -1.0], ts)
    loop = pi * control.tf(plant.num[0], plant.den[0], ts)
    _, expected = control.step_response(control.feedback(loop, 1), T=speed.time)
    np.testing.assert_allclose(speed.output, expected, rtol=0, atol=1e-9)


def test_demo_run_saturates_recovers_and_rejects_the_load(demo):
    scenario = default_cascade_scenario(demo)
    run = run_cascade(demo.cascade, demo.schedules, _tables(demo), scenario, "q15")
    current, speed = run.loops
    assert run.stable
    # the 70 rad/s step asks more current than the 20 A reference limit: the speed loop saturates
    assert speed.metrics.saturation_fraction > 0
    assert np.max(current.reference) <= 20.0 + 1e-9  # the outer output limit is the inner reference limit
    # conditional integration keeps the overshoot after saturation small (common practice: < 10 %, no source)
    assert speed.metrics.overshoot is not None and speed.metrics.overshoot < 10
    response = speed.metrics.load_responses[0]
    assert response.amplitude == pytest.approx(2.0)
    # settled back to the reference by the end: integral action (system type 1 asked in the demo)
    assert abs(speed.output[-1] - scenario.reference_step) < 0.01 * scenario.reference_step
    assert plot_cascade(run)[:8] == b"\x89PNG\r\n\x1a\n"

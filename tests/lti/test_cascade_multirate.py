"""The outer loop's plant of a cascade against independent constructions.

- :func:`gainloom.lti.multirate.lift` against the geometric-series closed form
  of a first-order system and against python-control's ``forced_response``
  of the fast system read every N-th sample.
- :func:`gainloom.design.cascade.outer_plant` on the servo demo against a
  time-step simulation written here: the electrical and mechanical states
  sampled by python-control's ``sample_system`` (ZOH) at half the PWM period
  (the half-sample PWM dead time then falls on the grid), the PI current
  controller of DEVELOPERS.md's difference equations run every second
  half-step with its one sample of computation delay, and the speed-loop
  reference held over 8 PWM periods.
"""

from pathlib import Path

import control
import numpy as np
import pytest

from gainloom.design.cascade import inner_points_at, outer_plant
from gainloom.design.engine import design
from gainloom.lti.multirate import lift
from gainloom.schedule.cascade import load_cascade

DEMO = Path(__file__).resolve().parents[2] / "schedules" / "servo_cascade.yaml"


def test_lift_first_order_closed_form():
    # y[k+1] = a y[k] + b r[k] with r held over N samples: y[(m+1)N] =
    # a^N y[mN] + b (1 - a^N) / (1 - a) r[m] (geometric series, closed form).
    a, b, factor = 0.9, 0.3, 5
    num, den = lift(np.array([[0.0, b]]), np.array([[1.0, -a]]), factor)
    assert den[0] == pytest.approx([1.0, -(a**factor)], rel=1e-14)
    assert num[0] == pytest.approx([0.0, b * (1 - a**factor) / (1 - a)], rel=1e-13)


def test_lift_matches_decimated_response():
    # Reference: python-control forced_response of the fast system on an
    # input held over N samples, read every N-th sample.
    rng = np.random.default_rng(3)
    fast = control.tf([0.2, -0.05, 0.01], [1.0, -1.6, 0.77, -0.1], 1e-4)
    factor, blocks = 6, 40
    slow_input = rng.normal(size=blocks)
    _, fast_y = control.forced_response(fast, U=np.repeat(slow_input, factor))
    num, den = lift(np.array([fast.num[0][0]]), np.array([fast.den[0][0]]), factor)
    slow = control.tf(num[0], den[0], factor * 1e-4)
    _, slow_y = control.forced_response(slow, U=slow_input)
    np.testing.assert_allclose(slow_y, fast_y[::factor], rtol=1e-9, atol=1e-12)


@pytest.fixture(scope="module")
def demo():
    cascade = load_cascade(DEMO)
    inner = cascade.loops[0].schedule
    return cascade, inner, design(inner)


def _independent_speed(params, gains, ts, factor, reference):
    """Speed every ``factor``-th PWM sample for a reference held per block,
    simulated on a half-sample grid with python-control's ZOH matrices."""
    R, L, Kt, J, B = (params[k] for k in ("R", "L", "Kt", "J", "B"))
    plant = control.ss([[-R / L, 0.0], [Kt / J, -B / J]], [[1.0 / L], [0.0]], np.eye(2), np.zeros((2, 1)))
    half = control.sample_system(plant, ts / 2, method="zoh")
    Ad, Bd = np.asarray(half.A), np.asarray(half.B)[:, 0]
    x = np.zeros(2)
    integral, outputs, speeds = 0.0, [], []
    for k in range(reference.size * factor):
        if k % factor == 0:
            speeds.append(x[1])
        error = reference[k // factor] - x[0]
        integral += gains["ki_ts"] * error  # x[k] = x[k-1] + ki_ts e[k]
        outputs.append(gains["kp"] * error + integral)  # u = kp e[k] + x[k]
        for h in (2 * k, 2 * k + 1):
            # one sample of computation delay plus half a sample of PWM dead
            # time: u[j] drives the bridge from half-step 2 j + 3 on
            voltage = outputs[(h - 3) // 2] if h >= 3 else 0.0
            x = Ad @ x + Bd * voltage
    return np.array(speeds)


def test_outer_plant_matches_time_step_simulation(demo):
    cascade, inner, inner_result = demo
    outer_loop = cascade.loops[1]
    outer = outer_loop.schedule
    point = np.array([[2000.0, 3.0]])  # speed 2000 rpm, inertia 3x: a grid point
    inner_point = inner_points_at(point, outer.axis_names, inner.axis_names, outer_loop.inner_at)
    plant = outer_plant(outer, inner, inner_result.table, outer_loop.rate_factor, point, inner_point)

    # Parameters written out from the demo file (R, L at 10 A and 40 degC;
    # J, B at 2000 rpm and 3x inertia), not read from gainloom.
    params = {"R": 0.35 * (1 + 0.0039 * 20), "L": 1.5e-3, "Kt": 0.12, "J": 6.0e-5 * 3, "B": 2.0e-5 + 2.0e-5}
    current = [axis.values for axis in inner_result.table.axes]
    i, j = list(current[0]).index(10.0), list(current[1]).index(40.0)
    gains = {name: float(grid[i, j]) for name, grid in inner_result.table.coefficients.items()}

    rng = np.random.default_rng(11)
    blocks = 60
    reference = rng.normal(size=blocks)
    # the outer loop's own computation delay: r_o[m] reaches the inner loop one outer sample later
    held = np.concatenate([[0.0], reference[:-1]])
    expected = _independent_speed(params, gains, 6.25e-5, outer_loop.rate_factor, held)
    lifted = control.tf(plant.num[0], plant.den[0], float(plant.ts[0]))
    _, got = control.forced_response(lifted, U=reference)
    scale = np.max(np.abs(expected))
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-7 * scale)

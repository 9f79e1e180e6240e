"""Infeasible points, between-point checks, tolerances, smoothness and the
interpolation the firmware does."""

import math

import control
import numpy as np
import pytest

import gainloom
from gainloom.design.lookup import interpolate_grids
from gainloom.design.table_checks import between_points, relative_steps, tolerance_scales

THIRD_ORDER = """
name: third-order
variables:
  - name: x
    values: [0.0, 1.0]
parameters:
  k: 6.0
plant:
  transfer_function:
    numerator: ["k"]
    denominator: ["1", "6", "11", "6"]
sampling:
  period: 0.05
  method: zoh
  delay: 1
controller:
  structure: p
  strategy: dominant-pair
  target: {{damping: 0.7, natural_frequency: 2000}}
  output_limits: [-5, 5]
specs:
  min_damping: 0.5
  max_settling_time: {settle}
table:
  between_points: 0
codegen:
  prefix: t3
  format: float32
"""


def fine_grid_loop(K, ts=0.05):
    """k/((s+1)(s+2)(s+3)) sampled by control.c2d (ZOH) with one sample of delay, times K."""
    plant = control.c2d(control.tf([6.0], [1.0, 6.0, 11.0, 6.0]), ts, method="zoh")
    return K * plant * control.tf([1.0], [1.0, 0.0], ts)


def test_infeasible_point_has_no_gain_meeting_the_binding_spec(tmp_path):
    # 2 % settling in 0.5 s needs every pole to decay at 8 1/s (4/T_s); a
    # P controller on poles at -1, -2, -3 cannot move the slowest pole past
    # the breakaway region (root-locus fact), so decay binds.
    path = tmp_path / "s.yaml"
    path.write_text(THIRD_ORDER.format(settle=0.5))
    result = gainloom.design_table(path)
    assert result.status == ("fail", "fail")
    assert result.binding[0] == "min_decay"
    note = result.notes[0][-1]
    claimed = float(note.split("at most ")[1].split(" ")[0])
    # Fine grid over the whole stable range: the loop sampled by python-control
    # (c2d, ZOH), closed-loop poles = numpy.roots(den + K num) per gain.
    loop = fine_grid_loop(1.0)
    num, den = np.asarray(loop.num[0][0], float), np.asarray(loop.den[0][0], float)
    num = np.concatenate([np.zeros(den.size - num.size), num])
    best = -np.inf
    for K in np.geomspace(1e-4, 50, 4000):
        radius = np.max(np.abs(np.roots(den + K * num)))
        if radius < 1:
            best = max(best, -math.log(radius) / 0.05)
    # spot check the numpy path against control.feedback at one gain
    np.testing.assert_allclose(
        np.sort(np.abs(np.roots(den + 0.3 * num))), np.sort(np.abs(control.feedback(fine_grid_loop(0.3), 1).poles())),
        rtol=1e-9,
    )
    assert best < 8.0  # really unreachable
    assert claimed == pytest.approx(best, rel=5e-3)  # and the quoted best value is right
    assert result.exit_code == 1


def test_feasible_version_of_the_same_loop_passes(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(THIRD_ORDER.format(settle=8.0))
    result = gainloom.design_table(path)
    assert result.status == ("pass", "pass")
    K = result.analysis.coefficients["kp"][0]
    poles = control.feedback(fine_grid_loop(K), 1).poles()
    s = np.log(poles.astype(complex)) / 0.05
    assert np.min(-s.real / np.abs(s)) >= 0.5 - 1e-9  # control.feedback poles
    assert np.min(-s.real) >= 4 / 8.0 - 1e-9


COARSE = """
name: coarse
variables:
  - name: x
    values: [0.0, 1.0]
parameters:
  k: "1.0 + 9.0 * x"
plant:
  transfer_function:
    numerator: ["k"]
    denominator: ["0.02", "1"]
sampling:
  period: 0.001
  method: zoh
  delay: 1
controller:
  structure: p
  strategy: dominant-pair
  target: {{damping: 0.7, natural_frequency: 2000}}
  output_limits: [-5, 5]
specs:
  min_damping: 0.7
table:
  between_points: 3
{refine}
codegen:
  prefix: cg
  format: float32
"""


def test_between_points_catch_a_coarse_grid_and_refinement_fixes_it(tmp_path):
    # Plant gain 1 -> 10 across one interval: the designed kp falls ~10x, and
    # the linearly interpolated kp at x = 0.5 is ~3x too large for the plant
    # there, so damping fails between the points although both ends pass.
    path = tmp_path / "c.yaml"
    path.write_text(COARSE.format(refine=""))
    coarse = gainloom.design_table(path)
    assert coarse.points_passed
    assert coarse.table_report.between, "the coarse grid must fail between its points"
    assert all("min_damping" in e.failed for e in coarse.table_report.between)
    # independent re-check of one failing intermediate point with python-control
    entry = coarse.table_report.between[1]
    x = entry.point["x"]
    kp = np.interp(x, [0.0, 1.0], coarse.table.coefficients["kp"])  # firmware's linear interpolation
    plant = control.c2d(control.tf([1.0 + 9.0 * x], [0.02, 1.0]), 0.001, method="zoh")
    loop = kp * plant * control.tf([1.0], [1.0, 0.0], 0.001)
    poles = control.feedback(loop, 1).poles()
    s = np.log(poles.astype(complex)) / 0.001
    assert np.min(-s.real / np.abs(s)) < 0.7
    path.write_text(COARSE.format(refine="  refine: {max_inserted: 40}"))
    refined = gainloom.design_table(path)
    assert refined.table_report.inserted
    assert not refined.table_report.between
    assert refined.passed and refined.exit_code == 0


def test_interpolation_is_linear_and_bilinear():
    # closed forms of linear and bilinear interpolation
    x = np.array([0.0, 1.0, 3.0])
    grid = {"kp": np.array([1.0, 3.0, 7.0])}
    out = interpolate_grids((x,), grid, np.array([[0.5], [2.0], [3.0]]))
    np.testing.assert_allclose(out["kp"], [2.0, 5.0, 7.0])
    y = np.array([0.0, 2.0])
    grid2 = {"kp": np.array([[0.0, 2.0], [1.0, 3.0], [3.0, 5.0]])}  # f = x + y on the grid
    out = interpolate_grids((x, y), grid2, np.array([[0.5, 1.0], [2.0, 0.5]]))
    np.testing.assert_allclose(out["kp"], [1.5, 2.5])


def test_between_points_cover_edges_and_centres():
    points, owner = between_points([np.array([0.0, 1.0]), np.array([0.0, 1.0])], 1)
    as_set = {tuple(p) for p in points}
    assert {(0.5, 0.0), (0.0, 0.5), (0.5, 1.0), (1.0, 0.5), (0.5, 0.5)} <= as_set
    points, owner = between_points([np.array([0.0, 1.0, 2.0])], 3)
    np.testing.assert_allclose(points[:3, 0], [0.25, 0.5, 0.75])
    assert owner[3] == (1,)


def test_relative_steps_definition():
    grid = np.array([1.0, 2.0, 2.0, 0.0, 0.0])
    np.testing.assert_allclose(relative_steps(grid, 0), [0.5, 0.0, 1.0, 0.0])


class _Tol:
    def __init__(self, parameters, samples):
        self.parameters = parameters
        self.samples = samples


def test_tolerance_corners_and_space_filling():
    corners = tolerance_scales(_Tol({"J": (0.3, 0.3), "Kt": (0.1, 0.05)}, "corners"))
    assert len(corners) == 4
    assert {(c["J"], c["Kt"]) for c in corners} == {(0.7, 0.9), (0.7, 1.05), (1.3, 0.9), (1.3, 1.05)}
    sample = tolerance_scales(_Tol({"a": (0.5, 0.5), "b": (0.1, 0.1)}, (10, 3)))
    again = tolerance_scales(_Tol({"a": (0.5, 0.5), "b": (0.1, 0.1)}, (10, 3)))
    assert sample == again and len(sample) == 10
    a = np.sort([s["a"] for s in sample])
    # Latin hypercube: exactly one sample in each of the 10 strata of [0.5, 1.5]
    assert np.array_equal(np.floor((a - 0.5) * 10).astype(int), np.arange(10))


def test_tolerance_corners_are_checked_and_the_worst_reported(tmp_path):
    path = tmp_path / "t.yaml"
    text = COARSE.format(refine="  refine: {max_inserted: 40}") + "tolerances:\n  parameters: {k: 0.5}\n  samples: corners\n"
    path.write_text(text)
    result = gainloom.design_table(path)
    report = result.table_report
    assert report.tolerance_corners == 2
    # k raised by 50 % with the nominal kp lowers the damping: the +50 % corner is the worst
    assert all(entry.scale == {"k": 1.5} for entry in report.tolerance_worst)
    assert report.tolerances  # nominal design sits near the damping bound, +50 % gain breaks it
    assert result.exit_code == 1


SMOOTH = """
name: smooth
variables:
  - name: x
    values: [0.0, 0.25, 0.5, 0.75, 1.0]
parameters:
  k: "10.0 - 9.0 * x"
plant:
  transfer_function:
    numerator: ["k"]
    denominator: ["0.02", "1"]
sampling:
  period: 0.001
  method: zoh
  delay: 1
controller:
  structure: p
  strategy: dominant-pair
  target: {damping: 0.7, natural_frequency: 2000}
  output_limits: [-5, 5]
specs:
  min_damping: 0.7
table:
  max_relative_step: 0.3
  between_points: 0
codegen:
  prefix: sm
  format: float32
"""


def test_step_limit_moves_gains_and_reports_the_cost(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(SMOOTH)
    result = gainloom.design_table(path)
    report = result.table_report
    assert report.smoothing and "forced a worse design" in report.smoothing[0]
    kp = result.table.coefficients["kp"]
    steps = relative_steps(kp, 0)
    reported = {e.index for e in report.smoothness}
    for i, step in enumerate(steps):
        assert step <= 0.3 + 1e-12 or (i,) in reported
    assert result.points_passed  # lowering K of this loop keeps damping
    # without the limit the designed kp rises faster than 30 % per step
    free = gainloom.design_table(_write(tmp_path, SMOOTH.replace("  max_relative_step: 0.3\n", "")))
    assert np.max(relative_steps(free.table.coefficients["kp"], 0)) > 0.3


def _write(tmp_path, text):
    path = tmp_path / "free.yaml"
    path.write_text(text)
    return path


def test_verify_accepts_a_gain_table_object(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(SMOOTH)
    designed = gainloom.design_table(path)
    check = gainloom.verify(path, designed.table)
    assert check.status == designed.status
    np.testing.assert_allclose(check.analysis.damping, designed.analysis.damping, rtol=1e-12)


def test_monotone_direction_is_enforced_by_moving_gains(tmp_path):
    # The plant gain falls along x, so the designed kp rises; asking for kp
    # decreasing makes the design lower later gains (slower but still damped).
    text = SMOOTH.replace("  max_relative_step: 0.3\n", "  monotone: {kp: decreasing}\n")
    result = gainloom.design_table(_write(tmp_path, text))
    kp = result.table.coefficients["kp"]
    assert np.all(np.diff(kp) <= 1e-12)  # non-increasing, checked directly
    assert not result.table_report.monotone
    assert result.table_report.smoothing
    assert result.points_passed

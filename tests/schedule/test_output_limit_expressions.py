"""Output limits as expressions of the schedule: tabulated with the gains
when they vary, looked up by the generated C with the coefficients."""

import math

import numpy as np
import pytest
from cases import make_table

from gainloom import ScheduleError, load_schedule
from gainloom.codegen.emit import emit_c
from gainloom.codegen.harness import check_generated_c, find_compiler
from gainloom.codegen.layout import layout_table
from gainloom.codegen.mirror import lookup_gains, run_steps
from gainloom.design.gainsfile import read_gains, write_gains
from gainloom.design.table import GainTable
from gainloom.simulation.controller import TableController

# A scenario of our own: a current loop whose voltage limit follows the DC
# bus (space-vector modulation reaches bus / sqrt(3) phase voltage, common
# practice for sinusoidal commutation, from memory).
SCHEDULE = """
name: bus-limits
variables:
  - name: bus
    unit: V
    values: [24.0, 36.0, 48.0]
parameters:
  resistance: 0.5
plant:
  transfer_function:
    numerator: ["1 / resistance"]
    denominator: ["0.004", "1"]
sampling:
  period: 0.0001
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: pole-cancel
  output_limits: [LOW, HIGH]
specs:
  min_damping: 0.6
"""


def _schedule(tmp_path, low, high):
    path = tmp_path / "bus.yaml"
    path.write_text(SCHEDULE.replace("LOW", low).replace("HIGH", high))
    return path


def test_limits_following_a_scheduling_variable_are_tabulated(tmp_path):
    import gainloom

    schedule = load_schedule(_schedule(tmp_path, '"-bus / sqrt(3)"', '"bus / sqrt(3)"'))
    low, high = schedule.output_limits_at(np.array([[24.0], [30.0], [48.0]]))
    # Reference: math.sqrt
    assert np.allclose(high, [24 / math.sqrt(3), 30 / math.sqrt(3), 48 / math.sqrt(3)], rtol=1e-15)
    assert np.array_equal(low, -high)
    result = gainloom.design_table(schedule)
    table = result.table
    assert table.limits_vary
    bus = table.axes[0].values
    assert np.allclose(table.limit_grids[1], bus / math.sqrt(3), rtol=1e-15)
    assert table.limit_envelope == pytest.approx((-48 / math.sqrt(3), 48 / math.sqrt(3)))
    again, _ = read_gains(write_gains(table, tmp_path / "g.yaml"))
    assert again.limits_vary and np.array_equal(again.limit_grids[0], table.limit_grids[0])


def test_limits_that_do_not_vary_stay_numbers(tmp_path):
    schedule = load_schedule(_schedule(tmp_path, '"-48 / sqrt(3)"', '"resistance * 20"'))
    assert schedule.controller.output_limits == pytest.approx((-48 / math.sqrt(3), 10.0))


@pytest.mark.parametrize(
    ("low", "high", "message"),
    [
        ('"-bus / sqrt(3)"', '"vbus / sqrt(3)"', "unknown name 'vbus'"),
        ('"-bus / sqrt(3)"', '"bus / sqrt(3"', "cannot parse expression 'bus / sqrt(3' for the upper output limit"),
        ('"40 - bus"', '"bus - 30"', "low < high at every operating point"),
        ('"-bus"', '"sqrt(30 - bus)"', "upper output limit"),
        ('"-bus"', '"ts * bus"', "'ts' is available only"),
    ],
)
def test_bad_limit_expressions_are_located(tmp_path, low, high, message):
    with pytest.raises(ScheduleError) as caught:
        load_schedule(_schedule(tmp_path, low, high))
    text = str(caught.value)
    assert message in text, text
    assert "bus.yaml:" in text and "controller.output_limits" in text
    if "low < high" in message:
        assert "[16, -6] at bus=24 V" in text  # the operating point where it fails (low 40 - 24, high 24 - 30)


def _tabulated_table(dims=2):
    table = make_table("pid", dims=dims, seed=11)
    speed = table.axes[0].values
    high = 6.0 + 6.0 * speed / speed[-1]  # 6 .. 12
    grid_high = np.broadcast_to(high.reshape(-1, *([1] * (dims - 1))), table.shape)
    return GainTable(table.structure, table.axes, table.coefficients, table.sample_period,
                     (-grid_high, grid_high))


@pytest.mark.needs_cc
@pytest.mark.skipif(find_compiler() is None, reason="no host C compiler")
@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_tabulated_limits_are_looked_up_by_the_c_bit_for_bit(tmp_path, number_format):
    table = _tabulated_table()
    scale = None if number_format == "float32" else 20.0
    files = emit_c(table, tmp_path, number_format, "motor_ctl", None, error_full_scale=scale)
    header = files[0].read_text()
    assert "u_min;" in header and "u_max;" in header  # fields of motor_ctl_gains_t
    result = check_generated_c(files, table, error_full_scale=scale)
    assert result.status == "passed", result.message + result.diagnostics


@pytest.mark.parametrize("number_format", ["float64", "float32", "q15", "q31"])
def test_the_output_saturates_at_the_limit_of_its_operating_point(number_format):
    # Reference: the table's own limit grid, linearly interpolated (numpy.interp).
    table = _tabulated_table(dims=1)
    speed = np.array([0.0, 1000.0, 2222.0, 3000.0])
    scales = {} if number_format.startswith("float") else {"error_full_scale": 20.0}
    controller = TableController(table, number_format, speed[:, None], **scales)
    expected = np.interp(speed, table.axes[0].values, table.limit_grids[1])
    lsb = 0 if number_format.startswith("float") else 12.0 * 2.0**-14
    for k, limit in enumerate(expected):
        out, _ = controller.step(k, 1e3, 0.0)
        assert out == pytest.approx(limit, rel=1e-6, abs=lsb)


def test_mirror_run_time_limits_override_the_tabulated_ones():
    table = _tabulated_table(dims=1)
    layout = layout_table(table, "q15", error_full_scale=20.0)
    gains = lookup_gains(layout, np.full(50, int(layout.axes[0].stored[-1])))
    errors = np.full(50, 30000)
    assert run_steps(layout, gains, errors).output[-1] == layout.limit_tables[1].stored[-1]
    limited = run_steps(layout, gains, errors, None, (np.ones(50, bool), np.full(50, -100), np.full(50, 100)))
    assert limited.output[-1] == 100

"""The simulator's controller in the firmware's number formats.

References: the code-generation layer's Python mirror (``run_steps``, itself
checked bit for bit against the compiled C by the codegen tests), python-control
for the closed loop, and the resolution of each format.
"""

from __future__ import annotations

import control
import numpy as np
import pytest
from cases import SECOND_ORDER, FunctionSchedule, constant_plant, controller_tf

from gainloom.design.table import GainTable, TableAxis
from gainloom.names import CONTROLLER_COEFFICIENTS
from gainloom.simulation import LoadStep, Scenario, run_scenario
from gainloom.simulation.controller import TableController

RANGES = {
    "kp": (0.05, 1.5),
    "ki_ts": (0.001, 0.2),
    "kd_b": (0.1, 3.0),
    "kd_a": (0.0, 0.95),
    "kc": (0.1, 2.0),
    "zc": (0.5, 0.99),
    "pc": (0.0, 0.95),
    "zc1": (0.5, 0.99),
    "pc1": (0.0, 0.9),
    "zc2": (0.5, 0.99),
    "pc2": (0.0, 0.99),
}


def random_table(structure, rng, limits=(-2.0, 1.5)):
    axis = TableAxis("speed", "rpm", np.array([0.0, 1000.0, 2500.0, 6000.0]))
    coefficients = {name: rng.uniform(*RANGES[name], size=4) for name in CONTROLLER_COEFFICIENTS[structure]}
    return GainTable(structure, (axis,), coefficients, 1e-3, limits)


def test_looked_up_gains_are_the_table_within_format_resolution():
    # Reference: numpy.interp of the designed table (clamped at the ends), to
    # float32 rounding (2^-23 relative) and to one stored LSB of Q15/Q31 plus the
    # interpolation-weight rounding.
    rng = np.random.default_rng(5)
    table = random_table("pid", rng, limits=(-4.0, 4.0))
    speed = rng.uniform(-500.0, 6500.0, size=300)[:, np.newaxis]
    for number_format, tolerance in (("float32", 1e-6), ("q31", 1e-8), ("q15", 2e-4)):
        controller = TableController(table, number_format, speed)
        for name, values in controller.gains.items():
            expected = np.interp(speed[:, 0], table.axes[0].values, table.coefficients[name])
            np.testing.assert_allclose(values, expected, rtol=0, atol=tolerance * max(1.0, np.max(np.abs(expected))))


@pytest.mark.parametrize(
    "number_format,tolerance",
    # Q31: signals resolve 2^-31 of full scale, states Q3.28 (4e-9 of 1): the
    # loop stays within 1e-6 of the ideal.  Q15: error LSB 2/32768 = 6e-5 and
    # output LSB 5/32768 = 1.5e-4; the low-pass plant averages the ripple, and
    # 1e-3 (about 7 output LSB) bounds it.
    [("q31", 1e-6), ("q15", 1e-3)],
)
def test_fixed_point_closed_loop_tracks_python_control(number_format, tolerance):
    # Reference: python-control sample_system (ZOH) and feedback(), as in
    # test_simulation.test_frozen_point_matches_python_control.
    ts = 1e-3
    coefficients = {"kp": 0.3, "ki_ts": 0.01}
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=ts, delay=1.0)
    axis = TableAxis("speed", "rpm", np.array([0.0, 100.0]))
    table = GainTable("pi", (axis,), {k: np.full(2, v) for k, v in coefficients.items()}, ts, (-5.0, 5.0))
    scenario = Scenario(0.8, {"speed": 30.0}, load_steps=(LoadStep(0.4, 0.2),))
    result = run_scenario(schedule, table, scenario, number_format, error_full_scale=2.0, output_full_scale=5.0)
    plant_zoh = control.sample_system(control.tf([900.0], SECOND_ORDER[1]), ts, method="zoh")
    z = control.tf([1, 0], [1], ts)
    ctrl = controller_tf("pi", ts, **coefficients)
    t = np.arange(result.time.size) * ts
    from_ref = control.forced_response(control.feedback(ctrl * plant_zoh / z, 1), t, np.ones_like(t)).outputs
    w = np.where(t >= 0.4 - 1e-12, 0.2, 0.0)
    from_load = control.forced_response(control.feedback(plant_zoh, ctrl / z), t, w).outputs
    np.testing.assert_allclose(result.output, from_ref + from_load, rtol=0, atol=tolerance)
    assert result.number_format == number_format and result.stable


def test_fixed_point_error_saturates_at_full_scale():
    # Reference: the Q15 definition (range [-1, 1 - 2^-15] of full scale, from
    # memory): with error full scale 0.1 a unit step is seen as 0.1, so the first
    # output is kp * 0.1 + ki_ts * 0.1, not kp + ki_ts.
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=1e-3, delay=1.0)
    axis = TableAxis("speed", "rpm", np.array([0.0, 100.0]))
    table = GainTable("pi", (axis,), {"kp": np.full(2, 0.3), "ki_ts": np.full(2, 0.01)}, 1e-3, (-5.0, 5.0))
    result = run_scenario(
        schedule, table, Scenario(0.01, {"speed": 0.0}), "q15", error_full_scale=0.1, output_full_scale=5.0
    )
    assert result.control[0] == pytest.approx(0.31 * 0.1 * (1 - 2**-15), abs=2 * 5.0 / 32768)
    assert any("beyond the error full scale 0.1" in w for w in result.warnings)


def test_full_scale_only_for_fixed_point():
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER))
    axis = TableAxis("speed", "rpm", np.array([0.0, 100.0]))
    table = GainTable("p", (axis,), {"kp": np.full(2, 0.3)}, 1e-3, (-5.0, 5.0))
    with pytest.raises(Exception, match="full-scale values apply to q15 and q31 only"):
        run_scenario(schedule, table, Scenario(0.01, {"speed": 0.0}), "float32", error_full_scale=2.0)


@pytest.mark.parametrize("number_format,tolerance", [("float64", 1e-12), ("float32", 2e-6), ("q31", 1e-7)])
def test_two_axis_run_interpolates_bilinearly(number_format, tolerance):
    # Reference: scipy RegularGridInterpolator (method="linear") on the 2-D table at
    # the path's points, clipped to the table (clamping at the ends).
    from scipy.interpolate import RegularGridInterpolator

    from gainloom.simulation import PiecewiseLinear

    rng = np.random.default_rng(21)
    speed = np.array([0.0, 2000.0, 6000.0])
    load = np.array([0.0, 0.5, 1.0, 2.0])
    kp = rng.uniform(0.2, 0.4, size=(3, 4))
    ki = rng.uniform(0.005, 0.01, size=(3, 4))
    table = GainTable(
        "pi", (TableAxis("speed", "rpm", speed), TableAxis("load", "", load)), {"kp": kp, "ki_ts": ki}, 1e-3, (-5, 5)
    )
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=1e-3, delay=1.0, axes=("speed", "load"))
    scenario = Scenario(
        0.3,
        {"speed": PiecewiseLinear.ramp(-100.0, 6500.0, 0.0, 0.3), "load": PiecewiseLinear([0.0, 0.3], [2.5, 0.1])},
    )
    kw = {"error_full_scale": 2.0} if number_format == "q31" else {}
    result = run_scenario(schedule, table, scenario, number_format, **kw)
    clipped = np.column_stack([np.clip(result.points[:, 0], 0, 6000), np.clip(result.points[:, 1], 0, 2)])
    for name, grid in (("kp", kp), ("ki_ts", ki)):
        expected = RegularGridInterpolator((speed, load), grid)(clipped)
        np.testing.assert_allclose(result.gains[name], expected, rtol=0, atol=tolerance)
    assert any("clamped" in w for w in result.warnings)

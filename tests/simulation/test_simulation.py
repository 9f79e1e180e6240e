"""Scheduled time-domain simulation against outside references.

Each check names its reference beside it.
"""

from __future__ import annotations

import json

import control
import numpy as np
import pytest
import scipy.signal
from cases import SECOND_ORDER, FunctionSchedule, constant_plant, controller_tf, flat_table
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.interpolate import RegularGridInterpolator

from gainloom import InputError
from gainloom.design.lookup import interpolate_grid
from gainloom.design.table import GainTable, TableAxis
from gainloom.simulation import (
    LoadStep,
    PiecewiseLinear,
    Scenario,
    ScenarioSpecs,
    run_scenario,
)
from gainloom.simulation.plant import split_delay
from gainloom.simulation.timeline import sample_times

# ---------------------------------------------------------------- closed forms


def test_first_order_lag_with_p_control_matches_geometric_series():
    # Reference: ZOH equivalent of a/(s + a) is (1 - phi)/(z - phi), phi = exp(-a T)
    # (textbook closed form, from memory); under u = K (1 - y) the sampled loop is
    # y[k+1] = lam y[k] + K (1 - phi), lam = phi - K (1 - phi), so
    # y[k] = K/(1 + K) (1 - lam^k) (geometric series).
    a, ts, gain = 40.0, 1e-3, 3.0
    schedule = FunctionSchedule(constant_plant([0.0, a], [1.0, a]), period=ts)
    result = run_scenario(schedule, flat_table("p", kp=gain), Scenario(0.2, {"speed": 10.0}), "float64")
    phi = np.exp(-a * ts)
    lam = phi - gain * (1 - phi)
    k = np.arange(result.time.size)
    np.testing.assert_allclose(result.output, gain / (1 + gain) * (1 - lam**k), rtol=0, atol=1e-13)
    np.testing.assert_allclose(result.time, k * ts, rtol=0, atol=1e-15)


def test_integrator_with_p_control_matches_closed_form():
    # Reference: 1/s under ZOH gives y[k+1] = y[k] + T u[k] (exact); with u = K (r - y)
    # y[k] = r (1 - (1 - K T)^k) (closed form, geometric series).
    ts, gain, r = 2e-3, 60.0, 2.5
    schedule = FunctionSchedule(constant_plant([0.0, 1.0], [1.0, 0.0]), period=ts)
    result = run_scenario(schedule, flat_table("p", kp=gain), Scenario(0.1, {"speed": 0.0}, reference=r), "float64")
    k = np.arange(result.time.size)
    np.testing.assert_allclose(result.output, r * (1 - (1 - gain * ts) ** k), rtol=0, atol=1e-12)


# ------------------------------------------------- frozen point vs python-control


CASES = [
    ("pi", {"kp": 0.4, "ki_ts": 0.02}, 1.0, 0.0),
    ("pi", {"kp": 0.3, "ki_ts": 0.01}, 1.0, 2e-3),
    ("pid", {"kp": 0.3, "ki_ts": 0.015, "kd_b": 2.0, "kd_a": 0.8}, 0.0, 1e-3),
    ("leadlag", {"kc": 0.5, "zc1": 0.95, "pc1": 0.6, "zc2": 0.99, "pc2": 1.0}, 1.0, 0.0),
]


@pytest.mark.parametrize("structure,coefficients,delay,dead_time", CASES)
@pytest.mark.parametrize("number_format,tolerance", [("float64", 1e-9), ("float32", 2e-5)])
def test_frozen_point_matches_python_control(structure, coefficients, delay, dead_time, number_format, tolerance):
    # Reference: python-control sample_system (ZOH) of the plant, times z^-(delay +
    # dead_time/T), closed with C(z) by feedback(); forced_response for the reference
    # step, and feedback(P_zoh, C z^-d) for the load at the plant input.  float32
    # tolerance: single-precision controller (eps 6e-8) over ~1000 samples of a
    # loop with gain near 1, stated as 2e-5 absolute on a unit step.
    ts, duration = 1e-3, 0.6
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=ts, delay=delay, dead_time=dead_time)
    table = flat_table(structure, **coefficients)
    scenario = Scenario(duration, {"speed": 30.0}, load_steps=(LoadStep(0.3, 0.2),))
    result = run_scenario(schedule, table, scenario, number_format)

    plant_zoh = control.sample_system(control.tf(SECOND_ORDER[0][2:], SECOND_ORDER[1]), ts, method="zoh")
    samples = int(round(delay + dead_time / ts))
    z = control.tf([1, 0], [1], ts)
    lag = 1 / z**samples if samples else 1
    ctrl = controller_tf(structure, ts, **coefficients)
    t = np.arange(result.time.size) * ts
    r = np.ones_like(t)
    w = np.where(t >= 0.3 - 1e-12, 0.2, 0.0)
    from_ref = control.forced_response(control.feedback(ctrl * plant_zoh * lag, 1), t, r).outputs
    from_load = control.forced_response(control.feedback(plant_zoh, ctrl * lag), t, w).outputs
    assert result.metrics.saturation_time == 0.0
    np.testing.assert_allclose(result.output, from_ref + from_load, rtol=0, atol=tolerance)


def test_fractional_dead_time_matches_continuous_replay():
    # Reference: scipy.signal.lsim of the continuous plant driven by the controller
    # output held over each sample and shifted by the total delay (computation delay
    # + dead time = 1.4 samples = 7 steps of T/5).
    ts, dead_time = 1e-3, 0.4e-3
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=ts, delay=1.0, dead_time=dead_time)
    result = run_scenario(
        schedule, flat_table("pi", kp=0.3, ki_ts=0.01), Scenario(0.15, {"speed": 0.0}), "float64"
    )
    # Fine grid of T/5: every sample instant and every switching instant
    # (t_k + 1.4 T) lies on it, so a held input on the grid is exact.
    fine = 5
    grid = np.arange((result.time.size - 1) * fine + 1) * (ts / fine)
    held = (np.arange(grid.size) - 7) // fine  # sample whose output reaches the plant
    u = np.where(held >= 0, result.control[np.clip(held, 0, None)], 0.0)
    system = scipy.signal.lti(SECOND_ORDER[0][2:], SECOND_ORDER[1])
    _, y, _ = scipy.signal.lsim(system, u, grid, interp=False)
    at_samples = np.arange(result.time.size) * fine
    np.testing.assert_allclose(result.output, y[at_samples], rtol=0, atol=1e-9)


def test_step_metrics_match_python_control_step_info():
    # Reference: python-control step_info (overshoot in percent, settling time to
    # 2 % of the final value) on the sampled closed loop of a type-1 loop, whose
    # final value is the reference.
    ts = 1e-3
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=ts, delay=1.0)
    coefficients = {"kp": 0.1, "ki_ts": 0.01}
    result = run_scenario(schedule, flat_table("pi", **coefficients), Scenario(1.5, {"speed": 0.0}), "float64")
    plant_zoh = control.sample_system(control.tf([900.0], SECOND_ORDER[1]), ts, method="zoh")
    closed = control.feedback(controller_tf("pi", ts, **coefficients) * plant_zoh / control.tf([1, 0], [1], ts), 1)
    info = control.step_info(closed, T=np.arange(result.time.size) * ts, SettlingTimeThreshold=0.02)
    assert info["Overshoot"] > 1.0 and np.isfinite(info["SettlingTime"])
    assert result.metrics.overshoot == pytest.approx(info["Overshoot"], abs=1e-6)
    assert result.metrics.settling_time == pytest.approx(info["SettlingTime"], abs=1.01 * ts)


# ----------------------------------------------------- saturation and anti-windup


@settings(max_examples=30, deadline=None)
@given(
    kp=st.floats(0.05, 2.0),
    ki_ts=st.floats(0.001, 0.2),
    limit=st.floats(0.2, 3.0),
    reference=st.floats(-3.0, 3.0).filter(lambda r: abs(r) > 0.1),
    load=st.floats(-2.0, 2.0),
    structure=st.sampled_from(["pi", "pid"]),
    number_format=st.sampled_from(["float64", "float32", "q15"]),
)
def test_saturation_and_conditional_integration_properties(kp, ki_ts, limit, reference, load, structure, number_format):
    # Reference: the anti-windup rule of DEVELOPERS.md "Discrete controller forms"
    # (conditional integration): while the output is beyond a limit and e pushes
    # further out, the integrator holds; the output never leaves the limits.
    # (If the final output is beyond the high rail with e > 0 and the integrator
    # had taken its new value, the trial output was beyond it too with a positive
    # increment, which the rule refuses; so the integrator must have held.)
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=1e-3, delay=1.0)
    coefficients = {"kp": kp, "ki_ts": ki_ts}
    if structure == "pid":
        coefficients.update(kd_b=0.5, kd_a=0.6)
    table = flat_table(structure, limits=(-limit, 0.8 * limit), **coefficients)
    scenario = Scenario(0.3, {"speed": 0.0}, reference=reference, load_steps=(LoadStep(0.15, load),))
    scale = {"error_full_scale": 8.0} if number_format == "q15" else {}
    result = run_scenario(schedule, table, scenario, number_format, **scale)
    u, v, e = result.control, result.unsaturated, result.error
    finite = np.isfinite(u)
    # The rails as the format holds them (float32 rounding, Q3.28 of full scale),
    # plus half an output LSB for Q15's final rounding.
    low, high = result.output_limits
    slack = 0.5 * limit / 2**15 if number_format == "q15" else 0.0
    assert abs(high - 0.8 * limit) <= 1e-6 * limit and abs(low + limit) <= 1e-6 * limit
    assert np.all(u[finite] <= high + slack) and np.all(u[finite] >= low - slack)
    x = result.states["integrator"]
    previous = np.concatenate([[0.0], x[:-1]])
    driving_up = (v > high) & (e > 0)
    driving_down = (v < low) & (e < 0)
    held = driving_up | driving_down
    np.testing.assert_array_equal(x[held], previous[held])


def test_integrator_stays_below_the_rail_through_a_long_saturation():
    # Reference: a bound that follows from the conditional-integration rule of
    # DEVELOPERS.md: the integrator can rise only when e > 0, and an accepted value
    # then satisfies kp e + x <= u_max, so with kp >= 0 it never exceeds u_max
    # (a wound-up integrator would climb far past it).  After the load goes the
    # type-1 loop returns to the reference (final-value theorem, from memory).
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=1e-3, delay=1.0)
    table = flat_table("pi", limits=(-1.05, 1.05), kp=0.3, ki_ts=0.01)
    loads = (LoadStep(0.0, -0.6), LoadStep(1.0, 0.6))  # needs u = 1.6 > 1.05 for 1 s
    result = run_scenario(schedule, table, Scenario(2.5, {"speed": 0.0}, load_steps=loads), "float64")
    assert result.metrics.saturation_time > 0.8
    assert np.max(result.states["integrator"]) <= 1.05
    # Plant DC gain 1 (900/900): the steady integrator equals the reference, 1.0.
    assert result.states["integrator"][-1] == pytest.approx(1.0, abs=1e-3)
    assert result.stable and abs(result.output[-1] - 1.0) < 1e-3


# -------------------------------------------------------------- growth detector


def test_growth_detector_flags_loop_with_pole_outside_unit_circle():
    # Reference: numpy.roots of the sampled characteristic polynomial z - lam with
    # lam = phi - K (1 - phi) (ZOH of a/(s + a), from memory): |lam| > 1 is unstable.
    a, ts = 40.0, 1e-3
    phi = np.exp(-a * ts)
    schedule = FunctionSchedule(constant_plant([0.0, a], [1.0, a]), period=ts)
    unstable_gain, stable_gain = 2.05 / (1 - phi), 1.9 / (1 - phi)
    for gain, expect in ((unstable_gain, True), (stable_gain, False)):
        pole = np.roots([1.0, -(phi - gain * (1 - phi))])
        assert (np.abs(pole) > 1).any() == expect
        result = run_scenario(schedule, flat_table("p", kp=gain), Scenario(0.5, {"speed": 0.0}), "float64")
        assert result.metrics.instability.detected == expect, result.metrics.instability
        assert result.passed == (not expect)


def test_growth_detector_sees_slow_geometric_growth():
    # Reference: sampled pole lam = phi - K (1 - phi) of a/(s + a) under P control
    # (closed form, from memory; checked with numpy.roots).  lam = -1.01: the error
    # grows by 1.01 per sample, 1.01^62 = 1.86x per eighth of a 0.5 s run, and only
    # 1.01^500 = 145x overall, below the divergence bound: "growing" must fire.
    a, ts = 40.0, 1e-3
    phi = np.exp(-a * ts)
    gain = (phi + 1.01) / (1 - phi)
    pole = np.roots([1.0, -(phi - gain * (1 - phi))])
    assert np.abs(pole[0]) == pytest.approx(1.01)
    schedule = FunctionSchedule(constant_plant([0.0, a], [1.0, a]), period=ts)
    result = run_scenario(schedule, flat_table("p", kp=gain), Scenario(0.5, {"speed": 0.0}), "float64")
    assert result.metrics.instability.kind == "growing", result.metrics.instability
    assert np.max(np.abs(result.error)) < 1e6


def test_growth_detector_sees_saturated_oscillation():
    # Reference: same unstable sampled pole as above (numpy.roots); with tight output
    # limits the divergence turns into a bounded oscillation between the limits.
    a, ts = 40.0, 1e-3
    phi = np.exp(-a * ts)
    gain = 2.5 / (1 - phi)
    schedule = FunctionSchedule(constant_plant([0.0, a], [1.0, a]), period=ts)
    result = run_scenario(schedule, flat_table("p", limits=(-2.0, 2.0), kp=gain), Scenario(0.5, {"speed": 0.0}))
    assert result.metrics.instability.kind == "limit_cycle"
    assert not result.passed


def test_growth_detector_is_silent_on_linear_drift():
    # Reference: a type-0 loop under a ramp reference has a linearly growing error
    # (final-value theorem, from memory); linear drift is not instability.
    a, ts = 40.0, 1e-3
    schedule = FunctionSchedule(constant_plant([0.0, a], [1.0, a]), period=ts)
    scenario = Scenario(0.5, {"speed": 0.0}, reference=PiecewiseLinear([0.0, 0.5], [0.0, 50.0]))
    result = run_scenario(schedule, flat_table("p", kp=2.0), scenario)
    assert result.stable


def test_divergence_of_an_unstable_plant_is_caught_without_overflow():
    # Reference: 20/(s - 20) under u = kp (r - y) has the closed-loop pole
    # s = 20 (1 - kp) (closed form); kp = 0.5 leaves it at +10 1/s, so y grows like
    # exp(10 t) past 1e6 before t = 2 s, and tight limits cannot hold it either.
    schedule = FunctionSchedule(constant_plant([0.0, 20.0], [1.0, -20.0]), period=1e-3)
    for limits in ((-1e30, 1e30), (-1.0, 1.0)):
        table = flat_table("p", limits=limits, kp=0.5)
        result = run_scenario(schedule, table, Scenario(3.0, {"speed": 0.0}), "float64")
        assert result.metrics.instability.kind == "diverged"
        json.dumps(result.to_dict(), allow_nan=False)
    # 1/s with K T = 3: |1 - K T| = 2 per sample (closed form above); the output
    # overflows float64 long before 3 s unless the run is stopped.
    table = flat_table("p", limits=(-1e300, 1e300), kp=3000.0)
    integrator = FunctionSchedule(constant_plant([0.0, 1.0], [1.0, 0.0]), period=1e-3)
    result = run_scenario(integrator, table, Scenario(3.0, {"speed": 0.0}), "float64")
    assert result.metrics.instability.kind == "diverged"


# ------------------------------------------------------- interpolation of the table


def test_interpolation_matches_scipy_and_clamps():
    # Reference: scipy RegularGridInterpolator (method="linear") on clipped queries
    # (clamping at the axis ends is the firmware's rule).
    rng = np.random.default_rng(3)
    axes = (np.array([0.0, 500.0, 1500.0, 6000.0]), np.array([0.0, 0.5, 2.0]))
    grid = rng.normal(size=(4, 3))
    points = np.column_stack([rng.uniform(-1000, 7000, 200), rng.uniform(-1, 3, 200)])
    clipped = np.column_stack([np.clip(points[:, i], axes[i][0], axes[i][-1]) for i in range(2)])
    expected = RegularGridInterpolator(axes, grid, method="linear")(clipped)
    np.testing.assert_allclose(interpolate_grid(axes, grid, points), expected, rtol=0, atol=1e-12)
    single = interpolate_grid(axes[:1], grid[:, 0], points[:, :1])
    np.testing.assert_allclose(single, np.interp(points[:, 0], axes[0], grid[:, 0]), rtol=0, atol=1e-12)
    # float32: rounding of the stored table and the arithmetic only (IEEE single,
    # eps 2^-23 relative, a handful of operations).
    single32 = interpolate_grid(axes, grid, points, np.float32)
    assert single32.dtype == np.float32
    np.testing.assert_allclose(single32, expected, rtol=0, atol=1e-5 * np.max(np.abs(grid)))
    nodes = np.array([[500.0, 0.5], [1500.0, 2.0], [6000.0, 0.0]])
    at_nodes = interpolate_grid(axes, grid, nodes, np.float32)
    assert at_nodes[0] == np.float32(grid[1, 1]) and at_nodes[2] == np.float32(grid[3, 0])


def test_scheduled_gains_follow_the_table_along_the_ramp():
    # Reference: numpy.interp of the table column at the trajectory values.
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=1e-3, delay=1.0)
    values = np.array([0.0, 2000.0, 6000.0])
    axis = TableAxis("speed", "rpm", values)
    kp = np.array([0.2, 0.4, 0.3])
    table = GainTable("pi", (axis,), {"kp": kp, "ki_ts": np.array([0.01, 0.02, 0.015])}, 1e-3, (-5, 5))
    scenario = Scenario(0.4, {"speed": PiecewiseLinear.ramp(0.0, 6000.0, 0.0, 0.4)})
    result = run_scenario(schedule, table, scenario, "float64")
    np.testing.assert_allclose(result.gains["kp"], np.interp(result.points[:, 0], values, kp), atol=1e-15)
    assert result.gains["kp"][0] == 0.2 and result.gains["kp"][-1] == pytest.approx(0.3, abs=1e-15)


# ------------------------------------------------------------ scheduled behaviour


def moving_plant(points):
    # Natural frequency 20..60 rad/s with speed 0..6000 rpm (invented demo plant).
    wn = 20.0 + points[:, 0] / 150.0
    q = points.shape[0]
    return np.column_stack([np.zeros(q), np.zeros(q), wn**2]), np.column_stack([np.ones(q), 0.6 * wn, wn**2])


def test_ramp_result_is_continuous_in_the_size_of_the_ramp():
    # Reference: continuity of the solution of a stable ODE in its coefficients
    # (Lipschitz dependence, from memory): shrinking the ramp from p0 to p0 + h
    # makes the run converge to the frozen-p0 run, linearly in h.
    schedule = FunctionSchedule(moving_plant, period=1e-3, delay=1.0)
    values = np.array([0.0, 3000.0, 6000.0])
    table = GainTable(
        "pi",
        (TableAxis("speed", "rpm", values),),
        {"kp": np.array([0.2, 0.25, 0.3]), "ki_ts": np.array([0.005, 0.0075, 0.01])},
        1e-3,
        (-10, 10),
    )
    frozen = run_scenario(schedule, table, Scenario(0.5, {"speed": 1000.0}), "float64")
    gaps = []
    for size in (400.0, 40.0, 4.0):
        ramp = PiecewiseLinear.ramp(1000.0, 1000.0 + size, 0.0, 0.5)
        moved = run_scenario(schedule, table, Scenario(0.5, {"speed": ramp}), "float64")
        gaps.append(np.max(np.abs(moved.output - frozen.output)))
    assert gaps[0] > 0
    np.testing.assert_allclose(np.array(gaps[:-1]) / np.array(gaps[1:]), 10.0, rtol=0.05)


def test_hold_ramp_hold_meets_frozen_runs_at_both_ends():
    # Reference: causality (before the ramp starts the run is the frozen-start run,
    # sample for sample) and the final-value theorem for a type-1 loop (after the
    # ramp the output returns to the reference, as the frozen-end run does).
    schedule = FunctionSchedule(moving_plant, period=1e-3, delay=1.0)
    values = np.array([0.0, 6000.0])
    table = GainTable(
        "pi", (TableAxis("speed", "rpm", values),), {"kp": np.array([0.2, 0.3]), "ki_ts": np.array([0.005, 0.01])},
        1e-3, (-10, 10),
    )
    ramp = PiecewiseLinear.ramp(0.0, 6000.0, 0.3, 0.5)
    moved = run_scenario(schedule, table, Scenario(2.5, {"speed": ramp}), "float64")
    start = run_scenario(schedule, table, Scenario(2.5, {"speed": 0.0}), "float64")
    end = run_scenario(schedule, table, Scenario(2.5, {"speed": 6000.0}), "float64")
    before = moved.time <= 0.3
    np.testing.assert_array_equal(moved.output[before], start.output[before])
    assert abs(moved.output[-1] - 1.0) < 1e-4 and abs(end.output[-1] - 1.0) < 1e-4


def test_sample_period_follows_the_operating_point():
    # Reference: the firmware's sampling rule t[k+1] = t[k] + T(p(t[k])) checked
    # directly against the period function at each instant.
    def period(points):
        return 1e-3 / (1.0 + points[:, 0] / 3000.0)

    schedule = FunctionSchedule(moving_plant, period=period, delay=1.0)
    table = flat_table("pi", kp=0.3, ki_ts=0.02)
    ramp = PiecewiseLinear.ramp(0.0, 6000.0, 0.0, 0.3)
    result = run_scenario(schedule, table, Scenario(0.3, {"speed": ramp}), "float64")
    expected = period(ramp(result.time)[:, np.newaxis])
    np.testing.assert_allclose(np.diff(result.time), expected[:-1], rtol=1e-9, atol=0)
    np.testing.assert_allclose(result.sample_period, expected, rtol=1e-12)
    assert result.time[-1] <= 0.3 and result.time[-1] + result.sample_period[-1] > 0.3
    assert any("sample period differs" in w for w in result.warnings)


def test_sample_times_with_a_constant_period():
    # Reference: numpy.arange (K = floor(duration / T) + 1 instants).
    times = sample_times(0.01, lambda t: np.full(t.shape, 1e-4))
    np.testing.assert_allclose(times, np.arange(101) * 1e-4, atol=1e-15)


# ------------------------------------------------------------------- building blocks


def test_split_delay_into_whole_samples_and_remainder():
    # Reference: arithmetic (1 sample is 1 whole sample and 0 s; 1.4 samples of
    # 0.1 ms are 1 whole sample and 0.04 ms).
    whole, fraction = split_delay(np.array([1.0, 1.4, 3.0]), np.array([1e-4, 1e-4, 1e-4]))
    assert whole.tolist() == [1, 1, 3]
    np.testing.assert_allclose(fraction, [0.0, 0.4e-4, 0.0], atol=1e-18)
    with pytest.raises(InputError, match="finite and >= 0"):
        split_delay(np.array([-1.0]), np.array([1e-4]))


def test_piecewise_linear_signal():
    # Reference: numpy.interp for the ramp; jumps are right-continuous by definition.
    signal = PiecewiseLinear([0.0, 1.0, 1.0, 2.0], [0.0, 2.0, 5.0, 5.0])
    t = np.array([-1.0, 0.5, 0.999, 1.0, 1.5, 3.0])
    np.testing.assert_allclose(signal(t), [0.0, 1.0, 1.998, 5.0, 5.0, 5.0])
    assert signal.jumps == ((1.0, 2.0, 5.0),)


# ---------------------------------------------------------------- results and errors


def test_specs_decide_pass_and_result_is_json_ready():
    # Reference: python-control step_info overshoot of the same loop (as above) sets
    # the limit either side of the measured value.
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER), period=1e-3, delay=1.0)
    table = flat_table("pi", kp=0.4, ki_ts=0.02)
    plant_zoh = control.sample_system(control.tf([900.0], SECOND_ORDER[1]), 1e-3, method="zoh")
    closed = control.feedback(controller_tf("pi", 1e-3, kp=0.4, ki_ts=0.02) * plant_zoh / control.tf([1, 0], [1], 1e-3), 1)
    overshoot = control.step_info(closed, T=np.arange(1001) * 1e-3)["Overshoot"]
    for limit, expect in ((overshoot * 1.01, True), (overshoot * 0.99, False)):
        scenario = Scenario(1.0, {"speed": 0.0}, specs=ScenarioSpecs(max_overshoot=limit))
        result = run_scenario(schedule, table, scenario)
        assert result.passed == expect
        data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
        assert data["checks"][0]["passed"] == expect and len(data["series"]["output"]) == result.time.size
        assert any("overshoot" in line for line in result.summary())


def test_bad_input_is_refused_with_a_message():
    schedule = FunctionSchedule(constant_plant(*SECOND_ORDER))
    table = flat_table("p", kp=1.0)
    with pytest.raises(InputError, match="the scenario moves load, which the schedule does not have"):
        run_scenario(schedule, table, Scenario(0.1, {"speed": 1.0, "load": 1.0}))
    two_axes = FunctionSchedule(constant_plant(*SECOND_ORDER), axes=("speed", "load"))
    with pytest.raises(InputError, match="no path for scheduling variable.*load"):
        run_scenario(two_axes, table, Scenario(0.1, {"speed": 1.0}))
    with pytest.raises(InputError, match="unknown number format 'q16'"):
        run_scenario(schedule, table, Scenario(0.1, {"speed": 1.0}), "q16")
    with pytest.raises(InputError, match="need a reference step"):
        run_scenario(
            schedule,
            table,
            Scenario(0.1, {"speed": 1.0}, reference=PiecewiseLinear.constant(1.0), specs=ScenarioSpecs(max_overshoot=5)),
        )
    with pytest.raises(InputError, match="duration must be > 0"):
        Scenario(0.0, {"speed": 1.0})


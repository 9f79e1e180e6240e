"""Scenario-driven feedforward and run-time output limits of the simulated step.

Each check names its outside reference beside it: closed forms of sampled
first-order loops, the definition of saturation, an independent simulation
built on ``scipy.signal.cont2discrete``, and the code-generation layer's
Python mirror (``run_steps``, checked bit for bit against the compiled C by
the codegen tests) for the fixed-point and float32 arithmetic.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest
from cases import FunctionSchedule, constant_plant, flat_table
from scipy.signal import cont2discrete

from gainloom import InputError
from gainloom.codegen.layout import layout_table
from gainloom.codegen.mirror import lookup_gains, run_steps
from gainloom.codegen.qformat import quantize
from gainloom.design.table import GainTable, TableAxis
from gainloom.simulation import (
    Feedforward,
    LimitStep,
    LoadStep,
    PiecewiseLinear,
    Scenario,
    run_scenario,
)

A, TS = 40.0, 1e-3  # first-order lag a/(s + a) sampled at 1 kHz (invented)
LAG = constant_plant([0.0, A], [1.0, A])
PHI = np.exp(-A * TS)  # ZOH pole of a/(s + a) (textbook closed form, from memory)
SCALES = {"float64": {}, "float32": {}, "q15": {"output_full_scale": 2.0}, "q31": {"output_full_scale": 2.0}}


class ParameterSchedule(FunctionSchedule):
    """The stand-in schedule with parameters evaluated at the points."""

    def __init__(self, plant, parameters, **kwargs):
        super().__init__(plant, **kwargs)
        self.parameter_functions = parameters

    def evaluate(self, points, scale=None):
        models = super().evaluate(points, scale)
        parameters = {name: f(np.asarray(points, float)) for name, f in self.parameter_functions.items()}
        return SimpleNamespace(**{**models.__dict__, "parameters": parameters})


def first_sample_at(result, time):
    return int(np.argmax(result.time >= time - 1e-12))


# ------------------------------------------------------------- feedforward


@pytest.mark.parametrize("number_format", ["float64", "float32", "q15", "q31"])
def test_exact_feedforward_of_a_load_keeps_the_error_at_zero(number_format):
    # Reference: with no computation delay the plant input is u + d; fed forward
    # as -d from the same sample, it is exactly 0 (0.5 is exact in every format),
    # so from rest y stays at 0 and so does r - y (superposition, closed form).
    table = flat_table("pi", limits=(-2.0, 2.0), kp=0.8, ki_ts=0.05)
    schedule = FunctionSchedule(LAG, period=TS)
    load = (LoadStep(0.05, 0.5),)
    fed = Scenario(0.2, {"speed": 10.0}, reference=0.0, load_steps=load, feedforward=Feedforward(-0.5, 0.05))
    result = run_scenario(schedule, table, fed, number_format, **SCALES[number_format])
    assert np.all(result.output == 0.0) and result.metrics.max_error == 0.0
    assert np.all(result.states["integrator"] == 0.0)
    assert np.all(result.control[result.time >= 0.05] == -0.5) and np.all(result.control[result.time < 0.05] == 0.0)
    # Without it the load moves the output (the check above can fail).
    bare = run_scenario(schedule, table, Scenario(0.2, {"speed": 10.0}, reference=0.0, load_steps=load),
                        number_format, **SCALES[number_format])
    assert bare.metrics.max_error > 0.05


def test_feedforward_leaves_the_reference_response_of_the_closed_form():
    # Reference: y[k] = K/(1 + K) (1 - lam^k), lam = phi - K (1 - phi), the ZOH loop
    # of a/(s + a) under P control (geometric series); a load cancelled by the
    # feedforward leaves it unchanged.
    gain = 3.0
    fed = Scenario(0.2, {"speed": 10.0}, reference=1.0, load_steps=(LoadStep(0.08, 0.25),),
                   feedforward=Feedforward("-0.25", start=0.08))
    result = run_scenario(FunctionSchedule(LAG, period=TS), flat_table("p", kp=gain), fed, "float64")
    lam = PHI - gain * (1 - PHI)
    k = np.arange(result.time.size)
    np.testing.assert_allclose(result.output, gain / (1 + gain) * (1 - lam**k), rtol=0, atol=1e-13)


def test_feedforward_of_the_measured_output_uses_the_same_sample():
    # Reference: u[k] = K (r - y[k]) + c y[k] gives y[k+1] = lam y[k] + (1 - phi) K r
    # with lam = phi - (K - c)(1 - phi): y[k] = y_inf (1 - lam^k),
    # y_inf = (1 - phi) K r / (1 - lam) (geometric series).  Using y[k-1] instead
    # would give a second-order recursion and miss it.
    gain, c, r = 3.0, 1.5, 2.0
    scenario = Scenario(0.15, {"speed": 10.0}, reference=r, feedforward=Feedforward(f"{c} * y"))
    result = run_scenario(FunctionSchedule(LAG, period=TS), flat_table("p", kp=gain), scenario, "float64")
    lam = PHI - (gain - c) * (1 - PHI)
    k = np.arange(result.time.size)
    np.testing.assert_allclose(result.output, (1 - PHI) * gain * r / (1 - lam) * (1 - lam**k), rtol=0, atol=1e-12)
    np.testing.assert_allclose(result.feedforward, c * result.output, rtol=1e-15, atol=0)


def test_feedforward_expression_of_a_scheduling_variable_and_a_parameter():
    # Reference: the definition; a back-EMF ke * speed along a speed ramp, ke a
    # parameter of the schedule (0.01 V/rpm, invented).
    schedule = ParameterSchedule(LAG, {"ke": lambda p: np.full(p.shape[0], 0.01)}, period=TS)
    scenario = Scenario(0.1, {"speed": PiecewiseLinear.ramp(0.0, 3000.0, 0.0, 0.1)},
                        feedforward=Feedforward("ke * speed + 0 * t"))
    result = run_scenario(schedule, flat_table("p", kp=0.5), scenario, "float64")
    np.testing.assert_allclose(result.feedforward, 0.01 * result.points[:, 0], rtol=1e-14, atol=1e-14)
    assert result.scenario["feedforward"] == {"value": "ke * speed + 0 * t", "start": 0.0}


# ---------------------------------------------------------- run-time limits


@pytest.mark.parametrize("number_format", ["float64", "float32", "q15", "q31"])
def test_a_limit_step_clamps_the_output_on_its_first_sample(number_format):
    # Reference: the definition of saturation, u = min(max(v, low), high) with the
    # limits in force at that sample; -0.5 and 0.5 are exact in every format.
    # A P loop on a/(s + a), r = 1, K = 3 settles at u = 0.75 (closed form above);
    # under the +-0.5 sag y tends to 0.5, K (r - y) >= 1.5 > 0.5: saturated at
    # every sample of the sag; outside it the table's +-5 never bind (u starts at
    # K r = 3 and falls towards 0.75).
    table = flat_table("p", limits=(-5.0, 5.0), kp=3.0)
    scales = {} if number_format.startswith("float") else {"output_full_scale": 8.0, "error_full_scale": 2.0}
    scenario = Scenario(0.3, {"speed": 10.0}, reference=1.0,
                        limit_steps=(LimitStep(0.1, -0.5, 0.5), LimitStep(0.2)))
    result = run_scenario(FunctionSchedule(LAG, period=TS), table, scenario, number_format, **scales)
    start, end = first_sample_at(result, 0.1), first_sample_at(result, 0.2)
    assert result.control[start] == 0.5 and result.control[start - 1] > 0.7
    assert np.all(result.control[start:end] == 0.5) and np.all(result.control[end:] > 0.5)
    assert np.all(result.limits_in_force[1][start:end] == 0.5) and np.all(result.limits_in_force[1][end:] == 5.0)
    # time in saturation: exactly the sag's samples (the table's limits alone give 0)
    assert result.metrics.saturation_time == pytest.approx((end - start) * TS, rel=1e-12)


def test_limit_expressions_follow_a_scheduling_variable():
    # Reference: the definition; a bus voltage sagging from 48 V to 24 V, limits
    # +-vbus/sqrt(3) (largest undistorted phase voltage of space-vector PWM,
    # from memory), a P loop driven hard into the upper limit.
    vbus = PiecewiseLinear([0.0, 0.05, 0.1], [48.0, 48.0, 24.0])
    scenario = Scenario(0.15, {"speed": 10.0, "vbus": vbus}, reference=100.0,
                        limit_steps=(LimitStep(0.0, "-vbus / sqrt(3)", "vbus / sqrt(3)"),))
    schedule = FunctionSchedule(LAG, period=TS, axes=("speed", "vbus"))
    result = run_scenario(schedule, flat_table("p", limits=(-1e3, 1e3), kp=50.0), scenario, "float64")
    np.testing.assert_allclose(result.control, result.points[:, 1] / np.sqrt(3.0), rtol=1e-15)


def _independent_pi(kp, ki_ts, limits, reference, samples, clamp):
    """PI on a/(s + a) from scipy.signal.cont2discrete (ZOH), saturation at
    ``limits[k]`` and, when ``clamp``, conditional integration: the new
    integrator value is refused when the output before saturation is beyond a
    limit and the increment points further out (DEVELOPERS.md rule)."""
    ad, bd, cd, _, _ = cont2discrete((np.array([[-A]]), np.array([[A]]), np.eye(1), np.zeros((1, 1))), TS)
    x_plant, x_int, outputs, controls = 0.0, 0.0, [], []
    for k in range(samples):
        y = float(cd[0, 0] * x_plant)
        e = reference - y
        low, high = limits[k]
        increment = ki_ts * e
        trial = kp * e + x_int + increment
        if not clamp or not ((trial > high and increment > 0) or (trial < low and increment < 0)):
            x_int += increment
        u = min(max(kp * e + x_int, low), high)
        outputs.append(y)
        controls.append(u)
        x_plant = float(ad[0, 0] * x_plant + bd[0, 0] * u)
    return np.array(outputs), np.array(controls)


def test_integrator_does_not_wind_up_during_a_bus_sag():
    # Reference: an independent simulation (scipy.signal.cont2discrete ZOH plant,
    # the clamping rule coded here from DEVELOPERS.md), and its wound-up twin
    # (integrating through the sag) for the overshoot clamping must avoid.  This PI
    # does not overshoot a unit step without limits (the independent simulation
    # with the table's limits alone: peak 0.9984); after the sag it must not either.
    kp, ki_ts = 0.5, 0.01
    table = flat_table("pi", limits=(-5.0, 5.0), kp=kp, ki_ts=ki_ts)
    scenario = Scenario(0.8, {"speed": 10.0}, reference=1.0,
                        limit_steps=(LimitStep(0.1, -0.3, 0.3), LimitStep(0.4)))
    result = run_scenario(FunctionSchedule(LAG, period=TS), table, scenario, "float64")
    sag = (result.time >= 0.1 - 1e-12) & (result.time < 0.4 - 1e-12)
    limits = [(-0.3, 0.3) if s else (-5.0, 5.0) for s in sag]
    y, u = _independent_pi(kp, ki_ts, limits, 1.0, result.time.size, clamp=True)
    np.testing.assert_allclose(result.output, y, rtol=0, atol=1e-12)
    np.testing.assert_allclose(result.control, u, rtol=0, atol=1e-12)
    after = result.time >= 0.4
    wound, _ = _independent_pi(kp, ki_ts, limits, 1.0, result.time.size, clamp=False)
    overshoot, wound_overshoot = np.max(result.output[after]) - 1.0, np.max(wound[after]) - 1.0
    plain, _ = _independent_pi(kp, ki_ts, [(-5.0, 5.0)] * result.time.size, 1.0, result.time.size, clamp=True)
    assert np.max(plain) < 1.0
    assert wound_overshoot > 0.5 and overshoot <= 0.0, (overshoot, wound_overshoot)
    held = result.states["integrator"][sag]
    assert np.all(held[1:] == held[0])  # refused at every sample of the sag


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_simulated_step_is_the_mirror_with_feedforward_and_limits(number_format):
    # Reference: codegen.mirror.run_steps, bit for bit (itself checked against the
    # compiled C by the harness tests), on the errors, feedforward and run-time
    # limits the simulation fed the step, as the firmware would receive them.
    axis = TableAxis("speed", "rpm", np.array([0.0, 1000.0, 3000.0]))
    table = GainTable("pid", (axis,), {"kp": np.array([0.4, 0.6, 0.9]), "ki_ts": np.array([0.02, 0.03, 0.05]),
                                       "kd_b": np.array([0.5, 0.4, 0.3]), "kd_a": np.array([0.5, 0.6, 0.7])},
                      np.full(3, TS), (-2.0, 2.0))
    fixed = number_format.startswith("q")
    scales = {"error_full_scale": 2.0, "output_full_scale": 4.0} if fixed else {}
    scenario = Scenario(
        0.4, {"speed": PiecewiseLinear.ramp(0.0, 3000.0, 0.0, 0.4)}, reference=1.5,
        load_steps=(LoadStep(0.25, -0.4),), feedforward=Feedforward("0.2 * y + 0.0001 * speed", 0.05),
        limit_steps=(LimitStep(0.1, "-1", "0.6 + 0.1 * t"), LimitStep(0.2, 1, -1), LimitStep(0.3)),
    )
    result = run_scenario(FunctionSchedule(LAG, period=TS), table, scenario, number_format, **scales)
    layout = layout_table(table, number_format, **scales)
    speed = result.points[:, 0]
    use = (result.time >= 0.1 - 1e-12) & (result.time < 0.3 - 1e-12)
    low = np.where(result.time < 0.2 - 1e-12, -1.0, 1.0)
    high = np.where(result.time < 0.2 - 1e-12, 0.6 + 0.1 * result.time, -1.0)  # from 0.2 s: low > high, ignored
    if fixed:
        fmt = layout.fmt
        gains = lookup_gains(layout, quantize(speed, layout.axes[0].frac, 32))
        errors = quantize(result.error / 2.0, fmt.signal_frac, fmt.bits)
        codes = [quantize(v / 4.0, fmt.signal_frac, fmt.bits) for v in (result.feedforward, low, high)]
        trace = run_steps(layout, gains, errors, codes[0], (use, codes[1], codes[2]))
        np.testing.assert_array_equal(quantize(result.control / 4.0, fmt.signal_frac, fmt.bits), trace.output)
    else:
        gains = lookup_gains(layout, speed.astype(np.float32))
        errors = np.float32(result.reference) - np.float32(result.output)
        trace = run_steps(layout, gains, errors, result.feedforward.astype(np.float32),
                          (use, low.astype(np.float32), high.astype(np.float32)))
        np.testing.assert_array_equal(result.control.astype(np.float32), trace.output)
    assert any("low > high" in w for w in result.warnings)
    assert np.all(result.limits_in_force[1][result.time >= 0.2] == result.output_limits[1])


# --------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    "build,message",
    [
        (lambda: Feedforward("ke * sped"), None),
        (lambda: Feedforward("2 *"), "feedforward: cannot parse expression '2 *' for the value"),
        (lambda: Feedforward("__import__('os')"), "unknown function '__import__'"),
        (lambda: Feedforward("y if t else 0"), "conditionals are not supported"),
        (lambda: Feedforward(1.0, start=-1), "feedforward start must be a finite time >= 0 s"),
        (lambda: Feedforward(float("nan")), "expected a finite number"),
        (lambda: LimitStep(0.1, -1.0), "give both limits (low and high), or neither"),
        (lambda: LimitStep(0.1, "-x ^ 2", 1.0), "use ** for powers, not ^"),
        (lambda: Scenario(1.0, {"speed": 1.0}, limit_steps=(LimitStep(0.2), LimitStep(0.2, 0, 1))),
         "two limit steps at 0.2 s"),
    ],
)
def test_bad_scenario_inputs_are_refused_with_a_message(build, message):
    if message is None:  # parses; the name is checked against the schedule at run time
        scenario = Scenario(0.05, {"speed": 1.0}, feedforward=build())
        schedule = ParameterSchedule(LAG, {"ke": lambda p: np.ones(p.shape[0])}, period=TS)
        with pytest.raises(InputError, match=r"feedforward: unknown name 'sped'.*did you mean 'speed'.*character 6"):
            run_scenario(schedule, flat_table("p", kp=1.0), scenario, "float64")
        return
    with pytest.raises(InputError) as caught:
        build()
    assert message in str(caught.value)


def test_non_finite_values_and_ambiguous_names_are_refused():
    schedule = ParameterSchedule(LAG, {"y": lambda p: np.ones(p.shape[0])}, period=TS)
    table = flat_table("p", kp=1.0)
    with pytest.raises(InputError, match=r"'log\(t\)' is not finite at t = 0 s \(1 of"):
        run_scenario(schedule, table, Scenario(0.05, {"speed": 1.0}, feedforward=Feedforward("log(t)")), "float64")
    with pytest.raises(InputError, match="'y' in '2 \\* y' is both the run's measured plant output"):
        run_scenario(schedule, table, Scenario(0.05, {"speed": 1.0}, feedforward=Feedforward("2 * y")), "float64")

"""The Python mirror of the generated C against independent references:
numpy/scipy interpolation for the lookup, scipy.signal.lfilter of the
transfer functions C(z) in DEVELOPERS.md for the controller step, and the
conditional-integration rule written out in float64."""

import numpy as np
import pytest
from cases import make_table
from scipy.interpolate import RegularGridInterpolator
from scipy.signal import lfilter

from gainloom.codegen.layout import layout_table
from gainloom.codegen.mirror import lookup_gains, run_steps
from gainloom.codegen.qformat import dequantize

EPS32 = float(np.finfo(np.float32).eps)


def _axis_inputs(layout, axis, physical):
    if layout.fmt.is_fixed:
        return np.round(physical * 2.0**axis.frac).astype(np.int64)
    return physical.astype(np.float32)


def _input_physical(layout, axis, inputs):
    return dequantize(inputs, axis.frac) if layout.fmt.is_fixed else inputs.astype(float)


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
@pytest.mark.parametrize("dims", [1, 2])
@pytest.mark.parametrize("uniform", [True, False])
def test_lookup_matches_scipy_interpolation_on_the_stored_table(number_format, dims, uniform):
    # Reference: numpy.interp (1-D) and scipy RegularGridInterpolator
    # (linear = bilinear in 2-D) on the stored breakpoints and values.
    table = make_table("pid", dims=dims, uniform=uniform)
    layout = layout_table(table, number_format)
    rng = np.random.default_rng(5)
    physical = [rng.uniform(a.values[0], a.values[-1], 500) for a in layout.axes]
    inputs = [_axis_inputs(layout, a, p) for a, p in zip(layout.axes, physical)]
    at = np.column_stack([_input_physical(layout, a, x) for a, x in zip(layout.axes, inputs)])
    grid = tuple(a.stored_physical for a in layout.axes)
    gains = lookup_gains(layout, *inputs)
    for item in layout.coefficients:
        values = item.stored.astype(float)
        if dims == 1:
            expected = np.interp(at[:, 0], grid[0], values)
        else:
            expected = RegularGridInterpolator(grid, values)(at)
        if layout.fmt.is_fixed:
            # per stage: weight below the exact one by less than 2 * 2**-F (its
            # floor and the floor of the stored reciprocal; error < 2 |g1 - g0|
            # 2**-F LSB) plus 0.5 LSB rounding; 2-D: row stage then column stage
            steps = max(np.max(np.abs(np.diff(values, axis=k))) for k in range(dims))
            bound = dims * (0.5 + 2 * steps * 2.0**-layout.fmt.interp_frac) + 0.5
            assert np.max(np.abs(gains[item.name] - expected)) <= bound, item.name
        else:
            # a few float32 roundings of magnitude max|table|
            bound = 8 * EPS32 * np.max(np.abs(values)) * (3 if dims == 2 else 1)
            assert np.max(np.abs(gains[item.name] - expected)) <= bound, item.name


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_lookup_clamps_at_the_ends_and_at_nan(number_format):
    # Documented lookup rule: at or beyond an end -> that breakpoint's values
    # exactly; NaN (float32) -> first breakpoint.
    layout = layout_table(make_table("pi", dims=2, uniform=False), number_format)
    a0, a1 = layout.axes
    if layout.fmt.is_fixed:
        below0, above0 = np.array([-(2**31), a0.stored[0] - 1]), np.array([a0.stored[-1] + 7, 2**31 - 1])
        below1, above1 = np.array([-(2**31), a1.stored[0]]), np.array([a1.stored[-1], 2**31 - 1])
    else:
        below0, above0 = np.array([-np.inf, np.nan], np.float32), np.array([1e9, np.inf], np.float32)
        below1, above1 = np.array([-1e30, np.nan], np.float32), np.array([np.float32(a1.stored[-1]), 1e30], np.float32)
    for item in layout.coefficients:
        t = item.stored
        assert np.all(lookup_gains(layout, below0, below1)[item.name] == t[0, 0])
        assert np.all(lookup_gains(layout, above0, above1)[item.name] == t[-1, -1])
        assert np.all(lookup_gains(layout, below0, above1)[item.name] == t[0, -1])
        # exactly on interior breakpoints: the stored value itself
        on = lookup_gains(layout, a0.stored[1:-1], np.full(a0.size - 2, a1.stored[1]))[item.name]
        np.testing.assert_array_equal(on, t[1:-1, 1])


def _controller_tf(structure, g):
    """C(z) of DEVELOPERS.md as (b, a) in powers of z^-1."""
    if structure == "pi":
        # kp + ki_ts z/(z-1) = ((kp + ki_ts) - kp z^-1) / (1 - z^-1)
        return np.array([g["kp"] + g["ki_ts"], -g["kp"]]), np.array([1.0, -1.0])
    if structure == "pid":
        b_pi, a_pi = _controller_tf("pi", g)
        b_d, a_d = np.array([g["kd_b"], -g["kd_b"]]), np.array([1.0, -g["kd_a"]])
        return np.polyadd(np.polymul(b_pi, a_d), np.polymul(b_d, a_pi)), np.polymul(a_pi, a_d)
    if structure in ("lead", "lag"):
        return g["kc"] * np.array([1.0, -g["zc"]]), np.array([1.0, -g["pc"]])
    if structure == "leadlag":
        b = g["kc"] * np.polymul([1.0, -g["zc1"]], [1.0, -g["zc2"]])
        return b, np.polymul([1.0, -g["pc1"]], [1.0, -g["pc2"]])
    if structure == "pd":
        b_d, a_d = np.array([g["kd_b"], -g["kd_b"]]), np.array([1.0, -g["kd_a"]])
        return np.polyadd(g["kp"] * a_d, b_d), a_d
    return np.array([g["kp"]]), np.array([1.0])


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
@pytest.mark.parametrize("structure", ["p", "pi", "pd", "pid", "lead", "lag", "leadlag"])
def test_step_matches_lfilter_of_the_transfer_function_when_unsaturated(number_format, structure):
    # Reference: scipy.signal.lfilter of C(z) (DEVELOPERS.md table), float64,
    # using the stored coefficients; a small error keeps |u| far from the limits.
    table = make_table(structure, dims=1, limits=(-1000.0, 1000.0))
    fixed = number_format != "float32"
    scales = {"error_full_scale": 1.0, "output_full_scale": 1000.0} if fixed else {}
    layout = layout_table(table, number_format, **scales)
    steps = 400
    k = np.arange(steps)
    error_physical = 0.3 * np.sin(2 * np.pi * k / 37) + 0.2 * np.sign(np.sin(2 * np.pi * k / 90))
    point = np.full(steps, layout.axes[0].stored[2])
    gains = lookup_gains(layout, point)
    if fixed:
        errors = np.round(error_physical * 2.0**layout.fmt.signal_frac).astype(np.int64)
        e_used = dequantize(errors, layout.fmt.signal_frac)
        physical_gains = {
            c.name: float(dequantize(gains[c.name][0], c.frac)) * c.scale for c in layout.coefficients
        }
    else:
        errors = error_physical.astype(np.float32)
        e_used = errors.astype(float)
        physical_gains = {n: float(v[0]) for n, v in gains.items()}
    b, a = _controller_tf(structure, physical_gains)
    expected = lfilter(b, a, e_used)
    trace = run_steps(layout, gains, errors)
    if fixed:
        output = dequantize(trace.output, layout.fmt.signal_frac) * layout.output_full_scale
        # output rounded to 1 LSB of full scale plus accumulated Q3.28 rounding
        # (0.5 LSB of 2**-28 per step and state) and, for Q31, the 3 error bits
        # dropped going to Q3.28
        tolerance = layout.output_full_scale * (2.0**-layout.fmt.signal_frac + steps * 8 * 2.0**-28)
    else:
        output = trace.output.astype(float)
        tolerance = 50 * EPS32 * np.max(np.abs(expected)) * np.sqrt(steps)
    assert np.max(np.abs(output - expected)) <= tolerance


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_conditional_integration_clamps_the_integrator(number_format):
    # Rule of DEVELOPERS.md ("Anti-windup"), written out here in float64:
    # the integrator stops while the output sits on a limit and the error
    # pushes further, so the output leaves the limit as soon as the error
    # changes sign (no wind-up delay).
    table = make_table("pi", dims=1, limits=(-2.0, 3.0))
    layout = layout_table(table, number_format)
    steps = 600
    physical = np.concatenate([np.full(300, 0.9), np.full(300, -0.05)])
    gains = lookup_gains(layout, np.full(steps, layout.axes[0].stored[0]))
    if layout.fmt.is_fixed:
        errors = np.round(physical / layout.error_full_scale * 2.0**layout.fmt.signal_frac).astype(np.int64)
        trace = run_steps(layout, gains, errors)
        u = dequantize(trace.output, layout.fmt.signal_frac) * layout.output_full_scale
        x = dequantize(trace.states["x"], 28) * layout.output_full_scale
        kp = float(dequantize(gains["kp"][0], layout.coefficient("kp").frac)) * layout.coefficient("kp").scale
        ki = float(dequantize(gains["ki_ts"][0], layout.coefficient("ki_ts").frac)) * layout.coefficient("ki_ts").scale
        e_used = dequantize(errors, layout.fmt.signal_frac) * layout.error_full_scale
    else:
        errors = physical.astype(np.float32)
        trace = run_steps(layout, gains, errors)
        u, x = trace.output.astype(float), trace.states["x"].astype(float)
        kp, ki = float(gains["kp"][0]), float(gains["ki_ts"][0])
        e_used = errors.astype(float)
    # float64 reference of the documented rule
    x_ref, u_ref, state = [], [], 0.0
    for e in e_used:
        candidate = state + ki * e
        trial = kp * e + candidate
        if not ((trial > 3.0 and ki * e > 0) or (trial < -2.0 and ki * e < 0)):
            state = candidate
        x_ref.append(state)
        u_ref.append(min(max(kp * e + state, -2.0), 3.0))
    lsb = 1e-6 if number_format == "float32" else layout.output_full_scale * 2.0 ** -(layout.fmt.signal_frac - 1)
    np.testing.assert_allclose(u, u_ref, atol=max(lsb, 1e-5) * 4)
    np.testing.assert_allclose(x, x_ref, atol=max(lsb, 1e-5) * 4)
    # the integrator stops one increment short of the limit: u settles within ki e of it
    assert 3.0 - ki * 0.9 - 4 * lsb <= u[299] <= 3.0
    assert x[299] < 3.0 - kp * 0.9 + 2 * ki  # integrator stopped near the limit, not wound up
    assert u[300] < 3.0  # leaves saturation on the first reversed sample


@pytest.mark.parametrize("number_format", ["q15", "q31"])
@pytest.mark.parametrize("uniform", [True, False])
def test_fixed_point_weight_is_the_floor_of_the_exact_fraction_or_one_below(number_format, uniform):
    # Reference: brute force with Python integers: the last breakpoint <= x
    # gives the segment, floor((x - a_i) 2**F / (a_{i+1} - a_i)) the weight
    # (the division-free weight may be one below it, never above).
    from gainloom.codegen.mirror import locate

    layout = layout_table(make_table("pi", dims=2, uniform=uniform), number_format)
    frac = layout.fmt.interp_frac
    rng = np.random.default_rng(9)
    for axis in layout.axes:
        a = [int(v) for v in axis.stored]
        xs = np.concatenate([rng.integers(a[0] - 50, a[-1] + 50, size=400), np.array(a) - 1, np.array(a) + 1])
        index, weight = locate(axis, True, frac, xs)
        for x, i, t in zip(xs.tolist(), index.tolist(), weight.tolist()):
            if x <= a[0]:
                assert (i, t) == (0, 0)
            elif x >= a[-1]:
                assert (i, t) == (len(a) - 2, 2**frac)
            else:
                segment = max(k for k in range(len(a) - 1) if a[k] <= x)
                exact = ((x - a[segment]) << frac) // (a[segment + 1] - a[segment])
                assert i == segment and t in (exact, exact - 1) and t >= 0

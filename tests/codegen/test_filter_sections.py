"""Filter sections in the generated C: coefficient tables, the fixed-point biquad,
the rounding re-check and the two-mass demo end to end."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.signal
import yaml
from cases import filtered_table, flat_table, scipy_sections

from gainloom.codegen.emit import emit_c
from gainloom.codegen.filter_rounding import check_filter_rounding
from gainloom.codegen.harness import check_generated_c, find_compiler
from gainloom.codegen.layout import layout_table
from gainloom.codegen.mirror import lookup_gains, run_steps
from gainloom.design.gainsfile import read_gains
from gainloom.design.table import FilterTable, GainTable

SCHEDULES = Path(__file__).resolve().parents[2] / "schedules"
TS = 1e-4


def _unity_table(kinds=("notch", "low_pass")) -> GainTable:
    """``u = e`` (p, kp = 1, limits and full scales 1) followed by scipy-built sections at 1,500 rad/s."""
    table = flat_table("p", limits=(-1.0, 1.0), period=TS, kp=1.0)
    return GainTable("p", table.axes, table.coefficients, TS, table.output_limits,
                     scipy_sections(np.array([1500.0, 2500.0]), TS, kinds))


def _round_shift(value: int, shift: int) -> int:
    """value / 2^shift rounded to nearest, ties away from zero (docs/codegen.md), in Python integers."""
    if shift <= 0:
        return value << -shift
    magnitude = (abs(value) + (1 << (shift - 1))) >> shift
    return magnitude if value >= 0 else -magnitude


def _clamp32(value: int) -> int:
    return max(-(2**31), min(2**31 - 1, value))


def _integer_cascade(sections: list[tuple[list[int], list[int]]], inputs: list[int]) -> list[list[int]]:
    """Independent model of the documented fixed-point biquad (docs/codegen.md, "Filter sections"):
    direct form I, each of the five products rounded to Q3.28 and clamped to 32 bits, their sum
    clamped once.  ``sections``: per section the stored integers (b0, b1, b2, a1, a2) and their
    fraction bits.  Returns each section's output per sample."""
    past = [[0, 0, 0, 0] for _ in sections]  # x1, x2, y1, y2
    outputs: list[list[int]] = [[] for _ in sections]
    for x in inputs:
        value = x
        for n, (coefficients, fracs) in enumerate(sections):
            x1, x2, y1, y2 = past[n]
            terms = [_clamp32(_round_shift(c * s, f)) for c, s, f in zip(coefficients, (value, x1, x2, y1, y2), fracs)]
            y = _clamp32(terms[0] + terms[1] + terms[2] - terms[3] - terms[4])
            past[n] = [value, x1, y, y1]
            outputs[n].append(y)
            value = y
    return outputs


@pytest.mark.parametrize("number_format", ["q15", "q31"])
def test_fixed_point_sections_match_an_independent_integer_model(number_format):
    table = _unity_table()
    layout = layout_table(table, number_format)
    axis = layout.axes[0]
    gains = lookup_gains(layout, np.full(3000, axis.stored[0]))  # at the first breakpoint: the stored values
    rng = np.random.default_rng(5)
    fmt = layout.fmt
    errors = np.concatenate([np.full(200, fmt.q_max), np.full(200, fmt.q_min),
                             rng.integers(fmt.q_min, fmt.q_max, 2600)]).astype(np.int64)
    trace = run_steps(layout, gains, errors)
    # the controller passes e through exactly (kp = 1.0 is stored exactly), so the cascade's input is e in Q3.28
    shift = fmt.signal_frac - 28
    inputs = [_round_shift(int(e), shift) for e in errors]
    sections = []
    for n in (1, 2):
        stored = {item.name: item for item in layout.filter_tables}
        items = [stored[f"f{n}_{c}"] for c in ("b0", "b1", "b2", "a1", "a2")]
        sections.append(([int(item.stored[0]) for item in items], [item.frac for item in items]))
    expected = _integer_cascade(sections, inputs)
    for n in (1, 2):
        assert trace.states[f"f{n}_y1"].tolist() == expected[n - 1]
    assert np.max(np.abs(expected[1])) > 2**27  # the run reaches a large part of full scale


def test_float32_sections_follow_scipy_lfilter():
    # Reference: scipy.signal.lfilter of each section in float64 on the same input; the
    # float32 step differs by its rounding only.
    table = _unity_table()
    layout = layout_table(table, "float32")
    gains = lookup_gains(layout, np.zeros(4000, dtype=np.float32))
    errors = (0.5 * np.sin(2 * np.pi * np.arange(4000) / 41.0)).astype(np.float32)
    trace = run_steps(layout, gains, errors)
    signal = errors.astype(float)
    for n, section in enumerate(table.filters, start=1):
        c = {name: grid[0] for name, grid in section.coefficients.items()}
        signal = scipy.signal.lfilter([c["b0"], c["b1"], c["b2"]], [1.0, c["a1"], c["a2"]], signal)
        np.testing.assert_allclose(trace.states[f"f{n}_y1"], signal, atol=2e-5)


CASES = [("pi", 1, "q15"), ("pi", 1, "q31"), ("pi", 1, "float32"), ("lead", 1, "q15"), ("pid", 2, "q31"),
         ("leadlag", 2, "float32")]


@pytest.mark.skipif(find_compiler() is None, reason="no C compiler")
@pytest.mark.parametrize(("structure", "dims", "number_format"), CASES)
def test_generated_c_with_filter_sections_matches_the_mirror(tmp_path, structure, dims, number_format):
    table = filtered_table(structure, dims)
    files = emit_c(table, tmp_path, number_format, "drv", None)
    header = files[0].read_text()
    assert "2 filter section(s) in cascade (notch, low-pass)" in header
    result = check_generated_c(files, table)
    assert result.passed, result.diagnostics
    # fixed point: every printed value equal; the outputs reach both limits
    if number_format != "float32":
        assert result.worst_gain_error == 0 and result.worst_step_error == 0
    if structure.startswith("pi"):  # the harness drives a controller with an integrator into both limits
        assert result.saturated_high > 0 and result.saturated_low > 0


def test_a_pole_that_rounding_puts_on_the_unit_circle_fails():
    # a2 = 1 - 1e-6 (radius 0.9999995) has no Q15 code below 1 with 15 fraction bits: it is stored
    # with 14 as exactly 1.0, a pole pair on the unit circle (|z| = sqrt(a2), textbook)
    table = flat_table("p", limits=(-1.0, 1.0), period=TS, kp=1.0)
    grid = {"b0": 1e-6, "b1": 2e-6, "b2": 1e-6, "a1": -1.9999, "a2": 1.0 - 1e-6}
    section = FilterTable("low_pass", {k: np.full(2, v) for k, v in grid.items()})
    table = GainTable("p", table.axes, table.coefficients, TS, table.output_limits, (section,))
    q15 = check_filter_rounding(table, layout_table(table, "q15"), ["speed = 0", "speed = 100"])[0]
    assert q15.pole_radius[0] == pytest.approx(np.sqrt(1 - 1e-6)) and q15.pole_radius[1] >= 1.0
    assert len(q15.failures) == 2 and "speed = 0" in q15.failures[0] and q15.stability_margin <= 0
    # Q31 keeps it inside
    assert not check_filter_rounding(table, layout_table(table, "q31"), ["a", "b"])[0].failures


def test_low_notches_in_q15_move_and_then_leave_the_unit_circle():
    # Q15 stores a1 near -2 with 14 fraction bits (steps of 6e-5) while the notch's angle
    # w0 ts is small: at 300 rad/s and 10 kHz (angle 0.03 rad) the centre moves by about
    # 1.8 % (a warning), at 20 rad/s the stored poles leave the unit circle (a failure);
    # Q31 keeps both (values measured with this check, the rule is the module docstring's)
    table = flat_table("p", limits=(-1.0, 1.0), period=TS, kp=1.0)
    results = {}
    for w0 in (300.0, 20.0):
        sections = scipy_sections(np.array([w0, w0]), TS, ("notch",))
        notched = GainTable("p", table.axes, table.coefficients, TS, table.output_limits, sections)
        results[w0] = [check_filter_rounding(notched, layout_table(notched, fmt), ["a", "b"])[0]
                       for fmt in ("q15", "q31")]
    warned, fine = results[300.0]
    assert 0.01 < warned.zero_frequency_change < 0.05 and warned.warnings and not warned.failures
    assert "moves the centre from 299" in warned.warnings[0]
    failed, kept = results[20.0]
    assert failed.pole_radius[1] > 1.0 > failed.pole_radius[0] and failed.failures
    assert not (fine.warnings or fine.failures or kept.failures)


@pytest.fixture(scope="module")
def demo_job(tmp_path_factory):
    from gainloom.job.design_job import run_design_job

    out = tmp_path_factory.mktemp("two-mass") / "out"
    return run_design_job(SCHEDULES / "two_mass_speed.yaml", out, number_format="q15")


def test_two_mass_demo_emits_checks_and_simulates_with_its_notch(demo_job):
    stages = {s.stage: s for s in demo_job.stages}
    assert all(s.status in ("pass", "written") for s in demo_job.stages if s.stage not in ("target", "C rules")), [
        (s.stage, s.status, s.detail) for s in demo_job.stages]
    assert "bit-exact" in stages["C check"].detail
    assert "filter poles stay inside the unit circle" in stages["quantisation"].detail
    if stages["target"].status != "not checked":  # cross compiler and emulator installed
        assert stages["target"].status == stages["C rules"].status == "pass"
    source = (demo_job.out_dir / "tms.c").read_text()
    assert "tms_filters_pass" in source and "tms_f1_a1_table" in source
    document = yaml.safe_load((demo_job.out_dir / "verification.json").read_text())
    assert document["quantisation"]["filters"][0]["kind"] == "notch"


def test_two_mass_table_holds_the_notch_tustin_prewarped(demo_job):
    # Reference: scipy.signal.bilinear of the schedule's written notch (frequency wr, 20 dB, width
    # 0.4 wr), prewarped at wr by fs = wr / tan(wr ts / 2) / 2; the demo's numbers as written
    table, _ = read_gains(demo_job.gains_path)  # the gains file carries the sections
    jm, k = 2.0e-4, 474.0
    load = table.axes[0].values
    jl = load * jm
    wr = np.sqrt(k * (jm + jl) / (jm * jl))
    expected = scipy_sections(wr, 1.25e-4, ("notch",))[0]
    (notch,) = table.filters
    assert notch.kind == "notch"
    for name in ("b0", "b1", "b2", "a1", "a2"):
        np.testing.assert_allclose(notch.coefficients[name], expected.coefficients[name], rtol=1e-9, atol=1e-12)
        np.testing.assert_array_equal(notch.coefficients[name], demo_job.design.table.filters[0].coefficients[name])


def test_emit_refuses_a_gains_file_without_its_filter_tables(demo_job, tmp_path, capsys):
    from gainloom.cli import main

    document = yaml.safe_load(demo_job.gains_path.read_text())
    del document["filters"]  # as a gains file written before the C carried the sections
    old = tmp_path / "old.yaml"
    old.write_text(yaml.safe_dump(document))
    assert main(["emit", str(old), "--out", str(tmp_path / "c")]) == 2
    assert "designed with 1 controller.filters section(s) but the gains file tabulates 0" in capsys.readouterr().err


@pytest.mark.parametrize("number_format", ["float32", "q15"])
def test_conditional_integration_judges_the_filtered_output(number_format):
    # Property (docs/codegen.md, "Filter sections"): with the sections between the controller and
    # the clamp, a sustained error that saturates the output stops the integrator once the
    # filtered output reaches the limit (a little past the unfiltered point, by the sections' lag
    # times the ramp; it would reach ki_ts e k = 60 without anti-windup), it then stays put, and
    # the output leaves the limit within a few samples of the error reversing.
    base = flat_table("pi", limits=(-1.0, 1.0), period=TS, kp=0.05, ki_ts=0.1)
    table = GainTable("pi", base.axes, base.coefficients, TS, base.output_limits,
                      scipy_sections(np.array([1500.0, 2500.0]), TS))
    layout = layout_table(table, number_format)
    fixed = layout.fmt.is_fixed
    level = 0.5 * layout.fmt.q_max if fixed else 0.5
    errors = np.concatenate([np.full(1200, level), np.full(300, -level)])
    errors = errors.astype(np.int64) if fixed else errors.astype(np.float32)
    axis = layout.axes[0].stored[0]
    trace = run_steps(layout, lookup_gains(layout, np.full(errors.size, axis)), errors)
    one = 2.0**28 if fixed else 1.0  # the upper limit in the state format (Q3.28 of full scale 1)
    x = trace.states["x"] / one
    assert 1.0 < np.max(x) < 2.0 and np.ptp(x[600:1200]) == 0  # stopped, far below 60
    high = trace.output[1199]
    assert np.all(trace.output[1100:1200] == high)  # saturated at the upper limit
    assert np.all(trace.output[1225:1300] < high)  # off the limit within 25 samples of the reversal

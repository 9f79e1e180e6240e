"""Compile every format x structure x 1-D/2-D x axis kind as firmware would
(C99 and C11, strict warnings as errors, ASan + UBSan where available), run
the host harness and compare with the Python mirror."""

import os
from concurrent.futures import ThreadPoolExecutor
from itertools import product

import pytest
from cases import make_table

from gainloom import CodegenError
from gainloom.codegen.emit import emit_c
from gainloom.codegen.harness import WARNING_FLAGS, check_generated_c, find_compiler

needs_cc = pytest.mark.needs_cc
HAVE_CC = find_compiler() is not None
skip_no_cc = pytest.mark.skipif(not HAVE_CC, reason="no host C compiler ($CC, cc, gcc, clang)")

FORMATS = ("float32", "q15", "q31")
# every format x (pi, pid) x 1-D/2-D x uniform/non-uniform, then the other
# structures once per format (2-D, non-uniform: the longest code paths)
CASES = [(f, s, d, u) for f, s, d, u in product(FORMATS, ("pi", "pid"), (1, 2), (True, False))] + [
    (f, s, 2, False) for f, s in product(FORMATS, ("p", "pd", "lead", "lag", "leadlag"))
]


def _case_id(case):
    f, s, d, u = case
    return f"{f}-{s}-{d}d-{'uniform' if u else 'nonuniform'}"


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    """One compile + run per case, run in parallel (the compiler is the cost)."""
    root = tmp_path_factory.mktemp("harness")

    def run(case):
        number_format, structure, dims, uniform = case
        table = make_table(structure, dims=dims, uniform=uniform, seed=11)
        # an error full scale of 20 units lets full-scale errors reach both output limits
        scale = None if number_format == "float32" else 20.0
        files = emit_c(
            table, root / _case_id(case), number_format, "motor_ctl", "ab" * 32, error_full_scale=scale
        )
        return check_generated_c(
            files, table, number_format=number_format, prefix="motor_ctl", error_full_scale=scale
        )

    with ThreadPoolExecutor(max_workers=max(2, os.cpu_count() or 2)) as pool:
        return dict(zip(CASES, pool.map(run, CASES)))


@needs_cc
@skip_no_cc
@pytest.mark.parametrize("case", CASES, ids=_case_id)
def test_generated_c_compiles_clean_and_matches_the_mirror(results, case):
    result = results[case]
    assert result.status == "passed", result.message + "\n" + result.diagnostics
    assert result.passed is True
    assert result.points >= 1000 and result.steps >= 5000
    assert set(WARNING_FLAGS) <= set(result.flags) and "-std=c99" in result.flags
    # the step sequence must drive the output into both limits
    assert result.saturated_high > 0 and result.saturated_low > 0
    if case[0] != "float32":
        assert result.worst_gain_error == 0 and result.worst_step_error == 0  # bit-exact
    else:
        assert result.worst_gain_error <= result.gain_tolerance
        assert result.worst_step_error <= result.step_tolerance
    assert result.compiler_version


@needs_cc
@skip_no_cc
def test_harness_reports_sanitizers_when_the_toolchain_has_them(results):
    # gcc and clang on Linux ship ASan/UBSan; the probe decides per machine.
    result = results[CASES[0]]
    assert result.sanitizers == ("-fsanitize=address,undefined" in result.flags)


@needs_cc
@skip_no_cc
def test_a_changed_table_entry_is_caught(tmp_path):
    # Negative control: edit one stored coefficient in the generated source;
    # the harness must see the C disagree with the mirror.
    table = make_table("pi", dims=1)
    files = emit_c(table, tmp_path, "q15", "motor_ctl", None)
    source = tmp_path / "motor_ctl.c"
    text = source.read_text()
    start = text.index("motor_ctl_kp_table[] = {") + len("motor_ctl_kp_table[] = {")
    first_value = text[start:].split(",")[0].strip()
    source.write_text(text[:start] + text[start:].replace(first_value, str(int(first_value) + 1), 1))
    result = check_generated_c(files, table, number_format="q15", prefix="motor_ctl")
    assert result.status == "failed" and "differ" in result.message
    assert result.worst_gain_error >= 1


@needs_cc
@skip_no_cc
def test_a_warning_fails_the_build(tmp_path):
    # Negative control: an implicit narrowing conversion must stop the build (-Wconversion -Werror).
    table = make_table("pi", dims=1)
    files = emit_c(table, tmp_path, "q31", "motor_ctl", None)
    source = tmp_path / "motor_ctl.c"
    narrowing = "int16_t motor_ctl_narrow(int32_t v);\nint16_t motor_ctl_narrow(int32_t v) { return v; }\n"
    source.write_text(source.read_text() + narrowing)
    result = check_generated_c(files, table, number_format="q31", prefix="motor_ctl")
    assert result.status == "failed" and "does not compile" in result.message
    assert "conversion" in result.diagnostics


def test_no_compiler_is_reported_not_passed(tmp_path, monkeypatch):
    monkeypatch.setenv("CC", str(tmp_path / "no-such-compiler"))
    assert find_compiler() is None
    table = make_table("pi", dims=1)
    files = emit_c(table, tmp_path / "out", "q15", "motor_ctl", None)
    result = check_generated_c(files, table, number_format="q15", prefix="motor_ctl")
    assert result.status == "no-compiler" and result.passed is None
    assert "NOT checked" in result.message


@needs_cc
@skip_no_cc
@pytest.mark.parametrize("number_format", ["float32", "q31"])
def test_two_breakpoint_axes_and_negative_coefficients(tmp_path, number_format):
    # Edge cases: a one-segment axis on each side, negative breakpoints and
    # coefficients of both signs (a reverse-acting proportional term, a
    # negative zero in a lead section would be the same code path).
    import numpy as np

    from gainloom.design.table import GainTable, TableAxis

    axes = (TableAxis("temp", "degC", np.array([-40.0, 125.0])), TableAxis("vbus", "V", np.array([-1.0, 0.5, 48.0])))
    coefficients = {
        "kp": np.array([[-0.8, 1.2, 2.0], [0.3, -1.5, 0.9]]),
        "ki_ts": np.array([[0.01, -0.02, 0.03], [0.04, 0.05, -0.06]]),
    }
    table = GainTable("pi", axes, coefficients, 5e-5, (-3.0, 3.0))
    scale = None if number_format == "float32" else 10.0
    files = emit_c(table, tmp_path, number_format, "rail", None, error_full_scale=scale)
    result = check_generated_c(files, table, number_format=number_format, prefix="rail", error_full_scale=scale)
    assert result.status == "passed", result.message + "\n" + result.diagnostics


def test_harness_reads_its_settings_from_the_banner(tmp_path):
    # The banner records format, prefix and full scales; contradicting it is refused.
    table = make_table("pi", dims=1)
    files = emit_c(table, tmp_path, "q15", "motor_ctl", None, error_full_scale=20.0)
    with pytest.raises(CodegenError, match="error_full_scale 5.0 contradicts"):
        check_generated_c(files, table, error_full_scale=5.0)
    with pytest.raises(CodegenError, match="format 'q31' contradicts"):
        check_generated_c(files, table, number_format="q31")

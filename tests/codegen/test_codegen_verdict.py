"""A table that failed verification cannot be built into firmware by accident:
its header says ``<PREFIX>_VERIFIED 0`` and stops compilation with ``#error``
unless the integrator defines ``<PREFIX>_ACCEPT_UNVERIFIED``."""

import subprocess

import pytest
from cases import make_table

from gainloom.codegen.emit import render_files
from gainloom.codegen.harness import WARNING_FLAGS, check_generated_c, find_compiler
from gainloom.codegen.verdict import table_verdict

SHA = "0123456789abcdef" * 4
COMPILER = find_compiler()
needs_cc = pytest.mark.skipif(COMPILER is None, reason="no host C compiler ($CC, cc, gcc, clang)")


def _write(tmp_path, verdict, number_format="q15"):
    files = render_files(make_table("pi"), number_format, "motor", SHA, verdict=verdict)
    for name, text in files.items():
        (tmp_path / name).write_text(text)
    return files


def _compile(tmp_path, *defines):
    # Reference: the C compiler itself (C99 6.10.5: #error makes the
    # translation unit fail), built with the strict flags firmware uses.
    return subprocess.run(
        [*COMPILER, "-std=c99", *WARNING_FLAGS, *defines, "-c", "motor.c", "-o", "motor.o"],
        cwd=tmp_path, capture_output=True, text=True, check=False,
    )


def test_verdict_needs_both_checks_and_unknown_counts_as_not_verified():
    assert table_verdict(True, True, "q15").verified
    for design, stored in [(True, None), (None, True), (False, True), (True, False), (None, None)]:
        assert not table_verdict(design, stored, "q15").verified, (design, stored)
    assert "not re-checked" in table_verdict(True, None, "q31").basis
    assert "FAILED" in table_verdict(False, True, "q31").basis


@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_banner_and_macro_carry_the_verdict(tmp_path, number_format):
    failing = _write(tmp_path, table_verdict(False, True, number_format), number_format)
    header = failing["motor.h"]
    assert "#define MOTOR_VERIFIED (0)" in header
    banner = " ".join(line.lstrip(" */").strip() for line in header.split("*/")[0].splitlines())
    assert "verification: NOT VERIFIED (MOTOR_VERIFIED 0, see verification.md): design FAILED;" in banner
    assert "verification.md" in header[header.index("#error"):].splitlines()[0]
    assert "NOT VERIFIED" in failing["motor.c"][:1200]  # the source's banner says it too
    passing = render_files(make_table("pi"), number_format, "motor", SHA, verdict=table_verdict(True, True, "q15"))
    assert "#define MOTOR_VERIFIED (1)" in passing["motor.h"] and "#error" not in passing["motor.h"]
    unknown = render_files(make_table("pi"), number_format, "motor", SHA)  # no verdict given
    assert "#define MOTOR_VERIFIED (0)" in unknown["motor.h"]


@needs_cc
def test_a_failing_table_refuses_to_compile_unless_accepted(tmp_path):
    _write(tmp_path, table_verdict(False, True, "q15"))
    refused = _compile(tmp_path)
    assert refused.returncode != 0
    assert "NOT VERIFIED" in refused.stderr and "verification.md" in refused.stderr
    assert "MOTOR_ACCEPT_UNVERIFIED" in refused.stderr
    accepted = _compile(tmp_path, "-DMOTOR_ACCEPT_UNVERIFIED")
    assert accepted.returncode == 0, accepted.stderr


@needs_cc
def test_a_verified_table_compiles_without_the_macro(tmp_path):
    _write(tmp_path, table_verdict(True, True, "q15"))
    built = _compile(tmp_path)
    assert built.returncode == 0, built.stderr


@needs_cc
def test_the_harness_still_checks_the_arithmetic_of_an_unverified_table(tmp_path):
    table = make_table("pi")
    _write(tmp_path, table_verdict(False, False, "q15"))
    result = check_generated_c([tmp_path / "motor.h", tmp_path / "motor.c"], table, number_format="q15",
                               prefix="motor")
    assert result.status == "passed", result.message + result.diagnostics
    assert "-DMOTOR_ACCEPT_UNVERIFIED" in result.flags


def test_the_target_build_of_an_unverified_table_needs_the_accept_macro(tmp_path):
    from gainloom.codegen.harness import generated_files
    from gainloom.codegen.target_build import build_for_core
    from gainloom.codegen.target_tools import CORES, find_target_tools

    tools = find_target_tools()
    if not tools.can_build:
        pytest.skip("arm-none-eabi toolchain not found")
    _write(tmp_path, table_verdict(True, None, "q15"))
    generated = generated_files([tmp_path / "motor.h", tmp_path / "motor.c"])
    refused = build_for_core(tools, CORES[0], [tmp_path / "motor.c"], tmp_path, True)
    assert not refused.builds and "NOT VERIFIED" in refused.diagnostics
    accepted = build_for_core(tools, CORES[0], [tmp_path / "motor.c"], tmp_path, True, generated.defines)
    assert accepted.builds, accepted.diagnostics

"""The generated C on the target cores: cross-compiled, run on qemu board
models, its instructions counted, and checked with cppcheck + MISRA.

Each test skips with its reason when a tool is missing (Debian packages
gcc-arm-none-eabi, libnewlib-arm-none-eabi, qemu-system-arm, cppcheck)."""

import json
import re
import subprocess
from pathlib import Path

import pytest
from cases import make_table

from gainloom.c_names import CNames
from gainloom.codegen.emit import emit_c
from gainloom.codegen.harness import check_generated_c, generated_files, harness_program
from gainloom.codegen.target import check_target
from gainloom.codegen.target_build import build_for_core, helper_kind
from gainloom.codegen.target_rules import DEVIATIONS, check_rules
from gainloom.codegen.target_run import _emulate, _link, measure_source, parse_trace
from gainloom.codegen.target_tools import CORES, TargetTools, find_target_tools
from gainloom.codegen.verdict import table_verdict

TOOLS = find_target_tools()
needs_build = pytest.mark.skipif(not TOOLS.can_build, reason=f"missing {', '.join(TOOLS.missing('gcc', 'nm', 'size', 'readelf'))}")
needs_run = pytest.mark.skipif(not TOOLS.can_run, reason=f"missing {', '.join(TOOLS.missing('gcc', 'nm', 'size', 'readelf', 'qemu'))}")
needs_cppcheck = pytest.mark.skipif(TOOLS.cppcheck is None, reason="cppcheck not found")
M0, M4F = CORES
REPO = Path(__file__).resolve().parents[2]
NAMES = CNames("motor_ctl")



def _emit(tmp_path, number_format, structure="pid", dims=2, uniform=False):
    table = make_table(structure, dims=dims, uniform=uniform, seed=11)
    # an error full scale of 20 units lets full-scale errors reach both output limits
    scale = None if number_format == "float32" else 20.0
    # a verified table: the header builds as production firmware would, without the accept macro
    verdict = table_verdict(True, True, number_format)
    files = emit_c(table, tmp_path / number_format, number_format, "motor_ctl", "ab" * 32, error_full_scale=scale,
                   verdict=verdict)
    return table, files


@pytest.fixture(scope="module")
def checked(tmp_path_factory):
    """One full target check per format (host harness first, for the byte comparison)."""
    results = {}
    for number_format in ("q15", "float32"):
        table, files = _emit(tmp_path_factory.mktemp("target"), number_format)
        host = check_generated_c(files, table)
        results[number_format] = (host, check_target(files, table, host=host))
    return results


@needs_run
@pytest.mark.parametrize("number_format", ["q15", "float32"])
def test_emulated_cores_print_what_the_host_printed(checked, number_format):
    host, target = checked[number_format]
    assert host.passed, host.message
    assert [b.core.name for b in target.builds] == ["cortex-m0plus", "cortex-m4f"]
    for run in target.runs:
        assert run.status == "passed", run.message
        # byte-identical output: every gain and every step, bit for bit, to the host build
        assert run.identical_to_host is True, run.core
        if number_format == "q15":
            assert run.worst_gain_error == 0 and run.worst_step_error == 0


@needs_run
def test_a_different_host_output_is_caught(tmp_path):
    table, files = _emit(tmp_path, "q15", "pi", 1, True)
    host = check_generated_c(files, table)
    wrong = type(host)(**{**host.__dict__, "output_sha256": "0" * 64})
    result = check_target(files, table, host=wrong)
    assert all(r.identical_to_host is False and r.status == "failed" for r in result.runs)
    assert result.status == "failed"


@needs_build
@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_every_format_builds_clean_as_c99_and_c11_on_both_cores(tmp_path, number_format):
    table, files = _emit(tmp_path, number_format)
    work = files[0].parent
    for core in CORES:
        build = build_for_core(TOOLS, core, [work / "motor_ctl.c"], work, number_format != "float32")
        assert build.compiled == {"c99": True, "c11": True}, build.diagnostics
        assert sorted(f.name for f in build.functions) == sorted([NAMES.lookup, NAMES.clear, NAMES.update])
        assert build.ram_bytes == 0  # no mutable state in the table's object: reentrant
        assert all(f.stack_bytes is not None and f.stack_bounded for f in build.functions)
        # the tables are all the constant data: one axis array per axis, one array per coefficient,
        # and in fixed point the segment reciprocals (shift and scale) of each non-uniform axis
        reciprocals = 0 if number_format == "float32" else 2 * 2
        assert len(build.tables) == 2 + len(table.coefficients) + reciprocals, sorted(build.tables)


@needs_build
def test_float32_calls_no_double_precision_and_no_helper_with_an_fpu(tmp_path):
    table, files = _emit(tmp_path, "float32")
    work = files[0].parent
    with_fpu = build_for_core(TOOLS, M4F, [work / "motor_ctl.c"], work, False)
    assert all(f.helpers == () for f in with_fpu.functions)
    soft = build_for_core(TOOLS, M0, [work / "motor_ctl.c"], work, False)
    kinds = {h.kind for f in soft.functions for h in f.helpers}
    # Arm run-time ABI (IHI 0043): single-precision helpers are __aeabi_f*, double ones __aeabi_d*
    assert kinds == {"single precision in software"}
    assert soft.helpers_clean and with_fpu.helpers_clean


@needs_build
@pytest.mark.parametrize("number_format", ["q15", "q31"])
@pytest.mark.parametrize("core", CORES, ids=lambda c: c.name)
@pytest.mark.parametrize("uniform", [False, True], ids=["nonuniform", "uniform"])
def test_fixed_point_lookup_and_step_call_no_slow_helper(tmp_path, number_format, core, uniform):
    table, files = _emit(tmp_path, number_format, uniform=uniform)
    work = files[0].parent
    build = build_for_core(TOOLS, core, [work / "motor_ctl.c"], work, True)
    calls = {f.name: [(h.symbol, h.kind) for h in f.helpers if not h.allowed] for f in build.functions}
    assert all(not bad for bad in calls.values()), calls
    # no division of any width (Arm run-time ABI, IHI 0043: __aeabi_*div*)
    assert not any("division" in h.kind for f in build.functions for h in f.helpers)
    if number_format == "q15" and not uniform:
        # the Q15 lookup forms its weight from 32-bit products: no helper at all, even on ARMv6-M
        lookup = next(f for f in build.functions if f.name == NAMES.lookup)
        assert lookup.helpers == (), lookup.helpers


@needs_build
def test_a_double_in_the_float_variant_is_reported_per_function(tmp_path):
    table, files = _emit(tmp_path, "float32", "pi", 1, True)
    source = files[1].read_text()
    # one literal without the f suffix promotes the interpolation to double
    changed = source.replace("return ((1.0f - t) * a) + (t * b);", "return (float)(((1.0 - (double)t) * (double)a) + (double)(t * b));")
    assert changed != source
    files[1].write_text(changed)
    work = files[0].parent
    build = build_for_core(TOOLS, M4F, [work / "motor_ctl.c"], work, False)
    assert build.builds, build.diagnostics
    lookup = next(f for f in build.functions if f.name == NAMES.lookup)
    # Arm run-time ABI (IHI 0043): __aeabi_dmul / __aeabi_dsub / __aeabi_f2d are double precision
    assert {h.kind for h in lookup.helpers} == {"double precision"}
    assert not lookup.clean and not build.helpers_clean
    step = next(f for f in build.functions if f.name == NAMES.update)
    assert step.clean  # the step does not interpolate


def test_helper_names_are_classified_by_the_run_time_abi():
    # Arm run-time ABI for the Arm architecture (IHI 0043), section 4
    assert helper_kind("__aeabi_ldivmod") == "64-bit division"
    assert helper_kind("__aeabi_uidiv") == "32-bit division"
    assert helper_kind("__aeabi_dadd") == "double precision"
    assert helper_kind("__aeabi_f2d") == "double precision"
    assert helper_kind("__aeabi_fmul") == "single precision in software"
    assert helper_kind("__aeabi_lmul") == "64-bit multiply"
    assert helper_kind("__aeabi_llsr") == "64-bit shift"
    assert helper_kind("sqrtf") == "other call"


@needs_run
@pytest.mark.parametrize("core", CORES, ids=lambda c: c.name)
def test_instruction_count_of_straight_line_code_matches_the_disassembly(tmp_path, core):
    # Reference: the disassembler (arm-none-eabi-objdump) lists the clear
    # function's instructions; it has no branch, so each runs exactly once.
    objdump = TOOLS.gcc.replace("gcc", "objdump")
    table, files = _emit(tmp_path, "q15", "pid", 1, True)
    work = files[0].parent
    build = build_for_core(TOOLS, core, [work / "motor_ctl.c"], work, True, generated_files(files).defines)
    clear = NAMES.clear
    listing = subprocess.run([objdump, "-d", f"--disassemble={clear}", str(build.object_path)],
                             capture_output=True, text=True, check=True).stdout
    body = [line for line in listing.splitlines() if re.match(r"\s+[0-9a-f]+:\t", line)]
    assert not any(re.search(r"\tb(eq|ne|lt|gt|le|ge|cc|cs)?(\.[nw])?\t", line) for line in body)
    source = "\n".join([
        f'#include "{NAMES.header}"',
        "__attribute__((noinline, noipa)) void measure_step_begin(void) { __asm volatile(\"\" ::: \"memory\"); }",
        "__attribute__((noinline, noipa)) void measure_end(void) { __asm volatile(\"\" ::: \"memory\"); }",
        f"int main(void) {{ {NAMES.state_t} s; measure_step_begin(); "
        f"{clear}(&s); measure_end(); return (int)s.e1; }}",
    ])
    elf, problem = _link(TOOLS, build, source, "count", work)
    assert elf is not None, problem
    trace = work / "count.trace"
    ran = _emulate(TOOLS, core, elf, trace)
    assert ran.returncode in (0, 1), ran.stderr
    counts = parse_trace(trace.read_text().splitlines())
    assert counts["step"] == [len(body)]


def test_trace_counts_only_the_measured_functions():
    lines = [
        "Trace 0: 0x1 [00/00000010/00/00] main",
        "Trace 0: 0x1 [00/00000020/00/00] measure_lookup_begin",
        "Trace 0: 0x1 [00/00000022/00/00] measure_lookup_begin",
        "Trace 0: 0x1 [00/00000012/00/00] main",
        "Trace 0: 0x1 [00/00000100/00/00] motor_ctl_lookup",
        "Trace 0: 0x1 [00/00000200/00/00] __aeabi_lmul",
        "Trace 0: 0x1 [00/00000102/00/00] motor_ctl_lookup",
        "Trace 0: 0x1 [00/00000014/00/00] main",
        "Trace 0: 0x1 [00/00000030/00/00] measure_end",
    ]
    assert parse_trace(lines) == {"lookup": [3], "step": []}


def test_missing_tools_are_not_checked_never_passed(tmp_path):
    table, files = _emit(tmp_path, "q15", "pi", 1, True)
    result = check_target(files, table, tools=TargetTools(None, None, None, None, None, None))
    assert result.status == "not-checked" and result.passed is None
    assert "arm-none-eabi-gcc" in result.message and "qemu-system-arm" in result.message
    assert result.rules.status == "not-checked" and result.rules.passed is None


@needs_cppcheck
@pytest.mark.parametrize("number_format", ["float32", "q15", "q31"])
def test_cppcheck_and_misra_find_nothing_undocumented(tmp_path, number_format):
    table, files = _emit(tmp_path, number_format)
    caller = tmp_path / "caller.c"
    caller.write_text(measure_source(harness_program(table, generated_files(files)), "motor_ctl"))
    result = check_rules(files, caller, TOOLS.cppcheck, generated_files(files).defines)
    assert result.status == "passed", result.message
    assert all(f.rule.startswith("misra-c2012-") for f in result.findings)
    if number_format == "q15":
        # the fixed-point 2-D table meets every deviation: no record is kept that nothing needs
        assert set(result.deviations()) == set(DEVIATIONS)


@needs_cppcheck
def test_an_undocumented_rule_and_an_uncalled_function_fail(tmp_path):
    table, files = _emit(tmp_path, "q15", "pi", 1, True)
    source = files[1].read_text()
    # MISRA C:2012 rule 15.1 (from memory): the goto statement should not be used
    files[1].write_text(source + "\nint motor_ctl_extra(int a)\n{\n    if (a > 0) {\n        goto done;\n    }\n"
                        "    a = 1;\ndone:\n    return a;\n}\n")
    empty_caller = tmp_path / "caller.c"
    empty_caller.write_text("int main(void)\n{\n    return 0;\n}\n")
    result = check_rules(files, empty_caller, TOOLS.cppcheck)
    assert result.status == "failed"
    rules = {f.rule for f in result.findings if not f.documented}
    assert "misra-c2012-15.1" in rules and "unusedFunction" in rules


def test_every_deviation_is_documented_with_its_reason():
    text = " ".join((REPO / "docs" / "codegen.md").read_text().split())
    for rule, reason in DEVIATIONS.items():
        number = rule.removeprefix("misra-c2012-")
        assert f"| {number} |" in text, rule
        assert " ".join(reason.split()) in text, rule


@needs_run
def test_readme_target_figures_are_what_the_benchmark_measures():
    import importlib.util

    spec = importlib.util.spec_from_file_location("gainloom_benchmark_target", REPO / "benchmarks" / "target.py")
    bench = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(bench)
    readme = (REPO / "README.md").read_text()
    block = re.search(re.escape(bench.BEGIN) + ".*?" + re.escape(bench.END), readme, re.S).group(0)
    recorded = re.search(r"`-O2`, (.+)\n", block).group(1)
    installed = subprocess.run([TOOLS.gcc, "--version"], capture_output=True, text=True, check=True).stdout
    if recorded != installed.splitlines()[0].strip():
        pytest.skip(f"README figures were measured with {recorded}; regenerate them with benchmarks/target.py")
    # instruction counts are exact and deterministic for one toolchain: any change must be regenerated
    assert bench.readme_block() == block


def test_the_docs_state_how_many_calls_are_measured():
    from gainloom.codegen.target_run import MEASURED_LOOKUPS, MEASURED_STEPS

    text = " ".join((REPO / "docs" / "codegen.md").read_text().split())
    assert f"calls the lookup ({MEASURED_LOOKUPS} inputs" in text
    assert f"controller step ({MEASURED_STEPS} steps" in text


@pytest.fixture(scope="module")
def fan_jobs(tmp_path_factory):
    """The invented fan schedule of the job tests in float32, run with and without the target stage."""
    from cases import PASSING

    from gainloom.job.design_job import run_design_job

    root = tmp_path_factory.mktemp("jobs")
    schedule = root / "fan.yaml"
    schedule.write_text(PASSING.replace("format: q15", "format: float32"))
    with_target = run_design_job(schedule, root / "with", simulate=False)
    without = run_design_job(schedule, root / "without", simulate=False, target=False)
    with pytest.MonkeyPatch.context() as patch:
        # a machine without any target tool
        patch.setattr("gainloom.codegen.target.find_target_tools", lambda: TargetTools(*[None] * 6))
        no_tools = run_design_job(schedule, root / "no-tools", simulate=False)
    return with_target, without, no_tools


@needs_run
def test_the_design_job_reports_the_target_figures(fan_jobs):
    job, _, _ = fan_jobs
    stages = {s.stage: s for s in job.stages}
    assert stages["target"].status == "pass", stages["target"].detail
    assert "cortex-m0plus" in stages["target"].detail and "instructions" in stages["target"].detail
    assert stages["C rules"].status == ("pass" if TOOLS.cppcheck else "not checked")
    doc = json.loads((job.out_dir / "verification.json").read_text())
    assert doc["verdict"]["target"] is True
    cores = doc["target"]["cores"]
    assert [c["core"] for c in cores] == ["cortex-m0plus", "cortex-m4f"]
    for core in cores:
        counts = core["instructions"]
        assert counts["lookup"]["calls"] > 0 and counts["lookup"]["min"] <= counts["lookup"]["max"]
        assert counts["step"]["calls"] > 0 and counts["step"]["max"] > 0
        assert core["emulated_run"]["identical_to_host"] is True
        assert core["build"]["table_bytes"] > 0
    text = (job.out_dir / "verification.md").read_text()
    assert "## Target cores" in text and "instructions per lookup" in text


def test_a_skipped_target_stage_is_not_checked_never_passed(fan_jobs):
    _, job, _ = fan_jobs
    stages = {s.stage: s for s in job.stages}
    assert stages["target"].status == "not checked" and "--no-target" in stages["target"].detail
    assert stages["C rules"].status == "not checked"
    assert {"target", "C rules"} <= set(job.not_checked)
    doc = json.loads((job.out_dir / "verification.json").read_text())
    assert doc["target"] is None and doc["verdict"]["target"] is None and doc["verdict"]["c_rules"] is None
    assert {"target cores", "coding rules"} <= set(doc["verdict"]["not_checked"])


@needs_cppcheck
@pytest.mark.parametrize("number_format", ["q15", "q31"])
def test_cppcheck_and_misra_on_uniform_fixed_point_axes(tmp_path, number_format):
    # the uniform axes take the reciprocal index path, which the default table does not reach
    table, files = _emit(tmp_path, number_format, structure="pi", dims=2, uniform=True)
    caller = tmp_path / "caller.c"
    caller.write_text(measure_source(harness_program(table, generated_files(files)), "motor_ctl"))
    result = check_rules(files, caller, TOOLS.cppcheck)
    assert result.status == "passed", result.message


def test_a_machine_without_the_tools_reports_not_checked(fan_jobs):
    _, _, job = fan_jobs
    stages = {s.stage: s for s in job.stages}
    assert stages["target"].status == "not checked" and "arm-none-eabi-gcc" in stages["target"].detail
    assert stages["C rules"].status == "not checked" and "cppcheck not found" in stages["C rules"].detail
    assert job.exit_code == 0 and {"target", "C rules"} <= set(job.not_checked)
    doc = json.loads((job.out_dir / "verification.json").read_text())
    assert doc["target"]["status"] == "not-checked" and doc["verdict"]["target"] is None
    assert "Not checked:" in (job.out_dir / "verification.md").read_text()


@needs_run
def test_the_log_names_the_toolchain_of_the_figures(fan_jobs):
    job, _, _ = fan_jobs
    doc = json.loads((job.out_dir / "verification.json").read_text())
    installed = subprocess.run([TOOLS.gcc, "--version"], capture_output=True, text=True, check=True).stdout
    assert doc["target"]["toolchain"]["gcc"] == installed.splitlines()[0].strip()
    assert doc["target"]["toolchain"]["qemu"].startswith("QEMU emulator version")


@needs_cppcheck
@pytest.mark.parametrize("number_format", ["float32", "q15"])
def test_cppcheck_and_misra_on_tabulated_output_limits(tmp_path, number_format):
    # limits that vary between points take the lookup path into gains.u_min / gains.u_max
    import numpy as np

    from gainloom.design.table import GainTable

    base = make_table("pi", dims=1, seed=11)
    high = np.linspace(6.0, 12.0, base.shape[0])
    table = GainTable(base.structure, base.axes, base.coefficients, base.sample_period, (-high, high))
    scale = None if number_format == "float32" else 20.0
    files = emit_c(table, tmp_path / number_format, number_format, "motor_ctl", "ab" * 32, error_full_scale=scale,
                   verdict=table_verdict(True, True, number_format))
    caller = tmp_path / "caller.c"
    caller.write_text(measure_source(harness_program(table, generated_files(files)), "motor_ctl"))
    result = check_rules(files, caller, TOOLS.cppcheck)
    assert result.status == "passed", result.message

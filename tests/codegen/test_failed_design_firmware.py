"""A design that fails cannot end up in firmware by accident, end to end:
``gainloom design`` on a failing schedule writes a header that stops the host
and the target compilers unless the integrator defines the accept macro
(issue 10, "Done when").

Reference: the C standard's ``#error`` directive ends translation with a
diagnostic (ISO/IEC 9899:2011 6.10.5, from memory); the compilers' exit status.
"""

from __future__ import annotations

import subprocess

import pytest
from cases import STRICT, UNSTABLE

from gainloom.codegen.harness import find_compiler
from gainloom.codegen.target_tools import CORES, find_target_tools
from gainloom.job.design_job import run_design_job

TOOLS = find_target_tools()
COMPILER = find_compiler()


@pytest.fixture(scope="module")
def failed(tmp_path_factory):
    """The job tests' unstable beam schedule, designed (it fails) with every C check."""
    base = tmp_path_factory.mktemp("failed")
    schedule = base / "beam.yaml"
    schedule.write_text(UNSTABLE)
    job = run_design_job(schedule, base / "out", simulate=False)
    caller = base / "out" / "firmware.c"  # what a firmware build does: include the header
    caller.write_text('#include "beam.h"\nint firmware_uses_the_table(void) { return BEAM_VERIFIED; }\n')
    return job, caller


def _compile(command, caller, *extra):
    return subprocess.run([*command, *extra, "-I", str(caller.parent), str(caller), "-o", str(caller.with_suffix(".o"))],
                          capture_output=True, text=True, check=False, timeout=60)


def _refused_then_accepted(command, caller):
    refused = _compile(command, caller)
    assert refused.returncode != 0
    assert "#error" in refused.stderr and "NOT VERIFIED" in refused.stderr and "verification.md" in refused.stderr
    assert "BEAM_ACCEPT_UNVERIFIED" in refused.stderr
    accepted = _compile(command, caller, "-DBEAM_ACCEPT_UNVERIFIED")
    assert accepted.returncode == 0, accepted.stderr


def test_the_failed_design_writes_an_unverified_header(failed):
    job, caller = failed
    assert job.exit_code == 1 and not job.passed
    header = (caller.parent / "beam.h").read_text()
    assert "#define BEAM_VERIFIED (0)" in header and "NOT VERIFIED" in header.split("*/")[0]  # banner too


@pytest.mark.skipif(COMPILER is None, reason="no host C compiler")
def test_the_host_compiler_refuses_it_without_the_accept_macro(failed):
    _, caller = failed
    _refused_then_accepted([*COMPILER, *STRICT], caller)


@pytest.mark.skipif(not TOOLS.can_build, reason="arm-none-eabi toolchain not found")
@pytest.mark.parametrize("core", CORES, ids=lambda c: c.name)
def test_the_cross_compiler_refuses_it_without_the_accept_macro(failed, core):
    _, caller = failed
    _refused_then_accepted([TOOLS.gcc, *core.flags, *STRICT], caller)
    # the target stage still measured the unverified table (built with the accept macro)
    job, _ = failed
    stages = {s.stage: s for s in job.stages}
    assert stages["target"].status == "pass" and "instructions" in stages["target"].detail

"""The cascade module's target stage without the tools, and the interrupt
program it measures (the full stage on both cores is checked on the demo in
tests/job/test_cascade_job.py)."""

from __future__ import annotations

from pathlib import Path

import pytest

from gainloom.codegen.cascade import CascadeLoopC, harness_header
from gainloom.codegen.target_cascade import check_cascade_target
from gainloom.codegen.target_run import parse_trace
from gainloom.codegen.target_tools import TargetTools
from gainloom.codegen.verdict import TableVerdict
from gainloom.design.gainsfile import read_gains
from gainloom.schedule.cascade import load_cascade

DEMO = Path(__file__).resolve().parents[2] / "schedules" / "servo_cascade.yaml"


@pytest.fixture(scope="module")
def module(servo_cascade_design):
    """The demo's emitted module, its loops as the job hands them over, and their stand-in headers."""
    done, out = servo_cascade_design
    assert done.returncode == 0, done.stdout + done.stderr
    cascade = load_cascade(DEMO)
    loops = []
    for loop in cascade.loops:
        table, _metadata = read_gains(out / f"{loop.name}.gains.yaml")
        s = loop.schedule
        loops.append(CascadeLoopC(loop.name, f"servo_{loop.name}", table, float(s.sampling.period[0]),
                                  loop.rate_factor, float(s.sampling.delay[0]), s.codegen.error_full_scale,
                                  s.codegen.output_full_scale, TableVerdict(True, "as emitted")))
    texts = {name: (out / name).read_text(encoding="utf-8") for name in ("servo.h", "servo.c")}
    stand_ins = [harness_header(lc, "servo", "q15", cascade.sha256, {"cascade": "harness"}) for lc in loops]
    return texts, loops, stand_ins


def test_without_tools_the_stage_is_not_checked_never_passed(module):
    texts, loops, stand_ins = module
    result = check_cascade_target(texts, loops, stand_ins, [None, None], "q15",
                                  tools=TargetTools(*[None] * 6))
    assert result.status == "not-checked" and result.passed is None
    assert result.message.startswith("not checked:") and "not found" in result.message
    doc = result.to_dict()
    assert doc["cores"] == [] and doc["rules"]["status"] == "not-checked"


def test_interrupt_markers_count_each_period_apart():
    # a hand-made trace: one period with the outer step (3 instructions), one without (2);
    # main's own instructions and the markers are not counted (module notes of target_run)
    lines = ["Trace 0: 0x0 [00000000/00000100/0x0] main", "Trace 0: 0x0 [0/0/0] measure_outer_begin",
             "Trace 0: 0x0 [0/0/0] servo_speed_lookup", "Trace 0: 0x0 [0/0/0] servo_speed_update",
             "Trace 0: 0x0 [0/0/0] main", "Trace 0: 0x0 [0/0/0] servo_current_update",
             "Trace 0: 0x0 [0/0/0] measure_end", "Trace 0: 0x0 [0/0/0] measure_inner_begin",
             "Trace 0: 0x0 [0/0/0] servo_current_lookup", "Trace 0: 0x0 [0/0/0] servo_current_update",
             "Trace 0: 0x0 [0/0/0] measure_end"]
    markers = {"measure_outer_begin": "with_outer", "measure_inner_begin": "inner_only"}
    assert parse_trace(lines, markers) == {"with_outer": [3], "inner_only": [2]}


def test_module_has_no_include_after_code(module):
    # MISRA C:2012 rule 20.1 (from memory): #include preceded only by directives and comments
    texts, _loops, _stand_ins = module
    for name, text in texts.items():
        code_seen = False
        for line in text.splitlines():
            stripped = line.strip()
            if stripped.startswith("#include"):
                assert not code_seen, f"{name}: {line}"
            elif stripped and not stripped.startswith(("#", "/*", "*", "//")):
                code_seen = True

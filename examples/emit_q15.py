"""Design the fan current loop, emit Q15 C and compile it against the Python mirror.

The host harness compiles the generated C with strict warnings as errors,
runs the interpolated lookup and the controller step over long input
sequences, and compares every output bit for bit with gainloom's Python
mirror of the same integer arithmetic.

Run: python examples/emit_q15.py [OUT_DIR]
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import gainloom
from gainloom.codegen import table_verdict

HERE = Path(__file__).resolve().parent
out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(tempfile.mkdtemp(prefix="gainloom-c-"))

schedule = gainloom.load_schedule(HERE / "hand_tuned_current_loop.yaml")
result = gainloom.design_table(schedule)
print(f"design: {'PASS' if result.passed else 'FAIL'} at {result.analysis.points} points")
# The header carries the verdict: design and the re-check of the Q15-rounded
# table; a table that fails does not compile without FAN_CUR_ACCEPT_UNVERIFIED.
rounded = gainloom.check_quantisation(schedule, result.table, "q15", baseline=result)
verdict = table_verdict(result.passed, rounded.rounded.passed, "q15")
print(f"verdict: {'VERIFIED' if verdict.verified else 'NOT VERIFIED'}: {verdict.basis}")
files = gainloom.emit_c(
    result.table,
    out_dir,
    number_format="q15",
    prefix="fan_cur",
    source_sha256=schedule.sha256,
    options={"schedule": Path(schedule.path).name},
    verdict=verdict,
)
for path in files:
    print(f"wrote {path}")
check = gainloom.check_generated_c(files, result.table)
print(f"compile + harness: {check.status}")
if check.passed is None:
    print("  not checked: no C compiler found")

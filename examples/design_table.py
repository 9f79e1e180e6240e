"""Design a gain table from a schedule file and write the gains file.

Uses the bundled 2-D conveyor demo (speed x load-inertia ratio).  Prints one
line per operating point and the whole-table verdict, then writes the gains
file that `gainloom emit` and `gainloom verify` read.

Run: python examples/design_table.py [SCHEDULE] [OUT_DIR]
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import gainloom

ROOT = Path(__file__).resolve().parent.parent
schedule_path = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "schedules" / "conveyor_2d.yaml"
out_dir = Path(sys.argv[2]) if len(sys.argv) > 2 else Path(tempfile.mkdtemp(prefix="gainloom-"))

schedule = gainloom.load_schedule(schedule_path)
result = gainloom.design_table(schedule)
analysis = result.analysis
names = result.table.coefficient_names
print(f"{schedule.name}: {analysis.points} points, {result.table.structure} by {schedule.controller.strategy}")
for p, where in enumerate(result.point_labels):
    coefficients = ", ".join(f"{n} {result.table.coefficients[n].flat[p]:.5g}" for n in names)
    print(
        f"  {where}: {coefficients}; zeta {analysis.damping[p]:.3f}, "
        f"GM {analysis.gain_margin_db[p]:.1f} dB, PM {analysis.phase_margin[p]:.1f} deg -> {result.status[p]}"
    )
print(f"whole table: {'PASS' if result.passed else 'FAIL'}")
out_dir.mkdir(parents=True, exist_ok=True)
gains_path = gainloom.write_gains(result, out_dir / "gains.yaml")
print(f"gains file: {gains_path}")

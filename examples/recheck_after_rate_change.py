"""Re-check hand-tuned current-loop gains after the PWM rate changes.

The gains were tuned by hand at 20 kHz: PI zero on the electrical pole
(ki / kp = R / L) and about 8,000 rad/s of crossover.  The same physical
gains, re-derived for an 8 kHz rate, lose the loop: one sample of
computation delay is now 125 us instead of 50 us, and the phase it costs at
crossover is more than the loop had.  gainloom.verify says so before the
firmware does.

Run: python examples/recheck_after_rate_change.py
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np

import gainloom
from gainloom.design.structures import coefficients_from_physical
from gainloom.design.table import GainTable, TableAxis

HERE = Path(__file__).resolve().parent
SCHEDULE_20K = HERE / "hand_tuned_current_loop.yaml"

resistance, inductance, crossover = 0.5, 5.0e-4, 8.0e3
kp = inductance * crossover            # V/A
ki = kp * resistance / inductance      # V/(A s): zero on the pole R/L


def hand_tuned_table(schedule: gainloom.Schedule) -> GainTable:
    """The hand-tuned physical gains as table coefficients at the schedule's rate."""
    ts = schedule.sampling.period.reshape(schedule.grid_shape)
    points = schedule.grid_shape
    coefficients = coefficients_from_physical("pi", {"kp": np.full(points, kp), "ki": np.full(points, ki)}, ts)
    axes = tuple(TableAxis(a.name, a.unit, a.values) for a in schedule.axes)
    return GainTable("pi", axes, coefficients, ts, schedule.controller.output_limits)


def recheck(schedule_path: Path, label: str) -> bool:
    """Verify the hand-tuned gains on one schedule; print one line per point."""
    schedule = gainloom.load_schedule(schedule_path)
    result = gainloom.verify(schedule, hand_tuned_table(schedule))
    analysis = result.analysis
    print(f"{label}: {'PASS' if result.passed else 'FAIL'}")
    for p, where in enumerate(result.point_labels):
        print(
            f"  {where}: pole radius {analysis.pole_radius[p]:.4f}, "
            f"GM {analysis.gain_margin_db[p]:.2f} dB, PM {analysis.phase_margin[p]:.1f} deg -> {result.status[p]}"
        )
    return result.passed


print(f"hand-tuned PI: kp = {kp:g} V/A, ki = {ki:g} V/(A s)")
passed_20k = recheck(SCHEDULE_20K, "20 kHz")
with tempfile.TemporaryDirectory() as folder:
    slower = Path(folder) / "current_loop_8k.yaml"
    slower.write_text(SCHEDULE_20K.read_text().replace("f_pwm: 20000", "f_pwm: 8000"))
    passed_8k = recheck(slower, "8 kHz")
if passed_20k and not passed_8k:
    print("The gains that were safe at 20 kHz are not at 8 kHz: re-design before flashing.")

"""Cascade design on the servo demos: inner loop first, the outer loop on the
inner loop as designed, and the whole-cascade checks."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from gainloom import design_cascade, load_cascade

SCHEDULES = Path(__file__).resolve().parents[2] / "schedules"
DEMO = SCHEDULES / "servo_cascade.yaml"


@pytest.fixture(scope="module")
def demo():
    return design_cascade(load_cascade(DEMO))


def test_demo_designs_and_passes_its_cascade_checks(demo):
    assert [r.passed for r in demo.results] == [True, True]
    pair = demo.checks.pairs[0]
    assert (pair.inner, pair.outer) == ("current", "speed")
    # 12 speed-loop points x (4 + 3 current breakpoints) x (3 + 2 temperature breakpoints)
    assert pair.pairs == 12 * 7 * 5
    assert pair.failed_pairs == 0
    # the outer specs hold with the inner loop anywhere: 6 dB and 45 deg (the demo's specs)
    assert pair.min_gain_margin_db >= 6 and pair.min_phase_margin >= 45
    assert pair.min_crossover_ratio >= 4 and pair.separation_passed
    assert demo.passed
    worst = pair.worst_separation
    assert worst["inner_crossover"] / worst["outer_crossover"] == pytest.approx(pair.min_crossover_ratio)


def test_outer_plant_runs_at_the_outer_rate(demo):
    outer_table = demo.results[1].table
    # 5e-4 s: the speed loop's period written in the demo
    np.testing.assert_allclose(outer_table.sample_period, 5e-4)


def test_fast_speed_variant_fails_bandwidth_separation_and_says_so():
    result = design_cascade(load_cascade(SCHEDULES / "servo_cascade_fast_speed.yaml"))
    pair = result.checks.pairs[0]
    assert not pair.separation_passed and not result.passed
    assert pair.min_crossover_ratio < 4
    data = result.checks.to_dict()["pairs"][0]["bandwidth_separation"]
    assert data["passed"] is False and data["required"] == 4
    assert "speed=" in data["worst"]["outer_point"] and "current=" in data["worst"]["inner_point"]


def test_inner_specs_change_the_outer_table(tmp_path, demo):
    text = DEMO.read_text(encoding="utf-8")
    marker = "      max_sensitivity_peak: 2.0\n      system_type: 1\n    codegen:\n      error_full_scale: 40"
    assert marker in text
    slower = text.replace(marker, marker.replace("system_type: 1", "max_crossover: 1500\n      system_type: 1"))
    path = tmp_path / "slower_current_loop.yaml"
    path.write_text(slower, encoding="utf-8")
    changed = design_cascade(load_cascade(path))
    inner_before = demo.results[0].analysis.crossover
    inner_after = changed.results[0].analysis.crossover
    assert np.all(inner_after <= 1500 * (1 + 1e-9)) and np.all(inner_before > 1500)
    kp_before = demo.results[1].table.coefficients["kp"]
    kp_after = changed.results[1].table.coefficients["kp"]
    # a slower current loop leaves the speed loop less phase: its gain must drop
    assert np.all(kp_after < 0.95 * kp_before)

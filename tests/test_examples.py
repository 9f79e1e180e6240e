"""Every example runs, and what it claims holds when checked independently."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import control
import numpy as np
import pytest

import gainloom

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"


def run_example(name: str, *args: str) -> str:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    done = subprocess.run(
        [sys.executable, str(EXAMPLES / name), *args], capture_output=True, text=True, env=env, timeout=600
    )
    assert done.returncode == 0, done.stdout + done.stderr
    return done.stdout


def test_analyse_one_loop_reports_the_sampled_stability_limit():
    out = run_example("analyse_one_loop.py")
    assert "s-plane:" in out and "z-plane" in out
    limit = float(out.rsplit("stable for K in (0, ", 1)[1].split(")")[0])
    # Reference: python-control c2d (ZOH) times z^-1, closed-loop poles from
    # feedback() just inside and just outside the reported limit.
    plant = control.tf([0.08], np.polymul([4.0e-4, 2.0e-4], [0.5e-3, 1.0]))
    ts = 1.0 / 5000.0
    sampled = control.sample_system(plant, ts, method="zoh") * control.tf([1], [1, 0], ts)
    assert max(abs(control.feedback(0.999 * limit * sampled, 1).poles())) < 1
    assert max(abs(control.feedback(1.001 * limit * sampled, 1).poles())) > 1


def test_recheck_example_catches_the_rate_change():
    out = run_example("recheck_after_rate_change.py")
    assert "20 kHz: PASS" in out and "8 kHz: FAIL" in out
    # Reference: python-control. The same physical PI (kp = 4 V/A, ki = 4000
    # V/(A s), backward-Euler integrator as in DEVELOPERS.md) on the ZOH
    # R-L plant with one sample of delay: stable with GM > 6 dB at 20 kHz,
    # unstable at 8 kHz.
    plant = control.tf([1.0], [5.0e-4, 0.5])
    for rate, stable in ((20000.0, True), (8000.0, False)):
        ts = 1.0 / rate
        loop = control.sample_system(plant, ts, method="zoh") * control.tf([1], [1, 0], ts)
        controller = control.tf([4.0 + 4000.0 * ts, -4.0], [1.0, -1.0], ts)
        radius = max(abs(control.feedback(controller * loop, 1).poles()))
        assert (radius < 1) == stable
        if stable:
            gm, _, _, _, _, _ = control.stability_margins(controller * loop)
            assert 20 * np.log10(gm) > 6


def test_design_table_example_writes_a_readable_gains_file(tmp_path):
    out = run_example("design_table.py", str(EXAMPLES.parent / "schedules" / "conveyor_2d.yaml"), str(tmp_path))
    assert "whole table:" in out
    table, _meta = gainloom.read_gains(tmp_path / "gains.yaml")
    schedule = gainloom.load_schedule(EXAMPLES.parent / "schedules" / "conveyor_2d.yaml")
    # Refinement may insert breakpoints; the schedule's own grid stays in the table.
    for table_axis, axis in zip(table.axes, schedule.axes, strict=True):
        assert table_axis.name == axis.name
        assert np.isin(axis.values, table_axis.values).all()


@pytest.mark.needs_cc
@pytest.mark.skipif(shutil.which("cc") is None and shutil.which("gcc") is None, reason="no C compiler")
def test_emit_q15_example_compiles_and_matches_the_mirror(tmp_path):
    out = run_example("emit_q15.py", str(tmp_path))
    assert "compile + harness: passed" in out
    # Reference: the C compiler itself, strict flags, on the emitted files.
    compiler = shutil.which("cc") or shutil.which("gcc")
    flags = ["-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Wconversion", "-Wshadow", "-Werror", "-c"]
    done = subprocess.run(
        [compiler, *flags, str(tmp_path / "fan_cur.c"), "-o", str(tmp_path / "fan_cur.o")],
        capture_output=True, text=True,
    )
    assert done.returncode == 0, done.stderr

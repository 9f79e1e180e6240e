"""Smoke test: the benchmark script runs end to end on a few points (no timing asserted)."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_benchmark_quick_run():
    done = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "schedule.py"), "--quick"],
        capture_output=True, text=True, timeout=300,
    )
    assert done.returncode == 0, done.stdout + done.stderr
    assert "scheduler" in done.stdout and "batched sweep" in done.stdout and "naive control" in done.stdout
    # the exact boundaries sit within one grid step of both sweeps' choice
    for line in done.stdout.splitlines():
        if "within one grid step" in line:
            got, total = line.rsplit(" ", 1)[1].split("/")
            assert got == total and int(total) > 0

"""Smoke test: the benchmark script runs end to end on a few points (no timing asserted)."""

import importlib.util
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_benchmark_quick_run(capsys):
    spec = importlib.util.spec_from_file_location("gainloom_benchmark_schedule", ROOT / "benchmarks" / "schedule.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    code = module.main(["--quick"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "scheduler" in out and "batched sweep" in out and "naive control" in out
    # the exact boundaries sit within one grid step of the sweeps' choice
    lines = [line for line in out.splitlines() if "within one grid step" in line]
    assert lines
    for line in lines:
        got, total = line.rsplit(" ", 1)[1].split("/")
        assert got == total and int(total) > 0

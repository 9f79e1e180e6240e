"""Smoke test: benchmarks/scale.py runs end to end in its small mode and prints
every figure it promises (no timing asserted)."""

import importlib.util
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

pytest.importorskip("distributed")


def test_scale_benchmark_small_run(capsys):
    spec = importlib.util.spec_from_file_location("gainloom_benchmark_scale", ROOT / "benchmarks" / "scale.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    code = module.main(["--small"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "20 points x 512 draws = 1.02e+04 loop analyses" in out
    rows = {label: line for line in out.splitlines()
            for label in ("1 process", "2 processes", "LocalCluster, 2 workers") if line.startswith(label)}
    assert len(rows) == 3
    for label, line in rows.items():
        wall, rate, ratio = (float(x) for x in line[len(label):].split())
        assert wall > 0 and rate > 0 and ratio > 0
        assert rate * wall == pytest.approx(20 * 512, rel=0.05)  # loops/s x seconds = the loops analysed
    assert "results identical bit for bit: yes" in out
    assert "projection, not a measurement" in out
    assert len(re.findall(r"^  N = +\d+ workers: [\d.]+ (h|min)$", out, flags=re.M)) == 4

"""``gainloom inspect`` in a subprocess: exit codes, text and strict JSON.

Discrete poles are checked against an independent path: python-control's
``sample_system`` (zero-order hold) of the continuous plant, with the
computation delay adding poles at z = 0 (one per whole sample; textbook fact
of the z-transform, from memory).
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import control
import numpy as np
import pytest

from gainloom.cli import main

ROOT = Path(__file__).resolve().parents[2]
DEMOS = sorted(p for p in (ROOT / "schedules").glob("*.yaml") if not p.stem.startswith("servo_cascade"))
CASCADES = sorted((ROOT / "schedules").glob("servo_cascade*.yaml"))
BAD = ROOT / "tests" / "bad_schedules"


def run_cli(*args: str) -> subprocess.CompletedProcess:
    # Build PYTHONPATH from this process's import path so the subprocess sees the
    # same gainloom (src/ in a dev run, the installed package in CI).
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    return subprocess.run(
        [sys.executable, "-m", "gainloom", "inspect", *args], capture_output=True, text=True, env=env, timeout=120,
        check=False,
    )


def in_process_json(path: Path, capsys) -> dict:
    """``inspect --json`` through the dispatcher in this process (subprocess start-up is slow)."""
    assert main(["inspect", str(path), "--json"]) == 0
    return json.loads(capsys.readouterr().out, parse_constant=lambda c: pytest.fail(f"non-strict JSON {c}"))


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_demo_schedules_inspect_cleanly(path, capsys):
    text = run_cli(str(path))
    assert text.returncode == 0, text.stderr
    assert text.stderr == ""
    # the measured demo's sweep holds three bad samples on purpose (examples/make_measured_data.py)
    expected = 3 if path.stem == "measured_speed" else 0
    assert "z poles" in text.stdout and text.stdout.count("warning") == expected
    data = in_process_json(path, capsys)
    assert len(data["warnings"]) == expected
    assert len(data["points"]) == math.prod(data["grid_shape"])


@pytest.mark.parametrize("path", CASCADES, ids=[p.stem for p in CASCADES])
def test_cascade_demos_inspect_cleanly(path, capsys):
    text = run_cli(str(path))
    assert text.returncode == 0, text.stderr
    assert "== loop current" in text.stdout and "== loop speed" in text.stdout and "warning" not in text.stdout
    data = in_process_json(path, capsys)
    assert [loop["name"] for loop in data["loops"]] == ["current", "speed"]
    assert data["warnings"] == []
    for loop in data["loops"]:
        assert len(loop["points"]) == math.prod(loop["grid_shape"])


def test_json_in_a_subprocess_is_strict():
    result = run_cli(str(ROOT / "schedules" / "conveyor_2d.yaml"), "--json")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout, parse_constant=lambda c: pytest.fail(f"non-strict JSON constant {c}"))
    assert data["schedule"]["name"] == "conveyor-speed-2d"


def test_json_discrete_poles_match_python_control(capsys):
    data = in_process_json(ROOT / "schedules" / "spindle_speed.yaml", capsys)
    for point in data["points"][::4]:
        cont = point["continuous"]
        plant = control.tf(np.trim_zeros(cont["num"], "f"), cont["den"])
        ts = point["sample_period"]
        # reference: python-control zero-order-hold discretisation
        reference = np.sort_complex(np.concatenate([control.sample_system(plant, ts, "zoh").poles(), np.zeros(1)]))
        got = np.sort_complex(np.array([complex(r["real"], r["imag"]) for r in point["discrete"]["poles"]]))
        np.testing.assert_allclose(got, reference, rtol=1e-9, atol=1e-12)
        for r in point["discrete"]["poles"]:
            assert r["magnitude"] == pytest.approx(abs(complex(r["real"], r["imag"])), rel=1e-12)
        # continuous poles: scipy-independent check, numpy.roots of the denominator (reference library)
        s_ref = np.sort_complex(np.roots(cont["den"]))
        s_got = np.sort_complex(np.array([complex(r["real"], r["imag"]) for r in cont["poles"]]))
        np.testing.assert_allclose(s_got, s_ref, rtol=1e-10)


def test_json_lists_coordinates_and_parameters(capsys):
    data = in_process_json(ROOT / "schedules" / "winding_current.yaml", capsys)
    first = data["points"][0]
    assert first["coordinates"] == {"current": 0.0, "temperature": -20.0}
    # copper resistance at -20 C: 0.12 (1 + 0.0039 (-40)) ohm (scenario formula)
    assert first["parameters"]["R"] == pytest.approx(0.12 * (1 - 0.0039 * 40), rel=1e-14)
    # dead time of half a sample plus one sample of computation delay
    assert first["discrete"]["total_delay_samples"] == pytest.approx(1.5)


def test_bad_schedule_exits_2_with_one_message():
    path = BAD / "unknown_structure.yaml"
    result = run_cli(str(path))
    assert result.returncode == 2
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in result.stderr
    assert lines[0].startswith("gainloom inspect: error: ") and "did you mean 'pi'" in lines[0]
    assert f"{path}:" in lines[0]


def test_missing_file_exits_2():
    result = run_cli(str(ROOT / "no-such-schedule.yaml"))
    assert result.returncode == 2 and "cannot read schedule file" in result.stderr


def test_slow_sampling_warning_is_printed(tmp_path):
    text = (BAD / "unknown_structure.yaml").read_text().replace("structure: pii", "structure: pi")
    text = text.replace('denominator: ["J", "B"]', 'denominator: ["J * 1e-4", "J + B * 1e-4", "B"]')
    path = tmp_path / "slow.yaml"
    path.write_text(text)
    result = run_cli(str(path))
    assert result.returncode == 0, result.stderr
    assert "warning: sampling is slow" in result.stdout

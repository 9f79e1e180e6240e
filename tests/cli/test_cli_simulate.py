"""``gainloom simulate`` in a subprocess: exit codes, text, strict JSON, plots.

The numbers are checked against the closed form of a first-order lag
a/(s + a) under ZOH with P control (ZOH equivalent (1 - phi)/(z - phi),
phi = exp(-a T), textbook closed form, from memory): y[k] = K/(1 + K) (1 - lam^k)
with lam = phi - K (1 - phi).
"""

from __future__ import annotations

import json
import os
import struct
import subprocess
import sys

import numpy as np
import pytest

from gainloom import look
from gainloom.cli import main
from gainloom.design.gainsfile import write_gains
from gainloom.design.table import GainTable, TableAxis
from gainloom.safety import CAUTION

SCHEDULE = """\
name: lag-test
description: first-order lag for the simulate CLI tests (invented)
variables:
  - name: speed
    unit: rpm
    values: [0, 1000, 2000]
parameters:
  a: "40 + 0 * speed"
plant:
  transfer_function:
    numerator: ["a"]
    denominator: [1, "a"]
sampling:
  period: 1.0e-3
  method: zoh
  delay: 0
controller:
  structure: pi
  strategy: dominant-pair
  target: {damping: 0.7, natural_frequency: 50}
  output_limits: [-5, 5]
specs:
  min_damping: 0.5
codegen:
  prefix: lag
  format: float32
"""


@pytest.fixture()
def files(tmp_path):
    schedule = tmp_path / "lag.yaml"
    schedule.write_text(SCHEDULE)
    axis = TableAxis("speed", "rpm", np.array([0.0, 1000.0, 2000.0]))

    def gains(kp: float, name: str) -> str:
        table = GainTable("p", (axis,), {"kp": np.full(3, kp)}, np.full(3, 1e-3), (-1e3, 1e3))
        return str(write_gains(table, tmp_path / name))

    return str(schedule), gains(3.0, "stable.yaml"), gains(60.0, "unstable.yaml"), tmp_path


def run_cli(*args: str) -> subprocess.CompletedProcess:
    # PYTHONPATH from this interpreter's import path: the subprocess sees the same gainloom.
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    return subprocess.run(
        [sys.executable, "-m", "gainloom", "simulate", *args], check=False, capture_output=True, text=True, env=env,
        timeout=120,
    )


def test_json_run_matches_the_closed_form(files):
    schedule, stable, _, _ = files
    done = run_cli(schedule, "--gains", stable, "--ramp", "speed=0:2000", "--duration", "0.2",
                   "--format", "float64", "--json", "--series")
    assert done.returncode == 0, done.stderr
    data = json.loads(done.stdout, parse_constant=lambda c: pytest.fail(f"non-strict JSON {c}"))
    y = np.array(data["series"]["output"])
    k = np.arange(y.size)
    phi = np.exp(-40.0 * 1e-3)
    lam = phi - 3.0 * (1 - phi)
    np.testing.assert_allclose(y, 0.75 * (1 - lam**k), rtol=0, atol=1e-12)
    assert data["passed"] and data["number_format"] == "float64" and data["caution"] == CAUTION
    assert data["series"]["points"]["speed"][-1] == pytest.approx(2000.0)


def test_feedforward_and_limit_steps_from_the_command_line(files):
    schedule, stable, _, _ = files
    # Feedforward c y with c = a/40 = 1 (a parameter of the schedule): u = K (r - y) + y,
    # lam = phi - (K - 1)(1 - phi), y[k] = K/(1 + K - 1) (1 - lam^k) = 1 - lam^k
    # (closed form, geometric series); then a limit step to +-0.5 from 0.1 s clamps u
    # there on its first sample (definition of saturation) and 0.2:table releases it.
    done = run_cli(schedule, "--gains", stable, "--ramp", "speed=500", "--duration", "0.3", "--format", "float64",
                   "--feedforward", "a / 40 * y", "--limit-step", "0.1:-0.5:0.5", "--limit-step", "0.2:table",
                   "--json", "--series")
    assert done.returncode == 0, done.stderr
    data = json.loads(done.stdout)
    series = data["series"]
    t, y, u = (np.array(series[name]) for name in ("time", "output", "control"))
    phi = np.exp(-40.0 * 1e-3)
    lam = phi - 2.0 * (1 - phi)
    before = t < 0.1 - 1e-12
    np.testing.assert_allclose(y[before], 1 - lam ** np.arange(np.count_nonzero(before)), rtol=0, atol=1e-12)
    sag = ~before & (t < 0.2 - 1e-12)
    assert np.all(u[sag] == 0.5) and np.all(np.array(series["limit_high"])[sag] == 0.5)
    assert data["scenario"]["limit_steps"] == [{"time": 0.1, "low": "-0.5", "high": "0.5"},
                                               {"time": 0.2, "low": None, "high": None}]
    assert data["metrics"]["saturation_time"] == pytest.approx(np.count_nonzero(sag) * 1e-3, rel=1e-9)


def test_text_run_fails_a_limit_and_flags_instability(files, capsys):
    schedule, stable, unstable, _ = files
    # The P loop settles at K/(1 + K) = 0.75 (closed form above): the error never
    # falls below 0.25, so --max-error 0.1 over the last half must fail.
    options = ["--ramp", "speed=500", "--error-from", "0.25", "--max-error", "0.1"]
    assert main(["simulate", schedule, "--gains", stable, *options]) == 1
    text = capsys.readouterr().out
    assert "FAIL" in text and "spec max_error <= 0.1: 0.25" in text and CAUTION in text
    # K = 60: lam = phi - 60 (1 - phi) = -1.39, outside the unit circle (closed form).
    done = run_cli(schedule, "--gains", unstable, "--ramp", "speed=500")
    assert done.returncode == 1, done.stderr
    assert "UNSTABLE" in done.stdout


@pytest.mark.parametrize(
    "options,message",
    [
        (["--ramp", "speed"], "expected AXIS=START"),
        (["--ramp", "speed=0:x"], "expected a number"),
        (["--ramp", "torque=1"], "the scenario moves torque, which the schedule does not have"),
        (["--ramp", "speed=1", "--load-step", "0.1"], "expected A:B"),
        (["--ramp", "speed=1", "--format", "q15", "--duration", "-1"], "duration must be > 0"),
        (["--ramp", "speed=1", "--limit-step", "0.1:1"], "--limit-step: expected TIME:LOW:HIGH or TIME:table"),
        (["--ramp", "speed=1", "--limit-step", "0.1:-1:1+"], "--limit-step 0.1:-1:1+ HIGH: cannot parse expression"),
        (["--ramp", "speed=1", "--feedforward", "2*sped"], "--feedforward: unknown name 'sped'"),
        (["--ramp", "speed=1", "--feedforward-at", "0.1"], "--feedforward-at needs --feedforward"),
    ],
)
def test_bad_options_exit_2(files, capsys, options, message):
    schedule, stable, _, _ = files
    assert main(["simulate", schedule, "--gains", stable, *options]) == 2
    assert message in capsys.readouterr().err


def test_missing_gains_file_exits_2(files):
    schedule, _, _, tmp_path = files
    done = run_cli(schedule, "--gains", str(tmp_path / "none.yaml"), "--ramp", "speed=1")
    assert done.returncode == 2 and "error" in done.stderr and "Traceback" not in done.stderr


def _png_chunks(data: bytes):
    # PNG layout (ISO/IEC 15948): 8-byte signature, then length, type, data, CRC.
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    offset, chunks = 8, []
    while offset < len(data):
        length, kind = struct.unpack(">I4s", data[offset:offset + 8])
        chunks.append((kind, data[offset + 8:offset + 8 + length]))
        offset += 12 + length
    return chunks


def test_plots_are_deterministic_png_without_metadata(files, capsys):
    schedule, stable, _, tmp_path = files
    images = []
    for folder in ("one", "two"):
        assert main(["simulate", schedule, "--gains", stable, "--ramp", "speed=0:2000", "--load-step", "0.3:0.5",
                     "--plot", str(tmp_path / folder)]) == 0
        images.append((tmp_path / folder / "simulation.png").read_bytes())
    assert images[0] == images[1]
    chunks = _png_chunks(images[0])
    width, height = struct.unpack(">II", chunks[0][1][:8])
    assert (width, height) == (8 * look.DPI, 10 * look.DPI)  # 8 x 10 in at the project's one resolution
    assert not [kind for kind, _ in chunks if kind in (b"tEXt", b"iTXt", b"zTXt", b"tIME")]
    assert "plot:" in capsys.readouterr().out


def test_help_names_every_option():
    done = run_cli("--help")
    assert done.returncode == 0
    for option in ("--gains", "--ramp", "--path", "--reference", "--load-step", "--format", "--plot", "--json",
                   "--max-overshoot", "--error-full-scale", "--feedforward", "--feedforward-at", "--limit-step"):
        assert option in done.stdout

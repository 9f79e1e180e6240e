"""``gainloom design`` and ``gainloom verify`` in a subprocess: exit codes,
files written, summary, caution."""

import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

from gainloom.design.gainsfile import read_gains
from gainloom.safety import CAUTION

ROOT = Path(__file__).resolve().parents[2]

PASSING = """
name: cli-pass
variables:
  - name: x
    values: [0.0, 0.5, 1.0]
parameters:
  k: "1.0 + 1.0 * x"
plant:
  transfer_function:
    numerator: ["k"]
    denominator: ["0.02", "1"]
sampling:
  period: {ts}
  method: zoh
  delay: 1
controller:
  structure: p
  strategy: dominant-pair
  target: {{damping: 0.7, natural_frequency: 2000}}
  output_limits: [-5, 5]
specs:
  min_damping: 0.7
table:
  between_points: 2
  refine: {{max_inserted: 6}}
codegen:
  prefix: cli
  format: float32
"""


def run(*args):
    """The CLI in a subprocess (``python -m gainloom``)."""
    env = dict(os.environ, PYTHONPATH=str(ROOT / "src"))
    return subprocess.run([sys.executable, "-m", "gainloom", *args], capture_output=True, text=True, env=env, timeout=300)


class Done:
    def __init__(self, returncode, stdout, stderr):
        self.returncode, self.stdout, self.stderr = returncode, stdout, stderr


@pytest.fixture()
def main(capsys):
    """The same CLI entry point in-process (faster than a subprocess)."""
    from gainloom.cli import main as entry

    def call(*args):
        code = entry(list(args))
        captured = capsys.readouterr()
        return Done(code, captured.out, captured.err)

    return call


@pytest.fixture()
def schedule(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(PASSING.format(ts=0.001))
    return path


def test_design_writes_gains_and_exits_zero(tmp_path, schedule):
    out = tmp_path / "out"
    done = run("design", str(schedule), "--out", str(out))
    assert done.returncode == 0, done.stdout + done.stderr
    assert "PASS" in done.stdout
    assert CAUTION in done.stdout
    assert "design" in done.stderr  # progress counter on stderr
    table, meta = read_gains(out / "gains.yaml")
    assert table.structure == "p"
    assert meta.schedule_sha256 and meta.passed is True
    assert len(meta.points) == table.shape[0]

def test_design_is_deterministic(tmp_path, schedule, main):
    out = tmp_path / "out"
    assert main("design", str(schedule), "--out", str(out), "--quiet").returncode == 0
    again = main("design", str(schedule), "--out", str(tmp_path / "again"), "--quiet")
    assert again.returncode == 0 and again.stderr == ""
    # deterministic: same input, same bytes (the schedule path is the same)
    assert (out / "gains.yaml").read_bytes() == (tmp_path / "again" / "gains.yaml").read_bytes()


def test_verify_passes_then_fails_after_the_sample_period_changes(tmp_path, schedule, main):
    out = tmp_path / "out"
    assert main("design", str(schedule), "--out", str(out), "--quiet").returncode == 0
    ok = main("verify", str(schedule), "--gains", str(out / "gains.yaml"), "--quiet")
    assert ok.returncode == 0, ok.stdout + ok.stderr
    slower = tmp_path / "slow.yaml"
    slower.write_text(PASSING.format(ts=0.004))
    bad = main("verify", str(slower), "--gains", str(out / "gains.yaml"), "--quiet")
    assert bad.returncode == 1, bad.stdout
    assert "sample period differs" in bad.stdout
    assert "FAIL" in bad.stdout


def test_hand_tuned_gains_file_is_verified(tmp_path, schedule, main):
    out = tmp_path / "out"
    assert main("design", str(schedule), "--out", str(out), "--quiet", "--gains-name", "g.json").returncode == 0
    doc = yaml.safe_load((out / "g.json").read_text())
    doc["coefficients"]["kp"] = [v * 4 for v in doc["coefficients"]["kp"]]  # a reckless hand edit
    hand = tmp_path / "hand.yaml"
    hand.write_text(yaml.safe_dump(doc))
    done = main("verify", str(schedule), "--gains", str(hand), "--json", "--quiet")
    assert done.returncode == 1
    assert '"passed": false' in done.stdout


def test_bad_input_exits_two(tmp_path, schedule, main):
    missing = main("design", str(tmp_path / "none.yaml"), "--out", str(tmp_path / "o"))
    assert missing.returncode == 2 and "error" in missing.stderr
    bad_gains = tmp_path / "bad.yaml"
    bad_gains.write_text("format: something-else\n")
    done = main("verify", str(schedule), "--gains", str(bad_gains))
    assert done.returncode == 2 and "bad.yaml:1" in done.stderr
    name = main("design", str(schedule), "--out", str(tmp_path / "o"), "--gains-name", "../x.yaml")
    assert name.returncode == 2


def test_the_crossover_column_shows_both_ends_when_the_loop_crosses_0_db_twice():
    # |L| = 1 at 25 and 7700 rad/s (a loop that dips below 1 and comes back): the column must
    # not show only the lowest, which max-crossover does not maximise
    from types import SimpleNamespace

    import numpy as np

    from gainloom.cli.design import summary_rows

    one = np.array([1.0, 1.0])
    analysis = SimpleNamespace(
        physical={"kp": one}, damping=one, damping_pole_frequency=one, gain_margin_db=one, phase_margin=one,
        crossover=np.array([25.0, 400.0]), last_crossover=np.array([7700.0, 401.0]), bandwidth=one, overshoot=one)
    headers, rows = summary_rows(["a", "b"], analysis, ["pass", "pass"])
    column = headers.index("wc rad/s")
    assert rows[0][column] == "25..7700"
    assert rows[1][column] == 400.0  # within 1 %: one crossover

"""``gainloom design`` on a cascade whose current loop has a +-20 % inductance
tolerance: the current loop passes its own checks at its corners, but the
speed table, designed on the nominal current loop, fails at the slow corner,
and the summary and both logs say which corner and which spec."""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest
from cases import small_servo_cascade


@pytest.fixture(scope="module")
def wide(tmp_path_factory):
    folder = tmp_path_factory.mktemp("corner_log")
    path = folder / "servo_wide_inductance.yaml"
    path.write_text(small_servo_cascade("parameters: {L: 0.2}"), encoding="utf-8")
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    done = subprocess.run([sys.executable, "-m", "gainloom", "design", str(path), "--out", str(folder / "out"),
                           "--quiet", "--no-compile", "--no-simulate"],
                          capture_output=True, text=True, env=env, timeout=600, check=False)
    return done, folder / "out"


def test_wide_inner_tolerance_fails_the_outer_check_at_the_slow_corner(wide):
    done, out = wide
    assert done.returncode == 1, done.stdout + done.stderr
    doc = json.loads((out / "verification.json").read_text(encoding="utf-8"))
    assert [loop["verdict"]["passed"] for loop in doc["loops"]] == [True, False]
    pair = doc["cascade"]["checks"]["pairs"][0]
    assert pair["passed"] is False and pair["corners_checked"] == 2
    checked = pair["outer_specs_with_inner"]
    assert checked["passed"] is False and checked["failed_pairs"] > 0
    # the nominal current loop is what the speed table was designed on: only
    # the corner with 20 % more inductance (a slower current loop) fails
    assert {f["corner"] for f in checked["failures"]} == {"current.L x1.2"}
    worst = checked["worst_per_point"]
    assert len(worst) == 4  # one per speed-loop grid point (2 x 2)
    for entry in worst:
        assert entry["corner"] == {"current.L": 1.2}
        assert "min_phase_margin" in entry["failed_specs"] and entry["binding_slack"] < 0
        # the demo's speed-loop spec is PM >= 45 deg
        assert entry["binding_spec"] != "min_phase_margin" or entry["phase_margin_deg"] < 45


def test_summary_and_markdown_name_the_binding_corner(wide):
    done, out = wide
    assert "worst inner point and corner per speed point" in done.stdout
    assert "current.L x1.2; min_phase_margin binds" in done.stdout and "FAILS" in done.stdout
    markdown = (out / "verification.md").read_text(encoding="utf-8")
    assert "nominal and at 2 corners of the tolerances of both loops" in markdown
    assert "| current.L x1.2 |" in markdown

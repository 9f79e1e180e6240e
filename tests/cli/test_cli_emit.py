"""``gainloom emit`` in a subprocess, as a user runs it."""

import os
import subprocess
import sys

import pytest
from cases import make_table

from gainloom.codegen.harness import find_compiler
from gainloom.design.gainsfile import write_gains
from gainloom.safety import CAUTION


def _run(*args, cwd):
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    return subprocess.run(
        [sys.executable, "-m", "gainloom", "emit", *args], cwd=cwd, env=env, capture_output=True, text=True, check=False
    )


@pytest.fixture
def gains(tmp_path):
    return write_gains(make_table("pid", dims=2), tmp_path / "motor.gains.yaml")


def test_emit_writes_byte_identical_files_each_run(tmp_path, gains):
    out = tmp_path / "out"
    first = _run(str(gains), "--out", str(out), "--format", "q15", "--prefix", "spindle", cwd=tmp_path)
    assert first.returncode == 0, first.stderr
    assert "wrote" in first.stdout and CAUTION in first.stdout
    header, source = (out / "spindle.h").read_bytes(), (out / "spindle.c").read_bytes()
    assert b"spindle_update(" in header and b"SPINDLE_NUMBER_FORMAT (SPINDLE_FORMAT_Q15)" in header
    banner = header.decode("ascii").split("*/")[0]
    assert CAUTION in " ".join(line.removeprefix(" * ") for line in banner.splitlines())  # the project's one caution
    assert b"gains_file=motor.gains.yaml" in source
    again = _run(str(gains), "--out", str(out), "--format", "q15", "--prefix", "spindle", cwd=tmp_path)
    assert again.returncode == 0, again.stderr  # its own files: no --force needed
    assert (out / "spindle.h").read_bytes() == header and (out / "spindle.c").read_bytes() == source


def test_emit_refuses_foreign_files_and_says_how_to_force(tmp_path, gains):
    out = tmp_path / "out"
    out.mkdir()
    (out / "ctl.c").write_text("/* someone's work */\n")
    refused = _run(str(gains), "--out", str(out), cwd=tmp_path)
    assert refused.returncode == 2
    assert "--force" in refused.stderr and "not written by gainloom" in refused.stderr
    assert (out / "ctl.c").read_text() == "/* someone's work */\n"
    forced = _run(str(gains), "--out", str(out), "--force", cwd=tmp_path)
    assert forced.returncode == 0, forced.stderr


def test_emit_refuses_a_bad_prefix_with_one_line(tmp_path, gains):
    result = _run(str(gains), "--out", str(tmp_path / "out"), "--prefix", "_ctl", cwd=tmp_path)
    assert result.returncode == 2
    assert result.stderr.startswith("gainloom emit: error: prefix '_ctl' is not a C identifier")
    assert "Traceback" not in result.stderr
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_emit_reports_a_bad_gains_file(tmp_path):
    bad = tmp_path / "bad.yaml"
    bad.write_text("format: something-else/9\n")
    result = _run(str(bad), "--out", str(tmp_path / "out"), cwd=tmp_path)
    assert result.returncode == 2 and "bad.yaml" in result.stderr


@pytest.mark.needs_cc
@pytest.mark.skipif(find_compiler() is None, reason="no host C compiler ($CC, cc, gcc, clang)")
def test_emit_check_compiles_and_compares(tmp_path, gains):
    result = _run(
        str(gains), "--out", str(tmp_path / "out"), "--format", "q31", "--check", "--json", cwd=tmp_path
    )
    assert result.returncode == 0, result.stderr
    import json

    report = json.loads(result.stdout)
    assert report["check"]["status"] == "passed" and report["check"]["worst_step_error"] == 0


# A scenario of our own: a first-order plant whose gain doubles across x,
# PI control with its zero on the plant pole; sampled with one sample of computation delay.
SCHEDULE = """
name: emit-check
variables:
  - name: x
    values: [0.0, 0.5, 1.0]
parameters:
  k: "2.0 + 2.0 * x"
plant:
  transfer_function:
    numerator: ["k"]
    denominator: ["0.05", "1"]
sampling:
  period: 0.002
  method: zoh
  delay: 1
controller:
  structure: pi
  strategy: pole-cancel
  output_limits: [-4, 6]
specs:
  min_damping: 0.6
codegen:
  prefix: checked_emit
  format: q15
"""


@pytest.mark.slow
def test_emit_rechecks_the_stored_table_on_the_schedule(tmp_path, capsys):
    # In-process (the design step is the cost): design, then emit with
    # --schedule, which takes prefix and format from the schedule's codegen
    # section and verifies the Q15-rounded table.
    import json

    from gainloom.cli import main

    schedule = tmp_path / "s.yaml"
    schedule.write_text(SCHEDULE)
    assert main(["design", str(schedule), "--out", str(tmp_path), "--quiet", "--json"]) == 0
    capsys.readouterr()
    code = main(["emit", str(tmp_path / "gains.yaml"), "--out", str(tmp_path / "c"), "--schedule", str(schedule),
                 "--json"])
    report = json.loads(capsys.readouterr().out)
    assert code == 0, report
    assert report["format"] == "q15" and report["prefix"] == "checked_emit"
    assert (tmp_path / "c" / "checked_emit.h").is_file()
    assert report["stored_table"]["passed"] is True
    assert report["stored_table"]["points_passing"] == report["stored_table"]["points"] == 3
    # the design job's quantisation stage, run on the same table, is the same re-check (one meaning)
    job_log = json.loads((tmp_path / "verification.json").read_text())
    assert report["stored_table"]["broken_by_rounding"] == job_log["quantisation"]["broken"] == []
    # design recorded as passed + rounded table re-checked: the header is marked verified
    assert report["verified"] is True
    assert "#define CHECKED_EMIT_VERIFIED (1)" in (tmp_path / "c" / "checked_emit.h").read_text()
    # without --schedule the rounding is not re-checked: not verified, and it says so
    code = main(["emit", str(tmp_path / "gains.yaml"), "--out", str(tmp_path / "c2"), "--format", "q15"])
    assert code == 0
    header = (tmp_path / "c2" / "ctl.h").read_text()
    banner = " ".join(line.lstrip(" */").strip() for line in header.split("*/")[0].splitlines())
    assert "#define CTL_VERIFIED (0)" in header and "q15 not re-checked" in banner
    assert "CTL_ACCEPT_UNVERIFIED defined" in capsys.readouterr().err

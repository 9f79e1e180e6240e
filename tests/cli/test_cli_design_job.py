"""``gainloom design SCHEDULE --out DIR`` as the full run, from the command line:
exit codes, stage lines, progress, refusal of foreign files, options.

References: the exit-code contract of docs/design.md; the C header banner
for the chosen format and prefix; JSON parsed by the standard library.
The schedules are the invented scenarios of ``tests/cases.py`` (fixtures in ``conftest.py``).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from gainloom.safety import CAUTION


class Done:
    def __init__(self, returncode, stdout, stderr):
        self.returncode, self.stdout, self.stderr = returncode, stdout, stderr


@pytest.fixture()
def main(capsys):
    """The CLI entry point in-process."""
    from gainloom.cli import main as entry

    def call(*args):
        code = entry([str(a) for a in args])
        captured = capsys.readouterr()
        return Done(code, captured.out, captured.err)

    return call


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()}


def test_full_run_in_a_subprocess(tmp_path, fan_schedule):
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-m", "gainloom", "design", str(fan_schedule), "--out", str(out)],
                          capture_output=True, text=True, env=env, timeout=300, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    for stage in ("design", "C code", "C check", "target", "C rules", "quantisation", "simulation", "log"):
        assert any(line.startswith(stage + " ") for line in done.stdout.splitlines()), stage
    assert "\nPASS" in done.stdout
    assert f"gains file: {out / 'gains.yaml'}" in done.stdout
    assert CAUTION in done.stdout
    for stage in ("design", "emit C", "quantisation", "simulate", "log", "write"):
        assert stage in done.stderr  # progress on stderr, stage names and counters
    assert "1/1" in done.stderr
    assert {"gains.yaml", "fan.h", "fan.c", "verification.json", "verification.md"} <= {p.name for p in out.iterdir()}


def test_foreign_file_exits_two_and_force_overwrites(tmp_path, fan_schedule, main):
    out = tmp_path / "out"
    out.mkdir()
    (out / "fan.c").write_text("/* my own controller */\n")
    before = _snapshot(out)
    refused = main("design", fan_schedule, "--out", out, "--quiet", "--no-simulate", "--no-compile")
    assert refused.returncode == 2
    assert "--force" in refused.stderr and "fan.c was not written by gainloom" in refused.stderr
    assert _snapshot(out) == before
    forced = main("design", fan_schedule, "--out", out, "--quiet", "--no-simulate", "--no-compile", "--force")
    assert forced.returncode == 0, forced.stdout + forced.stderr
    assert "my own controller" not in (out / "fan.c").read_text()
    assert "not checked: C check, target, C rules, simulation" in forced.stdout


def test_failing_schedule_exits_one_and_names_the_binding_spec(tmp_path, unstable_schedule, main):
    path = unstable_schedule
    done = main("design", path, "--out", tmp_path / "out", "--quiet", "--no-compile")
    assert done.returncode == 1
    assert "FAIL: design, simulation" in done.stdout
    assert "binding spec: stable" in done.stdout
    assert (tmp_path / "out" / "verification.md").is_file() and (tmp_path / "out" / "beam.c").is_file()


def test_format_prefix_and_json(tmp_path, fan_schedule, main):
    out = tmp_path / "out"
    done = main("design", fan_schedule, "--out", out, "--quiet", "--format", "float32", "--prefix", "fanx",
                "--no-simulate", "--json")
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout)
    assert report["number_format"] == "float32" and report["prefix"] == "fanx"
    assert [s["stage"] for s in report["stages"]] == ["design", "C code", "C check", "target", "C rules",
                                                      "quantisation", "simulation", "log"]
    assert "simulation" in report["not_checked"]
    header = (out / "fanx.h").read_text()
    assert "float32" in header[:2000] and not (out / "fan.h").exists()
    assert CAUTION in done.stderr  # the caution goes to stderr with --json


def test_bad_input_exits_two(tmp_path, fan_schedule, main):
    assert main("design", tmp_path / "missing.yaml", "--out", tmp_path / "o", "--quiet").returncode == 2
    bad_prefix = main("design", fan_schedule, "--out", tmp_path / "o", "--quiet", "--prefix", "9bad")
    assert bad_prefix.returncode == 2 and "error" in bad_prefix.stderr
    assert not (tmp_path / "o").exists()  # nothing written for bad input
    with pytest.raises(SystemExit) as caught:
        main("design", fan_schedule, "--out", tmp_path / "o", "--format", "q7")
    assert caught.value.code == 2


def test_help_text(capsys):
    from gainloom.cli import main as entry

    with pytest.raises(SystemExit) as caught:
        entry(["design", "--help"])
    text = capsys.readouterr().out
    assert caught.value.code == 0
    for words in ("--no-simulate", "--force", "not checked: no C compiler found", "load step", "3 T", "10 T"):
        assert words in text


def test_c_of_the_full_run_is_what_emit_makes_of_its_gains_file(tmp_path, fan_schedule, main):
    out = tmp_path / "out"
    assert main("design", fan_schedule, "--out", out, "--quiet", "--no-simulate", "--no-compile").returncode == 0
    again = tmp_path / "emitted"
    # --schedule: the rounded table is re-checked, as in the full run, so the verdicts agree too
    done = main("emit", out / "gains.yaml", "--out", again, "--format", "q15", "--prefix", "fan",
                "--schedule", fan_schedule)
    assert done.returncode == 0, done.stderr
    for name in ("fan.h", "fan.c"):
        assert (again / name).read_bytes() == (out / name).read_bytes(), name

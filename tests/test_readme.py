"""The README tells the truth: every command it shows runs, and every output
line it shows is in what the command really prints."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text()


def console_commands() -> list[tuple[str, list[str]]]:
    """(command, shown output lines) for each `$ gainloom ...` line in console blocks."""
    commands: list[tuple[str, list[str]]] = []
    for block in re.findall(r"```console\n(.*?)```", README, flags=re.S):
        for line in block.splitlines():
            if line.startswith("$ "):
                commands.append((line[2:], []))
            elif commands and line.strip() and line.strip() != "...":
                commands[-1][1].append(line)
    return commands


def setup_commands() -> list[str]:
    return re.findall(r"```sh\n(.*?)\n```", README, flags=re.S)


def test_readme_shows_the_two_setup_commands_and_ci_runs_the_second():
    install_and_run, install_and_test = setup_commands()[:2]
    assert "gainloom design schedules/" in install_and_run
    ci = (ROOT / ".ci" / "run").read_text()
    assert install_and_test in ci


@pytest.mark.slow
def test_every_readme_command_runs_and_prints_what_the_readme_shows(tmp_path):
    (tmp_path / "schedules").symlink_to(ROOT / "schedules")
    (tmp_path / "out").mkdir()
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    # The main job of the first set-up command, without the install part.
    main_job = setup_commands()[0].split(".venv/bin/", 2)[-1]
    commands = [(main_job, [])] + console_commands()
    assert len(commands) >= 8
    for command, shown in commands:
        command, _, expectation = command.partition("  # exits ")
        expected_code = int(expectation) if expectation else 0
        words = _split(command)
        assert words[0] == "gainloom"
        done = subprocess.run(
            [sys.executable, "-m", "gainloom", *words[1:]],
            cwd=tmp_path, capture_output=True, text=True, env=env, timeout=900,
        )
        assert done.returncode == expected_code, f"{command}\n{done.stdout}\n{done.stderr}"
        printed = {" ".join(line.split()) for line in done.stdout.splitlines()}
        for line in shown:
            assert " ".join(line.split()) in printed, f"{command}: README shows {line!r}, not printed"


def _split(command: str) -> list[str]:
    import shlex

    return shlex.split(command)


def test_readme_schedule_example_loads(tmp_path):
    import gainloom

    (block,) = re.findall(r"```yaml\n(.*?)```", README, flags=re.S)
    path = tmp_path / "glance.yaml"
    path.write_text(block)
    schedule = gainloom.load_schedule(path)
    assert schedule.grid_shape == (13,) and schedule.controller.structure == "pi"

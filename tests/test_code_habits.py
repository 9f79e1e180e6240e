"""The project's code habits hold on every run: ruff (lint) and mypy (types)
clean with the settings in pyproject.toml.

Both run here, inside the test command, so `.ci/run` runs them on every CI
run without a second command; both tools come with the ``test`` extra.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _run(*args: str, cwd: Path = ROOT) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", *args], cwd=cwd, capture_output=True, text=True, timeout=600)


def test_ruff_finds_nothing():
    done = _run("ruff", "check", "--no-cache", "src", "tests", "benchmarks", "examples")
    assert done.returncode == 0, done.stdout + done.stderr


def test_mypy_finds_nothing(tmp_path):
    done = _run("mypy", "--cache-dir", str(tmp_path / "mypy"))
    assert done.returncode == 0, done.stdout + done.stderr
    assert "Success" in done.stdout


def test_mypy_would_catch_a_type_error(tmp_path):
    # The check can fail: the same settings flag a wrong argument type in a new module.
    module = tmp_path / "wrong.py"
    module.write_text("def half(x: float) -> float:\n    return x / 2\n\n\nhalf('two')\n")
    done = _run("mypy", "--cache-dir", str(tmp_path / "mypy"), "--config-file", str(ROOT / "pyproject.toml"), str(module))
    assert done.returncode == 1 and "arg-type" in done.stdout

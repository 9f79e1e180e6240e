"""Shared fixtures: the invented schedules several test folders design.

Tests live in folders mirroring ``src/gainloom`` (``tests/lti`` for
``gainloom.lti`` and so on; whole-project checks at the top).  This file sits
at the top of ``tests/`` so pytest puts the folder on ``sys.path`` and every
test module can ``from cases import ...`` (``tests/cases.py``: the plain
values and builders behind these fixtures).
"""

from __future__ import annotations

import fcntl
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from cases import PASSING, UNSTABLE

#: The bundled demo schedules.
SCHEDULES = Path(__file__).resolve().parents[1] / "schedules"


@pytest.fixture
def fan_schedule(tmp_path: Path) -> Path:
    """The passing fan-speed schedule (``cases.PASSING``) as a file of its own."""
    path = tmp_path / "fan.yaml"
    path.write_text(PASSING)
    return path


@pytest.fixture
def unstable_schedule(tmp_path: Path) -> Path:
    """The schedule no PI can stabilise (``cases.UNSTABLE``) as a file of its own."""
    path = tmp_path / "beam.yaml"
    path.write_text(UNSTABLE)
    return path


@pytest.fixture(scope="session")
def servo_cascade_design(tmp_path_factory) -> tuple[subprocess.CompletedProcess, Path]:
    """``gainloom design schedules/servo_cascade.yaml --out DIR --quiet`` run once per test run.

    The design folder (gains files, C module, log) is read by the cascade
    job's tests, the cascade target tests and ``gainloom simulate`` on a
    cascade; designing it costs about half a minute, so it is made once,
    also across pytest-xdist workers (they share the session's base folder;
    the first one designs under a lock, the others read its record).
    Returns the finished process and the folder.
    """
    base = tmp_path_factory.getbasetemp()
    shared = base.parent if os.environ.get("PYTEST_XDIST_WORKER") else base
    out, record = shared / "servo_cascade_design", shared / "servo_cascade_design.json"
    with open(shared / "servo_cascade_design.lock", "w", encoding="utf-8") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        if not record.exists():
            env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
            done = subprocess.run([sys.executable, "-m", "gainloom", "design", str(SCHEDULES / "servo_cascade.yaml"),
                                   "--out", str(out), "--quiet"], capture_output=True, text=True, env=env,
                                  timeout=600, check=False)
            record.write_text(json.dumps({"args": done.args, "returncode": done.returncode, "stdout": done.stdout,
                                          "stderr": done.stderr}), encoding="utf-8")
    saved = json.loads(record.read_text(encoding="utf-8"))
    return subprocess.CompletedProcess(saved["args"], saved["returncode"], saved["stdout"], saved["stderr"]), out

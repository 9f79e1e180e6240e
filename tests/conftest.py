"""Shared fixtures: the invented schedules several test folders design.

Tests live in folders mirroring ``src/gainloom`` (``tests/lti`` for
``gainloom.lti`` and so on; whole-project checks at the top).  This file sits
at the top of ``tests/`` so pytest puts the folder on ``sys.path`` and every
test module can ``from cases import ...`` (``tests/cases.py``: the plain
values and builders behind these fixtures).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from cases import PASSING, UNSTABLE


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

"""docs/schedule-format.md documents every key and registry name the loader accepts."""

from __future__ import annotations

from pathlib import Path

import pytest

from gainloom import names
from gainloom.schedule.loader import TOP_LEVEL_KEYS
from gainloom.schedule.sections import CONTROLLER_KEYS, SPEC_KEYS

DOC = (Path(__file__).resolve().parents[2] / "docs" / "schedule-format.md").read_text(encoding="utf-8")

KEYS = (
    list(TOP_LEVEL_KEYS)
    + list(CONTROLLER_KEYS)
    + list(SPEC_KEYS)
    + ["overrides", "where", "set", "unit", "values", "start", "stop", "count", "table", "over", "x", "y"]
    + ["transfer_function", "numerator", "denominator", "zpk", "zeros", "poles", "gain", "re", "im"]
    + ["state_space", "A", "B", "C", "D", "dead_time", "period", "method", "delay", "prewarp"]
    + ["max_relative_step", "monotone", "between_points", "refine", "max_inserted"]
    + ["parameters", "samples", "space_filling", "seed", "prefix", "format", "damping", "range"]
    + ["crossover", "design", "distribution"]
)
REGISTRY_NAMES = (
    names.HOLD_METHODS
    + names.CONTROLLER_STRUCTURES
    + names.NUMBER_FORMATS
    + names.DESIGN_STRATEGIES
    + names.SWEEP_OBJECTIVES
    + names.CANCEL_TARGETS
    + names.TOLERANCE_SAMPLINGS
    + names.TOLERANCE_DESIGNS
    + names.TOLERANCE_DISTRIBUTIONS
    + names.MONOTONE_DIRECTIONS
)


@pytest.mark.parametrize("key", sorted(set(KEYS)))
def test_every_key_is_documented(key):
    # as a name in backticks, or written as a YAML key in an example or a `{key: ...}` form
    assert f"`{key}`" in DOC or f"{key}:" in DOC, key


@pytest.mark.parametrize("name", sorted(set(REGISTRY_NAMES)))
def test_every_registry_name_is_documented(name):
    assert name in DOC, name

"""The spec registry (``gainloom.spec_registry``) against the layers that read it."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from gainloom.design.analysis import judge
from gainloom.design.spec_limits import SpecLimits
from gainloom.schedule.sections import SPEC_KEYS
from gainloom.schedule.spec_values import SPEC_VALUE_KEYS
from gainloom.spec_registry import SPEC_ORDER, SPECS, spec_info


def test_names_are_unique_and_the_bound_is_the_one_the_name_says():
    assert len(set(SPEC_ORDER)) == len(SPECS)
    for spec in SPECS:
        if spec.name.startswith(("min_", "max_")):
            assert spec.bound == spec.name[:3], spec
        assert spec.better == ("higher" if spec.bound == "min" else "lower")
        assert spec.relation == (">=" if spec.bound == "min" else "<=")


def test_every_limit_is_a_spec_limits_field_and_every_stated_spec_has_a_reader():
    fields = {f.name for f in dataclasses.fields(SpecLimits)}
    assert all(spec.limit_key in fields for spec in SPECS if spec.limit_key is not None)
    # the loader reads the natural-frequency band as one key
    readers = {"min_natural_frequency", "max_natural_frequency"} | set(SPEC_KEYS) - {"natural_frequency"}
    assert set(SPEC_VALUE_KEYS) == readers


@pytest.mark.parametrize("spec", [s for s in SPECS if s.limit_key is not None], ids=lambda s: s.name)
def test_the_verdict_follows_the_kind_of_bound(spec):
    # one point exactly on the limit (holds), one on the wrong side (fails), one on the better side
    limit = 2.0
    better, worse = (3.0, 1.0) if spec.better == "higher" else (1.0, 3.0)
    nan = np.full(3, np.nan)
    limits = SpecLimits(**{f.name: (np.full(3, limit) if f.name == spec.limit_key else nan)
                           for f in dataclasses.fields(SpecLimits) if f.name != "poles"})
    values = {name: np.zeros(3) for name in SPEC_ORDER}
    values[spec.name] = np.array([limit, worse, better])
    verdict = judge(values, limits)
    assert verdict[spec.name].tolist() == [True, False, True]
    assert list(verdict) == list(SPEC_ORDER)


def test_unknown_name_is_a_key_error():
    with pytest.raises(KeyError):
        spec_info("min_happiness")

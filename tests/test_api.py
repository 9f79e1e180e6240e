"""The public API is pinned: adding or removing a name is a deliberate act."""

import gainloom

EXPECTED_PUBLIC_NAMES = {
    "__version__",
    "GainloomError",
    "InputError",
    "ScheduleError",
    "DesignError",
    "CodegenError",
    "Loop",
    "GainInterval",
    "SpecRegion",
    "stable_gain_intervals",
    "spec_gain_intervals",
    "region_crossings",
    "routh_array",
    "jury_test",
}


def test_public_names_are_pinned():
    assert set(gainloom.__all__) == EXPECTED_PUBLIC_NAMES
    for name in gainloom.__all__:
        assert hasattr(gainloom, name), name

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
    "closed_loop_poles",
    "Margins",
    "loop_margins",
    "LocusBranches",
    "trace_locus",
    "discretize",
    "discretize_loop",
}


def test_public_names_are_pinned():
    assert set(gainloom.__all__) == EXPECTED_PUBLIC_NAMES
    for name in gainloom.__all__:
        assert hasattr(gainloom, name), name

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
    "load_schedule",
    "Schedule",
    "LocusFacts",
    "locus_facts",
    "discretize",
    "closed_loop_poles",
    "Margins",
    "loop_margins",
    "design",
    "verify",
    "DesignResult",
    "VerifyResult",
    "read_gains",
    "write_gains",
    "LocusBranches",
    "trace_locus",
    "discretize_loop",
    "GainInterval",
    "SpecRegion",
    "stable_gain_intervals",
    "spec_gain_intervals",
    "routh_array",
    "jury_test",
}


def test_public_names_are_pinned():
    assert set(gainloom.__all__) == EXPECTED_PUBLIC_NAMES
    for name in gainloom.__all__:
        assert hasattr(gainloom, name), name

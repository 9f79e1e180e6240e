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
    "discretize",
    "discretize_loop",
    "closed_loop_poles",
    "Margins",
    "loop_margins",
    "emit_c",
    "check_generated_c",
    "HarnessResult",
    "design_table",
    "verify",
    "DesignResult",
    "VerifyResult",
    "read_gains",
    "write_gains",
    "LocusFacts",
    "locus_facts",
    "LocusBranches",
    "trace_locus",
    "GainInterval",
    "SpecRegion",
    "stable_gain_intervals",
    "spec_gain_intervals",
    "region_crossings",
    "routh_array",
    "jury_test",
    "run_scenario",
    "Scenario",
    "ScenarioSpecs",
    "PiecewiseLinear",
    "LoadStep",
    "Feedforward",
    "LimitStep",
    "SimulationResult",
    "check_quantisation",
    "QuantisationResult",
    "write_verification",
    "run_design_job",
    "JobResult",
    "Cascade",
    "load_cascade",
    "CascadeDesign",
    "design_cascade",
}


def test_public_names_are_pinned():
    assert set(gainloom.__all__) == EXPECTED_PUBLIC_NAMES
    for name in gainloom.__all__:
        assert hasattr(gainloom, name), name

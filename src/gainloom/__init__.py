"""gainloom: gain-scheduled controller design across operating points.

Public names are re-exported here; modules behind them are private to the
package layout and may move.
"""

from __future__ import annotations

from .codegen import HarnessResult, check_generated_c, emit_c
from .codegen.quantisation import QuantisationResult, check_quantisation
from .design.cascade import CascadeDesign, design_cascade
from .design.engine import design as design_table
from .design.engine import verify
from .design.gainsfile import read_gains, write_gains
from .design.results import DesignResult, VerifyResult
from .errors import CodegenError, DesignError, GainloomError, InputError, ScheduleError
from .job.design_job import JobResult, run_design_job
from .lti.closed_loop import closed_loop_poles
from .lti.discretize import discretize, discretize_loop
from .lti.facts import LocusFacts, locus_facts
from .lti.intervals import GainInterval, region_crossings, spec_gain_intervals, stable_gain_intervals
from .lti.loop import Loop
from .lti.margins import Margins, loop_margins
from .lti.regions import SpecRegion
from .lti.stability import jury_test, routh_array
from .lti.trace import LocusBranches, trace_locus
from .report import write_verification
from .schedule import Schedule, load_schedule
from .schedule.cascade import Cascade, load_cascade
from .simulation import Feedforward, LimitStep, LoadStep, PiecewiseLinear, Scenario, ScenarioSpecs, SimulationResult, run_scenario
from .version import __version__

__all__ = [
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
]

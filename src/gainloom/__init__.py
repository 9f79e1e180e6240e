"""gainloom: gain-scheduled controller design across operating points.

Public names are re-exported here; modules behind them are private to the
package layout and may move.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import CodegenError, DesignError, GainloomError, InputError, ScheduleError
from .lti.loop import Loop
from .schedule import Schedule, load_schedule
from .lti.discretize import discretize, discretize_loop
from .lti.closed_loop import closed_loop_poles
from .lti.margins import Margins, loop_margins
from .codegen import HarnessResult, check_generated_c, emit_c
from . import design  # the package is callable: gainloom.design(schedule)
from .design.engine import verify
from .design.results import DesignResult, VerifyResult
from .design.gainsfile import read_gains, write_gains
from .lti.facts import LocusFacts, locus_facts
from .lti.trace import LocusBranches, trace_locus
from .lti.intervals import GainInterval, region_crossings, spec_gain_intervals, stable_gain_intervals
from .lti.regions import SpecRegion
from .lti.stability import jury_test, routh_array
from .simulation import Feedforward, LimitStep, LoadStep, PiecewiseLinear, Scenario, ScenarioSpecs, SimulationResult, run_scenario
from .codegen.quantisation import QuantisationResult, check_quantisation
from .report import write_verification
from .report.run import JobResult, run_design_job
from .schedule.cascade import Cascade, load_cascade
from .design.cascade import CascadeDesign, design_cascade

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
    "design",
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

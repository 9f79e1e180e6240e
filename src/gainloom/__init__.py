"""gainloom: gain-scheduled controller design across operating points.

Public names are re-exported here; modules behind them are private to the
package layout and may move.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import CodegenError, DesignError, GainloomError, InputError, ScheduleError
from .lti.loop import Loop
from .schedule import Schedule, load_schedule
from .lti.discretize import discretize
from .lti.closed_loop import closed_loop_poles
from .lti.margins import Margins, loop_margins
from . import design  # the package is callable: gainloom.design(schedule)
from .design.engine import verify
from .design.results import DesignResult, VerifyResult
from .design.gainsfile import read_gains, write_gains
from .lti.discretize import discretize, discretize_loop
from .lti.intervals import GainInterval, spec_gain_intervals, stable_gain_intervals
from .lti.regions import SpecRegion
from .lti.stability import jury_test, routh_array
from .lti.trace import LocusBranches, trace_locus
from .lti.facts import LocusFacts, locus_facts

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
]

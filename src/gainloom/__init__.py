"""gainloom: gain-scheduled controller design across operating points.

Public names are re-exported here; modules behind them are private to the
package layout and may move.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import CodegenError, DesignError, GainloomError, InputError, ScheduleError
from .lti.loop import Loop
from .lti.closed_loop import closed_loop_poles
from .lti.margins import Margins, loop_margins
from .lti.trace import LocusBranches, trace_locus
from .lti.discretize import discretize, discretize_loop

__all__ = [
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
]

"""gainloom: gain-scheduled controller design across operating points.

Public names are re-exported here; modules behind them are private to the
package layout and may move.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import CodegenError, DesignError, GainloomError, InputError, ScheduleError
from .lti.loop import Loop
from .lti.intervals import GainInterval, region_crossings, spec_gain_intervals, stable_gain_intervals
from .lti.regions import SpecRegion
from .lti.stability import jury_test, routh_array

__all__ = [
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
]

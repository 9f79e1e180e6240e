"""schedule layer: load and validate schedule YAML, safe expressions, the
operating-point grid, parameters, and the plant per point (a batched
:class:`gainloom.lti.loop.Loop`).  Format reference: docs/schedule-format.md.
"""

from .loader import load_schedule
from .model import (
    Axis,
    CodegenSection,
    ControllerSection,
    PointModels,
    Sampling,
    Schedule,
    SpecOverride,
    SpecSection,
    Sweep,
    TableChecks,
    Target,
    Tolerances,
)
from .spec_values import overshoot_to_damping

__all__ = [
    "load_schedule",
    "Schedule",
    "Axis",
    "Sampling",
    "ControllerSection",
    "Target",
    "Sweep",
    "SpecSection",
    "SpecOverride",
    "TableChecks",
    "Tolerances",
    "CodegenSection",
    "PointModels",
    "overshoot_to_damping",
]

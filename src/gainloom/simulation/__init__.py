"""Scheduled time-domain check: the closed loop run as the firmware runs it.

Sits between codegen and report: it may import names, errors, lti, schedule,
design and codegen; only report and cli import it.
"""

from __future__ import annotations

from .controller import SIMULATION_FORMATS
from .metrics import Instability, LoadResponse, SimulationMetrics
from .result import REALISATION, SimulationResult, SpecCheck
from .run import run_scenario
from .scenario import LoadStep, PiecewiseLinear, Scenario, ScenarioSpecs
from .signals import Feedforward, LimitStep

__all__ = [
    "REALISATION",
    "SIMULATION_FORMATS",
    "Feedforward",
    "Instability",
    "LimitStep",
    "LoadResponse",
    "LoadStep",
    "PiecewiseLinear",
    "Scenario",
    "ScenarioSpecs",
    "SimulationMetrics",
    "SimulationResult",
    "SpecCheck",
    "run_scenario",
]

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

__all__ = [
    "run_scenario",
    "Scenario",
    "ScenarioSpecs",
    "PiecewiseLinear",
    "LoadStep",
    "SimulationResult",
    "SimulationMetrics",
    "SpecCheck",
    "Instability",
    "LoadResponse",
    "SIMULATION_FORMATS",
    "REALISATION",
]

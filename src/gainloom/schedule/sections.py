"""Readers for the sections that hold settings, not plant data:
``controller``, ``specs``, ``table``, ``tolerances`` and ``codegen``.

Each takes the section's :class:`~gainloom.schedule.nodes.Node` and returns
the frozen dataclass of :mod:`gainloom.schedule.model`, raising
:class:`~gainloom.errors.ScheduleError` at the offending key.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

from .. import limits, names
from ..c_names import prefix_problem
from .expressions import parse_expression
from .filters import read_filters
from .model import (
    CodegenSection,
    ControllerSection,
    SpecOverride,
    SpecSection,
    Sweep,
    TableChecks,
    Target,
    Tolerances,
)
from .nodes import Node

__all__ = [
    "SPEC_KEYS",
    "read_codegen",
    "read_controller",
    "read_specs",
    "read_table_checks",
    "read_tolerances",
]

CONTROLLER_KEYS = (
    "structure",
    "strategy",
    "objective",
    "zero_on",
    "target",
    "sweep",
    "derivative_filter",
    "output_limits",
    "compare_continuous",
    "filters",
)

#: Default controller-zero sweep of shape-sweep: location in z and count.
DEFAULT_SWEEP = Sweep(range=(0.5, 0.999), count=60)



def _positive(node: Node, what: str) -> float:
    value = node.number()
    if value <= 0:
        raise node.error(f"{what} must be positive; found {value:g}")
    return value


def _in_range(node: Node, what: str, low: float, high: float, *, open_low: bool = True, open_high: bool = False) -> float:
    value = node.number()
    too_low = value <= low if open_low else value < low
    too_high = value >= high if open_high else value > high
    if too_low or too_high:
        left = "(" if open_low else "["
        right = ")" if open_high else "]"
        raise node.error(f"{what} must be in {left}{low:g}, {high:g}{right}; found {value:g}")
    return value


def _pair(node: Node, what: str, allow_null: bool = False) -> tuple[float | None, float | None]:
    items = node.sequence()
    if len(items) != 2:
        raise node.error(f"{what} must be a list of two numbers [low, high]; found {len(items)} entries")
    values = [None if (allow_null and item.is_null) else item.number() for item in items]
    if all(v is not None for v in values) and not values[0] < values[1]:
        raise node.error(f"{what} must be [low, high] with low < high; found [{values[0]:g}, {values[1]:g}]")
    return values[0], values[1]


def read_controller(node: Node) -> ControllerSection:
    """Read the ``controller`` section (structure, strategy, output limits required)."""
    keys = node.mapping(CONTROLLER_KEYS, required=("structure", "strategy", "output_limits"))
    structure = keys["structure"].choice("controller structure", names.CONTROLLER_STRUCTURES)
    strategy = keys["strategy"].choice("design strategy", names.DESIGN_STRATEGIES)

    if structure == "p" and strategy in ("pole-cancel", "shape-sweep"):
        raise keys["strategy"].error(
            f"strategy {strategy!r} places a controller zero, and structure 'p' has none; "
            "use pi, pd, pid, lead, lag or leadlag, or strategy 'dominant-pair'"
        )

    if strategy in names.TUNING_RULES and structure != "pi":
        raise keys["strategy"].error(
            f"strategy {strategy!r} is a published PI tuning rule; structure is {structure!r}, use 'pi'"
        )

    def only_for(key: str, allowed: bool, condition: str) -> None:
        if key in keys and not allowed:
            raise keys[key].error(f"{key} applies only when {condition}; strategy is {strategy!r}")

    only_for("objective", strategy == "shape-sweep", "strategy is 'shape-sweep'")
    only_for("zero_on", strategy == "pole-cancel", "strategy is 'pole-cancel'")
    only_for("sweep", strategy == "shape-sweep", "strategy is 'shape-sweep'")
    objective = zero_on = None
    sweep = None
    if strategy == "shape-sweep":
        objective = keys["objective"].choice("sweep objective", names.SWEEP_OBJECTIVES) if "objective" in keys else "fastest"
        sweep = _read_sweep(keys["sweep"]) if "sweep" in keys else DEFAULT_SWEEP
    if objective in names.CROSSOVER_OBJECTIVES and "sweep" in keys:
        raise keys["sweep"].error(
            f"sweep does not apply to objective {objective!r}: it searches the whole controller space"
        )
    if strategy == "pole-cancel":
        zero_on = keys["zero_on"].choice("cancel target", names.CANCEL_TARGETS) if "zero_on" in keys else "slowest"
    needs_target = strategy == "dominant-pair" or objective == "nearest-target"
    target = None
    if needs_target:
        if "target" not in keys:
            raise node.error(
                f"missing required key 'target' ({{damping, natural_frequency}}) for "
                f"{'strategy dominant-pair' if strategy == 'dominant-pair' else 'objective nearest-target'}",
                path=node.child_path("target"),
            )
        target = _read_target(keys["target"], allow_crossover=objective == "nearest-target")
    elif "target" in keys:
        raise keys["target"].error("target applies only to strategy 'dominant-pair' or objective 'nearest-target'")
    derivative_filter = None
    if structure in ("pd", "pid"):
        if "derivative_filter" not in keys:
            raise node.error(
                f"missing required key 'derivative_filter' (filter time constant in s) for structure {structure!r}",
                path=node.child_path("derivative_filter"),
            )
        derivative_filter = _positive(keys["derivative_filter"], "derivative filter time constant")
    elif "derivative_filter" in keys:
        raise keys["derivative_filter"].error(f"derivative_filter applies only to pd and pid, not {structure!r}")
    low, high = _output_limits(keys["output_limits"])
    compare = keys["compare_continuous"].boolean() if "compare_continuous" in keys else False
    if compare and strategy in names.TUNING_RULES:
        raise keys["compare_continuous"].error(
            f"compare_continuous applies to pole-cancel, dominant-pair and shape-sweep; strategy {strategy!r} "
            "is a tuning rule whose continuous form is its definition"
        )
    return ControllerSection(
        structure=structure,
        strategy=strategy,
        output_limits=(low, high),
        objective=objective,
        zero_on=zero_on,
        target=target,
        sweep=sweep,
        derivative_filter=derivative_filter,
        compare_continuous=compare,
        filters=read_filters(keys["filters"]) if "filters" in keys else (),
    )


def _output_limits(node: Node) -> tuple:
    """``[low, high]``: numbers, or expressions of variables and parameters
    (names are checked, and values evaluated, by the loader)."""
    items = node.sequence()
    if len(items) == 2 and not any(item.is_scalar and isinstance(item.scalar(), str) for item in items):
        return _pair(node, "output_limits")
    if len(items) != 2:
        raise node.error(f"output_limits must be a list of two entries [low, high]; found {len(items)} entries")
    return tuple(parse_expression(item, f"{which} output limit") for which, item in zip(("lower", "upper"), items))


def _read_target(node: Node, allow_crossover: bool) -> Target:
    keys = node.mapping(("damping", "natural_frequency", "crossover"))
    if "crossover" in keys:
        if not allow_crossover:
            raise keys["crossover"].error("target crossover applies only to objective 'nearest-target'")
        if "damping" in keys or "natural_frequency" in keys:
            raise node.error("target is either {crossover} or {damping, natural_frequency}, not both")
        return Target(crossover=_positive(keys["crossover"], "target crossover (rad/s)"))
    for key in ("damping", "natural_frequency"):
        if key not in keys:
            raise node.error(
                f"missing required key {key!r} of target ({{damping, natural_frequency}}"
                + (" or {crossover}" if allow_crossover else "") + ")",
                path=node.child_path(key),
            )
    damping = _in_range(keys["damping"], "target damping ratio", 0.0, 1.0)
    frequency = _positive(keys["natural_frequency"], "target natural frequency (rad/s)")
    return Target(damping=damping, natural_frequency=frequency)


def _read_sweep(node: Node) -> Sweep:
    keys = node.mapping(("range", "count"))
    low, high = _pair(keys["range"], "sweep range") if "range" in keys else DEFAULT_SWEEP.range
    if "range" in keys and not (-1.0 < low and high < 1.0):
        raise keys["range"].error(
            f"sweep range is a controller-zero location in z and must lie inside (-1, 1); found [{low:g}, {high:g}]"
        )
    count = DEFAULT_SWEEP.count
    if "count" in keys:
        count = keys["count"].count("sweep count", 2, limits.MAX_SWEEP_COUNT)
    return Sweep(range=(low, high), count=count)


# -- specs ----------------------------------------------------------------------

def _read_natural_frequency(node: Node) -> tuple[float | None, float | None]:
    low, high = _pair(node, "natural_frequency [min, max] (rad/s)", allow_null=True)
    for value in (low, high):
        if value is not None and value <= 0:
            raise node.error(f"natural frequency bounds must be positive (rad/s); found {value:g}")
    return low, high


def _read_system_type(node: Node) -> int:
    value = node.integer()
    if value not in (0, 1):
        raise node.error(f"system_type must be 0 (finite step error) or 1 (zero step error); found {value}")
    return value


#: Spec key -> reader of its value (shared by specs and specs.overrides[].set).
SPEC_KEYS: dict[str, Callable[[Node], Any]] = {
    "min_damping": lambda n: _in_range(n, "min_damping", 0.0, 1.0),
    "max_overshoot": lambda n: _in_range(n, "max_overshoot (percent)", 0.0, 100.0, open_high=True),
    "max_settling_time": lambda n: _positive(n, "max_settling_time (s)"),
    "natural_frequency": _read_natural_frequency,
    "max_pole_radius": lambda n: _in_range(n, "max_pole_radius", 0.0, 1.0),
    "min_gain_margin": lambda n: _positive(n, "min_gain_margin (dB)"),
    "min_phase_margin": lambda n: _in_range(n, "min_phase_margin (degrees)", 0.0, 180.0, open_high=True),
    "min_delay_margin": lambda n: _positive(n, "min_delay_margin (s)"),
    "max_sensitivity_peak": lambda n: _in_range(n, "max_sensitivity_peak", 1.0, float("inf"), open_high=True),
    "system_type": _read_system_type,
    "max_gain": lambda n: _positive(n, "max_gain"),
    "min_crossover": lambda n: _positive(n, "min_crossover (rad/s)"),
    "max_crossover": lambda n: _positive(n, "max_crossover (rad/s)"),
    "min_bandwidth": lambda n: _positive(n, "min_bandwidth (rad/s)"),
}

#: Keys of the ``specs`` section besides the spec values: ``poles`` (which
#: closed-loop poles the pole-region specs judge) and ``overrides``.
SPEC_SECTION_KEYS: tuple[str, ...] = ("poles", "overrides")


def _check_crossover_band(values: dict[str, Any], keys: dict[str, Node]) -> None:
    """Refuse ``min_crossover > max_crossover`` written in the same mapping (located at ``max_crossover``)."""
    low, high = values.get("min_crossover"), values.get("max_crossover")
    if low is not None and high is not None and low > high:
        raise keys["max_crossover"].error(
            f"min_crossover ({low:g} rad/s) is above max_crossover ({high:g} rad/s): no loop can meet both"
        )


def read_specs(node: Node | None, axis_names: tuple[str, ...]) -> SpecSection:
    """Read the optional ``specs`` section; overrides name scheduling variables."""
    if node is None or node.is_null:
        return SpecSection()
    keys = node.mapping(tuple(SPEC_KEYS) + SPEC_SECTION_KEYS)
    values: dict[str, Any] = {
        key: None if child.is_null else SPEC_KEYS[key](child)
        for key, child in keys.items() if key not in SPEC_SECTION_KEYS
    }
    _check_crossover_band(values, keys)
    if "poles" in keys:
        values["poles"] = keys["poles"].choice("pole selection", names.POLE_SELECTIONS)
    overrides: list[SpecOverride] = []
    if "overrides" in keys:
        for item in keys["overrides"].sequence():
            entry = item.mapping(("where", "set"), required=("where", "set"))
            where: dict[str, tuple[float, float]] = {}
            for name, range_node in entry["where"].mapping().items():
                if name not in axis_names:
                    raise range_node.error(names.unknown_name_message("scheduling variable", name, axis_names))
                where[name] = _pair_closed(range_node, name)
            settings = entry["set"].mapping(tuple(SPEC_KEYS))
            if not settings:
                raise entry["set"].error("set names no spec")
            _check_crossover_band({k: None if v.is_null else SPEC_KEYS[k](v) for k, v in settings.items()}, settings)
            overrides.append(
                SpecOverride(
                    where=where,
                    set={k: None if v.is_null else SPEC_KEYS[k](v) for k, v in settings.items()},
                )
            )
    return SpecSection(**values, overrides=tuple(overrides))


def _pair_closed(node: Node, name: str) -> tuple[float, float]:
    items = node.sequence()
    if len(items) != 2:
        raise node.error(f"region of {name!r} must be a closed range [low, high]; found {len(items)} entries")
    low, high = items[0].number(), items[1].number()
    if low > high:
        raise node.error(f"region of {name!r} must be [low, high] with low <= high; found [{low:g}, {high:g}]")
    return low, high


# -- table, tolerances, codegen -------------------------------------------------

def read_table_checks(node: Node | None, structure: str) -> TableChecks:
    """Read the optional ``table`` section; monotone names the structure's coefficients."""
    if node is None or node.is_null:
        return TableChecks()
    keys = node.mapping(("max_relative_step", "monotone", "between_points", "refine"))
    step = None
    if "max_relative_step" in keys and not keys["max_relative_step"].is_null:
        step = _positive(keys["max_relative_step"], "max_relative_step")
    monotone: dict[str, str] = {}
    if "monotone" in keys:
        coefficients = names.CONTROLLER_COEFFICIENTS[structure]
        for name, direction in keys["monotone"].mapping().items():
            if name not in coefficients:
                raise Node(direction.raw, direction.path, direction.file).error(
                    names.unknown_name_message(f"{structure} coefficient", name, coefficients)
                )
            monotone[name] = direction.choice("monotone direction", names.MONOTONE_DIRECTIONS)
    between = 3
    if "between_points" in keys:
        between = keys["between_points"].count("between_points", 0, limits.MAX_BETWEEN_POINTS)
    inserted = 0
    if "refine" in keys:
        refine = keys["refine"].mapping(("max_inserted",), required=("max_inserted",))
        inserted = refine["max_inserted"].count("max_inserted", 0, limits.MAX_REFINE_INSERTED)
    return TableChecks(max_relative_step=step, monotone=monotone, between_points=between, refine_max_inserted=inserted)


def read_tolerances(node: Node | None, independent: dict[str, bool]) -> Tolerances:
    """Read the optional ``tolerances`` section.

    Parameters
    ----------
    independent : dict of str to bool
        Every parameter name -> whether it is independent (names no other
        parameter).  Tolerances apply only to independent parameters.
    """
    if node is None or node.is_null:
        return Tolerances()
    keys = node.mapping(("parameters", "samples", "design", "distribution", "seed"))
    parameters: dict[str, tuple[float, float]] = {}
    if "parameters" in keys:
        for name, value in keys["parameters"].mapping().items():
            if name not in independent:
                raise value.error(names.unknown_name_message("parameter", name, tuple(independent)))
            if not independent[name]:
                raise value.error(
                    f"tolerance on {name!r} refused: it is computed from other parameters; "
                    "put the tolerance on the parameters it depends on"
                )
            if value.is_sequence:
                items = value.sequence()
                if len(items) != 2:
                    raise value.error(f"tolerance must be a number or [minus, plus]; found {len(items)} entries")
                minus, plus = items[0].number(), items[1].number()
                if minus > 0 or plus < 0:
                    raise value.error(
                        f"tolerance [minus, plus] is written [-0.1, 0.05] (minus <= 0 <= plus); found [{minus:g}, {plus:g}]"
                    )
                minus = -minus
            else:
                minus = plus = value.number()
                if minus < 0:
                    raise value.error(f"symmetric tolerance must be 0 or more; found {minus:g}")
            if minus >= 1:
                raise value.error(f"relative tolerance below nominal must be less than 1 (100 %); found {minus:g}")
            parameters[name] = (minus, plus)
    samples: str | tuple[int, int] = "corners"
    draws: int | None = None
    if "samples" in keys:
        sample_node = keys["samples"]
        if sample_node.kind in ("an integer", "a number"):
            draws = sample_node.count("number of random draws (samples)", 1, limits.MAX_STUDY_DRAWS)
        elif sample_node.is_mapping:
            entry = sample_node.mapping(("space_filling", "seed"), required=("space_filling",))
            count = entry["space_filling"].count("space_filling sample count", 1, limits.MAX_TOLERANCE_SAMPLES)
            seed = entry["seed"].integer() if "seed" in entry else 0
            if seed < 0:
                raise entry["seed"].error(f"seed must be 0 or more; found {seed}")
            samples = (count, seed)
        else:
            samples = sample_node.choice("tolerance sampling", ("corners",))
    design = keys["design"].choice("tolerance design", names.TOLERANCE_DESIGNS) if "design" in keys else "check"
    distribution, seed = _study_keys(keys, draws, parameters)
    return Tolerances(parameters=parameters, samples=samples, design=design, draws=draws,
                      distribution=distribution, seed=seed)


#: Below this relative tolerance under nominal a normal draw (tolerance =
#: 3 sigma, clipped at 6 sigma) keeps every parameter positive: 6 sigma = 2 x minus.
NORMAL_MINUS_LIMIT = 0.5


def _study_keys(keys: dict[str, Node], draws: int | None, parameters: dict[str, tuple[float, float]]) -> tuple[str, int]:
    """``distribution`` and ``seed`` of the statistical study (``samples: N`` only)."""
    for key in ("distribution", "seed"):
        if key in keys and draws is None:
            raise keys[key].error(
                f"{key} applies to random draws for the statistical study: write samples as a number of draws, "
                "e.g. samples: 10000 (space_filling takes its own seed)"
            )
    distribution = keys["distribution"].choice("tolerance distribution", names.TOLERANCE_DISTRIBUTIONS) \
        if "distribution" in keys else "uniform"
    seed = keys["seed"].integer() if "seed" in keys else 0
    if seed < 0:
        raise keys["seed"].error(f"seed must be 0 or more; found {seed}")
    if distribution == "normal":
        for name, (minus, _plus) in parameters.items():
            if minus >= NORMAL_MINUS_LIMIT:
                raise keys["distribution"].error(
                    f"normal draws take the tolerance as 3 sigma and reach 6 sigma below nominal; {name!r} has "
                    f"{minus:g} below nominal, which could draw a value at or below 0: keep it under "
                    f"{NORMAL_MINUS_LIMIT:g} or use distribution: uniform"
                )
    return distribution, seed


def read_codegen(node: Node | None, schedule_name: str, name_node: Node) -> CodegenSection:
    """Read the optional ``codegen`` section (prefix defaults to the schedule name, format to float32)."""
    keys = (
        {}
        if node is None or node.is_null
        else node.mapping(("prefix", "format", "error_full_scale", "output_full_scale"))
    )
    if "prefix" in keys:
        prefix_node = keys["prefix"]
        prefix = prefix_node.text()
    else:
        prefix_node = name_node
        prefix = re.sub(r"[^A-Za-z0-9]+", "_", schedule_name).strip("_")
    problem = prefix_problem(prefix)
    if problem:
        origin = "" if "prefix" in keys else " (derived from the schedule name; set codegen.prefix)"
        raise prefix_node.error(f"C {problem}{origin}")
    number_format = keys["format"].choice("number format", names.NUMBER_FORMATS) if "format" in keys else "float32"
    scales = {
        key: _positive(keys[key], key.replace("_", " ")) if key in keys else None
        for key in ("error_full_scale", "output_full_scale")
    }
    return CodegenSection(prefix=prefix, format=number_format, **scales)

"""Load and validate a schedule file: :func:`load_schedule`.

The file is read as bytes (hashed for provenance), composed with the safe YAML
loader to keep line/column marks, checked key by key, and the plant family is
evaluated on the whole operating-point grid once so that any non-finite or
inconsistent value is reported at load time with the point that caused it.
"""

from __future__ import annotations

import ast
import hashlib
import keyword
import re
from dataclasses import replace
from pathlib import Path

import numpy as np

from .. import limits, names
from ..c_names import comment_text_problem
from ..errors import ScheduleError
from ..inputs import read_input_file
from ..lti.polynomials import batched_roots
from .expressions import CONSTANTS, FUNCTIONS, Expression, parse_expression
from .family import (
    SAMPLE_PERIOD_NAME,
    Family,
    Pair,
    ParameterDef,
    PlantRecipe,
    TableDef,
    describe_point,
)
from .filters import check_filter_names, evaluate_filters
from .measured import read_measured
from .model import Axis, CodegenSection, Sampling, Schedule
from .nodes import Node, compose_text
from .sections import (
    read_codegen,
    read_controller,
    read_specs,
    read_table_checks,
    read_tolerances,
)

__all__ = ["SLOW_SAMPLING_LIMIT", "TOP_LEVEL_KEYS", "build_schedule", "load_schedule", "read_schedule_root"]

#: Keys of the schedule file, in the order the docs describe them.
TOP_LEVEL_KEYS: tuple[str, ...] = (
    "name",
    "description",
    "variables",
    "parameters",
    "plant",
    "sampling",
    "controller",
    "specs",
    "table",
    "tolerances",
    "codegen",
)
REQUIRED_KEYS = ("name", "variables", "plant", "sampling", "controller")

#: Warn when the plant's fastest pole magnitude times the sample period
#: exceeds this (rad).  Common practice, no source: sample several times
#: faster than the fastest dynamics worth controlling.
SLOW_SAMPLING_LIMIT = 0.5

_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_-]*\Z")
_IDENTIFIER = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")
_RESERVED = {**{f: "a function" for f in FUNCTIONS}, **{c: "a constant" for c in CONSTANTS},
             SAMPLE_PERIOD_NAME: "the sample period"}
_TS_ONLY = {SAMPLE_PERIOD_NAME: "the sample period 'ts' is available only in sampling.delay and plant.dead_time"}
_MAX_AXES = 2


def load_schedule(path: str | Path) -> Schedule:
    """Load, validate and evaluate a schedule file.

    Parameters
    ----------
    path : str or Path
        The YAML schedule (format: ``docs/schedule-format.md``).

    Returns
    -------
    Schedule

    Raises
    ------
    ScheduleError
        One message naming the file, line, column and key path of the first
        problem found.
    """
    file, data, root = read_schedule_root(path)
    if root.is_mapping and "loops" in {str(k.value) for k, _ in root.raw.value}:
        raise ScheduleError(
            "this file describes a cascade (top-level key 'loops'); load it with gainloom.load_cascade "
            "(gainloom design and inspect read both forms; docs/cascade.md)", file=file,
        )
    keys = root.mapping(TOP_LEVEL_KEYS, required=REQUIRED_KEYS)
    return build_schedule(keys, file=file, sha256=hashlib.sha256(data).hexdigest())


def read_schedule_root(path: str | Path) -> tuple[str, bytes, Node]:
    """Read a schedule file and compose its YAML root node.

    Returns
    -------
    file : str
        The path as given, for messages.
    data : bytes
        The file's bytes (hashed for provenance).
    root : Node
        The composed root (not yet checked to be a mapping).

    Raises
    ------
    ScheduleError
        Not UTF-8, not YAML, or empty.
    """
    file = str(path)
    data = read_input_file(path, "schedule file", limits.MAX_SCHEDULE_BYTES)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as error:
        raise ScheduleError(f"schedule file is not UTF-8 text (byte {error.start})", file=file) from None
    root = compose_text(text, file)
    if root is None:
        raise ScheduleError(
            f"schedule file is empty; expected a mapping with keys {', '.join(REQUIRED_KEYS)}", file=file
        )
    return file, data, root


def build_schedule(
    keys: dict[str, Node], *, file: str, sha256: str, codegen: CodegenSection | None = None,
    description: str | None = None,
) -> Schedule:
    """Validate and evaluate one loop from its checked top-level keys.

    Parameters
    ----------
    keys : dict of str to Node
        The loop's keys (``TOP_LEVEL_KEYS``; a cascade's loop entry uses the
        same ones below ``loops[i]``).
    file, sha256 : str
        Path of the file (for messages) and SHA-256 of its bytes.
    codegen : CodegenSection, optional
        The loop's code-generation section when the caller made it (a
        cascade loop's prefix comes from the cascade); read from
        ``keys["codegen"]`` otherwise.
    description : str, optional
        Used when the keys carry none (a cascade loop takes the cascade's).

    Returns
    -------
    Schedule
    """
    name = keys["name"].text()
    if not _NAME.match(name):
        raise keys["name"].error(
            f"schedule name {name!r} must start with a letter and use only letters, digits, '_' and '-'"
        )
    if "description" in keys and not keys["description"].is_null:
        description = keys["description"].text()
    description = description or ""

    axes = _read_variables(keys["variables"])
    axis_names = tuple(axis.name for axis in axes)
    parameters = _read_parameters(keys.get("parameters"), axis_names)
    known = {a: "variables" for a in axis_names} | {p.name: "parameters" for p in parameters}
    points = _grid(axes)
    plant = _read_plant(keys["plant"], known, axes, points)
    method, period, delay, prewarp = _read_sampling(keys["sampling"], known)
    if plant.measured is not None:
        _check_measured_use(keys, method)

    family = Family(
        file=file, axes=axes, parameters=parameters, plant=plant, period=period, delay=delay, method=method,
        prewarp=prewarp,
    )
    models = family.evaluate(points)
    prewarp_value = None
    if prewarp is not None:
        values = prewarp.evaluate({**{a.name: points[:, i] for i, a in enumerate(axes)}, **models.parameters},
                                  points.shape[0])
        if np.ptp(values) > 1e-12 * np.max(np.abs(values)):
            raise prewarp.node.error("prewarp frequency must be one value for the whole grid (rad/s)")
        prewarp_value = float(values[0])

    controller = _resolve_output_limits(read_controller(keys["controller"]), family, points, models.parameters,
                                        known)
    check_filter_names(controller.filters, known, _TS_ONLY)
    evaluate_filters(family, controller.filters, points, models.parameters, models.plant.den, models.sample_period)
    specs = read_specs(keys.get("specs"), axis_names)
    table_checks = read_table_checks(keys.get("table"), controller.structure)
    tolerances = read_tolerances(keys.get("tolerances"), {p.name: p.independent for p in parameters})
    if codegen is None:
        codegen = read_codegen(keys.get("codegen"), name, keys["name"])
    _check_workload(keys, axes, table_checks, tolerances)
    low, high = family.output_limits(controller.output_limits, points, models.parameters)
    _check_full_scale(keys, (float(low.min()), float(high.max())), codegen.output_full_scale)

    for array in (points, models.sample_period, models.delay, *models.parameters.values()):
        array.setflags(write=False)  # the Schedule is frozen; so are its arrays
    sampling = Sampling(period=models.sample_period, method=method, delay=models.delay, prewarp=prewarp_value)
    return Schedule(
        path=file,
        sha256=sha256,
        name=name,
        description=description,
        axes=axes,
        points=points,
        grid_shape=tuple(axis.values.size for axis in axes),
        parameters=models.parameters,
        plant=models.plant,
        sampling=sampling,
        controller=controller,
        specs=specs,
        table_checks=table_checks,
        tolerances=tolerances,
        codegen=codegen,
        warnings=tuple(_warnings(family, models)),
        family=family,
    )


def _grid(axes: tuple[Axis, ...]) -> np.ndarray:
    mesh = np.meshgrid(*[axis.values for axis in axes], indexing="ij")
    return np.stack([m.reshape(-1) for m in mesh], axis=1)


def _identifier(node: Node, what: str, taken: dict[str, str]) -> str:
    name = node.text()
    if not _IDENTIFIER.match(name) or keyword.iskeyword(name):
        raise node.error(f"{what} name {name!r} must be an identifier (letters, digits, '_'; not a Python keyword)")
    if name in _RESERVED:
        raise node.error(f"{what} name {name!r} is reserved ({_RESERVED[name]} in expressions)")
    if name in taken:
        raise node.error(f"{what} name {name!r} is already used by {taken[name]}")
    return name


def _read_variables(node: Node) -> tuple[Axis, ...]:
    items = node.sequence(min_length=1, what="scheduling variables")
    if len(items) > _MAX_AXES:
        raise node.error(f"at most {_MAX_AXES} scheduling variables are supported; found {len(items)}")
    axes: list[Axis] = []
    taken: dict[str, str] = {}
    for item in items:
        keys = item.mapping(("name", "unit", "values"), required=("name", "values"))
        name = _identifier(keys["name"], "variable", taken)
        taken[name] = "a scheduling variable"
        unit = "" if "unit" not in keys or keys["unit"].is_null else str(keys["unit"].scalar())
        problem = comment_text_problem(unit)  # the unit is written into the generated C
        if problem:
            raise keys["unit"].error(f"unit {problem}; it cannot go into the generated C")
        axes.append(Axis(name=name, unit=unit, values=_read_grid_values(keys["values"], name)))
    total = int(np.prod([axis.values.size for axis in axes]))
    if total > limits.MAX_OPERATING_POINTS:
        sizes = " x ".join(str(axis.values.size) for axis in axes)
        raise node.error(
            f"the grid has {sizes} = {total:,} operating points; at most {limits.MAX_OPERATING_POINTS:,} are "
            "accepted (limits in docs/schedule-format.md)"
        )
    return tuple(axes)


def _read_grid_values(node: Node, name: str) -> np.ndarray:
    if node.is_mapping:
        keys = node.mapping(("start", "stop", "count"), required=("start", "stop", "count"))
        start, stop = keys["start"].number(), keys["stop"].number()
        count = keys["count"].count(f"value count of the grid of {name!r}", 2, limits.MAX_OPERATING_POINTS)
        if not stop > start:
            raise keys["stop"].error(f"grid of {name!r} must increase: stop {stop:g} is not above start {start:g}")
        values = np.linspace(start, stop, count)
    else:
        items = node.sequence()
        if len(items) < 2:
            raise node.error(f"grid of {name!r} needs at least 2 values (a schedule over one point is a plain design); found {len(items)}")
        values = np.array([item.number() for item in items])
        steps = np.diff(values)
        if np.any(steps <= 0):
            index = int(np.flatnonzero(steps <= 0)[0]) + 1
            raise items[index].error(
                f"grid of {name!r} must be strictly increasing; value {values[index]:g} follows {values[index - 1]:g}"
            )
    values.setflags(write=False)
    return values


def _read_parameters(node: Node | None, axis_names: tuple[str, ...]) -> tuple[ParameterDef, ...]:
    if node is None or node.is_null:
        return ()
    entries = node.mapping()
    taken = {a: "a scheduling variable" for a in axis_names}
    for name, value in entries.items():
        key_node = Node(_key_raw(node, name), value.path, value.file)
        _identifier(key_node, "parameter", taken)
    known = {a: "variables" for a in axis_names} | {p: "parameters" for p in entries}
    defs: dict[str, ParameterDef] = {}
    for name, value in entries.items():
        if value.is_mapping:
            table = _read_table(value, name, known)
            depends = frozenset({table.over} & set(entries))
            defs[name] = ParameterDef(name, value, None, table, depends)
        else:
            expression = parse_expression(value, f"parameter {name!r}")
            expression.check_names(known, _TS_ONLY)
            depends = frozenset(expression.names & set(entries))
            defs[name] = ParameterDef(name, value, expression, None, depends)
    return tuple(defs[name] for name in _dependency_order(defs))


def _key_raw(mapping: Node, key: str):
    for key_raw, _ in mapping.raw.value:
        if str(key_raw.value) == key:
            return key_raw
    raise KeyError(key)  # pragma: no cover - keys come from the same mapping


def _read_table(node: Node, name: str, known: dict[str, str]) -> TableDef:
    outer = node.mapping(("table",), required=("table",))
    table_node = outer["table"]
    keys = table_node.mapping(("over", "x", "y"), required=("over", "x", "y"))
    over = keys["over"].text()
    if over not in known:
        raise keys["over"].error(names.unknown_name_message("variable or parameter to tabulate over", over, tuple(known)))
    if over == name:
        raise keys["over"].error(f"parameter {name!r} cannot be tabulated over itself")
    x_items = keys["x"].sequence(min_length=2, what="table points")
    y_items = keys["y"].sequence()
    x = np.array([item.number() for item in x_items])
    y = np.array([item.number() for item in y_items])
    if y.size != x.size:
        raise keys["y"].error(f"table y has {y.size} values but x has {x.size}")
    steps = np.diff(x)
    if np.any(steps <= 0):
        index = int(np.flatnonzero(steps <= 0)[0]) + 1
        raise x_items[index].error(f"table x must be strictly increasing; {x[index]:g} follows {x[index - 1]:g}")
    x.setflags(write=False)
    y.setflags(write=False)
    return TableDef(over=over, x=x, y=y, node=table_node, over_node=keys["over"], x_node=keys["x"])


def _dependency_order(defs: dict[str, ParameterDef]) -> list[str]:
    """Topological order of parameters; a cycle is reported with its path."""
    order: list[str] = []
    state: dict[str, int] = {}  # 1 = on the current path, 2 = done
    stack: list[str] = []

    def visit(name: str) -> None:
        if state.get(name) == 2:
            return
        if state.get(name) == 1:
            cycle = stack[stack.index(name):] + [name]
            raise defs[cycle[0]].node.error(
                f"circular parameter definitions: {' -> '.join(cycle)}", path=defs[cycle[0]].node.path
            )
        state[name] = 1
        stack.append(name)
        for other in sorted(defs[name].depends_on):
            visit(other)
        stack.pop()
        state[name] = 2
        order.append(name)

    for name in defs:
        visit(name)
    return order


def _coefficients(node: Node, what: str, known: dict[str, str]) -> tuple[Expression, ...]:
    items = [node] if node.is_scalar else node.sequence(min_length=1, what=f"{what} coefficients")
    expressions = []
    for item in items:
        expression = parse_expression(item, f"{what} coefficient")
        expression.check_names(known, _TS_ONLY)
        expressions.append(expression)
    return tuple(expressions)


def _read_plant(node: Node, known: dict[str, str], axes: tuple[Axis, ...], points: np.ndarray) -> PlantRecipe:
    forms = ("transfer_function", "zpk", "state_space", "measured")
    keys = node.mapping(forms + ("dead_time",))
    given = [form for form in forms if form in keys]
    if len(given) != 1:
        found = "none" if not given else " and ".join(given)
        raise node.error(f"plant needs exactly one of {', '.join(forms)}; found {found}")
    if given[0] == "measured":
        if "dead_time" in keys:
            raise keys["dead_time"].error("a measured plant's dead time is fitted from its data; remove plant.dead_time")
        measured = read_measured(keys["measured"], axes, points, lambda point: describe_point(axes, point))
        return PlantRecipe("measured", measured=measured)
    dead_time = None
    if "dead_time" in keys:
        dead_time = parse_expression(keys["dead_time"], "dead time (s)")
        dead_time.check_names(known | {SAMPLE_PERIOD_NAME: "the sample period"})
    form = given[0]
    section = keys[form]
    if form == "transfer_function":
        parts = section.mapping(("numerator", "denominator"), required=("numerator", "denominator"))
        _check_order(parts["denominator"], len(parts["denominator"].sequence()) - 1,
                     "the denominator has no s term: the plant is a static gain")
        numerator = _coefficients(parts["numerator"], "numerator", known)
        denominator = _coefficients(parts["denominator"], "denominator", known)
        # leading numerator entries written as literal zero only pad the list
        while len(numerator) > 1 and numerator[0].constant and numerator[0].evaluate({}, 1)[0] == 0:
            numerator = numerator[1:]
        if len(numerator) > len(denominator):
            raise parts["numerator"].error(
                f"improper transfer function: numerator degree {len(numerator) - 1} exceeds denominator "
                f"degree {len(denominator) - 1}; a physical plant must be proper"
            )
        return PlantRecipe("transfer_function", numerator=numerator, denominator=denominator,
                           numerator_node=parts["numerator"], dead_time=dead_time)
    if form == "zpk":
        parts = section.mapping(("zeros", "poles", "gain"), required=("poles", "gain"))
        zeros = _roots(parts["zeros"], "zero", known) if "zeros" in parts else ()
        poles = _roots(parts["poles"], "pole", known)
        def degree(roots):
            return sum(2 if isinstance(r, Pair) else 1 for r in roots)
        _check_order(parts["poles"], degree(poles), "zpk without poles is a static gain")
        if degree(zeros) > degree(poles):
            raise parts["zeros"].error(
                f"improper plant: {degree(zeros)} zeros but only {degree(poles)} pole{'s' if degree(poles) != 1 else ''}; "
                "a physical plant must be proper"
            )
        gain = parse_expression(parts["gain"], "plant gain")
        gain.check_names(known, _TS_ONLY)
        return PlantRecipe("zpk", zeros=zeros, poles=poles, gain=gain, dead_time=dead_time)
    return _read_state_space(section, known, dead_time)


def _check_measured_use(keys: dict[str, Node], method: str) -> None:
    """A measured plant is judged with the zero-order hold and has no parameters to vary."""
    if method != "zoh":
        node = keys["sampling"].mapping()["method"]
        raise node.error(f"a measured plant needs method 'zoh' (its data are judged with the zero-order hold "
                         f"of the actuator); found {method!r}")
    if "tolerances" in keys and not keys["tolerances"].is_null:
        raise keys["tolerances"].error("tolerances vary parameters of a plant model; a measured plant has none "
                                       "(measure the spread instead, as more operating points)")


def _check_workload(keys: dict[str, Node], axes: tuple[Axis, ...], table_checks, tolerances) -> None:
    """Refuse checks whose point counts could not be allocated, before the design starts."""
    sizes = [axis.values.size for axis in axes]
    points = int(np.prod(sizes))
    between = table_checks.between_points
    if len(sizes) == 1:
        checked = between * (sizes[0] - 1)
    else:  # every cell: `between` on two edges and the centre; the far edges once more
        cells = (sizes[0] - 1) * (sizes[1] - 1)
        checked = cells * (2 * between + 1) + between * (sizes[0] - 1 + sizes[1] - 1)
    if checked > limits.MAX_CHECK_POINTS:
        node = keys["table"].mapping()["between_points"]
        raise node.error(
            f"between_points {between} on this grid means {checked:,} intermediate points; at most "
            f"{limits.MAX_CHECK_POINTS:,} are accepted (limits in docs/schedule-format.md)"
        )
    inserted = table_checks.refine_max_inserted
    if points + inserted * max(sizes) > limits.MAX_OPERATING_POINTS and inserted:
        node = keys["table"].mapping()["refine"].mapping()["max_inserted"]
        raise node.error(
            f"max_inserted {inserted} could grow the grid of {points:,} points to {points + inserted * max(sizes):,}; "
            f"at most {limits.MAX_OPERATING_POINTS:,} operating points are accepted"
        )
    if isinstance(tolerances.samples, tuple):
        samples = tolerances.samples[0]
        if samples * points > limits.MAX_TOLERANCE_EVALUATIONS:
            node = keys["tolerances"].mapping()["samples"].mapping()["space_filling"]
            raise node.error(
                f"{samples:,} tolerance samples at {points:,} operating points are {samples * points:,} loops to "
                f"check; at most {limits.MAX_TOLERANCE_EVALUATIONS:,} are accepted"
            )


def _resolve_output_limits(controller, family: Family, points: np.ndarray, parameters, known: dict[str, str]):
    """Check the names of output-limit expressions and their values on the grid;
    limits equal at every grid point become numbers."""
    limits = controller.output_limits
    if not any(isinstance(v, Expression) for v in limits):
        return controller
    for limit in limits:
        limit.check_names(known, _TS_ONLY)
    low, high = family.output_limits(limits, points, parameters)
    if np.all(low == low[0]) and np.all(high == high[0]):  # the same at every point: numbers
        return replace(controller, output_limits=(float(low[0]), float(high[0])))
    return controller


def _check_full_scale(keys: dict[str, Node], limits_pair: tuple[float, float], full_scale: float | None) -> None:
    """The fixed-point output must reach the output limits (else the C would clip short of them)."""
    reach = max(abs(limits_pair[0]), abs(limits_pair[1]))
    if full_scale is not None and full_scale < reach:
        node = keys["codegen"].mapping()["output_full_scale"]
        raise node.error(
            f"output_full_scale {full_scale:g} does not cover the output limits [{limits_pair[0]:g}, "
            f"{limits_pair[1]:g}]; use at least {reach:g}"
        )


def _check_order(node: Node, order: int, static: str) -> None:
    """Refuse a plant without poles or of an order beyond the limit, before evaluating it."""
    if order < 1:
        raise node.error(
            f"{static}; gainloom designs loops around a plant with at least one pole (write the fastest lag "
            "you know, e.g. a denominator [tau, 1])"
        )
    if order > limits.MAX_PLANT_ORDER:
        raise node.error(
            f"plant of order {order:,}; at most {limits.MAX_PLANT_ORDER} is accepted (polynomial roots of higher "
            "orders lose their digits; reduce the model)"
        )


def _roots(node: Node, what: str, known: dict[str, str]) -> tuple[Expression | Pair, ...]:
    roots: list[Expression | Pair] = []
    for item in node.sequence():
        if item.is_mapping:
            parts = item.mapping(("re", "im"), required=("re", "im"))
            re_part = parse_expression(parts["re"], f"{what} real part")
            im_part = parse_expression(parts["im"], f"{what} imaginary part")
            re_part.check_names(known, _TS_ONLY)
            im_part.check_names(known, _TS_ONLY)
            roots.append(Pair(re_part, im_part, item))
        else:
            expression = parse_expression(item, what)
            expression.check_names(known, _TS_ONLY)
            roots.append(expression)
    return tuple(roots)


def _read_state_space(node: Node, known: dict[str, str], dead_time: Expression | None) -> PlantRecipe:
    parts = node.mapping(("A", "B", "C", "D"), required=("A", "B", "C"))
    a_rows = parts["A"].sequence(min_length=1, what="rows")
    n = len(a_rows)
    _check_order(parts["A"], n, "")
    shapes = {"A": (n, n), "B": (n, 1), "C": (1, n), "D": (1, 1)}
    matrices: dict[str, tuple[tuple[Expression, ...], ...]] = {}
    for key, (rows, cols) in shapes.items():
        if key not in parts:
            # D defaults to zero (strictly proper plant)
            matrices[key] = ((Expression("0", ast.Constant(0.0), frozenset(), parts["A"]),),)
            continue
        matrix_node = parts[key]
        if key == "D" and matrix_node.is_scalar:
            row_nodes = [[matrix_node]]
        else:
            row_nodes = []
            for row in matrix_node.sequence():
                row_nodes.append([row] if (row.is_scalar and cols == 1) else row.sequence())
        got = (len(row_nodes), len(row_nodes[0]) if row_nodes else 0)
        if len(row_nodes) != rows or any(len(r) != cols for r in row_nodes):
            widths = sorted({len(r) for r in row_nodes})
            raise matrix_node.error(
                f"state-space {key} must be {rows}x{cols} for {n} state{'s' if n > 1 else ''} (single input, single output); "
                f"found {got[0]} rows of {', '.join(map(str, widths)) or '0'} entries"
            )
        built = []
        for row in row_nodes:
            exprs = []
            for entry in row:
                expression = parse_expression(entry, f"{key} entry")
                expression.check_names(known, _TS_ONLY)
                exprs.append(expression)
            built.append(tuple(exprs))
        matrices[key] = tuple(built)
    return PlantRecipe("state_space", matrices=matrices, numerator_node=parts["C"], dead_time=dead_time)


def _read_sampling(node: Node, known: dict[str, str]):
    keys = node.mapping(("period", "method", "delay", "prewarp"), required=("period",))
    period = parse_expression(keys["period"], "sample period (s)")
    period.check_names(known, {SAMPLE_PERIOD_NAME: "the sample period cannot be defined in terms of itself"})
    method = keys["method"].choice("hold method", names.HOLD_METHODS) if "method" in keys else "zoh"
    delay = None
    if "delay" in keys:
        delay = parse_expression(keys["delay"], "computation delay (samples)")
        delay.check_names(known | {SAMPLE_PERIOD_NAME: "the sample period"})
    prewarp = None
    if "prewarp" in keys:
        if method != "tustin":
            raise keys["prewarp"].error(f"prewarp applies only to method 'tustin'; method is {method!r}")
        prewarp = parse_expression(keys["prewarp"], "prewarp frequency (rad/s)")
        prewarp.check_names(known, _TS_ONLY)
    return method, period, delay, prewarp


def _warnings(family: Family, models) -> list[str]:
    warnings: list[str] = list(family.plant.measured.warnings) if family.plant.measured is not None else []
    plant = models.plant
    if plant.order > 0:
        poles = batched_roots(plant.den)
        fastest = np.max(np.abs(poles), axis=1)
        product = fastest * models.sample_period
        slow = product > SLOW_SAMPLING_LIMIT
        if np.any(slow):
            index = int(np.argmax(product))
            warnings.append(
                f"sampling is slow for the plant's fastest pole at {int(np.count_nonzero(slow))} of "
                f"{slow.size} points: |pole| * ts reaches {product[index]:.3g} rad at "
                f"{family.describe(models.points[index])} (|pole| = {fastest[index]:.4g} rad/s, "
                f"ts = {models.sample_period[index]:.4g} s); keep it below {SLOW_SAMPLING_LIMIT} rad "
                "(common practice) or check the discrete design carefully"
            )
    return warnings

"""Load a cascade file: several loops, inner to outer, in one schedule file.

Each entry of ``loops`` is a single-loop schedule body (the keys of
docs/schedule-format.md without ``description``) plus ``inner_at``; it is
validated by the same loader (:func:`gainloom.schedule.loader.build_schedule`),
so its errors carry key paths like ``loops[1].plant.transfer_function``.
What the cascade adds is checked here: loop names that reach C, sample
periods that are whole multiples of the inner loop's, the hold and delays the
multirate construction needs, and the inner loop's operating point as the
outer loop sees it.  Format: docs/cascade.md.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from .. import names
from ..c_names import prefix_problem
from .loader import TOP_LEVEL_KEYS, build_schedule, read_schedule_root
from .model import CodegenSection, Schedule
from .nodes import Node
from .sections import read_codegen

__all__ = [
    "CASCADE_KEYS",
    "LOOP_KEYS",
    "MAX_LOOPS",
    "Cascade",
    "CascadeLoop",
    "CascadeSection",
    "is_cascade_file",
    "load_cascade",
]

#: Top-level keys of a cascade file.
CASCADE_KEYS: tuple[str, ...] = ("name", "description", "loops", "cascade", "codegen")
#: Keys of one ``loops`` entry: a single-loop schedule body plus ``inner_at``.
LOOP_KEYS: tuple[str, ...] = tuple(k for k in TOP_LEVEL_KEYS if k != "description") + ("inner_at",)
_LOOP_REQUIRED = ("name", "variables", "plant", "sampling", "controller")
_LOOP_CODEGEN_KEYS = ("error_full_scale", "output_full_scale")
_SECTION_KEYS = ("min_crossover_ratio",)
#: Loops per cascade this version designs (an inner loop and one loop around it).
MAX_LOOPS = 2
_LOOP_NAME = re.compile(r"[a-z][a-z0-9_]*\Z")
#: Relative tolerance on "one sample period over the grid" and "whole multiple".
_PERIOD_RTOL = 1e-9


@dataclass(frozen=True)
class CascadeSection:
    """The ``cascade`` section: whole-cascade specs (``None``: not required).

    Parameters
    ----------
    min_crossover_ratio : float or None
        Smallest allowed ratio of the inner loop's gain crossover to the
        outer loop's, at every outer operating point and every inner
        breakpoint (bandwidth separation).
    """

    min_crossover_ratio: float | None = None


@dataclass(frozen=True, eq=False)
class CascadeLoop:
    """One loop of a cascade.

    Parameters
    ----------
    name : str
        The loop's name (lower-case identifier; part of its C names).
    schedule : Schedule
        The loop as a single-loop schedule; for an outer loop its plant is the
        plant part from the inner loop's measured output to this loop's.
    rate_factor : int
        Sample period over the inner loop's (1 for the innermost loop).
    inner_at : dict of str to float
        Values of the inner loop's scheduling variables this loop does not
        schedule on, at which the outer design sees the inner loop (empty for
        the innermost loop).
    shared : tuple of str
        Scheduling variables this loop shares with the inner loop.
    """

    name: str
    schedule: Schedule
    rate_factor: int = 1
    inner_at: dict[str, float] | None = None
    shared: tuple[str, ...] = ()


@dataclass(frozen=True, eq=False)
class Cascade:
    """A validated cascade file (build it with :func:`load_cascade`).

    ``loops`` runs from the innermost loop outwards.
    """

    path: str
    sha256: str
    name: str
    description: str
    loops: tuple[CascadeLoop, ...]
    cascade: CascadeSection
    codegen: CodegenSection

    @property
    def base_period(self) -> float:
        """The innermost loop's sample period (s)."""
        return float(self.loops[0].schedule.sampling.period[0])


def is_cascade_file(path: str | Path) -> bool:
    """True when the file's top level is a mapping with a ``loops`` key."""
    _file, _data, root = read_schedule_root(path)
    return root.is_mapping and "loops" in {str(key.value) for key, _ in root.raw.value}


def load_cascade(path: str | Path) -> Cascade:
    """Load, validate and evaluate a cascade file.

    Parameters
    ----------
    path : str or Path
        The YAML cascade file (format: docs/cascade.md).

    Returns
    -------
    Cascade

    Raises
    ------
    ScheduleError
        The first problem found, with file, line, column and key path.
    """
    file, data, root = read_schedule_root(path)
    keys = root.mapping(CASCADE_KEYS, required=("name", "loops"))
    sha256 = hashlib.sha256(data).hexdigest()
    name = keys["name"].text()
    description = keys["description"].text() if "description" in keys and not keys["description"].is_null else ""
    codegen = _read_cascade_codegen(keys.get("codegen"), name, keys["name"])
    items = keys["loops"].sequence(min_length=2, what="loops (a cascade has an inner loop and a loop around it)")
    if len(items) > MAX_LOOPS:
        raise items[MAX_LOOPS].error(
            f"at most {MAX_LOOPS} loops per cascade are supported (an inner loop and one loop around it); "
            f"found {len(items)}"
        )
    loops: list[CascadeLoop] = []
    for item in items:
        loop_keys = item.mapping(LOOP_KEYS, required=_LOOP_REQUIRED)
        loops.append(_read_loop(loop_keys, loops, file, sha256, codegen, description))
    return Cascade(
        path=file, sha256=sha256, name=name, description=description, loops=tuple(loops),
        cascade=_read_section(keys.get("cascade")), codegen=codegen,
    )


def _read_cascade_codegen(node: Node | None, name: str, name_node: Node) -> CodegenSection:
    if node is not None and not node.is_null:
        node.mapping(("prefix", "format"))  # full scales belong to each loop (loops[i].codegen)
    return read_codegen(node, name, name_node)


def _read_section(node: Node | None) -> CascadeSection:
    if node is None or node.is_null:
        return CascadeSection()
    keys = node.mapping(_SECTION_KEYS)
    ratio = None
    if "min_crossover_ratio" in keys:
        ratio = keys["min_crossover_ratio"].number()
        if not (np.isfinite(ratio) and ratio >= 1):
            raise keys["min_crossover_ratio"].error(
                f"min_crossover_ratio must be a number of at least 1 (inner crossover / outer crossover); got {ratio:g}"
            )
    return CascadeSection(min_crossover_ratio=ratio)


def _loop_codegen(keys: dict[str, Node], cascade_codegen: CodegenSection) -> tuple[str, CodegenSection]:
    name_node = keys["name"]
    name = name_node.text()
    if not _LOOP_NAME.match(name):
        raise name_node.error(
            f"loop name {name!r} must start with a lower-case letter and use only lower-case letters, digits "
            "and '_' (it becomes part of the loop's C names)"
        )
    prefix = f"{cascade_codegen.prefix}_{name}"
    problem = prefix_problem(prefix)
    if problem:
        raise name_node.error(f"C {problem} (the loop's prefix is the cascade prefix, '_' and the loop name)")
    node = keys.get("codegen")
    if node is not None and not node.is_null:
        node.mapping(_LOOP_CODEGEN_KEYS)  # prefix and format are the cascade's
    own = read_codegen(node, name, name_node)
    return name, replace(own, prefix=prefix, format=cascade_codegen.format)


def _read_loop(keys: dict[str, Node], inner_loops: list[CascadeLoop], file: str, sha256: str,
               cascade_codegen: CodegenSection, description: str) -> CascadeLoop:
    name, codegen = _loop_codegen(keys, cascade_codegen)
    if any(loop.name == name for loop in inner_loops):
        raise keys["name"].error(f"loop name {name!r} is used twice; each loop needs its own name")
    schedule = build_schedule(keys, file=file, sha256=sha256, codegen=codegen, description=description)
    _check_zoh(keys, schedule)
    period = _single_period(keys, schedule)
    if not inner_loops:
        if "inner_at" in keys:
            raise keys["inner_at"].error("inner_at applies to a loop around another; this is the innermost loop")
        return CascadeLoop(name=name, schedule=schedule)
    inner = inner_loops[-1]
    factor = _rate_factor(keys, period, float(inner.schedule.sampling.period[0]), inner.name)
    _check_outer_loop(keys, schedule)
    shared = tuple(a.name for a in schedule.axes if a.name in inner.schedule.axis_names)
    _check_shared(keys, schedule, inner.schedule, shared)
    inner_at = _read_inner_at(keys.get("inner_at"), inner.schedule, shared)
    return CascadeLoop(name=name, schedule=schedule, rate_factor=factor, inner_at=inner_at, shared=shared)


def _sampling_node(keys: dict[str, Node], key: str) -> Node:
    sampling = keys["sampling"].mapping()
    return sampling.get(key, keys["sampling"])


def _check_zoh(keys: dict[str, Node], schedule: Schedule) -> None:
    # The multirate construction is exact for the zero-order hold the PWM and
    # the inner loop's reference really are; other holds are approximations.
    if schedule.sampling.method != "zoh":
        raise _sampling_node(keys, "method").error(
            f"a cascade loop needs hold method 'zoh' (the multirate construction is exact for it); "
            f"got {schedule.sampling.method!r}"
        )


def _single_period(keys: dict[str, Node], schedule: Schedule) -> float:
    period = np.asarray(schedule.sampling.period, dtype=float)
    if np.ptp(period) > _PERIOD_RTOL * float(np.max(period)):
        raise _sampling_node(keys, "period").error(
            f"a cascade loop needs one sample period over its grid; it ranges {float(period.min()):.6g} .. "
            f"{float(period.max()):.6g} s"
        )
    return float(period[0])


def _rate_factor(keys: dict[str, Node], period: float, inner_period: float, inner_name: str) -> int:
    ratio = period / inner_period
    factor = round(ratio)
    if factor < 1 or abs(ratio - factor) > _PERIOD_RTOL * ratio:
        raise _sampling_node(keys, "period").error(
            f"the sample period {period:.6g} s must be a whole multiple of loop {inner_name!r}'s "
            f"{inner_period:.6g} s; it is {ratio:.6g} times it"
        )
    return factor


def _check_outer_loop(keys: dict[str, Node], schedule: Schedule) -> None:
    delay = np.asarray(schedule.sampling.delay, dtype=float)
    if np.any(np.abs(delay - np.round(delay)) > 1e-12):
        raise _sampling_node(keys, "delay").error(
            "the computation delay of a loop around another must be a whole number of its samples; got "
            f"{float(delay[np.argmax(np.abs(delay - np.round(delay)))]):.6g}"
        )
    if np.any(np.asarray(schedule.plant.dead_time, dtype=float) != 0):
        node = keys["plant"].mapping().get("dead_time", keys["plant"])
        raise node.error("the plant part of a loop around another takes no dead_time; put a delay of its "
                         "measurement in sampling.delay (whole samples)")
    controller = schedule.controller
    strategy_node = keys["controller"].mapping()["strategy"]
    if controller.strategy in names.TUNING_RULES:
        raise strategy_node.error(
            f"strategy {controller.strategy!r} tunes from a continuous plant; the plant of a loop around another "
            "is the sampled inner closed loop (use pole-cancel, dominant-pair or shape-sweep)"
        )
    if controller.compare_continuous:
        raise keys["controller"].mapping()["compare_continuous"].error(
            "compare_continuous needs a continuous plant; the plant of a loop around another is the sampled "
            "inner closed loop"
        )


def _check_shared(keys: dict[str, Node], schedule: Schedule, inner: Schedule, shared: tuple[str, ...]) -> None:
    items = keys["variables"].sequence()
    for index, axis in enumerate(schedule.axes):
        if axis.name not in shared:
            continue
        inner_values = next(a.values for a in inner.axes if a.name == axis.name)
        low, high = float(inner_values[0]), float(inner_values[-1])
        if float(axis.values[0]) < low or float(axis.values[-1]) > high:
            raise items[index].mapping()["values"].error(
                f"shared variable {axis.name!r} ranges {float(axis.values[0]):g} .. {float(axis.values[-1]):g} "
                f"here but the inner loop is designed on {low:g} .. {high:g} only"
            )


def _read_inner_at(node: Node | None, inner: Schedule, shared: tuple[str, ...]) -> dict[str, float]:
    """Values of the inner variables this loop does not schedule on (default: each range's middle)."""
    own = {a.name: a for a in inner.axes if a.name not in shared}
    given = {} if node is None or node.is_null else node.mapping()
    values: dict[str, float] = {}
    for key, value_node in given.items():
        if key not in own:
            known = tuple(own)
            reason = "it is a variable of this loop too" if key in shared else names.unknown_name_message(
                "inner-loop variable", key, known)
            raise value_node.error(f"inner_at.{key}: {reason}")
        value = value_node.number()
        axis_values = own[key].values
        if not (float(axis_values[0]) <= value <= float(axis_values[-1])):
            raise value_node.error(
                f"inner_at.{key} = {value:g} is outside the inner loop's grid {float(axis_values[0]):g} .. "
                f"{float(axis_values[-1]):g}"
            )
        values[key] = value
    for key, axis in own.items():
        values.setdefault(key, 0.5 * (float(axis.values[0]) + float(axis.values[-1])))
    return {a.name: values[a.name] for a in inner.axes if a.name in values}

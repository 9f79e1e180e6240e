"""The gains file: our own versioned format (``format: gainloom-gains/1``).

Written as YAML (``.yaml``/``.yml``) or JSON (``.json``), deterministically:
keys in a fixed order, floats as shortest round-trip decimals, no
timestamps.  See ``docs/gains-format.md`` for the layout.  Both are read
with a YAML safe loader (standard JSON is valid YAML here), which gives line
numbers for every error.
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import yaml

from ..errors import ScheduleError
from ..inputs import read_input_file
from ..limits import MAX_GAINS_BYTES
from ..names import (
    CONTROLLER_COEFFICIENTS,
    CONTROLLER_STRUCTURES,
    FILTER_COEFFICIENTS,
    FILTER_KINDS,
    unknown_name_message,
)
from ..outputs import write_outputs
from ..plain import to_plain
from .table import FilterTable, GainTable, TableAxis

__all__ = [
    "GAINS_FORMAT", "GainsMetadata", "gains_document", "read_gains", "render_gains", "write_gains",
    "compromise_points", "provenance_notes",
]

#: Format tag of the gains file.
GAINS_FORMAT = "gainloom-gains/1"

#: Top-level keys, in the order written.
_KEYS = (
    "format",
    "generator",
    "schedule",
    "structure",
    "axes",
    "coefficients",
    "sample_period",
    "output_limits",
    "filters",
    "design",
    "passed",
    "points",
    "table_checks",
    "warnings",
    "continuous",
    "measured",
)


def _grid(array: np.ndarray) -> Any:
    """Nested lists in grid order (first axis slowest)."""
    return np.asarray(array, dtype=float).tolist()


def gains_document(
    table: GainTable,
    *,
    schedule_path: str | None = None,
    schedule_sha256: str | None = None,
    design: dict[str, Any] | None = None,
    body: dict[str, Any] | None = None,
) -> dict[str, Any]:
    """The gains file as plain data (before serialisation).

    Parameters
    ----------
    table : GainTable
    schedule_path, schedule_sha256 : str, optional
        Provenance of the schedule the table was designed for.
    design : dict, optional
        Structure, strategy and options used.
    body : dict, optional
        ``passed``, ``points``, ``table_checks``, ``warnings``, ``continuous``
        (``DesignResult.as_document()``).
    """
    from ..version import __version__

    doc: dict[str, Any] = {
        "format": GAINS_FORMAT,
        "generator": f"gainloom {__version__}",
        "schedule": {"path": schedule_path, "sha256": schedule_sha256},
        "structure": table.structure,
        "axes": [{"name": a.name, "unit": a.unit, "values": a.values.tolist()} for a in table.axes],
        "coefficients": {name: _grid(table.coefficients[name]) for name in table.coefficient_names},
        "sample_period": _grid(table.sample_period),
        # two numbers, or two grids (first axis slowest) when the limits vary
        "output_limits": (
            [_grid(v) for v in table.output_limits] if table.limits_vary
            else [float(table.output_limits[0]), float(table.output_limits[1])]
        ),
    }
    if table.filters:
        # the discrete sections as tabulated (the C interpolates these)
        doc["filters"] = [{"kind": section.kind,
                           "coefficients": {name: _grid(section.coefficients[name]) for name in FILTER_COEFFICIENTS}}
                          for section in table.filters]
    if design is not None:
        doc["design"] = design
    for key, value in (body or {}).items():
        doc[key] = value
    return {k: doc[k] for k in _KEYS if k in doc}


class _Dumper(yaml.SafeDumper):
    """Block mappings; lists of scalars (coefficient rows, poles) in flow style."""


def _represent_list(dumper: yaml.SafeDumper, data: list) -> yaml.Node:
    def scalar(v: Any) -> bool:
        return not isinstance(v, (dict, list))

    flow = bool(data) and all(scalar(v) or (isinstance(v, list) and all(scalar(x) for x in v)) for v in data)
    return dumper.represent_sequence("tag:yaml.org,2002:seq", data, flow_style=flow)


def _represent_float(dumper: yaml.SafeDumper, data: float) -> yaml.Node:
    if math.isnan(data):
        text = ".nan"
    elif math.isinf(data):
        text = ".inf" if data > 0 else "-.inf"
    else:
        text = repr(float(data))
        if "e" in text and "." not in text:
            # YAML 1.1 resolvers need a dot to read 1e-05 as a float
            mantissa, exponent = text.split("e")
            text = f"{mantissa}.0e{exponent}"
    return dumper.represent_scalar("tag:yaml.org,2002:float", text)


_Dumper.add_representer(list, _represent_list)
_Dumper.add_representer(float, _represent_float)


def render_gains(result: Any, name: str | Path = "gains.yaml") -> str:
    """The text of a gains file, without writing it.

    Parameters
    ----------
    result : DesignResult or GainTable
        What to write; a DesignResult adds the per-point analysis.
    name : str or Path
        File name (or path) the text is meant for: a ``.json`` suffix gives
        JSON, anything else YAML.

    Returns
    -------
    str
        The complete file text (UTF-8 when written).

    Notes
    -----
    The schedule is recorded by its file name and SHA-256 only, never by the
    folder it was read from, so the same schedule bytes give the same gains
    file wherever the schedule and the output folder are.
    """
    if not isinstance(result, GainTable) and hasattr(result, "as_document") and hasattr(result, "strategy"):
        doc = gains_document(
            result.table,
            schedule_path=Path(str(result.schedule_path)).name,
            schedule_sha256=result.schedule_sha256,
            design=result.strategy.to_dict(),
            body=result.as_document(),
        )
    elif isinstance(result, GainTable):
        doc = gains_document(result)
    else:
        raise TypeError(f"write_gains takes a DesignResult or GainTable; got {type(result).__name__}")
    if Path(name).suffix.lower() == ".json":
        # JSON has no inf/nan: written as strings, read back as floats.
        return json.dumps(to_plain(doc, "text"), indent=2, allow_nan=False) + "\n"
    doc = to_plain(doc, "keep")
    return yaml.dump(doc, Dumper=_Dumper, sort_keys=False, allow_unicode=True, width=100)


def write_gains(result: Any, path: str | Path, *, force: bool = False) -> Path:
    """Write a design result (or a bare GainTable) as a gains file.

    The file is written through :func:`gainloom.outputs.write_outputs`
    (atomically, recorded in the folder's manifest, never over a file
    gainloom did not write unless ``force``, never through a link).

    Parameters
    ----------
    result : DesignResult or GainTable
        What to write; a DesignResult adds the per-point analysis.
    path : str or Path
        ``.json`` writes JSON; anything else YAML.
    force : bool
        Overwrite a file at ``path`` that gainloom did not write.

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    text = render_gains(result, path)
    (written,) = write_outputs(path.parent, {path.name: text}, force=force)
    return written


# --- reading -----------------------------------------------------------------


class _Loader(yaml.SafeLoader):
    """Safe loader that also reads ``1e-05`` (JSON, YAML 1.2) as a float."""


_Loader.yaml_implicit_resolvers = {k: list(v) for k, v in yaml.SafeLoader.yaml_implicit_resolvers.items()}
_Loader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"^[-+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)[eE][-+]?[0-9]+$"),
    list("-+0123456789."),
)


@dataclass(frozen=True)
class GainsMetadata:
    """Everything in a gains file besides the table, as the file records it.

    Attributes
    ----------
    format : str
        ``gainloom-gains/1``.
    generator : str or None
        The gainloom that wrote the file.
    schedule_path, schedule_sha256 : str or None
        The schedule it was designed from (file name and SHA-256).
    design : dict or None
        The design settings (:meth:`~gainloom.design.results.DesignSettings.to_dict`).
    passed : bool or None
        The design's verdict (None when the file records none, or not a bool).
    points : list
        Per-point analysis entries as written.
    table_checks, continuous, measured
        Those sections as written (None when absent).
    warnings : tuple of str
    path : str
        The gains file read.
    """

    format: str = GAINS_FORMAT
    generator: Any = None
    schedule_path: Any = None
    schedule_sha256: Any = None
    design: dict[str, Any] | None = None
    passed: bool | None = None
    points: list[Any] = field(default_factory=list)
    table_checks: Any = None
    warnings: tuple[Any, ...] = ()
    continuous: Any = None
    measured: Any = None
    path: str = ""

    def to_dict(self) -> dict[str, Any]:
        """Plain data, keys in the gains file's order (``path`` last)."""
        return {
            "format": self.format,
            "generator": self.generator,
            "schedule": {"path": self.schedule_path, "sha256": self.schedule_sha256},
            "design": self.design,
            "passed": self.passed,
            "points": self.points,
            "table_checks": self.table_checks,
            "warnings": list(self.warnings),
            "continuous": self.continuous,
            "measured": self.measured,
            "path": self.path,
        }


def _node_at(node: yaml.Node, key: str) -> yaml.Node | None:
    if isinstance(node, yaml.MappingNode):
        for k, v in node.value:
            if isinstance(k, yaml.ScalarNode) and k.value == key:
                return v
    return None


class _Reader:
    def __init__(self, path: Path, root: yaml.Node, data: Any) -> None:
        self.path = path
        self.root = root
        self.data = data

    def error(self, message: str, key_path: str, node: yaml.Node | None = None) -> ScheduleError:
        if node is None:
            node = self.root
            for part in key_path.replace("]", "").replace("[", ".").split("."):
                if not part:
                    continue
                if isinstance(node, yaml.SequenceNode) and part.isdigit() and int(part) < len(node.value):
                    node = node.value[int(part)]
                else:
                    child = _node_at(node, part)
                    if child is None:
                        break
                    node = child
        line = node.start_mark.line + 1 if node is not None else None
        column = node.start_mark.column + 1 if node is not None else None
        return ScheduleError(message, file=str(self.path), line=line, column=column, key_path=key_path or None)

    def get(self, mapping: Any, key: str, where: str, kinds: tuple[type, ...]) -> Any:
        path = f"{where}.{key}" if where else key
        if not isinstance(mapping, dict) or key not in mapping:
            raise self.error(f"missing key {key!r}", where)
        value = mapping[key]
        if not isinstance(value, kinds) or isinstance(value, bool) and bool not in kinds:
            names = " or ".join(k.__name__ for k in kinds)
            raise self.error(f"expected {names}; found {type(value).__name__} {value!r}", path)
        return value

    def array(self, value: Any, path: str, shape: tuple[int, ...]) -> np.ndarray:
        try:
            array = np.array(_floats(value), dtype=float)
        except (TypeError, ValueError):
            raise self.error(f"expected numbers in an array of shape {shape}; found {value!r:.80}", path) from None
        if array.shape != shape:
            raise self.error(f"expected an array of shape {shape}; found shape {array.shape}", path)
        if not np.all(np.isfinite(array)):
            raise self.error("expected finite numbers", path)
        return array


def _floats(value: Any) -> Any:
    if isinstance(value, list):
        return [_floats(v) for v in value]
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise TypeError
    if isinstance(value, str) and value not in ("inf", "-inf", "nan"):
        raise ValueError
    return float(value)


def _restore_nonfinite(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _restore_nonfinite(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_restore_nonfinite(v) for v in value]
    if isinstance(value, str) and value in ("inf", "-inf", "nan"):
        return float(value)
    return value


def _read_filters(reader: _Reader, data: dict, shape: tuple[int, ...]) -> tuple[FilterTable, ...]:
    """The tabulated filter sections (``filters``), or none when the key is absent."""
    entries = data.get("filters")
    if entries is None:
        return ()
    if not isinstance(entries, list):
        raise reader.error("expected a list of filter sections {kind, coefficients}", "filters")
    sections = []
    for i, entry in enumerate(entries):
        where = f"filters[{i}]"
        kind = reader.get(entry, "kind", where, (str,))
        if kind not in FILTER_KINDS:
            raise reader.error(unknown_name_message("filter kind", kind, FILTER_KINDS), f"{where}.kind")
        grids = reader.get(entry, "coefficients", where, (dict,))
        unknown = [k for k in grids if k not in FILTER_COEFFICIENTS]
        if unknown:
            raise reader.error(f"unknown filter coefficient {unknown[0]!r}; expected {', '.join(FILTER_COEFFICIENTS)}",
                               f"{where}.coefficients.{unknown[0]}")
        coefficients = {name: reader.array(reader.get(grids, name, f"{where}.coefficients", (list,)),
                                           f"{where}.coefficients.{name}", shape) for name in FILTER_COEFFICIENTS}
        sections.append(FilterTable(kind, coefficients))
    return tuple(sections)


def read_gains(path: str | Path) -> tuple[GainTable, GainsMetadata]:
    """Read a gains file.

    Parameters
    ----------
    path : str or Path
        A YAML or JSON gains file (``format: gainloom-gains/1``).

    Returns
    -------
    table : GainTable
    metadata : GainsMetadata
        Everything else in the file (provenance, per-point analysis).

    Raises
    ------
    ScheduleError
        Unreadable file, unknown format, or a key that is missing or malformed;
        the message gives the file, line and key path.
    """
    path = Path(path)
    try:
        text = read_input_file(path, "gains file", MAX_GAINS_BYTES).decode("utf-8")
    except UnicodeDecodeError as error:
        raise ScheduleError(f"gains file is not UTF-8 text (byte {error.start})", file=str(path)) from None
    try:
        root = yaml.compose(text, Loader=_Loader)
        data = yaml.load(text, Loader=_Loader)
    except (ValueError, TypeError, OverflowError) as error:  # e.g. !!float abc
        raise ScheduleError(f"a value cannot be read as tagged: {error}", file=str(path)) from None
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None)
        raise ScheduleError(
            f"not valid YAML/JSON: {getattr(error, 'problem', error)}",
            file=str(path),
            line=None if mark is None else mark.line + 1,
            column=None if mark is None else mark.column + 1,
        ) from None
    reader = _Reader(path, root, data)
    if not isinstance(data, dict):
        raise reader.error(f"a gains file is a mapping with 'format: {GAINS_FORMAT}'; found {type(data).__name__}", "")
    fmt = reader.get(data, "format", "", (str,))
    if fmt != GAINS_FORMAT:
        raise reader.error(f"unknown gains format {fmt!r}; this gainloom reads {GAINS_FORMAT!r}", "format")
    structure = reader.get(data, "structure", "", (str,))
    if structure not in CONTROLLER_STRUCTURES:
        raise reader.error(unknown_name_message("controller structure", structure, CONTROLLER_STRUCTURES), "structure")
    axes_data = reader.get(data, "axes", "", (list,))
    if len(axes_data) not in (1, 2):
        raise reader.error(f"expected one or two axes; found {len(axes_data)}", "axes")
    axes = []
    for i, entry in enumerate(axes_data):
        where = f"axes[{i}]"
        name = reader.get(entry, "name", where, (str,))
        unit = entry.get("unit", "") if isinstance(entry, dict) else ""
        if unit is None:
            unit = ""
        if not isinstance(unit, str):
            raise reader.error(f"expected a string unit; found {unit!r}", f"{where}.unit")
        values = reader.get(entry, "values", where, (list,))
        array = reader.array(values, f"{where}.values", (len(values),))
        if array.size < 2 or not np.all(np.diff(array) > 0):
            raise reader.error("expected two or more strictly increasing values", f"{where}.values")
        axes.append(TableAxis(name=name, unit=unit, values=array))
    shape = tuple(a.values.size for a in axes)
    coefficients_data = reader.get(data, "coefficients", "", (dict,))
    expected = CONTROLLER_COEFFICIENTS[structure]
    unknown = [k for k in coefficients_data if k not in expected]
    if unknown:
        raise reader.error(
            f"unknown coefficient {unknown[0]!r} for structure {structure}; expected {', '.join(expected)}",
            f"coefficients.{unknown[0]}",
        )
    coefficients = {}
    for name in expected:
        value = reader.get(coefficients_data, name, "coefficients", (list,))
        coefficients[name] = reader.array(value, f"coefficients.{name}", shape)
    periods = reader.get(data, "sample_period", "", (list,))
    ts = reader.array(periods, "sample_period", shape)
    if not np.all(ts > 0):
        raise reader.error("sample periods must be positive seconds", "sample_period")
    limits = reader.get(data, "output_limits", "", (list,))
    if len(limits) == 2 and all(isinstance(v, list) for v in limits):
        # tabulated limits: one grid per limit
        limit_values: tuple[float, float] | tuple[np.ndarray, np.ndarray] = (
            reader.array(limits[0], "output_limits[0]", shape), reader.array(limits[1], "output_limits[1]", shape))
        if not np.all(limit_values[0] < limit_values[1]):
            raise reader.error("expected u_min < u_max at every grid point", "output_limits")
    else:
        limits_array = reader.array(limits, "output_limits", (2,))
        if not limits_array[0] < limits_array[1]:
            raise reader.error(f"expected [u_min, u_max] with u_min < u_max; found {limits}", "output_limits")
        limit_values = (float(limits_array[0]), float(limits_array[1]))
    table = GainTable(
        structure=structure,
        axes=tuple(axes),
        coefficients=coefficients,
        sample_period=ts,
        output_limits=limit_values,
        filters=_read_filters(reader, data, shape),
    )
    schedule = data.get("schedule") or {}
    if not isinstance(schedule, dict):
        raise reader.error("expected a mapping with path and sha256", "schedule")
    design = data.get("design")
    if design is not None and not isinstance(design, dict):
        raise reader.error(f"expected a mapping of design settings; found {type(design).__name__}", "design")
    passed = data.get("passed")
    metadata = GainsMetadata(
        format=fmt,
        generator=data.get("generator"),
        schedule_path=schedule.get("path"),
        schedule_sha256=schedule.get("sha256"),
        design=design,
        passed=passed if isinstance(passed, bool) else None,
        points=_restore_nonfinite(data.get("points", [])),
        table_checks=_restore_nonfinite(data.get("table_checks")),
        warnings=tuple(data.get("warnings") or []),
        continuous=_restore_nonfinite(data.get("continuous")),
        measured=_restore_nonfinite(data.get("measured")),
        path=str(path),
    )
    return table, metadata


def compromise_points(metadata: GainsMetadata) -> list[int]:
    """Indices of the points a gains file marks as a best compromise (infeasible), not a design."""
    return [int(entry["index"]) for entry in metadata.points or []
            if isinstance(entry, dict) and entry.get("compromise") is True and isinstance(entry.get("index"), int)]


def provenance_notes(metadata: GainsMetadata, schedule_sha256: str | None = None) -> list[str]:
    """What a gains file's own record says against using it as it is.

    Parameters
    ----------
    metadata : GainsMetadata
        As read by :func:`read_gains`.
    schedule_sha256 : str, optional
        SHA-256 of the schedule it is about to be used with; compared with
        the one it was designed from.

    Returns
    -------
    list of str
        One sentence per finding (empty when the record raises nothing).
    """
    notes = []
    recorded = metadata.schedule_sha256
    if schedule_sha256 is not None and recorded and recorded != schedule_sha256:
        notes.append("the gains file was designed from a different version of this schedule (SHA-256 differs)")
    if metadata.passed is False:
        notes.append("the gains file records a design that did not meet every spec")
    compromises = compromise_points(metadata)
    if compromises:
        notes.append(f"the gains file marks {len(compromises)} point(s) as a best compromise, not a design "
                     f"(indices {', '.join(str(i) for i in compromises[:10])}{', ...' if len(compromises) > 10 else ''})")
    return notes

"""Product families: a variants file, one variant per row, each overriding
some of a schedule's ``parameters``.

Two spellings of the same table (``docs/family.md``):

* CSV: a header row ``name,<parameter>,...`` then one row per variant; an
  empty cell keeps the schedule's value; ``#`` starts a comment line.
* YAML: ``variants:`` a list of mappings ``{name: ..., <parameter>: ...}``.

Every value is a number or an expression of the scheduling variables and
the schedule's parameters, read with the schedule's own expression rules.
Problems are reported at the cell: file, line, column, ``variant.parameter``.

:func:`variant_schedule_text` writes one variant as a complete schedule: the
base file's text with the overridden values (and the name) replaced in
place, so comments and line numbers stay as the user wrote them and the
variant's folder holds the one file its numbers can be recomputed from.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass
from pathlib import Path

import yaml

from .. import limits
from ..errors import ScheduleError
from ..inputs import read_input_file
from ..names import unknown_name_message
from .expressions import Expression, parse_expression
from .nodes import Node, compose_text

__all__ = ["VARIANT_NAME_KEY", "Variant", "read_variants", "variant_schedule_text"]

#: The column (CSV) or key (YAML) naming each variant.
VARIANT_NAME_KEY = "name"

#: Variant names become folder names: a letter first, then letters, digits, ``_`` and ``-``.
_VARIANT_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_-]*\Z")
_MAX_NAME_LENGTH = 64
_STR_TAG = "tag:yaml.org,2002:str"


@dataclass(frozen=True, eq=False)
class Variant:
    """One row of the variants file.

    Attributes
    ----------
    name : str
        Folder-safe name, unique in the file (case-insensitively).
    overrides : dict of str to Expression
        Parameter name to its new value, each with the node (file, line,
        column) it was read from.
    line : int
        Line of the row (CSV) or of the list entry (YAML).
    """

    name: str
    overrides: dict[str, Expression]
    line: int


def read_variants(path: str | Path, parameters: tuple[str, ...], axes: tuple[str, ...]) -> tuple[Variant, ...]:
    """Read and check a variants file against a schedule's names.

    Parameters
    ----------
    path : str or Path
        ``.csv`` or ``.yaml``/``.yml`` file.
    parameters : tuple of str
        The schedule's parameter names (the only ones a variant may set).
    axes : tuple of str
        The scheduling variables (expressions may use them).

    Returns
    -------
    tuple of Variant
        In file order.

    Raises
    ------
    ScheduleError
        At the offending cell: unknown parameter, a value that is not a
        number or a valid expression, a bad or duplicate variant name, an
        empty file, more than ``limits.MAX_VARIANTS`` rows.
    """
    file = str(path)
    suffix = Path(file).suffix.lower()
    if suffix not in (".csv", ".yaml", ".yml"):
        raise ScheduleError(f"variants file must end .csv, .yaml or .yml; got {Path(file).name!r}", file=file)
    data = read_input_file(path, "variants file", limits.MAX_SCHEDULE_BYTES)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        raise ScheduleError(f"variants file is not UTF-8 text (byte {error.start})", file=file) from None
    rows = _csv_rows(text, file) if suffix == ".csv" else _yaml_rows(text, file)
    if not rows:
        raise ScheduleError("variants file lists no variant; expected one row per variant", file=file)
    if len(rows) > limits.MAX_VARIANTS:
        raise ScheduleError(f"variants file lists {len(rows):,} variants; at most {limits.MAX_VARIANTS:,} are "
                            "accepted (limits in docs/schedule-format.md)", file=file)
    known = {a: "variables" for a in axes} | {p: "parameters" for p in parameters}
    seen: dict[str, Node] = {}
    variants = []
    for name_node, cells, line in rows:
        name = _variant_name(name_node)
        first = seen.get(name.lower())
        if first is not None:
            raise name_node.error(f"variant name {name!r} is used twice (first at line {first.line}); "
                                  "each variant needs its own name (names are folder names, compared "
                                  "ignoring case)")
        seen[name.lower()] = name_node
        overrides = {}
        for key, node in cells:
            if key not in parameters:
                raise node.error(unknown_name_message("parameter", key, parameters) +
                                 " (a variant may set only the schedule's parameters)", path=f"{name}.{key}")
            if node.raw.tag == _STR_TAG and node.raw.style is None and not node.raw.value.strip():
                continue  # an empty CSV cell keeps the schedule's value
            value = Node(node.raw, f"{name}.{key}", file)
            expression = parse_expression(value, f"parameter {key!r} of variant {name!r}")
            expression.check_names(known, {"ts": "the sample period 'ts' is not available in parameters"})
            overrides[key] = expression
        variants.append(Variant(name=name, overrides=overrides, line=line))
    return tuple(variants)


def _variant_name(node: Node) -> str:
    value = node.scalar()
    name = str(value) if isinstance(value, (str, int)) and not isinstance(value, bool) else None
    if name is None or not _VARIANT_NAME.match(name) or len(name) > _MAX_NAME_LENGTH:
        raise node.error(f"variant name {node.raw.value!r} must start with a letter and use only letters, "
                         f"digits, '_' and '-' (at most {_MAX_NAME_LENGTH} characters): it names the variant's "
                         "output folder")
    return name


Row = tuple[Node, list[tuple[str, Node]], int]


def _yaml_rows(text: str, file: str) -> list[Row]:
    root = compose_text(text, file)
    if root is None:
        return []
    items = root.mapping(("variants",), required=("variants",))["variants"].sequence(what="variants")
    rows = []
    for item in items:
        keys = item.mapping(required=(VARIANT_NAME_KEY,))
        cells = []
        for key_raw, _ in item.raw.value:
            key = str(key_raw.value)
            if key != VARIANT_NAME_KEY:
                cells.append((key, Node(keys[key].raw, keys[key].path, file)))
        rows.append((keys[VARIANT_NAME_KEY], cells, item.line))
    return rows


def _csv_rows(text: str, file: str) -> list[Row]:
    lines = [(number, line) for number, line in enumerate(text.splitlines(), start=1)
             if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        return []
    header_line, header_text = lines[0]
    header = _csv_fields(header_text, header_line, file)
    names = [str(node.raw.value) for node in header]
    if VARIANT_NAME_KEY not in names:
        hint = " (the file seems to use ';': separate columns with commas)" if ";" in header_text else ""
        raise ScheduleError(f"the header row has no column {VARIANT_NAME_KEY!r}; expected "
                            f"'{VARIANT_NAME_KEY},<parameter>,...'{hint}", file=file, line=header_line)
    for index, node in enumerate(header):
        if not names[index]:
            raise node.error("empty column name in the header row")
        if names[index] in names[:index]:
            raise node.error(f"column {names[index]!r} appears twice in the header row")
    name_column = names.index(VARIANT_NAME_KEY)
    rows = []
    for number, line in lines[1:]:
        fields = _csv_fields(line, number, file)
        if len(fields) != len(names):
            raise ScheduleError(f"row has {len(fields)} cells but the header has {len(names)} columns "
                                f"({', '.join(names)})", file=file, line=number)
        cells = [(names[i], node) for i, node in enumerate(fields) if i != name_column]
        rows.append((fields[name_column], cells, number))
    return rows


def _csv_fields(line: str, number: int, file: str) -> list[Node]:
    """Split one CSV line into scalar nodes that remember their column.

    Quoted cells (``"..."``, ``""`` for a quote) are allowed; a cell may not
    span lines.
    """
    fields, start, index, quoted = [], 0, 0, False
    cell: list[str] = []
    while index <= len(line):
        char = line[index] if index < len(line) else ","
        if quoted:
            if index == len(line):
                raise ScheduleError("unterminated quoted cell (a cell must stay on one line)", file=file,
                                    line=number, column=start + 1)
            if char == '"' and line[index + 1:index + 2] == '"':
                cell.append('"')
                index += 1
            elif char == '"':
                quoted = False
            else:
                cell.append(char)
        elif char == '"' and not "".join(cell).strip():
            quoted, cell = True, []
        elif char == ",":
            value = "".join(cell).strip()
            offset = len("".join(cell)) - len("".join(cell).lstrip())
            mark = yaml.Mark(file, 0, number - 1, start + offset, None, None)
            fields.append(Node(yaml.ScalarNode(_STR_TAG, value, start_mark=mark, end_mark=mark), "", file))
            start, cell = index + 1, []
        else:
            cell.append(char)
        index += 1
    return fields


def _value_text(expression: Expression) -> str:
    """The override as YAML: a plain number, or the expression double-quoted."""
    if not expression.names:
        try:
            return repr(float(expression.source))
        except ValueError:
            pass
    return json.dumps(expression.source)


def variant_schedule_text(base_text: str, base_file: str, variant: Variant, variants_file: str
                          ) -> tuple[str, dict[int, Expression]]:
    """The schedule of one variant: the base text with its values replaced.

    Parameters
    ----------
    base_text : str
        The base schedule file's text (already validated by ``load_schedule``).
    base_file : str
        Its path (for the header comment and errors).
    variant : Variant
    variants_file : str
        Path of the variants file (for the header comment).

    Returns
    -------
    text : str
        A complete schedule: ``name`` becomes ``<name>-<variant>`` and each
        overridden parameter's value is replaced where it stands.
    lines : dict of int to Expression
        Line in ``text`` of each replaced value -> the override, so an error
        found when the variant is loaded can point at the variants file.
    """
    root = compose_text(base_text, base_file)
    keys = root.mapping()
    params = keys["parameters"].mapping() if "parameters" in keys else {}
    name = keys["name"]
    edits = [(name.raw, json.dumps(f"{name.scalar()}-{variant.name}"), None)]
    edits += [(params[key].raw, _value_text(value), value) for key, value in variant.overrides.items()]
    edits.sort(key=lambda edit: edit[0].start_mark.index)
    header = (f"# Variant {json.dumps(variant.name)} of {json.dumps(Path(base_file).name)}, from "
              f"{json.dumps(Path(variants_file).name)} line {variant.line}: written by gainloom family.\n"
              f"# Overridden: {', '.join(variant.overrides) or 'nothing'}.  Gains drive motors: see the "
              "caution in verification.md.\n")
    pieces, lines, cursor = [header], {}, 0
    for raw, new, override in edits:
        start, end = raw.start_mark.index, raw.end_mark.index
        old = base_text[start:end]
        pieces.append(base_text[cursor:start])
        if override is not None:
            lines["".join(pieces).count("\n") + 1] = override
        # a block value's span ends after its trailing line break: keep that break
        pieces.append(new + old[len(old.rstrip()):])
        cursor = end
    pieces.append(base_text[cursor:])
    return "".join(pieces), lines

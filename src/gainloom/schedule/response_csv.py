"""Reading measured frequency responses from CSV files, with located errors.

A file is plain comma-separated text: lines starting with ``#`` and blank
lines are skipped; the first other line is the header.  The header names the
columns ``frequency``, ``magnitude`` and ``phase`` (any order, any case),
each optionally with its unit in brackets or parentheses
(``frequency [Hz]``, ``magnitude (dB)``, ``phase [deg]``), plus one column
per scheduling variable when one file holds every operating point.  Other
columns are ignored.  Every error names the file, line and column (the
character where the field starts).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from .. import limits
from ..errors import ScheduleError
from ..inputs import read_input_file

__all__ = ["UNITS", "ResponseTable", "read_response_csv", "to_response"]

#: Units accepted per quantity (the first is the default nowhere: a unit must
#: be stated, in the header or in the schedule).
UNITS: dict[str, tuple[str, ...]] = {
    "frequency": ("Hz", "rad/s"),
    "magnitude": ("dB", "linear"),
    "phase": ("deg", "rad"),
}
_HEADER = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:[\[(]\s*([^\])]*?)\s*[\])])?\s*$")


@dataclass(frozen=True, eq=False)
class ResponseTable:
    """The numeric columns of one CSV file.

    Attributes
    ----------
    file : str
    columns : dict of str to ndarray
        Values by lower-case column name (``frequency``, ``magnitude``,
        ``phase`` and any scheduling-variable column asked for).
    units : dict of str to str
        Unit per quantity, from the header or the schedule.
    lines : ndarray of int
        1-based line of every row.
    places : dict of str to ndarray of int
        1-based column (character) where each row's field of that name starts.
    """

    file: str
    columns: dict[str, np.ndarray]
    units: dict[str, str]
    lines: np.ndarray
    places: dict[str, np.ndarray]

    def error(self, message: str, row: int, column: str) -> ScheduleError:
        """A :class:`ScheduleError` at ``row``'s field of ``column``."""
        return ScheduleError(message, file=self.file, line=int(self.lines[row]),
                             column=int(self.places[column][row]))


def _fields(text: str) -> tuple[list[str], list[int]]:
    """Fields of one line (stripped, outer quotes removed) and their 1-based columns."""
    fields, starts, position = [], [], 0
    for raw in text.split(","):
        lead = len(raw) - len(raw.lstrip())
        starts.append(position + lead + 1)
        fields.append(raw.strip().strip('"').strip())
        position += len(raw) + 1
    return fields, starts


def _unit(file: str, line: int, column: int, quantity: str, header_unit: str | None, schedule_unit: str | None) -> str:
    known = UNITS[quantity]
    if header_unit is not None and header_unit not in known:
        raise ScheduleError(f"unit {header_unit!r} of column {quantity!r} is not one of {', '.join(known)}",
                            file=file, line=line, column=column)
    if header_unit and schedule_unit and header_unit != schedule_unit:
        raise ScheduleError(f"column {quantity!r} is in {header_unit} but the schedule says {schedule_unit}",
                            file=file, line=line, column=column)
    unit = header_unit or schedule_unit
    if unit is None:
        raise ScheduleError(
            f"the unit of column {quantity!r} is not stated: write it in the header (e.g. '{quantity} "
            f"[{known[0]}]') or in the schedule's plant.measured.units ({', '.join(known)})",
            file=file, line=line, column=column)
    return unit


def _header(file: str, line: int, text: str, needed: tuple[str, ...], units: dict[str, str]):
    fields, starts = _fields(text)
    found: dict[str, int] = {}
    header_units: dict[str, str | None] = {}
    for index, (field, start) in enumerate(zip(fields, starts)):
        match = _HEADER.match(field)
        if not match:
            continue
        name = match.group(1).lower()
        if name in found:
            raise ScheduleError(f"column {name!r} appears twice in the header", file=file, line=line, column=start)
        found[name] = index
        header_units[name] = match.group(2) or None
    missing = [name for name in needed if name not in found]
    if missing:
        raise ScheduleError(
            f"header has no column {', '.join(repr(m) for m in missing)}; expected columns "
            f"{', '.join(needed)} (found: {', '.join(fields) or 'nothing'})", file=file, line=line, column=1)
    resolved = {q: _unit(file, line, starts[found[q]], q, header_units[q], units.get(q)) for q in UNITS}
    return found, resolved


def _number(file: str, line: int, column: int, name: str, text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        shown = text if len(text) <= 30 else text[:30] + "..."
        raise ScheduleError(f"{name} {shown!r} is not a number", file=file, line=line, column=column) from None
    if not math.isfinite(value):
        raise ScheduleError(f"{name} is {text!r}; every sample must be a finite number (delete the row of a "
                            "failed measurement)", file=file, line=line, column=column)
    return value


def read_response_csv(file: str, needed_extra: tuple[str, ...], units: dict[str, str]) -> ResponseTable:
    """Read one response file.

    Parameters
    ----------
    file : str
        Path of the CSV file (a regular file of at most
        :data:`gainloom.limits.MAX_RESPONSE_BYTES`).
    needed_extra : tuple of str
        Further columns required (the scheduling variables when one file
        holds every point).
    units : dict of str to str
        Units given in the schedule per quantity (may be empty).

    Returns
    -------
    ResponseTable

    Raises
    ------
    ScheduleError
        Unreadable file, missing or doubled columns, unknown or missing
        units, a field that is not a finite number, a row with too few
        fields, more rows than :data:`gainloom.limits.MAX_RESPONSE_SAMPLES`.
    """
    data = read_input_file(file, "frequency-response file", limits.MAX_RESPONSE_BYTES)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        raise ScheduleError(f"frequency-response file is not UTF-8 text (byte {error.start})", file=file) from None
    needed = ("frequency", "magnitude", "phase") + tuple(n.lower() for n in needed_extra)
    header = None
    rows: list[list[float]] = []
    lines: list[int] = []
    places: list[list[int]] = []
    for number, content in enumerate(text.splitlines(), start=1):
        if not content.strip() or content.lstrip().startswith("#"):
            continue
        if header is None:
            header, resolved = _header(file, number, content, needed, units)
            continue
        fields, starts = _fields(content)
        if len(fields) <= max(header[n] for n in needed):
            raise ScheduleError(f"row has {len(fields)} fields; the header has {len(header)} columns",
                                file=file, line=number, column=1)
        rows.append([_number(file, number, starts[header[n]], n, fields[header[n]]) for n in needed])
        lines.append(number)
        places.append([starts[header[n]] for n in needed])
        if len(rows) > limits.MAX_RESPONSE_SAMPLES:
            raise ScheduleError(f"more than {limits.MAX_RESPONSE_SAMPLES:,} samples; at most that many are read "
                                "(limits in docs/schedule-format.md)", file=file, line=number, column=1)
    if header is None:
        raise ScheduleError("frequency-response file holds no header line (frequency, magnitude, phase)", file=file)
    values = np.array(rows, dtype=float).reshape(-1, len(needed))
    columns_at = np.array(places, dtype=int).reshape(-1, len(needed))
    return ResponseTable(file=file, columns={name: values[:, i] for i, name in enumerate(needed)}, units=resolved,
                         lines=np.array(lines, dtype=int),
                         places={name: columns_at[:, i] for i, name in enumerate(needed)})


def to_response(table: ResponseTable, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies in rad/s and the complex response of the selected rows (file order).

    Raises
    ------
    ScheduleError
        At the field: a frequency that is not positive or does not rise
        from the row before, a linear magnitude that is not positive.
    """
    frequency = table.columns["frequency"][rows]
    magnitude = table.columns["magnitude"][rows]
    phase = table.columns["phase"][rows]
    bad = np.flatnonzero(frequency <= 0)
    if bad.size:
        raise table.error(f"frequency must be positive; found {frequency[bad[0]]:g}", rows[bad[0]], "frequency")
    bad = np.flatnonzero(np.diff(frequency) <= 0)
    if bad.size:
        k = bad[0] + 1
        raise table.error(f"frequencies must rise strictly; {frequency[k]:g} follows {frequency[k - 1]:g} "
                          f"(line {int(table.lines[rows[k - 1]])})", rows[k], "frequency")
    if table.units["magnitude"] == "linear":
        bad = np.flatnonzero(magnitude <= 0)
        if bad.size:
            raise table.error(f"linear magnitude must be positive; found {magnitude[bad[0]]:g}", rows[bad[0]],
                              "magnitude")
    w = frequency * (2 * np.pi if table.units["frequency"] == "Hz" else 1.0)
    gain = 10.0 ** (magnitude / 20.0) if table.units["magnitude"] == "dB" else magnitude
    angle = np.radians(phase) if table.units["phase"] == "deg" else phase
    return w, gain * np.exp(1j * angle)

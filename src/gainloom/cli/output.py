"""Shared printing for the commands: aligned text tables and JSON."""

from __future__ import annotations

import json
import math
import sys
from collections.abc import Sequence
from typing import Any, TextIO

from ..plain import to_plain

__all__ = ["print_json", "format_table", "format_number"]


def print_json(value: Any, stream: TextIO | None = None) -> None:
    """Print ``value`` as sorted, indented strict JSON."""
    json.dump(to_plain(value, "null"), stream or sys.stdout, indent=2, sort_keys=True, allow_nan=False)
    (stream or sys.stdout).write("\n")


def format_number(value: float | None, digits: int = 6) -> str:
    """Format a float compactly with ``digits`` significant digits."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-" if value is None else str(value)
    return f"{value:.{digits}g}"


def format_table(headers: Sequence[str], rows: Sequence[Sequence[Any]]) -> str:
    """Return a plain-text table, columns left-aligned, floats formatted."""
    cells = [[format_number(c) if isinstance(c, float) else str(c) for c in row] for row in rows]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, h in enumerate(headers)]
    lines = ["  ".join(h.ljust(w) for h, w in zip(headers, widths)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(c.ljust(w) for c, w in zip(row, widths)).rstrip() for row in cells]
    return "\n".join(lines)

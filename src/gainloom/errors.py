"""The small error hierarchy every layer raises from.

The CLI turns any :class:`GainloomError` into one message on stderr and the
error's ``exit_code`` (2 for bad input); anything else is a bug and keeps its
traceback.
"""

from __future__ import annotations

__all__ = ["GainloomError", "InputError", "ScheduleError", "DesignError", "CodegenError"]


class GainloomError(Exception):
    """Base class of every error gainloom raises on purpose."""

    exit_code: int = 2


class InputError(GainloomError, ValueError):
    """A bad argument to a public function or a CLI option."""


class ScheduleError(GainloomError, ValueError):
    """A schedule (or gains) file that cannot be used as written.

    Parameters
    ----------
    message : str
        What was found and what was expected.
    file : str, optional
        Path of the offending file.
    line, column : int, optional
        1-based position of the offending YAML node.
    key_path : str, optional
        Dotted key path with list indices, e.g. ``plant.denominator[1]``.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        line: int | None = None,
        column: int | None = None,
        key_path: str | None = None,
    ) -> None:
        self.message = message
        self.file = file
        self.line = line
        self.column = column
        self.key_path = key_path
        super().__init__(str(self))

    def __str__(self) -> str:
        where = ""
        if self.file is not None:
            where = self.file
            if self.line is not None:
                where += f":{self.line}"
                if self.column is not None:
                    where += f":{self.column}"
            where += ": "
        key = f"{self.key_path}: " if self.key_path else ""
        return f"{where}{key}{self.message}"


class DesignError(GainloomError):
    """A design request that cannot be carried out (not an infeasible point:
    infeasible points are results, reported with their binding spec)."""


class CodegenError(GainloomError):
    """Code generation refused its input (bad identifier, format, template)."""

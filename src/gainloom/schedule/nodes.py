"""YAML nodes that remember where they came from.

The schedule is *composed* with :class:`yaml.SafeLoader` (never constructed
with an unsafe loader), so every value keeps its line and column.  A
:class:`Node` pairs one composed YAML node with its key path
(``plant.transfer_function.denominator[1]``) so that any check can raise a
:class:`~gainloom.errors.ScheduleError` that points at the exact spot.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from difflib import get_close_matches
from typing import Any

import yaml

from ..errors import ScheduleError
from ..limits import size_text
from ..names import unknown_name_message

__all__ = ["Node", "compose_text", "did_you_mean"]

_SCALAR_TAGS = {
    "tag:yaml.org,2002:str": "text",
    "tag:yaml.org,2002:int": "integer",
    "tag:yaml.org,2002:float": "number",
    "tag:yaml.org,2002:bool": "boolean",
    "tag:yaml.org,2002:null": "null",
}


def did_you_mean(name: str, known: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest known name, or ``""``."""
    close = get_close_matches(str(name), list(known), n=1)
    return f" (did you mean {close[0]!r}?)" if close else ""


def compose_text(text: str, file: str) -> Node | None:
    """Compose YAML ``text`` into a root :class:`Node` (``None`` for an empty document).

    Syntax errors become one :class:`ScheduleError` at the parser's mark.
    """
    try:
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as error:
        mark = error.problem_mark or error.context_mark
        problem = error.problem or error.context or "cannot parse"
        context = f" ({error.context})" if error.context and error.problem else ""
        raise ScheduleError(
            f"YAML syntax error: {problem}{context}",
            file=file,
            line=None if mark is None else mark.line + 1,
            column=None if mark is None else mark.column + 1,
        ) from None
    except yaml.YAMLError as error:  # reader errors (e.g. control characters)
        raise ScheduleError(f"YAML error: {error}", file=file) from None
    return None if root is None else Node(root, "", file)


@dataclass(frozen=True)
class Node:
    """One composed YAML node plus its key path and file.

    Parameters
    ----------
    raw : yaml.Node
        The composed node (carries ``start_mark``).
    path : str
        Key path from the document root, ``""`` for the root.
    file : str
        Path of the schedule file, for messages.
    """

    raw: yaml.Node
    path: str
    file: str

    # -- positions and errors -------------------------------------------------
    @property
    def line(self) -> int:
        """1-based line of the node."""
        return self.raw.start_mark.line + 1

    @property
    def column(self) -> int:
        """1-based column of the node."""
        return self.raw.start_mark.column + 1

    def error(self, message: str, *, column_offset: int = 0, path: str | None = None) -> ScheduleError:
        """Return a :class:`ScheduleError` located at this node."""
        key = self.path if path is None else path
        return ScheduleError(
            message, file=self.file, line=self.line, column=self.column + column_offset, key_path=key or None
        )

    def child_path(self, key: str | int) -> str:
        """Key path of a mapping key or sequence index below this node."""
        if isinstance(key, int):
            return f"{self.path}[{key}]"
        return f"{self.path}.{key}" if self.path else str(key)

    # -- kinds ------------------------------------------------------------------
    @property
    def is_mapping(self) -> bool:
        return isinstance(self.raw, yaml.MappingNode)

    @property
    def is_sequence(self) -> bool:
        return isinstance(self.raw, yaml.SequenceNode)

    @property
    def is_scalar(self) -> bool:
        return isinstance(self.raw, yaml.ScalarNode)

    @property
    def kind(self) -> str:
        """Plain word for what the node holds, for messages."""
        if self.is_mapping:
            return "a mapping"
        if self.is_sequence:
            return "a list"
        return {
            "text": "text",
            "integer": "an integer",
            "number": "a number",
            "boolean": "a boolean",
            "null": "null",
        }.get(_SCALAR_TAGS.get(self.raw.tag, ""), f"a value tagged {self.raw.tag}")

    @property
    def is_null(self) -> bool:
        return self.is_scalar and self.raw.tag == "tag:yaml.org,2002:null"

    @property
    def single_line_offset(self) -> int | None:
        """Column shift from the node start to the scalar's first character.

        ``None`` when the scalar spans several lines (then positions inside it
        cannot be mapped to file columns).
        """
        raw = self.raw
        if not self.is_scalar or raw.start_mark.line != raw.end_mark.line:
            return None
        return 1 if raw.style in ("'", '"') else 0

    # -- values -----------------------------------------------------------------
    def scalar(self) -> Any:
        """The Python value of a scalar node (str, int, float, bool or None)."""
        if not self.is_scalar:
            raise self.error(f"expected a single value; found {self.kind}")
        if self.raw.tag not in _SCALAR_TAGS:
            raise self.error(f"unsupported YAML tag {self.raw.tag!r}; write plain numbers and text")
        loader = yaml.SafeLoader("")
        try:
            return loader.construct_object(self.raw, deep=True)
        except yaml.YAMLError as error:
            raise self.error(f"cannot read value: {error}") from None
        except (ValueError, TypeError, OverflowError):  # e.g. !!float abc, !!int 1.5
            shown = self.raw.value if len(self.raw.value) <= 40 else self.raw.value[:40] + "..."
            raise self.error(f"{shown!r} cannot be read as {self.kind}; write a plain number or text") from None
        finally:
            loader.dispose()

    def mapping(self, allowed: Iterable[str] | None = None, required: Iterable[str] = ()) -> dict[str, Node]:
        """Children of a mapping node by key, after checking the keys.

        Parameters
        ----------
        allowed : iterable of str, optional
            Known keys; any other key is refused with "did you mean".
            ``None`` accepts any key (names defined by the user).
        required : iterable of str
            Keys that must be present.
        """
        if not self.is_mapping:
            raise self.error(f"expected a mapping (key: value lines); found {self.kind}")
        allowed = None if allowed is None else tuple(allowed)
        children: dict[str, Node] = {}
        for key_raw, value_raw in self.raw.value:
            key_node = Node(key_raw, self.path, self.file)
            if not key_node.is_scalar or key_raw.tag not in (
                "tag:yaml.org,2002:str",
                "tag:yaml.org,2002:int",
                "tag:yaml.org,2002:float",
                "tag:yaml.org,2002:bool",
            ):
                raise key_node.error(f"keys must be plain names; found {key_node.kind}")
            key = str(key_raw.value)
            path = self.child_path(key)
            if key in children:
                raise Node(key_raw, path, self.file).error(f"duplicate key {key!r}")
            if allowed is not None and key not in allowed:
                kind = "key" if self.path else "top-level key"
                raise Node(key_raw, path, self.file).error(unknown_name_message(kind, key, allowed))
            children[key] = Node(value_raw, path, self.file)
        for key in required:
            if key not in children:
                where = f"{self.path}" if self.path else "the schedule"
                raise self.error(f"missing required key {key!r} in {where}", path=self.child_path(key))
        return children

    def sequence(self, min_length: int = 0, what: str = "entries") -> list[Node]:
        """Children of a list node, checking a minimum length."""
        if not self.is_sequence:
            raise self.error(f"expected a list; found {self.kind}")
        items = [Node(raw, self.child_path(i), self.file) for i, raw in enumerate(self.raw.value)]
        if len(items) < min_length:
            raise self.error(f"expected at least {min_length} {what}; found {len(items)}")
        return items

    def text(self) -> str:
        """A scalar read as text (numbers are refused)."""
        value = self.scalar()
        if not isinstance(value, str):
            raise self.error(f"expected text; found {self.kind}")
        return value

    def number(self) -> float:
        """A finite real number (integers accepted, booleans refused)."""
        value = self.scalar()
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.error(f"expected a number; found {self.kind} {self.raw.value!r}")
        try:
            value = float(value)
        except OverflowError:  # an integer beyond the float range
            value = math.inf
        if not math.isfinite(value):
            raise self.error(f"expected a finite number; found {self.brief()}")
        return value

    def brief(self) -> str:
        """The scalar as written, for messages (a long one is described, not quoted)."""
        text = self.raw.value
        return repr(text) if len(text) <= 40 else f"a number of {len(text)} characters"

    def integer(self) -> int:
        """An integer (a float with an integral value is accepted)."""
        value = self.scalar()
        if isinstance(value, float) and value.is_integer():
            return int(value)
        if isinstance(value, bool) or not isinstance(value, int):
            raise self.error(f"expected an integer; found {self.kind} {self.raw.value!r}")
        return value

    def count(self, what: str, low: int, high: int) -> int:
        """An integer in ``[low, high]``, refused with both bounds otherwise.

        Parameters
        ----------
        what : str
            What is counted, for the message (e.g. ``"sweep count"``).
        low, high : int
            Smallest and largest value accepted.
        """
        value = self.integer()
        if value < low:
            raise self.error(f"{what} must be at least {low}; found {size_text(value)}")
        if value > high:
            raise self.error(f"{what} is {size_text(value)}; at most {size_text(high)} are accepted (limits in docs/schedule-format.md)")
        return value

    def boolean(self) -> bool:
        """A YAML boolean (true/false)."""
        value = self.scalar()
        if not isinstance(value, bool):
            raise self.error(f"expected true or false; found {self.kind} {self.raw.value!r}")
        return value

    def choice(self, kind: str, known: tuple[str, ...]) -> str:
        """Text that must be one of ``known``."""
        value = self.scalar()
        if not isinstance(value, str) or value not in known:
            raise self.error(unknown_name_message(kind, str(self.raw.value), known))
        return value

"""Safe arithmetic expressions, evaluated on numpy arrays of operating points.

An expression is parsed with :func:`ast.parse` and accepted only if every node
of the tree is on a short whitelist: numbers, names, ``+ - * / **``, unary
``-``/``+``, parentheses and calls of the functions in :data:`FUNCTIONS`.
Nothing is ever passed to ``eval``/``exec``; evaluation walks the checked tree
and applies numpy ufuncs, so one call evaluates every operating point at once.
"""

from __future__ import annotations

import ast
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np

from ..errors import ScheduleError
from ..limits import MAX_EXPRESSION_DEPTH, MAX_EXPRESSION_LENGTH
from .nodes import Node, did_you_mean

__all__ = ["Expression", "FUNCTIONS", "CONSTANTS", "parse_expression"]


def _reduce(ufunc: Callable) -> Callable:
    def apply(*args: np.ndarray) -> np.ndarray:
        result = args[0]
        for arg in args[1:]:
            result = ufunc(result, arg)
        return result

    return apply


#: Functions an expression may call: name -> (numpy implementation, number of
#: arguments; ``None`` = two or more).
FUNCTIONS: dict[str, tuple[Callable, int | None]] = {
    "sqrt": (np.sqrt, 1),
    "exp": (np.exp, 1),
    "log": (np.log, 1),
    "log10": (np.log10, 1),
    "sin": (np.sin, 1),
    "cos": (np.cos, 1),
    "tan": (np.tan, 1),
    "abs": (np.abs, 1),
    "min": (_reduce(np.minimum), None),
    "max": (_reduce(np.maximum), None),
}

#: Named constants an expression may use.
CONSTANTS: dict[str, float] = {"pi": math.pi}

_BINARY = {ast.Add: np.add, ast.Sub: np.subtract, ast.Mult: np.multiply, ast.Div: np.divide, ast.Pow: np.power}
_UNARY = {ast.USub: np.negative, ast.UAdd: np.positive}
_HINTS = {
    ast.BitXor: "use ** for powers, not ^",
    ast.Compare: "comparisons are not supported; use min() and max() for steps and limits",
    ast.IfExp: "conditionals are not supported; use min() and max() for steps and limits",
    ast.BoolOp: "and/or are not supported",
    ast.Attribute: "attribute access is not supported",
    ast.Subscript: "indexing is not supported",
    ast.FloorDiv: "// is not supported; use /",
    ast.Mod: "% is not supported",
}


@dataclass(frozen=True, eq=False)
class Expression:
    """A checked expression tied to the YAML node it came from.

    Parameters
    ----------
    source : str
        The text as written (or the number, formatted).
    tree : ast.expr
        The whitelisted tree.
    names : frozenset of str
        Names the expression uses (constants such as ``pi`` excluded).
    node : Node
        Where the expression was written, for error messages.
    name_offsets : dict of str to int
        Column shift from the node start to the first use of each name
        (only for one-line scalars), so errors point at the name.
    """

    source: str
    tree: ast.expr
    names: frozenset
    node: Node
    name_offsets: dict = field(default_factory=dict)

    @property
    def constant(self) -> bool:
        """True when the expression names no variable or parameter."""
        return not self.names

    def check_names(self, known: Mapping[str, str], unavailable: Mapping[str, str] | None = None) -> None:
        """Refuse names that are not in ``known`` (name -> what it is).

        ``unavailable`` maps names that exist elsewhere but not here to the
        reason, e.g. the sample period ``ts`` inside a parameter.
        """
        for name in sorted(self.names):
            if unavailable and name in unavailable and name not in known:
                raise self.node.error(
                    f"name {name!r} cannot be used here: {unavailable[name]}",
                    column_offset=self.name_offsets.get(name, 0),
                )
            if name not in known:
                groups: dict[str, list[str]] = {}
                for other, what in known.items():
                    groups.setdefault(what, []).append(other)
                listing = "; ".join(f"{what}: {', '.join(sorted(n))}" for what, n in groups.items()) or "none"
                hint = did_you_mean(name, list(known) + list(FUNCTIONS) + list(CONSTANTS))
                raise self.node.error(
                    f"unknown name {name!r} in expression {self.source!r}; known {listing}{hint}",
                    column_offset=self.name_offsets.get(name, 0),
                )

    def evaluate(self, env: Mapping[str, np.ndarray], count: int) -> np.ndarray:
        """Evaluate at ``count`` points; ``env`` maps names to arrays of shape (count,).

        Non-finite results are returned as they are (the caller says which
        operating point went wrong); floating-point warnings are silenced
        here on purpose for that reason.
        """
        with np.errstate(all="ignore"):
            value = _walk(self.tree, env)
        return np.broadcast_to(np.asarray(value, dtype=float), (count,)).copy()


def _walk(tree: ast.expr, env: Mapping[str, np.ndarray]) -> np.ndarray | float:
    if isinstance(tree, ast.Constant) and isinstance(tree.value, int | float):
        return float(tree.value)
    if isinstance(tree, ast.Name):
        if tree.id in CONSTANTS:
            return CONSTANTS[tree.id]
        return env[tree.id]
    if isinstance(tree, ast.BinOp):
        left = np.asarray(_walk(tree.left, env), dtype=float)
        right = np.asarray(_walk(tree.right, env), dtype=float)
        return _BINARY[type(tree.op)](left, right)
    if isinstance(tree, ast.UnaryOp):
        return _UNARY[type(tree.op)](np.asarray(_walk(tree.operand, env), dtype=float))
    if isinstance(tree, ast.Call):
        function, _ = FUNCTIONS[tree.func.id]  # type: ignore[attr-defined]
        return function(*[np.asarray(_walk(arg, env), dtype=float) for arg in tree.args])
    raise AssertionError(f"unchecked node {type(tree).__name__}")  # _check refuses everything else


def _finite(value: int | float) -> bool:
    try:
        return math.isfinite(float(value))
    except OverflowError:  # an integer beyond the float range
        return False


def parse_expression(node: Node, what: str = "expression") -> Expression:
    """Read a number or an expression string from ``node``.

    Parameters
    ----------
    node : Node
        A scalar YAML node: an integer, a float or a text expression.
    what : str
        What the value is, for messages (e.g. ``"sample period"``).

    Raises
    ------
    ScheduleError
        Wrong type, syntax error (column points into the expression when the
        scalar is on one line) or a construct outside the whitelist.
    """
    value = node.scalar() if node.is_scalar else None
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise node.error(f"expected a number or an expression for the {what}; found {node.kind}")
    if isinstance(value, (int, float)):
        if not _finite(value):
            raise node.error(f"expected a finite number for the {what}; found {node.brief()}")
        return Expression(repr(value), ast.Constant(float(value)), frozenset(), node)
    text = value.strip()
    if not text:
        raise node.error(f"empty expression for the {what}")
    if "\n" in text:
        raise node.error(f"expression for the {what} must be on one line")
    if len(text) > MAX_EXPRESSION_LENGTH:
        raise node.error(
            f"expression for the {what} has {len(text):,} characters; at most {MAX_EXPRESSION_LENGTH:,} are "
            "accepted (split it into parameters)"
        )
    try:
        tree = ast.parse(text, mode="eval").body
    except (RecursionError, MemoryError):  # the parser's own stack, before any of our checks
        raise node.error(_too_deep(text, what)) from None
    except SyntaxError as error:
        if "too many nested" in str(error.msg):
            raise node.error(_too_deep(text, what)) from None
        offset = node.single_line_offset
        shift = 0 if offset is None or error.offset is None else offset + error.offset - 1 + (len(value) - len(value.lstrip()))
        raise node.error(
            f"cannot parse expression {text!r} for the {what}: {error.msg}"
            + ("" if error.offset is None else f" at character {error.offset}"),
            column_offset=shift,
        ) from None
    if _depth(tree) > MAX_EXPRESSION_DEPTH:
        raise node.error(_too_deep(text, what))
    names: set[str] = set()
    _check(tree, node, text, names)
    offsets: dict[str, int] = {}
    start = node.single_line_offset
    if start is not None:
        lead = len(value) - len(value.lstrip())
        for item in sorted(
            (n for n in ast.walk(tree) if isinstance(n, ast.Name)), key=lambda n: n.col_offset
        ):
            offsets.setdefault(item.id, start + lead + item.col_offset)
    return Expression(text, tree, frozenset(names), node, offsets)


def _too_deep(text: str, what: str) -> str:
    shown = text if len(text) <= 40 else text[:40] + "..."
    return (
        f"expression {shown!r} for the {what} nests deeper than {MAX_EXPRESSION_DEPTH} levels (parentheses, "
        "signs, operator chains and calls each add one); split it into parameters"
    )


def _depth(tree: ast.AST) -> int:
    """Nesting depth of a tree, found without recursion (the tree may be deep)."""
    deepest = 0
    stack = [(tree, 1)]
    while stack:
        item, level = stack.pop()
        deepest = max(deepest, level)
        if level > MAX_EXPRESSION_DEPTH:
            break
        stack.extend((child, level + 1) for child in ast.iter_child_nodes(item)
                     if not isinstance(child, (ast.operator, ast.unaryop, ast.expr_context)))
    return deepest


def _check(tree: ast.AST, node: Node, text: str, names: set[str]) -> None:
    def refuse(message: str, at: ast.AST) -> ScheduleError:
        offset = node.single_line_offset
        col = getattr(at, "col_offset", None)
        shift = 0 if offset is None or col is None else offset + col
        return node.error(f"{message} in expression {text!r}", column_offset=shift)

    if isinstance(tree, ast.Constant):
        if isinstance(tree.value, bool) or not isinstance(tree.value, (int, float)):
            raise refuse(f"only real numbers are allowed, not {tree.value!r}", tree)
        if not _finite(tree.value):
            raise refuse("a number beyond the floating-point range (about 1.8e308) is not allowed", tree)
        return
    if isinstance(tree, ast.Name):
        if tree.id in FUNCTIONS:
            raise refuse(f"function {tree.id!r} needs arguments in parentheses", tree)
        if tree.id not in CONSTANTS:
            names.add(tree.id)
        return
    if isinstance(tree, ast.BinOp):
        if type(tree.op) not in _BINARY:
            hint = _HINTS.get(type(tree.op), "allowed operators: + - * / **")
            raise refuse(f"operator not allowed ({hint})", tree)
        _check(tree.left, node, text, names)
        _check(tree.right, node, text, names)
        return
    if isinstance(tree, ast.UnaryOp):
        if type(tree.op) not in _UNARY:
            raise refuse("only unary minus and plus are allowed", tree)
        _check(tree.operand, node, text, names)
        return
    if isinstance(tree, ast.Call):
        if not isinstance(tree.func, ast.Name):
            raise refuse(f"only calls of the functions {', '.join(FUNCTIONS)} are allowed", tree)
        if tree.func.id not in FUNCTIONS:
            hint = did_you_mean(tree.func.id, FUNCTIONS)
            raise refuse(f"unknown function {tree.func.id!r}; known: {', '.join(FUNCTIONS)}{hint}", tree)
        if tree.keywords:
            raise refuse(f"function {tree.func.id!r} takes no keyword arguments", tree)
        _, arity = FUNCTIONS[tree.func.id]
        if arity is None and len(tree.args) < 2:
            raise refuse(f"function {tree.func.id!r} needs two or more arguments", tree)
        if arity is not None and len(tree.args) != arity:
            raise refuse(f"function {tree.func.id!r} takes {arity} argument; got {len(tree.args)}", tree)
        for arg in tree.args:
            if isinstance(arg, ast.Starred):
                raise refuse("starred arguments are not allowed", arg)
            _check(arg, node, text, names)
        return
    construct_hint = _HINTS.get(type(tree))
    raise refuse(f"{type(tree).__name__} is not allowed" + (f" ({construct_hint})" if construct_hint else ""), tree)

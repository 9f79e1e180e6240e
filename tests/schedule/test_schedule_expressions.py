"""Safe expressions: results against numpy/math, refusals of everything else."""

from __future__ import annotations

import math

import numpy as np
import pytest
import yaml

from gainloom.errors import ScheduleError
from gainloom.schedule.expressions import parse_expression
from gainloom.schedule.nodes import Node


def _node(text: str) -> Node:
    """Compose ``value: <text>`` and return the value node."""
    root = yaml.compose(f"value: {text}\n", Loader=yaml.SafeLoader)
    return Node(root.value[0][1], "value", "<test>")


def _evaluate(text: str, **names: np.ndarray) -> np.ndarray:
    expression = parse_expression(_node(text))
    count = max([np.size(v) for v in names.values()] + [1])
    return expression.evaluate({k: np.asarray(v, float) for k, v in names.items()}, count)


X = np.array([0.5, 1.0, 2.0, 3.0])


@pytest.mark.parametrize(
    ("text", "reference"),
    [
        # references: the same arithmetic written directly with numpy (reference library)
        ('"2.0e-4 * (1 + x / 6000)"', 2.0e-4 * (1 + X / 6000)),
        ('"-x ** 2 + +x"', -(X**2) + X),
        ('"sqrt(x) + exp(-x) + log(x) + log10(x)"', np.sqrt(X) + np.exp(-X) + np.log(X) + np.log10(X)),
        ('"sin(x) * cos(x) / tan(x)"', np.sin(X) * np.cos(X) / np.tan(X)),
        ('"abs(1 - x)"', np.abs(1 - X)),
        ('"min(x, 2) + max(x, 1, 2.5)"', np.minimum(X, 2) + np.maximum(np.maximum(X, 1), 2.5)),
        ('"2 * pi * x"', 2 * math.pi * X),
        ('"1e-4 + (1/8000 - 1/10000) * min(max(x - 1, 0), 1)"', 1e-4 + (1 / 8000 - 1 / 10000) * np.clip(X - 1, 0, 1)),
        ('"2 ** -1"', np.full(4, 0.5)),
    ],
)
def test_expression_matches_numpy(text, reference):
    np.testing.assert_allclose(_evaluate(text, x=X), reference, rtol=1e-15)


def test_numbers_written_as_yaml_numbers_or_text():
    # YAML 1.1 reads "1e-4" (no dot) as text; the expression parser reads it as 1e-4 (from memory: PyYAML float rule)
    assert _evaluate("1e-4")[0] == 1e-4
    assert _evaluate("1.0e-4")[0] == 1e-4
    assert _evaluate("7")[0] == 7.0


def test_names_are_collected():
    expression = parse_expression(_node('"J * (1 + load) + pi"'))
    assert expression.names == {"J", "load"}
    assert not expression.constant


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("\"__import__('os').system('true')\"", "only calls of the functions"),
        ('"(lambda: 1)()"', "only calls of the functions"),
        ('"x.real"', "attribute access is not supported"),
        ('"x[0]"', "indexing is not supported"),
        ('"x if x else 1"', "conditionals are not supported"),
        ('"x > 1"', "comparisons are not supported"),
        ('"x ^ 2"', "use ** for powers"),
        ('"x // 2"', "// is not supported"),
        ('"\'text\'"', "only real numbers are allowed"),
        ('"1j"', "only real numbers are allowed"),
        ('"True"', "only real numbers are allowed"),
        ('"[x for x in y]"', "not allowed"),
        ('"sqrt(x, 2)"', "takes 1 argument"),
        ('"max(x)"', "two or more arguments"),
        ('"sqrt(x=2)"', "no keyword arguments"),
        ('"sqrtt(x)"', "did you mean 'sqrt'"),
        ('"sqrt"', "needs arguments in parentheses"),
        ('"1 +"', "cannot parse expression"),
        ('""', "empty expression"),
        ("true", "expected a number or an expression"),
        ("[1, 2]", "expected a number or an expression"),
    ],
)
def test_refused_constructs(text, fragment):
    with pytest.raises(ScheduleError) as caught:
        parse_expression(_node(text))
    assert fragment in caught.value.message


def test_refusal_column_points_into_the_expression():
    line = 'value: "2 * foo(3)"'
    with pytest.raises(ScheduleError) as caught:
        parse_expression(_node(line.split(": ", 1)[1]))
    # expected column: where "foo" starts on the line, found by text search (1-based)
    assert caught.value.column == line.index("foo") + 1
    assert caught.value.line == 1


def test_unknown_name_suggests_the_closest():
    expression = parse_expression(_node('"Jm * 2"'))
    with pytest.raises(ScheduleError, match="did you mean 'J'"):
        expression.check_names({"J": "parameters", "speed": "variables"})


def test_non_finite_results_are_returned_not_warned():
    # pytest runs with filterwarnings=error: a floating-point warning here would fail the test
    values = _evaluate('"1 / (x - 1)"', x=X)
    assert np.isinf(values[1]) and np.all(np.isfinite(values[[0, 2, 3]]))


# -- property: random arithmetic agrees with sympy (an independent parser and evaluator) --------
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_leaf = st.one_of(
    st.just("x"),
    st.floats(min_value=0.5, max_value=9.5, allow_nan=False).map(lambda v: f"{v:.3f}"),
)


def _combine(children):
    return st.one_of(
        st.tuples(children, st.sampled_from(["+", "-", "*", "/"]), children).map(lambda t: f"({t[0]} {t[1]} {t[2]})"),
        children.map(lambda c: f"-{c}"),
        children.map(lambda c: f"sqrt(abs({c}))"),
        st.tuples(children, children).map(lambda t: f"max({t[0]}, {t[1]})"),
    )


@settings(max_examples=60, deadline=None)
@given(st.recursive(_leaf, _combine, max_leaves=8), st.floats(min_value=0.1, max_value=5.0))
def test_random_expressions_agree_with_sympy(text, x):
    import sympy

    # reference: sympy parses and evaluates the same text independently (Max/Abs/sqrt map by name)
    reference = sympy.sympify(text.replace("max(", "Max(").replace("abs(", "Abs("), locals={"x": sympy.Symbol("x")})
    expected = complex(reference.subs("x", x).evalf(30))
    got = _evaluate(f'"{text}"', x=np.array([x]))[0]
    if not np.isfinite(got) or abs(expected) > 1e12:
        return  # division by (near) zero: both sides blow up; finiteness is checked elsewhere
    assert abs(expected.imag) < 1e-9
    assert got == pytest.approx(expected.real, rel=1e-9, abs=1e-9)

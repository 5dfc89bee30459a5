"""Formulas in x: evaluated against the same formula written in numpy, and the
refusals that keep them safe."""
import math

import numpy as np
import pytest
from scipy.special import erf

from sojourn.model.expression import ExpressionError, evaluate, parse

X = np.linspace(-3.0, 3.0, 241)

CASES = [
    ("0.5 * x**2", lambda x: 0.5 * x ** 2),
    ("-x + 3 - 2/4", lambda x: -x + 3 - 0.5),
    ("exp(-x**2 / 2) * cos(2*pi*x)", lambda x: np.exp(-x ** 2 / 2) * np.cos(2 * np.pi * x)),
    ("sech(x)**2", lambda x: 1 / np.cosh(x) ** 2),
    ("where(x > 0, 1, 0) * where(x < 1, 2.5, 0)", lambda x: np.where((x > 0) & (x < 1), 2.5, 0.0)),
    ("heaviside(x, 0.5)", lambda x: np.heaviside(x, 0.5)),
    ("clip(x, -1, 2) + minimum(x, 0) - maximum(x, 1)",
     lambda x: np.clip(x, -1, 2) + np.minimum(x, 0) - np.maximum(x, 1)),
    ("sqrt(abs(x)) + tanh(x) + arctan(x) + sign(x)",
     lambda x: np.sqrt(np.abs(x)) + np.tanh(x) + np.arctan(x) + np.sign(x)),
    ("erf(x / sqrt(2))", lambda x: erf(x / math.sqrt(2))),
    ("e**x - sinh(x) - cosh(x)", lambda x: np.e ** x - np.sinh(x) - np.cosh(x)),
    ("(x >= 1) * 1.5", lambda x: (x >= 1) * 1.5),
    ("2", lambda x: np.full_like(x, 2.0)),
]


@pytest.mark.parametrize("text, reference", CASES, ids=[c[0] for c in CASES])
def test_values_match_numpy(text, reference):
    values = evaluate(parse(text), X)
    assert values.shape == X.shape and values.dtype == float
    assert np.allclose(values, reference(X), rtol=1e-14, atol=1e-14)


def test_any_shape_of_points():
    grid = np.linspace(0, 1, 12).reshape(3, 4)
    assert np.allclose(evaluate(parse("x**2"), grid), grid ** 2)


def test_the_callers_points_are_not_written():
    x = X.copy()
    evaluate(parse("x * 2"), x)
    assert np.array_equal(x, X)


def test_values_may_be_non_finite_for_the_caller_to_judge():
    values = evaluate(parse("log(x)"), np.array([-1.0, 0.0, 1.0]))
    assert math.isnan(values[0]) and values[1] == -math.inf and values[2] == 0.0


@pytest.mark.parametrize("text, why", [
    ("__import__('os')", "not an allowed function"),
    ("x.real", "Attribute"),
    ("z + 1", "unknown name 'z'"),
    ("lambda: 1", "Lambda"),
    ("[1, 2]", "List"),
    ("'text'", "only numbers"),
    ("True + x", "only numbers"),
    ("sin(x, x)", "takes 1 argument"),
    ("where(x > 0, 1)", "takes 3 argument"),
    ("exp(x=1)", "keyword"),
    ("1 < x < 2", "is not allowed"),
    ("x +", "not a valid formula"),
    ("9**9**9", "not a finite number"),
    ("1/0 + x", "not a finite number"),
    ("ｘ", "plain ASCII"),
    ("(" * 50 + "x" + ")" * 50, "parentheses"),
    ("x" + "+x" * 600, "longer than|more than"),
    ("1e999", "too large"),
])
def test_refusals(text, why):
    with pytest.raises(ExpressionError, match=why):
        parse(text)


def test_a_formula_must_be_a_string():
    with pytest.raises(ExpressionError, match="string"):
        parse(3.0)

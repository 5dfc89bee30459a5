"""Safe arithmetic formulas in x (and y, in the plane; and the time t) for potential terms.

A formula is parsed with `ast` and checked against a whitelist of names,
functions and operators; it is then evaluated by walking the checked tree with
numpy. Nothing is passed to `eval`, and constants are floats, so `9**9**9`
overflows to inf at once instead of building a huge integer.
"""
from __future__ import annotations

import ast
import math
import operator

import numpy as np

MAX_LENGTH = 4000
MAX_NODES = 500
MAX_DEPTH = 40

def erf(a):
    """The error function (scipy's, imported on first use: it is slow to import)."""
    from scipy.special import erf as _erf
    return _erf(a)


FUNCTIONS = {
    "sin": np.sin, "cos": np.cos, "tan": np.tan, "exp": np.exp, "log": np.log,
    "sqrt": np.sqrt, "abs": np.abs, "sinh": np.sinh, "cosh": np.cosh,
    "tanh": np.tanh, "arctan": np.arctan, "arcsin": np.arcsin, "arccos": np.arccos,
    "sign": np.sign, "heaviside": lambda a, b=0.5: np.heaviside(a, b),
    "where": np.where, "minimum": np.minimum, "maximum": np.maximum,
    "clip": np.clip, "sech": lambda a: 1.0 / np.cosh(a), "erf": erf,
}
# how many arguments each function takes: numpy's ufuncs accept an output array
# as an extra positional argument, which must never reach them
ARITY = {name: (1, 1) for name in FUNCTIONS}
ARITY.update({"heaviside": (1, 2), "where": (3, 3), "minimum": (2, 2), "maximum": (2, 2),
              "clip": (3, 3)})
CONSTANTS = {"pi": np.pi, "e": np.e}
VARIABLES = ("x", "y", "t")   # coordinates (y only in the plane) and the time: a formula
                              # using t is a driven potential
BINARY = {ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul,
          ast.Div: operator.truediv, ast.Pow: operator.pow}
UNARY = {ast.USub: operator.neg, ast.UAdd: operator.pos}
COMPARE = {ast.Lt: operator.lt, ast.LtE: operator.le, ast.Gt: operator.gt,
           ast.GtE: operator.ge}


class ExpressionError(ValueError):
    """A formula that is not a plain arithmetic expression in x and t."""


def _check(node: ast.AST, depth: int = 0) -> None:
    if depth > MAX_DEPTH:
        raise ExpressionError(f"nested deeper than {MAX_DEPTH} levels")
    if isinstance(node, ast.Expression):
        return _check(node.body, depth + 1)
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
            raise ExpressionError(f"only numbers are allowed as constants, not "
                                  f"{_short(node.value)}")
        try:
            finite = math.isfinite(float(node.value))
        except OverflowError:
            finite = False
        if not finite:
            raise ExpressionError(f"the number {_short(node.value)} is too large for a float")
        return
    if isinstance(node, ast.Name):
        if node.id not in VARIABLES and node.id not in CONSTANTS:
            raise ExpressionError(
                f"unknown name '{node.id}' (allowed: {', '.join(VARIABLES)}, "
                f"{', '.join(CONSTANTS)}, "
                f"and the functions {', '.join(sorted(FUNCTIONS))})")
        return
    if isinstance(node, ast.BinOp) and type(node.op) in BINARY:
        _check(node.left, depth + 1)
        return _check(node.right, depth + 1)
    if isinstance(node, ast.UnaryOp) and type(node.op) in UNARY:
        return _check(node.operand, depth + 1)
    if isinstance(node, ast.Compare) and len(node.ops) == 1 and type(node.ops[0]) in COMPARE:
        _check(node.left, depth + 1)
        return _check(node.comparators[0], depth + 1)
    if isinstance(node, ast.Call):
        if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS:
            what = node.func.id if isinstance(node.func, ast.Name) else "this call"
            raise ExpressionError(f"'{what}' is not an allowed function "
                                  f"(allowed: {', '.join(sorted(FUNCTIONS))})")
        if node.keywords:
            raise ExpressionError("keyword arguments are not allowed")
        low, high = ARITY[node.func.id]
        if not low <= len(node.args) <= high:
            wanted = str(low) if low == high else f"{low} to {high}"
            raise ExpressionError(f"'{node.func.id}' takes {wanted} argument(s), "
                                  f"not {len(node.args)}")
        for arg in node.args:
            _check(arg, depth + 1)
        return
    raise ExpressionError(f"'{type(node).__name__}' is not allowed in a formula "
                          "(only numbers, x, t, + - * / **, comparisons and whitelisted "
                          "functions)")


def _short(value, limit: int = 40) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[:limit] + "..."


def parse(text: str) -> ast.Expression:
    """Parse and check a formula; raise ExpressionError if it is not allowed."""
    if not isinstance(text, str):
        raise ExpressionError("a formula must be a string")
    if len(text) > MAX_LENGTH:
        raise ExpressionError(f"formula longer than {MAX_LENGTH} characters")
    if not text.isascii():
        # Python folds look-alike letters (NFKC: 'ℯ' is 'e', 'ｘ' is 'x'): refuse them all
        where = next(i for i, c in enumerate(text) if not c.isascii())
        raise ExpressionError(f"only plain ASCII is allowed in a formula (found "
                              f"{text[where]!r} at character {where + 1})")
    if text.count("(") > MAX_DEPTH:
        raise ExpressionError(f"more than {MAX_DEPTH} parentheses")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExpressionError(f"not a valid formula ({exc.msg})") from None
    except (RecursionError, MemoryError):
        raise ExpressionError("formula too deeply nested") from None
    except ValueError as exc:   # e.g. a null character, or an integer of > 4300 digits
        raise ExpressionError(f"not a valid formula ({_short(str(exc), 80)})") from None
    if sum(1 for _ in ast.walk(tree)) > MAX_NODES:
        raise ExpressionError(f"formula has more than {MAX_NODES} parts")
    _check(tree)
    _fold(tree.body)
    return tree


def _fold(node: ast.AST):
    """The value of a part that depends on neither x nor t (None if it does); a constant
    part that is not finite (9**9**9, 1/0, log(0)) is refused here, before any grid."""
    children = [node.left, node.right] if isinstance(node, ast.BinOp) else \
        [node.operand] if isinstance(node, ast.UnaryOp) else \
        [node.left, node.comparators[0]] if isinstance(node, ast.Compare) else \
        list(node.args) if isinstance(node, ast.Call) else []
    values = [_fold(child) for child in children]
    if isinstance(node, ast.Name) and node.id in VARIABLES or any(v is None for v in values):
        return None
    with np.errstate(all="ignore"):
        value = np.asarray(_eval(node, {"x": np.zeros(1)}), dtype=float)
    if not np.all(np.isfinite(value)):
        raise ExpressionError(f"the part {_short(ast.unparse(node))!r} is not a finite number "
                              f"({float(value.flat[0]):g})")
    return value


def _eval(node: ast.AST, env: dict):
    if isinstance(node, ast.Expression):
        return _eval(node.body, env)
    if isinstance(node, ast.Constant):
        return np.float64(float(node.value))
    if isinstance(node, ast.Name):
        return env[node.id] if node.id in VARIABLES else np.float64(CONSTANTS[node.id])
    if isinstance(node, ast.BinOp):
        return BINARY[type(node.op)](_eval(node.left, env), _eval(node.right, env))
    if isinstance(node, ast.UnaryOp):
        return UNARY[type(node.op)](_eval(node.operand, env))
    if isinstance(node, ast.Compare):
        return COMPARE[type(node.ops[0])](_eval(node.left, env),
                                          _eval(node.comparators[0], env))
    if isinstance(node, ast.Call):
        return FUNCTIONS[node.func.id](*[_eval(a, env) for a in node.args])
    raise ExpressionError(f"'{type(node).__name__}' is not allowed")  # unreachable after _check


def variables(tree: ast.Expression) -> set:
    """The names of VARIABLES a checked formula uses."""
    return {n.id for n in ast.walk(tree) if isinstance(n, ast.Name) and n.id in VARIABLES}


def uses_time(tree: ast.Expression) -> bool:
    """Whether a checked formula depends on the time t."""
    return "t" in variables(tree)


def evaluate(tree: ast.Expression, x: np.ndarray, y=None, t: float = 0.0) -> np.ndarray:
    """Values of a checked formula at the points x (and y, broadcast with x, for
    a formula in the plane) and the time t: a float array of the broadcast shape.

    Work and memory are bounded by the checks: at most MAX_NODES operations on
    arrays of x's size, and at most MAX_DEPTH of them alive at once. Values may
    be inf or nan (e.g. log(x) at x <= 0); the caller judges them."""
    if y is None and "y" in variables(tree):
        raise ExpressionError("the formula uses y, which only a grid in the plane has")
    x = np.array(x, dtype=float)   # a read-only copy: nothing can write into the caller's
    env = {"x": x, "t": np.float64(t)}
    if y is not None:
        y = np.array(y, dtype=float)
        x, y = (np.ascontiguousarray(a) for a in np.broadcast_arrays(x, y))
        env = {"x": x, "y": y, "t": np.float64(t)}
        y.flags.writeable = False
    x.flags.writeable = False
    with np.errstate(all="ignore"):
        try:
            values = _eval(tree, env)
            values = np.broadcast_to(np.asarray(values, dtype=float), x.shape).copy()
        except (TypeError, ValueError, OverflowError, ZeroDivisionError) as exc:
            raise ExpressionError(f"cannot evaluate the formula ({_short(str(exc), 80)})") from None
    return values

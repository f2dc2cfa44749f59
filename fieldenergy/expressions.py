"""Safe arithmetic expressions in one variable ``t``, for parametric conductor paths.

A case file can never run code: an expression is parsed with :mod:`ast` and only numbers,
the name ``t``, the constants ``pi`` and ``e``, the operators ``+ - * / **`` (unary and
binary) and the functions in :data:`FUNCTIONS` are accepted. Anything else (other names,
attributes, subscripts, comprehensions, lambdas, keyword arguments, strings ...) is refused
with a message that names what was found. Evaluation is vectorised with NumPy.
"""

from __future__ import annotations

import ast
import math
import warnings
from collections.abc import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fieldenergy.errors import CaseError

#: Functions an expression may call, with their number of arguments.
FUNCTIONS: dict[str, tuple[Callable[..., NDArray[np.float64]], int]] = {
    "sin": (np.sin, 1),
    "cos": (np.cos, 1),
    "tan": (np.tan, 1),
    "asin": (np.arcsin, 1),
    "acos": (np.arccos, 1),
    "atan": (np.arctan, 1),
    "atan2": (np.arctan2, 2),
    "sinh": (np.sinh, 1),
    "cosh": (np.cosh, 1),
    "tanh": (np.tanh, 1),
    "exp": (np.exp, 1),
    "log": (np.log, 1),
    "log10": (np.log10, 1),
    "sqrt": (np.sqrt, 1),
    "abs": (np.abs, 1),
}

#: Named constants an expression may use.
CONSTANTS: dict[str, float] = {"pi": math.pi, "e": math.e}

#: Longest expression accepted (characters); a guard against pathological input.
MAX_LENGTH: int = 2000

#: Deepest expression tree accepted; deeper trees are refused before evaluation.
MAX_DEPTH: int = 50

_BINARY = {
    ast.Add: np.add,
    ast.Sub: np.subtract,
    ast.Mult: np.multiply,
    ast.Div: np.divide,
    ast.Pow: np.power,
}
_UNARY = {ast.UAdd: np.positive, ast.USub: np.negative}

Evaluator = Callable[[NDArray[np.float64]], NDArray[np.float64]]


def compile_expression(text: str, where: str = "expression") -> Callable[[ArrayLike], NDArray[np.float64]]:
    """Check ``text`` and return a vectorised function of ``t``.

    Parameters
    ----------
    text
        The expression, for example ``"0.2*cos(t) + 0.01*sin(3*t)"``.
    where
        What the expression is (used in error messages), for example ``"coil 'knot', key 'x'"``.

    Returns
    -------
    A function mapping an array of ``t`` values to an array of floats of the same shape.

    Raises
    ------
    CaseError
        If the expression is not valid Python arithmetic or uses anything not allowed.

    Examples
    --------
    >>> f = compile_expression("2*t + sin(pi*t)")
    >>> float(f(0.5))
    2.0
    """
    if not isinstance(text, str):
        raise CaseError(f"expected an expression string, got {type(text).__name__}", where=where)
    if len(text) > MAX_LENGTH:
        raise CaseError(f"expression is {len(text)} characters long; at most {MAX_LENGTH} allowed", where=where)
    try:
        with warnings.catch_warnings():
            # The parser warns about odd literals ("\\d", "1 is 1"); the checks below refuse them anyway.
            warnings.simplefilter("ignore")
            tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise CaseError(f"invalid expression {text!r}: {exc.msg}", where=where) from None
    except (ValueError, MemoryError, RecursionError):
        raise CaseError(f"invalid expression {text!r}", where=where) from None
    evaluator = _build(tree.body, text, where, depth=0)

    def evaluate(t: ArrayLike) -> NDArray[np.float64]:
        t_arr = np.asarray(t, dtype=np.float64)
        with np.errstate(all="ignore"):
            out = evaluator(t_arr)
        return np.broadcast_to(np.asarray(out, dtype=np.float64), t_arr.shape).copy()

    return evaluate


def _refuse(what: str, text: str, where: str) -> CaseError:
    allowed = ", ".join(sorted(FUNCTIONS))
    return CaseError(
        f"{what} is not allowed in expression {text!r}; use numbers, t, pi, e, + - * / ** "
        f"and the functions {allowed}",
        where=where,
    )


def _build(node: ast.AST, text: str, where: str, depth: int) -> Evaluator:
    if depth > MAX_DEPTH:
        raise CaseError(f"expression {text!r} is nested more than {MAX_DEPTH} deep", where=where)
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
            raise _refuse(f"the constant {node.value!r}", text, where)
        try:
            value = float(node.value)
        except OverflowError:  # an integer literal beyond the float range
            value = math.inf
        if not math.isfinite(value):
            raise CaseError(f"a number in {text!r} is too large for a float (at most about 1.8e308)", where=where)
        return lambda t: np.full(t.shape, value)
    if isinstance(node, ast.Name):
        if node.id == "t":
            return lambda t: t
        if node.id in CONSTANTS:
            value = CONSTANTS[node.id]
            return lambda t: np.full(t.shape, value)
        raise _refuse(f"the name {node.id!r}", text, where)
    if isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
        op = _BINARY[type(node.op)]
        left = _build(node.left, text, where, depth + 1)
        right = _build(node.right, text, where, depth + 1)
        return lambda t: op(left(t), right(t))
    if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
        uop = _UNARY[type(node.op)]
        operand = _build(node.operand, text, where, depth + 1)
        return lambda t: uop(operand(t))
    if isinstance(node, ast.Call):
        return _build_call(node, text, where, depth)
    raise _refuse(f"'{type(node).__name__}'", text, where)


def _build_call(node: ast.Call, text: str, where: str, depth: int) -> Evaluator:
    if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS:
        name = node.func.id if isinstance(node.func, ast.Name) else type(node.func).__name__
        raise _refuse(f"calling {name!r}", text, where)
    if node.keywords:
        raise _refuse("a keyword argument", text, where)
    func, n_args = FUNCTIONS[node.func.id]
    if len(node.args) != n_args:
        raise CaseError(
            f"{node.func.id}() takes {n_args} argument(s), got {len(node.args)} in {text!r}", where=where
        )
    args = [_build(a, text, where, depth + 1) for a in node.args]
    if n_args == 1:
        (arg,) = args
        return lambda t: func(arg(t))
    first, second = args
    return lambda t: func(first(t), second(t))

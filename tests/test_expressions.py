"""Safe expressions in t: what is allowed, what is refused and why, and vectorised values."""

from __future__ import annotations

import doctest
import math
import warnings

import numpy as np
import pytest

import fieldenergy.expressions as expressions_module
from fieldenergy.errors import CaseError
from fieldenergy.expressions import FUNCTIONS, MAX_DEPTH, MAX_LENGTH, compile_expression

#: Library elementary functions are accurate to a few units in the last place.
FUNC_RTOL = 1e-14


@pytest.mark.parametrize(
    "text, expected",
    [
        ("sin(pi/6)", 0.5),
        ("cos(0)", 1.0),
        ("tan(pi/4)", 1.0),
        ("asin(1)", math.pi / 2),
        ("acos(0)", math.pi / 2),
        ("atan(1)", math.pi / 4),
        ("atan2(1, -1)", 3 * math.pi / 4),
        ("sinh(log(2))", 0.75),  # (2 - 1/2) / 2
        ("cosh(log(2))", 1.25),  # (2 + 1/2) / 2
        ("tanh(log(2))", 0.6),  # 0.75 / 1.25
        ("exp(log(3))", 3.0),
        ("log(e)", 1.0),
        ("log10(1000)", 3.0),
        ("sqrt(2.25)", 1.5),
        ("abs(-2)", 2.0),
        ("2**10 - 3*4 + 8/2 - -1 + +1", 1018.0),
        ("-2**2", -4.0),  # power binds tighter than unary minus
        ("2**3**2", 512.0),  # power is right-associative
    ],
)
def test_allowed_functions_constants_and_operators(text: str, expected: float) -> None:
    assert math.isclose(float(compile_expression(text)(0.0)), expected, rel_tol=FUNC_RTOL, abs_tol=1e-15)


def test_every_listed_function_is_tested() -> None:
    assert sorted(FUNCTIONS) == sorted(
        [
            "sin",
            "cos",
            "tan",
            "asin",
            "acos",
            "atan",
            "atan2",
            "sinh",
            "cosh",
            "tanh",
            "exp",
            "log",
            "log10",
            "sqrt",
            "abs",
        ]
    )


def test_evaluation_is_vectorised() -> None:
    f = compile_expression("0.2*cos(t) + t**2")
    t = np.array([0.0, math.pi, 2.0])
    assert np.allclose(f(t), [0.2, -0.2 + math.pi**2, 0.2 * math.cos(2.0) + 4.0], rtol=FUNC_RTOL, atol=0.0)
    grid = np.arange(6.0).reshape(2, 3)
    assert np.array_equal(compile_expression("2*t")(grid), 2 * grid)
    assert compile_expression("t")(1.5).shape == ()


def test_constant_expression_fills_the_shape_and_can_be_written() -> None:
    out = compile_expression("3")(np.zeros(4))
    assert np.array_equal(out, [3.0, 3.0, 3.0, 3.0])
    out[0] = 7.0  # a fresh array, not a read-only broadcast view
    assert out[0] == 7.0


def test_domain_errors_give_nan_without_warnings() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = compile_expression("log(t) + sqrt(t)")(np.array([-1.0, 1.0]))
    assert math.isnan(out[0]) and out[1] == 1.0  # log(1) + sqrt(1)


@pytest.mark.parametrize(
    "text, found",
    [
        ("x", "the name 'x'"),
        ("__builtins__", "the name '__builtins__'"),
        ("t.real", "'Attribute'"),
        ("__import__('os')", "calling '__import__'"),
        ("eval('1')", "calling 'eval'"),
        ("open('f')", "calling 'open'"),
        ("np.sin(t)", "calling 'Attribute'"),
        ("(lambda: 1)()", "calling 'Lambda'"),
        ("lambda t: t", "'Lambda'"),
        ("[t for t in (1, 2)]", "'ListComp'"),
        ("sum(t for t in (1,))", "calling 'sum'"),
        ("t[0]", "'Subscript'"),
        ("'abc'", "the constant 'abc'"),
        ("b'x'", "the constant b'x'"),
        ("True", "the constant True"),
        ("None", "the constant None"),
        ("1j", "the constant 1j"),
        ("sin(t, out=t)", "a keyword argument"),
        ("sin(*t)", "'Starred'"),
        ("t < 1", "'Compare'"),
        ("1 if t else 2", "'IfExp'"),
        ("(y := 2)", "'NamedExpr'"),
        ("t // 2", "'BinOp'"),
        ("t % 2", "'BinOp'"),
        ("t @ t", "'BinOp'"),
        ("~t", "'UnaryOp'"),
        ("not t", "'UnaryOp'"),
        ("[1, 2]", "'List'"),
        ("(1, 2)", "'Tuple'"),
        ("{1: 2}", "'Dict'"),
        ("f'{t}'", "'JoinedStr'"),
    ],
)
def test_refused_constructs_name_what_was_found(text: str, found: str) -> None:
    with pytest.raises(CaseError) as info:
        compile_expression(text, "coil 'k', key 'path.x'")
    assert info.value.where == "coil 'k', key 'path.x'"
    assert info.value.message.startswith(f"{found} is not allowed in expression {text!r}; use numbers, t, pi, e")
    assert "atan2" in info.value.message  # the allowed functions are listed


@pytest.mark.parametrize(
    "text, message",
    [
        ("sin()", "sin() takes 1 argument(s), got 0 in 'sin()'"),
        ("sin(t, t)", "sin() takes 1 argument(s), got 2 in 'sin(t, t)'"),
        ("atan2(t)", "atan2() takes 2 argument(s), got 1 in 'atan2(t)'"),
        ("sin(t", "invalid expression 'sin(t': '(' was never closed"),
        ("", "invalid expression '': invalid syntax"),
        ("t\x00", "invalid expression 't\\x00'"),
        ("1e999", "a number in '1e999' is too large for a float"),
        ("9" * 400 + "*t", "is too large for a float (at most about 1.8e308)"),
    ],
)
def test_malformed_expressions(text: str, message: str) -> None:
    with pytest.raises(CaseError) as info:
        compile_expression(text, "here")
    assert message in info.value.message and info.value.where == "here"


def test_non_string_is_refused() -> None:
    with pytest.raises(CaseError, match="expected an expression string, got int"):
        compile_expression(3)  # type: ignore[arg-type]


def test_nesting_depth_limit() -> None:
    assert float(compile_expression("-" * MAX_DEPTH + "t")(1.0)) == 1.0  # even count of minus signs
    with pytest.raises(CaseError, match=f"is nested more than {MAX_DEPTH} deep"):
        compile_expression("-" * (MAX_DEPTH + 1) + "t")
    with pytest.raises(CaseError, match=f"is nested more than {MAX_DEPTH} deep"):
        compile_expression("sin(" * 60 + "t" + ")" * 60)


def test_very_deep_parentheses_are_refused_not_crashing() -> None:
    with pytest.raises(CaseError, match="invalid expression"):
        compile_expression("(" * 900 + "t" + ")" * 900)


def test_length_limit() -> None:
    padded = "t" + " " * (MAX_LENGTH - 1)
    assert float(compile_expression(padded)(2.0)) == 2.0
    with pytest.raises(
        CaseError, match=f"expression is {MAX_LENGTH + 1} characters long; at most {MAX_LENGTH} allowed"
    ):
        compile_expression(padded + " ")


def test_parser_warnings_do_not_escape() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(CaseError, match="the constant"):
            compile_expression("'\\d'")
        with pytest.raises(CaseError, match="'Compare'"):
            compile_expression("1 is 1")


def test_docstring_example_runs() -> None:
    result = doctest.testmod(expressions_module)
    assert result.attempted >= 1 and result.failed == 0

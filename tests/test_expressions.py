"""Parameter expressions (drc/expressions.py, grammar/expression.lark), checked against
ngspice's own evaluation of the same `.param` and `{}` expressions, and against IEEE 754
double arithmetic as Python's float gives it."""

import math
import os
import sys

import pytest
from hypothesis import given, settings, strategies as st

sys.path.insert(0, os.path.dirname(__file__))
from ngspice import op  # noqa: E402

from drc.expressions import ExpressionError, evaluate, names_in  # noqa: E402

SCOPE = {"a": 3.0, "b": 4.0, "rbase": 1000.0}

# Expressions both drc and ngspice read the same way (ngspice 39, numparam).
SHARED = [
    "sqrt(a*a+b*b)", "2**3", "2^3", "a > b ? 1 : 2", "a < b ? 1 : 2", "(a < b) && (b > 1)",
    "(a > b) || (b > 10)", "min(a, b) + max(a, b)*10", "log10(1000) + log(exp(2))",
    "pow(2, 10)", "abs(-a) - (-b)", "a == 3", "a != 3", "a >= 3", "a <= 2.5", "-2**2",
    "1k/4 + 2meg*1e-6", "10 - 4 - 3", "12 / 3 / 2", "rbase/2 + 1", "2*(a+b)*(a-b)",
    "-a*b", "exp(1)", "sqrt(2.5u)", "10**-2", "max(a, b, 7)",
]


def test_expressions_match_ngspice():
    lines = ["expressions", ".param a = 3 b = 4", ".param rbase = 1k"]
    for k, text in enumerate(SHARED):
        lines += [f"V{k} n{k} 0 {{{text}}}", f"R{k} n{k} 0 1k"]
    lines.append(".end")
    got = op("\n".join(lines), [f"v(n{k})" for k in range(len(SHARED))])[None]
    for k, text in enumerate(SHARED):
        # ngspice 39: the same expression as a source's value (7 significant digits printed)
        assert evaluate(text, SCOPE) == pytest.approx(got[f"v(n{k})"], rel=1e-6, abs=1e-12), text


def test_quoted_expression_matches_ngspice():
    text = "a*rbase + 0.5k"
    got = op(f"q\n.param a = 3 rbase = 1k\nV1 n 0 '{text}'\nR1 n 0 1k\n.end\n", ["v(n)"])[None]
    # ngspice 39: a '...' expression is evaluated like a {...} one
    assert evaluate(text, SCOPE) == pytest.approx(got["v(n)"], rel=1e-6)


def test_power_chains_right_to_left():
    # Differs from ngspice on purpose: ngspice 39 reads 2**3**2 left to right (64); drc
    # reads it as mathematics and most languages do (2**(3**2), 512; common practice).
    assert evaluate("2**3**2", {}) == 2.0 ** 9


def test_logic_not():
    # common practice (C-like operators): !x is 1 when x is 0, else 0
    assert evaluate("!(a == 3)", SCOPE) == 0.0
    # common practice (C-like operators)
    assert evaluate("!0", {}) == 1.0


# Random arithmetic over small integers, compared with IEEE 754 double arithmetic.
_leaf = st.integers(min_value=1, max_value=9).map(str)


def _combine(children):
    return st.tuples(children, st.sampled_from(["+", "-", "*", "/"]), children).map(
        lambda t: f"({t[0]} {t[1]} {t[2]})")


@settings(max_examples=300, deadline=None)
@given(st.recursive(_leaf, _combine, max_leaves=12))
def test_arithmetic_matches_ieee_doubles(text):
    try:
        expected = _python_value(text)
    except ZeroDivisionError:
        with pytest.raises(ExpressionError):
            evaluate(text, {})
        return
    # IEEE 754 double arithmetic (Python floats), the same operations in the same order
    assert evaluate(text, {}) == pytest.approx(expected, rel=1e-12, abs=1e-300)


def _python_value(text: str) -> float:
    # a tiny recursive-descent reference over fully parenthesised (a op b) forms
    text = text.replace(" ", "")

    def parse(i):
        if text[i] == "(":
            left, i = parse(i + 1)
            operator = text[i]
            right, i = parse(i + 1)
            assert text[i] == ")"
            value = {"+": left + right, "-": left - right, "*": left * right}.get(operator)
            if operator == "/":
                value = left / right
            return value, i + 1
        return float(text[i]), i + 1

    return parse(0)[0]


def test_functions_against_math_library():
    # C99 / IEEE 754 libm (Python's math module): the functions the issue names
    assert evaluate("sqrt(2)", {}) == pytest.approx(math.sqrt(2), rel=1e-15)
    # C99 libm
    assert evaluate("exp(0.5)", {}) == pytest.approx(math.exp(0.5), rel=1e-15)
    # C99 libm: log is the natural logarithm, as in ngspice
    assert evaluate("log(10)", {}) == pytest.approx(math.log(10), rel=1e-15)
    # C99 libm
    assert evaluate("log10(2)", {}) == pytest.approx(math.log10(2), rel=1e-15)
    # C99 libm
    assert evaluate("pow(1.5, 2.5)", {}) == pytest.approx(1.5 ** 2.5, rel=1e-15)


@pytest.mark.parametrize("text,message", [
    ("nosuch + 1", "undefined parameter 'nosuch'"),
    ("1 / 0", "division by zero"),
    ("sqrt(-1)", "negative"),
    ("log(0)", "not positive"),
    ("frob(1)", "unknown function 'frob'"),
    ("pow(2)", "takes 2 argument"),
    ("(1 + 2", "ends too early"),
    ("1 +* 2", "unexpected"),
    ("exp(1e6)", "overflows"),
])
def test_errors(text, message):
    # common practice: an expression with no finite real value is an error, not a number
    with pytest.raises(ExpressionError, match=message):
        evaluate(text, {})


def test_undefined_name_points_at_it():
    with pytest.raises(ExpressionError) as caught:
        evaluate("2*a + zz", SCOPE)
    # the offset is where 'zz' stands in the text
    assert caught.value.offset == "2*a + zz".index("zz")


@pytest.mark.parametrize("text", ["__import__('os').system('true')", "a.__class__",
                                  "[1, 2]", "lambda: 1", "open('x')", "a if b else 1"])
def test_never_python_eval(text):
    # the issue: our own evaluator, never eval; Python-only syntax and names are refused
    with pytest.raises(ExpressionError):
        evaluate(text, SCOPE)


def test_names_in():
    # the names are those in the text, functions excluded
    assert names_in("max(a, rbase) * sqrt(b) + pi") == {"a", "rbase", "b", "pi"}


def test_bounded_nesting_is_an_error_not_a_crash():
    deep = "(" * 500 + "1" + ")" * 500
    # drc's documented bound (MAX_DEPTH): refused with a message, no RecursionError
    with pytest.raises(ExpressionError):
        evaluate(deep, {})
    long_chain = "+".join(["1"] * 900)
    # 900 ones summed, by IEEE 754 arithmetic
    assert evaluate(long_chain, {}) == 900.0

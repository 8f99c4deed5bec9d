"""Parameter expressions: parsed with grammar/expression.lark, evaluated by our own walker.

Never Python's eval. Arithmetic, comparisons (1 or 0), && || !, c ? a : b, and the functions
below; names resolve through the scope the caller gives. Bounded: an expression longer than
MAX_LENGTH characters or nested deeper than MAX_DEPTH is refused before it is parsed.
"""

from __future__ import annotations

import math
from functools import lru_cache
from importlib import resources
from typing import Callable, Mapping

from lark import Lark, Token, Tree
from lark.exceptions import UnexpectedInput

from drc.values import parse_number

MAX_LENGTH = 4000
MAX_DEPTH = 64


class ExpressionError(Exception):
    """A bad expression; `offset` is the 0-based position in its text where it went wrong."""

    def __init__(self, message: str, offset: int = 0):
        super().__init__(message)
        self.message = message
        self.offset = offset


def _finite(x: float) -> float:
    if isinstance(x, float) and (math.isinf(x) or math.isnan(x)):
        raise ExpressionError("the result overflows or is not a number")
    return x


def _log(x):
    if x <= 0:
        raise ExpressionError(f"log of {x:g}, which is not positive")
    return math.log(x)


def _log10(x):
    if x <= 0:
        raise ExpressionError(f"log10 of {x:g}, which is not positive")
    return math.log10(x)


def _sqrt(x):
    if x < 0:
        raise ExpressionError(f"sqrt of {x:g}, which is negative")
    return math.sqrt(x)


def _pow(a, b):
    try:
        return math.pow(a, b)
    except (OverflowError, ValueError):
        raise ExpressionError(f"pow({a:g}, {b:g}) has no finite real value") from None


def _exp(x):
    try:
        return math.exp(x)
    except OverflowError:
        raise ExpressionError(f"exp({x:g}) overflows") from None


FUNCTIONS: dict[str, tuple[Callable, int, int]] = {   # name: (function, least, most arguments)
    "sqrt": (_sqrt, 1, 1), "exp": (_exp, 1, 1), "log": (_log, 1, 1), "ln": (_log, 1, 1),
    "log10": (_log10, 1, 1), "abs": (abs, 1, 1), "min": (lambda *a: min(a), 1, 64),
    "max": (lambda *a: max(a), 1, 64),
    "pow": (_pow, 2, 2), "pwr": (_pow, 2, 2), "sin": (math.sin, 1, 1), "cos": (math.cos, 1, 1),
    "tan": (math.tan, 1, 1), "atan": (math.atan, 1, 1), "floor": (math.floor, 1, 1),
    "ceil": (math.ceil, 1, 1), "int": (math.trunc, 1, 1), "sgn": (lambda x: (x > 0) - (x < 0), 1, 1),
}
CONSTANTS = {"pi": math.pi}


@lru_cache(maxsize=1)
def _parser() -> Lark:
    text = resources.files("drc.grammar").joinpath("expression.lark").read_text(encoding="utf-8")
    return Lark(text, parser="lalr", maybe_placeholders=False)


def _depth(text: str) -> int:
    deepest = level = 0
    for ch in text:
        if ch == "(":
            level += 1
            deepest = max(deepest, level)
        elif ch == ")":
            level -= 1
    return deepest


@lru_cache(maxsize=4096)
def parse_expression(text: str) -> Tree | Token:
    """The tree of an expression (cached: a subcircuit's expressions repeat per instance)."""
    if len(text) > MAX_LENGTH:
        raise ExpressionError(f"expression longer than {MAX_LENGTH} characters")
    if _depth(text) > MAX_DEPTH or text.count("-") + text.count("!") > 4 * MAX_DEPTH:
        raise ExpressionError(f"expression nested deeper than {MAX_DEPTH} levels")
    if not text.strip():
        raise ExpressionError("empty expression")
    try:
        return _parser().parse(text)
    except UnexpectedInput as error:
        pos = getattr(error, "pos_in_stream", 0) or 0
        token = getattr(error, "token", None)
        if token is not None and getattr(token, "start_pos", None) is not None:
            pos = token.start_pos
            if token.type == "$END":
                raise ExpressionError("the expression ends too early", pos) from None
            raise ExpressionError(f"unexpected {str(token)!r} in expression", pos) from None
        char = text[pos] if pos < len(text) else "end"
        raise ExpressionError(f"unexpected {char!r} in expression", pos) from None


def names_in(text: str) -> set[str]:
    """The parameter names an expression uses (lower-case), functions excluded."""
    tree = parse_expression(text)
    found: set[str] = set()
    stack = [tree]
    while stack:
        node = stack.pop()
        if isinstance(node, Tree):
            if node.data == "name":
                found.add(str(node.children[0]).lower())
                continue
            children = node.children[1:] if node.data == "function" else node.children
            stack.extend(children)
    return found


def evaluate(text: str, scope: Mapping[str, float] | Callable[[str], float | None]) -> float:
    """The value of an expression; names are looked up (lower-case) in `scope`."""
    lookup = scope.get if isinstance(scope, Mapping) else scope
    try:
        value = _walk(parse_expression(text), lookup, text)
    except RecursionError:
        raise ExpressionError("expression nested too deeply to evaluate") from None
    return float(_finite(float(value)))


_BINARY = {
    "+": lambda a, b: a + b, "-": lambda a, b: a - b, "*": lambda a, b: a * b,
    "**": _pow, "^": _pow,
}


def _walk(node, lookup, text):
    # iterative over the chain of binary operators keeps Python's stack shallow
    if isinstance(node, Token):
        return _number(node)
    kind = node.data
    c = node.children
    if kind == "number":
        return _number(c[0])
    if kind == "name":
        name = str(c[0]).lower()
        value = lookup(name)
        if value is None:
            value = CONSTANTS.get(name)
        if value is None:
            raise ExpressionError(f"undefined parameter '{c[0]}'", c[0].start_pos or 0)
        return value
    if kind == "binary":
        # a left-leaning chain (1+2+3+...) is walked down its spine, not by recursion
        spine = []
        while isinstance(node, Tree) and node.data == "binary" and str(node.children[1]) not in ("**", "^"):
            spine.append(node)
            node = node.children[0]
        if not spine:
            return _apply(_walk(c[0], lookup, text), c[1], _walk(c[2], lookup, text))
        value = _walk(node, lookup, text)
        for step in reversed(spine):
            value = _apply(value, step.children[1], _walk(step.children[2], lookup, text))
        return value
    if kind == "negate":
        return -_walk(c[0], lookup, text)
    if kind == "logic_not":
        return 0.0 if _walk(c[0], lookup, text) else 1.0
    if kind == "compare":
        a, op, b = _walk(c[0], lookup, text), str(c[1]), _walk(c[2], lookup, text)
        return float({"==": a == b, "!=": a != b, "<=": a <= b, ">=": a >= b,
                      "<": a < b, ">": a > b}[op])
    if kind == "both":
        return 1.0 if (_walk(c[0], lookup, text) and _walk(c[1], lookup, text)) else 0.0
    if kind == "either":
        return 1.0 if (_walk(c[0], lookup, text) or _walk(c[1], lookup, text)) else 0.0
    if kind == "conditional":
        return _walk(c[1], lookup, text) if _walk(c[0], lookup, text) else _walk(c[2], lookup, text)
    if kind == "function":
        name = str(c[0]).lower()
        args = [_walk(a, lookup, text) for a in c[1:] if a is not None]
        spec = FUNCTIONS.get(name)
        if spec is None:
            raise ExpressionError(f"unknown function '{c[0]}'", c[0].start_pos or 0)
        function, least, most = spec
        if not least <= len(args) <= most:
            raise ExpressionError(f"{name}() takes {least if least == most else f'{least} to {most}'} "
                                  f"argument{'s' if most > 1 else ''}, got {len(args)}",
                                  c[0].start_pos or 0)
        try:
            return _finite(float(function(*args)))
        except (OverflowError, ValueError):
            raise ExpressionError(f"{name}() has no finite value here", c[0].start_pos or 0) from None
    if len(c) == 1:      # "+" unary and parentheses
        return _walk(c[0], lookup, text)
    raise ExpressionError(f"cannot evaluate '{kind}'")


def _apply(a: float, operator: Token, b: float) -> float:
    op = str(operator)
    if op == "/":
        if b == 0:
            raise ExpressionError("division by zero", operator.start_pos or 0)
        return _finite(a / b)
    if op == "%":
        if b == 0:
            raise ExpressionError("modulo by zero", operator.start_pos or 0)
        return math.fmod(a, b)
    try:
        return _finite(_BINARY[op](a, b))
    except OverflowError:
        raise ExpressionError("the result overflows", operator.start_pos or 0) from None


def _number(token: Token) -> float:
    try:
        number = parse_number(str(token))
    except OverflowError:
        raise ExpressionError(f"the number {token} overflows", token.start_pos or 0) from None
    if number is None:
        raise ExpressionError(f"'{token}' is not a number", token.start_pos or 0)
    return number.value

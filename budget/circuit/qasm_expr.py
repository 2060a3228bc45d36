"""Constant expressions of OpenQASM: gate angles, indices, loop bounds.

Evaluated on the reference syntax tree. Supported: integer and real literals, the constants
``pi``/``π``, ``tau``/``τ``, ``euler``/``ℇ``, names bound in an environment (gate parameters,
``const`` and initialised classical declarations), unary minus, ``+ - * / % **`` (OpenQASM 2's
power ``^`` arrives here as ``**``, see :mod:`budget.circuit.qasm_parse`), casts to
int/float/angle, and the functions sin, cos, tan, arcsin, arccos, arctan, exp, ln/log, sqrt,
floor, ceiling, mod, pow.

Division is real division in both versions (``1/2`` is 0.5); a value used as an index or loop
bound must come out integral.
"""

from __future__ import annotations

import math
from typing import Callable, Mapping

from openqasm3 import ast

from budget.problems import CircuitSyntaxError, place

Number = int | float

CONSTANTS: dict[str, float] = {
    "pi": math.pi,
    "π": math.pi,
    "tau": 2 * math.pi,
    "τ": 2 * math.pi,
    "euler": math.e,
    "ℇ": math.e,
}

FUNCTIONS: dict[str, Callable[..., Number]] = {
    "sin": math.sin,
    "cos": math.cos,
    "tan": math.tan,
    "arcsin": math.asin,
    "arccos": math.acos,
    "arctan": math.atan,
    "exp": math.exp,
    "ln": math.log,
    "log": math.log,
    "sqrt": math.sqrt,
    "floor": math.floor,
    "ceiling": math.ceil,
    "mod": math.fmod,
    "pow": lambda a, b: a**b,
}

_BINARY: dict[str, Callable[[Number, Number], Number]] = {
    "+": lambda a, b: a + b,
    "-": lambda a, b: a - b,
    "*": lambda a, b: a * b,
    "/": lambda a, b: a / b,
    "%": lambda a, b: math.fmod(a, b) if isinstance(a, float) or isinstance(b, float) else a % b,
    "**": lambda a, b: a**b,
}


def line_of(node: ast.QASMNode | None) -> int | None:
    """Source line of a syntax-tree node, when the parser recorded one."""
    span = getattr(node, "span", None)
    return span.start_line if span is not None else None


def evaluate(expr: ast.Expression, env: Mapping[str, Number], *, source: str) -> Number:
    """The value of a constant expression (Python int or float).

    Raises:
        CircuitSyntaxError: ``source:line: ...`` naming the unsupported construct or unknown name.
    """

    def fail(node: ast.QASMNode, what: str) -> CircuitSyntaxError:
        return CircuitSyntaxError(f"{place(source, line_of(node) or line_of(expr))}: {what}")

    def ev(node: ast.Expression) -> Number:
        if isinstance(node, ast.BooleanLiteral):
            return int(node.value)
        if isinstance(node, (ast.IntegerLiteral, ast.FloatLiteral)):
            return node.value
        if isinstance(node, ast.Identifier):
            if node.name in env:
                return env[node.name]
            if node.name in CONSTANTS:
                return CONSTANTS[node.name]
            raise fail(node, f"unknown name '{node.name}' in expression (not a parameter or constant)")
        if isinstance(node, ast.UnaryExpression):
            if node.op.name == "-":
                return -ev(node.expression)
            raise fail(node, f"unary operator '{node.op.name}' is not supported in a constant expression")
        if isinstance(node, ast.BinaryExpression):
            op = node.op.name
            if op not in _BINARY:
                raise fail(node, f"operator '{node.op.name}' is not supported in a constant expression")
            lhs, rhs = ev(node.lhs), ev(node.rhs)
            try:
                value = _BINARY[op](lhs, rhs)
            except (ZeroDivisionError, OverflowError, ValueError) as exc:
                raise fail(node, f"cannot evaluate {lhs!r} {node.op.name} {rhs!r}: {exc}") from None
            if isinstance(value, complex):
                raise fail(node, f"{lhs!r} {node.op.name} {rhs!r} is not a real number")
            return value
        if isinstance(node, ast.FunctionCall):
            name = node.name.name
            if name not in FUNCTIONS:
                raise fail(node, f"function '{name}' is not supported (known: {', '.join(sorted(FUNCTIONS))})")
            args = [ev(a) for a in node.arguments]
            try:
                return FUNCTIONS[name](*args)
            except (TypeError, ValueError, OverflowError, ZeroDivisionError) as exc:
                raise fail(node, f"cannot evaluate {name}({', '.join(map(repr, args))}): {exc}") from None
        if isinstance(node, ast.Cast):
            value = ev(node.argument)
            if isinstance(node.type, (ast.IntType, ast.UintType)):
                return int(value)
            if isinstance(node.type, (ast.FloatType, ast.AngleType)):
                return float(value)
            raise fail(node, f"cast to {type(node.type).__name__} is not supported")
        kind = type(node).__name__.replace("Literal", " literal")
        raise fail(node, f"{kind} is not supported in a constant expression")

    value = ev(expr)
    if isinstance(value, float) and not math.isfinite(value):
        raise fail(expr, f"the expression evaluates to {value}: expected a finite number")
    return value


def evaluate_int(expr: ast.Expression, env: Mapping[str, Number], *, source: str, what: str) -> int:
    """A constant expression that must be an integer (an index, a size, a loop bound)."""
    value = evaluate(expr, env, source=source)
    if isinstance(value, float):
        if not value.is_integer():
            raise CircuitSyntaxError(f"{place(source, line_of(expr))}: {what} = {value!r}: expected an integer")
        value = int(value)
    return int(value)

"""A safe evaluator for arithmetic payoff expressions in study files.

Only numbers, the named variables, ``+ - * / **``, parentheses and a few functions are
allowed; the expression is parsed with :mod:`ast` and evaluated by walking the tree, so a
study file can never execute code.
"""

from __future__ import annotations

import ast
import operator

import numpy as np

FUNCTIONS = {
    "exp": np.exp,
    "log": np.log,
    "sqrt": np.sqrt,
    "abs": np.abs,
    "min": np.minimum,
    "max": np.maximum,
    "tanh": np.tanh,
}
_BINARY = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_UNARY = {ast.USub: operator.neg, ast.UAdd: operator.pos}


class ExpressionError(ValueError):
    """An expression uses something outside the allowed arithmetic."""


def parse(text: str, variables) -> ast.Expression:
    """Parse ``text`` and check that it only uses allowed constructs and ``variables``."""
    try:
        tree = ast.parse(text, mode="eval")
    except SyntaxError as error:
        raise ExpressionError(f"not an arithmetic expression ({error.msg})") from None
    allowed = set(variables)
    for node in ast.walk(tree):
        if isinstance(node, (ast.Expression, ast.Load)) or type(node) in _BINARY or type(node) in _UNARY:
            continue
        if isinstance(node, (ast.BinOp, ast.UnaryOp)):
            op = node.op
            if type(op) not in _BINARY and type(op) not in _UNARY:
                raise ExpressionError(f"operator {type(op).__name__} is not allowed")
            continue
        if isinstance(node, ast.Constant):
            if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
                raise ExpressionError(f"only numbers are allowed as constants (got {node.value!r})")
            continue
        if isinstance(node, ast.Name):
            if node.id not in allowed and node.id not in FUNCTIONS:
                raise ExpressionError(
                    f"unknown name {node.id!r} (allowed: {', '.join(sorted(allowed))}, "
                    f"functions {', '.join(sorted(FUNCTIONS))})"
                )
            continue
        if isinstance(node, ast.Call):
            if not isinstance(node.func, ast.Name) or node.func.id not in FUNCTIONS or node.keywords:
                raise ExpressionError("only calls like exp(x), log(x), sqrt(x), abs, min, max, tanh are allowed")
            continue
        raise ExpressionError(f"{type(node).__name__} is not allowed in an expression")
    return tree


def evaluate(tree: ast.Expression, values: dict):
    """Evaluate a parsed expression with numpy semantics."""

    def walk(node):
        if isinstance(node, ast.Expression):
            return walk(node.body)
        if isinstance(node, ast.Constant):
            return float(node.value)
        if isinstance(node, ast.Name):
            return values[node.id]
        if isinstance(node, ast.BinOp):
            return _BINARY[type(node.op)](walk(node.left), walk(node.right))
        if isinstance(node, ast.UnaryOp):
            return _UNARY[type(node.op)](walk(node.operand))
        if isinstance(node, ast.Call):
            return FUNCTIONS[node.func.id](*[walk(arg) for arg in node.args])
        raise ExpressionError(f"{type(node).__name__} is not allowed")  # unreachable after parse

    with np.errstate(all="ignore"):
        return walk(tree)

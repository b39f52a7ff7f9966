"""Arithmetic expressions of the model files: numbers, names, + - * / **, parentheses and a few
functions, evaluated without `eval` (the syntax tree is walked and anything else is refused).

Names are model parameters, derived quantities, `pi`, and `I` (the imaginary unit); the values
may be complex. Particle attributes are functions of a particle name: `Q(f)`, `T3(f)`, `mass(f)`,
`ckm(u, d)`, where the name is a vertex's loop variable (see `gen.physics.tree.model`).
"""

from __future__ import annotations

import ast
import cmath
import math
import operator
from collections.abc import Callable, Mapping

__all__ = ["ExpressionError", "evaluate", "names_in"]


class ExpressionError(ValueError):
    """An expression of a model file that cannot be read or evaluated; the message says why."""


_BINARY = {ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul, ast.Div: operator.truediv,
           ast.Pow: operator.pow}
_UNARY = {ast.USub: operator.neg, ast.UAdd: operator.pos}
_FUNCTIONS: dict[str, Callable] = {
    "sqrt": cmath.sqrt, "abs": abs, "conj": lambda z: complex(z).conjugate(), "re": lambda z: complex(z).real,
    "im": lambda z: complex(z).imag, "cos": cmath.cos, "sin": cmath.sin,
}
_CONSTANTS = {"pi": math.pi, "I": 1j}


def _parse(text: str) -> ast.expr:
    try:
        return ast.parse(text, mode="eval").body
    except SyntaxError as exc:
        raise ExpressionError(f"cannot read {text!r}: {exc.msg}") from None


def names_in(text: str) -> set[str]:
    """The names an expression refers to (not functions, not constants)."""
    out: set[str] = set()
    for node in ast.walk(_parse(text)):
        if isinstance(node, ast.Call):
            continue
        if isinstance(node, ast.Name) and node.id not in _CONSTANTS and node.id not in _FUNCTIONS:
            out.add(node.id)
    return out


def evaluate(text: str, values: Mapping[str, complex], particle_functions: Mapping[str, Callable] | None = None,
             bound: Mapping[str, str] | None = None) -> complex:
    """The value of an expression. `values` gives names their numbers; `particle_functions` are
    functions of particle names (Q, T3, mass, ckm) and `bound` the loop variables naming particles."""
    pf = particle_functions or {}
    bound = bound or {}

    def walk(node):
        if isinstance(node, ast.Constant) and isinstance(node.value, (int, float)) and not isinstance(node.value, bool):
            return node.value
        if isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
            return _BINARY[type(node.op)](walk(node.left), walk(node.right))
        if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            return _UNARY[type(node.op)](walk(node.operand))
        if isinstance(node, ast.Name):
            if node.id in _CONSTANTS:
                return _CONSTANTS[node.id]
            if node.id in values:
                return values[node.id]
            raise ExpressionError(f"unknown name {node.id!r} in {text!r}")
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and not node.keywords:
            fn = node.func.id
            if fn in pf:
                args = []
                for a in node.args:
                    if not (isinstance(a, ast.Name) and a.id in bound):
                        raise ExpressionError(f"{fn}() takes the vertex's particle names ({', '.join(bound) or 'none'}) "
                                              f"in {text!r}")
                    args.append(bound[a.id])
                return pf[fn](*args)
            if fn in _FUNCTIONS and len(node.args) == 1:
                return _FUNCTIONS[fn](walk(node.args[0]))
            raise ExpressionError(f"unknown function {fn!r} in {text!r}; known: "
                                  + ", ".join(sorted(set(_FUNCTIONS) | set(pf))))
        raise ExpressionError(f"{text!r}: only numbers, names, + - * / **, parentheses and the functions "
                              + ", ".join(sorted(_FUNCTIONS)) + " are allowed")

    try:
        value = walk(_parse(text))
    except (ZeroDivisionError, OverflowError) as exc:
        raise ExpressionError(f"{text!r}: {exc}") from None
    return complex(value)

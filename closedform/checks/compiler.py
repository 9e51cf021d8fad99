"""The checks' own number compiler: a sympy expression of one variable turned into a
function evaluated with mpmath at the working precision (no ``lambdify``)."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import mpmath
import sympy

from .base import T

_FUNCTIONS: dict[type, Callable] = {
    sympy.exp: mpmath.exp, sympy.sin: mpmath.sin, sympy.cos: mpmath.cos, sympy.tan: mpmath.tan,
    sympy.log: mpmath.log, sympy.sinh: mpmath.sinh, sympy.cosh: mpmath.cosh,
    sympy.tanh: mpmath.tanh, sympy.Abs: abs, sympy.atan: mpmath.atan, sympy.asin: mpmath.asin,
    sympy.acos: mpmath.acos,
}


def compile_expression(expr: sympy.Expr, variable: sympy.Symbol = T) -> Callable:
    """f(time, memo) evaluating ``expr`` at the working precision.

    A small tree walker of our own instead of ``lambdify`` (whose code printing would
    dominate the time of the checks). Sub-expressions free of the variable are evaluated once
    per precision and kept; functions of the variable (exp, sin, …) are kept in ``memo`` for
    the point being evaluated, so that the many terms of x, x', x'' share them.
    """
    if not expr.has(variable):
        if expr.free_symbols:
            raise ValueError(f"no numeric value for {', '.join(sorted(map(str, expr.free_symbols)))}")
        inner = _compile_node(expr, variable)
        kept: dict[int, Any] = {}

        def constant(_time: Any, _memo: dict) -> Any:
            precision = mpmath.mp.prec
            if precision not in kept:
                kept[precision] = inner(None, {})
            return kept[precision]
        return constant
    return _compile_node(expr, variable)


def _compile_node(expr: sympy.Expr, variable: sympy.Symbol) -> Callable:
    if expr == variable:
        return lambda time, memo: time
    if expr.is_Symbol:
        raise ValueError(f"no numeric value for {expr}")
    if expr.is_Integer:
        value = int(expr)
        return lambda time, memo: mpmath.mpf(value)
    if expr.is_Rational:
        p, q = int(expr.p), int(expr.q)
        return lambda time, memo: mpmath.mpf(p) / q
    if expr.is_Float:
        return lambda time, memo: +mpmath.mpf(expr._mpf_)
    if expr is sympy.pi:
        return lambda time, memo: +mpmath.pi
    if expr is sympy.E:
        return lambda time, memo: +mpmath.e
    if expr is sympy.I:
        return lambda time, memo: mpmath.mpc(0, 1)
    if expr.is_Add:
        parts = [compile_expression(a, variable) for a in expr.args]
        return lambda time, memo: mpmath.fsum(part(time, memo) for part in parts)
    if expr.is_Mul:
        parts = [compile_expression(a, variable) for a in expr.args]
        return lambda time, memo: mpmath.fprod(part(time, memo) for part in parts)
    if expr.is_Pow:
        base, exponent = expr.args
        base_function = compile_expression(base, variable)
        if exponent.is_Integer:
            n = int(exponent)
            return lambda time, memo: base_function(time, memo) ** n
        if exponent == sympy.S.Half:
            return lambda time, memo: mpmath.sqrt(base_function(time, memo))
        exponent_function = compile_expression(exponent, variable)
        return lambda time, memo: mpmath.power(base_function(time, memo),
                                               exponent_function(time, memo))
    function = _FUNCTIONS.get(expr.func)
    if function is not None and len(expr.args) == 1:
        argument = compile_expression(expr.args[0], variable)

        def apply(time: Any, memo: dict) -> Any:
            if expr not in memo:
                memo[expr] = function(argument(time, memo))
            return memo[expr]
        return apply

    def general(time: Any, memo: dict) -> Any:     # anything else (rare): sympy at the point
        point = expr if time is None else expr.subs(variable, sympy.Float(str(time), mpmath.mp.dps))
        return _evaluate(point)
    return general


def _evaluate(expr: sympy.Expr) -> Any:
    number = sympy.N(expr, mpmath.mp.dps)
    real, imaginary = number.as_real_imag()
    real_value = mpmath.mpf(str(real)) if real != 0 else mpmath.mpf(0)
    if imaginary == 0:
        return real_value
    return mpmath.mpc(real_value, mpmath.mpf(str(imaginary)))


def compile_function(expressions: Sequence[sympy.Expr], variable: sympy.Symbol = T) -> Callable:
    """Compile expressions of one variable; the result maps a number to a list of values."""
    compiled = [compile_expression(sympy.sympify(e), variable) for e in expressions]

    def evaluate(time: Any) -> list:
        memo: dict = {}
        return [function(time, memo) for function in compiled]
    return evaluate

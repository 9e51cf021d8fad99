"""Values for the symbols of a symbolic case: the declared values resolved, the damping
regime the pieces are valid in, and seeded random positive substitutions that keep it."""

from __future__ import annotations

import math
import random
from collections.abc import Mapping

import mpmath
import sympy

from ..case import Case
from .base import DRAWS, SEED, short, to_mpf
from .model import Equation, Problem

# ----------------------------------------------------------------------------- symbols


def resolved_values(case: Case) -> dict[sympy.Symbol, sympy.Expr]:
    """The declared values, with any value written in other symbols resolved."""
    values = {d.symbol: sympy.sympify(d.value) for d in case.symbols if d.value is not None}
    for _ in range(len(values) + 1):
        updated = {symbol: value.subs(values) for symbol, value in values.items()}
        if updated == values:
            break
        values = updated
    return values


def _order_kept(problem: Problem, values: Mapping, regime: str | None) -> bool:
    try:
        starts = [to_mpf(p.start, values, 30) for p in problem.pieces]
        until = to_mpf(problem.until, values, 30)
        coefficients = [to_mpf(a, values, 30) for a in problem.equation.coefficients]
        for time in problem.breakpoints():
            to_mpf(time, values, 30)
    except (ValueError, TypeError):
        return False
    if not starts or starts[0] != 0 or any(not b > a for a, b in zip(starts, starts[1:])):
        return False
    if not starts[-1] < until or coefficients[0] == 0:
        return False
    if len(coefficients) == 3 and regime is not None:
        a2, a1, a0 = coefficients
        discriminant = a1 * a1 - 4 * a2 * a0
        wanted = {"undamped": a1 == 0,
                  "under-damped": discriminant < 0,
                  "over-damped": discriminant > 0,
                  "critically-damped": abs(discriminant) <= mpmath.mpf("1e-25") * a1 * a1}
        return wanted.get(regime, True)
    return True


def _regime(equation: Equation, known: Mapping, stated: str | None) -> str | None:
    """The damping regime the pieces are valid in: from the sign of the discriminant (with
    the declared values put in) where that is decided, else as stated in the case."""
    if equation.order != 2:
        return None
    a2, a1, a0 = (sympy.sympify(a).subs(known) for a in equation.coefficients)
    if a1 == 0:
        return "undamped"
    discriminant = sympy.factor(sympy.simplify(a1**2 - 4 * a2 * a0))
    if discriminant.is_zero:
        return "critically-damped"
    if discriminant.is_negative:
        return "under-damped"
    if discriminant.is_positive:
        return "over-damped"
    return stated


def random_substitutions(case: Case, problem: Problem) -> list[dict[sympy.Symbol, sympy.Expr]]:
    """DRAWS seeded random positive substitutions that keep the pieces' order and regime.

    Each symbol without a value gets 0.25 … 4 (log-uniform, three significant digits, exact).
    A stated critically damped regime on symbols is kept by solving a² = 4·a₂·a₀ for one
    of the drawn symbols."""
    rng = random.Random(SEED)
    known = resolved_values(case)
    unknown = [d.symbol for d in case.symbols if d.value is None]
    regime = _regime(problem.equation, known, case.system.regime)
    critical = None
    if regime == "critically-damped":
        a2, a1, a0 = (sympy.sympify(a).subs(known) for a in problem.equation.coefficients)
        critical = a1**2 - 4 * a2 * a0
        solvable = [s for s in unknown if critical.has(s)]
        if sympy.simplify(critical) == 0 or not solvable:
            critical = None
        else:
            critical = (critical, solvable[0])
    draws = []
    for _ in range(400):
        values = dict(known)
        for symbol in unknown:
            values[symbol] = sympy.Rational(round(1000 * math.exp(rng.uniform(math.log(0.25),
                                                                              math.log(4)))), 1000)
        if critical is not None:
            expression, symbol = critical
            others = {s: v for s, v in values.items() if s != symbol}
            roots = [r for r in sympy.solve(expression.subs(others), symbol)
                     if r.is_positive]
            if not roots:
                continue
            values[symbol] = roots[0]
        values = {s: sympy.sympify(v).subs(values) for s, v in values.items()}
        if _order_kept(problem, values, regime):
            draws.append(values)
            if len(draws) == DRAWS:
                break
    return draws


def describe(values: Mapping) -> str:
    return ", ".join(f"{symbol} = {short(value)}" for symbol, value in
                     sorted(values.items(), key=lambda item: str(item[0])))

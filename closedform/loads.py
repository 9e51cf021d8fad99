"""Load rewrite rules: every load shape as a sum of singularity terms.

The result is a list of terms c · g(t − a) · H(t − a), where g is one basis function
(``basis.BasisTerm``: 1, (t − a)^n, a sine …), and impulses J · δ(t − a). Each rule that
fires is recorded with its name and source; the sheet shows that record, it never rewrites
loads itself. Which rule a shape uses and how is its definition in ``closedform.shapes``;
this module holds the rules and the machinery they share (polylines, windowed functions,
formulas as exponential polynomials).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import sympy

from .basis import COS, SIN, BasisTerm, ExponentialPolynomial
from .errors import CaseError

# The rules live with the shapes; named here as before.
from .shapes.rules import DIRAC as DIRAC
from .shapes.rules import MACAULAY as MACAULAY
from .shapes.rules import RULES as RULES
from .shapes.rules import SECOND_SHIFTING as SECOND_SHIFTING
from .specs import LoadSpec


@dataclass(frozen=True)
class SingularityTerm:
    """coefficient · g(t − at) · H(t − at) with g = ``mode`` (a basis function)."""

    coefficient: sympy.Expr
    at: sympy.Expr
    mode: BasisTerm
    load_number: int

    def expression(self, t: sympy.Symbol) -> sympy.Expr:
        return self.coefficient * self.mode.expression(t - self.at) * sympy.Heaviside(t - self.at)


@dataclass(frozen=True)
class ImpulseTerm:
    """impulse · δ(t − at)."""

    impulse: sympy.Expr
    at: sympy.Expr
    load_number: int

    def expression(self, t: sympy.Symbol) -> sympy.Expr:
        return self.impulse * sympy.DiracDelta(t - self.at)


@dataclass(frozen=True)
class Rewrite:
    """One load rewritten: the rule, its source and the terms it produced."""

    load_number: int
    shape: str
    rule: str
    source: str
    terms: tuple[SingularityTerm | ImpulseTerm, ...]

    def expression(self, t: sympy.Symbol) -> sympy.Expr:
        return sympy.Add(*[term.expression(t) for term in self.terms])


@dataclass(frozen=True)
class LoadHistory:
    """All loads of a case as singularity terms, with the rewrite record."""

    rewrites: tuple[Rewrite, ...]

    @property
    def terms(self) -> tuple[SingularityTerm, ...]:
        return tuple(term for r in self.rewrites for term in r.terms
                     if isinstance(term, SingularityTerm))

    @property
    def impulses(self) -> tuple[ImpulseTerm, ...]:
        return tuple(term for r in self.rewrites for term in r.terms
                     if isinstance(term, ImpulseTerm))

    def expression(self, t: sympy.Symbol) -> sympy.Expr:
        return sympy.Add(*[r.expression(t) for r in self.rewrites])


ZERO = sympy.S.Zero
STEP = BasisTerm(0, ZERO, ZERO)
RAMP = BasisTerm(1, ZERO, ZERO)


def rewrite_loads(loads: Sequence[LoadSpec]) -> LoadHistory:
    """Every load of the case as singularity terms (repeats included)."""
    rewrites = []
    for load in loads:
        for start in load.starts():
            rewrites.append(rewrite_load(load, start))
    return LoadHistory(tuple(rewrites))


def rewrite_load(load: LoadSpec, start: sympy.Expr) -> Rewrite:
    """One occurrence of a load, starting at ``start``, as singularity terms: by the rule
    of its shape's definition (``closedform.shapes``)."""
    from . import shapes
    if not shapes.known(load.shape):
        raise CaseError(f"no rewrite rule for shape '{load.shape}'", key=f"{load.key}.shape")
    definition = shapes.get(load.shape)
    text, source = definition.rule
    return Rewrite(load.number, load.shape, text, source,
                   tuple(definition.rewrite(load, start)))


def pulse_points(load: LoadSpec) -> tuple[tuple[sympy.Expr, sympy.Expr], ...]:
    """The corner points (local time, value) of a piecewise-linear pulse, zero outside."""
    from . import shapes
    return shapes.get(load.shape).points(load)


def piecewise_linear_terms(points: Sequence[tuple[sympy.Expr, sympy.Expr]], start: sympy.Expr,
                           number: int) -> list[SingularityTerm]:
    """Steps at the jumps and ramps at the slope changes of a polyline that is zero outside.

    Points at the same time make a jump. For N segments this gives at most N + 1 ramp
    changes and a step at each jump, never 2N windowed pieces.
    """
    groups: list[tuple[sympy.Expr, list[sympy.Expr]]] = []
    for time, value in points:
        if groups and _simplified(time - groups[-1][0]) == 0:
            groups[-1][1].append(value)
        else:
            groups.append((time, [value]))
    terms: list[SingularityTerm] = []
    previous_slope = ZERO
    for i, (time, values) in enumerate(groups):
        left = ZERO if i == 0 else values[0]
        right = ZERO if i == len(groups) - 1 else values[-1]
        jump = _simplified(right - left)
        if i + 1 < len(groups):
            next_time, next_values = groups[i + 1]
            slope = _simplified((next_values[0] - values[-1]) / (next_time - time))
        else:
            slope = ZERO
        change = _simplified(slope - previous_slope)
        at = start + time
        if jump != 0:
            terms.append(SingularityTerm(jump, at, STEP, number))
        if change != 0:
            terms.append(SingularityTerm(change, at, RAMP, number))
        previous_slope = slope
    return terms


def _simplified(value: sympy.Expr) -> sympy.Expr:
    """sympy.simplify, which leaves a rational number (every row of a table) as it is:
    asking it costs more than the rest of the rewrite of a long table."""
    return value if value.is_Rational else sympy.simplify(value)


def windowed_terms(shape: ExponentialPolynomial, start: sympy.Expr, duration: sympy.Expr,
                   number: int) -> list[SingularityTerm]:
    """f(τ) on 0 ≤ τ < d as f(t − a)H(t − a) − f(t − a)H(t − a − d), where the second
    part is written in the time since a + d by re-expanding f about d (shift theorem)."""
    terms = [SingularityTerm(c, start, mode, number) for mode, c in _ordered(shape)]
    tail = shape.shifted(duration).map_coefficients(sympy.simplify)
    terms += [SingularityTerm(-c, start + duration, mode, number) for mode, c in _ordered(tail)]
    return [term for term in terms if term.coefficient != 0]


def _ordered(shape: ExponentialPolynomial):
    return [(mode, shape.terms[mode]) for mode in shape.modes()]


_MAX_POWER = 12


def exponential_polynomial_of(expression: sympy.Expr, variable: sympy.Symbol, *,
                              key: str) -> ExponentialPolynomial:
    """A formula in ``variable`` as an exact exponential polynomial.

    Accepted: sums and products of constants, powers of the variable, exp, sin, cos, sinh
    and cosh of linear functions of the variable — the functions whose Laplace transforms
    are rational. Anything else cannot be solved in closed form by the transform table.
    """
    expression = sympy.sympify(expression)
    if variable not in expression.free_symbols:
        return ExponentialPolynomial.polynomial({0: expression})
    if expression == variable:
        return ExponentialPolynomial.single(RAMP)
    if isinstance(expression, sympy.Add):
        total = ExponentialPolynomial()
        for part in expression.args:
            total = total + exponential_polynomial_of(part, variable, key=key)
        return total
    if isinstance(expression, sympy.Mul):
        product = ExponentialPolynomial.polynomial({0: sympy.S.One})
        for part in expression.args:
            product = product * exponential_polynomial_of(part, variable, key=key)
        return product
    if isinstance(expression, sympy.Pow):
        base, exponent = expression.args
        if exponent.is_Integer and 0 < exponent <= _MAX_POWER:
            factor = exponential_polynomial_of(base, variable, key=key)
            product = ExponentialPolynomial.polynomial({0: sympy.S.One})
            for _ in range(int(exponent)):
                product = product * factor
            return product
        if base == sympy.E or (variable not in base.free_symbols and exponent.is_polynomial(variable)):
            return _exponential(sympy.log(base) * exponent if base != sympy.E else exponent,
                                variable, expression, key)
    if isinstance(expression, sympy.exp):
        return _exponential(expression.args[0], variable, expression, key)
    if isinstance(expression, (sympy.sin, sympy.cos)):
        rate, phase = _linear(expression.args[0], variable, expression, key)
        kind = SIN if isinstance(expression, sympy.sin) else COS
        if rate.is_negative:
            rate, phase = -rate, -phase
            sign = -1 if kind == SIN else 1
        else:
            sign = 1
        # sin(ωτ + φ) = sin ωτ cos φ + cos ωτ sin φ;  cos(ωτ + φ) = cos ωτ cos φ − sin ωτ sin φ
        if kind == SIN:
            pairs = [(BasisTerm(0, ZERO, rate, SIN), sign * sympy.cos(phase)),
                     (BasisTerm(0, ZERO, rate, COS), sign * sympy.sin(phase))]
        else:
            pairs = [(BasisTerm(0, ZERO, rate, COS), sympy.cos(phase)),
                     (BasisTerm(0, ZERO, rate, SIN), -sympy.sin(phase))]
        return ExponentialPolynomial.from_terms([p for p in pairs if p[1] != 0])
    if isinstance(expression, (sympy.sinh, sympy.cosh)):
        return exponential_polynomial_of(expression.rewrite(sympy.exp), variable, key=key)
    raise CaseError(f"'{expression}' has no rational Laplace transform (expected sums and "
                    "products of powers of tau, exp, sin, cos, sinh and cosh of linear "
                    "functions of tau; use a table load for other shapes)", key=key)


def _linear(argument: sympy.Expr, variable: sympy.Symbol, whole: sympy.Expr,
            key: str) -> tuple[sympy.Expr, sympy.Expr]:
    argument = sympy.expand(argument)
    rate = argument.coeff(variable, 1)
    phase = sympy.simplify(argument - rate * variable)
    if variable in rate.free_symbols or variable in phase.free_symbols:
        raise CaseError(f"'{whole}' is not of a linear function of tau (expected e.g. "
                        "sin(2*pi*tau/T))", key=key)
    return rate, phase


def _exponential(argument: sympy.Expr, variable: sympy.Symbol, whole: sympy.Expr,
                 key: str) -> ExponentialPolynomial:
    rate, phase = _linear(argument, variable, whole, key)
    return ExponentialPolynomial.single(BasisTerm(0, rate, ZERO), sympy.exp(phase))

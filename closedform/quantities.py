"""Values with units, turned into exact magnitudes in coherent SI units.

A case file writes a physical value as ``"2.6 MN/m"``, ``"1200 lb"`` or as a formula over
declared names such as ``"2*zeta*sqrt(k*m)"``. :func:`parse_quantity` returns the exact
magnitude in coherent SI units (newton, metre, second, kilogram, ampere, …) as a sympy
expression and checks that its dimension is the one the key requires.

Unit names and conversion factors come from pint's default definitions, read with exact
fractions so ``1 lb`` is exactly 0.45359237 kg. Dimensions are
:class:`closedform.units.Dimension` values such as ``{'[mass]': 1, '[time]': -2}``; they
support ``*``, ``/`` and ``**``.
"""

from __future__ import annotations

import functools
import math
import re
from collections.abc import Mapping
from fractions import Fraction
from typing import Any

import sympy

from closedform.errors import ExpressionError
from closedform.expressions import (
    MAX_LENGTH,
    SympyBuilder,
    parse_number,
    parse_with,
    quote,
)
from closedform.units import (  # noqa: F401 - the light half of this module, re-exported
    ACCELERATION,
    CAPACITANCE,
    CHARGE,
    CURRENT,
    DAMPING,
    DIMENSIONLESS,
    DIMENSIONS,
    ENERGY,
    FORCE,
    FREQUENCY,
    IMPULSE,
    INDUCTANCE,
    LENGTH,
    MASS,
    MAX_UNIT_LENGTH,
    POWER,
    PRESSURE,
    RESISTANCE,
    STIFFNESS,
    TEMPERATURE,
    TIME,
    UNIT_CACHE_VARIABLE,
    VELOCITY,
    VOLTAGE,
    Dimension,
    UnitProblem,
    ascii_unit,
    describe,
    dimension,
    divide_dimensions,
    example_value,
    multiply_dimensions,
    normal_unit_text,
    power_dimension,
    registry,
    si_unit_text,
    unit_cache_folder,
    unit_fraction,
)

__all__ = [
    "Dimension",
    "DIMENSIONLESS", "TIME", "MASS", "LENGTH", "FORCE", "STIFFNESS", "DAMPING",
    "VELOCITY", "ACCELERATION", "IMPULSE", "VOLTAGE", "RESISTANCE", "INDUCTANCE",
    "CAPACITANCE", "FREQUENCY", "PRESSURE",
    "DIMENSIONS",
    "dimension",
    "multiply_dimensions",
    "divide_dimensions",
    "power_dimension",
    "describe",
    "si_unit_text",
    "registry",
    "unit_factor",
    "dimension_of_unit",
    "dimension_of",
    "parse_quantity",
    "MAX_UNIT_LENGTH",
]


@functools.cache
def _pint_pi() -> tuple[Fraction, int]:
    """pint's decimal stand-in for pi, and a large factor of its numerator that only a
    conversion factor built from that stand-in can contain."""
    approximation = unit_fraction("pi")[0]
    marker = approximation.numerator
    for prime in sympy.primerange(2, 10_000):
        while marker % prime == 0:
            marker //= prime
    return approximation, marker


def _exact(factor: Fraction) -> sympy.Expr:
    """A pint conversion factor as an exact sympy number.

    pint defines angle units (degree, revolution, hence rpm) through a 50-digit decimal pi;
    such factors are rebuilt on the true ``sympy.pi`` so that ``360 deg`` is exactly 2*pi.
    """
    approximation, marker = _pint_pi()
    power = 0
    numerator, denominator = factor.numerator, factor.denominator
    while numerator and marker > 1 and numerator % marker == 0:
        numerator //= marker
        power += 1
    while marker > 1 and denominator % marker == 0:
        denominator //= marker
        power -= 1
    if power == 0:
        return sympy.Rational(factor.numerator, factor.denominator)
    rest = factor / approximation ** power
    return sympy.Rational(rest.numerator, rest.denominator) * sympy.pi ** power


@functools.lru_cache(maxsize=1024)
def _unit_lookup(text: str) -> tuple[sympy.Expr, Dimension]:
    factor, dim = unit_fraction(text)
    return _exact(factor), dim


def unit_factor(unit_text: str, *, key: str | None) -> tuple[sympy.Expr, Dimension]:
    """The exact factor from ``unit_text`` to coherent SI, and the unit's dimension.

    ``"mm"`` gives ``(1/1000, length)``, ``"lbf"`` gives ``(8896443230521/2000000000000,
    force)``. The factor is a sympy Rational, or a Rational times a power of pi for angle-based
    units such as ``deg`` and ``rpm``.
    """
    if not isinstance(unit_text, str):
        raise ExpressionError(f"not a unit (expected text, got {type(unit_text).__name__})",
                              key=key)
    try:
        return _unit_lookup(normal_unit_text(unit_text))
    except UnitProblem as problem:
        raise ExpressionError(str(problem), key=key) from None


def dimension_of_unit(unit_text: str, *, key: str | None) -> Dimension:
    """The dimension of a unit text such as ``"kN*s/m"`` (here: damping)."""
    return unit_factor(unit_text, key=key)[1]


_TRANSCENDENTAL = (sympy.sin, sympy.cos, sympy.tan, sympy.cot, sympy.sec, sympy.csc,
                   sympy.asin, sympy.acos, sympy.atan, sympy.sinh, sympy.cosh, sympy.tanh,
                   sympy.asinh, sympy.acosh, sympy.atanh, sympy.exp, sympy.log, sympy.erf)


def _same(dims: list[Dimension], what: str, key: str | None) -> Dimension:
    first = dims[0]
    for other in dims[1:]:
        if other != first:
            raise ExpressionError(f"{what} must share one dimension "
                                  f"(expected {describe(first)}, got {describe(other)})", key=key)
    return first


def dimension_of(expr: sympy.Basic, name_dimensions_by_symbol: Mapping[sympy.Symbol, Dimension],
                 *, key: str | None = None) -> Dimension:
    """The dimension of a sympy expression whose symbols stand for SI magnitudes.

    Sums must agree term by term, products multiply, a quantity may be raised only to a fixed
    rational power, and sin, exp, log and the like need a dimensionless argument. Step and
    impulse functions are understood: Heaviside(t - tau) is dimensionless, DiracDelta(t) has
    dimension 1/time.
    """
    def walk(node: sympy.Basic) -> Dimension:
        if isinstance(node, sympy.Symbol):
            try:
                return name_dimensions_by_symbol[node]
            except KeyError:
                raise ExpressionError(f"no dimension is known for {quote(str(node))}",
                                      key=key) from None
        if not node.free_symbols:
            return DIMENSIONLESS
        if isinstance(node, sympy.Add):
            return _same([walk(arg) for arg in node.args], "terms of a sum", key)
        if isinstance(node, sympy.Mul):
            return multiply_dimensions(*[walk(arg) for arg in node.args])
        if isinstance(node, sympy.Pow):
            return pow_dimension(walk(node.base), node.exp)
        if isinstance(node, sympy.Abs):
            return walk(node.args[0])
        if isinstance(node, (sympy.Min, sympy.Max)):
            return _same([walk(arg) for arg in node.args], "arguments of Min/Max", key)
        if isinstance(node, sympy.Heaviside):
            walk(node.args[0])
            return DIMENSIONLESS
        if isinstance(node, sympy.DiracDelta):
            order = node.args[1] if len(node.args) > 1 else 0
            return power_dimension(walk(node.args[0]), -(int(order) + 1))
        if isinstance(node, sympy.sign):
            walk(node.args[0])
            return DIMENSIONLESS
        if isinstance(node, _TRANSCENDENTAL):
            for arg in node.args:
                inner = walk(arg)
                if inner != DIMENSIONLESS:
                    raise ExpressionError(f"argument of {type(node).__name__} must be "
                                          f"dimensionless (expected dimensionless, got "
                                          f"{describe(inner)})", key=key)
            return DIMENSIONLESS
        if isinstance(node, sympy.Piecewise):
            for _, condition in node.args:
                walk_condition(condition)
            return _same([walk(value) for value, _ in node.args], "branches of a Piecewise", key)
        if isinstance(node, sympy.Derivative):
            result = walk(node.expr)
            for variable, count in node.variable_count:
                result = result / power_dimension(walk(variable), int(count))
            return result
        if isinstance(node, sympy.Integral):
            result = walk(node.function)
            for limits in node.limits:
                variable = walk(limits[0])
                _same([variable, *dims_except_zero(limits[1:])],
                      "integration variable and limits", key)
                result = result * variable
            return result
        raise ExpressionError(f"cannot determine the dimension of {quote(str(node))}", key=key)

    def pow_dimension(base: Dimension, exponent: sympy.Expr) -> Dimension:
        exponent_dim = walk(exponent)
        if exponent_dim != DIMENSIONLESS:
            raise ExpressionError(f"an exponent must be dimensionless (expected dimensionless, "
                                  f"got {describe(exponent_dim)})", key=key)
        if base == DIMENSIONLESS:
            return DIMENSIONLESS
        if exponent.is_Rational:
            return power_dimension(base, exponent)
        raise ExpressionError(f"a quantity with a dimension needs a fixed number as exponent "
                              f"(expected a number, got {quote(str(exponent))})", key=key)

    def dims_except_zero(nodes: tuple[sympy.Basic, ...]) -> list[Dimension]:
        # A bare zero fits every dimension: t < 0 and an integral from 0 are fine.
        return [walk(item) for item in nodes if not (item.is_Number and item == 0)]

    def walk_condition(condition: sympy.Basic) -> None:
        if isinstance(condition, sympy.core.relational.Relational):
            sides = dims_except_zero((condition.lhs, condition.rhs))
            if sides:
                _same(sides, "sides of a comparison", key)
        elif isinstance(condition, sympy.logic.boolalg.BooleanFunction):
            for arg in condition.args:
                walk_condition(arg)

    return walk(expr)


class _DimensionBuilder:
    """Builds (sympy expression, dimension) pairs while a formula is read, so that a
    mismatch such as ``k + m - m`` is caught before sympy cancels the terms."""

    def __init__(self, names: Mapping[str, sympy.Expr],
                 name_dimensions: Mapping[str, Dimension], key: str | None) -> None:
        self.inner = SympyBuilder(names, key=key)
        self.known_names = names.keys()
        self.name_dimensions = name_dimensions
        self.key = key

    def _error(self, message: str) -> ExpressionError:
        return ExpressionError(message, key=self.key)

    def number(self, value: sympy.Rational, column: int) -> tuple[sympy.Expr, Dimension]:
        return value, DIMENSIONLESS

    def pi(self, column: int) -> tuple[sympy.Expr, Dimension]:
        return sympy.pi, DIMENSIONLESS

    def name(self, name: str, column: int) -> tuple[sympy.Expr, Dimension]:
        dim = self.name_dimensions.get(name)
        if dim is None:
            raise self._error(f"no dimension is declared for name {quote(name)} at column "
                              f"{column}")
        return self.inner.name(name, column), dim

    def negate(self, operand: tuple[sympy.Expr, Dimension],
               column: int) -> tuple[sympy.Expr, Dimension]:
        return self.inner.negate(operand[0], column), operand[1]

    def add(self, terms: list[tuple[int, tuple[sympy.Expr, Dimension], int]]
            ) -> tuple[sympy.Expr, Dimension]:
        first = terms[0][1][1]
        for _, (_, dim), column in terms[1:]:
            if dim != first:
                raise self._error(f"terms of a sum must share one dimension at column {column} "
                                  f"(expected {describe(first)}, got {describe(dim)})")
        return self.inner.add([(sign, node[0], column) for sign, node, column in terms]), first

    def multiply(self, factors: list[tuple[str, tuple[sympy.Expr, Dimension], int]]
                 ) -> tuple[sympy.Expr, Dimension]:
        dim = DIMENSIONLESS
        for operator, (_, factor_dim), _ in factors:
            dim = dim * factor_dim if operator == "*" else dim / factor_dim
        expr = self.inner.multiply([(operator, node[0], column)
                                    for operator, node, column in factors])
        return expr, dim

    def power(self, base: tuple[sympy.Expr, Dimension], exponent: tuple[sympy.Expr, Dimension],
              column: int) -> tuple[sympy.Expr, Dimension]:
        if exponent[1] != DIMENSIONLESS:
            raise self._error(f"an exponent must be dimensionless at column {column} "
                              f"(expected dimensionless, got {describe(exponent[1])})")
        expr = self.inner.power(base[0], exponent[0], column)
        if base[1] == DIMENSIONLESS:
            return expr, DIMENSIONLESS
        if not exponent[0].is_Rational:
            raise self._error(f"a quantity with a dimension needs a fixed number as exponent at "
                              f"column {column} (expected a number, got "
                              f"{quote(str(exponent[0]))})")
        return expr, power_dimension(base[1], exponent[0])

    def call(self, function: str, argument: tuple[sympy.Expr, Dimension],
             column: int) -> tuple[sympy.Expr, Dimension]:
        expr = self.inner.call(function, argument[0], column)
        if function == "sqrt":
            return expr, power_dimension(argument[1], Fraction(1, 2))
        if function == "abs":
            return expr, argument[1]
        if argument[1] != DIMENSIONLESS:
            raise self._error(f"argument of {function} must be dimensionless at column {column} "
                              f"(expected dimensionless, got {describe(argument[1])})")
        return expr, DIMENSIONLESS


_NUMBER_TEXT = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
# The unit starts with a letter, or is a reciprocal such as "1/s".
_WITH_UNIT_RE = re.compile(r"[ \t]*(" + _NUMBER_TEXT + r")[ \t]+([A-Za-z].*?|1[ \t]*/.*?)[ \t]*",
                           re.DOTALL)
_PLAIN_NUMBER_RE = re.compile(r"[ \t]*" + _NUMBER_TEXT + r"[ \t]*")


def _mismatch(expected: Dimension, got: Dimension) -> str:
    return f"wrong dimension (expected {describe(expected)}, got {describe(got)})"


def _bare_number(expected: Dimension, shown: str) -> str:
    return (f"number without a unit (expected {describe(expected)}, e.g. {example_value(expected)}, "
            f"got the plain number {shown})")


def parse_quantity(value: Any, *, expected: Dimension | str,
                   names: Mapping[str, sympy.Expr], name_dimensions: Mapping[str, Dimension],
                   key: str | None) -> sympy.Expr:
    """The exact SI magnitude of a case-file value, checked against the ``expected`` dimension.

    ``value`` is what the TOML file holds:

    * a number (``12``, ``0.02``): only for dimensionless values;
    * ``"<number> <unit>"`` such as ``"2.6 MN/m"``, ``"1200 lb"``, ``"-3 mm"``, ``"0.3 g0"``,
      ``"40 1/s"``;
    * a plain number as text (``"0.02"``): dimensionless;
    * a formula over the declared ``names`` such as ``"2*zeta*sqrt(k*m)"``; each name stands
      for its quantity in coherent SI units and has the dimension ``name_dimensions`` gives.

    ``expected`` is a :data:`Dimension` or a name from :data:`DIMENSIONS`.
    """
    if isinstance(expected, str):
        expected = dimension(expected)
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        shown = str(value).lower() if isinstance(value, bool) else type(value).__name__
        raise ExpressionError(f"not a quantity (expected a number or a text such as "
                              f"{example_value(expected)}, got {shown})", key=key)
    if isinstance(value, int):
        if value.bit_length() > 1100:
            raise ExpressionError("number out of range (expected a magnitude below 1e300, "
                                  "got an integer with more digits)", key=key)
        text = str(value)
    elif isinstance(value, float):
        if not math.isfinite(value):
            raise ExpressionError(f"not a finite number (expected a finite number, "
                                  f"got {value!r})", key=key)
        # The shortest repr is the decimal the author wrote, so 0.02 stays exactly 1/50.
        text = repr(value)
    else:
        text = ascii_unit(value)
    if not isinstance(value, str):
        number = parse_number(text, key=key)
        if expected != DIMENSIONLESS:
            raise ExpressionError(_bare_number(expected, text), key=key)
        return number
    if len(text) > MAX_LENGTH:
        raise ExpressionError(f"value too long (at most {MAX_LENGTH} characters, "
                              f"got {len(text)})", key=key)
    if not text.strip(" \t"):
        raise ExpressionError(f"empty value (expected {describe(expected)}, e.g. "
                              f"{example_value(expected)})", key=key)
    with_unit = _WITH_UNIT_RE.fullmatch(text)
    if with_unit is not None:
        return _number_with_unit(with_unit.group(1), with_unit.group(2), expected, names,
                                 name_dimensions, key)
    try:
        expr, got = parse_with(text, _DimensionBuilder(names, name_dimensions, key), key=key)
    except ExpressionError:
        _refuse_bare_unit(text, key)
        constant = _constant_with_unit(text, expected, key)
        if constant is not None:
            return constant
        _refuse_formula_with_unit(text, names, key)
        raise
    if got != expected:
        if _PLAIN_NUMBER_RE.fullmatch(text):
            raise ExpressionError(_bare_number(expected, text.strip()), key=key)
        raise ExpressionError(_mismatch(expected, got), key=key)
    return expr


def _refuse_bare_unit(text: str, key: str | None) -> None:
    """Explain a value that is only a unit, such as ``"kN"``, better than "unknown name"."""
    unit = text.strip(" \t")
    if len(unit) > MAX_UNIT_LENGTH or not unit[:1].isalpha():
        return
    try:
        _unit_lookup(unit)
    except UnitProblem:
        return
    raise ExpressionError(f"missing number before the unit (expected e.g. \"12 {unit}\", "
                          f"got {quote(unit)})", key=key)


_TRAILING_WORD_RE = re.compile(r"(.*[^ \t])[ \t]+([A-Za-z][A-Za-z0-9_*/^() .-]*?)[ \t]*",
                               re.DOTALL)


def _constant_with_unit(text: str, expected: Dimension, key: str | None) -> sympy.Expr | None:
    """``"pi/40 s"`` or ``"2*sqrt(2) kN"``: a formula of numbers only may carry a unit."""
    match = _TRAILING_WORD_RE.fullmatch(text)
    if match is None or len(match.group(2)) > MAX_UNIT_LENGTH:
        return None
    try:
        factor, got = _unit_lookup(match.group(2))
        number = parse_with(match.group(1), SympyBuilder({}, key=key), key=key)
    except (UnitProblem, ExpressionError):
        return None
    if not (number.is_real and number.is_finite):
        return None
    if got != expected:
        raise ExpressionError(_mismatch(expected, got), key=key)
    return number * factor


def _refuse_formula_with_unit(text: str, names: Mapping[str, sympy.Expr],
                              key: str | None) -> None:
    """Explain ``"2*w^2 kg"``: only a plain number may carry a unit."""
    match = _TRAILING_WORD_RE.fullmatch(text)
    if match is None or len(match.group(2)) > MAX_UNIT_LENGTH:
        return
    try:
        _unit_lookup(match.group(2))
        parse_with(match.group(1), SympyBuilder(names, key=key), key=key)
    except (UnitProblem, ExpressionError):
        return
    raise ExpressionError(f"a formula cannot carry a unit (expected a number with a unit such "
                          f"as \"12 {match.group(2)}\", or a formula over declared names, got "
                          f"{quote(match.group(2))} after {quote(match.group(1))})", key=key)


def _number_with_unit(number_text: str, unit_text: str, expected: Dimension,
                      names: Mapping[str, sympy.Expr], name_dimensions: Mapping[str, Dimension],
                      key: str | None) -> sympy.Expr:
    number = parse_number(number_text, key=key)
    hints = []
    if unit_text in names:
        hints.append(f"{quote(unit_text)} is read as a unit here; write "
                     f"{number_text}*{unit_text} to use the declared name")
    try:
        factor, got = unit_factor(unit_text, key=key)
    except ExpressionError as error:
        if not hints:
            raise
        raise ExpressionError(f"{error.message}; {hints[0]}", key=key) from None
    if unit_text in names and got == expected and name_dimensions.get(unit_text) == expected:
        # Both readings (a unit, or the declared name times the number) would pass the
        # dimension check, so neither can be chosen silently.
        raise ExpressionError(f"ambiguous value {quote(number_text + ' ' + unit_text)} "
                              f"({quote(unit_text)} is both a unit and a declared name; write "
                              f"{number_text}*{unit_text} for the name)", key=key)
    if got != expected:
        if unit_text == "g" and expected == ACCELERATION:
            hints.append("g is the gram; standard gravity is g0")
        message = _mismatch(expected, got)
        if hints:
            message += "; " + "; ".join(hints)
        raise ExpressionError(message, key=key)
    return number * factor

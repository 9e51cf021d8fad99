"""Values with units, turned into exact magnitudes in coherent SI units.

A case file writes a physical value as ``"2.6 MN/m"``, ``"1200 lb"`` or as a formula over
declared names such as ``"2*zeta*sqrt(k*m)"``. :func:`parse_quantity` returns the exact
magnitude in coherent SI units (newton, metre, second, kilogram, ampere, …) as a sympy
expression and checks that its dimension is the one the key requires.

Unit names and conversion factors come from pint's default definitions, read with exact
fractions so ``1 lb`` is exactly 0.45359237 kg. Dimensions are pint ``UnitsContainer``
objects such as ``{'[mass]': 1, '[time]': -2}``; they support ``*``, ``/`` and ``**``.
"""

from __future__ import annotations

import functools
import math
import os
import re
from collections.abc import Mapping
from fractions import Fraction
from pathlib import Path
from types import MappingProxyType
from typing import Any, cast

import pint
import sympy
from pint.util import UnitsContainer

from closedform.errors import ExpressionError
from closedform.expressions import (
    MAX_LENGTH,
    SympyBuilder,
    parse_number,
    parse_with,
    quote,
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

#: A physical dimension: pint's mapping from base dimension ('[mass]', '[length]', '[time]',
#: '[current]', …) to its exponent. Never ``str()`` one (pint cannot format exact exponents);
#: use :func:`describe` or :func:`si_unit_text`.
Dimension = UnitsContainer

#: Longest unit text accepted, in characters.
MAX_UNIT_LENGTH = 100

_BASES = ("[mass]", "[length]", "[time]", "[current]", "[temperature]", "[substance]",
          "[luminosity]")
_BASE_NAMES = {"[mass]": "mass", "[length]": "length", "[time]": "time",
               "[current]": "current", "[temperature]": "temperature",
               "[substance]": "amount", "[luminosity]": "luminosity"}
_BASE_UNITS = {"[mass]": "kg", "[length]": "m", "[time]": "s", "[current]": "A",
               "[temperature]": "K", "[substance]": "mol", "[luminosity]": "cd"}


def _make(**powers: int) -> Dimension:
    return UnitsContainer({f"[{base}]": Fraction(power) for base, power in powers.items()},
                          non_int_type=Fraction)


DIMENSIONLESS = _make()
TIME = _make(time=1)
MASS = _make(mass=1)
LENGTH = _make(length=1)
CURRENT = _make(current=1)
FORCE = _make(mass=1, length=1, time=-2)
STIFFNESS = FORCE / LENGTH
DAMPING = FORCE * TIME / LENGTH
VELOCITY = LENGTH / TIME
ACCELERATION = LENGTH / TIME ** 2
IMPULSE = FORCE * TIME
VOLTAGE = _make(mass=1, length=2, time=-3, current=-1)
RESISTANCE = VOLTAGE / CURRENT
INDUCTANCE = VOLTAGE * TIME / CURRENT
CAPACITANCE = CURRENT * TIME / VOLTAGE
FREQUENCY = DIMENSIONLESS / TIME
CHARGE = CURRENT * TIME
ENERGY = FORCE * LENGTH
POWER = ENERGY / TIME
PRESSURE = FORCE / LENGTH ** 2
TEMPERATURE = _make(temperature=1)

#: Every named dimension, by the name :func:`dimension` accepts.
DIMENSIONS: Mapping[str, Dimension] = MappingProxyType({
    "dimensionless": DIMENSIONLESS, "time": TIME, "mass": MASS, "length": LENGTH,
    "current": CURRENT, "force": FORCE, "stiffness": STIFFNESS, "damping": DAMPING,
    "velocity": VELOCITY, "acceleration": ACCELERATION, "impulse": IMPULSE,
    "voltage": VOLTAGE, "resistance": RESISTANCE, "inductance": INDUCTANCE,
    "capacitance": CAPACITANCE, "frequency": FREQUENCY, "charge": CHARGE,
    "energy": ENERGY, "power": POWER, "pressure": PRESSURE, "temperature": TEMPERATURE,
})

# How each named dimension reads in a message and which SI unit labels it.
_DESCRIPTIONS = {
    DIMENSIONLESS: "dimensionless", TIME: "time", MASS: "mass", LENGTH: "length",
    CURRENT: "current", FORCE: "force", STIFFNESS: "force/length",
    DAMPING: "force*time/length", VELOCITY: "length/time", ACCELERATION: "length/time^2",
    IMPULSE: "force*time", VOLTAGE: "voltage", RESISTANCE: "resistance",
    INDUCTANCE: "inductance", CAPACITANCE: "capacitance", FREQUENCY: "1/time",
    CHARGE: "charge", ENERGY: "energy", POWER: "power", PRESSURE: "force/length^2",
    TEMPERATURE: "temperature",
}
_SI_UNITS = {
    DIMENSIONLESS: "1", TIME: "s", MASS: "kg", LENGTH: "m", CURRENT: "A", FORCE: "N",
    STIFFNESS: "N/m", DAMPING: "N*s/m", VELOCITY: "m/s", ACCELERATION: "m/s^2",
    IMPULSE: "N*s", VOLTAGE: "V", RESISTANCE: "ohm", INDUCTANCE: "H", CAPACITANCE: "F",
    FREQUENCY: "1/s", CHARGE: "C", ENERGY: "J", POWER: "W", PRESSURE: "Pa",
    TEMPERATURE: "K",
    # rates and other derived forms, as the trades write them
    PRESSURE / TIME: "Pa/s", PRESSURE * TIME: "Pa*s", FORCE / TIME: "N/s",
    ACCELERATION / TIME: "m/s^3", VOLTAGE / TIME: "V/s", CURRENT / TIME: "A/s",
    TEMPERATURE / TIME: "K/s", POWER / TIME: "W/s", ENERGY * TIME: "J*s",
    VOLTAGE * TIME: "V*s", STIFFNESS / TIME: "N/(m*s)", PRESSURE / LENGTH: "Pa/m",
    ACCELERATION * TIME: "m/s", TEMPERATURE * TIME: "K*s", CURRENT * TIME ** 2: "C*s",
}

# Unit characters outside ASCII that the trades write, and the ASCII pint reads.
_UNIT_CHARACTERS = (("°C", "delta_degC"), ("°F", "delta_degF"), ("°", "deg"), ("Ω", "ohm"),
                    ("\u2126", "ohm"), ("·", "*"), ("⋅", "*"))
_MICRO_RE = re.compile(r"[µμ](?=[A-Za-zΩ\u2126])")


def ascii_unit(text: str) -> str:
    """A unit text with µ/μ (micro, before a unit name), Ω (ohm), ° (degree; °C and °F as
    temperature differences) and the middle dot spelled the way pint reads them."""
    text = _MICRO_RE.sub("u", text)
    for character, spelled in _UNIT_CHARACTERS:
        text = text.replace(character, spelled)
    return text


def dimension(name: str) -> Dimension:
    """The dimension called ``name`` ("force", "stiffness", …; see :data:`DIMENSIONS`)."""
    try:
        return DIMENSIONS[name]
    except KeyError:
        raise ValueError(f"unknown dimension name {name!r} "
                         f"(expected one of {', '.join(DIMENSIONS)})") from None


def multiply_dimensions(*dimensions: Dimension) -> Dimension:
    """The dimension of a product of quantities."""
    result = DIMENSIONLESS
    for item in dimensions:
        result = result * item
    return result


def divide_dimensions(numerator: Dimension, denominator: Dimension) -> Dimension:
    """The dimension of a quotient of quantities."""
    return numerator / denominator


def power_dimension(base: Dimension, exponent: int | Fraction | sympy.Rational) -> Dimension:
    """The dimension of a quantity raised to a fixed rational power (``sqrt`` is 1/2)."""
    if isinstance(exponent, sympy.Rational):
        exponent = Fraction(int(exponent.p), int(exponent.q))
    if exponent == 0:
        return DIMENSIONLESS
    return base ** Fraction(exponent)


def _power_text(name: str, exponent: Any) -> str:
    exponent = Fraction(exponent)
    if exponent == 1:
        return name
    if exponent.denominator == 1:
        return f"{name}^{exponent.numerator}"
    return f"{name}^({exponent.numerator}/{exponent.denominator})"


def _product_text(dim: Dimension, labels: Mapping[str, str]) -> str:
    order = {base: index for index, base in enumerate(_BASES)}
    # pint types an exponent as any number; a dimension here has rational exponents only
    items = cast("list[tuple[str, Fraction]]",
                 sorted(dim.items(), key=lambda item: (order.get(item[0], len(order)), item[0])))

    def label(base: str) -> str:
        return labels.get(base, base.strip("[]"))

    upper = [_power_text(label(base), power) for base, power in items if power > 0]
    lower = [_power_text(label(base), -power) for base, power in items if power < 0]
    top = "*".join(upper) or "1"
    if not lower:
        return top
    bottom = lower[0] if len(lower) == 1 else "(" + "*".join(lower) + ")"
    return f"{top}/{bottom}"


def describe(dim: Dimension) -> str:
    """A readable name of a dimension for messages: "force/length", "mass",
    "length/time^2", or a product of base dimensions such as "mass*length^2/time^3"."""
    named = _DESCRIPTIONS.get(dim)
    if named is not None:
        return named
    return _product_text(dim, _BASE_NAMES)


def si_unit_text(dim: Dimension) -> str:
    """The coherent SI unit that magnitudes of this dimension are expressed in, as plain text:
    "N/m", "N*s/m", "m/s^2", "ohm", "1" for dimensionless, else base units such as
    "kg*m^2/s^3"."""
    named = _SI_UNITS.get(dim)
    if named is not None:
        return named
    return _product_text(dim, _BASE_UNITS)


def _example(dim: Dimension) -> str:
    unit = si_unit_text(dim)
    if unit == "1":
        return '"0.5"'
    if not unit[0].isalpha():
        # "12 1/s" would not read back as a number and a unit; negative powers do.
        order = {base: index for index, base in enumerate(_BASES)}
        unit = "*".join(_power_text(_BASE_UNITS.get(base, base), power) for base, power
                        in sorted(dim.items(), key=lambda item: order.get(item[0], 99)))
    return f'"12 {unit}"'


#: Environment variable naming the folder for pint's parsed-definitions cache, or "off".
UNIT_CACHE_VARIABLE = "CLOSEDFORM_UNIT_CACHE"


def unit_cache_folder() -> Path | None:
    """Where pint keeps its parsed unit definitions between runs (its own documented disk
    cache): ``$CLOSEDFORM_UNIT_CACHE``, else the user's cache folder; None when "off"."""
    chosen = os.environ.get(UNIT_CACHE_VARIABLE)
    if chosen is not None:
        return None if chosen.strip().lower() in ("", "off", "0", "no") else Path(chosen)
    import platformdirs  # a dependency of pint itself

    return platformdirs.user_cache_path("closedform", appauthor=False) / "units"


@functools.cache
def registry() -> pint.UnitRegistry:
    """The one pint unit registry, with exact (fraction) conversion factors.

    Parsing pint's definition file and building its tables takes about 0.3 s a run; pint's
    disk cache keeps the result keyed by the definition file's content. Any trouble with the
    cache (a folder that cannot be made, a file being written by another run at the same
    moment, a damaged file) only costs that time: the registry is then built without it.
    """
    folder = unit_cache_folder()
    for cache in ((folder, None) if folder is not None else (None,)):
        try:
            if cache is not None:
                cache.mkdir(parents=True, exist_ok=True)
            return pint.UnitRegistry(non_int_type=Fraction, cache_folder=cache)
        except Exception:   # noqa: BLE001 - a cache is never a reason to fail
            if cache is None:
                raise
    raise AssertionError("unreachable: the last attempt builds without a cache")


@functools.cache
def _pint_pi() -> tuple[Fraction, int]:
    """pint's decimal stand-in for pi, and a large factor of its numerator that only a
    conversion factor built from that stand-in can contain."""
    approximation = Fraction(registry().Quantity(Fraction(1), "pi").to_base_units().magnitude)
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


_UNIT_CHARACTERS_RE = re.compile(r"[A-Za-z0-9_*/^. ()\-]*")
_UNIT_EXPONENT_RE = re.compile(r"\s*(?:-?\d+(?:\.\d+)?|\(\s*-?\d+\s*/\s*\d+\s*\))")
_DIGITS_RE = re.compile(r"\d+")
_UNIT_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_]*")


class _UnitProblem(Exception):
    pass


def _check_unit_text(text: str) -> None:
    """Reject any unit text outside the small shape pint needs, before pint reads it."""
    if not text:
        raise _UnitProblem("missing unit (expected a unit such as m, kN/m or N*s/m, got nothing)")
    if len(text) > MAX_UNIT_LENGTH:
        raise _UnitProblem(f"unit too long (at most {MAX_UNIT_LENGTH} characters, "
                           f"got {len(text)})")
    bad = _UNIT_CHARACTERS_RE.match(text)
    assert bad is not None
    if bad.end() != len(text):
        raise _UnitProblem(f"character not allowed in unit {quote(text)} at column "
                           f"{bad.end() + 1} (expected letters, digits, _ * / ^ ( ) and "
                           f"spaces, got {quote(text[bad.end()])})")
    if "__" in text:
        raise _UnitProblem(f"unexpected '__' in unit {quote(text)}")
    index = 0
    while index < len(text):
        char = text[index]
        if char == "^" or text.startswith("**", index):
            index += 1 if char == "^" else 2
            # Exponents are kept to short plain numbers: pint would otherwise compute
            # something like m^(9^9^9) in full.
            match = _UNIT_EXPONENT_RE.match(text, index)
            if match is None or any(len(digits) > 2
                                    for digits in _DIGITS_RE.findall(match.group())):
                raise _UnitProblem(f"unit exponent not allowed in {quote(text)} at column "
                                   f"{index + 1} (expected a short number such as ^2, ^-1 or "
                                   f"^(1/2))")
            index = match.end()
            continue
        if char in " */()":
            index += 1
            continue
        match = _UNIT_NAME_RE.match(text, index)
        if match is not None:
            index = match.end()
            continue
        if char == "1" and not text[index + 1:index + 2].isdigit():
            index += 1
            continue
        raise _UnitProblem(f"unexpected {quote(char)} in unit {quote(text)} at column "
                           f"{index + 1} (expected a unit name)")


@functools.lru_cache(maxsize=1024)
def _unit_lookup(text: str) -> tuple[sympy.Expr, Dimension]:
    _check_unit_text(text)
    units_registry = registry()
    unknown = _UnitProblem(f"unknown unit {quote(text)} (expected a unit such as m, mm, kg, "
                           f"lb, N, kN/m, N*s/m, ms, V, ohm, uF)")
    try:
        units = units_registry.parse_units(text)
        dim = units_registry.get_dimensionality(units)
    except Exception:  # pint signals a bad unit with many exception types
        raise unknown from None
    outside = [base for base in dim if base not in _BASE_NAMES]
    if outside:
        raise _UnitProblem(f"unit {quote(text)} is not supported (expected SI base dimensions, "
                           f"got {', '.join(sorted(outside))})")
    try:
        zero = units_registry.Quantity(Fraction(0), units).to_base_units().magnitude
        one = units_registry.Quantity(Fraction(1), units).to_base_units().magnitude
    except Exception:  # offset and logarithmic units refuse plain multiplication
        zero, one = None, None
    if zero != 0 or one is None:
        raise _UnitProblem(f"offset units are not accepted (got {quote(text)}; use kelvin or "
                           f"delta_degC for temperatures; logarithmic units are not accepted "
                           f"either)")
    if isinstance(one, float) or not one:
        raise _UnitProblem(f"unit {quote(text)} has no exact conversion factor")
    return _exact(Fraction(one)), UnitsContainer(dict(dim), non_int_type=Fraction)


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
        return _unit_lookup(ascii_unit(unit_text.strip(" \t")))
    except _UnitProblem as problem:
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
    return (f"number without a unit (expected {describe(expected)}, e.g. {_example(expected)}, "
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
                              f"{_example(expected)}, got {shown})", key=key)
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
                              f"{_example(expected)})", key=key)
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
    except _UnitProblem:
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
    except (_UnitProblem, ExpressionError):
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
    except (_UnitProblem, ExpressionError):
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

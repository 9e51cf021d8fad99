"""Units to exact SI magnitudes, dimensions and their messages.

Reference values (exact by definition; sources cited from memory):
* 1 lb = 0.45359237 kg and 1 in = 0.0254 m: international yard and pound agreement (1959);
  NIST SP 811 (2008), App. B.
* standard gravity g0 = 9.80665 m/s^2: 3rd CGPM (1901); NIST SP 330 (2019).
* 1 lbf = 1 lb * g0 = 4.4482216152605 N; 1 kip = 1000 lbf; 1 psi = 1 lbf/in^2
  (NIST SP 811 (2008), App. B, follows from the two lines above).
* SI prefixes (m = 1e-3, u = 1e-6, k = 1e3, M = 1e6) and coherent units N, V, ohm, H, F:
  BIPM SI Brochure, 9th edition (2019).
"""

from __future__ import annotations

import ast
import math
import re
from fractions import Fraction
from pathlib import Path

import pint
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from closedform import quantities as q
from closedform.errors import ExpressionError
from closedform.quantities import (
    ACCELERATION,
    CAPACITANCE,
    DAMPING,
    DIMENSIONLESS,
    FORCE,
    FREQUENCY,
    IMPULSE,
    INDUCTANCE,
    LENGTH,
    MASS,
    PRESSURE,
    RESISTANCE,
    STIFFNESS,
    TIME,
    VELOCITY,
    VOLTAGE,
    describe,
    dimension,
    dimension_of,
    dimension_of_unit,
    parse_quantity,
    si_unit_text,
    unit_factor,
)

LB = sympy.Rational(45359237, 10**8)
INCH = sympy.Rational(254, 10**4)
G0 = sympy.Rational(980665, 10**5)
LBF = LB * G0

K = sympy.Symbol("k", positive=True)
M = sympy.Symbol("m", positive=True)
ZETA = sympy.Symbol("zeta", positive=True)
TAU = sympy.Symbol("tau", positive=True)
T = sympy.Symbol("t", positive=True)
L = sympy.Symbol("L", positive=True)
NAMES = {"k": K, "m": M, "zeta": ZETA, "tau": TAU, "t": T, "L": L}
NAME_DIMENSIONS = {"k": STIFFNESS, "m": MASS, "zeta": DIMENSIONLESS, "tau": TIME, "t": TIME,
                   "L": LENGTH}


def quantity(value: object, expected: object) -> sympy.Expr:
    return parse_quantity(value, expected=expected, names=NAMES,
                          name_dimensions=NAME_DIMENSIONS, key="model.k")


def message_of(value: object, expected: object) -> str:
    with pytest.raises(ExpressionError) as caught:
        quantity(value, expected)
    assert caught.value.key == "model.k"
    assert "\n" not in caught.value.message
    return caught.value.message


# --- exact conversions ------------------------------------------------------------------

def test_lbf_is_exactly_the_nist_value() -> None:
    assert LBF == sympy.Rational(44482216152605, 10**13)


@pytest.mark.parametrize(("text", "expected", "value"), [
    ("1200 lb", MASS, sympy.Rational(544310844, 10**6)),
    ("1 lb", MASS, LB),
    ("1 in", LENGTH, INCH),
    ("12 in", LENGTH, sympy.Rational(3048, 10**4)),
    ("1 ft", LENGTH, sympy.Rational(3048, 10**4)),
    ("1 lbf", FORCE, LBF),
    ("1.5e3 lbf", FORCE, 1500 * LBF),
    ("1 kip", FORCE, 1000 * LBF),
    ("2 psi", PRESSURE, 2 * LBF / INCH**2),
    ("1 lbf/in", STIFFNESS, LBF / INCH),
    ("20 ms", TIME, sympy.Rational(1, 50)),
    ("2.6 MN/m", STIFFNESS, sympy.Integer(2600000)),
    ("95 N*s", IMPULSE, sympy.Integer(95)),
    ("95 kN*s/m", DAMPING, sympy.Integer(95000)),
    ("4.7 uF", CAPACITANCE, sympy.Rational(47, 10**7)),
    ("10 mH", INDUCTANCE, sympy.Rational(1, 100)),
    ("220 ohm", RESISTANCE, sympy.Integer(220)),
    ("12 V", VOLTAGE, sympy.Integer(12)),
    ("1 g0", ACCELERATION, G0),
    ("0.3 g0", ACCELERATION, sympy.Rational(3, 10) * G0),
    ("-3 mm", LENGTH, sympy.Rational(-3, 1000)),
    ("+5 cm", LENGTH, sympy.Rational(1, 20)),
    ("3 m/s", VELOCITY, sympy.Integer(3)),
    ("9.81 m/s^2", ACCELERATION, sympy.Rational(981, 100)),
    ("50 Hz", FREQUENCY, sympy.Integer(50)),
    ("2 s^-1", FREQUENCY, sympy.Integer(2)),
    ("40 1/s", FREQUENCY, sympy.Integer(40)),
    ("3 1/ms", FREQUENCY, sympy.Integer(3000)),
    ("1 kg*m/s**2", FORCE, sympy.Integer(1)),
    ("1 kg/(m*s^2)", PRESSURE, sympy.Integer(1)),
    ("1.5 h", TIME, sympy.Integer(5400)),
    ("5 percent", DIMENSIONLESS, sympy.Rational(1, 20)),
    ("  7   kN  ", FORCE, sympy.Integer(7000)),
])
def test_exact_unit_conversions(text: str, expected: q.Dimension, value: sympy.Expr) -> None:
    result = quantity(text, expected)
    assert result == value
    assert not result.atoms(sympy.Float)


def test_angle_units_use_the_true_pi() -> None:
    # pint defines the degree through a 50-digit decimal pi; the factor is rebuilt on sympy.pi.
    assert quantity("180 deg", DIMENSIONLESS) == sympy.pi
    assert quantity("3000 rpm", FREQUENCY) == 100 * sympy.pi
    assert quantity("1 revolution", DIMENSIONLESS) == 2 * sympy.pi
    assert quantity("2 rad", DIMENSIONLESS) == 2


@pytest.mark.parametrize(("unit", "factor", "dim"), [
    ("mm", sympy.Rational(1, 1000), LENGTH),
    ("lbf", LBF, FORCE),
    ("kN*s/m", sympy.Integer(1000), DAMPING),
    ("uF", sympy.Rational(1, 10**6), CAPACITANCE),
    ("mH", sympy.Rational(1, 1000), INDUCTANCE),
    ("ohm", sympy.Integer(1), RESISTANCE),
    ("psi", LBF / INCH**2, PRESSURE),
    ("1", sympy.Integer(1), DIMENSIONLESS),
    ("1/s", sympy.Integer(1), FREQUENCY),
    ("m^(1/2)", sympy.Integer(1), LENGTH ** Fraction(1, 2)),
])
def test_unit_factor(unit: str, factor: sympy.Expr, dim: q.Dimension) -> None:
    assert unit_factor(unit, key="display.unit") == (factor, dim)


def test_conversion_factors_agree_with_pint_float_conversions() -> None:
    # An independent path: pint's ordinary float registry.
    plain = pint.UnitRegistry()
    for unit in ("lb", "in", "ft", "lbf", "kip", "psi", "ms", "MN/m", "kN*s/m", "uF", "mH",
                 "ohm", "g0", "mile", "ounce", "hp", "kWh", "bar", "deg", "rpm", "N*m", "slug",
                 "minute", "day", "mV", "kohm", "nF", "uH"):
        factor, dim = unit_factor(unit, key=None)
        reference = plain.Quantity(1.0, unit).to_base_units()
        assert math.isclose(float(factor), reference.magnitude, rel_tol=1e-12), unit
        assert dim == q.Dimension(dict(reference.dimensionality)), unit


# --- named dimensions, descriptions, SI unit text -----------------------------------------

@pytest.mark.parametrize(("unit", "name"), [
    ("s", "time"), ("kg", "mass"), ("m", "length"), ("N", "force"), ("N/m", "stiffness"),
    ("N*s/m", "damping"), ("m/s", "velocity"), ("m/s^2", "acceleration"), ("N*s", "impulse"),
    ("V", "voltage"), ("ohm", "resistance"), ("H", "inductance"), ("F", "capacitance"),
    ("Hz", "frequency"), ("A", "current"), ("C", "charge"), ("J", "energy"), ("W", "power"),
    ("Pa", "pressure"), ("rad", "dimensionless"),
])
def test_named_dimensions_match_pint(unit: str, name: str) -> None:
    assert dimension_of_unit(unit, key=None) == dimension(name)
    assert dimension(name) == q.DIMENSIONS[name]


def test_unknown_dimension_name() -> None:
    with pytest.raises(ValueError, match="unknown dimension name 'forse'"):
        dimension("forse")


@pytest.mark.parametrize(("dim", "text", "unit"), [
    (DIMENSIONLESS, "dimensionless", "1"),
    (TIME, "time", "s"),
    (MASS, "mass", "kg"),
    (LENGTH, "length", "m"),
    (FORCE, "force", "N"),
    (STIFFNESS, "force/length", "N/m"),
    (DAMPING, "force*time/length", "N*s/m"),
    (VELOCITY, "length/time", "m/s"),
    (ACCELERATION, "length/time^2", "m/s^2"),
    (IMPULSE, "force*time", "N*s"),
    (VOLTAGE, "voltage", "V"),
    (RESISTANCE, "resistance", "ohm"),
    (INDUCTANCE, "inductance", "H"),
    (CAPACITANCE, "capacitance", "F"),
    (FREQUENCY, "1/time", "1/s"),
    (FORCE * VELOCITY * MASS, "mass^2*length^2/time^3", "kg^2*m^2/s^3"),
    (MASS / LENGTH / TIME**3, "mass/(length*time^3)", "Pa/s"),
    (DIMENSIONLESS / (MASS * TIME), "1/(mass*time)", "1/(kg*s)"),
    (MASS ** Fraction(1, 2), "mass^(1/2)", "kg^(1/2)"),
])
def test_describe_and_si_unit_text(dim: q.Dimension, text: str, unit: str) -> None:
    assert describe(dim) == text
    assert si_unit_text(dim) == unit
    assert unit_factor(unit, key=None) == (1, dim)  # the SI text reads back as itself


def test_every_named_dimension_round_trips_through_its_si_unit() -> None:
    for dim in q.DIMENSIONS.values():
        assert unit_factor(si_unit_text(dim), key=None) == (1, dim)


def test_dimension_helpers() -> None:
    assert q.multiply_dimensions(FORCE, TIME) == IMPULSE
    assert q.divide_dimensions(FORCE, LENGTH) == STIFFNESS
    assert q.power_dimension(STIFFNESS / MASS, sympy.Rational(1, 2)) == FREQUENCY
    assert q.power_dimension(LENGTH, 0) == DIMENSIONLESS
    assert q.multiply_dimensions() == DIMENSIONLESS


# --- the accepted value forms -------------------------------------------------------------

def test_toml_numbers_only_for_dimensionless_values() -> None:
    assert quantity(3, DIMENSIONLESS) == 3
    assert quantity(0.02, DIMENSIONLESS) == sympy.Rational(1, 50)
    assert quantity(0.1, "dimensionless") == sympy.Rational(1, 10)
    assert quantity(1e-05, DIMENSIONLESS) == sympy.Rational(1, 10**5)
    assert quantity(-2.5e16, DIMENSIONLESS) == -25 * sympy.Integer(10) ** 15
    assert message_of(12, STIFFNESS) == (
        'number without a unit (expected force/length, e.g. "12 N/m", got the plain number 12)')
    assert message_of(2.5, FORCE) == (
        'number without a unit (expected force, e.g. "12 N", got the plain number 2.5)')


@pytest.mark.parametrize(("value", "fragment"), [
    (float("nan"), "not a finite number (expected a finite number, got nan)"),
    (float("inf"), "got inf"),
    (float("-inf"), "got -inf"),
    (True, "got true"),
    ([1, 2], "got list"),
    ({"a": 1}, "got dict"),
    (None, "got NoneType"),
    (10**400, "number out of range"),
])
def test_unusable_toml_values(value: object, fragment: str) -> None:
    assert fragment in message_of(value, DIMENSIONLESS)


@settings(max_examples=150, deadline=None)
@given(st.floats(min_value=-1e300, max_value=1e300, allow_nan=False)
       .filter(lambda x: x == 0 or abs(x) > 1e-290))
def test_floats_become_the_decimal_they_print_as(value: float) -> None:
    exact = Fraction(repr(value))  # Python's exact decimal-string reading
    assert quantity(value, DIMENSIONLESS) == sympy.Rational(exact.numerator, exact.denominator)


def test_plain_number_strings_are_dimensionless() -> None:
    assert quantity("0.02", DIMENSIONLESS) == sympy.Rational(1, 50)
    assert quantity(" -1.5e-3 ", DIMENSIONLESS) == sympy.Rational(-3, 2000)
    assert message_of("0.02", STIFFNESS) == (
        'number without a unit (expected force/length, e.g. "12 N/m", '
        'got the plain number 0.02)')
    assert "e.g. \"12 s^-1\"" in message_of("3", FREQUENCY)


def test_suggested_examples_read_back() -> None:
    for dim in [*q.DIMENSIONS.values(), MASS ** Fraction(-1, 2), DIMENSIONLESS / (MASS * TIME)]:
        if dim == DIMENSIONLESS:
            continue
        example = re.search(r'e\.g\. "([^"]+)"', message_of(12, dim)).group(1)
        assert quantity(example, dim) == 12, example


def test_formulas_over_declared_names() -> None:
    damping = quantity("2*zeta*sqrt(k*m)", DAMPING)
    assert sympy.simplify(damping - 2 * ZETA * sympy.sqrt(K * M)) == 0
    assert quantity("k", STIFFNESS) is K
    assert quantity("3*L", LENGTH) == 3 * L
    assert quantity("sqrt(k/m)", FREQUENCY) == sympy.sqrt(K / M)
    assert quantity("k^(1/2)*m^0.5", DAMPING) == sympy.sqrt(K) * sympy.sqrt(M)
    assert quantity("exp(-tau/t)", DIMENSIONLESS) == sympy.exp(-TAU / T)
    assert quantity("abs(-L)", LENGTH) == L
    assert quantity("k*L", FORCE) == K * L
    assert quantity("tau/2 + t", TIME) == TAU / 2 + T
    assert quantity("2*pi*zeta", DIMENSIONLESS) == 2 * sympy.pi * ZETA
    assert quantity("m/k", TIME**2) == M / K
    assert quantity("(zeta+1)^zeta", "dimensionless") == (ZETA + 1) ** ZETA


@pytest.mark.parametrize(("value", "expected", "message"), [
    ("12 kg", STIFFNESS, "wrong dimension (expected force/length, got mass)"),
    ("k", MASS, "wrong dimension (expected mass, got force/length)"),
    ("m", STIFFNESS, "wrong dimension (expected force/length, got mass)"),
    ("5 N", IMPULSE, "wrong dimension (expected force*time, got force)"),
    ("3 m/s", ACCELERATION, "wrong dimension (expected length/time^2, got length/time)"),
    ("2*zeta*sqrt(k*m)", STIFFNESS,
     "wrong dimension (expected force/length, got force*time/length)"),
    ("1 kg*m^2/s^3", FORCE, "wrong dimension (expected force, got power)"),
    ("1 kg^2", MASS, "wrong dimension (expected mass, got mass^2)"),
    ("k + m", STIFFNESS,
     "terms of a sum must share one dimension at column 5 (expected force/length, got mass)"),
    ("k + m - m", STIFFNESS, "terms of a sum must share one dimension at column 5 "
                             "(expected force/length, got mass)"),
    ("sin(tau)", DIMENSIONLESS, "argument of sin must be dimensionless at column 1 "
                                "(expected dimensionless, got time)"),
    ("exp(k)", DIMENSIONLESS, "argument of exp must be dimensionless at column 1 "
                              "(expected dimensionless, got force/length)"),
    ("2^tau", DIMENSIONLESS, "an exponent must be dimensionless at column 2 "
                             "(expected dimensionless, got time)"),
    ("k^zeta", STIFFNESS, "a quantity with a dimension needs a fixed number as exponent at "
                          "column 2 (expected a number, got 'zeta')"),
    ("k^pi", STIFFNESS, "a quantity with a dimension needs a fixed number as exponent at "
                        "column 2 (expected a number, got 'pi')"),
    ("1 + zeta", LENGTH, "wrong dimension (expected length, got dimensionless)"),
])
def test_dimension_errors_verbatim(value: str, expected: q.Dimension, message: str) -> None:
    assert message_of(value, expected) == message


def test_unit_word_that_is_also_a_declared_name() -> None:
    # "3 m" with a mass called m: only the unit reading fits a length, so it is the unit.
    assert quantity("3 m", LENGTH) == 3
    # "3 L" reads as litres; the message points at the declared name.
    assert message_of("3 L", LENGTH) == (
        "wrong dimension (expected length, got length^3); 'L' is read as a unit here; "
        "write 3*L to use the declared name")
    # Both readings fit: refuse to guess.
    assert message_of("2 zeta", DIMENSIONLESS) == (
        "ambiguous value '2 zeta' ('zeta' is both a unit and a declared name; write 2*zeta "
        "for the name)")


def test_gram_is_not_gravity() -> None:
    assert message_of("0.3 g", ACCELERATION) == (
        "wrong dimension (expected length/time^2, got mass); g is the gram; "
        "standard gravity is g0")


@pytest.mark.parametrize(("value", "fragment"), [
    ("kN", 'missing number before the unit (expected e.g. "12 kN", got \'kN\')'),
    ("N/m", "missing number before the unit"),
    ("", 'empty value (expected force, e.g. "12 N")'),
    ("   ", "empty value"),
    ("5 furlongz", "unknown unit 'furlongz'"),
    ("5 N m^", "unit exponent not allowed"),
    ("5 m^999", "unit exponent not allowed"),
    ("5 m^(9^9^9)", "unit exponent not allowed"),
    ("5 N-m", "unexpected '-' in unit 'N-m'"),
    ("5 N.m", "unexpected '.' in unit 'N.m'"),
    ("5 N2", "unknown unit 'N2'"),
    ("5 m*2", "unexpected '2' in unit"),
    ("5 " + "N*" * 60 + "N", "unit too long (at most 100 characters, got 121)"),
    ("20 degC", "offset units are not accepted"),
    ("20 degF", "offset units are not accepted"),
    ("3 dB", "offset units are not accepted"),
    ("2 5 N", "unexpected '5' at column 3"),
    ("5 N + 3 N", "character not allowed in unit 'N + 3 N' at column 3"),
    ("5 kN * 2", "unexpected"),
    ("2*k^2 kg", "a formula cannot carry a unit (expected a number with a unit such as "
                 "\"12 kg\", or a formula over declared names, got 'kg' after '2*k^2')"),
    ("(1+k) kN", "a formula cannot carry a unit"),
])
def test_bad_quantity_texts(value: str, fragment: str) -> None:
    assert fragment in message_of(value, FORCE)


@pytest.mark.parametrize("value, expected", [
    ("pi/40 s", sympy.pi / 40),
    ("2*sqrt(2) kN", 2000 * sympy.sqrt(2)),
    ("(1+2) kN", sympy.Integer(3000)),
])
def test_a_formula_of_numbers_only_may_carry_a_unit(value: str, expected: sympy.Expr) -> None:
    dimension = TIME if value.endswith(" s") else FORCE
    assert parse_quantity(value, expected=dimension, names={}, name_dimensions={}, key="x") == expected


def test_unit_factor_errors_carry_the_key() -> None:
    with pytest.raises(ExpressionError) as caught:
        unit_factor("parsec^", key="output.unit")
    assert caught.value.key == "output.unit"
    with pytest.raises(ExpressionError, match="not a unit"):
        unit_factor(3, key=None)  # type: ignore[arg-type]


# --- dimension_of on sympy expressions ------------------------------------------------

BY_SYMBOL = {K: STIFFNESS, M: MASS, ZETA: DIMENSIONLESS, TAU: TIME, T: TIME, L: LENGTH}


@pytest.mark.parametrize(("expr", "dim"), [
    (2 * ZETA * sympy.sqrt(K * M), DAMPING),
    (sympy.sqrt(K / M), FREQUENCY),
    (K * L, FORCE),
    (sympy.Integer(7), DIMENSIONLESS),
    (sympy.pi * sympy.sqrt(2), DIMENSIONLESS),
    (sympy.sin(sympy.sqrt(K / M) * T), DIMENSIONLESS),
    (L * sympy.exp(-T / TAU) + L, LENGTH),
    (sympy.Heaviside(T - TAU), DIMENSIONLESS),
    (K * L * sympy.Heaviside(T - TAU), FORCE),
    (sympy.DiracDelta(T - TAU), FREQUENCY),
    (sympy.Abs(L), LENGTH),
    (sympy.Piecewise((L, T < TAU), (2 * L, True)), LENGTH),
    (sympy.Piecewise((0, T < 0), (L, True)), LENGTH),
    (sympy.Max(T, TAU), TIME),
    (sympy.Derivative(L * T, T, 2), LENGTH / TIME),
    (sympy.Integral(K * L, (T, 0, TAU)), IMPULSE),
    (M ** sympy.Rational(3, 2), MASS ** Fraction(3, 2)),
    (ZETA ** ZETA, DIMENSIONLESS),
])
def test_dimension_of(expr: sympy.Expr, dim: q.Dimension) -> None:
    assert dimension_of(expr, BY_SYMBOL) == dim


@pytest.mark.parametrize(("expr", "message"), [
    (K + M, "terms of a sum must share one dimension"),
    (sympy.exp(T), "argument of exp must be dimensionless (expected dimensionless, got time)"),
    (K ** ZETA, "a quantity with a dimension needs a fixed number as exponent"),
    (ZETA ** T, "an exponent must be dimensionless"),
    (sympy.Symbol("x") * K, "no dimension is known for 'x'"),
    (sympy.Piecewise((L, T < M), (2 * L, True)),
     "sides of a comparison must share one dimension"),
    (sympy.Function("f")(T), "cannot determine the dimension of 'f(t)'"),
])
def test_dimension_of_errors(expr: sympy.Expr, message: str) -> None:
    with pytest.raises(ExpressionError) as caught:
        dimension_of(expr, BY_SYMBOL, key="model")
    assert message in caught.value.message
    assert caught.value.key == "model"


# --- registry, hostile input ------------------------------------------------------------

def test_registry_is_created_lazily_and_exact() -> None:
    # Importing the module must not build a registry: the only UnitRegistry call sits in a
    # function behind functools.cache.
    from closedform import units

    tree = ast.parse(Path(units.__file__).read_text())      # quantities' light half
    builders = [node for node in ast.walk(tree) if isinstance(node, ast.Call)
                and ast.unparse(node.func).endswith("UnitRegistry")]
    assert len(builders) == 1
    (function,) = [node for node in tree.body if isinstance(node, ast.FunctionDef)
                   and builders[0] in list(ast.walk(node))]
    assert [ast.unparse(item) for item in function.decorator_list] == ["functools.cache"]
    assert q.registry() is q.registry()
    assert q.registry().non_int_type is Fraction


def hostile_quantities(marker: Path) -> list[str]:
    touch = f"touch {marker}"
    return [
        "5 kg*__import__('os')",
        f"5 kg*__import__('os').system('{touch}')",
        "5 N; rm -rf /",
        f"5 N; {touch}",
        "5 N && ls",
        "5 N | cat",
        "5 N`id`",
        "5 $(id)",
        "5 N\0",
        "5 N\n6",
        "5\nN",
        "k\n+1",
        "5\rN",
        "5 \uff2e",  # fullwidth N
        "5 µ",          # a micro sign without a unit after it
        "5 °°",
        "5 m^(9**9**9)",
        "5 m**99999999",
        "5 ((((((((((((((((((((((((((((((((((((((((((((((((((m",
        "5 " + "m*" * 5000 + "m",
        "5 lambda: 0",
        "5 N.__class__",
        "5 [N]",
        "5 {N}",
        "5 'N'",
        "5 N # comment",
        "5 N%",
        "1e999 N",
        "nan N",
        "inf N",
        "5 kN" + "\u202e",
        f"open('{marker}', 'w')",
        "__import__",
        "9**9**9",
        "(" * 5000 + ")" * 5000,
        "k" * 100000,
    ]


def test_hostile_quantities_are_rejected_harmlessly(tmp_path: Path) -> None:
    marker = tmp_path / "pwned"
    corpus = hostile_quantities(marker)
    assert len(corpus) >= 20
    for value in corpus:
        with pytest.raises(ExpressionError) as caught:
            quantity(value, FORCE)
        assert "\n" not in caught.value.message and len(caught.value.message) < 400
        if value.startswith("5 "):  # the unit part alone is refused as well
            with pytest.raises(ExpressionError):
                q.unit_factor(value[2:], key=None)
    assert not marker.exists()


def test_source_never_evaluates_strings() -> None:
    source = Path(q.__file__).read_text()
    assert not re.search(r"\b(eval|exec|sympify|parse_expr)\s*\(", source)


UNITS_SEEN_IN_CASES = ("mm", "kN", "lbf", "kip/in", "psi", "lb", "ms", "N*s/m", "uF", "mH",
                       "ohm", "g0", "deg", "rpm", "ft*lbf", "kN*m", "in", "MPa")


def _factors_in_a_fresh_process(cache: str, *, pint_imported: bool | None = None
                                 ) -> list[str]:
    """The factors and dimensions of UNITS_SEEN_IN_CASES, worked out in a new process with
    the given unit cache; ``pint_imported`` (if given) is whether that process imported pint."""
    import json
    import subprocess
    import sys

    code = ("import json, sys; from closedform import quantities as q; "
            f"found = [q.unit_factor(u, key=None) for u in {list(UNITS_SEEN_IN_CASES)!r}]; "
            "print(json.dumps([[str(f), sorted((b, str(p)) for b, p in d.items())] "
            "for f, d in found])); print('pint' in sys.modules)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env={**__import__("os").environ, q.UNIT_CACHE_VARIABLE: cache,
                               "PYTHONPATH": str(Path(__file__).resolve().parent.parent)},
                          check=True)
    factors, imported = done.stdout.splitlines()
    if pint_imported is not None:
        assert imported == str(pint_imported)
    return json.loads(factors)


def test_the_unit_cache_changes_no_factor_and_a_damaged_cache_only_costs_time(tmp_path):
    """Issue 18: pint's disk cache of parsed definitions (its own mechanism) must give the
    very factors of a registry built from the definition file, on the run that writes the
    cache, the run that reads it, and a run that finds the cache files damaged."""
    uncached = _factors_in_a_fresh_process("off")
    folder = tmp_path / "units"
    assert _factors_in_a_fresh_process(str(folder)) == uncached       # writes the cache
    assert list(folder.glob("*.pickle")), "pint wrote no cache"
    assert _factors_in_a_fresh_process(str(folder)) == uncached       # reads it
    for pickled in folder.glob("*.pickle"):
        pickled.write_bytes(pickled.read_bytes()[:100])                # a run cut off mid-write
    (folder / "conversions.json").unlink()             # so that pint reads its damaged files
    assert _factors_in_a_fresh_process(str(folder), pint_imported=True) == uncached
    blocked = tmp_path / "a-file"
    blocked.write_text("not a folder")
    assert _factors_in_a_fresh_process(str(blocked / "units")) == uncached
    # the exact factors themselves (NIST SP 811 (2008), App. B; see the module docstring)
    assert sympy.Rational(uncached[UNITS_SEEN_IN_CASES.index("lbf")][0]) == \
        sympy.Rational("4.4482216152605")


def test_a_run_whose_units_pint_gave_before_reads_them_from_disk_without_pint(tmp_path):
    """Issue 18: importing pint and loading its registry are 0.13 s of a 0.7 s run; the
    factors pint gave are kept on disk and a later run takes them from there, identical to
    a run with no cache at all (the factors themselves are pinned above against NIST SP 811
    and pint's float registry)."""
    uncached = _factors_in_a_fresh_process("off", pint_imported=True)
    folder = tmp_path / "units"
    assert _factors_in_a_fresh_process(str(folder), pint_imported=True) == uncached
    assert (folder / "conversions.json").exists()
    assert _factors_in_a_fresh_process(str(folder), pint_imported=False) == uncached


def _stored(folder: Path) -> dict:
    import json

    return json.loads((folder / "conversions.json").read_text())


def _store(folder: Path, content: dict) -> None:
    import json

    (folder / "conversions.json").write_text(json.dumps(content))


def test_a_changed_or_damaged_conversion_file_is_never_read(tmp_path):
    """A factor edited in the file (its digest no longer matches), a file kept for another
    pint or another version of closedform's unit code (another key) and a file cut off
    mid-write are each ignored: the factors come from pint again."""
    import hashlib
    import json

    uncached = _factors_in_a_fresh_process("off")
    folder = tmp_path / "units"
    _factors_in_a_fresh_process(str(folder))
    good = _stored(folder)
    edited = json.loads(json.dumps(good))
    edited["entries"]["mm"][0] = "1/100"                           # a wrong factor
    other_key = {**good, "key": hashlib.blake2b(b"another pint", digest_size=20).hexdigest()}
    for damaged in (edited, other_key):
        _store(folder, damaged)
        assert _factors_in_a_fresh_process(str(folder), pint_imported=True) == uncached
    (folder / "conversions.json").write_text(json.dumps(good)[:200])
    assert _factors_in_a_fresh_process(str(folder), pint_imported=True) == uncached
    assert _stored(folder)["entries"] == good["entries"]            # written back whole


def test_the_conversion_file_keeps_only_what_pint_accepted(tmp_path, monkeypatch):
    """A refused unit text is never kept, so it is refused by pint again on the next run;
    a key made from other installed files of pint starts an empty cache."""
    from closedform import units

    cache = units.ConversionCache(tmp_path)
    factor, dim = units._pint_fraction("kip/in")
    cache.put("kip/in", (factor, dim))
    assert units.ConversionCache(tmp_path).get("kip/in") == (factor, dim)
    with pytest.raises(units.UnitProblem):
        units._pint_fraction("furlongs_of_x")
    assert set(_stored(tmp_path)["entries"]) == {"kip/in"}
    monkeypatch.setattr(units, "_installed_pint", lambda: b"another release of pint")
    assert units.ConversionCache(tmp_path).get("kip/in") is None


def test_dimensions_multiply_divide_and_raise_to_rational_powers_as_pint_s_do() -> None:
    """closedform's Dimension against pint's own dimension algebra (pint's UnitsContainer)."""
    import pickle

    from pint.util import UnitsContainer

    def pint_of(dim: q.Dimension) -> UnitsContainer:
        return UnitsContainer(dict(dim.items()), non_int_type=Fraction)

    for left, right in ((FORCE, LENGTH), (STIFFNESS, TIME), (q.VOLTAGE, q.CURRENT),
                        (DIMENSIONLESS, TIME)):
        assert pint_of(left * right) == pint_of(left) * pint_of(right)
        assert pint_of(left / right) == pint_of(left) / pint_of(right)
        assert pint_of(left ** Fraction(1, 2)) == pint_of(left) ** Fraction(1, 2)
    assert FORCE / FORCE == DIMENSIONLESS and not DIMENSIONLESS.items()
    assert hash(STIFFNESS * LENGTH) == hash(FORCE)
    assert pickle.loads(pickle.dumps(DAMPING)) == DAMPING
    with pytest.raises(AttributeError):
        FORCE._exponents = ()                                        # immutable

"""The whitelisted formula grammar: exact values, precedence, limits and hostile input."""

from __future__ import annotations

import builtins
import re
from fractions import Fraction
from pathlib import Path

import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from closedform import expressions
from closedform.errors import CaseError, ExpressionError
from closedform.expressions import FUNCTIONS, RESERVED_NAMES, parse_expression, parse_number

K = sympy.Symbol("k", positive=True)
M = sympy.Symbol("m", positive=True)
ZETA = sympy.Symbol("zeta", positive=True)
TAU = sympy.Symbol("tau")
NAMES = {"k": K, "m": M, "zeta": ZETA, "tau": TAU}


def parse(text: str) -> sympy.Expr:
    return parse_expression(text, names=NAMES, key="model.k")


def error_of(text: str) -> ExpressionError:
    with pytest.raises(ExpressionError) as caught:
        parse(text)
    return caught.value


# --- exact numbers -----------------------------------------------------------------------

@pytest.mark.parametrize(("text", "value"), [
    ("0", sympy.Integer(0)),
    ("42", sympy.Integer(42)),
    ("2.6", sympy.Rational(13, 5)),
    ("1.5e-3", sympy.Rational(3, 2000)),
    ("1.5E3", sympy.Integer(1500)),
    ("1e+2", sympy.Integer(100)),
    (".5", sympy.Rational(1, 2)),
    ("5.", sympy.Integer(5)),
    ("0.1", sympy.Rational(1, 10)),
    ("12.50", sympy.Rational(25, 2)),
    ("0.000001", sympy.Rational(1, 10**6)),
    ("1e300", sympy.Integer(10) ** 300),
    ("1e-300", sympy.Rational(1, 10**300)),
    ("0.1+0.2", sympy.Rational(3, 10)),
    ("1/3", sympy.Rational(1, 3)),
])
def test_numbers_are_exact_rationals(text: str, value: sympy.Rational) -> None:
    result = parse(text)
    assert result == value
    assert result.is_Rational


def test_no_float_anywhere_in_results() -> None:
    for text in ("2.6*k", "1.5e-3/tau", "0.5^2", "sqrt(2.25)"):
        assert not parse(text).atoms(sympy.Float)


@pytest.mark.parametrize(("text", "value"), [
    ("-3", sympy.Integer(-3)),
    ("+2.5", sympy.Rational(5, 2)),
    ("  7  ", sympy.Integer(7)),
    ("1.5e-3", sympy.Rational(3, 2000)),
    ("-0.02", sympy.Rational(-1, 50)),
    ("6.02e23", sympy.Integer(602) * sympy.Integer(10) ** 21),
])
def test_parse_number(text: str, value: sympy.Rational) -> None:
    assert parse_number(text, key="x") == value


@pytest.mark.parametrize("text", ["1/3", "k", "2*3", "", " ", "1.2.3", "0x10", "1_000",
                                  "nan", "inf", "-inf", "1e", "e5", "--1", "1 2", "½"])
def test_parse_number_rejects_anything_but_one_literal(text: str) -> None:
    with pytest.raises(ExpressionError):
        parse_number(text, key="x")


# --- precedence and associativity ----------------------------------------------------------

@pytest.mark.parametrize(("text", "value"), [
    ("1+2*3", 7),
    ("(1+2)*3", 9),
    ("2*3^2", 18),
    ("-2^2", -4),
    ("-2**2", -4),
    ("(-2)^2", 4),
    ("2^3^2", 512),
    ("2**3**2", 512),
    ("2^3**2", 512),
    ("(2^3)^2", 64),
    ("2^-1", sympy.Rational(1, 2)),
    ("2^-3^2", sympy.Rational(1, 512)),
    ("2^3^-1", sympy.Integer(2) ** sympy.Rational(1, 3)),
    ("8/4/2", 1),
    ("8/(4/2)", 4),
    ("2-3-4", -5),
    ("2-(3-4)", 3),
    ("1/2/3*6", 1),
    ("--3", 3),
    ("-+-3", 3),
    ("2*-3", -6),
    ("2--3", 5),
    ("2^+2", 4),
    ("-3^2*2", -18),
    ("2^3*2", 16),
    ("2+3^2*2-1", 19),
    (" 1 +\t2 * ( 3 - 1 ) ", 5),  # spaces and tabs only; newlines are refused
    ("((((7))))", 7),
])
def test_precedence_and_associativity(text: str, value: object) -> None:
    assert parse(text) == value


def test_names_map_to_the_given_objects() -> None:
    assert parse("k") is K
    assert parse("tau") is TAU
    result = parse("2*zeta*sqrt(k*m)")
    assert sympy.simplify(result - 2 * ZETA * sympy.sqrt(K * M)) == 0
    assert result.free_symbols == {ZETA, K, M}
    assert sympy.simplify(parse("k/m - tau^2*(k + 1)") - (K / M - TAU**2 * (K + 1))) == 0
    assert parse("pi") == sympy.pi
    assert sympy.simplify(parse("2*pi*tau") - 2 * sympy.pi * TAU) == 0


def test_names_can_be_any_sympy_object() -> None:
    assert parse_expression("w*2", names={"w": sympy.Integer(5)}, key="x") == 10


# --- functions ---------------------------------------------------------------------------

def test_function_whitelist_is_exactly_the_documented_one() -> None:
    assert set(FUNCTIONS) == {"sin", "cos", "tan", "exp", "log", "sqrt", "sinh", "cosh",
                              "tanh", "abs"}
    assert RESERVED_NAMES == set(FUNCTIONS) | {"pi"}


@pytest.mark.parametrize(("text", "value"), [
    ("sin(pi/6)", sympy.Rational(1, 2)),
    ("cos(pi/3)", sympy.Rational(1, 2)),
    ("tan(pi/4)", 1),
    ("exp(0)", 1),
    ("exp(1)", sympy.E),
    ("log(exp(2))", 2),
    ("log(1)", 0),
    ("sqrt(16)", 4),
    ("sqrt(2.25)", sympy.Rational(3, 2)),
    ("sinh(0)", 0),
    ("cosh(0)", 1),
    ("tanh(0)", 0),
    ("abs(-3)", 3),
    ("abs(2-5)", 3),
    ("sqrt(2)^2", 2),
])
def test_every_function_on_numbers(text: str, value: object) -> None:
    assert parse(text) == value


@pytest.mark.parametrize("name", sorted(FUNCTIONS))
def test_every_function_on_a_symbol(name: str) -> None:
    expected = FUNCTIONS[name](TAU)
    assert sympy.simplify(parse(f"{name}(tau)") - expected) == 0
    assert sympy.simplify(parse(f" {name} ( 2*tau ) ") - FUNCTIONS[name](2 * TAU)) == 0


def test_function_sympy_identity() -> None:
    assert parse("abs(tau)") == sympy.Abs(TAU)
    assert parse("log(tau)") == sympy.log(TAU)  # natural logarithm
    assert parse("sqrt(k)") == sympy.sqrt(K)
    assert parse("sin(tau)^2 + cos(tau)^2") == sympy.sin(TAU) ** 2 + sympy.cos(TAU) ** 2


# --- syntax errors name what and where --------------------------------------------------

@pytest.mark.parametrize(("text", "fragment"), [
    ("2k", "unexpected 'k' at column 2 (implicit multiplication is not allowed; write 2*k)"),
    ("2 k", "unexpected 'k' at column 3 (implicit multiplication"),
    ("2(k)", "unexpected '(' at column 2 (implicit multiplication"),
    ("(k)(m)", "unexpected '(' at column 4 (implicit multiplication"),
    ("k m", "unexpected 'm' at column 3"),
    ("k^2 m", "unexpected 'm' at column 5 (implicit multiplication is not allowed; insert '*' "
              "before 'm')"),
    ("k(2)", "unexpected '(' at column 2 (k is not a function"),
    ("1,2", "unexpected ',' at column 2"),
    ("sin(1,2)", "unexpected ',' at column 6"),
    ("a.b", "unexpected '.' at column 2"),
    ("k.real", "unexpected '.' at column 2"),
    ("[1]", "unexpected '[' at column 1"),
    ("'s'", "unexpected \"'\" at column 1"),
    ('"s"', "unexpected '\"' at column 1"),
    ("1;2", "unexpected ';' at column 2"),
    ("k__x", "unexpected '__' at column 2"),
    ("_k", "unexpected '_' at column 1"),
    ("1+", "unexpected end of formula at column 3"),
    ("(1+2", "unexpected end of formula at column 5 (expected ')' to close '(' at column 1)"),
    ("1+2)", "unexpected ')' at column 4"),
    ("*2", "unexpected '*' at column 1"),
    ("2***3", "unexpected '*' at column 4"),
    ("2^^3", "unexpected '^' at column 3"),
    ("", "empty formula"),
    ("   ", "empty formula"),
    ("sin", "function sin needs an argument in parentheses at column 1"),
    ("sin 2", "function sin needs an argument in parentheses"),
    ("1 = 2", "unexpected '=' at column 3"),
    ("1 % 2", "unexpected '%' at column 3"),
    ("2 @ k", "unexpected '@' at column 3"),
])
def test_syntax_errors(text: str, fragment: str) -> None:
    message = error_of(text).message
    assert fragment in message
    assert "\n" not in message


@pytest.mark.parametrize(("text", "fragment"), [
    ("kk", "unknown name 'kk' at column 1 (did you mean 'k'?)"),
    ("zeta2", "did you mean 'zeta'?"),
    ("taus", "did you mean 'tau'?"),
    ("sine(1)", "unknown function 'sine' at column 1 (did you mean 'sin'?)"),
    ("sqr(4)", "did you mean 'sqrt'?"),
    ("exec(k)", "unknown function 'exec'"),
    ("omega", "unknown name 'omega' at column 1 (declared names: k, m, tau, zeta)"),
    ("nan", "unknown name 'nan'"),
    ("inf", "unknown name 'inf'"),
    ("NaN", "unknown name 'NaN'"),
    ("E", "unknown name 'E'"),
    ("I", "unknown name 'I'"),
    ("oo", "unknown name 'oo'"),
])
def test_unknown_names(text: str, fragment: str) -> None:
    assert fragment in error_of(text).message


def test_unknown_name_without_declared_names() -> None:
    with pytest.raises(ExpressionError, match=r"no names are declared"):
        parse_expression("x", names={}, key="x")


def test_error_is_a_case_error_with_key_and_exit_code_2() -> None:
    error = error_of("2k")
    assert isinstance(error, CaseError)
    assert error.exit_code == 2
    assert error.key == "model.k"
    assert str(error).startswith("<case>: model.k: unexpected 'k'")


# --- values that are not finite real numbers --------------------------------------------

@pytest.mark.parametrize(("text", "fragment"), [
    ("1/0", "division by zero at column 2"),
    ("k/(tau-tau)", "division by zero at column 2"),
    ("0^-1", "division by zero at column 2"),
    ("1/((sqrt(2)+1)*(sqrt(2)-1)-1)", "division by zero"),
    ("sqrt(-4)", "square root of a negative number at column 1"),
    ("log(0)", "logarithm of zero at column 1"),
    ("log(-1)", "logarithm of a negative number"),
    ("(-8)^(1/3)", "negative number raised to a fractional power at column 5"),
    ("(-2)^pi", "negative number raised to a fractional power"),
    ("tan(pi/2)", "tan(...) is infinite or undefined at column 1"),
    ("exp(1000)", "exp(...) out of range at column 1"),
    ("exp(-1000)", "exp(...) out of range"),
    ("sin(exp(10^300))", "out of range"),
])
def test_undefined_or_unreal_values(text: str, fragment: str) -> None:
    assert fragment in error_of(text).message


def test_zero_powers() -> None:
    assert parse("0^2") == 0
    assert parse("0^0") == 1
    assert parse("(-2)^3") == -8
    assert parse("(-8)^-1") == sympy.Rational(-1, 8)


# --- limits (each message names its limit) ----------------------------------------------

def test_length_limit() -> None:
    assert parse("+".join(["1"] * 1000)) == 1000  # 1999 characters
    text = "1" + "+1" * 1000  # 2001 characters
    assert "at most 2000 characters, got 2001" in error_of(text).message


def test_depth_limit_parentheses() -> None:
    assert parse("(" * 40 + "k" + ")" * 40) is K
    message = error_of("(" * 41 + "k" + ")" * 41).message
    assert "nested too deeply" in message and "at most 40" in message


def test_depth_limit_calls() -> None:
    assert parse("abs(" * 40 + "k" + ")" * 40) == K
    assert "at most 40" in error_of("abs(" * 41 + "k" + ")" * 41).message


def test_depth_limit_power_chain() -> None:
    assert parse("^".join(["1"] * 41)) == 1  # 40 powers
    assert "at most 40" in error_of("^".join(["1"] * 42)).message


def test_long_unary_chain_needs_no_recursion() -> None:
    assert parse("-" * 1998 + "7") == 7
    assert parse("-" * 1997 + "7") == -7


def test_significant_digit_limit() -> None:
    fifty = "1" * 50
    assert parse(fifty) == int(fifty)
    assert parse("0.000" + fifty + "000") == sympy.Rational(int(fifty), 10 ** 53)
    message = error_of("1" * 51).message
    assert "too many significant digits" in message and "at most 50, got 51" in message
    assert "at most 50" in error_of("3." + "1" * 50).message
    with pytest.raises(ExpressionError, match="at most 50"):
        parse_number("1" * 51, key="x")


def test_decimal_exponent_limit() -> None:
    assert parse("9e299") == 9 * sympy.Integer(10) ** 299
    message = error_of("1e301").message
    assert "number exponent too large" in message and "at most 300" in message
    assert "at most 300" in error_of("1e-301").message
    assert "at most 300" in error_of("1e999").message
    assert "at most 300" in error_of("1e" + "9" * 1500).message
    with pytest.raises(ExpressionError, match="at most 300"):
        parse_number("1e999", key="x")


def test_literal_magnitude_limit() -> None:
    assert "between 1e-300 and 1e300" in error_of("1" + "0" * 301).message
    assert "between 1e-300 and 1e300" in error_of("99e300").message
    assert "between 1e-300 and 1e300" in error_of("0.01e-299").message


def test_power_exponent_limit() -> None:
    assert parse("k^1000") == K**1000
    message = error_of("k^1001").message
    assert "exponent too large" in message and "at most 1000" in message
    assert "at most 1000" in error_of("k^-1001").message
    assert "at most 1000" in error_of("tau^(2000/2+1)").message


def test_numeric_power_magnitude_limit() -> None:
    assert parse("10^300") == sympy.Integer(10) ** 300
    assert parse("10^-300") == sympy.Rational(1, 10**300)
    for text in ("10^301", "2^1000", "(1/2)^1000", "(10^300)^2", "pi^1000", "(2*k)^1000"):
        message = error_of(text).message
        assert "out of range" in message and "1e-300 and 1e300" in message, text


def test_power_tower_is_rejected_without_evaluating_it() -> None:
    # Speed is measured in benchmarks/rejection_speed.py, never asserted here.
    message = error_of("9**9**9").message
    assert "exponent too large at column 2 (at most 1000 in magnitude, got 387420489)" in message


def test_derived_numbers_stay_in_range() -> None:
    assert "out of range" in error_of("10^200*(10^200*k+1)").message
    assert "out of range" in error_of("exp(1000*log(10))").message
    assert parse("10^200*10^200/10^300") == sympy.Integer(10) ** 100


@pytest.mark.parametrize(("char", "code"), [
    ("\0", "U+0000 NUL"), ("\x07", "U+0007"), ("\n", "U+000A"), ("\r", "U+000D"),
    ("\x7f", "U+007F"), ("é", "U+00E9"),
    ("\u2212", "U+2212"), ("\uff4b", "U+FF4B"), ("\u200b", "U+200B"), ("\u0441", "U+0441"),
])
def test_non_printable_or_non_ascii_characters(char: str, code: str) -> None:
    message = error_of(f"k+{char}").message
    assert message == f"character not allowed at column 3 (expected printable ASCII, got {code})"


# --- hostile input ----------------------------------------------------------------------

def hostile_corpus(marker: Path) -> list[str]:
    touch = f"touch {marker}"
    return [
        f"__import__('os').system('{touch}')",
        "__import__",
        "().__class__",
        "().__class__.__bases__[0].__subclasses__()",
        "k.__class__",
        "lambda: 0",
        "lambda x: x",
        f"exec('open(\"{marker}\", \"w\")')",
        f"eval('{touch}')",
        "9**9**9",
        "9^9^9^9",
        "(" * 5000 + "1" + ")" * 5000,
        "1+" * 50000 + "1",
        "k" * 100000,
        "1\0",
        "\0",
        "1e999",
        "1e-999",
        "nan",
        "inf",
        "-inf",
        "ⅰ",
        "k\u200b",
        "\uff4b",  # fullwidth k
        "\u0441os(0)",  # Cyrillic es
        "a.b",
        "[1]",
        "{1: 2}",
        "'s'",
        '"s"',
        "1;2",
        f"1; import os; os.system('{touch}')",
        f"open('{marker}', 'w')",
        "sum(x for x in [])",
        "[x for x in (1,)]",
        "sin.__globals__",
        "sympify('x')",
        "Symbol('x')",
        "S(1)",
        "Integer(2)",
        "exp(k)(0)",
        "getattr(k, 'x')",
        "k if k else m",
        "not k",
        "k and m",
        "`k`",
        "$k",
        "#k",
        "k # comment",
        "\\x41",
        "sqrt(-1)",
        "1/0",
        "10^10^10",
        "(10^300)^(10^300)",
        "exp(exp(exp(exp(10))))",
        "sin(10^300)^10^300",
    ]


def test_hostile_corpus_is_rejected_harmlessly(tmp_path: Path) -> None:
    marker = tmp_path / "pwned"
    corpus = hostile_corpus(marker)
    assert len(corpus) >= 20
    for text in corpus:
        with pytest.raises(ExpressionError) as caught:
            parse(text)
        assert "\n" not in caught.value.message and len(caught.value.message) < 400
    assert not marker.exists()


def test_no_string_evaluation_is_used(monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse(*args: object, **kwargs: object) -> None:
        raise AssertionError("string evaluation used")

    import sympy.parsing.sympy_parser as sympy_parser

    monkeypatch.setattr(builtins, "eval", refuse)
    monkeypatch.setattr(builtins, "exec", refuse)
    monkeypatch.setattr(sympy_parser, "parse_expr", refuse)
    assert parse("2*zeta*sqrt(k*m) + sin(pi/6)^2 - 1.5e-3/tau") is not None
    with pytest.raises(ExpressionError):
        parse("__import__('os')")


def test_source_never_evaluates_strings() -> None:
    source = Path(expressions.__file__).read_text()
    assert not re.search(r"\b(eval|exec|sympify|parse_expr)\s*\(", source)
    assert not re.search(r"(?<!re\.)\bcompile\s*\(", source)


# --- property: arithmetic over small integers matches Fraction arithmetic -----------------

ADD, MUL, UNARY, POW, ATOM = 1, 2, 3, 4, 5


def _wrap(part: tuple[str, int, Fraction | None], minimum: int,
          extra: bool) -> str:
    text, precedence, _ = part
    return f"({text})" if precedence < minimum or extra else text


@st.composite
def arithmetic(draw: st.DrawFn, depth: int = 3) -> tuple[str, int, Fraction | None]:
    """(text, precedence of its top operator, exact value or None for division by zero).

    The text uses as few parentheses as the grammar needs, plus random redundant ones, so
    the parser's precedence rules are exercised; the value comes from this tree, not from
    evaluating the text.
    """
    kinds = ["number"] if depth == 0 else ["number", "negate", "add", "sub", "mul", "div",
                                            "pow", "group"]
    kind = draw(st.sampled_from(kinds))
    space = draw(st.sampled_from(["", " "]))
    extra = draw(st.booleans()) and draw(st.booleans())
    if kind == "number":
        if draw(st.booleans()):
            number = draw(st.integers(0, 12))
            return str(number), ATOM, Fraction(number)
        tenths = draw(st.integers(0, 99))
        return f"{tenths // 10}.{tenths % 10}", ATOM, Fraction(tenths, 10)
    if kind == "group":
        inner = draw(arithmetic(depth - 1))
        return f"({inner[0]})", ATOM, inner[2]
    if kind == "negate":
        inner = draw(arithmetic(depth - 1))
        value = None if inner[2] is None else -inner[2]
        return "-" + _wrap(inner, UNARY, extra), UNARY, value
    left, right = draw(arithmetic(depth - 1)), draw(arithmetic(depth - 1))
    if kind in ("add", "sub"):
        operator = "+" if kind == "add" else "-"
        text = f"{_wrap(left, ADD, extra)}{space}{operator}{space}{_wrap(right, MUL, False)}"
        if left[2] is None or right[2] is None:
            return text, ADD, None
        return text, ADD, left[2] + right[2] if kind == "add" else left[2] - right[2]
    if kind in ("mul", "div"):
        operator = "*" if kind == "mul" else "/"
        text = f"{_wrap(left, MUL, extra)}{space}{operator}{space}{_wrap(right, UNARY, False)}"
        if left[2] is None or right[2] is None or (kind == "div" and right[2] == 0):
            return text, MUL, None
        return text, MUL, left[2] * right[2] if kind == "mul" else left[2] / right[2]
    # Small exponents keep every value far inside the magnitude limits; the written forms
    # exercise right-associativity and a minus inside an exponent.
    exponent_text, exponent = draw(st.sampled_from([
        ("0", 0), ("1", 1), ("2", 2), ("3", 3), ("-1", -1), ("-2", -2), ("(-3)", -3),
        ("2^0", 1), ("1^3", 1), ("2**1", 2), ("-2^1", -2), ("-1^2", -1), ("2^1^2", 2),
    ]))
    operator = draw(st.sampled_from(["^", "**"]))
    text = f"{_wrap(left, ATOM, False)}{space}{operator}{space}{exponent_text}"
    if left[2] is None or (left[2] == 0 and exponent < 0):
        return text, POW, None
    return text, POW, left[2] ** exponent


@settings(max_examples=100, deadline=None)
@given(arithmetic())
def test_arithmetic_matches_fraction_arithmetic(case: tuple[str, int, Fraction | None]) -> None:
    text, _, value = case
    if value is None:
        with pytest.raises(ExpressionError, match="division by zero"):
            parse(text)
        return
    result = parse(text)
    assert result == sympy.Rational(value.numerator, value.denominator), text


@settings(max_examples=100, deadline=None)
@given(st.integers(-10**20, 10**20), st.integers(-30, 30))
def test_scientific_literals_are_exact(mantissa: int, exponent: int) -> None:
    text = f"{mantissa}e{exponent}"
    expected = Fraction(mantissa) * Fraction(10) ** exponent
    assert parse_number(text, key="x") == sympy.Rational(expected.numerator, expected.denominator)

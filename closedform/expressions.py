"""The small formula language accepted inside case files.

A formula is built only from numbers, declared names, the constant ``pi``, the operators
``+ - * / ^ **``, parentheses and a fixed list of functions (:data:`FUNCTIONS`). The text is
read by a hand-written tokenizer and recursive-descent parser that builds sympy objects
directly; nothing from a case file is ever handed to ``eval``, ``exec`` or a sympy string
parser. Every number is kept exact (``"1.5e-3"`` is ``3/2000``).

Size limits keep hostile or mistaken input cheap to reject: see the ``MAX_*`` constants.
"""

from __future__ import annotations

import difflib
import math
import re
from collections.abc import Callable, Collection, Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Protocol, TypeVar

import mpmath
import sympy

from closedform.errors import ExpressionError, quote  # noqa: F401 - quote re-exported

__all__ = [
    "FUNCTIONS",
    "RESERVED_NAMES",
    "MAX_LENGTH",
    "MAX_DEPTH",
    "MAX_DIGITS",
    "MAX_DECIMAL_EXPONENT",
    "MAX_POWER_EXPONENT",
    "MAX_MAGNITUDE_EXPONENT",
    "ExpressionBuilder",
    "SympyBuilder",
    "parse_expression",
    "parse_number",
    "parse_with",
    "quote",
]

#: The functions a formula may call, by the name written in the case file.
FUNCTIONS: Mapping[str, Callable[[sympy.Expr], sympy.Expr]] = MappingProxyType({
    "sin": sympy.sin,
    "cos": sympy.cos,
    "tan": sympy.tan,
    "exp": sympy.exp,
    "log": sympy.log,
    "sqrt": sympy.sqrt,
    "sinh": sympy.sinh,
    "cosh": sympy.cosh,
    "tanh": sympy.tanh,
    "abs": sympy.Abs,
})

#: Names with a fixed meaning in every formula (the functions and ``pi``); a declared symbol
#: with one of these names could never be referred to, so case files should refuse them.
RESERVED_NAMES: frozenset[str] = frozenset(FUNCTIONS) | {"pi"}

#: Longest formula text, in characters.
MAX_LENGTH = 2000
#: Deepest nesting of parentheses, function calls and chained powers.
MAX_DEPTH = 40
#: Most significant digits in one number literal.
MAX_DIGITS = 50
#: Largest |e| in a literal written as ``…e±e``.
MAX_DECIMAL_EXPONENT = 300
#: Largest |n| when a power's exponent is a number.
MAX_POWER_EXPONENT = 1000
#: Numbers and numeric powers must lie within 10**-N .. 10**N in magnitude (or be zero).
MAX_MAGNITUDE_EXPONENT = 300

_NUMBER = r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_NUMBER_RE = re.compile(_NUMBER)
_SIGNED_NUMBER_RE = re.compile(r"([+-]?)(" + _NUMBER + r")")
_LITERAL_PARTS_RE = re.compile(r"(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?")
_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_]*")
_WHITESPACE = " \t"
_OPERATORS = ("**", "+", "-", "*", "/", "^", "(", ")")
_LIMIT = 10 ** MAX_MAGNITUDE_EXPONENT
_UNDEFINED = (sympy.zoo, sympy.oo, -sympy.oo, sympy.nan)


def _fail(message: str, key: str | None) -> ExpressionError:
    return ExpressionError(message, key=key)


def _check_characters(text: str, key: str | None) -> None:
    for index, char in enumerate(text):
        if not (" " <= char <= "~" or char in _WHITESPACE):
            label = " NUL" if char == "\0" else ""
            raise _fail(f"character not allowed at column {index + 1} "
                        f"(expected printable ASCII, got U+{ord(char):04X}{label})", key)


def _literal_value(literal: str, *, key: str | None, column: int) -> sympy.Rational:
    """The exact value of an unsigned number literal that already matched ``_NUMBER``."""
    match = _LITERAL_PARTS_RE.fullmatch(literal)
    assert match is not None
    whole, fraction, exponent_text = match.group(1), match.group(2) or "", match.group(3)
    digits = (whole + fraction).strip("0")
    if len(digits) > MAX_DIGITS:
        raise _fail(f"number has too many significant digits at column {column} "
                    f"(at most {MAX_DIGITS}, got {len(digits)})", key)
    exponent = 0
    if exponent_text is not None:
        # Checked on the text first so an absurd exponent is never turned into an int.
        if len(exponent_text.lstrip("+-").lstrip("0")) > 4:
            raise _fail(f"number exponent too large at column {column} "
                        f"(at most {MAX_DECIMAL_EXPONENT} in magnitude, got {exponent_text})", key)
        exponent = int(exponent_text)
        if abs(exponent) > MAX_DECIMAL_EXPONENT:
            raise _fail(f"number exponent too large at column {column} "
                        f"(at most {MAX_DECIMAL_EXPONENT} in magnitude, got {exponent})", key)
    mantissa = int(whole + fraction) if whole + fraction else 0
    exponent -= len(fraction)
    if exponent >= 0:
        value = sympy.Rational(mantissa * 10 ** exponent)
    else:
        value = sympy.Rational(mantissa, 10 ** -exponent)
    size, scale = abs(value.p), value.q
    if size and (size > scale * _LIMIT or size * _LIMIT < scale):
        raise _fail(f"number out of range at column {column} (expected a magnitude between "
                    f"1e-{MAX_MAGNITUDE_EXPONENT} and 1e{MAX_MAGNITUDE_EXPONENT}, "
                    f"got {quote(literal)})", key)
    return value


def parse_number(text: str, *, key: str | None) -> sympy.Rational:
    """The exact value of one plain number such as ``"2.6"``, ``"-3"`` or ``"1.5e-3"``.

    No units, names or arithmetic: ``"1/3"`` is not a plain number. The digit and exponent
    limits are those of formulas.
    """
    if not isinstance(text, str):
        raise _fail(f"not a number (expected a number written as text, got {type(text).__name__})",
                    key)
    if len(text) > MAX_LENGTH:
        raise _fail(f"number too long (at most {MAX_LENGTH} characters, got {len(text)})", key)
    _check_characters(text, key)
    stripped = text.strip(_WHITESPACE)
    match = _SIGNED_NUMBER_RE.fullmatch(stripped)
    if match is None:
        raise _fail(f"not a plain number (expected a number such as 2.5 or -1.5e3, "
                    f"got {quote(text)})", key)
    column = len(text) - len(text.lstrip(_WHITESPACE)) + len(match.group(1)) + 1
    value = _literal_value(match.group(2), key=key, column=column)
    return -value if match.group(1) == "-" else value


@dataclass(frozen=True, slots=True)
class _Token:
    kind: str  # "number", "name", "op" or "end"
    text: str
    column: int  # 1-based


def _tokenize(text: str, key: str | None) -> list[_Token]:
    tokens: list[_Token] = []
    index, size = 0, len(text)
    while index < size:
        char = text[index]
        if char in _WHITESPACE:
            index += 1
            continue
        column = index + 1
        if char.isdigit() or (char == "." and index + 1 < size and text[index + 1].isdigit()):
            match = _NUMBER_RE.match(text, index)
            assert match is not None
            tokens.append(_Token("number", match.group(), column))
            index = match.end()
            continue
        if char.isalpha():
            match = _NAME_RE.match(text, index)
            assert match is not None
            word = match.group()
            if "__" in word:
                where = column + word.index("__")
                raise _fail(f"unexpected '__' at column {where}", key)
            tokens.append(_Token("name", word, column))
            index = match.end()
            continue
        for operator in _OPERATORS:
            if text.startswith(operator, index):
                tokens.append(_Token("op", operator, column))
                index += len(operator)
                break
        else:
            hint = ""
            if char == ",":
                hint = " (every function takes exactly one argument)"
            elif char == "_":
                hint = " (names start with a letter)"
            raise _fail(f"unexpected {quote(char)} at column {column}{hint}", key)
    tokens.append(_Token("end", "", size + 1))
    return tokens


Node = TypeVar("Node")


class ExpressionBuilder(Protocol[Node]):
    """What the parser calls to turn each piece of a formula into a value.

    :class:`SympyBuilder` makes sympy expressions; other builders can carry more (for example
    a dimension next to each expression). ``column`` is the 1-based position used in messages.
    """

    @property
    def known_names(self) -> Collection[str]:
        """The names a formula may use."""
        ...

    def number(self, value: sympy.Rational, column: int) -> Node: ...

    def pi(self, column: int) -> Node: ...

    def name(self, name: str, column: int) -> Node: ...

    def negate(self, operand: Node, column: int) -> Node: ...

    def add(self, terms: list[tuple[int, Node, int]]) -> Node:
        """``terms`` are (sign +1/-1, operand, column) in written order."""
        ...

    def multiply(self, factors: list[tuple[str, Node, int]]) -> Node:
        """``factors`` are ('*' or '/', operand, column) in written order; the first is '*'."""
        ...

    def power(self, base: Node, exponent: Node, column: int) -> Node: ...

    def call(self, function: str, argument: Node, column: int) -> Node: ...


class _Parser:
    def __init__(self, text: str, builder: ExpressionBuilder[Any], key: str | None) -> None:
        self.key = key
        self.builder = builder
        self.tokens = _tokenize(text, key)
        self.index = 0
        self.depth = 0

    @property
    def token(self) -> _Token:
        return self.tokens[self.index]

    def advance(self) -> _Token:
        token = self.tokens[self.index]
        self.index += 1
        return token

    def at(self, *ops: str) -> bool:
        return self.token.kind == "op" and self.token.text in ops

    def enter(self, column: int) -> None:
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise _fail(f"formula nested too deeply at column {column} (at most {MAX_DEPTH} "
                        f"levels of parentheses, function calls and powers)", self.key)

    def unexpected(self, expected: str) -> ExpressionError:
        token = self.token
        if token.kind == "end":
            return _fail(f"unexpected end of formula at column {token.column} "
                         f"(expected {expected})", self.key)
        previous = self.tokens[self.index - 1] if self.index else None
        starts_operand = token.kind == "name" or token.text == "("
        ends_operand = previous is not None and (previous.kind in ("number", "name")
                                                 or previous.text == ")")
        if previous is not None and starts_operand and ends_operand:
            before = self.tokens[self.index - 2] if self.index >= 2 else None
            in_power = before is not None and before.text in ("^", "**")
            write = (f"write {previous.text}*{token.text}"
                     if previous.kind != "op" and not in_power
                     else f"insert '*' before {quote(token.text)}")
            return _fail(f"unexpected {quote(token.text)} at column {token.column} (implicit "
                         f"multiplication is not allowed; {write})", self.key)
        return _fail(f"unexpected {quote(token.text)} at column {token.column} "
                     f"(expected {expected})", self.key)

    def parse(self) -> Any:
        if self.token.kind == "end":
            raise _fail("empty formula (expected a number, a name or a formula)", self.key)
        node = self.expression()
        if self.token.kind != "end":
            raise self.unexpected("an operator or the end of the formula")
        return node

    def expression(self) -> Any:
        terms = [(1, self.token.column, self.term())]
        while self.at("+", "-"):
            sign = -1 if self.advance().text == "-" else 1
            column = self.token.column
            terms.append((sign, column, self.term()))
        if len(terms) == 1:
            return terms[0][2]
        return self.builder.add([(sign, node, column) for sign, column, node in terms])

    def term(self) -> Any:
        column = self.token.column
        factors = [("*", self.unary(), column)]
        while self.at("*", "/"):
            operator = self.advance()
            factors.append((operator.text, self.unary(), operator.column))
        if len(factors) == 1:
            return factors[0][1]
        return self.builder.multiply(factors)

    def signs(self) -> tuple[bool, int]:
        negative, column = False, self.token.column
        while self.at("+", "-"):
            if self.advance().text == "-":
                negative = not negative
        return negative, column

    def unary(self) -> Any:
        negative, column = self.signs()
        node = self.power()
        return self.builder.negate(node, column) if negative else node

    def power(self) -> Any:
        # Built right to left without recursion so a long chain such as 2^2^2^… cannot
        # exhaust the Python stack; each link still counts towards MAX_DEPTH.
        operands: list[Any] = [self.primary()]
        links: list[tuple[int, bool, int]] = []  # (operator column, negated, operand column)
        entered = 0
        while self.at("^", "**"):
            column = self.advance().column
            self.enter(column)
            entered += 1
            negative, operand_column = self.signs()
            links.append((column, negative, operand_column))
            operands.append(self.primary())
        self.depth -= entered
        node = operands[-1]
        for position in range(len(links) - 1, -1, -1):
            column, negative, operand_column = links[position]
            if negative:
                node = self.builder.negate(node, operand_column)
            node = self.builder.power(operands[position], node, column)
        return node

    def primary(self) -> Any:
        token = self.token
        if token.kind == "number":
            self.advance()
            value = _literal_value(token.text, key=self.key, column=token.column)
            return self.builder.number(value, token.column)
        if token.kind == "name":
            return self.named()
        if self.at("("):
            self.advance()
            self.enter(token.column)
            node = self.expression()
            if not self.at(")"):
                raise self.unexpected(f"')' to close '(' at column {token.column}")
            self.advance()
            self.depth -= 1
            return node
        raise self.unexpected("a number, a name or '('")

    def named(self) -> Any:
        token = self.advance()
        word = token.text
        calls = self.at("(")
        if word in FUNCTIONS:
            if not calls:
                raise _fail(f"function {word} needs an argument in parentheses at column "
                            f"{token.column} (expected {word}(...))", self.key)
            opening = self.advance()
            self.enter(opening.column)
            argument = self.expression()
            if not self.at(")"):
                raise self.unexpected(f"')' to close {word}( at column {opening.column}")
            self.advance()
            self.depth -= 1
            return self.builder.call(word, argument, token.column)
        if word == "pi":
            node = self.builder.pi(token.column)
        elif word in self.builder.known_names:
            node = self.builder.name(word, token.column)
        else:
            raise _fail(self.unknown_message(word, token.column, calls), self.key)
        if calls:
            raise _fail(f"unexpected '(' at column {self.token.column} ({word} is not a "
                        f"function; write {word}*(...) to multiply)", self.key)
        return node

    def unknown_message(self, word: str, column: int, calls: bool) -> str:
        known = sorted(self.builder.known_names)
        candidates = list(FUNCTIONS) if calls else [*known, *FUNCTIONS, "pi"]
        what = "function" if calls else "name"
        if word.lower() in ("nan", "inf", "infinity"):
            return (f"unknown name {quote(word)} at column {column} (expected a finite number; "
                    f"there are no NaN or infinity values)")
        close = difflib.get_close_matches(word, candidates, n=1)
        if close:
            return f"unknown {what} {quote(word)} at column {column} (did you mean {close[0]!r}?)"
        if calls:
            listed = ", ".join(FUNCTIONS)
            return f"unknown function {quote(word)} at column {column} (expected one of {listed})"
        if known:
            listed = ", ".join(known[:12]) + (", ..." if len(known) > 12 else "")
            return f"unknown name {quote(word)} at column {column} (declared names: {listed})"
        return f"unknown name {quote(word)} at column {column} (no names are declared)"


class _Unsizable(Exception):
    """A number whose size could not be computed."""


# sympy's own evaluation can fail in many ways on contrived numbers; each counts as "cannot
# evaluate" rather than a crash.
_EVALUATION_ERRORS = (RecursionError, ArithmeticError, ValueError, TypeError, AttributeError,
                      mpmath.libmp.NoConvergence)


def _log10_abs(value: sympy.Expr) -> float:
    """log10 of |value| for a number without symbols; -inf when it evaluates to zero."""
    if value.is_Rational:
        if value == 0:
            return -math.inf
        return math.log10(abs(value.p)) - math.log10(value.q)
    try:
        approximate = sympy.N(value, 20)
        real, imaginary = approximate.as_real_imag()
        if not (real.is_Number and imaginary.is_Number):
            raise _Unsizable
        size = mpmath.hypot(mpmath.mpf(real), mpmath.mpf(imaginary))
        if not mpmath.isfinite(size):
            raise _Unsizable
        if not size:
            return -math.inf
        return float(mpmath.log10(size))
    except _EVALUATION_ERRORS:
        raise _Unsizable from None


def _approximate(value: sympy.Expr) -> float:
    if value.is_Rational:
        return float(value)
    try:
        approximate = sympy.N(value, 20)
        if not approximate.is_Number or not approximate.is_finite:
            raise _Unsizable
        return float(approximate)
    except _EVALUATION_ERRORS:
        raise _Unsizable from None


def _ask(question: Callable[[], bool | None]) -> bool | None:
    """A sympy assumption query (is_zero, is_negative, …), None when sympy cannot tell."""
    try:
        return question()
    except _EVALUATION_ERRORS:
        return None


def _is_zero(node: sympy.Expr) -> bool | None:
    return _ask(lambda: node.is_zero)


class SympyBuilder:
    """Builds the sympy expression of a formula, refusing results that are infinite, not
    real, or outside the size limits.

    Every number met on the way (whether written or derived, such as ``exp(700)``) must lie
    within 1e-300..1e300 in magnitude or be zero, so no step ever works on a number that
    would be expensive to compute or print.
    """

    def __init__(self, names: Mapping[str, sympy.Expr], *, key: str | None) -> None:
        self.names = names
        self.known_names = names.keys()
        self.key = key

    def _out_of_range(self, what: str, column: int, about: float) -> ExpressionError:
        return _fail(f"{what} out of range at column {column} (numbers must lie between "
                     f"1e-{MAX_MAGNITUDE_EXPONENT} and 1e{MAX_MAGNITUDE_EXPONENT} in magnitude, "
                     f"got about 1e{about:.0f})", self.key)

    def _checked(self, result: sympy.Expr, what: str, column: int) -> sympy.Expr:
        if result.has(*_UNDEFINED):
            raise _fail(f"{what} is infinite or undefined at column {column}", self.key)
        for number in result.atoms(sympy.Rational):
            size, scale = abs(number.p), number.q
            if size and (size > scale * _LIMIT or size * _LIMIT < scale):
                about = (size.bit_length() - scale.bit_length()) * math.log10(2)
                raise self._out_of_range("number", column, about)
        if result.is_number and not result.is_Rational:
            try:
                about = _log10_abs(result)
            except _Unsizable:
                raise _fail(f"cannot evaluate {what} at column {column} (expected a number "
                            f"that can be computed)", self.key) from None
            if about != -math.inf and abs(about) > MAX_MAGNITUDE_EXPONENT:
                raise self._out_of_range(what, column, about)
        return result

    def number(self, value: sympy.Rational, column: int) -> sympy.Expr:
        return value

    def pi(self, column: int) -> sympy.Expr:
        return sympy.pi

    def name(self, name: str, column: int) -> sympy.Expr:
        return self.names[name]

    def negate(self, operand: sympy.Expr, column: int) -> sympy.Expr:
        return -operand

    def add(self, terms: list[tuple[int, sympy.Expr, int]]) -> sympy.Expr:
        result = sympy.Add(*[node if sign > 0 else -node for sign, node, _ in terms])
        return self._checked(result, "the sum", terms[0][2])

    def multiply(self, factors: list[tuple[str, sympy.Expr, int]]) -> sympy.Expr:
        parts = []
        for operator, node, column in factors:
            if operator == "/":
                if _is_zero(node):
                    raise _fail(f"division by zero at column {column}", self.key)
                node = self.power(node, sympy.Integer(-1), column)
            parts.append(node)
        return self._checked(sympy.Mul(*parts), "the product", factors[0][2])

    def _size_check(self, base: sympy.Expr, exponent: sympy.Expr, column: int) -> None:
        """Refuse a numeric power whose value would leave 1e-300..1e300, before sympy
        computes it (``9**9**9`` would otherwise take minutes)."""
        try:
            about = _log10_abs(base) * _approximate(exponent)
        except _Unsizable:
            about = math.nan
        if math.isnan(about) or math.isinf(about):
            raise _fail(f"cannot evaluate the power at column {column} (expected a base and "
                        f"exponent with a clear numeric value)", self.key)
        if abs(about) > MAX_MAGNITUDE_EXPONENT:
            raise self._out_of_range("power", column, about)

    def power(self, base: sympy.Expr, exponent: sympy.Expr, column: int) -> sympy.Expr:
        if exponent.is_Number and abs(exponent) > MAX_POWER_EXPONENT:
            shown = str(exponent) if len(str(exponent)) <= 30 else str(exponent)[:30] + "..."
            raise _fail(f"exponent too large at column {column} (at most {MAX_POWER_EXPONENT} "
                        f"in magnitude, got {shown})", self.key)
        if base.is_number and exponent.is_number:
            if _ask(lambda: base.is_zero):
                if not _ask(lambda: exponent.is_nonnegative):
                    raise _fail(f"division by zero at column {column} (zero raised to a "
                                f"negative power)", self.key)
            else:
                if (_ask(lambda: base.is_extended_negative)
                        and _ask(lambda: exponent.is_integer) is not True):
                    raise _fail(f"negative number raised to a fractional power at column "
                                f"{column} (the result would not be real)", self.key)
                self._size_check(base, exponent, column)
        elif exponent.is_Number and base.is_Mul:
            # sympy distributes an integer power over a product, so the numeric factor of
            # (10^300*k)^1000 would be computed in full.
            numeric = [factor for factor in base.args if factor.is_number]
            if numeric:
                self._size_check(sympy.Mul(*numeric), exponent, column)
        return self._checked(sympy.Pow(base, exponent), "the power", column)

    def call(self, function: str, argument: sympy.Expr, column: int) -> sympy.Expr:
        if argument.is_number and function in ("sqrt", "log"):
            if function == "log" and _ask(lambda: argument.is_zero):
                raise _fail(f"logarithm of zero at column {column} (expected a value > 0)",
                            self.key)
            if _ask(lambda: argument.is_extended_negative):
                what = "square root" if function == "sqrt" else "logarithm"
                bound = ">= 0" if function == "sqrt" else "> 0"
                raise _fail(f"{what} of a negative number at column {column} "
                            f"(expected a value {bound}, got {quote(str(argument))})", self.key)
        if function == "sqrt":
            return self.power(argument, sympy.Rational(1, 2), column)
        try:
            result = FUNCTIONS[function](argument)
        except _EVALUATION_ERRORS:
            raise _fail(f"cannot evaluate {function}(...) at column {column}", self.key) from None
        return self._checked(result, f"{function}(...)", column)


def parse_with(text: str, builder: ExpressionBuilder[Node], *, key: str | None) -> Node:
    """Read the formula ``text`` and let ``builder`` assemble its value piece by piece.

    All grammar rules and size limits of :func:`parse_expression` apply; the builder adds its
    own checks.
    """
    if not isinstance(text, str):
        raise _fail(f"not a formula (expected text, got {type(text).__name__})", key)
    if len(text) > MAX_LENGTH:
        raise _fail(f"formula too long (at most {MAX_LENGTH} characters, got {len(text)})", key)
    _check_characters(text, key)
    try:
        return _Parser(text, builder, key).parse()
    except RecursionError:
        # The depth limit keeps the parser itself shallow; this only guards sympy internals.
        raise _fail("formula too complex to evaluate (expected a simpler formula)", key) from None


def parse_expression(text: str, *, names: Mapping[str, sympy.Expr], key: str | None) -> sympy.Expr:
    """The exact sympy expression a case-file formula stands for.

    ``names`` maps each name the formula may use to its sympy object. Accepted: numbers
    (``2``, ``0.5``, ``1.5e-3``), those names, ``pi``, ``+ - * /``, powers with ``^`` or ``**``
    (right-associative and binding tighter than a leading minus: ``-2^2`` is -4), parentheses
    and the functions in :data:`FUNCTIONS`. Anything else raises :class:`ExpressionError`
    naming the column.
    """
    return parse_with(text, SympyBuilder(names, key=key), key=key)

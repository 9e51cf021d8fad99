"""Typesetting: numbers, units and expressions as LaTeX, long sums broken into lines.

Numbers follow the sheet's :class:`NumberStyle` (``[report] numbers`` and ``digits``),
held in a context variable that :func:`number_style` sets for the length of one sheet.
"""

from __future__ import annotations

import contextlib
import contextvars
import re
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import mpmath
import sympy
from sympy.printing.latex import LatexPrinter

from .escaping import Math

DISPLAY_DIGITS = 10        # significant digits shown for coefficients carried as floats
REPORT_DIGITS = 6          # significant digits of reported numbers and converted pieces
LINE_WIDTH = 64            # rough width of one line of display math, in visible characters


@dataclass(frozen=True)
class NumberStyle:
    """How a sheet prints numbers ([report] numbers and digits).

    ``exact``: exact forms everywhere, carried floats to DISPLAY_DIGITS; ``auto``: exact
    forms while every integer in them has at most SHORT_DIGITS digits, decimals of
    ``digits`` significant digits otherwise; ``decimal``: every non-integer number (and
    every long integer) as a decimal of ``digits`` significant digits.
    """

    numbers: str = "exact"
    digits: int = REPORT_DIGITS

    @property
    def rounds(self) -> bool:
        return self.numbers != "exact"


SHORT_DIGITS = 6        # auto: an exact form stays while its integers have at most this many digits
_STYLE: contextvars.ContextVar[NumberStyle] = contextvars.ContextVar(
    "closedform_number_style", default=NumberStyle())  # noqa: B039 - NumberStyle is frozen


def current_style() -> NumberStyle:
    """The number style of the sheet being typeset (exact outside :func:`number_style`)."""
    return _STYLE.get()


@contextlib.contextmanager
def number_style(style: NumberStyle) -> Iterator[NumberStyle]:
    """Typeset with ``style`` inside the block (one sheet), the previous style after it."""
    token = _STYLE.set(style)
    try:
        yield style
    finally:
        _STYLE.reset(token)


def long_integer(value: int) -> bool:
    return len(str(abs(int(value)))) > SHORT_DIGITS


def is_short(expr: Any) -> bool:
    """True when every rational in ``expr`` has a numerator and denominator of at most
    SHORT_DIGITS digits (the rule for keeping an exact form in ``auto``)."""
    expr = sympy.sympify(expr)
    return not any(long_integer(r.p) or long_integer(r.q) for r in expr.atoms(sympy.Rational))


def decimal_float(value: Any, digits: int) -> sympy.Float:
    """``value`` rounded to ``digits`` significant decimal digits, held as a 30-digit Float
    (so that binary rounding never moves the last printed digit)."""
    return sympy.Float(f"{float(value):.{digits}g}", 30)


def _decimal(value: sympy.Expr, digits: int) -> sympy.Expr:
    number_ = sympy.N(value, 30)
    real, imaginary = number_.as_real_imag()
    real = decimal_float(real, digits) if real != 0 else sympy.S.Zero
    if imaginary == 0:
        return real
    return real + sympy.I * decimal_float(imaginary, digits)


def _shorten(expr: sympy.Expr, style: NumberStyle) -> sympy.Expr:
    """Constants that the style prints as decimals replaced by Floats of ``digits`` digits
    (auto: a constant with a long integer in it, as one decimal; decimal: every constant
    but a short integer); exponents of powers stay exact (s^2, the square root's 1/2)."""
    if not expr.free_symbols and expr.is_number:
        if expr.is_Integer and not long_integer(expr):
            return expr
        if expr.has(sympy.Float) and is_short(expr) and style.numbers == "auto":
            return expr
        if style.numbers == "decimal" or not is_short(expr):
            return _decimal(expr, style.digits)
        return expr
    if expr.is_Atom or not expr.args:
        return expr
    if isinstance(expr, sympy.Pow):
        exponent = expr.exp if expr.exp.is_Rational else _shorten(expr.exp, style)
        return sympy.Pow(_shorten(expr.base, style), exponent)
    return expr.func(*[_shorten(a, style) for a in expr.args])


def rounded(expr: sympy.Expr, digits: int = DISPLAY_DIGITS) -> sympy.Expr:
    """The expression with the constants the style prints as decimals made Floats (the
    printer rounds every Float to the digits it shows)."""
    style = _STYLE.get()
    return _shorten(expr, style) if style.rounds else expr


def shown_digits(digits: int = DISPLAY_DIGITS) -> int:
    style = _STYLE.get()
    return min(digits, style.digits) if style.rounds else digits


class _SheetPrinter(LatexPrinter):
    """sympy's LaTeX with decimals as the sheet writes them: no trailing ".0", powers of
    ten as "· 10^n" for very large and small values."""

    _default_settings = dict(LatexPrinter._default_settings, digits=DISPLAY_DIGITS)

    def _print_Float(self, expr):
        digits = max(1, min(self._settings["digits"], mpmath.libmp.prec_to_dps(expr._prec)))
        return str(number(float(expr), digits)).replace(r"\times", r"\cdot")


def latex(expr: Any, digits: int = DISPLAY_DIGITS, **settings) -> str:
    return _SheetPrinter(dict({"ln_notation": True, "digits": shown_digits(digits)},
                              **settings)).doprint(expr)


def typeset(expr: Any, digits: int = DISPLAY_DIGITS) -> Math:
    """LaTeX of a sympy expression; floats carried at 30 digits are shown to ``digits``
    (to the sheet's ``digits`` outside exact mode, with long rationals as decimals)."""
    expr = sympy.sympify(expr)
    return Math(latex(rounded(expr, digits), digits))


def as_factor(coefficient: sympy.Expr) -> str:
    """A coefficient typeset to stand as a factor: a sum in parentheses."""
    text = typeset(coefficient)
    return rf"\left({text}\right)" if isinstance(coefficient, sympy.Add) else text


def inline(latex: str) -> Math:
    return Math("$" + latex + "$")


def number(value: float | None, digits: int | None = None) -> Math | None:
    """A float as LaTeX, ``digits`` significant digits (the sheet's by default), powers of
    ten written out."""
    if digits is None:
        digits = _STYLE.get().digits
    if value is None:
        return None
    if value != value:
        return Math(r"\mathrm{NaN}")
    if value in (float("inf"), float("-inf")):
        return Math(("-" if value < 0 else "") + r"\infty")
    text = f"{value:.{digits}g}"
    if text in ("-0", "0"):
        return Math("0")
    if "e" in text:
        mantissa, exponent = text.split("e")
        power = f"10^{{{int(exponent)}}}"
        return Math(power if mantissa == "1" else
                    ("-" + power if mantissa == "-1" else rf"{mantissa} \times {power}"))
    return Math(text)


_UNIT_TOKEN = re.compile(r"g0\b|[A-Za-z_µμΩ°]+|\d+(?:\.\d+)?|\S")
# Units written with a "u" for micro ("us", "uF") print with the micro sign.
_MICRO_UNITS = {"s", "m", "g", "A", "V", "F", "H", "W", "J", "N", "Pa", "C", "K", "ohm", "in",
                "L", "l"}


def _unit_name_latex(name: str) -> str:
    """One unit name (with its prefix) as upright LaTeX: µs, kΩ, °C, not us, kohm, degC."""
    if name == "g0":
        return r"\mathrm{g}_{0}"
    for micro in ("µ", "μ"):
        name = name.replace(micro, "u") if name.startswith(micro) else name
    if name.startswith("u") and name[1:] in _MICRO_UNITS:
        return r"\mu" + _unit_name_latex(name[1:])
    for ohm in ("ohm", "Ω"):
        if name.endswith(ohm):
            prefix = name[:-len(ohm)]
            return (r"\mathrm{" + prefix + "}" if prefix else "") + r"\Omega"
    if name.startswith("°"):
        return r"{}^{\circ}" + (r"\mathrm{" + name[1:] + "}" if name[1:] else "")
    return r"\mathrm{" + name.replace("_", r"\_") + "}"


def unit_latex(unit: str) -> str:
    """A unit text such as ``"N*s/m"`` or ``"m/s^2"`` as upright LaTeX (empty for "1")."""
    unit = unit.strip()
    if unit in ("", "1"):
        return ""
    out = []
    tokens = _UNIT_TOKEN.findall(unit)
    i = 0
    while i < len(tokens):
        token = tokens[i]
        if token == "^" or token == "**":
            exponent = ""
            i += 1
            if i < len(tokens) and tokens[i] == "(":
                while i < len(tokens) and tokens[i] != ")":
                    exponent += tokens[i] if tokens[i] != "(" else ""
                    i += 1
            else:
                while i < len(tokens) and (tokens[i] in "-+" or tokens[i][0].isdigit()):
                    exponent += tokens[i]
                    i += 1
                    if exponent.lstrip("-+"):
                        break
                i -= 1
            out.append("^{" + exponent + "}")
        elif token == "*" and i + 1 < len(tokens) and tokens[i + 1] == "*":
            tokens[i + 1] = "^"
        elif token in ("*", "."):
            out.append(r"\,")
        elif token[0].isalpha() or token[0] in "_°":
            out.append(_unit_name_latex(token))
        elif token[0].isdigit() or token in "/()-":
            out.append(token)
        i += 1
    return "".join(out)


def unit_text(unit: str) -> str:
    """A unit as plain text in the trades' form, for plot labels: µs, kΩ, °C, g0."""
    def name(match: re.Match) -> str:
        token = match.group(0)
        if token.startswith("u") and token[1:] in _MICRO_UNITS:
            token = "µ" + token[1:]
        return re.sub(r"ohm$", "Ω", token)
    return re.sub(r"[A-Za-z_]+", name, unit.strip())


def with_unit(latex: str, unit: str) -> Math:
    text = unit_latex(unit)
    return Math(latex + (r"\," + text if text else ""))


def _group(text: str, start: int) -> tuple[str, int]:
    """The balanced {…} group starting at text[start] == "{", and the index after it."""
    depth = 0
    for i in range(start, len(text)):
        if text[i] == "{":
            depth += 1
        elif text[i] == "}":
            depth -= 1
            if depth == 0:
                return text[start + 1:i], i + 1
    return text[start + 1:], len(text)


def visible_width(latex: str) -> float:
    """A rough width of a line of LaTeX math, in characters: a fraction counts as its wider
    part, sub- and superscripts at two thirds, commands as one character."""
    width = 0.0
    i = 0
    while i < len(latex):
        if latex.startswith(r"\frac{", i) or latex.startswith(r"\dfrac{", i):
            numerator, i = _group(latex, latex.index("{", i))
            denominator, i = (_group(latex, i) if i < len(latex) and latex[i] == "{" else ("", i))
            width += max(visible_width(numerator), visible_width(denominator)) + 0.5
            continue
        character = latex[i]
        if character in "^_" and i + 1 < len(latex):
            if latex[i + 1] == "{":
                script, i = _group(latex, i + 1)
            else:
                script, i = latex[i + 1], i + 2
            width += 0.67 * visible_width(script)
            continue
        if character == "\\":
            match = re.match(r"\\([A-Za-z]+|.)", latex[i:])
            name = match.group(1)
            i += len(match.group(0))
            if name in ("left", "right", "big", "Big", "mathrm", "text", "operatorname"):
                continue
            width += 0.3 if name in (",", ";", "!", ":") else 1.0
            continue
        i += 1
        if character in "{} ":
            continue
        width += 1.0
    return width


def ordered_terms(expr: sympy.Expr) -> list[sympy.Expr]:
    """The terms of a sum in the order sympy prints them."""
    expr = sympy.sympify(expr)
    return list(expr.as_ordered_terms()) if isinstance(expr, sympy.Add) else [expr]


def join_lines(terms: Sequence[str], width: float) -> list[Math]:
    """Typeset terms of a sum packed greedily into lines of about ``width`` characters;
    each later line starts with its sign. A term wider than a line gets a line of its own."""
    lines: list[str] = []
    current = ""
    for term in terms:
        term = term.strip()
        if not lines and not current:
            current = term
            continue
        piece = "- " + term[1:].lstrip() if term.startswith("-") else "+ " + term
        if current and visible_width(current + piece) > width:
            lines.append(current)
            current = piece
        else:
            current = (current + " " + piece) if current else piece
    if current or not lines:
        lines.append(current or "0")
    return [Math(line) for line in lines]


@dataclass(frozen=True)
class Display:
    """One displayed equation ``lhs = lines[0] + lines[1] + …`` (lines already signed)."""

    lhs: Math
    lines: tuple[Math, ...]
    note: Math | None = None

    @property
    def single(self) -> bool:
        return len(self.lines) == 1


def available_width(lhs: str) -> float:
    """The width left on a line of display math after ``lhs =``."""
    return max(LINE_WIDTH - visible_width(lhs) - 2, LINE_WIDTH / 2)


def display(lhs: str, terms: Iterable[str], note: str | None = None) -> Display:
    return Display(Math(lhs), tuple(join_lines(list(terms), available_width(lhs))),
                   Math(note) if note is not None else None)


def _trig(kind: str, frequency: sympy.Expr, u: sympy.Expr) -> sympy.Expr:
    if frequency == 0:
        return sympy.S.One
    return (sympy.cos if kind == "cos" else sympy.sin)(frequency * u)


def grouped_terms(rows: Sequence[tuple[int, sympy.Expr, sympy.Expr, str, sympy.Expr]],
                  u: sympy.Expr, width: float = LINE_WIDTH) -> list[str]:
    """Rows (power, rate, frequency, kind, coefficient) of an exponential polynomial as
    typeset terms, one per decay rate and frequency, e^{σu}(A cos ωu + B sin ωu), or one
    per row where such a group would not fit on a line."""
    groups: dict[tuple[sympy.Expr, sympy.Expr], list] = {}
    for row in rows:
        groups.setdefault((row[1], row[2]), []).append(row)
    terms: list[str] = []
    for (rate, frequency), items in groups.items():
        parts = [rounded(sympy.sympify(c)) * u**power * _trig(kind, frequency, u)
                 for power, _r, _f, kind, c in items]
        if rate == 0:
            terms.extend(typeset(term) for term in ordered_terms(sympy.Add(*parts)))
            continue
        envelope = sympy.exp(rounded(sympy.sympify(rate)) * u)
        inner = sympy.Add(*parts)
        if len(ordered_terms(inner)) == 1:
            terms.append(typeset(inner * envelope))
            continue
        grouped = typeset(envelope) + r" \left(" + typeset(inner) + r"\right)"
        if visible_width(grouped) <= width:
            terms.append(grouped)
        else:
            for term in ordered_terms(inner):
                text = typeset(term)
                sign = "- " if text.startswith("-") else ""
                terms.append(sign + typeset(envelope) + r"\," + text.lstrip("- "))
    return terms or ["0"]


def polynomial_rows(polynomial) -> list[tuple[int, sympy.Expr, sympy.Expr, str, sympy.Expr]]:
    return [(m.power, m.rate, m.frequency, m.kind, polynomial.terms[m]) for m in polynomial.modes()]


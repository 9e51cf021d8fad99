"""Rendering: derivation sheets in Markdown, LaTeX and PDF, with plots, JSON and CSV.

The sheet is rendered from the Derivation's data and trace; nothing is derived here.
Expressions are only typeset (``sympy.latex``, with long sums broken into lines), numbers
formatted, and values converted to the units the case asks for under ``[report] units``.

Two Jinja2 environments come from :func:`make_environment`: ``"tex"`` with LaTeX-safe
delimiters (``((* block *))``, ``((( value )))``, ``((= comment =))``) and ``"md"`` with
Jinja's usual ones. Both have a ``finalize`` that escapes every plain string for their
target, while :class:`Math` strings (trusted LaTeX from ``sympy.latex`` and this module's
own typesetting) pass through unchanged. A template therefore cannot print user text
unescaped by accident.

Sheets are reproducible byte for byte: no dates, no absolute paths (the case file is shown
by its name only), fixed number formats and plot settings.
"""

from __future__ import annotations

import contextvars
import functools
import math
import os
import re
import shutil
import subprocess
import tempfile
import unicodedata
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import jinja2
import mpmath
import sympy
from sympy.printing.latex import LatexPrinter

from . import __version__, plots, quantities, reread
from .errors import CaseError, ClosedformError

if TYPE_CHECKING:
    from .verify import Check

FORMATS = ("md", "tex", "pdf", "json", "csv", "svg")

CAUTION = ("This sheet supports, and does not replace, review by a qualified engineer "
           "under the applicable codes and local practice.")

ASSUMPTIONS = {
    "spring-mass-damper": ["linear elastic spring, lumped mass, small displacements",
                           "viscous (velocity-proportional) damping",
                           "load applied at the mass along the single degree of freedom"],
    "base-excitation": ["linear elastic spring, lumped mass, small displacements",
                        "viscous damping", "rigid support moving with the given acceleration",
                        "u is the displacement relative to the support"],
    "first-order": ["linear first-order lag with constant time constant and gain"],
    "series-rlc": ["linear, lumped, time-invariant R, L and C in series",
                   "ideal voltage source; v is the capacitor voltage"],
    "ode": ["linear ordinary differential equation with constant coefficients",
            "coefficients, load and response in the consistent units the case gives"],
}
COMMON_ASSUMPTIONS = ["parameters constant in time; loads exactly as given in the case file",
                      "the results hold on the analysis window stated with them"]

DISPLAY_DIGITS = 10        # significant digits shown for coefficients carried as floats
REPORT_DIGITS = 6          # significant digits of reported numbers and converted pieces
LINE_WIDTH = 64            # rough width of one line of display math, in visible characters
TERMS_INLINE = 4           # load terms written out as a sum up to this many; a table beyond
CSV_POINTS = 1000          # intervals of the CSV time grid
# Long histories: a table or list longer than this is shown as its first and last rows,
# with every row in a coefficient file beside the sheet (<stem>-coefficients.csv).
EXCERPT_LIMIT = 40
EXCERPT_HEAD, EXCERPT_TAIL = 12, 3

LESS = {True: r"\le", False: "<"}
DERIVATIVE_MARKS = {0: "{v}", 1: r"\dot{{{v}}}", 2: r"\ddot{{{v}}}"}
PARAMETER_SYMBOLS = {"mass": "m", "stiffness": "k", "damping": "c", "damping_ratio": r"\zeta",
                     "time_constant": r"\tau", "gain": "K", "inductance": "L",
                     "resistance": "R", "capacitance": "C"}
PARAMETER_DIMENSIONS = {"mass": "mass", "stiffness": "stiffness", "damping": "damping",
                        "damping_ratio": "dimensionless", "time_constant": "time",
                        "inductance": "inductance", "resistance": "resistance",
                        "capacitance": "capacitance"}
LOAD_VALUE_NAMES = ("amplitude", "impulse", "rate", "duration", "peak_at", "rise", "hold", "fall")


# ----------------------------------------------------------------------------- escaping


class Math(str):
    """LaTeX that is trusted (from ``sympy.latex`` or this module): printed unescaped.

    Joining two Math strings with ``+`` gives Math; joining Math with a plain string gives a
    plain string, which is escaped when printed.
    """

    __slots__ = ()

    def __add__(self, other: str) -> str:
        joined = str.__add__(self, other)
        return Math(joined) if isinstance(other, Math) else joined

    def __radd__(self, other: str) -> str:
        joined = str.__add__(other, self)
        return Math(joined) if isinstance(other, Math) else joined


_LATEX_SPECIAL = {
    "\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
    "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
    "|": r"\textbar{}", "<": r"\textless{}", ">": r"\textgreater{}",
}
_MATH_CHARACTERS = {
    "−": "-", "·": r"\cdot", "≤": r"\le", "≥": r"\ge", "→": r"\rightarrow", "←": r"\leftarrow",
    "±": r"\pm", "×": r"\times", "÷": r"\div", "∫": r"\int", "√": r"\surd", "≡": r"\equiv",
    "≈": r"\approx", "≠": r"\ne", "∞": r"\infty", "°": r"^\circ", "µ": r"\mu", "∑": r"\Sigma",
    "∏": r"\Pi", "∂": r"\partial", "′": r"'", "″": r"''", "∈": r"\in", "∆": r"\Delta",
    "Ω": r"\Omega",
}
_TEXT_CHARACTERS = {
    "…": r"\ldots{}", "—": "---", "–": "--", "‘": "`", "’": "'", "“": "``", "”": "''",
    "ß": r"\ss{}", "æ": r"\ae{}", "Æ": r"\AE{}", "ø": r"\o{}", "Ø": r"\O{}", "œ": r"\oe{}",
    "Œ": r"\OE{}", "ł": r"\l{}", "Ł": r"\L{}", "å": r"\aa{}", "Å": r"\AA{}", "ı": r"\i{}",
    "\u00a0": "~", "\u2009": r"\,", "\u202f": r"\,",
}
_SUPERSCRIPTS = dict(zip("⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻⁼⁽⁾ⁿⁱʰ", "0123456789+-=()nih"))
_SUBSCRIPTS = dict(zip("₀₁₂₃₄₅₆₇₈₉₊₋₌₍₎ᵢⱼₙ", "0123456789+-=()ijn"))
_ACCENTS = {"\u0300": "`", "\u0301": "'", "\u0302": "^", "\u0303": "~", "\u0304": "=",
            "\u0306": "u", "\u0307": ".", "\u0308": '"', "\u030a": "r", "\u030b": "H",
            "\u030c": "v", "\u0327": "c", "\u0328": "k"}
_GREEK_CAPITALS = {"GAMMA", "DELTA", "THETA", "LAMDA", "XI", "PI", "SIGMA", "UPSILON", "PHI",
                   "PSI", "OMEGA"}


#: Combining marks of Greek letters as math accents (tonos is the acute accent).
_GREEK_MATH_ACCENTS = {"\u0301": "acute", "\u0308": "ddot", "\u0300": "grave"}


def _latex_character(character: str) -> str:
    """One non-ASCII character for pdfLaTeX with its default fonts (no extra packages)."""
    if character in _TEXT_CHARACTERS:
        return _TEXT_CHARACTERS[character]
    if character in _MATH_CHARACTERS:
        return r"\ensuremath{" + _MATH_CHARACTERS[character] + "}"
    if character in _SUPERSCRIPTS:
        return r"\ensuremath{^{" + _SUPERSCRIPTS[character] + "}}"
    if character in _SUBSCRIPTS:
        return r"\ensuremath{_{" + _SUBSCRIPTS[character] + "}}"
    name = unicodedata.name(character, "")
    if name.startswith("GREEK ") and " WITH " in name:   # ά, ϊ …: the letter under a math accent
        base, *marks = unicodedata.normalize("NFD", character)
        text = _latex_character(base) if base != character else ""
        if text.startswith(r"\ensuremath{") and all(mark in _GREEK_MATH_ACCENTS for mark in marks):
            inner = text[len(r"\ensuremath{"):-1]
            for mark in marks:
                inner = "\\" + _GREEK_MATH_ACCENTS[mark] + "{" + inner + "}"
            return r"\ensuremath{" + inner + "}"
    if name.startswith("GREEK ") and " WITH " not in name:
        letter = name.split()[-1]
        small = " SMALL " in name
        if letter == "LAMDA":
            letter = "LAMBDA"
        if "FINAL" in name:
            return r"\ensuremath{\varsigma}"
        if small and letter != "OMICRON":
            return "\\ensuremath{\\" + letter.lower() + "}"
        if not small and name.split()[-1] in _GREEK_CAPITALS:
            return "\\ensuremath{\\" + letter.capitalize() + "}"
    decomposed = unicodedata.normalize("NFD", character)
    if len(decomposed) >= 2 and decomposed[0].isascii() and decomposed[0].isalpha() \
            and all(mark in _ACCENTS for mark in decomposed[1:]):
        text = decomposed[0] if decomposed[0] not in "ij" or len(decomposed) == 1 \
            else "\\" + decomposed[0]
        for mark in decomposed[1:]:
            text = "\\" + _ACCENTS[mark] + "{" + text + "}"
        return text
    return rf"\texttt{{[U+{ord(character):04X}]}}"


def latex_escape(text: str) -> str:
    """Plain text made safe for LaTeX: every special character and non-ASCII character
    becomes a command pdfLaTeX prints as that character; line breaks become spaces."""
    out = []
    for i, character in enumerate(str(text)):
        if character in _LATEX_SPECIAL:
            out.append(_LATEX_SPECIAL[character])
        elif character in "\n\r\t":
            out.append(" ")
        elif ord(character) < 32 or ord(character) == 127:
            continue
        elif character == "-" and text[i + 1:i + 2] == "-":
            out.append("-{}")       # no en/em-dash ligature from the user's "--"
        elif character.isascii():
            out.append(character)
        else:
            out.append(_latex_character(character))
    return "".join(out)


_MARKDOWN_SPECIAL = set("\\`*_[]<>|$#~")


def markdown_escape(text: str) -> str:
    """Plain text made safe for Markdown: no emphasis, links, HTML, math or table breaks."""
    out = []
    for character in str(text):
        if character in _MARKDOWN_SPECIAL:
            out.append("\\" + character)
        elif character in "\n\r\t":
            out.append(" ")
        elif ord(character) < 32 or ord(character) == 127:
            continue
        else:
            out.append(character)
    return "".join(out)


def _finalizer(escape: Callable[[str], str]) -> Callable[[Any], str]:
    def finalize(value: Any) -> str:
        if isinstance(value, Math):
            return str(value)
        if isinstance(value, str):
            return escape(value)
        if isinstance(value, bool):
            raise TypeError("a template printed a boolean; say what it means in words")
        if isinstance(value, int):
            return str(value)
        if value is None:
            return "—" if escape is markdown_escape else "---"
        raise TypeError(f"a template printed a {type(value).__name__}; format it first "
                        "(render.number, render.typeset)")
    return finalize


@functools.cache
def make_environment(target: str = "tex") -> jinja2.Environment:
    """The Jinja2 environment for ``"tex"`` (LaTeX-safe delimiters) or ``"md"`` templates.

    Templates are loaded from the package (they travel inside the wheel).
    """
    common = {"loader": jinja2.PackageLoader("closedform", "templates"), "autoescape": False,
              "keep_trailing_newline": True, "trim_blocks": True, "lstrip_blocks": True,
              "undefined": jinja2.StrictUndefined}
    if target == "tex":
        environment = jinja2.Environment(
            block_start_string=r"((*", block_end_string=r"*))",
            variable_start_string=r"(((", variable_end_string=r")))",
            comment_start_string=r"((=", comment_end_string=r"=))",
            finalize=_finalizer(latex_escape), **common)
        environment.filters["equation"] = _latex_equation
    elif target == "md":
        environment = jinja2.Environment(finalize=_finalizer(markdown_escape), **common)
        environment.filters["equation"] = _markdown_equation
    else:
        raise ValueError(f"unknown template target {target!r} (expected 'tex' or 'md')")
    return environment


def _markdown_equation(equation: Display) -> Math:
    """A displayed equation for Markdown viewers: $$ … $$, long ones as aligned lines."""
    if not isinstance(equation, Display):
        return Math(f"$$\n{Math(equation)}\n$$")
    note = rf" \qquad {equation.note}" if equation.note else ""
    if equation.single:
        return Math(f"$$\n{equation.lhs} = {equation.lines[0]}{note}\n$$")
    rows = [f"{equation.lhs} &= {equation.lines[0]}"]
    rows += [rf"&\quad {line}" for line in equation.lines[1:]]
    return Math("$$\n\\begin{aligned}\n" + " \\\\\n".join(rows) + note
                + "\n\\end{aligned}\n$$")


def _fitted(line: str, width: float) -> str:
    """A display line that cannot be broken between terms (one term wider than the page,
    as exact forms of non-round inputs can be) scaled down to the line width instead of
    running off the page."""
    if visible_width(line) <= width:
        return line
    return (r"\resizebox{\ifdim\width>0.78\linewidth 0.78\linewidth\else\width\fi}{!}"
            r"{$\displaystyle " + line + "$}")


def _latex_equation(equation: Display) -> Math:
    """A displayed equation for LaTeX: equation*, long ones in align* one line per row."""
    if not isinstance(equation, Display):
        return Math(f"\\begin{{equation*}}\n{Math(equation)}\n\\end{{equation*}}")
    width = available_width(equation.lhs) * 1.1
    equation = Display(equation.lhs, tuple(Math(_fitted(line, width)) for line in equation.lines),
                       equation.note)
    note = rf" \qquad {equation.note}" if equation.note else ""
    if equation.single:
        return Math(f"\\begin{{equation*}}\n{equation.lhs} = {equation.lines[0]}{note}\n"
                    "\\end{equation*}")
    rows = [f"{equation.lhs} &= {equation.lines[0]}"]
    rows += [rf"&\quad {line}" for line in equation.lines[1:]]
    return Math("\\begin{align*}\n" + " \\\\\n".join(rows) + note + "\n\\end{align*}")


# ----------------------------------------------------------------------------- typesetting


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


def _long_integer(value: int) -> bool:
    return len(str(abs(int(value)))) > SHORT_DIGITS


def is_short(expr: Any) -> bool:
    """True when every rational in ``expr`` has a numerator and denominator of at most
    SHORT_DIGITS digits (the rule for keeping an exact form in ``auto``)."""
    expr = sympy.sympify(expr)
    return not any(_long_integer(r.p) or _long_integer(r.q) for r in expr.atoms(sympy.Rational))


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
        if expr.is_Integer and not _long_integer(expr):
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


def _rounded(expr: sympy.Expr, digits: int = DISPLAY_DIGITS) -> sympy.Expr:
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
    return Math(latex(_rounded(expr, digits), digits))


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
        parts = [_rounded(sympy.sympify(c)) * u**power * _trig(kind, frequency, u)
                 for power, _r, _f, kind, c in items]
        if rate == 0:
            terms.extend(typeset(term) for term in ordered_terms(sympy.Add(*parts)))
            continue
        envelope = sympy.exp(_rounded(sympy.sympify(rate)) * u)
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


# ----------------------------------------------------------------------------- units


@dataclass(frozen=True)
class DisplayUnit:
    """A unit from ``[report] units``: the text the user wrote and its exact SI factor."""

    key: str
    text: str
    factor: sympy.Expr
    dimension: Any


class Units:
    """SI and the case's ``[report] units`` side by side, for display only."""

    def __init__(self, case) -> None:
        self.values = case.symbol_values()
        self.units: list[DisplayUnit] = []
        for key in sorted(case.report.units):
            text = case.report.units[key]
            factor, dimension = quantities.unit_factor(text, key=f"report.units.{key}")
            self.units.append(DisplayUnit(key, text, factor, dimension))

    def unit_for(self, dimension: Any, prefer: Sequence[str] = ()) -> DisplayUnit | None:
        """The display unit for a dimension (preferring the named keys), None for SI."""
        matching = [u for u in self.units if u.dimension == dimension]
        for key in prefer:
            for unit in matching:
                if unit.key == key:
                    return unit
        return matching[0] if matching else None

    def float(self, value: Any) -> float | None:
        value = sympy.sympify(value).subs(self.values)
        if value.free_symbols:
            return None
        return float(sympy.N(value, 30))

    def show(self, value: Any, dimension: Any, prefer: Sequence[str] = (),
             exact: bool = False) -> tuple[Math, Math | None]:
        """(SI text, text in the report unit or None), as inline math.

        ``value`` is a float or a sympy expression; ``exact`` shows the exact SI value with
        its decimal value beside it when they differ.
        """
        si_unit = quantities.si_unit_text(dimension)
        if isinstance(value, float) or value is None:
            numeric = value
            exact_text = None
        else:
            expr = sympy.sympify(value)
            numeric = self.float(expr)
            style = _STYLE.get()
            exact = exact and (style.numbers == "exact"
                               or (style.numbers == "auto" and is_short(expr)))
            exact_text = typeset(expr) if ((exact and not expr.is_Integer) or numeric is None) \
                else None
        if numeric is None:
            return inline(with_unit(exact_text or "", si_unit)) if exact_text else None, None
        decimal = number(numeric)
        if exact_text is not None and exact_text != decimal:
            si = inline(with_unit(f"{exact_text} \\approx {decimal}", si_unit))
        else:
            si = inline(with_unit(decimal, si_unit))
        unit = self.unit_for(dimension, prefer)
        if unit is None:
            return si, None
        converted = numeric / float(sympy.N(unit.factor, 30))
        return si, inline(with_unit(number(converted), unit.text))


# ----------------------------------------------------------------------------- re-reading


def _mp(value: Any) -> Any:
    """A sympy number as mpmath (real or complex), at the re-reading precision."""
    value = sympy.N(sympy.sympify(value), reread.WORKING_DIGITS)
    if value.free_symbols:
        raise reread.Unreadable(f"symbols left without values: {value.free_symbols}")
    real, imaginary = value.as_real_imag()
    with mpmath.workdps(reread.WORKING_DIGITS):
        if imaginary == 0:
            return mpmath.mpf(sympy.Float(real, reread.WORKING_DIGITS)._mpf_)
        return mpmath.mpc(sympy.Float(real, reread.WORKING_DIGITS)._mpf_,
                          sympy.Float(imaginary, reread.WORKING_DIGITS)._mpf_)


def _magnitude(numeric) -> Callable[[Any], Any]:
    """Σ |c u^p e^{σu}| (1 + |σu| + |ωu|) over the rows of a numeric exponential polynomial:
    the size of the error that rounding each printed coefficient, rate and frequency to a
    relative step can make at ``u``."""
    def size(u):
        total = mpmath.mpf(0)
        for power, rate, frequency, _kind, coefficient in numeric.rows:
            term = abs(coefficient) * abs(mpmath.power(u, power)) * abs(mpmath.exp(rate * u))
            total += term * (1 + abs(rate * u) + abs(frequency * u) + power)
        return total
    return size


def _propagated(expr: sympy.Expr, symbol: sympy.Symbol, point: Any) -> tuple[Any, Any]:
    """(value, error scale) of ``expr`` at ``symbol = point``: the first-order error that
    printing every number of ``expr`` to one relative unit would make (small integers and
    constants are exact). The re-reading tolerance is a fraction of this scale."""
    if expr == symbol:
        return point, mpmath.mpf(0)
    if expr.is_Number or expr.is_NumberSymbol:
        value = _mp(expr)
        exact = expr.is_NumberSymbol or (expr.is_Integer and not _long_integer(expr))
        return value, mpmath.mpf(0) if exact else abs(value)
    if expr.is_Atom:
        return _mp(expr), mpmath.mpf(0)
    if expr is sympy.I or expr == sympy.I:
        return mpmath.mpc(0, 1), mpmath.mpf(0)
    parts = [_propagated(a, symbol, point) for a in expr.args]
    if isinstance(expr, sympy.Add):
        return sum(v for v, _ in parts), sum(e for _, e in parts)
    if isinstance(expr, sympy.Mul):
        value = mpmath.fprod([v for v, _ in parts])
        error = mpmath.mpf(0)
        for i, (_v, e) in enumerate(parts):
            others = mpmath.fprod([abs(w) for j, (w, _) in enumerate(parts) if j != i])
            error += e * others
        return value, error
    if isinstance(expr, sympy.Pow):
        (base, base_error), (exponent, exponent_error) = parts
        value = mpmath.power(base, exponent)
        error = abs(exponent) * abs(mpmath.power(base, exponent - 1)) * base_error
        if exponent_error:
            error += abs(value) * abs(mpmath.log(base)) * exponent_error
        return value, error
    if isinstance(expr, sympy.exp):
        value = mpmath.exp(parts[0][0])
        return value, abs(value) * parts[0][1]
    if isinstance(expr, (sympy.sin, sympy.cos)):
        function = mpmath.sin if isinstance(expr, sympy.sin) else mpmath.cos
        return function(parts[0][0]), parts[0][1] * mpmath.cosh(abs(mpmath.im(parts[0][0])))
    value = _mp(expr.subs(symbol, sympy.sympify(complex(point))))
    return value, abs(value)


class _EquationRecorder:
    """Registers every displayed equation of a sheet with the derivation's value of it, so
    that :func:`printed_equation_check` can read the printed line back and compare."""

    POINTS = 23

    def __init__(self, derivation) -> None:
        case = derivation.case
        self.values = dict(case.symbol_values())
        for k, declaration in enumerate(case.symbols):
            if declaration.value is None:       # symbols without values: sample values
                self.values[declaration.symbol] = sympy.Rational(7 + 3 * k, 5 + k)
        self.symbols = {sympy.latex(symbol): _mp(value) for symbol, value in self.values.items()}
        self.records: list[reread.Printed] = []
        with mpmath.workdps(reread.WORKING_DIGITS):
            self.until = _mp(sympy.sympify(derivation.window.until).subs(self.values))
            scale = derivation.model.slowest_time_scale()
            scale = _mp(sympy.sympify(scale).subs(self.values)) if scale is not None else None
            if not scale or scale <= 0:
                scale = self.until / 5 if self.until > 0 else mpmath.mpf(1)
            offset = mpmath.sqrt(2) - 1       # irrational: never a breakpoint
            self.fractions = [(k + offset) / self.POINTS for k in range(self.POINTS)]
            self.s_points = [mpmath.mpc(a, b) / scale for a in (0.31, 1.7, 4.3)
                             for b in (-0.83, 0.29, 2.3)]

    def _add(self, display, **fields) -> Any:
        style = _STYLE.get()
        if style.rounds:
            fields["tolerance"] = max(fields.get("tolerance", 1e-9), 10.0 ** (1 - style.digits))
        self.records.append(reread.Printed(display=display, symbols=self.symbols, **fields))
        return display

    def form(self, display):
        return self._add(display, what="form", form=True)

    def _function(self, expr: sympy.Expr, symbol: sympy.Symbol):
        expr = sympy.sympify(expr).subs(self.values)
        return sympy.lambdify(symbol, expr, modules="mpmath")

    def of_s(self, what: str, expr: sympy.Expr, display):
        from .laplace import s
        tree = sympy.sympify(expr).subs(self.values)
        return self._add(display, what=what, variable="s", points=self.s_points,
                         reference=self._function(expr, s),
                         magnitude=lambda x: _propagated(tree, s, x)[1] + abs(
                             _propagated(tree, s, x)[0]) * mpmath.mpf(10) ** -30,
                         tolerance=1e-9 if tree.has(sympy.Float) else 1e-15)

    def constant(self, what: str, value: sympy.Expr, display):
        number_ = _mp(sympy.sympify(value).subs(self.values))
        return self._add(display, what=what, reference=lambda _x: number_)

    def time_function(self, what: str, polynomial, variable: str, display):
        function = polynomial.numeric(self.values, digits=reread.WORKING_DIGITS)
        points = [self.until * f for f in self.fractions]
        return self._add(display, what=what, variable=variable, points=points,
                         reference=function, magnitude=_magnitude(function), tolerance=1e-9)

    def load_line(self, rewrite, display):
        x = sympy.Symbol("x")
        parts = []
        impulses = []
        for term in rewrite.terms:
            at = _mp(sympy.sympify(term.at).subs(self.values))
            if hasattr(term, "mode"):
                tree = sympy.sympify(term.coefficient * term.mode.expression(x)).subs(self.values)
                parts.append((at, self._function(tree, x), tree))
            else:
                impulses.append((at, _mp(sympy.sympify(term.impulse).subs(self.values))))

        def reference(t):
            return sum((g(t - at) for at, g, _tree in parts if t > at), mpmath.mpf(0))

        def magnitude(t):   # each term's size plus the error its printed numbers can make
            # (a rounded frequency shifts the phase by ω·u·δ: large where the terms cancel)
            return sum((abs(g(t - at)) + _propagated(tree, x, t - at)[1]
                        for at, g, tree in parts if t > at), mpmath.mpf(0))
        points = [self.until * f for f in self.fractions]
        return self._add(display, what=f"load line {rewrite.load_number}", variable="t",
                         points=points, reference=reference, impulses=impulses,
                         magnitude=magnitude)

    def piece(self, number: int, piece, end, display, *, response_factor=1, time_factor=1,
              tolerance: float = 1e-9, what: str = ""):
        values = self.values
        function = piece.numeric if getattr(piece, "numeric", None) is not None \
            else piece.local.numeric(values, digits=reread.WORKING_DIGITS)
        start = _mp(sympy.sympify(piece.start).subs(values))
        length = _mp(sympy.sympify(end).subs(values)) - start
        rf, tf = _mp(sympy.sympify(response_factor).subs(values)), \
            _mp(sympy.sympify(time_factor).subs(values))
        points = [length * f / tf for f in self.fractions]
        size = _magnitude(function)
        return self._add(display, what=f"interval {number}" + (f" {what}" if what else ""),
                         variable=r"\hat{t}", points=points,
                         reference=lambda local: function(local * tf) * rf,
                         magnitude=lambda local: size(local * tf) * abs(rf), tolerance=tolerance)


def printed_equation_check(derivation) -> Check:
    """Every displayed equation of the Markdown sheet read back from the printed text and
    compared with the derivation at many points (see :mod:`closedform.reread`)."""
    from .verify import Check

    name = "printed equations re-read"
    try:
        context = sheet_context(derivation, "md")
        context.update({"h1": Math("#"), "h2": Math("##"), "label_anchor": None})
        text = make_environment("md").get_template("sheet.md.j2").render(context)
        blocks = {}
        problems = []
        for record in context["printed"]:
            block = _markdown_equation(record.display)
            blocks[block] = record
            if block not in text:
                problems.append(f"{record.what}: not printed as recorded")
                continue
            problem = reread.compare(record, block)
            if problem:
                problems.append(problem)
        printed = re.findall(r"^\$\$\n.*?\n\$\$$", text, flags=re.S | re.M)
        unrecorded = [b for b in printed if b not in blocks]
        if unrecorded:
            problems.append(f"{len(unrecorded)} printed equation(s) without a record, first: "
                            + " ".join(unrecorded[0].split())[:80])
    except (reread.Unreadable, ValueError, ZeroDivisionError, TypeError) as error:
        return Check(name, False, f"the sheet could not be re-read: {error}")
    numeric = sum(1 for r in context["printed"] if not r.form)
    if problems:
        return Check(name, False, f"{len(problems)} printed line(s) disagree with the "
                     f"derivation; first: {problems[0]}")
    points = sum(max(len(r.points), 1) for r in context["printed"] if not r.form)
    return Check(name, True, f"{numeric} displayed equations read back from the printed "
                 f"text agree with the derivation at {points} points "
                 f"({len(printed) - numeric} forms without numbers)")


def plain_number(value: float, digits: int) -> str:
    """A float as plain text with ``digits`` significant digits (the console's form)."""
    text = f"{value:.{digits}g}"
    return "0" if text in ("0", "-0") else text


def summary_figures(derivation) -> list[str]:
    """The console's figures, in the report units and rounded like the sheet:
    ["peak 13.8231 mm at t = 29.1791 ms", "DLF 1.89446"]."""
    case = derivation.case
    results = derivation.numbers
    digits = case.report.digits
    units = Units(case)

    def shown(value: float, dimension, prefer) -> str:
        unit = units.unit_for(dimension, prefer)
        if unit is None:
            text = quantities.si_unit_text(dimension)
            return plain_number(value, digits) + ("" if text == "1" else f" {text}")
        return f"{plain_number(value / float(sympy.N(unit.factor, 30)), digits)} {unit.text}"

    figures = []
    peak = results.peak
    if peak is not None:
        figures.append(
            f"peak {shown(peak.value, case.system.response_dimension, RESPONSE_PREFER)} at "
            f"t = {shown(peak.time, quantities.dimension('time'), ('time',))}")
    if results.dlf is not None:
        figures.append(f"DLF {plain_number(results.dlf, digits)}")
    plastic = getattr(derivation, "plastic", None)
    if plastic is not None and plastic.ductility is not None:     # a yielding spring
        figures.append(f"ductility {plain_number(plastic.ductility.value, digits)}")
    return figures


RESPONSE_PREFER = ("response", "displacement", "voltage", "current", "temperature")


# ----------------------------------------------------------------------------- context


def _variable_mark(variable: str, order: int) -> str:
    if order in DERIVATIVE_MARKS:
        return DERIVATIVE_MARKS[order].format(v=variable)
    return f"{variable}^{{({order})}}"


def _factor(coefficient: sympy.Expr) -> str:
    text = typeset(coefficient)
    return rf"\left({text}\right)" if isinstance(coefficient, sympy.Add) else text


def _equation_with_values(model) -> Math:
    left = []
    for i, a in enumerate(model.coefficients):
        order = model.order - i
        if a == 0:
            continue
        mark = _variable_mark(model.variable, order)
        left.append(mark if a == 1 else rf"{_factor(a)}\,{mark}")
    scale = model.input_scale
    load = rf"{model.load_name}(t)"
    right = load if scale == 1 else (rf"-{load}" if scale == -1 else rf"{_factor(scale)}\,{load}")
    return Math(" + ".join(left).replace("+ -", "- ") + " = " + right)


def _exact_time(value: sympy.Expr) -> Math:
    return typeset(value)


def sheet_context(derivation, target: str = "md", *, stem: str | None = None,
                  section: int | None = None) -> dict[str, Any]:
    """Everything a sheet template prints, formatted for ``target`` ("md" or "tex").

    ``stem`` names the figure files, ``section`` numbers the case within an appendix.
    Numbers follow the case's ``[report] numbers`` and ``digits``.
    """
    report = derivation.case.report
    token = _STYLE.set(NumberStyle(getattr(report, "numbers", "auto"),
                                   getattr(report, "digits", REPORT_DIGITS)))
    try:
        return _sheet_context(derivation, target, stem=stem, section=section)
    finally:
        _STYLE.reset(token)


def _sheet_context(derivation, target: str, *, stem: str | None,
                   section: int | None) -> dict[str, Any]:
    escape = latex_escape if target == "tex" else markdown_escape
    case = derivation.case
    model = derivation.model
    solution = derivation.solution
    results = derivation.numbers
    units = Units(case)
    time_dimension = quantities.dimension("time")
    response_dimension = case.system.response_dimension
    load_dimension = case.system.load_dimension
    stem = stem or (Path(case.source).stem or "case")
    coefficient_file = coefficient_file_name(stem)
    variable = model.variable
    response_prefer = RESPONSE_PREFER
    load_prefer = {"spring-mass-damper": ("force",), "base-excitation": ("acceleration",),
                   "series-rlc": ("voltage",)}.get(case.system.model, ())
    u = sympy.Symbol("u")
    t_symbol = sympy.Symbol("t")
    local = sympy.Symbol(r"\hat{t}")

    failed = [c for c in derivation.checks if not c.passed]
    status = derivation.status
    check = _EquationRecorder(derivation)

    # the problem ---------------------------------------------------------------------
    parameters = []
    for name, value in case.system.parameters.items():
        if name in PARAMETER_DIMENSIONS:
            dimension = quantities.dimension(PARAMETER_DIMENSIONS[name])
        elif name == "gain":
            dimension = response_dimension / load_dimension
        else:
            dimension = quantities.dimension("dimensionless")
        si, shown = units.show(value, dimension, exact=True)
        symbol = PARAMETER_SYMBOLS.get(name) or re.sub(r"^a(\d)$", r"a_{\1}", name)
        parameters.append({"name": name.replace("_", " "), "symbol": inline(symbol),
                           "si": si, "shown": shown})
    symbols = [{"name": inline(typeset(d.symbol)),
                "unit": inline(unit_latex(d.unit)) if unit_latex(d.unit) else "1",
                "value": units.show(d.value, d.dimension, exact=True)[0]
                if d.value is not None else None}
               for d in case.symbols]
    initial = None
    if case.initial is not None:
        initial = []
        for i, value in enumerate(case.initial):
            si, shown = units.show(value, response_dimension / time_dimension**i,
                                   prefer=response_prefer if i == 0 else ("velocity",),
                                   exact=True)
            initial.append({"name": inline(_variable_mark(variable, i) + "(0)"), "si": si,
                            "shown": shown})

    loads = []
    for load in case.loads:
        values = []
        for name in LOAD_VALUE_NAMES:
            if name not in load.values:
                continue
            dimension = {"amplitude": load_dimension, "impulse": load_dimension * time_dimension,
                         "rate": load_dimension / time_dimension,
                         "peak_at": quantities.dimension("dimensionless")}.get(name, time_dimension)
            si, shown = units.show(load.values[name], dimension,
                                   prefer=load_prefer if name == "amplitude" else ("time",))
            text = f"{escape(name.replace('_', ' '))} = {si}"
            if shown is not None:
                text += f" ({shown})"
            values.append(Math(text))
        if load.shape == "table":
            values.append(Math(escape(f"{len(load.points)} points, linear between them")))
        if load.shape == "formula" and load.expression is not None:
            values.append(Math(escape("f(τ) = ") + inline(typeset(load.expression))
                               + escape(", τ = t − start")))
        at_si, at_shown = units.show(load.at, time_dimension, prefer=("time",), exact=True)
        repeat = None
        if load.repeat is not None:
            every_si, every_shown = units.show(load.repeat.every, time_dimension,
                                               prefer=("time",), exact=True)
            repeat = Math(f"{load.repeat.count} {escape('times, every')} "
                          f"{every_shown or every_si}")
        loads.append({"number": load.number, "label": load.label or None, "shape": load.shape,
                      "at": at_shown or at_si, "given": values, "repeat": repeat})

    # loads as singularity terms -------------------------------------------------------
    rewrites = []
    for rewrite in derivation.history.rewrites:
        written_out = len(rewrite.terms) <= TERMS_INLINE
        terms = []
        for number, term in excerpt(list(enumerate(rewrite.terms, start=1)), lambda _: None):
            shift = Math("t" if term.at == 0 else rf"t - {_factor(term.at)}")
            if hasattr(term, "mode"):
                terms.append({"number": number, "at": inline(typeset(term.at)),
                              "coefficient": inline(typeset(term.coefficient)),
                              "basis": inline(typeset(term.mode.expression(u))),
                              "latex": _singularity_term(term.coefficient, term.mode, shift)
                              if written_out else None})
            else:
                terms.append({"number": number, "at": inline(typeset(term.at)),
                              "coefficient": inline(typeset(term.impulse)),
                              "basis": inline(r"\delta(u)"),
                              "latex": _impulse_term(term.impulse, shift) if written_out else None})
        if len(rewrite.terms) > EXCERPT_LIMIT:
            omitted = len(rewrite.terms) - EXCERPT_HEAD - EXCERPT_TAIL
            terms.insert(EXCERPT_HEAD, {
                "number": "…", "at": Math(r"\ldots"), "basis": Math(r"\ldots"),
                "coefficient": Math(escape(f"{omitted} more terms in {coefficient_file}"))})
        load_name = model.load_name
        rewrites.append({
            "load": rewrite.load_number, "shape": rewrite.shape, "rule": rewrite.rule,
            "source": rewrite.source,
            "start": typeset(min((t.at for t in rewrite.terms), key=_sort_time(units))
                             if rewrite.terms else 0),
            "terms": terms,
            "sum": check.load_line(rewrite, display(
                rf"{{{load_name}}}_{{{rewrite.load_number}}}(t)", [t["latex"] for t in terms]))
            if len(terms) <= TERMS_INLINE else None,
        })

    # Laplace transform ------------------------------------------------------------------
    load_transform_name = rf"\mathcal{{L}}\{{{model.load_name}\}}(s)"
    transform_short = typeset(solution.transform) if solution.transform is not None else None
    transform = {
        "polynomial": check.of_s("P(s)", model.characteristic_polynomial(), display(
            "P(s)", [typeset(t) for t in ordered_terms(model.characteristic_polynomial())])),
        "initial": check.of_s("Q(s)", solution.initial_numerator, display(
            "Q(s)", [typeset(t) for t in ordered_terms(solution.initial_numerator)])),
        "load": check.of_s("the load transform", solution.load_transform, display(
            load_transform_name, [typeset(t) for t in ordered_terms(solution.load_transform)]))
        if solution.load_transform is not None else None,
        "terms": len(derivation.history.terms) + len(derivation.history.impulses),
        "scale": typeset(model.input_scale),
        "full": check.of_s("X(s)", solution.transform, Display(Math("X(s)"), (transform_short,)))
        if transform_short is not None
        and visible_width(transform_short) <= available_width("X(s)") else None,
        "poles": [inline(typeset(p.root())) + Math(escape(
            (" and its conjugate" if p.is_pair else "")
            + (f", multiplicity {p.multiplicity}" if p.multiplicity > 1 else "")))
            for p in model.poles],
    }

    # kernels and partial fractions -------------------------------------------------------
    kernels = []
    kernel_names: dict[Any, str] = {}
    for i, kernel in enumerate(solution.kernels, start=1):
        name = "h" if kernel.mode is None else f"k_{{{i}}}"
        kernel_names[kernel.mode] = name
        kernels.append(_inversion_context(kernel.inversion, name, u, check,
                                          f"kernel {name}") | {
            "title": kernel.name,
            "pair": (inline(typeset(kernel.pair.time_function) + r" \;\leftrightarrow\; "
                            + typeset(kernel.pair.transform)) if kernel.pair else None),
            "source": kernel.pair.source if kernel.pair else None,
        })
    free = None
    if solution.free is not None:
        free = _inversion_context(solution.free, variable + r"_{0}", t_symbol, check,
                                  "free response")

    active = [(term.load_number, term.coefficient, term.at, kernel_names.get(term.mode, "?"))
              for term in derivation.history.terms]
    active += [(impulse.load_number, impulse.impulse, impulse.at, "h")
               for impulse in derivation.history.impulses]
    superposition = [{"load": load, "coefficient": inline(typeset(coefficient)),
                      "at": inline(typeset(at)), "kernel": inline(kernel)}
                     for load, coefficient, at, kernel in excerpt(active, lambda _: None)]
    if len(active) > EXCERPT_LIMIT:
        superposition.insert(EXCERPT_HEAD, {
            "load": "…", "at": Math(r"\ldots"), "kernel": Math(r"\ldots"),
            "coefficient": Math(escape(f"{len(active) - EXCERPT_HEAD - EXCERPT_TAIL} more "
                                       f"terms in {coefficient_file}"))})

    # pieces --------------------------------------------------------------------------------
    response_unit = units.unit_for(response_dimension, response_prefer)
    time_unit = units.unit_for(time_dimension, ("time",))
    converted = (case.is_fully_valued and (response_unit is not None or time_unit is not None)
                 and (response_unit is None or response_unit.factor != 1
                      or time_unit is not None and time_unit.factor != 1))
    si_response_unit = quantities.si_unit_text(response_dimension)
    pieces = []
    for i, piece in excerpt(list(enumerate(derivation.pieces, start=1)), lambda omitted: None):
        end = piece.end if piece.end is not None else derivation.window.until
        last = piece.end is None
        start_si, start_shown = units.show(piece.start, time_dimension, ("time",), exact=True)
        end_si, end_shown = units.show(end, time_dimension, ("time",), exact=True)
        rows = polynomial_rows(piece.local)
        shift = "t" if piece.start == 0 else rf"t - {_factor(piece.start) if not piece.start.is_Rational else typeset(piece.start)}"
        entry = {
            "number": i, "last": last,
            "interval": inline(rf"{_exact_time(piece.start)} \le t {LESS[last]} "
                               rf"{_exact_time(end)}"),
            "interval_shown": (Math(f"{start_shown} {escape('to')} {end_shown}")
                               if start_shown is not None and end_shown is not None else None),
            "local": inline(rf"\hat{{t}} = {shift}"),
            "si": check.piece(i, piece, end, display(
                rf"{variable}(t)", grouped_terms(rows, local, available_width(rf"{variable}(t)"))),
                tolerance=1e-9 if any(sympy.sympify(c).has(sympy.Float)
                                      for c in piece.local.terms.values()) else 1e-15),
            "shown": None,
        }
        if converted:
            rf = 1 / (response_unit.factor if response_unit else sympy.S.One)
            tf = time_unit.factor if time_unit else sympy.S.One
            shown_rows = []
            for power, rate, frequency, kind, coefficient in rows:
                value = sympy.N((coefficient * rf * tf**power).subs(units.values), 20)
                if value == 0:
                    continue
                shown_rows.append((power, _digits(rate * tf, units), _digits(frequency * tf, units),
                                   kind, decimal_float(value, _STYLE.get().digits)))
            response_text = response_unit.text if response_unit else si_response_unit
            time_text = time_unit.text if time_unit else "s"
            shown_lhs = rf"{variable}(t)\,[{unit_latex(response_text) or '1'}]"
            entry["shown"] = None if not shown_rows else check.piece(
                i, piece, end, display(shown_lhs, grouped_terms(shown_rows, local,
                                                                available_width(shown_lhs))),
                response_factor=rf, time_factor=tf, tolerance=10.0 ** (1 - _STYLE.get().digits),
                what="in report units")
            entry["shown_time"] = inline(rf"\hat{{t}}\,[{unit_latex(time_text)}]")
        pieces.append(entry)
        if len(derivation.pieces) > EXCERPT_LIMIT and i == EXCERPT_HEAD:
            pieces.append({"gap": Math(escape(
                f"Intervals {EXCERPT_HEAD + 1} to {len(derivation.pieces) - EXCERPT_TAIL} are "
                f"not printed; the coefficients of every interval are in {coefficient_file}."))})

    # results -----------------------------------------------------------------------------
    rows = []

    def result_row(name: str, value: float | None, dimension: Any, prefer: Sequence[str] = ()):
        if value is None:
            rows.append({"name": name, "si": None, "shown": None})
            return
        si, shown = units.show(float(value), dimension, prefer)
        rows.append({"name": name, "si": si, "shown": shown})

    peak = results.peak
    result_row(f"peak {variable} (signed, largest magnitude)",
               peak.value if peak else None, response_dimension, response_prefer)
    result_row("time of peak", peak.time if peak else None, time_dimension, ("time",))
    largest = getattr(results, "largest_load", None)
    if largest is not None and largest.value:
        result_row("largest load", largest.value, load_dimension, load_prefer)
    result_row("static response (largest load held steady)", results.static, response_dimension,
               response_prefer)
    result_row("dynamic load factor |peak| / static", results.dlf,
               quantities.dimension("dimensionless"))
    for key, value in _extra_fields(results).items():
        rows.extend(_field_rows(key, value, units, escape))
    peak_label = None
    if peak is not None:
        peak_si, peak_shown = units.show(float(peak.value), response_dimension, response_prefer)
        time_si, time_shown = units.show(float(peak.time), time_dimension, ("time",))
        peak_label = Math(f"{peak_shown or peak_si} {escape('at t =')} {time_shown or time_si}")

    # figures ------------------------------------------------------------------------------
    plotted = plots.plottable(derivation)
    figure_suffix = "pdf" if target == "tex" else "svg"

    context = {
        "target": target,
        "prefix": f"{section}." if section else "",
        "title_number": f"{section}. " if section else "",
        "suffix": "" if section else ".",
        "title_prefix": "" if derivation.passed else "FAILED — do not use: ",
        "title": case.title,
        "reference": (Math(r"\mbox{" + latex_escape(case.reference) + "}") if target == "tex"
                      else case.reference) if case.reference else None,
        "case_file": Path(case.source).name,
        "sha256": case.sha256 or None,
        "version": __version__,
        "status": status,
        "passed": derivation.passed,
        "failed": [{"name": c.name, "detail": c.detail} for c in failed],
        "check_count": len(derivation.checks),
        "checks": [{"name": c.name, "passed": c.passed, "detail": c.detail}
                   for c in derivation.checks],
        "section": section,
        "label": slug(stem),
        "model": case.system.model,
        "equation": check.form(Math(model.equation)),
        "equation_values": check.form(_equation_with_values(model)),
        "variable": inline(variable),
        "variable_name": Math(variable),
        "load_name": inline(rf"{model.load_name}(t)"),
        "load_transform": Math(load_transform_name),
        "regime": model.regime if model.regime != case.system.model else None,
        "regime_note": getattr(model, "regime_note", "") or None,
        "parameters": parameters,
        "symbols": symbols,
        "symbolic": case.is_symbolic,
        "initial": initial,
        "loads": loads,
        "rewrites": rewrites,
        "transform": transform,
        "kernels": kernels,
        "free": free,
        "superposition": superposition,
        "time_shift_source": _time_shift_source(),
        "exact": solution.exact and not any(
            sympy.sympify(c).has(sympy.Float) for p in derivation.pieces
            for c in p.local.terms.values()),
        "shown_digits": shown_digits(),
        "pieces": pieces,
        "converted": converted,
        "si_units": Math(f"{variable} {escape('in')} " + (
            inline(unit_latex(si_response_unit)) if unit_latex(si_response_unit)
            else escape("the case's units"))),
        "window": units.show(derivation.window.until, time_dimension, ("time",), exact=True),
        "window_note": derivation.window.note,
        "results": rows,
        "results_available": peak is not None,
        "static_gain": _static_gain(model.input_scale, model.coefficients[-1]),
        "peak_label": peak_label,
        "figures": {"load": Math(figure_name(stem, "load", figure_suffix)),
                    "response": Math(figure_name(stem, "response", figure_suffix))}
        if plotted else None,
        "assumptions": ASSUMPTIONS[case.system.model] + COMMON_ASSUMPTIONS,
        "caution": CAUTION,
        "warnings": [w.removeprefix(f"{case.source}: ") for w in derivation.warnings],
        "paper": case.report.paper,
        "printed": check.records,
        "plastic": None,
        "member": None,
    }
    if case.system.member is not None:       # a member as its equivalent oscillator (issue 16)
        from . import member_sheet
        context["member"] = member_sheet.section(derivation, units, escape, inline)
        context["assumptions"] = [*member_sheet.ASSUMPTIONS, *context["assumptions"]]
    if getattr(derivation, "plastic", None) is not None:     # a yielding spring (issue 15)
        from . import plastic_sheet
        context["plastic"] = plastic_sheet.section(
            derivation, units, escape, inline,
            Math(figure_name(stem, "resistance", figure_suffix)) if plotted else None)
        linear = context["equation"]         # the linear form is replaced by R(x)
        check.records[:] = [r for r in check.records if r.display is not linear]
        context["equation"] = check.form(Math(plastic_sheet.EQUATIONS[case.system.model]))
        context["assumptions"] = plastic_sheet.assumptions(derivation, context["assumptions"])
    return context


def excerpt(rows: list, gap: Callable[[int], Any]) -> list:
    """The first and last rows of a long list, with ``gap(omitted)`` between them (dropped
    when it is None); short lists are returned whole."""
    if len(rows) <= EXCERPT_LIMIT:
        return rows
    omitted = len(rows) - EXCERPT_HEAD - EXCERPT_TAIL
    middle = gap(omitted)
    return rows[:EXCERPT_HEAD] + ([middle] if middle is not None else []) + rows[-EXCERPT_TAIL:]


def is_long_history(derivation) -> bool:
    history = derivation.history
    return max(len(derivation.pieces), len(history.terms) + len(history.impulses)) > EXCERPT_LIMIT


def coefficient_file_name(stem: str) -> str:
    return f"{slug(stem)}-coefficients.csv"


def render_coefficients(derivation) -> str:
    """Every load term and every interval's coefficients, SI, for long histories."""
    rows = ["# closedform: load terms c*g(t-a)*H(t-a) and J*delta(t-a), then the response on "
            "each interval as sum of coefficient * local_time^power * exp(rate*local_time) "
            "* cos|sin(frequency*local_time); SI units, local_time = t - start"]
    rows.append("kind,number,start_s,end_s,coefficient,power,rate_1_per_s,frequency_rad_per_s,"
                "function")
    values = derivation.case.symbol_values()

    def text(value) -> str:
        if isinstance(value, sympy.Float):
            return format(float(value), ".17g")
        value = sympy.sympify(value).subs(values)
        return format(float(sympy.N(value, 30)), ".17g") if not value.free_symbols else str(value)

    history = derivation.history
    for number, term in enumerate(history.terms, start=1):
        rows.append(f"load term,{number},{text(term.at)},,{text(term.coefficient)},"
                    f"{term.mode.power},{text(term.mode.rate)},{text(term.mode.frequency)},"
                    f"{term.mode.kind}")
    for number, impulse in enumerate(history.impulses, start=1):
        rows.append(f"impulse,{number},{text(impulse.at)},,{text(impulse.impulse)},,,,delta")
    for number, piece in enumerate(derivation.pieces, start=1):
        end = text(piece.end) if piece.end is not None else text(derivation.window.until)
        for mode in piece.local.modes():
            rows.append(f"interval,{number},{text(piece.start)},{end},"
                        f"{text(piece.local.terms[mode])},{mode.power},{text(mode.rate)},"
                        f"{text(mode.frequency)},{mode.kind}")
    return "\n".join(rows) + "\n"


def slug(stem: str) -> str:
    """A name safe in LaTeX labels, file names and Markdown links (letters, digits, -)."""
    return re.sub(r"-+", "-", re.sub(r"[^A-Za-z0-9-]+", "-", stem)).strip("-") or "case"


def figure_name(stem: str, kind: str, fmt: str) -> str:
    """The file name of one plot of a sheet: ``<slug>-load.svg``, ``<slug>-response.pdf``."""
    return f"{slug(stem)}-{kind}.{fmt}"


def _digits(value: sympy.Expr, units: Units) -> sympy.Expr:
    number_ = sympy.N(sympy.sympify(value).subs(units.values), 20)
    return sympy.S.Zero if number_ == 0 else decimal_float(number_, _STYLE.get().digits)


def _sort_time(units: Units):
    def key(value):
        numeric = units.float(value)
        return (0, numeric) if numeric is not None else (1, sympy.default_sort_key(value))
    return key


def _singularity_term(coefficient: sympy.Expr, mode, shift: str) -> str:
    """c·g(t − a)·H(t − a) with g written in the shifted time (t − a) as one factor, so a
    constant part of c·g can never stand outside its step."""
    shifted = sympy.Symbol("__shifted")
    basis = mode.expression(shifted)
    step = rf"H\!\left({shift}\right)"
    shown = shift if shift == "t" else rf"\left({shift}\right)"
    basis_text = Math(latex(_rounded(basis), symbol_names={shifted: shown})) \
        if basis != 1 else ""
    factor = _factor(coefficient)
    parts = ([] if factor in ("1", "-1") or (factor == "1" and basis_text) else [factor]) \
        + ([basis_text] if basis_text else [])
    body = r"\,".join(parts)
    if factor == "-1":
        body = "-" + (body or "")
    if body in ("", "-"):
        return body + step
    return rf"{body}\,{step}"


def _static_gain(b: sympy.Expr, a0: sympy.Expr) -> Math:
    """b/a_0 as the sheet states it: the ratio, with b and a_0 shown only where they are
    not already the ratio (no "1/1")."""
    if a0 == 0:
        return inline(r"b/a_0")
    ratio = sympy.simplify(b / a0)
    if a0 == 1 or b == 1 or b == ratio:
        return inline(rf"b/a_0 = {typeset(ratio)}")
    return inline(rf"b/a_0 = {_factor(b)} / {_factor(a0)} = {typeset(ratio)}")


def _impulse_term(impulse: sympy.Expr, shift: str) -> str:
    body = typeset(impulse)
    delta = rf"\delta\!\left({shift}\right)"
    return delta if body == "1" else rf"{body}\,{delta}"


def _simple_fraction(coefficient: str, root: str, order: int) -> str:
    if order == 1:
        return rf"\frac{{{coefficient}}}{{s - {root}}}"
    return rf"\frac{{{coefficient}}}{{(s - {root})^{{{order}}}}}"


def _inversion_context(inversion, name: str, variable: sympy.Symbol,
                       check: _EquationRecorder, what: str) -> dict[str, Any]:
    """One inverse transform as the sheet shows it: the rational function, its partial
    fractions (roots, orders, coefficients) and the time function."""
    transform_name = rf"\mathcal{{L}}\{{{name}\}}"
    symbolic, roots = [], []
    for index, fraction in enumerate(inversion.fractions, start=1):
        symbolic.append(_simple_fraction(f"c_{{{index}}}", f"r_{{{index}}}", fraction.order))
        if fraction.is_pair:
            symbolic.append(_simple_fraction(rf"\bar{{c}}_{{{index}}}", rf"\bar{{r}}_{{{index}}}",
                                             fraction.order))
        real, imaginary = sympy.sympify(fraction.coefficient).as_real_imag()
        style = _STYLE.get()

        def parts(value, style=style):   # a constant printed as decimals is one decimal, never a sum of them
            whole = style.rounds and not value.free_symbols and (
                style.numbers == "decimal" or not is_short(value))
            return [value] if whole else ordered_terms(value)
        terms = [typeset(term) for term in parts(real)] if real != 0 else []
        terms += [typeset(sympy.I * term) for term in parts(imaginary)] if imaginary != 0 else []
        lhs = f"c_{{{index}}}"
        roots.append({
            "root": inline(rf"r_{{{index}}} = {typeset(fraction.root)}"),
            "order": fraction.order,
            "pair": fraction.is_pair,
            "coefficient": check.constant(f"{what}: partial-fraction coefficient {index}",
                                          fraction.coefficient, display(lhs, terms or ["0"])),
        })
    time_lhs = rf"{name}({sympy.latex(variable)})"
    return {
        "name": inline(name),
        "transform": check.of_s(f"{what}: transform", inversion.transform.expression(), Display(
            Math(rf"{transform_name}(s)"), tuple(join_lines(
                [typeset(inversion.transform.expression())],
                available_width(f"{transform_name}(s)"))))),
        "fractions": check.form(display(rf"{transform_name}(s)", symbolic)),
        "roots": roots,
        "time": check.time_function(f"{what}: time function", inversion.time_function,
                                    sympy.latex(variable), display(
            time_lhs, grouped_terms(polynomial_rows(inversion.time_function), variable,
                                    available_width(time_lhs)))),
    }


def _time_shift_source() -> str:
    from .laplace import SOURCES
    return SOURCES.get("time shift", "")


def _extra_fields(results) -> dict[str, Any]:
    from .results import result_fields
    return dict(result_fields(results))


# Reading conventions for result fields whose exact set this module does not know: a
# "unit" entry applies to the value-like entries beside it, "<name>_unit" to "<name>", and
# time-like entries are in seconds. Everything else is shown as a plain number or text.
TIME_KEYS = ("time", "after", "before", "start", "end", "duration", "centroid", "at")
VALUE_KEYS = ("value", "amplitude")


def _field_rows(key: str, value: Any, units: Units, escape) -> list[dict[str, Any]]:
    """Rows of the results table for one field of ``results.result_fields``."""
    name = key.replace("_", " ")
    if isinstance(value, (list, tuple)) and value and all(isinstance(v, Mapping) for v in value):
        rows = []
        for i, item in enumerate(value, start=1):
            label = f"{name}, load {item['load']}" if "load" in item else f"{name} {i}"
            rest = {k: v for k, v in item.items() if k != "load"}
            rows.extend(_mapping_rows(label, rest, units, escape))
        return rows
    if isinstance(value, Mapping):
        return _mapping_rows(name, value, units, escape)
    return [{"name": name, **_field_text(value, units, escape)}]


SPLIT_PARTS = 3     # a result with more parts than this gets one row per part


def _mapping_rows(label: str, value: Mapping, units: Units, escape) -> list[dict[str, Any]]:
    """One row for a short mapping (or a value at a time), else a row per part."""
    parts = [k for k in value if k != "unit" and not k.endswith("_unit")]
    if len(parts) <= SPLIT_PARTS or ("value" in value and "time" in value):
        return [{"name": label, **_field_text(value, units, escape)}]
    own_unit = value.get("unit") if isinstance(value.get("unit"), str) else None
    rows = []
    for k in parts:
        part_unit = value.get(f"{k}_unit") if isinstance(value.get(f"{k}_unit"), str) else (
            "s" if k in TIME_KEYS else own_unit if k in VALUE_KEYS else None)
        rows.append({"name": f"{label}: {k.replace('_', ' ')}",
                     **_field_text(value[k], units, escape, part_unit)})
    return rows


def _field_text(value: Any, units: Units, escape, unit: str | None = None) -> dict[str, Any]:
    """{"si": …, "shown": …} for a field value of any shape."""
    if value is None:
        return {"si": None, "shown": None}
    if isinstance(value, bool):
        text = Math(escape("yes" if value else "no"))
        return {"si": text, "shown": None}
    if isinstance(value, (int, float)):
        return _field_number(float(value), unit, units, escape)
    if isinstance(value, sympy.Basic):
        return {"si": inline(typeset(value)), "shown": None}
    if isinstance(value, Mapping):
        own_unit = value.get("unit") if isinstance(value.get("unit"), str) else None
        if "value" in value and "time" in value:
            amount = _field_number(value["value"], own_unit, units, escape)
            time = _field_number(value["time"], "s", units, escape)
            at = Math(" " + escape("at t =") + " ")
            return {"si": _joined(amount["si"], at, time["si"]),
                    "shown": _joined(amount["shown"] or amount["si"], at, time["shown"] or time["si"])
                    if amount["shown"] or time["shown"] else None}
        si_parts, shown_parts, converted = [], [], False
        for k, v in value.items():
            if k == "unit" or k.endswith("_unit"):
                continue
            part_unit = value.get(f"{k}_unit") if isinstance(value.get(f"{k}_unit"), str) else (
                "s" if k in TIME_KEYS else own_unit if k in VALUE_KEYS else None)
            text = _field_text(v, units, escape, part_unit)
            label = Math(escape(k.replace("_", " ")) + " ")
            si_parts.append(_joined(label, text["si"] or Math(escape("—"))))
            shown_parts.append(_joined(label, text["shown"] or text["si"] or Math(escape("—"))))
            converted = converted or text["shown"] is not None
        separator = Math("; ")
        return {"si": Math(separator.join(si_parts)),
                "shown": Math(separator.join(shown_parts)) if converted else None}
    if isinstance(value, (list, tuple)):
        if not value:
            return {"si": None, "shown": None}
        parts = [_field_text(v, units, escape)["si"] or Math(escape("—")) for v in value]
        return {"si": Math("; ".join(parts)), "shown": None}
    return {"si": Math(escape(str(value))), "shown": None}


def _field_number(value: Any, unit: str | None, units: Units, escape) -> dict[str, Any]:
    if value is None:
        return {"si": None, "shown": None}
    if isinstance(value, str):
        return {"si": Math(escape(value)), "shown": None}
    if unit is None:
        return {"si": inline(number(float(value))), "shown": None}
    try:
        factor, dimension = quantities.unit_factor(unit, key=None)
    except ClosedformError:
        return {"si": Math(inline(number(float(value))) + escape(" " + unit)), "shown": None}
    si, shown = units.show(float(value) * float(sympy.N(factor, 30)), dimension,
                           prefer=("time",) if dimension == quantities.dimension("time") else ())
    return {"si": si, "shown": shown}


def _joined(*parts: Math | None) -> Math:
    return Math("".join(str(p) for p in parts if p is not None))


# ----------------------------------------------------------------------------- rendering


def render_markdown(derivation, *, stem: str | None = None, section: int | None = None,
                    level: int = 1) -> str:
    """The sheet as Markdown with $…$ / $$…$$ math; figures are referenced as SVG files
    named after ``stem``. ``section`` and ``level`` number and nest it inside an appendix."""
    context = sheet_context(derivation, "md", stem=stem, section=section)
    context.update({"h1": Math("#" * level), "h2": Math("#" * (level + 1)),
                    "label_anchor": f"case-{context['label']}" if section else None})
    return make_environment("md").get_template("sheet.md.j2").render(context)


PAPER_OPTIONS = {"a4": "a4paper", "letter": "letterpaper"}
LATEX_PACKAGES = ("amsmath", "amssymb", "booktabs", "longtable", "array", "graphicx")


def latex_preamble() -> str:
    """The LaTeX preamble every sheet needs (for a document that \\input's fragments)."""
    return make_environment("tex").get_template("preamble.tex.j2").render(
        {"packages": LATEX_PACKAGES})


def render_latex(derivation, standalone: bool = True, *, stem: str | None = None,
                 section: int | None = None) -> str:
    """The sheet as LaTeX: a complete document, or (``standalone=False``) a fragment that
    starts with \\section and can be \\input into an appendix whose preamble has
    :func:`latex_preamble`. Figures are referenced as PDF files named after ``stem``."""
    environment = make_environment("tex")
    context = sheet_context(derivation, "tex", stem=stem, section=section)
    body = environment.get_template("sheet.tex.j2").render(context)
    if not standalone:
        return body
    return environment.get_template("document.tex.j2").render(
        {"preamble": Math(latex_preamble()), "body": Math(body), "title": context["title"],
         "status": context["status"], "label": context["label"],
         "paper": Math(PAPER_OPTIONS[context["paper"]])})


def figure_files(derivation, stem: str, fmt: str) -> dict[str, bytes]:
    """The load and response plots of one sheet as ``fmt`` ("svg" or "pdf") files."""
    if not plots.plottable(derivation):
        return {}
    case = derivation.case
    units = Units(case)
    time_unit = units.unit_for(quantities.dimension("time"), ("time",))
    time_axis = plots.Axis(f"t [{unit_text(time_unit.text) if time_unit else 's'}]",
                           1 / float(sympy.N(time_unit.factor, 30)) if time_unit else 1.0)
    response_dimension = case.system.response_dimension
    response_unit = units.unit_for(response_dimension, ("response", "displacement", "voltage",
                                                       "current"))
    variable = derivation.model.variable
    value_axis = plots.Axis(
        f"{variable} [{unit_text(response_unit.text) if response_unit else quantities.si_unit_text(response_dimension)}]",
        1 / float(sympy.N(response_unit.factor, 30)) if response_unit else 1.0)
    load_dimension = case.system.load_dimension
    load_unit = units.unit_for(load_dimension, {"spring-mass-damper": ("force",),
                                                "base-excitation": ("acceleration",),
                                                "series-rlc": ("voltage",)}.get(case.system.model, ()))
    load_axis = plots.Axis(
        f"{derivation.model.load_name} [{unit_text(load_unit.text) if load_unit else quantities.si_unit_text(load_dimension)}]",
        1 / float(sympy.N(load_unit.factor, 30)) if load_unit else 1.0)
    peak_label = None
    peak = derivation.numbers.peak
    if peak is not None:
        peak_label = (f"peak {peak.value * value_axis.scale:.4g} "
                      f"{value_axis.label.split('[')[-1].rstrip(']')} at "
                      f"{peak.time * time_axis.scale:.4g} {time_axis.label.split('[')[-1].rstrip(']')}")
    impulse_unit = quantities.si_unit_text(load_dimension * quantities.dimension("time"))
    impulses = [(units.float(i.at), f"J = {units.float(i.impulse):.4g} {impulse_unit}")
                for i in derivation.history.impulses]
    figures = {
        figure_name(stem, "load", fmt): plots.load_figure(derivation, fmt, time_axis, load_axis,
                                                          impulses),
        figure_name(stem, "response", fmt): plots.response_figure(derivation, fmt, time_axis, value_axis,
                                                        peak_label),
    }
    if getattr(derivation, "plastic", None) is not None:     # spring force against displacement
        from .plastic_sheet import resistance_figure
        force_unit = units.unit_for(quantities.dimension("force"), ("force",))
        force_axis = plots.Axis(f"R [{unit_text(force_unit.text) if force_unit else 'N'}]",
                                1 / float(sympy.N(force_unit.factor, 30)) if force_unit else 1.0)
        figures[figure_name(stem, "resistance", fmt)] = resistance_figure(
            derivation, fmt, value_axis, force_axis)
    return figures


def render_csv(derivation, points: int = CSV_POINTS) -> str:
    """The response sampled on an even grid over the window, SI, 17 significant digits."""
    case = derivation.case
    if not plots.plottable(derivation):
        raise CaseError("csv output needs a value for every symbol", file=Path(case.source).name,
                        key="symbols")
    units = Units(case)
    until = units.float(derivation.window.until)
    starts = [units.float(p.start) for p in derivation.pieces]
    functions = [p.numeric if getattr(p, "numeric", None) is not None else p.local.numeric(units.values)
                 for p in derivation.pieces]
    unit = quantities.si_unit_text(case.system.response_dimension)
    lines = [f"t [s],{derivation.model.variable} [{unit}]"]
    index = 0
    for k in range(points + 1):
        time = until * k / points
        while index + 1 < len(starts) and starts[index + 1] <= time:
            index += 1
        value = float(functions[index](time - starts[index]))
        # beyond the float range (an overflow, reported as a failed check): an empty field
        lines.append(f"{time:.17g},{value:.17g}" if math.isfinite(value) else f"{time:.17g},")
    return "\n".join(lines) + "\n"


def latex_command() -> list[str] | None:
    """The command that turns ``sheet.tex`` into a PDF here: pdflatex, called directly.

    Not latexmk: it reads rc files (from the working folder, the home folder and the system)
    whose Perl settings such as ``$pdflatex`` would decide what runs. pdflatex runs with
    shell escape off whatever texmf.cnf or the environment says; the reruns it needs for
    cross-references are done here.
    """
    if shutil.which("pdflatex"):
        return ["pdflatex", "-no-shell-escape", "-interaction=nonstopmode", "-halt-on-error"]
    return None


def require_latex() -> list[str]:
    """The LaTeX command, or a ClosedformError (exit 1) naming the tool that is missing."""
    command = latex_command()
    if command is None:
        raise ClosedformError("PDF output needs pdflatex on the PATH, and it was not found; "
                              "install a TeX distribution, or leave pdf out of --format")
    return command


#: The fixed name every document is compiled under (the caller renames the PDF it gets back):
#: no part of a case file's name ever reaches the LaTeX command line.
LATEX_JOB = "sheet"
_SAFE_FILE = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*")
LATEX_RUNS = 3


def compile_pdf(tex: str, files: Mapping[str, bytes] | None = None, name: str = "sheet",
                timeout: float = 600) -> bytes:
    """Compile a LaTeX document (with its figure files) in a private temporary folder.

    The document is written as ``sheet.tex`` whatever ``name`` is (``name`` only labels
    messages), the command is a list run without a shell, and the figure files must have
    plain names (letters, digits, ``.``, ``_``, ``-``, not starting with ``-``). Dates and
    document ids in the PDF are fixed (SOURCE_DATE_EPOCH), so the same sheet gives the same
    PDF on a given TeX installation.
    """
    command = require_latex()
    for file_name in files or {}:
        if not _SAFE_FILE.fullmatch(file_name) or ".." in file_name:
            raise ClosedformError(f"internal: the LaTeX input file name {file_name!r} is not "
                                  "a plain file name")
    environment = dict(os.environ, SOURCE_DATE_EPOCH="0", FORCE_SOURCE_DATE="1",
                       openout_any="p", openin_any="a", shell_escape="f")
    with tempfile.TemporaryDirectory(prefix="closedform-latex-") as folder:
        root = Path(folder)
        for file_name, content in (files or {}).items():
            (root / file_name).write_bytes(content)
        (root / f"{LATEX_JOB}.tex").write_text(tex, encoding="utf-8")
        log_path = root / f"{LATEX_JOB}.log"
        for _ in range(LATEX_RUNS):
            try:
                finished = subprocess.run([*command, f"{LATEX_JOB}.tex"], cwd=root,
                                          env=environment, stdin=subprocess.DEVNULL,
                                          capture_output=True, timeout=timeout, check=False,
                                          shell=False)
            except subprocess.TimeoutExpired:
                raise ClosedformError(f"LaTeX did not finish within {timeout:.0f} s") from None
            if finished.returncode != 0:
                raise ClosedformError("LaTeX could not compile the sheet: "
                                      + _latex_error(log_path))
            log = log_path.read_text(encoding="utf-8", errors="replace")
            if "Rerun to get" not in log and "Label(s) may have changed" not in log:
                break
        pdf = root / f"{LATEX_JOB}.pdf"
        if not pdf.exists():
            raise ClosedformError("LaTeX produced no PDF: " + _latex_error(log_path))
        return pdf.read_bytes()


def _latex_error(log_path: Path) -> str:
    try:
        lines = log_path.read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError:
        return "no log was written"
    for i, line in enumerate(lines):
        if line.startswith("!"):
            return " ".join(part.strip() for part in lines[i:i + 3] if part.strip())
    return "see the LaTeX log (no error line found)"


def render_outputs(derivation, formats, stem: str) -> dict[str, str | bytes]:
    """File name → content for every requested format (nothing is written here).

    ``md`` brings its SVG plots along, ``tex`` its PDF plots; ``pdf`` is the compiled sheet
    (the plots inside it), ``svg`` the SVG plots alone, ``json`` the result contract and
    ``csv`` the response sampled over the window.
    """
    formats = list(formats)
    if "pdf" in formats:
        require_latex()   # before any work: name the missing tool
    contents: dict[str, str | bytes] = {}
    if is_long_history(derivation) and {"md", "tex", "pdf"} & set(formats):
        contents[coefficient_file_name(stem)] = render_coefficients(derivation)
    if "md" in formats:
        contents[f"{stem}.md"] = render_markdown(derivation, stem=stem)
    if "md" in formats or "svg" in formats:
        contents.update(figure_files(derivation, stem, "svg"))
    tex = None
    pdf_figures: dict[str, bytes] = {}
    if "tex" in formats or "pdf" in formats:
        tex = render_latex(derivation, standalone=True, stem=stem)
        pdf_figures = figure_files(derivation, stem, "pdf")
    if "tex" in formats:
        contents[f"{stem}.tex"] = tex
        contents.update(pdf_figures)
    if "pdf" in formats:
        contents[f"{stem}.pdf"] = compile_pdf(tex, pdf_figures, name=stem)
    if "json" in formats:
        contents[f"{stem}.json"] = derivation.to_json() + "\n"
    if "csv" in formats:
        contents[f"{stem}.csv"] = render_csv(derivation)
    return contents

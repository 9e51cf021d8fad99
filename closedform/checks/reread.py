"""Re-reading the printed sheet: every displayed equation is parsed back and compared.

The sheet prints its equations as LaTeX typeset from the derivation. This module reads the
*printed text* back with a parser of its own (it never asks sympy to parse or print) for
the narrow grammar the sheets use — numbers, fractions, powers, products, sums, ``e^{…}``,
``\\cos``/``\\sin``, square roots, the Heaviside step ``H(…)`` and the Dirac delta
``\\delta(…)`` — and evaluates it with mpmath at many points. Each value is compared with
the derivation's own objects at the same points (the load terms, the transforms, the
partial-fraction coefficients, the interval polynomials). A line that disagrees, or that
cannot be read, makes the check fail, and with it the sheet.

An equation is registered by :func:`render.sheet_context` as a :class:`Printed` record: the
:class:`render.Display` that is printed, the variable it is a function of, the sample
points and a reference function computed from the derivation. Displays that are forms
without numbers (the model's general equation, the partial-fraction pattern) are
registered as forms and are only required to be printed as recorded.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import mpmath

WORKING_DIGITS = 40


class Unreadable(ValueError):
    """The printed LaTeX is outside the grammar this reader knows."""


# ----------------------------------------------------------------------------- tokens

_TOKEN = re.compile(r"\\[A-Za-z]+|\\[,;:! ]|\\\{|\\\}|\\\\|\d+(?:\.\d+)?|[A-Za-z]|[{}()\[\]^_+\-=|/*]|\S")
_SPACES = {r"\,", r"\;", r"\:", r"\!", "\\ ", r"\quad", r"\qquad"}
_FUNCTIONS = {r"\cos": mpmath.cos, r"\sin": mpmath.sin, r"\tan": mpmath.tan,
              r"\cosh": mpmath.cosh, r"\sinh": mpmath.sinh, r"\tanh": mpmath.tanh,
              r"\exp": mpmath.exp, r"\log": mpmath.log, r"\ln": mpmath.log}
_DECORATIONS = (r"\hat", r"\bar", r"\dot", r"\ddot", r"\tilde", r"\mathrm", r"\operatorname")


def tokens(latex: str) -> list[str]:
    return [t for t in _TOKEN.findall(latex) if t not in _SPACES]


Value = Callable[[Mapping[str, Any]], Any]


@dataclass
class _Reader:
    items: list[str]
    position: int = 0

    def peek(self, offset: int = 0) -> str | None:
        index = self.position + offset
        return self.items[index] if index < len(self.items) else None

    def take(self, expected: str | None = None) -> str:
        token = self.peek()
        if token is None or (expected is not None and token != expected):
            raise Unreadable(f"expected {expected or 'more'} at token {self.position}, "
                             f"found {token!r}")
        self.position += 1
        return token

    # expr := [sign] term {sign term}
    def expression(self) -> Value:
        parts: list[tuple[int, Value]] = []
        sign = 1
        if self.peek() in ("+", "-"):
            sign = -1 if self.take() == "-" else 1
        parts.append((sign, self.term()))
        while self.peek() in ("+", "-"):
            sign = -1 if self.take() == "-" else 1
            parts.append((sign, self.term()))

        def value(env):
            total = 0
            for s, part in parts:
                total = total + s * part(env)
            return total
        return value

    def _starts_factor(self, token: str | None) -> bool:
        if token is None:
            return False
        if token in ("{", "(", r"\left", r"\frac", r"\dfrac", r"\sqrt", r"\pi", r"\infty"):
            return True
        if token in _FUNCTIONS or token in _DECORATIONS:
            return True
        if token[0].isdigit() or (len(token) == 1 and token.isalpha()):
            return True
        return token.startswith("\\") and token[1:].isalpha() and token not in (
            r"\right", r"\cdot", r"\times", r"\le", r"\quad", r"\qquad", r"\end", r"\begin")

    # term := factor {[\cdot | \times | /] factor}
    def term(self) -> Value:
        factors: list[tuple[bool, Value]] = [(False, self.factor())]
        while True:
            token = self.peek()
            if token in (r"\cdot", r"\times", "*"):
                self.take()
                factors.append((False, self.factor()))
            elif token == "/":
                self.take()
                factors.append((True, self.factor()))
            elif self._starts_factor(token):
                factors.append((False, self.factor()))
            else:
                break

        def value(env):
            product = 1
            for divide, f in factors:
                product = product / f(env) if divide else product * f(env)
            return product
        return value

    # factor := ['-'] atom ['^' script]
    def factor(self) -> Value:
        if self.peek() == "-":
            self.take()
            inner = self.factor()
            return lambda env: -inner(env)
        base = self.atom()
        if self.peek() == "^":
            self.take()
            exponent = self.script()
            return lambda env: mpmath.power(base(env), exponent(env))
        return base

    def script(self) -> Value:
        if self.peek() == "{":
            return self.group()
        token = self.take()
        if token[0].isdigit():
            return _constant(mpmath.mpf(token[0]) if len(token) > 1 else mpmath.mpf(token))
        raise Unreadable(f"unexpected script {token!r}")

    def group(self) -> Value:
        self.take("{")
        inner = self.expression()
        self.take("}")
        return inner

    def raw_group(self) -> str:
        """The tokens of a {…} group as text (for names such as \\hat{t} or F_{0})."""
        self.take("{")
        depth, out = 1, []
        while True:
            token = self.take()
            if token == "{":
                depth += 1
            elif token == "}":
                depth -= 1
                if depth == 0:
                    return "".join(out)
            out.append(token)

    def parenthesised(self) -> Value:
        if self.peek() == r"\left":
            self.take()
            opening = self.take()
            inner = self.expression()
            self.take(r"\right")
            closing = self.take()
            if (opening, closing) not in (("(", ")"), ("[", "]"), ("|", "|"), (r"\{", r"\}")):
                raise Unreadable(f"unmatched {opening}{closing}")
            return (lambda env: abs(inner(env))) if opening == "|" else inner
        if self.peek() == "(":
            self.take()
            inner = self.expression()
            self.take(")")
            return inner
        if self.peek() == "{":
            return self.group()
        raise Unreadable(f"expected an argument, found {self.peek()!r}")

    def atom(self) -> Value:
        token = self.peek()
        if token is None:
            raise Unreadable("the line ends where a value was expected")
        if token[0].isdigit():
            self.take()
            return _constant(mpmath.mpf(token))
        if token in ("{", "(", r"\left"):
            return self.parenthesised()
        if token in (r"\frac", r"\dfrac"):
            self.take()
            numerator, denominator = self.group(), self.group()
            return lambda env: numerator(env) / denominator(env)
        if token == r"\sqrt":
            self.take()
            degree = None
            if self.peek() == "[":
                self.take()
                degree = self.expression()
                self.take("]")
            radicand = self.group()
            if degree is None:
                return lambda env: mpmath.sqrt(radicand(env))
            return lambda env: mpmath.root(radicand(env), int(degree(env)))
        if token in _FUNCTIONS:
            self.take()
            function = _FUNCTIONS[token]
            power = None
            if self.peek() == "^":
                self.take()
                power = self.script()
            argument = self.parenthesised()
            if power is None:
                return lambda env: function(argument(env))
            return lambda env: mpmath.power(function(argument(env)), power(env))
        if token == "e" and self.peek(1) != "_":
            self.take()
            return lambda env: env["e"] if "e" in env else mpmath.e
        if token == r"\pi":
            self.take()
            return _constant(mpmath.pi)
        if token == "e" and self.peek(1) == "^":
            self.take()
            return _constant(mpmath.e)
        if token == "H" and self.peek(1) in ("(", r"\left"):
            self.take()
            argument = self.parenthesised()
            return lambda env: _heaviside(argument(env))
        if token == r"\delta" and self.peek(1) in ("(", r"\left"):
            self.take()
            argument = self.parenthesised()
            return lambda env: env.get("\\delta", _no_delta)(argument(env))
        if token == "i" and self.peek(1) != "_":
            self.take()
            return lambda env: env["i"] if "i" in env else mpmath.mpc(0, 1)
        return self.symbol()

    def symbol(self) -> Value:
        token = self.take()
        if token in _DECORATIONS:
            name = token + "{" + self.raw_group() + "}"
        elif len(token) == 1 and token.isalpha() or token.startswith("\\"):
            name = token
        else:
            raise Unreadable(f"unexpected {token!r}")
        if self.peek() == "_":
            self.take()
            name += "_{" + (self.raw_group() if self.peek() == "{" else self.take()) + "}"

        def value(env):
            if name not in env:
                raise Unreadable(f"the symbol {name} has no value here")
            return env[name]
        return value


def _constant(number) -> Value:
    return lambda env: number


def _heaviside(x):
    x = mpmath.re(x) if isinstance(x, mpmath.mpc) else x
    if x == 0:
        raise Unreadable("a Heaviside step evaluated at its jump")
    return 1 if x > 0 else 0


def _no_delta(x):
    return 0


def read(latex: str) -> Value:
    """The printed right-hand side as a function of a name → value mapping."""
    reader = _Reader(tokens(latex))
    value = reader.expression()
    if reader.peek() is not None:
        raise Unreadable(f"text left over after the expression: {' '.join(reader.items[reader.position:])[:60]}")
    return value


# ----------------------------------------------------------------------------- printed blocks


def split_block(block: str) -> tuple[str, str]:
    """(lhs, rhs) of one printed display block (Markdown $$…$$ or LaTeX equation*/align*)."""
    body = block.strip()
    for wrapper in ("$$", r"\begin{equation*}", r"\end{equation*}", r"\begin{align*}",
                    r"\end{align*}", r"\begin{aligned}", r"\end{aligned}"):
        body = body.replace(wrapper, " ")
    body = body.replace("\\\\\n", " ").replace(r"&\quad", " ").replace("&", " ")
    body = re.split(r"\\qquad", body)[0]
    if "=" not in body:
        raise Unreadable("the block has no '='")
    lhs, rhs = body.split("=", 1)
    return lhs.strip(), rhs.strip()


@dataclass
class Printed:
    """One printed equation and how to check it against the derivation.

    ``variable`` is the LaTeX name of the argument (``t``, ``u``, ``s``, ``\\hat{t}``) or
    None for a constant; ``reference(x)`` is the derivation's value at ``x``; ``symbols``
    maps other printed names to their values; ``impulses`` are the argument values where a
    Dirac delta of the printed line must carry the weight ``reference_impulse(x)``.
    ``tolerance`` is relative to the largest reference magnitude over the points.
    """

    display: Any
    what: str
    variable: str | None = None
    points: Sequence[Any] = ()
    reference: Callable[[Any], Any] | None = None
    symbols: Mapping[str, Any] = field(default_factory=dict)
    tolerance: float = 1e-9
    impulses: Sequence[tuple[Any, Any]] = ()
    form: bool = False
    pointwise: bool = False      # tolerance relative to each point's own value (transforms)
    magnitude: Callable[[Any], Any] | None = None   # size of the terms at x (error scale)


def compare(record: Printed, block: str) -> str | None:
    """None when the printed block agrees with the derivation, else what is wrong."""
    if record.form:
        return None
    try:
        lhs, rhs = split_block(block)
        value = read(rhs)
    except Unreadable as error:
        return f"{record.what}: the printed line could not be read back ({error})"
    with mpmath.workdps(WORKING_DIGITS):
        points = list(record.points) if record.variable is not None else [None]
        printed, expected = [], []
        try:
            for x in points:
                env = dict(record.symbols)
                if record.variable is not None:
                    env[record.variable] = x
                printed.append(mpmath.mpmathify(value(env)))
                expected.append(mpmath.mpmathify(record.reference(x)))
        except Unreadable as error:
            return f"{record.what}: the printed line could not be evaluated ({error})"
        except (ZeroDivisionError, ValueError, OverflowError) as error:
            return f"{record.what}: the printed line could not be evaluated ({error})"
        scale = max([abs(v) for v in expected] + [mpmath.mpf(10) ** -30])
        for x, p, e in zip(points, printed, expected):
            bound = abs(e) if record.pointwise else (
                record.magnitude(x) if record.magnitude is not None else scale)
            if abs(p - e) > record.tolerance * max(bound, mpmath.mpf(10) ** -30):
                where = "" if x is None else f" at {record.variable} = {mpmath.nstr(x, 6)}"
                return (f"{record.what}: printed {mpmath.nstr(p, 8)}, derivation "
                        f"{mpmath.nstr(e, 8)}{where}")
        for x, weight in record.impulses:
            env = dict(record.symbols)
            env[record.variable] = x
            # The printed time is a decimal and x a binary number: t − a is round-off there,
            # not zero. Within the line's own tolerance of |x| it is the printed impulse.
            near = max(mpmath.mpf(record.tolerance), mpmath.mpf(10) ** -9) * abs(x) \
                + mpmath.mpf(10) ** -25
            env["\\delta"] = lambda argument, near=near: 1 if abs(argument) <= near else 0
            try:
                with_delta = mpmath.mpmathify(value(env))
                env["\\delta"] = _no_delta
                without = mpmath.mpmathify(value(env))
            except Unreadable as error:
                return f"{record.what}: the impulse at {mpmath.nstr(x, 6)} could not be read ({error})"
            if abs((with_delta - without) - weight) > record.tolerance * max(abs(weight), 1e-30):
                return (f"{record.what}: printed impulse {mpmath.nstr(with_delta - without, 8)} "
                        f"at {mpmath.nstr(x, 6)}, derivation {mpmath.nstr(weight, 8)}")
    return None

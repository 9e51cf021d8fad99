"""Exponential polynomials: the functions every closed-form response here is made of.

A linear constant-coefficient model driven by steps, ramps, impulses, exponentials and
sinusoids responds with finite sums of

    u^k · e^(σ·u) · cos(ω·u)    and    u^k · e^(σ·u) · sin(ω·u)

in a local time ``u`` (the time since a breakpoint). Keeping responses in this form makes
the three operations the engine needs exact and cheap: re-expanding about a later
breakpoint (the shift), differentiating, and taking the Laplace transform.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Iterable, Iterator, Mapping
from dataclasses import dataclass, field
from math import comb

import mpmath
import sympy
from mpmath.libmp import fzero

COS = "cos"
SIN = "sin"


@dataclass(frozen=True, order=False)
class BasisTerm:
    """One basis function u^power · e^(rate·u) · cos|sin(frequency·u); frequency ≥ 0.

    A basis term with frequency 0 is always of kind ``cos`` (the pure u^k e^(σu) term).
    """

    power: int
    rate: sympy.Expr
    frequency: sympy.Expr
    kind: str = COS

    def __post_init__(self) -> None:
        if self.power < 0:
            raise ValueError("a mode's power of u is a non-negative integer")
        if self.kind not in (COS, SIN):
            raise ValueError(f"unknown mode kind {self.kind!r}")
        if self.frequency == 0 and self.kind == SIN:
            raise ValueError("sin(0·u) is not a mode")

    def expression(self, u: sympy.Expr) -> sympy.Expr:
        """The mode as a sympy expression in the local time ``u``."""
        value = u**self.power * sympy.exp(self.rate * u)
        if self.frequency != 0:
            trig = sympy.cos if self.kind == COS else sympy.sin
            value = value * trig(self.frequency * u)
        return value

    def sort_key(self) -> tuple:
        return _mode_sort_key(self)


@functools.lru_cache(maxsize=4096)
def _mode_sort_key(mode: BasisTerm) -> tuple:
    """A mode's place in a printed sum (the pieces of a history share their modes, and
    sympy's sort key of an exponent costs more than the rest of printing a piece)."""
    return (sympy.default_sort_key(mode.rate), sympy.default_sort_key(mode.frequency),
            mode.kind, mode.power)


@dataclass(frozen=True)
class ExponentialPolynomial:
    """A finite sum Σ coefficient · mode(u), immutable; zero coefficients are dropped."""

    terms: Mapping[BasisTerm, sympy.Expr] = field(default_factory=dict)

    @staticmethod
    def from_terms(pairs: Iterator[tuple[BasisTerm, sympy.Expr]] | list[tuple[BasisTerm, sympy.Expr]],
                   ) -> ExponentialPolynomial:
        collected: dict[BasisTerm, sympy.Expr] = {}
        for mode, coefficient in pairs:
            collected[mode] = collected.get(mode, sympy.S.Zero) + coefficient
        return ExponentialPolynomial({m: c for m, c in collected.items() if c != 0})

    @staticmethod
    def single(mode: BasisTerm, coefficient: sympy.Expr = sympy.S.One) -> ExponentialPolynomial:
        return ExponentialPolynomial.from_terms([(mode, sympy.sympify(coefficient))])

    @staticmethod
    def polynomial(coefficients: Mapping[int, sympy.Expr]) -> ExponentialPolynomial:
        """Σ c_k u^k."""
        zero = sympy.S.Zero
        return ExponentialPolynomial.from_terms(
            [(BasisTerm(k, zero, zero), c) for k, c in coefficients.items()])

    def is_zero(self) -> bool:
        return not self.terms

    def __add__(self, other: ExponentialPolynomial) -> ExponentialPolynomial:
        return ExponentialPolynomial.from_terms(list(self.terms.items()) + list(other.terms.items()))

    def __neg__(self) -> ExponentialPolynomial:
        return self.scaled(sympy.S.NegativeOne)

    def __sub__(self, other: ExponentialPolynomial) -> ExponentialPolynomial:
        return self + (-other)

    def scaled(self, factor: sympy.Expr) -> ExponentialPolynomial:
        return ExponentialPolynomial.from_terms([(m, c * factor) for m, c in self.terms.items()])

    def map_coefficients(self, function: Callable[[sympy.Expr], sympy.Expr],
                         ) -> ExponentialPolynomial:
        return ExponentialPolynomial.from_terms([(m, function(c)) for m, c in self.terms.items()])

    def modes(self) -> list[BasisTerm]:
        return sorted(self.terms, key=BasisTerm.sort_key)

    def shifted(self, delay: sympy.Expr) -> ExponentialPolynomial:
        """g(v + delay) written again as an exponential polynomial in v.

        This is how a response is carried from one breakpoint to the next: with
        u = v + d, u^k = Σ C(k, j) d^(k−j) v^j, e^(σu) = e^(σd) e^(σv) and
        cos/sin(ω(v + d)) by the angle-sum identities.
        """
        if delay == 0:
            return self
        pairs: list[tuple[BasisTerm, sympy.Expr]] = []
        for mode, coefficient in self.terms.items():
            growth = sympy.exp(mode.rate * delay)
            if mode.frequency == 0:
                trig_parts = [(COS, sympy.S.One)]
            else:
                cos_d = sympy.cos(mode.frequency * delay)
                sin_d = sympy.sin(mode.frequency * delay)
                if mode.kind == COS:   # cos(a+b) = cos a cos b − sin a sin b
                    trig_parts = [(COS, cos_d), (SIN, -sin_d)]
                else:                  # sin(a+b) = sin a cos b + cos a sin b
                    trig_parts = [(SIN, cos_d), (COS, sin_d)]
            for j in range(mode.power + 1):
                binomial = comb(mode.power, j) * delay**(mode.power - j)
                for kind, trig_factor in trig_parts:
                    pairs.append((BasisTerm(j, mode.rate, mode.frequency, kind),
                                  coefficient * growth * binomial * trig_factor))
        return ExponentialPolynomial.from_terms(pairs)

    def __mul__(self, other: ExponentialPolynomial) -> ExponentialPolynomial:
        """The product, closed in the basis by the product-to-sum identities."""
        pairs: list[tuple[BasisTerm, sympy.Expr]] = []
        for m1, c1 in self.terms.items():
            for m2, c2 in other.terms.items():
                power, rate = m1.power + m2.power, m1.rate + m2.rate
                for kind, frequency, weight in _trig_product(m1, m2):
                    if frequency == 0 and kind == SIN:
                        continue
                    if frequency.is_negative:
                        frequency = -frequency
                        if kind == SIN:
                            weight = -weight
                    pairs.append((BasisTerm(power, rate, frequency, kind), c1 * c2 * weight))
        return ExponentialPolynomial.from_terms(pairs)

    def derivative(self) -> ExponentialPolynomial:
        """d/du of the sum, term by term (product rule)."""
        pairs: list[tuple[BasisTerm, sympy.Expr]] = []
        for mode, c in self.terms.items():
            if mode.power > 0:
                pairs.append((BasisTerm(mode.power - 1, mode.rate, mode.frequency, mode.kind),
                              c * mode.power))
            if mode.rate != 0:
                pairs.append((mode, c * mode.rate))
            if mode.frequency != 0:
                other = SIN if mode.kind == COS else COS
                sign = -1 if mode.kind == COS else 1
                pairs.append((BasisTerm(mode.power, mode.rate, mode.frequency, other),
                              sign * c * mode.frequency))
        return ExponentialPolynomial.from_terms(pairs)

    def expression(self, u: sympy.Expr) -> sympy.Expr:
        """The sum as one sympy expression in ``u`` (modes in a fixed order)."""
        return sympy.Add(*[self.terms[m] * m.expression(u) for m in self.modes()])

    def numeric(self, substitutions: Mapping[sympy.Symbol, sympy.Expr] | None = None,
                digits: int = 30) -> NumericExponentialPolynomial:
        """The same sum with every number evaluated to mpmath at ``digits`` digits."""
        subs = dict(substitutions or {})
        rows = []
        with mpmath.workdps(digits + 10):
            for mode, c in self.terms.items():
                def value(expr: sympy.Expr) -> mpmath.mpf | mpmath.mpc:
                    evaluated = sympy.sympify(expr).subs(subs).evalf(digits + 10)
                    if evaluated.free_symbols:
                        raise ValueError(f"symbols left after substitution: {evaluated.free_symbols}")
                    return mpmath.mpmathify(complex(evaluated)) if not evaluated.is_real \
                        else mpmath.mpf(sympy.Float(evaluated, digits + 10)._mpf_)
                rows.append((mode.power, value(mode.rate), value(mode.frequency),
                             mode.kind, value(c)))
        return NumericExponentialPolynomial(tuple(rows), digits)


@dataclass(frozen=True)
class NumericExponentialPolynomial:
    """An exponential polynomial with mpmath numbers, for evaluation and root finding."""

    rows: tuple[tuple[int, object, object, str, object], ...]
    digits: int = 30

    def __call__(self, u) -> object:
        with mpmath.workdps(self.digits + 10):
            u = mpmath.mpf(u)
            total = mpmath.mpf(0)
            for power, rate, frequency, kind, c in self.rows:
                value = c * u**power * mpmath.exp(rate * u)
                if frequency != 0:
                    value *= mpmath.cos(frequency * u) if kind == COS else mpmath.sin(frequency * u)
                total += value
            return total

    def evaluate_float(self, grid):
        """Fast float64 evaluation on a numpy grid (for bracketing only)."""
        import numpy

        grid = numpy.asarray(grid, dtype=float)
        total = numpy.zeros_like(grid)
        for power, rate, frequency, kind, c in self.rows:
            value = float(c) * grid**power * numpy.exp(float(rate) * grid)
            if frequency != 0:
                trig = numpy.cos if kind == COS else numpy.sin
                value = value * trig(float(frequency) * grid)
            total = total + value
        return total

    def derivative(self) -> NumericExponentialPolynomial:
        rows = []
        for power, rate, frequency, kind, c in self.rows:
            if power > 0:
                rows.append((power - 1, rate, frequency, kind, c * power))
            if _nonzero(rate):
                rows.append((power, rate, frequency, kind, c * rate))
            if _nonzero(frequency):
                other = SIN if kind == COS else COS
                sign = -1 if kind == COS else 1
                rows.append((power, rate, frequency, other, sign * c * frequency))
        return NumericExponentialPolynomial(tuple(rows), self.digits)

    def fastest_scale(self) -> float:
        """The shortest time scale among the modes: a period or a decay time."""
        return fastest_time_scale((rate, frequency) for _p, rate, frequency, _k, _c in self.rows)


def _nonzero(number) -> bool:
    """number != 0, for an mpmath real by its (sign, mantissa, exponent, bits) without
    mpmath's general comparison (the rows of a long history ask it hundreds of thousands
    of times)."""
    if type(number) is mpmath.mpf:
        return number._mpf_ != fzero
    return number != 0


def fastest_time_scale(modes: Iterable[tuple[object, object]]) -> float:
    """The shortest period 2π/|ω| or decay time 1/|σ| among (σ, ω) pairs, as a float; a rate
    that is not zero but underflows to 0.0 as a float (5e-601) is a time scale past the float
    range, inf, not a division by zero."""
    scale = math.inf
    for rate, frequency in modes:
        f, r = abs(float(frequency)), abs(float(rate))
        if f:
            scale = min(scale, 2 * math.pi / f)
        if r:
            scale = min(scale, 1 / r)
    return scale


def _trig_product(a: BasisTerm, b: BasisTerm) -> list[tuple[str, sympy.Expr, sympy.Expr]]:
    """cos/sin(αu)·cos/sin(βu) as a sum of cos/sin((α ± β)u) with weights."""
    half = sympy.Rational(1, 2)
    p, q = a.frequency, b.frequency
    if p == 0:
        return [(b.kind, q, sympy.S.One)]
    if q == 0:
        return [(a.kind, p, sympy.S.One)]
    if a.kind == COS and b.kind == COS:
        return [(COS, p - q, half), (COS, p + q, half)]
    if a.kind == SIN and b.kind == SIN:
        return [(COS, p - q, half), (COS, p + q, -half)]
    if a.kind == SIN:   # sin p cos q
        return [(SIN, p + q, half), (SIN, p - q, half)]
    return [(SIN, p + q, half), (SIN, q - p, half)]   # cos p sin q


class NumericCarrier:
    """Carries exponential polynomials across breakpoints in mpmath arithmetic.

    Long load histories would make exact coefficients swell with every shift; this does the
    same re-expansion as ``ExponentialPolynomial.shifted`` with numbers of ``digits``
    significant digits (plus guard digits), which keeps the work per breakpoint constant.
    """

    def __init__(self, digits: int = 30) -> None:
        self.digits = digits
        self._parameters: dict[BasisTerm, tuple] = {}
        self._numbers: dict[sympy.Expr, object] = {}     # the steps of a table repeat
        self._factors: dict[tuple, tuple] = {}           # e^(σd), cos ωd, sin ωd by (mode, d)
        with mpmath.workdps(digits + 15):                # a sum's rounding residue (add)
            self._residue = mpmath.mpf(10) ** (-(digits + 12))

    def number(self, value: sympy.Expr):
        kept = self._numbers.get(value)
        if kept is None:
            with mpmath.workdps(self.digits + 15):
                kept = mpmath.mpf(sympy.Float(sympy.N(value, self.digits + 15),
                                              self.digits + 15)._mpf_)
            if len(self._numbers) < 4096:
                self._numbers[value] = kept
        return kept

    def _mode_numbers(self, mode: BasisTerm) -> tuple:
        if mode not in self._parameters:
            self._parameters[mode] = (self.number(mode.rate), self.number(mode.frequency))
        return self._parameters[mode]

    def numeric_terms(self, polynomial: ExponentialPolynomial) -> dict[BasisTerm, object]:
        return {mode: self.number(c) for mode, c in polynomial.terms.items()}

    def shifted(self, terms: dict[BasisTerm, object], delay) -> dict[BasisTerm, object]:
        if delay == 0:
            return dict(terms)
        result: dict[BasisTerm, object] = {}
        with mpmath.workdps(self.digits + 15):
            for mode, coefficient in terms.items():
                exponential, c, s_ = self._shift_factors(mode, delay)
                growth = coefficient * exponential
                if mode.frequency == 0:
                    trig_parts = ((COS, 1),)
                else:
                    trig_parts = ((COS, c), (SIN, -s_)) if mode.kind == COS else ((SIN, c), (COS, s_))
                for j in range(mode.power + 1):
                    # (growth·1 is growth: the term of the power itself skips that product)
                    scaled = growth if j == mode.power else \
                        growth * (comb(mode.power, j) * delay ** (mode.power - j))
                    for kind, factor in trig_parts:
                        key = BasisTerm(j, mode.rate, mode.frequency, kind)
                        result[key] = result.get(key, 0) + scaled * factor
        return result

    def _shift_factors(self, mode: BasisTerm, delay) -> tuple:
        """e^(σ·delay), cos(ω·delay), sin(ω·delay) of a mode (at the carrier's digits), once
        per mode and delay: a table sampled at a fixed step shifts by the same delay each time."""
        key = (mode.rate, mode.frequency, delay)
        kept = self._factors.get(key)
        if kept is None:
            rate, frequency = self._mode_numbers(mode)
            kept = (mpmath.exp(rate * delay), None, None) if mode.frequency == 0 else \
                (mpmath.exp(rate * delay), mpmath.cos(frequency * delay),
                 mpmath.sin(frequency * delay))
            if len(self._factors) >= 4096:
                self._factors.clear()
            self._factors[key] = kept
        return kept

    def add(self, terms: dict[BasisTerm, object], other: dict[BasisTerm, object], scale) -> dict[BasisTerm, object]:
        """terms + scale·other; a sum that cancels to the guard digits' rounding level (an
        ending load, a slope back to zero) is rounding residue and is dropped."""
        result = dict(terms)
        with mpmath.workdps(self.digits + 15):
            residue = self._residue
            for mode, c in other.items():
                before, added = result.get(mode, 0), scale * c
                total = before + added
                if total != 0 and abs(total) <= residue * (abs(before) + abs(added)):
                    result.pop(mode, None)
                else:
                    result[mode] = total
        return result

    def exponential_polynomial(self, terms: dict[BasisTerm, object]) -> ExponentialPolynomial:
        """Back to sympy, coefficients as ``digits``-significant-digit Floats."""
        return ExponentialPolynomial({mode: sympy.Float(c, self.digits)     # modes are distinct
                                      for mode, c in terms.items() if c != 0})

    def numeric_polynomial(self, terms: dict[BasisTerm, object]) -> NumericExponentialPolynomial:
        rows = []
        for mode, c in terms.items():
            rate, frequency = self._mode_numbers(mode)
            rows.append((mode.power, rate, frequency, mode.kind, c))
        return NumericExponentialPolynomial(tuple(rows), self.digits)

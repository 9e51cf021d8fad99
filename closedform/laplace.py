"""The Laplace-transform stage: transform table, poles, partial fractions and inversion.

Every load term is a coefficient times a shifted basis function g(t − a)·H(t − a) (or an
impulse), and every basis function has a rational transform. The response to one term is
therefore the inverse of e^(−a s) · L{g}(s) / P(s): partial fractions over the poles of
the system and of the load (merged where they coincide — that is exact resonance), then
the table read backwards and the shift theorem. Each step is recorded with its source.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from math import comb, factorial

import sympy

from .basis import COS, SIN, BasisTerm, ExponentialPolynomial
from .errors import DerivationError

s = sympy.Symbol("s")

# Sources. Abramowitz & Stegun, Handbook of Mathematical Functions (NBS AMS 55, 1964),
# ch. 29 "Laplace Transforms" (numbers checked against the scanned pages 1021-1023).
AS = "Abramowitz & Stegun, Handbook of Mathematical Functions (1964)"
SOURCES = {
    "step": f"{AS}, 29.3.1",
    "power": f"{AS}, 29.3.2-29.3.3",
    "exponential": f"{AS}, 29.3.8-29.3.10",
    "sine": f"{AS}, 29.3.15",
    "cosine": f"{AS}, 29.3.16",
    "t-sine": f"{AS}, 29.3.22",
    "t-cosine": f"{AS}, 29.3.24",
    "damped sine": f"{AS}, 29.3.26",
    "damped cosine": f"{AS}, 29.3.27",
    "frequency shift": f"{AS}, 29.2.12",
    "time shift": f"{AS}, 29.2.13",
    # where no book section was checked, the identity itself is cited
    "multiplication by t^n": "multiplication-by-t identity, L{t^n f(t)} = (−1)^n F⁽ⁿ⁾(s)",
    "impulse": "sifting property of the Dirac delta, L{δ(t − a)} = e^(−as)",
    "derivatives": "transform of derivatives, L{f′} = s F(s) − f(0) (integration by parts)",
    "heaviside expansion": f"{AS}, 29.2.20-29.2.21 (Heaviside expansion theorem)",
}


@dataclass(frozen=True)
class Pole:
    """A real pole ``rate`` (frequency 0) or a conjugate pair rate ± i·frequency (frequency > 0)."""

    rate: sympy.Expr
    frequency: sympy.Expr
    multiplicity: int = 1

    @property
    def is_pair(self) -> bool:
        return self.frequency != 0

    def factor(self) -> sympy.Expr:
        """The real polynomial factor this pole contributes to a denominator (once)."""
        if self.is_pair:
            return (s - self.rate) ** 2 + self.frequency**2
        return s - self.rate

    def root(self) -> sympy.Expr:
        return self.rate + sympy.I * self.frequency


@dataclass(frozen=True)
class RationalTransform:
    """numerator(s) / (lead · Π factor(pole)^multiplicity), with its poles known exactly."""

    numerator: sympy.Expr
    poles: tuple[Pole, ...]
    lead: sympy.Expr = sympy.S.One

    def expression(self) -> sympy.Expr:
        denominator = self.lead * sympy.Mul(*[p.factor() ** p.multiplicity for p in self.poles])
        return self.numerator / denominator

    def divided_by(self, lead: sympy.Expr, poles: Sequence[Pole]) -> RationalTransform:
        """This transform over a characteristic polynomial lead·Π(pole factors)."""
        return RationalTransform(self.numerator, merge_poles(self.poles, tuple(poles)),
                                 self.lead * lead)


@dataclass(frozen=True)
class TablePair:
    """One transform pair as used: what it is called, the pair in LaTeX, and its source."""

    name: str
    time_function: sympy.Expr
    transform: sympy.Expr
    source: str


def same_value(a: sympy.Expr, b: sympy.Expr) -> bool:
    """Exact equality of two pole parameters, cheap where the numbers already differ."""
    difference = sympy.sympify(a - b)
    if difference == 0:
        return True
    if not difference.free_symbols:
        estimate = sympy.N(difference, 50)
        scale = max(abs(sympy.N(a, 50)), abs(sympy.N(b, 50)), sympy.Float(1e-300))
        if estimate.is_number and abs(estimate) > scale * sympy.Float("1e-40"):
            return False
    return sympy.simplify(difference) == 0


def merge_poles(first: Sequence[Pole], second: Sequence[Pole]) -> tuple[Pole, ...]:
    """Union of two pole lists; coinciding poles add their multiplicities (resonance)."""
    merged: list[Pole] = list(first)
    for pole in second:
        for i, existing in enumerate(merged):
            if same_value(existing.rate, pole.rate) and same_value(existing.frequency, pole.frequency):
                merged[i] = Pole(existing.rate, existing.frequency,
                                 existing.multiplicity + pole.multiplicity)
                break
        else:
            merged.append(pole)
    return tuple(merged)


def transform_of_mode(mode: BasisTerm) -> tuple[RationalTransform, TablePair]:
    """L{u^k e^(σu) cos|sin(ωu)} as an exact rational function with its pole.

    With z = s − σ:  L{u^k e^(σu) e^(iωu)} = k!/(z − iω)^(k+1) = k!(z + iω)^(k+1)/(z² + ω²)^(k+1),
    whose real and imaginary parts give the cosine and sine pairs.
    """
    k, sigma, omega = mode.power, mode.rate, mode.frequency
    z = s - sigma
    if omega == 0:
        numerator = sympy.Integer(factorial(k))
    else:
        # Binomial expansion of (z + iω)^(k+1): even powers of iω are real, odd imaginary.
        parity = 0 if mode.kind == COS else 1
        numerator = sympy.Integer(factorial(k)) * sympy.Add(*[
            comb(k + 1, j) * z ** (k + 1 - j) * omega**j * (-1) ** (j // 2)
            for j in range(k + 2) if j % 2 == parity])
    transform = RationalTransform(sympy.expand(numerator), (Pole(sigma, omega, k + 1),))
    u = sympy.Symbol("u")
    pair = TablePair(_pair_name(mode), mode.expression(u), transform.expression(),
                     _pair_source(mode))
    return transform, pair


def _power_name(power: int) -> str:
    return "t" if power == 1 else f"t^{power}"


def _pair_name(mode: BasisTerm) -> str:
    if mode.frequency == 0:
        if mode.rate == 0:
            return "unit step" if mode.power == 0 else (
                "unit ramp t" if mode.power == 1 else f"power t^{mode.power}")
        return "exponential" if mode.power == 0 else \
            f"{_power_name(mode.power)} times exponential"
    base = "sine" if mode.kind == SIN else "cosine"
    if mode.rate != 0:
        base = "damped " + base
    return base if mode.power == 0 else f"{_power_name(mode.power)} times {base}"


def _pair_source(mode: BasisTerm) -> str:
    k, sigma, omega = mode.power, mode.rate, mode.frequency
    if omega == 0:
        if sigma == 0:
            return SOURCES["step"] if k == 0 else SOURCES["power"]
        return SOURCES["exponential"]
    name = "sine" if mode.kind == SIN else "cosine"
    if k == 0:
        return SOURCES["damped " + name] if sigma != 0 else SOURCES[name]
    if k == 1 and sigma == 0:
        return SOURCES["t-" + name]
    parts = [SOURCES[name], SOURCES["multiplication by t^n"]]
    if sigma != 0:
        parts.append(SOURCES["frequency shift"])
    return "; ".join(parts)


@dataclass(frozen=True)
class PartialFraction:
    """One term c / (s − r)^j of the expansion (r complex for a pair: the conjugate is implied)."""

    coefficient: sympy.Expr
    root: sympy.Expr
    order: int
    is_pair: bool

    def expression(self) -> sympy.Expr:
        term = self.coefficient / (s - self.root) ** self.order
        if self.is_pair:
            term = term + sympy.conjugate(self.coefficient) / (s - sympy.conjugate(self.root)) ** self.order
        return term


@dataclass(frozen=True)
class Inversion:
    """The inverse transform of one rational function, with the expansion it went through."""

    transform: RationalTransform
    fractions: tuple[PartialFraction, ...]
    time_function: ExponentialPolynomial


def _tidy(expr: sympy.Expr) -> sympy.Expr:
    """Cheap exact tidying of a coefficient (no expensive general simplify)."""
    expr = sympy.radsimp(sympy.cancel(sympy.together(expr)))
    if expr.free_symbols:
        expr = sympy.factor_terms(sympy.simplify(expr))
    return expr


def invert(transform: RationalTransform, tidy=_tidy) -> Inversion:
    """Inverse Laplace transform by the Heaviside expansion over known poles.

    For a pole r of multiplicity m, the coefficient of 1/(s − r)^j is
    c_j = G^(m−j)(r)/(m − j)! with G(s) = (s − r)^m F(s); its time function is
    c_j u^(j−1) e^(ru)/(j − 1)!. Conjugate pairs are folded into real cos/sin terms:
    2Re(c e^(iωu)) = 2Re(c) cos ωu − 2Im(c) sin ωu.

    The pole parameters are replaced by plain real symbols while the residues are worked
    out, so that real and imaginary parts separate cleanly whatever the parameters are.
    """
    stand_ins: dict[sympy.Symbol, sympy.Expr] = {}
    poles = []
    for i, pole in enumerate(transform.poles):
        rate = sympy.Dummy(f"sigma{i}", real=True) if pole.rate != 0 else sympy.S.Zero
        frequency = sympy.Dummy(f"omega{i}", positive=True) if pole.is_pair else sympy.S.Zero
        if rate != 0:
            stand_ins[rate] = pole.rate
        if pole.is_pair:
            stand_ins[frequency] = pole.frequency
        poles.append(Pole(rate, frequency, pole.multiplicity))

    def back(value: sympy.Expr) -> sympy.Expr:
        return tidy(sympy.sympify(value).xreplace(stand_ins))

    fractions: list[PartialFraction] = []
    pairs: list[tuple[BasisTerm, sympy.Expr]] = []
    for original, pole in zip(transform.poles, poles):
        root = pole.root()
        others = [p.factor() ** p.multiplicity for p in poles if p is not pole]
        if pole.is_pair:
            others.append((s - sympy.conjugate(root)) ** pole.multiplicity)
        reduced = transform.numerator / (transform.lead * sympy.Mul(*others))
        m = pole.multiplicity
        for j in range(m, 0, -1):
            derivative = sympy.diff(reduced, s, m - j) if m > j else reduced
            value = sympy.together(derivative.subs(s, root)) / factorial(m - j)
            if pole.is_pair:
                value = sympy.expand_complex(value)
                real, imaginary = back(sympy.re(value)), back(sympy.im(value))
                coefficient = real + sympy.I * imaginary
                scale = sympy.Integer(2) / factorial(j - 1)
                pairs.append((BasisTerm(j - 1, original.rate, original.frequency, COS), scale * real))
                pairs.append((BasisTerm(j - 1, original.rate, original.frequency, SIN),
                              -scale * imaginary))
            else:
                coefficient = back(value)
                pairs.append((BasisTerm(j - 1, original.rate, sympy.S.Zero, COS),
                              coefficient / factorial(j - 1)))
            if coefficient != 0:
                fractions.append(PartialFraction(coefficient, original.root(), j, pole.is_pair))
    result = ExponentialPolynomial.from_terms(pairs)
    if result.is_zero() and transform.numerator != 0:
        raise DerivationError(f"inverse transform of {transform.expression()} came out empty")
    return Inversion(transform, tuple(fractions), result)


def initial_value_numerator(coefficients: Sequence[sympy.Expr],
                            initial: Sequence[sympy.Expr]) -> sympy.Expr:
    """Q(s) in X(s) = [F(s) + Q(s)]/P(s) for a_n x^(n) + … + a_0 x = f.

    From L{x^(j)} = s^j X − Σ_{i<j} s^(j−1−i) x^(i)(0):  Q(s) = Σ_j a_j Σ_{i<j} s^(j−1−i) x^(i)(0).
    ``coefficients`` run from a_n down to a_0.
    """
    order = len(coefficients) - 1
    total = sympy.S.Zero
    for j in range(1, order + 1):
        a_j = coefficients[order - j]
        for i in range(j):
            total += a_j * s ** (j - 1 - i) * initial[i]
    return sympy.expand(total)

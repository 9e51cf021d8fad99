"""Long histories read into numbers: each piece parsed once into its
exp·cos/sin·polynomial terms, the load evaluated with numbers from each load's own definition."""

from __future__ import annotations

import bisect
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import mpmath
import sympy

from ..case import TAU, Case, LoadSpec
from .base import EXACT_DIGITS, T, has_float, sum_terms, to_mpf
from .compiler import compile_function
from .model import Equation, Impulse, equation_of, local_shape

# ----------------------------------------------------------------------------- long histories
#
# A table load with hundreds of rows gives hundreds of pieces. Checking each of them through
# sympy (derivatives, substitution, compilation) costs far more than the derivation, so
# beyond LONG_HISTORY pieces the same checks run on numbers:
#
# * every piece is read once into its exp·cos/sin·polynomial structure, Σ Re[C·P(v)·e^{λv+μ}]
#   (P a product of linear factors, λ and μ complex where cos/sin appear), by a small
#   parser of its sympy expression; derivatives then follow from Leibniz's rule,
#   (P e^{λv})⁽ⁱ⁾ = e^{λv} Σ_r C(i, r)·λ^{i−r}·P⁽ʳ⁾ (no sympy differentiation). A piece
#   outside that structure is differentiated by sympy as for short histories;
# * a piece that carries its form in its own local time u = t − start (``piece.local``,
#   Σ c·mode(u): the coefficient table the sheet prints for long histories) is read in that
#   form, each distinct mode through its own ``expression(u)`` once, which spares building
#   and re-substituting thousands of sympy expressions; other pieces are read through
#   ``piece.expression(t)`` as always;
# * the load is evaluated from each load's own definition with numbers (table rows as
#   linear interpolation, other shapes from the shape table), found by bisection in the
#   sorted breakpoints;
# * the residual and the breakpoint conditions are reported as one check each, with the
#   worst figure and where it occurs; the integration is compared at a spread of at most
#   LONG_SAMPLES points, one or more inside every load interval, never on a breakpoint.

LONG_HISTORY = 40                  # more pieces than this: aggregated checks, numeric route
LONG_SAMPLES = 2000                # comparison points of the integration, at most
LONG_POINT_FRACTIONS = ("0.07", "0.41", "0.77")   # residual points per interval
PARSE_DIGITS = EXACT_DIGITS + 20   # numbers of the parsed pieces and loads
LOCAL_TIME = sympy.Dummy("u", real=True)   # a piece's local time
_FALLING = [[math.perm(i, r) for r in range(i + 1)] for i in range(8)]   # i!/(i−r)!


with mpmath.workdps(PARSE_DIGITS):
    _SAME = mpmath.mpf("1e-30")        # same_time's tolerance, made once


def _close(a: mpmath.mpf, b: mpmath.mpf, scale: mpmath.mpf) -> bool:
    """same_time for the long route (the tolerance made once, not per call)."""
    return abs(a - b) <= _SAME * max(abs(a), abs(b), scale)


class OutsideStructure(Exception):
    """The expression is not a sum of C·polynomial·exp·cos/sin terms of linear arguments."""


@dataclass(frozen=True)
class _Term:
    """coefficient · Π (s·v + q)^k · e^{rate·v + offset}; the real part of it unless ``real``."""

    coefficient: Any
    factors: tuple[tuple[mpmath.mpf, mpmath.mpf, int], ...]
    rate: Any
    offset: Any
    real: bool

    def times(self, other: _Term) -> list[_Term]:
        factors = self.factors + other.factors
        if self.real or other.real:
            return [_Term(self.coefficient * other.coefficient, factors, self.rate + other.rate,
                          self.offset + other.offset, self.real and other.real)]
        # Re(z₁)·Re(z₂) = ½ Re(z₁ z₂) + ½ Re(z₁ z̄₂)
        half = mpmath.mpf(1) / 2
        return [_Term(half * self.coefficient * other.coefficient, factors,
                      self.rate + other.rate, self.offset + other.offset, False),
                _Term(half * self.coefficient * mpmath.conj(other.coefficient), factors,
                      self.rate + mpmath.conj(other.rate), self.offset + mpmath.conj(other.offset),
                      False)]


def _constant_term(value: Any) -> _Term:
    return _Term(value, (), mpmath.mpf(0), mpmath.mpf(0), True)


class Parser:
    """Reads sympy expressions of one variable into _Term lists (numbers at PARSE_DIGITS);
    keeps what it read, since the pieces of one history share most sub-expressions."""

    def __init__(self, variable: sympy.Symbol) -> None:
        self.variable = variable
        self.numbers: dict[sympy.Expr, tuple[mpmath.mpf, bool]] = {}
        self.kept: dict[sympy.Expr, tuple[list[_Term], bool]] = {}
        self.modes: dict[Any, tuple[list[_Term], bool]] = {}
        self.ready: dict[int, tuple[_Term, _Prepared]] = {}
        self.floats = False            # a 30-digit float was read (since last reset)

    def number(self, expr: sympy.Expr) -> mpmath.mpf:
        if expr.is_Float:
            self.floats = True
            return mpmath.mpf(expr._mpf_)
        if expr.is_Rational:
            return mpmath.mpf(int(expr.p)) / int(expr.q)
        if expr in self.numbers:
            number, floats = self.numbers[expr]
            self.floats = self.floats or floats
            return number
        floats = expr.has(sympy.Float)
        self.floats = self.floats or floats
        if expr.free_symbols:
            raise ValueError(f"no numeric value for {', '.join(sorted(map(str, expr.free_symbols)))}")
        value = sympy.N(expr, PARSE_DIGITS + 5)
        real, imaginary = value.as_real_imag()
        if imaginary != 0:
            raise OutsideStructure(f"{expr} is not real")
        number = mpmath.mpf(real._mpf_) if real.is_Float else mpmath.mpf(str(real))
        self.numbers[expr] = (number, floats)
        return number

    def linear(self, expr: sympy.Expr) -> tuple[mpmath.mpf, mpmath.mpf]:
        """(s, q) with expr = s·v + q."""
        if expr == self.variable:
            return mpmath.mpf(1), mpmath.mpf(0)
        if expr.is_number:
            return mpmath.mpf(0), self.number(expr)
        if expr.is_Add:
            s, q = mpmath.mpf(0), mpmath.mpf(0)
            for part in expr.args:
                ds, dq = self.linear(part)
                s, q = s + ds, q + dq
            return s, q
        if expr.is_Mul:
            s, q = mpmath.mpf(0), mpmath.mpf(1)
            for part in expr.args:
                ds, dq = self.linear(part)
                if s != 0 and ds != 0:
                    raise OutsideStructure(f"{expr} is not linear")
                s, q = s * dq + q * ds, q * dq
            return s, q
        raise OutsideStructure(f"{expr} is not linear in {self.variable}")

    def terms(self, expr: sympy.Expr) -> list[_Term]:
        with mpmath.workdps(PARSE_DIGITS):
            return self._terms(expr)

    def prepared(self, term: _Term, weights: Sequence[mpmath.mpf]) -> _Prepared:
        """_prepare(term), once per term read from a mode (kept with the term)."""
        kept = self.ready.get(id(term))
        if kept is None or kept[0] is not term:
            kept = self.ready[id(term)] = (term, _prepare(term, weights))
        return kept[1]

    def mode(self, mode: Any) -> list[_Term]:
        """The terms of ``mode.expression(u)`` (each distinct mode read once)."""
        if mode not in self.modes:
            before, self.floats = self.floats, False
            terms = self.terms(sympy.sympify(mode.expression(self.variable)))
            self.modes[mode] = (terms, self.floats)
            self.floats = before
        terms, floats = self.modes[mode]
        self.floats = self.floats or floats
        return terms

    def _terms(self, expr: sympy.Expr) -> list[_Term]:
        if expr.is_Add:
            return [term for part in expr.args for term in self._terms(part)]
        if expr.is_Mul:
            result = [_constant_term(mpmath.mpf(1))]
            for part in expr.args:
                result = [product for left in result for right in self._terms(part)
                          for product in left.times(right)]
            return result
        if expr.is_number:
            return [_constant_term(self.number(expr))]
        if expr == self.variable:
            return [_Term(mpmath.mpf(1), ((mpmath.mpf(1), mpmath.mpf(0), 1),), mpmath.mpf(0),
                          mpmath.mpf(0), True)]
        if expr in self.kept:
            result, floats = self.kept[expr]
            self.floats = self.floats or floats
            return result
        before, self.floats = self.floats, False
        result = self._function(expr)
        self.kept[expr] = (result, self.floats)
        self.floats = self.floats or before
        return result

    def _function(self, expr: sympy.Expr) -> list[_Term]:
        zero = mpmath.mpf(0)
        if expr.is_Pow:
            base, exponent = expr.args
            if not (exponent.is_Integer and 0 < exponent <= 12):
                raise OutsideStructure(f"{expr}: not a polynomial power")
            try:
                s, q = self.linear(base)
                return [_Term(mpmath.mpf(1), ((s, q, int(exponent)),), zero, zero, True)]
            except OutsideStructure:
                pass
            result = [_constant_term(mpmath.mpf(1))]
            for _ in range(int(exponent)):
                result = [product for left in result for right in self._terms(base)
                          for product in left.times(right)]
            return result
        if len(expr.args) != 1:
            raise OutsideStructure(f"{expr}: outside the exp·cos/sin·polynomial structure")
        s, q = self.linear(expr.args[0])
        i = mpmath.mpc(0, 1)
        half = mpmath.mpf(1) / 2
        if isinstance(expr, sympy.exp):
            return [_Term(mpmath.mpf(1), (), s, q, True)]
        if isinstance(expr, sympy.cos):                   # cos θ = Re e^{iθ}
            return [_Term(mpmath.mpf(1), (), i * s, i * q, False)]
        if isinstance(expr, sympy.sin):                   # sin θ = Re(−i e^{iθ})
            return [_Term(-i, (), i * s, i * q, False)]
        if isinstance(expr, (sympy.cosh, sympy.sinh)):
            sign = 1 if isinstance(expr, sympy.cosh) else -1
            return [_Term(half, (), s, q, True), _Term(sign * half, (), -s, -q, True)]
        raise OutsideStructure(f"{expr}: outside the exp·cos/sin·polynomial structure")


@lru_cache(maxsize=1024)
def _powers(rate: Any, orders: int) -> tuple:
    """λ⁰ … λ^orders at PARSE_DIGITS (the pieces of one history share their λ)."""
    with mpmath.workdps(PARSE_DIGITS):
        return tuple(rate ** i for i in range(orders + 1))


@dataclass(frozen=True)
class _Prepared:
    """A term made ready for points, per derivative order i (``plain``) and per order with
    a_i ≠ 0 times a_i (``weighted``, for the residual):

    * ``kind`` "exp": C·λ^i, to multiply by e^{λv+μ} (pairs (real, imaginary) where the
      real part is taken);
    * ``kind`` "poly" (no exponential): the coefficients of the i-th derivative of the
      polynomial, lowest power first;
    * ``kind`` "general" (polynomial factors and an exponential): C, the λ^i, the factors.
    """

    kind: str
    exponent: tuple | None
    real: bool
    plain: list | None
    weighted: list | None
    coefficient: Any = None
    powers: tuple = ()
    factors: tuple = ()


def _prepare(term: _Term, weights: Sequence[mpmath.mpf]) -> _Prepared:
    orders = len(weights) - 1
    exponent = (term.rate, term.offset) if term.rate != 0 or term.offset != 0 else None
    with mpmath.workdps(PARSE_DIGITS):
        powers = _powers(term.rate, orders)
        if term.factors and exponent is not None:
            return _Prepared("general", exponent, term.real, None, None, term.coefficient, powers,
                             term.factors)
        if term.factors:                       # C·Π(s·v + q)^k, expanded; then differentiated
            coefficients = [term.coefficient]
            for s, q, k in term.factors:
                for _ in range(k):
                    grown = [c * q for c in coefficients] + [mpmath.mpf(0)]
                    for r, c in enumerate(coefficients):
                        grown[r + 1] += c * s
                    coefficients = grown
            plain = []
            for _ in range(orders + 1):
                plain.append(coefficients or [mpmath.mpf(0)])
                coefficients = [r * c for r, c in enumerate(coefficients)][1:]
            weighted = [[a * c for c in row] for a, row in zip(weights, plain) if a != 0]
            return _Prepared("poly", None, True, plain, weighted)
        plain = [term.coefficient * power for power in powers]
        weighted = [a * c for a, c in zip(weights, plain) if a != 0]
        if not term.real:
            plain = [(mpmath.re(c), mpmath.im(c)) for c in plain]
            weighted = [(mpmath.re(c), mpmath.im(c)) for c in weighted]
    return _Prepared("exp", exponent, term.real, plain, weighted)


class _Smooth:
    """A piece as Σ scale·term (prepared terms) in v = t − origin: the values of each term's
    derivatives at a point, for one exponential per distinct λ and a few multiplications
    per term."""

    def __init__(self, entries: Sequence[tuple[mpmath.mpf, _Prepared]], origin: mpmath.mpf,
                 floats: bool, weights: Sequence[mpmath.mpf]) -> None:
        self.origin = origin
        self.floats = floats
        self.weights = list(weights)                    # a_0 … a_n
        self.nonzero = sum(1 for a in weights if a != 0)
        self.exponents: list[tuple[Any, Any]] = []      # distinct (λ, μ)
        slots: dict[tuple, int] = {}
        self.entries: list[tuple] = []     # (prepared, slot, scale·plain, scale·weighted, scale)
        with mpmath.workdps(PARSE_DIGITS):
            for scale, prepared in entries:
                if scale == 0:
                    continue
                slot = None
                if prepared.exponent is not None:
                    slot = slots.get(prepared.exponent)
                    if slot is None:
                        slot = slots[prepared.exponent] = len(self.exponents)
                        self.exponents.append(prepared.exponent)
                plain = weighted = None
                if prepared.kind == "poly":
                    plain = [[scale * c for c in row] for row in prepared.plain]
                    weighted = [[scale * c for c in row] for row in prepared.weighted]
                elif prepared.kind == "exp" and prepared.real:
                    plain = [scale * c for c in prepared.plain]
                    weighted = [scale * c for c in prepared.weighted]
                elif prepared.kind == "exp":
                    plain = [(scale * x, scale * y) for x, y in prepared.plain]
                    weighted = [(scale * x, scale * y) for x, y in prepared.weighted]
                self.entries.append((prepared, slot, plain, weighted, scale))

    def terms_at(self, time: mpmath.mpf, orders: int) -> list[list[mpmath.mpf]]:
        """[[d^i/dt^i of each term at ``time``] for i = 0 … orders], working precision."""
        return self._evaluate(time, orders, False)

    def residual_terms(self, time: mpmath.mpf) -> list[mpmath.mpf]:
        """a_i · d^i/dt^i of each term, for every i with a_i ≠ 0 (one list)."""
        return [v for values in self._evaluate(time, len(self.weights) - 1, True) for v in values]

    def _evaluate(self, time: mpmath.mpf, orders: int, weighted: bool) -> list[list[mpmath.mpf]]:
        v = time - self.origin
        exponentials = []
        for rate, offset in self.exponents:
            value = mpmath.exp(rate * v + offset) if offset != 0 else mpmath.exp(rate * v)
            exponentials.append((value.real, value.imag) if isinstance(value, mpmath.mpc) else value)
        count = self.nonzero if weighted else orders + 1
        result: list[list[mpmath.mpf]] = [[] for _ in range(count)]
        for prepared, slot, plain, scaled, scale in self.entries:
            constants = scaled if weighted else plain
            if prepared.kind == "poly":        # Horner on the i-th derivative's coefficients
                for i in range(count):
                    row = constants[i]
                    total = row[-1]
                    for c in row[-2::-1]:
                        total = total * v + c
                    result[i].append(total)
            elif prepared.kind == "exp":       # C·e^{λv+μ}: the i-th derivative is C·λ^i·e^{…}
                if slot is None:
                    for i in range(count):
                        result[i].append(constants[i] if prepared.real else constants[i][0])
                elif prepared.real:
                    exponential = exponentials[slot]
                    for i in range(count):
                        result[i].append(constants[i] * exponential)
                else:
                    re, im = exponentials[slot]
                    for i in range(count):
                        c_re, c_im = constants[i]
                        result[i].append(c_re * re - c_im * im)
            else:                              # Leibniz: (P e^{λv})⁽ⁱ⁾ = e^{λv} Σ C(i,r) λ^{i−r} P⁽ʳ⁾
                self._general(prepared, exponentials[slot], scale, v, orders, weighted, result)
        return result

    def _general(self, prepared: _Prepared, exponential: Any, scale: mpmath.mpf, v: mpmath.mpf,
                 orders: int, weighted: bool, result: list[list[mpmath.mpf]]) -> None:
        if not prepared.real:
            exponential = mpmath.mpc(*exponential)
        powers = prepared.powers
        top = len(self.weights) - 1 if weighted else orders
        taylor = [mpmath.mpf(1)]               # P(v + h) = Σ taylor[r]·h^r
        for s, q, k in prepared.factors:
            value = s * v + q
            for _ in range(k):
                grown = [c * value for c in taylor] + [mpmath.mpf(0)]
                for r, c in enumerate(taylor):
                    grown[r + 1] += c * s
                taylor = grown[:top + 1]
        product = scale * prepared.coefficient * exponential
        index = 0
        for i in range(top + 1):
            if weighted and self.weights[i] == 0:
                continue
            total = taylor[0] * powers[i]
            for r in range(1, min(i, len(taylor) - 1) + 1):
                total += _FALLING[i][r] * powers[i - r] * taylor[r]
            value = product * total
            if not prepared.real:
                value = value.real
            result[index].append(self.weights[i] * value if weighted else value)
            index += 1


class _Differentiated:
    """A piece outside the parsed structure: sympy derivatives, compiled (as for short
    histories), in v = t − origin."""

    def __init__(self, expr: sympy.Expr, variable: sympy.Symbol, origin: mpmath.mpf,
                 weights: Sequence[mpmath.mpf]) -> None:
        self.origin = origin
        self.floats = has_float(expr)
        self.weights = list(weights)
        derivatives = [expr]
        for _ in range(len(weights) - 1):
            derivatives.append(sympy.diff(derivatives[-1], variable))
        self.functions = [compile_function(list(sum_terms(d)), variable) for d in derivatives]

    def terms_at(self, time: mpmath.mpf, orders: int) -> list[list[mpmath.mpf]]:
        v = time - self.origin
        return [self.functions[i](v) for i in range(orders + 1)]

    def residual_terms(self, time: mpmath.mpf) -> list[mpmath.mpf]:
        values = self.terms_at(time, len(self.weights) - 1)
        return [a * v for a, terms in zip(self.weights, values) if a != 0 for v in terms]


def long_number(value: sympy.Expr) -> mpmath.mpf:
    """A real number at PARSE_DIGITS (exact rationals directly, anything else through sympy)."""
    return _long_number_kept(sympy.sympify(value))


@lru_cache(maxsize=1 << 16)
def _long_number_kept(value: sympy.Expr) -> mpmath.mpf:
    with mpmath.workdps(PARSE_DIGITS):
        if value.is_Rational:
            return mpmath.mpf(int(value.p)) / int(value.q)
        if value.is_Float:
            return +mpmath.mpf(value._mpf_)
        return +to_mpf(value, None, PARSE_DIGITS)


@dataclass
class _LongPiece:
    start: sympy.Expr
    end: sympy.Expr | None
    lo: mpmath.mpf
    function: Any                  # _Smooth or _Differentiated


@dataclass(frozen=True)
class Branch:
    """One branch of one occurrence of a load, with numbers: on start ≤ t < end the load is
    Σ poly[j]·(t − origin)^j, or function(t − origin) where it is not a polynomial."""

    load: str
    start: mpmath.mpf
    end: mpmath.mpf
    origin: mpmath.mpf
    poly: tuple[mpmath.mpf, ...] | None
    function: Callable | None
    rate: mpmath.mpf | None

    def value(self, time: mpmath.mpf) -> mpmath.mpf:
        tau = time - self.origin
        if self.poly is None:
            return self.function(tau)[0]
        total = self.poly[-1]
        for c in self.poly[-2::-1]:
            total = total * tau + c
        return total

    def derivatives(self, time: mpmath.mpf, count: int) -> list[mpmath.mpf]:
        """load, load', … (``count`` of them) at ``time`` (polynomial branches)."""
        tau = time - self.origin
        coefficients = list(self.poly)
        values = []
        for _ in range(count):
            values.append(mpmath.polyval(coefficients[::-1], tau) if coefficients else mpmath.mpf(0))
            coefficients = [j * c for j, c in enumerate(coefficients)][1:]
        return values


def numeric_branches(loads: Sequence[LoadSpec]) -> tuple[list[Branch], list[Impulse]]:
    """The loads from their own definitions (the shape table; table rows interpolated)."""
    branches: list[Branch] = []
    impulses: list[Impulse] = []
    infinity = mpmath.inf
    for load in loads:
        local: list[tuple] = []                 # (from, to, origin offset, poly, function, rate)
        if load.shape == "table":
            points = [(long_number(t), long_number(v)) for t, v in load.points]
            with mpmath.workdps(PARSE_DIGITS):
                for (t0, v0), (t1, v1) in zip(points, points[1:]):
                    if t1 == t0:
                        continue                               # a jump: two rows at one time
                    local.append((t0, t1, t0, (v0, (v1 - v0) / (t1 - t0)), None, None))
            kicks: list = []
        else:
            shape_branches, kicks = local_shape(load)
            for lo, hi, value, rate in shape_branches:
                value = sympy.sympify(value)
                if value.free_symbols - {TAU}:
                    raise ValueError(f"no numeric value for {value}")
                top = infinity if hi is None else long_number(hi)
                if value.is_polynomial(TAU):
                    poly = tuple(long_number(c) for c in reversed(sympy.Poly(value, TAU).all_coeffs()))
                    local.append((long_number(lo), top, mpmath.mpf(0), poly, None, None))
                else:
                    local.append((long_number(lo), top, mpmath.mpf(0), None,
                                  compile_function([value], TAU), long_number(rate)))
        for start in load.starts():
            origin = long_number(start)
            with mpmath.workdps(PARSE_DIGITS):
                for lo, hi, offset, poly, function, rate in local:
                    branches.append(Branch(load.key, origin + lo, origin + hi, origin + offset,
                                            poly, function, rate))
            for at, size in kicks:
                impulses.append(Impulse(load.key, start + at, size))
    return branches, impulses


class NumericLoads:
    """The load history with numbers: sorted breakpoints and, for each elementary interval
    between two of them, the branches acting there (found by bisection)."""

    long_history = True        # the integrator shares steps of equal length, sums plainly

    def __init__(self, branches: list[Branch], impulses: list[tuple[mpmath.mpf, mpmath.mpf]],
                 until: mpmath.mpf) -> None:
        with mpmath.workdps(PARSE_DIGITS):
            self._build(branches, impulses, until)

    def _build(self, branches: list[Branch], impulses: list[tuple[mpmath.mpf, mpmath.mpf]],
               until: mpmath.mpf) -> None:
        self.until = until
        times = sorted([b.start for b in branches] + [b.end for b in branches if b.end != mpmath.inf]
                       + [at for at, _ in impulses])
        self.breakpoints: list[mpmath.mpf] = []
        for time in times:
            if not self.breakpoints or not _close(time, self.breakpoints[-1], until):
                self.breakpoints.append(time)
        cuts = self.breakpoints
        self.shadow = [float(time) for time in cuts]
        middles = ([cuts[0] - 1] if cuts else [mpmath.mpf(0)]) + \
            [(x + y) / 2 for x, y in zip(cuts, cuts[1:])] + ([cuts[-1] + 1] if cuts else [])
        ordered = sorted(branches, key=lambda b: b.start)
        self.active: list[tuple[Branch, ...]] = []
        current: list[Branch] = []
        index = 0
        for middle in middles:
            while index < len(ordered) and ordered[index].start <= middle:
                current.append(ordered[index])
                index += 1
            current = [b for b in current if middle < b.end]
            self.active.append(tuple(current))
        self.impulses = sorted(impulses, key=lambda item: item[0])
        self.impulse_times = [at for at, _ in self.impulses]

    def position(self, time: mpmath.mpf, right: bool = True) -> int:
        """bisect_right (bisect_left if not ``right``) of ``time`` in the breakpoints: by
        floats first, then corrected with the exact comparisons."""
        points = self.breakpoints
        index = bisect.bisect_right(self.shadow, float(time))
        if right:
            while index > 0 and points[index - 1] > time:
                index -= 1
            while index < len(points) and points[index] <= time:
                index += 1
        else:
            while index > 0 and points[index - 1] >= time:
                index -= 1
            while index < len(points) and points[index] < time:
                index += 1
        return index

    def acting(self, time: mpmath.mpf) -> tuple[Branch, ...]:
        """The branches acting at ``time`` (a time inside an elementary interval)."""
        return self.active[self.position(time)]

    def inside(self, lo: mpmath.mpf, hi: mpmath.mpf) -> list[mpmath.mpf]:
        """The breakpoints strictly inside (lo, hi), not at its ends."""
        scale = max(abs(lo), abs(hi))
        first = self.position(lo)
        last = self.position(hi, right=False)
        return [time for time in self.breakpoints[first:last]
                if not _close(time, lo, scale) and not _close(time, hi, scale)]

    def kicks_at(self, time: mpmath.mpf, until: mpmath.mpf) -> list[mpmath.mpf]:
        return [size for _, size in self.near(self.impulses, self.impulse_times, time, until)]

    @staticmethod
    def near(items: list, times: list[mpmath.mpf], time: mpmath.mpf, until: mpmath.mpf) -> list:
        """The items whose time (sorted ``times``) is the same as ``time`` (to 1e-30)."""
        if not times:
            return []
        with mpmath.workdps(PARSE_DIGITS):
            reach = _SAME * max(abs(time), abs(until)) * 2
            first = bisect.bisect_left(times, time - reach)
            last = bisect.bisect_right(times, time + reach)
        return [item for item, at in zip(items[first:last], times[first:last])
                if _close(at, time, until)]

    # the integrator's view

    def cuts(self, until: mpmath.mpf) -> list[mpmath.mpf]:
        cuts = [mpmath.mpf(0)]
        for time in self.breakpoints:
            if 0 < time < until and not _close(time, cuts[-1], until) \
                    and not _close(time, until, until):
                cuts.append(+time)
        return cuts + [until]

    def on(self, lo: mpmath.mpf, hi: mpmath.mpf) -> tuple:
        acting = self.acting((lo + hi) / 2)
        if not acting:
            return ("free",)
        if all(b.poly is not None for b in acting):
            count = max(len(b.poly) for b in acting)
            values = [mpmath.fsum(column) for column in
                      zip(*[b.derivatives(lo, count) for b in acting])]
            while values and values[-1] == 0:
                values.pop()
            if not values:
                return ("free",)
            return ("polynomial", len(values) - 1, values)
        rates = [b.rate for b in acting if b.poly is None and b.rate is not None]
        return ("general", lambda time: mpmath.fsum(b.value(time) for b in acting), rates)


@dataclass
class LongProblem:
    """A numeric case with many pieces: equation, loads and pieces with numbers."""

    equation: Equation
    impulses: tuple[Impulse, ...]
    initial: tuple[sympy.Expr, ...]
    until: sympy.Expr
    pieces: list[_LongPiece]
    loads: NumericLoads
    a: list[mpmath.mpf]            # a_0 … a_n at PARSE_DIGITS
    b: mpmath.mpf

    sample_cap = LONG_SAMPLES

    def integration_loads(self) -> NumericLoads:
        return self.loads

    def piece_starts(self, dps: int) -> list[mpmath.mpf]:
        return [piece.lo for piece in self.pieces]

    def value_function(self, index: int) -> Callable[[mpmath.mpf], mpmath.mpf]:
        function = self.pieces[index].function
        return lambda time: mpmath.fsum(function.terms_at(time, 0)[0])

    def impulses_at(self, time: mpmath.mpf) -> list[Impulse]:
        """The impulses acting at ``time`` (to 1e-30 of the window)."""
        if not hasattr(self, "_kicks"):
            ordered = sorted(((long_number(i.at), i) for i in self.impulses),
                             key=lambda item: item[0])
            self._kicks = ([i for _, i in ordered], [at for at, _ in ordered],
                           long_number(self.until))
        impulses, times, until = self._kicks
        return NumericLoads.near(impulses, times, time, until)


def _read_piece(piece: Any, start: mpmath.mpf, local_parser: Parser, global_parser: Parser,
                weights: Sequence[mpmath.mpf]) -> Any:
    """A piece ready for numbers: its parsed structure (or its sympy derivatives).

    A piece that carries its local form Σ c·mode(u), u = t − start (``piece.local``: a mapping
    ``terms`` of modes, each with its own ``expression(u)``, to coefficients) is read from
    that form, each distinct mode once; else from ``piece.local.expression(u)``; else, as
    for short histories, from ``piece.expression(t)``."""
    local = getattr(piece, "local", None)
    terms = getattr(local, "terms", None)
    expr = None
    if isinstance(terms, Mapping) and all(callable(getattr(m, "expression", None)) for m in terms):
        parser, origin, variable = local_parser, start, LOCAL_TIME
        try:
            parser.floats = False
            entries = []
            with mpmath.workdps(PARSE_DIGITS):
                for mode, coefficient in terms.items():
                    c = parser.number(sympy.sympify(coefficient))
                    entries += [(c, parser.prepared(term, weights)) for term in parser.mode(mode)]
            return _Smooth(entries, origin, parser.floats, weights)
        except OutsideStructure:
            expr = sympy.Add(*[sympy.sympify(c) * m.expression(LOCAL_TIME) for m, c in terms.items()])
    elif callable(getattr(local, "expression", None)):
        parser, origin, variable = local_parser, start, LOCAL_TIME
        expr = sympy.sympify(local.expression(LOCAL_TIME))
    else:
        parser, origin, variable = global_parser, mpmath.mpf(0), T
        expr = sympy.sympify(piece.expression(T))
    try:
        parser.floats = False
        entries = [(mpmath.mpf(1), _prepare(term, weights)) for term in parser.terms(expr)]
        return _Smooth(entries, origin, parser.floats, weights)
    except OutsideStructure:
        return _Differentiated(expr, variable, origin, weights)


def is_long(case: Case, derivation: Any) -> bool:
    return not case.symbols and len(derivation.pieces) > LONG_HISTORY


def long_problem(derivation: Any) -> LongProblem:
    case: Case = derivation.case
    equation = equation_of(case.system)
    n = equation.order
    a = [long_number(equation.a(i)) for i in range(n + 1)]
    b = long_number(equation.scale)
    initial = tuple(sympy.sympify(v) for v in case.initial) if case.initial is not None \
        else (sympy.S.Zero,) * n
    if len(initial) != n:
        raise ValueError(f"{len(initial)} initial values for an equation of order {n}")
    until = sympy.sympify(derivation.window.until)
    until_number = long_number(until)
    branches, impulses = numeric_branches(case.loads)
    kicks = [(long_number(i.at), long_number(i.size)) for i in impulses]
    loads = NumericLoads(branches, kicks, until_number)
    local_parser, global_parser = Parser(LOCAL_TIME), Parser(T)
    pieces = []
    for piece in derivation.pieces:
        start = sympy.sympify(piece.start)
        end = None if piece.end is None else sympy.sympify(piece.end)
        lo = long_number(start)
        pieces.append(_LongPiece(start, end, lo, _read_piece(piece, lo, local_parser,
                                                              global_parser, a)))
    return LongProblem(equation, tuple(impulses), initial, until, pieces, loads, a, b)

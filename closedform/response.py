"""Piecewise assembly: the response as one compact expression per interval.

x(t) = x_free(t) + Σ c · k_g(t − a) · H(t − a) + Σ J · h(t − a) · H(t − a), where k_g is the
response to the basis function g and h the impulse response (both from ``laplace``). On
the interval that starts at breakpoint tᵢ every active term is written in the local time
t − tᵢ, so each piece reads "particular part + free vibration" with coefficients fixed by
the state at tᵢ. The sum is carried from one breakpoint to the next by re-expanding it
(``ExponentialPolynomial.shifted``), which keeps the work linear in the number of
breakpoints.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping, Sequence

import sympy

from .basis import ExponentialPolynomial, Mode
from .errors import CaseError
from .laplace import (SOURCES, Inversion, RationalTransform, TablePair, initial_value_numerator,
                      invert, s, transform_of_mode)
from .loads import LoadHistory
from .systems import LinearModel

t = sympy.Symbol("t", real=True)

# Above this many breakpoints exact coefficients swell (nested cos/exp of every shift);
# numeric cases then carry 30-significant-digit coefficients instead.
EXACT_BREAKPOINT_LIMIT = 16
DIGITS = 30


@dataclass(frozen=True)
class Piece:
    """The response on start ≤ t < end (end None: to the end of the window)."""

    start: sympy.Expr
    end: sympy.Expr | None
    local: ExponentialPolynomial          # in the local time t − start

    def expression(self, time: sympy.Symbol = t) -> sympy.Expr:
        """The piece in the global time, with the local time kept as (t − start)."""
        if self.start == 0:
            return self.local.expression(time)
        shift = sympy.Symbol("__local", real=True)
        return self.local.expression(shift).subs(shift, time - self.start)


@dataclass(frozen=True)
class Kernel:
    """The response of the system to one basis function g(t)·H(t) (or to δ(t))."""

    name: str
    mode: Mode | None                     # None for the impulse response
    pair: TablePair | None
    inversion: Inversion


@dataclass(frozen=True)
class Solution:
    """What the Laplace stage produced, in the order a checker reads it."""

    transform: sympy.Expr                 # X(s) with its exponential shift factors
    load_transform: sympy.Expr            # F(s)
    initial_numerator: sympy.Expr         # Q(s)
    free: Inversion | None                # Q(s)/P(s) inverted
    kernels: tuple[Kernel, ...]
    pieces: tuple[Piece, ...]
    exact: bool


# An exact numeric coefficient longer than this (sympy operation count) is carried as a
# 30-significant-digit number instead: exactness that nobody can read is not worth the cost.
EXACT_SIZE_LIMIT = 24


def coefficient_policy(exact: bool) -> Callable[[sympy.Expr], sympy.Expr]:
    if exact:
        return _tidy_exact
    return _to_digits


def _to_digits(c: sympy.Expr) -> sympy.Expr:
    if c.free_symbols or c.is_Float:
        return c
    return sympy.Float(sympy.N(c, DIGITS + 10), DIGITS)


def _tidy_exact(c: sympy.Expr) -> sympy.Expr:
    if c.is_Rational or c.is_Float:
        return c
    expanded = sympy.expand(c)
    if sympy.count_ops(expanded) < sympy.count_ops(c):
        c = expanded
    if not c.free_symbols and (c.has(sympy.Float) or sympy.count_ops(c) > EXACT_SIZE_LIMIT):
        return _to_digits(c)
    return c


def solve(model: LinearModel, history: LoadHistory, initial: Sequence[sympy.Expr] | None,
          until: sympy.Expr, *, exact: bool, ordering: Mapping[sympy.Symbol, sympy.Expr] | None
          = None) -> Solution:
    """Transform, invert and assemble the piecewise response on [0, until]."""
    tidy = coefficient_policy(exact)
    lead = model.lead
    initial = tuple(initial) if initial is not None else (sympy.S.Zero,) * model.order

    # Laplace transform of the whole problem (shown on the sheet).
    load_transform = sympy.S.Zero
    for term in history.terms:
        transform, _pair = transform_of_mode(term.mode)
        load_transform += term.coefficient * sympy.exp(-term.at * s) * transform.expression()
    for impulse in history.impulses:
        load_transform += impulse.impulse * sympy.exp(-impulse.at * s)
    q = initial_value_numerator(model.coefficients, initial)
    polynomial = model.characteristic_polynomial()
    transform = (model.input_scale * load_transform + q) / polynomial

    free = None
    if q != 0:
        free = invert(RationalTransform(q, (), sympy.S.One).divided_by(lead, model.poles))

    kernels: dict[Mode | None, Kernel] = {}
    for term in history.terms:
        if term.mode not in kernels:
            mode_transform, pair = transform_of_mode(term.mode)
            scaled = RationalTransform(mode_transform.numerator * model.input_scale,
                                       mode_transform.poles)
            kernels[term.mode] = Kernel(pair.name, term.mode, pair,
                                        invert(scaled.divided_by(lead, model.poles)))
    if history.impulses:
        pair = TablePair("unit impulse", sympy.DiracDelta(sympy.Symbol("u")), sympy.S.One,
                         SOURCES["impulse"])
        unit = RationalTransform(model.input_scale, ())
        kernels[None] = Kernel("unit impulse", None, pair, invert(unit.divided_by(lead, model.poles)))

    # Events in time order; those at or after the end of the window do not act on it.
    events: dict[sympy.Expr, list[tuple[sympy.Expr, Mode | None]]] = {}
    for term in history.terms:
        events.setdefault(term.at, []).append((term.coefficient, term.mode))
    for impulse in history.impulses:
        events.setdefault(impulse.at, []).append((impulse.impulse, None))
    times = order_times(set(events) | {sympy.S.Zero}, ordering)
    times = [time for time in times if _before(time, until, ordering)]

    pieces: list[Piece] = []
    current = free.time_function.map_coefficients(tidy) if free else ExponentialPolynomial()
    previous = sympy.S.Zero
    for i, time in enumerate(times):
        current = current.shifted(time - previous)
        for coefficient, mode in events.get(time, []):
            current = current + kernels[mode].inversion.time_function.scaled(coefficient)
        current = current.map_coefficients(tidy)
        end = times[i + 1] if i + 1 < len(times) else None
        pieces.append(Piece(time, end, current))
        previous = time
    return Solution(transform, load_transform, q, free, tuple(kernels.values()),
                    tuple(pieces), exact)


def load_pieces(history: LoadHistory, times: Sequence[sympy.Expr],
                tidy: Callable[[sympy.Expr], sympy.Expr]) -> list[ExponentialPolynomial]:
    """The (non-impulsive) load on each interval, in local time, by the same carrying."""
    events: dict[sympy.Expr, list] = {}
    for term in history.terms:
        events.setdefault(term.at, []).append(term)
    current = ExponentialPolynomial()
    previous = sympy.S.Zero
    result = []
    for time in times:
        current = current.shifted(time - previous)
        for term in events.get(time, []):
            current = current + ExponentialPolynomial.single(term.mode, term.coefficient)
        current = current.map_coefficients(tidy)
        result.append(current)
        previous = time
    return result


def _numeric_key(time: sympy.Expr, ordering: Mapping | None) -> sympy.Expr:
    value = time.subs(ordering or {})
    if value.free_symbols:
        return None
    return sympy.N(value, 40)


def order_times(times, ordering: Mapping | None = None) -> list[sympy.Expr]:
    """Breakpoints sorted exactly; with symbols, by their signs when sympy can tell, else by
    the declared values (the sheet states that the order assumed is the one of the values)."""
    remaining = list(times)
    ordered: list[sympy.Expr] = []
    while remaining:
        for candidate in remaining:
            if all(_not_after(candidate, other, ordering) for other in remaining):
                ordered.append(candidate)
                remaining.remove(candidate)
                break
        else:
            raise CaseError("the load times cannot be put in order from the declared symbols "
                            "(give the symbols values)", key="load")
    return ordered


def _not_after(a: sympy.Expr, b: sympy.Expr, ordering: Mapping | None) -> bool:
    difference = sympy.simplify(b - a)
    if difference.is_nonnegative:
        return True
    if difference.is_negative:
        return False
    numeric = _numeric_key(difference, ordering)
    if numeric is None:
        return False
    return numeric >= 0


def _before(time: sympy.Expr, until: sympy.Expr, ordering: Mapping | None) -> bool:
    difference = sympy.simplify(until - time)
    if difference.is_positive:
        return True
    if difference.is_nonpositive:
        return False
    numeric = _numeric_key(difference, ordering)
    return True if numeric is None else numeric > 0

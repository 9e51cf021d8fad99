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

import functools
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction

import sympy

from .basis import BasisTerm, ExponentialPolynomial, NumericCarrier, NumericExponentialPolynomial
from .errors import CaseError, DerivationError
from .laplace import (
    SOURCES,
    Inversion,
    RationalTransform,
    TablePair,
    initial_value_numerator,
    invert,
    s,
    transform_of_mode,
)
from .loads import LoadHistory
from .systems import LinearModel, ScalarEquation

t = sympy.Symbol("t", real=True)

# Above this many breakpoints exact coefficients swell (nested cos/exp of every shift);
# numeric cases then carry 30-significant-digit coefficients instead.
EXACT_BREAKPOINT_LIMIT = 16
DIGITS = 30
# X(s) is written out in full only for load histories of at most this many terms; longer
# ones are shown term by term through the kernels and the coefficient table.
TRANSFORM_DISPLAY_LIMIT = 40


@dataclass(frozen=True)
class Piece:
    """The response on start ≤ t < end (end None: to the end of the window)."""

    start: sympy.Expr
    end: sympy.Expr | None
    local: ExponentialPolynomial          # in the local time t − start
    numeric: NumericExponentialPolynomial | None = None   # the same at 30 digits, when carried so

    def expression(self, time: sympy.Symbol = t) -> sympy.Expr:
        """The piece in the global time, with the local time kept as (t − start)."""
        if self.start == 0:
            return self.local.expression(time)
        shift = sympy.Symbol("__local", real=True)
        return self.local.expression(shift).subs(shift, time - self.start)

    def expression_text(self) -> str:
        """``str(self.expression(t))`` in substance: sympy-readable text in the global time t.
        A piece carried in 30-digit numbers is written term by term, because building and
        printing a thousand such sympy sums would cost minutes; an exact piece is printed by
        sympy."""
        if self.numeric is None:
            return str(self.expression(t))
        u = "t" if self.start == 0 else f"(t - {self.start})"
        terms = [str(self.local.terms[mode]) + _mode_text(mode).replace("{u}", u)
                 for mode in self.local.modes()]
        return " + ".join(terms).replace("+ -", "- ") if terms else "0"


@functools.lru_cache(maxsize=4096)
def _mode_text(mode: BasisTerm) -> str:
    """The factors of a mode after its coefficient, ``{u}`` standing for the local time (the
    pieces of one history share their modes: each is printed by sympy once)."""
    factors = [""]
    if mode.power:
        factors.append("{u}" if mode.power == 1 else f"{{u}}**{mode.power}")
    if mode.rate != 0:
        factors.append(f"exp(({mode.rate})*{{u}})")
    if mode.frequency != 0:
        factors.append(f"{mode.kind}(({mode.frequency})*{{u}})")
    return "*".join(factors)


@dataclass(frozen=True)
class Kernel:
    """The response of the system to one basis function g(t)·H(t) (or to δ(t))."""

    name: str
    mode: BasisTerm | None                     # None for the impulse response
    pair: TablePair | None
    inversion: Inversion


@dataclass(frozen=True)
class Solution:
    """What the Laplace stage produced, in the order a checker reads it."""

    transform: sympy.Expr | None          # X(s) with its shift factors (None: too long to show)
    load_transform: sympy.Expr | None     # F(s)
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


def solve(model: LinearModel | ScalarEquation, history: LoadHistory, initial: Sequence[sympy.Expr] | None,
          until: sympy.Expr, *, exact: bool, ordering: Mapping[sympy.Symbol, sympy.Expr] | None
          = None) -> Solution:
    """Transform, invert and assemble the piecewise response on [0, until].

    ``model`` is any scalar equation with its poles (``systems.ScalarEquation``; a case's
    ``LinearModel`` is one): the engine is the same for one mode of a larger model.
    """
    tidy = coefficient_policy(exact)
    lead = model.lead
    initial = tuple(initial) if initial is not None else (sympy.S.Zero,) * model.order

    # Laplace transform of the whole problem (shown on the sheet).
    q = initial_value_numerator(model.coefficients, initial)
    load_transform = transform = None
    if len(history.terms) + len(history.impulses) <= TRANSFORM_DISPLAY_LIMIT:
        mode_transforms = {mode: transform_of_mode(mode)[0].expression()
                           for mode in {term.mode for term in history.terms}}
        load_transform = sympy.Add(
            *[term.coefficient * sympy.exp(-term.at * s) * mode_transforms[term.mode]
              for term in history.terms],
            *[impulse.impulse * sympy.exp(-impulse.at * s) for impulse in history.impulses])
        transform = (model.input_polynomial() * load_transform + q) / model.characteristic_polynomial()

    free = None
    if q != 0:
        free = invert(RationalTransform(q, (), sympy.S.One).divided_by(lead, model.poles))

    kernels: dict[BasisTerm | None, Kernel] = {}
    for term in history.terms:
        if term.mode not in kernels:
            mode_transform, pair = transform_of_mode(term.mode)
            scaled = RationalTransform(mode_transform.numerator * model.input_polynomial(),
                                       mode_transform.poles)
            over_system = scaled.divided_by(lead, model.poles)
            _refuse_resonance_hidden_by_symbols(over_system, ordering)
            kernels[term.mode] = Kernel(pair.name, term.mode, pair, invert(over_system))
    if history.impulses:
        pair = TablePair("unit impulse", sympy.DiracDelta(sympy.Symbol("u")), sympy.S.One,
                         SOURCES["impulse"])
        unit = RationalTransform(model.input_polynomial(), ())
        kernels[None] = Kernel("unit impulse", None, pair, invert(unit.divided_by(lead, model.poles)))

    # Events in time order; those at or after the end of the window do not act on it.
    events: dict[sympy.Expr, list[tuple[sympy.Expr, BasisTerm | None]]] = {}
    for term in history.terms:
        events.setdefault(term.at, []).append((term.coefficient, term.mode))
    for impulse in history.impulses:
        events.setdefault(impulse.at, []).append((impulse.impulse, None))
    times = order_times(set(events) | {sympy.S.Zero}, ordering)
    times = [time for time in times if _before(time, until, ordering)]

    if exact:
        pieces = _carry_exact(times, events, kernels, free, tidy)
    else:
        pieces = _carry_numeric(times, events, kernels, free)
    return Solution(transform, load_transform, q, free, tuple(kernels.values()),
                    tuple(pieces), exact)


def _refuse_resonance_hidden_by_symbols(transform: RationalTransform,
                                        values: Mapping | None) -> None:
    """A symbolic formula is singular where the declared values make a load pole equal a
    system pole that the symbols keep apart; say so instead of dividing by zero."""
    if not values:
        return
    poles = [p for p in transform.poles if p.rate.free_symbols or p.frequency.free_symbols]
    if not poles:
        return
    for i, first in enumerate(transform.poles):
        for second in transform.poles[i + 1:]:
            if all(sympy.N((a - b).subs(values), 30) == 0 for a, b in
                   ((first.rate, second.rate), (first.frequency, second.frequency))):
                raise DerivationError(
                    "the declared symbol values put a load frequency exactly on a natural "
                    "frequency, where the symbolic formula has a removable singularity; give "
                    "these quantities as numbers to obtain the resonant closed form")


# A 30-digit coefficient that a load event brings to within this fraction of the parts that
# were added is rounding residue of an exact cancellation (a windowed load ending, a slope
# returning to zero) and is dropped; a true value that small is below the carried precision.
CANCELLATION = sympy.Float("1e-27")


def _without_rounding_residue(total: ExponentialPolynomial,
                              parts: Sequence[ExponentialPolynomial]) -> ExponentialPolynomial:
    kept = []
    for mode, c in total.terms.items():
        if c.has(sympy.Float) and not c.free_symbols:
            size = sum(abs(sympy.N(part.terms.get(mode, 0), 15)) for part in parts)
            if abs(sympy.N(c, 15)) <= CANCELLATION * size:
                continue
        kept.append((mode, c))
    return total if len(kept) == len(total.terms) else ExponentialPolynomial.from_terms(kept)


def _carry_exact(times, events, kernels, free, tidy) -> list[Piece]:
    pieces: list[Piece] = []
    current = free.time_function.map_coefficients(tidy) if free else ExponentialPolynomial()
    previous = sympy.S.Zero
    for i, time in enumerate(times):
        current = current.shifted(time - previous)
        parts = [current] + [kernels[mode].inversion.time_function.scaled(coefficient)
                             for coefficient, mode in events.get(time, [])]
        for part in parts[1:]:
            current = current + part
        current = _without_rounding_residue(current.map_coefficients(tidy), parts)
        end = times[i + 1] if i + 1 < len(times) else None
        pieces.append(Piece(time, end, current))
        previous = time
    return pieces


def _carry_numeric(times, events, kernels, free) -> list[Piece]:
    """The same carrying in 30-digit arithmetic (long histories)."""
    carrier = NumericCarrier(DIGITS)
    numeric_kernels = {mode: carrier.numeric_terms(k.inversion.time_function)
                       for mode, k in kernels.items()}
    current = carrier.numeric_terms(free.time_function) if free else {}
    pieces: list[Piece] = []
    previous = sympy.S.Zero
    for i, time in enumerate(times):
        current = carrier.shifted(current, carrier.number(time - previous))
        for coefficient, mode in events.get(time, []):
            current = carrier.add(current, numeric_kernels[mode], carrier.number(coefficient))
        end = times[i + 1] if i + 1 < len(times) else None
        pieces.append(Piece(time, end, carrier.exponential_polynomial(current),
                            carrier.numeric_polynomial(current)))
        previous = time
    return pieces


def load_pieces(history: LoadHistory, times: Sequence[sympy.Expr], *, exact: bool,
                ) -> list[ExponentialPolynomial | NumericExponentialPolynomial]:
    """The (non-impulsive) load on each interval, in local time, by the same carrying."""
    events: dict[sympy.Expr, list] = {}
    for term in history.terms:
        events.setdefault(term.at, []).append(term)
    result: list[ExponentialPolynomial | NumericExponentialPolynomial] = []
    previous = sympy.S.Zero
    if exact:
        current = ExponentialPolynomial()
        for time in times:
            current = current.shifted(time - previous)
            for term in events.get(time, []):
                current = current + ExponentialPolynomial.single(term.mode, term.coefficient)
            current = current.map_coefficients(_tidy_exact)
            result.append(current)
            previous = time
        return result
    carrier = NumericCarrier(DIGITS)
    state: dict = {}
    for time in times:
        state = carrier.shifted(state, carrier.number(time - previous))
        for term in events.get(time, []):
            state = carrier.add(state, {term.mode: 1}, carrier.number(term.coefficient))
        result.append(carrier.numeric_polynomial(state))
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
    if all(time.is_Rational for time in times):       # a table's rows: exact, and quick
        return sorted(times, key=lambda time: Fraction(int(time.p), int(time.q)))
    if all(not time.free_symbols for time in times):
        return sorted(times, key=lambda time: sympy.N(time, 40) if not time.is_Rational else time)
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
    if time.is_Rational and until.is_Rational:
        return bool(time < until)
    difference = sympy.simplify(until - time)
    if difference.is_positive:
        return True
    if difference.is_nonpositive:
        return False
    numeric = _numeric_key(difference, ordering)
    return True if numeric is None else numeric > 0

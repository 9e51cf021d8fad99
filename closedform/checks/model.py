"""What the checks look at, rebuilt independently of the engine: the equation from the
model's parameters, the load from each load's own definition, and the ``Problem`` (equation,
load, initial values and the pieces handed in as plain sympy values)."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import mpmath
import sympy

from ..case import TAU, Case, LoadSpec, SystemSpec
from .base import INTEGRATION_DIGITS, T, is_zero, same_time, substitute, to_mpf
from .compiler import compile_function

# ----------------------------------------------------------------------------- the model


@dataclass(frozen=True)
class Equation:
    """a_n x⁽ⁿ⁾ + … + a_0 x = b · load(t), rebuilt from the model's parameters (or
    b_m load⁽ᵐ⁾ + … + b_0 load where derivatives of the input act)."""

    coefficients: tuple[sympy.Expr, ...]    # a_n … a_0
    scale: sympy.Expr                       # b
    inputs: tuple[sympy.Expr, ...] = ()     # b_m … b_0 where the input's derivatives act

    @property
    def order(self) -> int:
        return len(self.coefficients) - 1

    def right_side(self, load: sympy.Expr) -> sympy.Expr:
        """b·load, or b_m load⁽ᵐ⁾ + … + b_0 load (load smooth on the span it is taken on)."""
        if not self.inputs:
            return self.scale * load
        m = len(self.inputs) - 1
        return sympy.Add(*[b * sympy.diff(load, T, m - i) for i, b in enumerate(self.inputs)
                           if b != 0])

    def a(self, i: int) -> sympy.Expr:
        """The coefficient of x⁽ⁱ⁾."""
        return self.coefficients[self.order - i]

    def jump(self, impulse: sympy.Expr) -> sympy.Expr:
        """What an impulse J adds to x⁽ⁿ⁻¹⁾: integrate the equation across the impulse."""
        return self.scale * impulse / self.coefficients[0]

    def subs(self, values: Mapping) -> Equation:
        return Equation(tuple(substitute(a, values) for a in self.coefficients),
                        substitute(self.scale, values),
                        tuple(substitute(b, values) for b in self.inputs))


def equation_of(system: SystemSpec) -> Equation:
    p = system.parameters
    one = sympy.S.One
    if system.model in ("spring-mass-damper", "base-excitation"):
        m, k = sympy.sympify(p["mass"]), sympy.sympify(p["stiffness"])
        if p.get("damping_ratio") is not None:       # c = 2ζ√(km), worked out here again
            c = 2 * sympy.sympify(p["damping_ratio"]) * sympy.sqrt(k * m)
        else:
            c = p.get("damping", 0)
        b = one if system.model == "spring-mass-damper" else -m
        if system.model == "base-excitation" and system.input == "support-displacement":
            # u = x − y relative to a support displaced by y: m u″ + c u′ + k u = −m y″
            return Equation((m, sympy.sympify(c), k), one, (-m, sympy.S.Zero, sympy.S.Zero))
        return Equation((m, sympy.sympify(c), k), b)
    if system.model == "first-order":
        return Equation((sympy.sympify(p["time_constant"]), one),
                         sympy.sympify(p.get("gain", one)))
    if system.model == "series-rlc":
        inductance, capacitance = sympy.sympify(p["inductance"]), sympy.sympify(p["capacitance"])
        resistance = sympy.sympify(p.get("resistance", 0))
        return Equation((inductance * capacitance, resistance * capacitance, one), one)
    if system.model == "ode":
        indices = [int(key[1:]) for key in p if key[:1] == "a" and key[1:].isdigit()]
        order = max(indices)
        inputs = [int(key[1:]) for key in p if key[:1] == "b" and key[1:].isdigit()]
        return Equation(tuple(sympy.sympify(p.get(f"a{i}", 0)) for i in range(order, -1, -1)),
                        one, tuple(sympy.sympify(p.get(f"b{i}", 0))
                                   for i in range(max(inputs), -1, -1)) if inputs else ())
    raise ValueError(f"unknown model {system.model!r}")


# ----------------------------------------------------------------------------- the loads


@dataclass(frozen=True)
class Segment:
    """One branch of one occurrence of a load: ``value`` (in T) on start ≤ t < end."""

    load: str
    start: sympy.Expr
    end: sympy.Expr | None
    value: sympy.Expr
    rate: sympy.Expr | None       # angular rate of a non-polynomial branch (integration step)


@dataclass(frozen=True)
class Impulse:
    load: str
    at: sympy.Expr
    size: sympy.Expr


def local_shape(load: LoadSpec) -> tuple[list[tuple], list[tuple]]:
    """One occurrence in its local time τ, straight from the shape table of the design brief.

    Returns branches (from, to or None, value(τ), rate or None) and impulses (at, J).
    """
    v = load.values
    shape = load.shape
    zero = sympy.S.Zero
    tau = TAU
    if shape == "step":
        return [(zero, None, v["amplitude"], None)], []
    if shape == "ramp":
        rate = v["rate"]
        if v.get("duration") is None:
            return [(zero, None, rate * tau, None)], []
        d = v["duration"]
        return [(zero, d, rate * tau, None), (d, None, rate * d, None)], []
    if shape == "impulse":
        return [], [(zero, v["impulse"])]
    if shape == "formula":
        d = v["duration"]
        return [(zero, d, load.expression, _formula_rate(load.expression, d))], []
    if shape == "table":
        branches = []
        points = load.points
        for (t0, v0), (t1, v1) in zip(points, points[1:]):
            if sympy.simplify(t1 - t0).is_zero:
                continue                                   # a jump: two rows at one time
            branches.append((t0, t1, v0 + (v1 - v0) * (tau - t0) / (t1 - t0), None))
        return branches, []
    amplitude = v["amplitude"]
    if shape == "trapezoid":
        rise, hold, fall = v["rise"], v["hold"], v["fall"]
        branches = []
        if not is_zero(rise):
            branches.append((zero, rise, amplitude * tau / rise, None))
        if not is_zero(hold):
            branches.append((rise, rise + hold, amplitude, None))
        if not is_zero(fall):
            end = rise + hold + fall
            branches.append((rise + hold, end, amplitude * (end - tau) / fall, None))
        return branches, []
    d = v["duration"]
    if shape == "rectangle":
        return [(zero, d, amplitude, None)], []
    if shape == "decay":
        return [(zero, d, amplitude * (1 - tau / d), None)], []
    if shape == "half-sine":
        return [(zero, d, amplitude * sympy.sin(sympy.pi * tau / d), sympy.pi / d)], []
    if shape == "triangle":
        peak = v.get("peak_at", sympy.Rational(1, 2)) * d
        branches = []
        if not is_zero(peak):
            branches.append((zero, peak, amplitude * tau / peak, None))
        if not is_zero(d - peak):
            branches.append((peak, d, amplitude * (d - tau) / (d - peak), None))
        return branches, []
    raise ValueError(f"unknown load shape {shape!r}")


def _formula_rate(expression: sympy.Expr, duration: sympy.Expr) -> sympy.Expr:
    """An upper bound on how fast a formula load varies (for the integration step): the
    rates of its exponentials, sines, cosines … added up, and at least 32 per duration."""
    rate = 32 / duration
    for atom in sympy.sympify(expression).atoms(sympy.Function):
        if atom.args and atom.args[0].has(TAU):
            slope = sympy.diff(atom.args[0], TAU)
            if not slope.has(TAU):
                rate += sympy.Abs(slope)
    return rate


def load_model(loads: Sequence[LoadSpec]) -> tuple[tuple[Segment, ...], tuple[Impulse, ...]]:
    segments: list[Segment] = []
    impulses: list[Impulse] = []
    for load in loads:
        branches, kicks = local_shape(load)
        for start in load.starts():
            for lo, hi, value, rate in branches:
                segments.append(Segment(load.key, start + lo,
                                         None if hi is None else start + hi,
                                         sympy.sympify(value).subs(TAU, T - start), rate))
            for at, size in kicks:
                impulses.append(Impulse(load.key, start + at, size))
    return tuple(segments), tuple(impulses)


# ----------------------------------------------------------------------------- the problem


@dataclass(frozen=True)
class Piece:
    start: sympy.Expr
    end: sympy.Expr | None
    x: sympy.Expr                  # the response in the global time T


@dataclass
class Problem:
    """Everything the checks look at, as plain sympy values; ``subs`` gives a numeric copy."""

    equation: Equation
    segments: tuple[Segment, ...]
    impulses: tuple[Impulse, ...]
    initial: tuple[sympy.Expr, ...]
    until: sympy.Expr
    pieces: tuple[Piece, ...]
    _derivatives: dict = field(default_factory=dict, repr=False)

    def derivatives(self, index: int, highest: int | None = None) -> list[sympy.Expr]:
        """x, x', … up to x⁽ʰⁱᵍʰᵉˢᵗ⁾ (default: the equation's order n) of one piece, each
        worked out once and only when asked for (the conditions at the breakpoints need up
        to x⁽ⁿ⁻¹⁾; x⁽ⁿ⁾ only where the residual is not proved zero term by term)."""
        highest = self.equation.order if highest is None else highest
        known = self._derivatives.setdefault(index, [self.pieces[index].x])
        while len(known) <= highest:
            known.append(sympy.diff(known[-1], T))
        return known[:highest + 1]

    def breakpoints(self) -> list[sympy.Expr]:
        """The load's own breakpoints: branch starts and ends, impulse times."""
        times: list[sympy.Expr] = []
        for segment in self.segments:
            times.append(segment.start)
            if segment.end is not None:
                times.append(segment.end)
        times.extend(impulse.at for impulse in self.impulses)
        return times

    sample_cap = None             # compare the integration at every sample point

    def integration_loads(self) -> SymbolicLoads:
        return SymbolicLoads(self)

    def piece_starts(self, dps: int) -> list[mpmath.mpf]:
        return [to_mpf(p.start, None, dps) for p in self.pieces]

    def value_function(self, index: int) -> Callable[[mpmath.mpf], mpmath.mpf]:
        function = compile_function([self.pieces[index].x])
        return lambda time: function(time)[0]

    def subs(self, values: Mapping) -> Problem:
        if not values:
            return self
        return Problem(
            self.equation.subs(values),
            tuple(Segment(s.load, substitute(s.start, values), substitute(s.end, values),
                           substitute(s.value, values), substitute(s.rate, values)) for s in self.segments),
            tuple(Impulse(i.load, substitute(i.at, values), substitute(i.size, values))
                  for i in self.impulses),
            tuple(substitute(v, values) for v in self.initial),
            substitute(self.until, values),
            tuple(Piece(substitute(p.start, values), substitute(p.end, values), substitute(p.x, values))
                  for p in self.pieces))


def problem_of(derivation: Any) -> Problem:
    case: Case = derivation.case
    equation = equation_of(case.system)
    segments, impulses = load_model(case.loads)
    initial = tuple(sympy.sympify(v) for v in case.initial) if case.initial is not None \
        else (sympy.S.Zero,) * equation.order
    if len(initial) != equation.order:
        raise ValueError(f"{len(initial)} initial values for an equation of order {equation.order}")
    pieces = tuple(Piece(sympy.sympify(p.start), None if p.end is None else sympy.sympify(p.end),
                          sympy.sympify(p.expression(T))) for p in derivation.pieces)
    return Problem(equation, segments, impulses, initial, sympy.sympify(derivation.window.until),
                    pieces)


# ----------------------------------------------------------------------------- loads on intervals


def load_on(problem: Problem, lo: mpmath.mpf, hi: mpmath.mpf, values: Mapping) -> sympy.Expr:
    """The load valid on (lo, hi): each branch is chosen from the interval's midpoint."""
    mid = (lo + hi) / 2
    total = sympy.S.Zero
    for segment in problem.segments:
        start = to_mpf(segment.start, values)
        end = mpmath.inf if segment.end is None else to_mpf(segment.end, values)
        if start <= mid < end:
            total += segment.value
    return total


def load_between(case: Case, lo: Any, hi: Any, values: Mapping) -> sympy.Expr:
    """The load acting on (lo, hi), as a sympy expression in ``T``, from each load's own
    definition (the checks' load evaluator, never the engine's singularity terms)."""
    segments, _impulses = load_model(case.loads)
    problem = Problem(equation_of(case.system), segments, (), (), sympy.S.One, ())
    return substitute(load_on(problem, lo, hi, values), values)


def load_spans(problem: Problem, lo_expr: sympy.Expr, hi_expr: sympy.Expr,
           values: Mapping) -> list[tuple[sympy.Expr, sympy.Expr]]:
    """(lo, hi) cut at every load breakpoint that falls strictly inside it."""
    lo, hi = to_mpf(lo_expr, values), to_mpf(hi_expr, values)
    scale = max(abs(lo), abs(hi))
    inside: list[tuple[mpmath.mpf, sympy.Expr]] = []
    for time in problem.breakpoints():
        number = to_mpf(time, values)
        if lo < number < hi and not same_time(number, lo, scale) \
                and not same_time(number, hi, scale) \
                and not any(same_time(number, other, scale) for other, _ in inside):
            inside.append((number, time))
    inside.sort(key=lambda item: item[0])
    cuts = [lo_expr] + [time for _, time in inside] + [hi_expr]
    return list(zip(cuts, cuts[1:]))


class SymbolicLoads:
    """The load as the integrator sees it, from the problem's sympy segments (short histories:
    the load on an interval is the sympy sum of the branches active there)."""

    long_history = False

    def __init__(self, problem: Problem) -> None:
        self.problem = problem
        self.kicks = [(to_mpf(i.at, None, INTEGRATION_DIGITS), to_mpf(i.size, None, INTEGRATION_DIGITS))
                      for i in problem.impulses]

    def cuts(self, until: mpmath.mpf) -> list[mpmath.mpf]:
        cuts = [mpmath.mpf(0), until]
        for time in self.problem.breakpoints():
            number = to_mpf(time, None, INTEGRATION_DIGITS)
            if 0 < number < until and not any(same_time(number, c, until) for c in cuts):
                cuts.append(number)
        cuts.sort()
        return cuts

    def kicks_at(self, time: mpmath.mpf, until: mpmath.mpf) -> list[mpmath.mpf]:
        return [size for at, size in self.kicks if same_time(at, time, until)]

    def on(self, lo: mpmath.mpf, hi: mpmath.mpf) -> tuple:
        """("free",), ("polynomial", p, [load⁽q⁾(lo) for q ≤ p]) or ("general", f, rates)."""
        load = load_on(self.problem, lo, hi, {})
        if load == 0:
            return ("free",)
        if load.is_polynomial(T):
            p = sympy.Poly(load, T).degree()
            values = []
            derivative = load
            for _ in range(p + 1):
                values.append(_polynomial_value(derivative, lo))
                derivative = sympy.diff(derivative, T)
            return ("polynomial", p, values)
        mid = (lo + hi) / 2
        rates = [to_mpf(s.rate, None, INTEGRATION_DIGITS) for s in self.problem.segments
                 if s.rate is not None and s.value.has(T) and to_mpf(s.start, None) <= mid
                 and (s.end is None or mid < to_mpf(s.end, None))]
        function = compile_function([load])
        return ("general", lambda time: function(time)[0], rates)


def _polynomial_value(polynomial: sympy.Expr, time: mpmath.mpf) -> mpmath.mpf:
    coefficients = [to_mpf(c, None, INTEGRATION_DIGITS) for c in sympy.Poly(polynomial, T).all_coeffs()]
    return mpmath.polyval(coefficients, time)

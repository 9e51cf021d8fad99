"""Independent checks of a derived piecewise response.

Nothing here reuses the derivation's code path. The equation is rebuilt from the model's
parameters (the model table of the design brief), the load is evaluated from each load's own
definition (half-sine: amplitude·sin(π τ/d) for 0 ≤ τ < d, τ = t − start, …), never from the
singularity terms, and the numerical cross-check integrates the original equation by a
method that has nothing in common with Laplace partial fractions.

The checks, each of which fails with a figure when the pieces are wrong:

* **pieces cover the analysis window**: the pieces start at 0, meet end to end, run to ``until``.
* **ode residual on (a, b)**: each piece put into a_n x⁽ⁿ⁾ + … + a_0 x − b·load(t) on its
  interval. Exact pieces must give exactly 0 (term-by-term expansion; where that does not
  reduce to 0, 60-digit evaluation at several points, |residual| ≤ 1e-40 × scale);
  pieces with 30-digit float coefficients must stay below 1e-20 × scale at 30 digits. The
  scale is the sum of the magnitudes of the terms that were added, so the figure is a
  relative cancellation error.
* **initial values**: x(0⁺) … x⁽ⁿ⁻¹⁾(0⁺) equal the case's initial values; an impulse J at
  t = 0 adds b·J/a_n to x⁽ⁿ⁻¹⁾(0⁺).
* **breakpoint conditions at t = …**: x … x⁽ⁿ⁻²⁾ continuous at every piece boundary,
  x⁽ⁿ⁻¹⁾ jumping by exactly b·ΣJ/a_n where impulses act.
* **independent integration**: the equation integrated at 40 digits between the load's own
  breakpoints and compared with the pieces at 64 or more points.
* **impulse of load[N]**: for pulses given by their area, ∫ shape dt equals that area.

Long histories (more than LONG_HISTORY pieces, numeric cases: measured tables, many repeats)
get the same checks on numbers, without sympy differentiation or substitution per piece:
each piece is parsed once into its exp·cos/sin·polynomial terms, the load is evaluated with
numbers from each load's own definition, and the residual and the breakpoint conditions are
one check each, **ode residual on N pieces** and **breakpoint conditions at N − 1
boundaries**, with the worst figure and where it occurs (residual at 3 points per interval
between load breakpoints). The integration is compared at one or more points inside every
load interval, at most LONG_SAMPLES, never on a breakpoint; steps of equal length share
their matrix exponential. See "long histories" below.

Symbolic cases get the residual, initial and breakpoint checks symbolically, and the numeric
checks with the declared values (all symbols valued) or at three seeded random positive
substitutions (some symbols without value).
"""

from __future__ import annotations

import bisect
import math
import random
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

import mpmath
import sympy
from mpmath.calculus.quadrature import GaussLegendre

from .case import TAU, Case, LoadSpec, SystemSpec

T = sympy.Symbol("t", real=True)

EXACT_DIGITS = 60                  # numeric fallback for exact pieces
EXACT_TOLERANCE = mpmath.mpf("1e-40")
FLOAT_DIGITS = 30                  # pieces carrying 30-significant-digit coefficients
FLOAT_TOLERANCE = mpmath.mpf("1e-20")
INTEGRATION_DIGITS = 40            # the independent integration (≥ 25 asked)
INTEGRATION_TOLERANCE = mpmath.mpf("1e-12")
AREA_DIGITS = 40
AREA_TOLERANCE = mpmath.mpf("1e-20")
SAMPLES = 64                       # comparison points of the integration, at least
POINT_FRACTIONS = ("0.07", "0.23", "0.41", "0.59", "0.77", "0.93")
GAUSS_DEGREE = 3                   # mpmath's Gauss–Legendre degree 3: 12 nodes
STEP_LIMIT = 20_000                # integration steps per interval, at most
DRAWS = 3                          # random substitutions for symbols without a value
SEED = 1729
SIMPLIFY_OPS_LIMIT = 800           # larger symbolic expressions go straight to numbers
TINY = mpmath.mpf("1e-300")


@dataclass(frozen=True)
class Check:
    """One independent check: its name, whether it passed, and the figure behind it.

    ``inconclusive`` marks a check that could not reach its precision or finish its work
    (it says why in ``detail``): it is not passed — a result that cannot be established is
    not verified — but it is told apart from a check that found something wrong.
    """

    name: str
    passed: bool
    detail: str
    inconclusive: bool = False

    @property
    def outcome(self) -> str:
        """"passed", "failed" (something was found wrong) or "inconclusive"."""
        if self.passed:
            return "passed"
        return "inconclusive" if self.inconclusive else "failed"


# ----------------------------------------------------------------------------- the model


@dataclass(frozen=True)
class _Equation:
    """a_n x⁽ⁿ⁾ + … + a_0 x = b · load(t), rebuilt from the model's parameters."""

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

    def subs(self, values: Mapping) -> _Equation:
        return _Equation(tuple(_subs(a, values) for a in self.coefficients),
                         _subs(self.scale, values), tuple(_subs(b, values) for b in self.inputs))


def _equation(system: SystemSpec) -> _Equation:
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
            return _Equation((m, sympy.sympify(c), k), one, (-m, sympy.S.Zero, sympy.S.Zero))
        return _Equation((m, sympy.sympify(c), k), b)
    if system.model == "first-order":
        return _Equation((sympy.sympify(p["time_constant"]), one),
                         sympy.sympify(p.get("gain", one)))
    if system.model == "series-rlc":
        inductance, capacitance = sympy.sympify(p["inductance"]), sympy.sympify(p["capacitance"])
        resistance = sympy.sympify(p.get("resistance", 0))
        return _Equation((inductance * capacitance, resistance * capacitance, one), one)
    if system.model == "ode":
        indices = [int(key[1:]) for key in p if key[:1] == "a" and key[1:].isdigit()]
        order = max(indices)
        inputs = [int(key[1:]) for key in p if key[:1] == "b" and key[1:].isdigit()]
        return _Equation(tuple(sympy.sympify(p.get(f"a{i}", 0)) for i in range(order, -1, -1)),
                         one, tuple(sympy.sympify(p.get(f"b{i}", 0))
                                    for i in range(max(inputs), -1, -1)) if inputs else ())
    raise ValueError(f"unknown model {system.model!r}")


# ----------------------------------------------------------------------------- the loads


@dataclass(frozen=True)
class _Segment:
    """One branch of one occurrence of a load: ``value`` (in T) on start ≤ t < end."""

    load: str
    start: sympy.Expr
    end: sympy.Expr | None
    value: sympy.Expr
    rate: sympy.Expr | None       # angular rate of a non-polynomial branch (integration step)


@dataclass(frozen=True)
class _Impulse:
    load: str
    at: sympy.Expr
    size: sympy.Expr


def _local_shape(load: LoadSpec) -> tuple[list[tuple], list[tuple]]:
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
        if not _is_zero(rise):
            branches.append((zero, rise, amplitude * tau / rise, None))
        if not _is_zero(hold):
            branches.append((rise, rise + hold, amplitude, None))
        if not _is_zero(fall):
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
        if not _is_zero(peak):
            branches.append((zero, peak, amplitude * tau / peak, None))
        if not _is_zero(d - peak):
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


def _load_model(loads: Sequence[LoadSpec]) -> tuple[tuple[_Segment, ...], tuple[_Impulse, ...]]:
    segments: list[_Segment] = []
    impulses: list[_Impulse] = []
    for load in loads:
        branches, kicks = _local_shape(load)
        for start in load.starts():
            for lo, hi, value, rate in branches:
                segments.append(_Segment(load.key, start + lo,
                                         None if hi is None else start + hi,
                                         sympy.sympify(value).subs(TAU, T - start), rate))
            for at, size in kicks:
                impulses.append(_Impulse(load.key, start + at, size))
    return tuple(segments), tuple(impulses)


# ----------------------------------------------------------------------------- the problem


@dataclass(frozen=True)
class _Piece:
    start: sympy.Expr
    end: sympy.Expr | None
    x: sympy.Expr                  # the response in the global time T


@dataclass
class _Problem:
    """Everything the checks look at, as plain sympy values; ``subs`` gives a numeric copy."""

    equation: _Equation
    segments: tuple[_Segment, ...]
    impulses: tuple[_Impulse, ...]
    initial: tuple[sympy.Expr, ...]
    until: sympy.Expr
    pieces: tuple[_Piece, ...]
    _derivatives: dict = field(default_factory=dict, repr=False)

    def derivatives(self, index: int) -> list[sympy.Expr]:
        """x, x', …, x⁽ⁿ⁾ of one piece (computed once)."""
        if index not in self._derivatives:
            x = self.pieces[index].x
            result = [x]
            for _ in range(self.equation.order):
                result.append(sympy.diff(result[-1], T))
            self._derivatives[index] = result
        return self._derivatives[index]

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

    def integration_loads(self) -> _SymbolicLoads:
        return _SymbolicLoads(self)

    def piece_starts(self, dps: int) -> list[mpmath.mpf]:
        return [_mp(p.start, None, dps) for p in self.pieces]

    def value_function(self, index: int) -> Callable[[mpmath.mpf], mpmath.mpf]:
        function = _function([self.pieces[index].x])
        return lambda time: function(time)[0]

    def subs(self, values: Mapping) -> _Problem:
        if not values:
            return self
        return _Problem(
            self.equation.subs(values),
            tuple(_Segment(s.load, _subs(s.start, values), _subs(s.end, values),
                           _subs(s.value, values), _subs(s.rate, values)) for s in self.segments),
            tuple(_Impulse(i.load, _subs(i.at, values), _subs(i.size, values))
                  for i in self.impulses),
            tuple(_subs(v, values) for v in self.initial),
            _subs(self.until, values),
            tuple(_Piece(_subs(p.start, values), _subs(p.end, values), _subs(p.x, values))
                  for p in self.pieces))


def _problem(derivation: Any) -> _Problem:
    case: Case = derivation.case
    equation = _equation(case.system)
    segments, impulses = _load_model(case.loads)
    initial = tuple(sympy.sympify(v) for v in case.initial) if case.initial is not None \
        else (sympy.S.Zero,) * equation.order
    if len(initial) != equation.order:
        raise ValueError(f"{len(initial)} initial values for an equation of order {equation.order}")
    pieces = tuple(_Piece(sympy.sympify(p.start), None if p.end is None else sympy.sympify(p.end),
                          sympy.sympify(p.expression(T))) for p in derivation.pieces)
    return _Problem(equation, segments, impulses, initial, sympy.sympify(derivation.window.until),
                    pieces)


# ----------------------------------------------------------------------------- numbers


def _subs(value: sympy.Expr | None, values: Mapping) -> sympy.Expr | None:
    if value is None or not values:
        return value
    return sympy.sympify(value).subs(values)


def _is_zero(value: sympy.Expr) -> bool:
    return bool(sympy.sympify(value).is_zero)


def _mp(value: sympy.Expr, values: Mapping | None = None, dps: int = EXACT_DIGITS) -> mpmath.mpf:
    """A real number at ``dps`` digits (raises if symbols are left or it is not real)."""
    key = frozenset(values.items()) if values else None
    return _mp_cached(sympy.sympify(value), key, dps)


@lru_cache(maxsize=8192)
def _mp_cached(expr: sympy.Expr, values: frozenset | None, dps: int) -> mpmath.mpf:
    if values:
        expr = expr.subs(dict(values))
    if expr.free_symbols:
        raise ValueError(f"no numeric value for {expr} (symbols {sorted(map(str, expr.free_symbols))})")
    number = sympy.N(expr, dps + 5)
    real, imaginary = number.as_real_imag()
    if imaginary != 0 and abs(imaginary) > abs(real) * sympy.Float(10) ** (-dps):
        raise ValueError(f"{expr} is not real")
    with mpmath.workdps(dps + 5):
        return mpmath.mpf(str(real)) if real != 0 else mpmath.mpf(0)


_FUNCTIONS: dict[type, Callable] = {
    sympy.exp: mpmath.exp, sympy.sin: mpmath.sin, sympy.cos: mpmath.cos, sympy.tan: mpmath.tan,
    sympy.log: mpmath.log, sympy.sinh: mpmath.sinh, sympy.cosh: mpmath.cosh,
    sympy.tanh: mpmath.tanh, sympy.Abs: abs, sympy.atan: mpmath.atan, sympy.asin: mpmath.asin,
    sympy.acos: mpmath.acos,
}


def _compile(expr: sympy.Expr, variable: sympy.Symbol = T) -> Callable:
    """f(time, memo) evaluating ``expr`` at the working precision.

    A small tree walker of our own instead of ``lambdify`` (whose code printing would
    dominate the time of the checks). Sub-expressions free of the variable are evaluated once
    per precision and kept; functions of the variable (exp, sin, …) are kept in ``memo`` for
    the point being evaluated, so that the many terms of x, x', x'' share them.
    """
    if not expr.has(variable):
        if expr.free_symbols:
            raise ValueError(f"no numeric value for {', '.join(sorted(map(str, expr.free_symbols)))}")
        inner = _compile_node(expr, variable)
        kept: dict[int, Any] = {}

        def constant(_time: Any, _memo: dict) -> Any:
            precision = mpmath.mp.prec
            if precision not in kept:
                kept[precision] = inner(None, {})
            return kept[precision]
        return constant
    return _compile_node(expr, variable)


def _compile_node(expr: sympy.Expr, variable: sympy.Symbol) -> Callable:
    if expr == variable:
        return lambda time, memo: time
    if expr.is_Symbol:
        raise ValueError(f"no numeric value for {expr}")
    if expr.is_Integer:
        value = int(expr)
        return lambda time, memo: mpmath.mpf(value)
    if expr.is_Rational:
        p, q = int(expr.p), int(expr.q)
        return lambda time, memo: mpmath.mpf(p) / q
    if expr.is_Float:
        return lambda time, memo: +mpmath.mpf(expr._mpf_)
    if expr is sympy.pi:
        return lambda time, memo: +mpmath.pi
    if expr is sympy.E:
        return lambda time, memo: +mpmath.e
    if expr is sympy.I:
        return lambda time, memo: mpmath.mpc(0, 1)
    if expr.is_Add:
        parts = [_compile(a, variable) for a in expr.args]
        return lambda time, memo: mpmath.fsum(part(time, memo) for part in parts)
    if expr.is_Mul:
        parts = [_compile(a, variable) for a in expr.args]
        return lambda time, memo: mpmath.fprod(part(time, memo) for part in parts)
    if expr.is_Pow:
        base, exponent = expr.args
        base_function = _compile(base, variable)
        if exponent.is_Integer:
            n = int(exponent)
            return lambda time, memo: base_function(time, memo) ** n
        if exponent == sympy.S.Half:
            return lambda time, memo: mpmath.sqrt(base_function(time, memo))
        exponent_function = _compile(exponent, variable)
        return lambda time, memo: mpmath.power(base_function(time, memo),
                                               exponent_function(time, memo))
    function = _FUNCTIONS.get(expr.func)
    if function is not None and len(expr.args) == 1:
        argument = _compile(expr.args[0], variable)

        def apply(time: Any, memo: dict) -> Any:
            if expr not in memo:
                memo[expr] = function(argument(time, memo))
            return memo[expr]
        return apply

    def general(time: Any, memo: dict) -> Any:     # anything else (rare): sympy at the point
        point = expr if time is None else expr.subs(variable, sympy.Float(str(time), mpmath.mp.dps))
        return _evaluate(point)
    return general


def _evaluate(expr: sympy.Expr) -> Any:
    number = sympy.N(expr, mpmath.mp.dps)
    real, imaginary = number.as_real_imag()
    real_value = mpmath.mpf(str(real)) if real != 0 else mpmath.mpf(0)
    if imaginary == 0:
        return real_value
    return mpmath.mpc(real_value, mpmath.mpf(str(imaginary)))


def _function(expressions: Sequence[sympy.Expr], variable: sympy.Symbol = T) -> Callable:
    """Compile expressions of one variable; the result maps a number to a list of values."""
    compiled = [_compile(sympy.sympify(e), variable) for e in expressions]

    def evaluate(time: Any) -> list:
        memo: dict = {}
        return [function(time, memo) for function in compiled]
    return evaluate


def _terms(expr: sympy.Expr) -> tuple[sympy.Expr, ...]:
    return sympy.Add.make_args(sympy.sympify(expr))


def _has_float(*expressions: sympy.Expr) -> bool:
    return any(sympy.sympify(e).has(sympy.Float) for e in expressions)


def _short(value: sympy.Expr | mpmath.mpf | None) -> str:
    if value is None:
        return "end"
    if isinstance(value, (mpmath.mpf, float, int)):
        return f"{float(value):.6g}"
    value = sympy.sympify(value)
    if value.free_symbols:
        return str(value)
    return f"{float(sympy.N(value, 20)):.6g}"


def _figure(value: Any) -> str:
    return mpmath.nstr(value, 2, min_fixed=-1, max_fixed=-1) if value != 0 else "0"


def _zero_symbolically(expr: sympy.Expr, simplify: bool, probe: Mapping | None = None) -> bool:
    """True when the expression (free of t) is exactly 0 by expansion, by putting it over one
    denominator, and (if asked) by sympy's simplify. ``probe``: values of the symbols at which
    a clearly non-zero number spares the (slow, then pointless) simplification."""
    expanded = sympy.expand(expr)
    if expanded == 0:
        return True
    if sympy.count_ops(expanded) > SIMPLIFY_OPS_LIMIT:
        return False
    # Sums of fractions with different (proportional) denominators: one numerator.
    if sympy.expand(sympy.numer(sympy.together(expanded))) == 0:
        return True
    if not simplify:
        return False
    if probe is not None and not expanded.has(T):
        try:
            terms = _function([term.subs(probe) for term in _terms(expanded)])
            with mpmath.workdps(FLOAT_DIGITS):
                values = terms(mpmath.mpf(0))
                if abs(mpmath.fsum(values)) > FLOAT_TOLERANCE * mpmath.fsum(abs(v) for v in values):
                    return False
        except (ValueError, TypeError, ZeroDivisionError):
            pass
    return sympy.simplify(expanded) == 0


def _same_time(a: mpmath.mpf, b: mpmath.mpf, scale: mpmath.mpf) -> bool:
    return abs(a - b) <= mpmath.mpf("1e-30") * max(abs(a), abs(b), scale)


def _guard(name: str, function: Callable[[], tuple[bool, str]]) -> Check:
    """A check that cannot be evaluated has failed (and says why)."""
    try:
        passed, detail = function()
    except Exception as error:  # noqa: BLE001 - reported, never swallowed
        return Check(name, False, f"could not be evaluated: {type(error).__name__}: {error}")
    return Check(name, bool(passed), detail)


# ----------------------------------------------------------------------------- loads on intervals


def _load_on(problem: _Problem, lo: mpmath.mpf, hi: mpmath.mpf, values: Mapping) -> sympy.Expr:
    """The load valid on (lo, hi): each branch is chosen from the interval's midpoint."""
    mid = (lo + hi) / 2
    total = sympy.S.Zero
    for segment in problem.segments:
        start = _mp(segment.start, values)
        end = mpmath.inf if segment.end is None else _mp(segment.end, values)
        if start <= mid < end:
            total += segment.value
    return total


def _spans(problem: _Problem, lo_expr: sympy.Expr, hi_expr: sympy.Expr,
           values: Mapping) -> list[tuple[sympy.Expr, sympy.Expr]]:
    """(lo, hi) cut at every load breakpoint that falls strictly inside it."""
    lo, hi = _mp(lo_expr, values), _mp(hi_expr, values)
    scale = max(abs(lo), abs(hi))
    inside: list[tuple[mpmath.mpf, sympy.Expr]] = []
    for time in problem.breakpoints():
        number = _mp(time, values)
        if lo < number < hi and not _same_time(number, lo, scale) \
                and not _same_time(number, hi, scale) \
                and not any(_same_time(number, other, scale) for other, _ in inside):
            inside.append((number, time))
    inside.sort(key=lambda item: item[0])
    cuts = [lo_expr] + [time for _, time in inside] + [hi_expr]
    return list(zip(cuts, cuts[1:]))


# ----------------------------------------------------------------------------- coverage


def _coverage_check(problem: Any, values: Mapping,
                    number: Callable[[sympy.Expr], mpmath.mpf] | None = None) -> Check:
    def run() -> tuple[bool, str]:
        pieces = problem.pieces
        if not pieces:
            return False, "the derivation has no pieces"
        convert = number if number is not None else (lambda value: _mp(value, values))
        until = convert(problem.until)
        problems = []
        start = convert(pieces[0].start)
        if start != 0:
            problems.append(f"the first piece starts at {_short(start)} s, not 0")
        previous = None
        for index, piece in enumerate(pieces):
            here = convert(piece.start)
            if previous is not None and not here > previous:
                problems.append(f"piece {index + 1} starts at {_short(here)} s, not after "
                                f"{_short(previous)} s")
            if piece.end is not None:
                end = convert(piece.end)
                if index + 1 == len(pieces):
                    if end < until and not _same_time(end, until, until):
                        problems.append(f"the last piece ends at {_short(end)} s, before "
                                        f"until = {_short(until)} s")
                else:
                    following = convert(pieces[index + 1].start)
                    if not _same_time(end, following, until):
                        problems.append(f"piece {index + 1} ends at {_short(end)} s but piece "
                                        f"{index + 2} starts at {_short(following)} s")
            elif index + 1 != len(pieces):
                problems.append(f"piece {index + 1} is open-ended but not the last")
            previous = here
        if not convert(pieces[-1].start) < until:
            problems.append(f"the last piece starts at or after until = {_short(until)} s")
        if problems:
            return False, "; ".join(problems)
        count = f"{len(pieces)} piece" + ("" if len(pieces) == 1 else "s")
        return True, f"{count} on [0, {_short(until)}] s, end to end"
    return _guard("pieces cover the analysis window", run)


# ----------------------------------------------------------------------------- residual


def _split_zero(x: sympy.Expr, load: sympy.Expr, equation: _Equation, simplify: bool,
                probe: Mapping | None = None) -> bool:
    """Exact test of Σ a_i x⁽ⁱ⁾ − b·load ≡ 0, term by term.

    x is grouped as Σ C_φ·φ(t) (C_φ free of t); the operator is applied to each φ alone and
    expanded, and the coefficient of every resulting function of t must vanish. This keeps
    the (possibly long) constants C_φ out of the expansion of derivatives.
    """
    groups: dict[sympy.Expr, sympy.Expr] = {}
    for term in _terms(x):
        constant, phi = term.as_independent(T, as_Add=False)
        groups[phi] = groups.get(phi, sympy.S.Zero) + constant
    totals: dict[sympy.Expr, sympy.Expr] = {}
    order = equation.order
    for phi, constant in groups.items():
        image = sympy.expand(sympy.Add(*[equation.a(i) * sympy.diff(phi, T, i)
                                         for i in range(order + 1)]))
        for term in _terms(image):
            k, psi = term.as_independent(T, as_Add=False)
            totals[psi] = totals.get(psi, sympy.S.Zero) + constant * k
    for term in _terms(sympy.expand(equation.right_side(load))):
        k, psi = term.as_independent(T, as_Add=False)
        totals[psi] = totals.get(psi, sympy.S.Zero) - k
    return all(_zero_symbolically(total, simplify, probe) for total in totals.values())


def _residual_figure(equation: _Equation, derivatives: Sequence[sympy.Expr], load: sympy.Expr,
                     spans: Sequence[tuple[mpmath.mpf, mpmath.mpf]],
                     dps: int) -> tuple[mpmath.mpf, mpmath.mpf]:
    """max |Σ terms| / Σ |terms| over points inside the spans, and where."""
    terms: list[sympy.Expr] = []
    for i in range(equation.order + 1):
        a = equation.a(i)
        if a != 0:
            terms.extend(a * term for term in _terms(derivatives[i]))
    if equation.inputs:
        terms.extend(-term for term in _terms(sympy.expand(equation.right_side(load))))
    else:
        terms.extend(-equation.scale * term for term in _terms(load))
    evaluate = _function(terms)
    worst, where = mpmath.mpf(0), None
    with mpmath.workdps(dps):
        for lo, hi in spans:
            for fraction in POINT_FRACTIONS:
                time = lo + (hi - lo) * mpmath.mpf(fraction)
                values = evaluate(time)
                total = mpmath.fsum(values)
                magnitude = mpmath.fsum(abs(v) for v in values)
                ratio = abs(total) / max(magnitude, TINY)
                if where is None or ratio > worst:
                    worst, where = ratio, time
    return worst, where


def _residual_checks(problem: _Problem, reference: Mapping, fallbacks: Sequence[Mapping],
                     symbolic: bool) -> list[Check]:
    checks = []
    for index, piece in enumerate(problem.pieces):
        end = piece.end if piece.end is not None else problem.until
        name = f"ode residual on ({_short(piece.start)}, {_short(end)})"
        if symbolic:
            name += " [symbolic]"
        checks.append(_guard(name, lambda index=index, end=end: _residual(
            problem, index, end, reference, fallbacks, symbolic)))
    return checks


def _residual(problem: _Problem, index: int, end: sympy.Expr, reference: Mapping,
              fallbacks: Sequence[Mapping], symbolic: bool) -> tuple[bool, str]:
    piece = problem.pieces[index]
    lo, hi = _mp(piece.start, reference), _mp(end, reference)
    if not hi > lo:
        return False, f"the interval ({_short(lo)}, {_short(hi)}) is empty or reversed"
    spans = _spans(problem, piece.start, end, reference)
    groups: dict[sympy.Expr, list[tuple[sympy.Expr, sympy.Expr]]] = {}
    for span in spans:
        load = _load_on(problem, _mp(span[0], reference), _mp(span[1], reference), reference)
        groups.setdefault(load, []).append(span)
    derivatives = problem.derivatives(index)
    floats = _has_float(derivatives[0])
    dps, tolerance = (FLOAT_DIGITS, FLOAT_TOLERANCE) if floats else (EXACT_DIGITS, EXACT_TOLERANCE)
    note = ""
    if len(groups) > 1:
        note = "; the load changes inside this piece at t = " + ", ".join(
            _short(_mp(span[0], reference)) for span in spans[1:])
    worst, where, exact = mpmath.mpf(0), None, True
    for load, group in groups.items():
        if not floats and _split_zero(derivatives[0], load, problem.equation, symbolic,
                                      fallbacks[0] if symbolic and fallbacks else None):
            continue
        exact = False
        for values in (fallbacks if symbolic else [{}]):
            equation = problem.equation.subs(values)
            numeric = [_subs(d, values) for d in derivatives]
            bounds = [(_mp(a, values), _mp(b, values)) for a, b in group]
            ratio, time = _residual_figure(equation, numeric, _subs(load, values), bounds, dps)
            if where is None or ratio > worst:
                worst, where = ratio, time
    if exact:
        how = "simplifies" if symbolic else "expands"
        return True, f"exact: the residual {how} to 0 identically{note}"
    passed = worst <= tolerance
    route = (f"{dps}-digit evaluation at {len(POINT_FRACTIONS)} points per interval"
             + (f", {len(fallbacks)} substitution(s)" if symbolic else "")
             + ("; coefficients are 30-digit floats" if floats else
                "; not reduced to 0 symbolically"))
    return passed, (f"max |residual|/scale = {_figure(worst)} at t = {_short(where)} s "
                    f"(limit {_figure(tolerance)}; {route}){note}")


# ----------------------------------------------------------------------------- initial values and jumps


def _compare(pairs: Sequence[tuple[str, Sequence[sympy.Expr], Sequence[sympy.Expr], sympy.Expr]],
             symbolic: bool, fallbacks: Sequence[Mapping], time: sympy.Expr) -> tuple[bool, str]:
    """Each pair: label, terms on the left side (at ``time``), on the right, and the jump
    expected from left to right. Exact where expansion gives 0, else by numbers."""
    floats = any(_has_float(*left, *right) for _, left, right, _ in pairs)
    dps, tolerance = (FLOAT_DIGITS, FLOAT_TOLERANCE) if floats else (EXACT_DIGITS, EXACT_TOLERANCE)
    worst, worst_label, exact = mpmath.mpf(0), "", True
    for label, left, right, expected in pairs:
        if not floats:
            difference = sympy.Add(*[r.subs(T, time) for r in right]) \
                - sympy.Add(*[lft.subs(T, time) for lft in left]) - expected
            if _zero_symbolically(difference, symbolic, fallbacks[0] if symbolic and fallbacks else None):
                continue
        exact = False
        for values in (fallbacks if symbolic else [{}]):
            instant = _mp(time, values, dps + 10)
            terms_left = [_subs(e, values) for e in left]
            terms_right = [_subs(e, values) for e in right]
            jump = _subs(expected, values)
            with mpmath.workdps(dps):
                left_values = _function(terms_left)(instant) if terms_left else []
                right_values = _function(terms_right)(instant) if terms_right else []
                jump_value = _mp(jump, None, dps)
                mismatch = abs(mpmath.fsum(right_values) - mpmath.fsum(left_values) - jump_value)
                magnitude = mpmath.fsum(abs(v) for v in left_values + right_values) + abs(jump_value)
                ratio = mismatch / max(magnitude, TINY)
            if ratio > worst or not worst_label:
                worst, worst_label = ratio, label
    if exact:
        how = "simplify" if symbolic else "expand"
        return True, f"exact: the differences {how} to 0"
    return worst <= tolerance, (f"max |mismatch|/scale = {_figure(worst)} in {worst_label} "
                                f"(limit {_figure(tolerance)}; {dps}-digit evaluation"
                                + (f" at {len(fallbacks)} substitution(s)" if symbolic else "")
                                + ")")


_PRIMES = ("", "'", "''", "'''", "⁽⁴⁾")


def _name_of_derivative(j: int) -> str:
    return "x" + (_PRIMES[j] if j < len(_PRIMES) else f"^({j})")


def _impulses_at(problem: _Problem, time: sympy.Expr, values: Mapping) -> list[_Impulse]:
    instant = _mp(time, values)
    scale = abs(_mp(problem.until, values))
    return [i for i in problem.impulses if _same_time(_mp(i.at, values), instant, scale)]


def _initial_check(problem: _Problem, reference: Mapping, fallbacks: Sequence[Mapping],
                   symbolic: bool) -> Check:
    def run() -> tuple[bool, str]:
        if not problem.pieces:
            return False, "no pieces"
        n = problem.equation.order
        derivatives = problem.derivatives(0)
        kicks = _impulses_at(problem, sympy.S.Zero, reference)
        jumps = _jumps(problem, sympy.S.Zero, reference, kicks)
        pairs = []
        for j in range(n):
            expected = problem.initial[j] + jumps[j]
            pairs.append((f"{_name_of_derivative(j)}(0+)", [], list(_terms(derivatives[j])),
                          expected))
        passed, detail = _compare(pairs, symbolic, fallbacks, sympy.S.Zero)
        given = "at rest" if all(_is_zero(v) for v in problem.initial) else "as given"
        extra = f"; impulse of {', '.join(k.load for k in kicks)} at t = 0" if kicks else ""
        if problem.equation.inputs and any(not _is_zero(j) for j in jumps):
            extra += "; jumps from the input's derivatives at t = 0 added"
        return passed, f"initial state {given}{extra}: {detail}"
    return _guard("initial values" + (" [symbolic]" if symbolic else ""), run)


def _breakpoint_checks(problem: _Problem, reference: Mapping, fallbacks: Sequence[Mapping],
                       symbolic: bool) -> list[Check]:
    checks = []
    n = problem.equation.order
    suffix = " [symbolic]" if symbolic else ""
    boundaries = []
    for index in range(len(problem.pieces) - 1):
        time = problem.pieces[index + 1].start
        boundaries.append(time)

        def run(index: int = index, time: sympy.Expr = time) -> tuple[bool, str]:
            kicks = _impulses_at(problem, time, reference)
            jumps = _jumps(problem, time, reference, kicks)
            jump = jumps[-1]
            left = problem.derivatives(index)
            right = problem.derivatives(index + 1)
            pairs = []
            for j in range(n):
                pairs.append((f"{_name_of_derivative(j)} at t = {_short(time)}",
                              list(_terms(left[j])), list(_terms(right[j])), jumps[j]))
            passed, detail = _compare(pairs, symbolic, fallbacks, time)
            names = [_name_of_derivative(j) for j in range(n)]
            if problem.equation.inputs:
                shown = ", ".join(f"{name} by {_short(_mp(value, reference))}"
                                  for name, value in zip(names, jumps))
                rule = (f"jumps from the input's derivatives and impulses (integrated across "
                        f"t = {_short(time)} from the load's own branches): {shown}")
            elif kicks:
                size = sympy.simplify(jump) if symbolic else _short(_mp(jump, reference))
                rule = (f"{names[-1]} jumps by b·J/a_n = {size} "
                        f"(impulse of {', '.join(k.load for k in kicks)})")
                if n > 1:
                    rule = f"{', '.join(names[:-1])} continuous; {rule}"
            else:
                rule = f"{', '.join(names)} continuous"
            return passed, f"{rule}: {detail}"
        checks.append(_guard(f"breakpoint conditions at t = {_short(time)}{suffix}", run))

    until = _mp(problem.until, reference)
    known = [_mp(b, reference) for b in boundaries]
    return checks + _impulses_off_boundaries(
        problem.impulses, n, until, lambda value: _mp(value, reference),
        lambda at: any(_same_time(at, b, until) for b in known), suffix)


def _impulses_off_boundaries(impulses: Sequence[_Impulse], order: int, until: mpmath.mpf,
                             number: Callable[[sympy.Expr], mpmath.mpf],
                             on_boundary: Callable[[mpmath.mpf], bool],
                             suffix: str = "") -> list[Check]:
    """An impulse inside the window must sit on a piece boundary (where the highest
    derivative can jump): a failed check for each one that does not."""
    checks = []
    for impulse in impulses:
        def run(impulse: _Impulse = impulse) -> tuple[bool, str]:
            at = number(impulse.at)
            if at <= 0 or at >= until or on_boundary(at):
                return True, ""
            return False, (f"the impulse of {impulse.load} acts at t = {_short(at)} s, where no "
                           f"piece ends: {_name_of_derivative(order - 1)} cannot jump there")
        check = _guard(f"breakpoint conditions at t = {_short(impulse.at)}{suffix}", run)
        if not check.passed:
            checks.append(check)
    return checks


# ----------------------------------------------------------------------------- inputs with derivatives
#
# Where derivatives of the input act, a_n x⁽ⁿ⁾ + … + a_0 x = b_m f⁽ᵐ⁾ + … + b_0 f, these checks
# use the classical realisation through an auxiliary w with a_n w⁽ⁿ⁾ + … + a_0 w = f (the same
# companion system as for a plain load, b = 1) and x = b_m w⁽ᵐ⁾ + … + b_0 w: it needs no
# derivative of f, and shares nothing with the transform B(s)F(s)/P(s) of the derivation.
# Across a breakpoint w, …, w⁽ⁿ⁻²⁾ are continuous, w⁽ⁿ⁻¹⁾ jumps by J/a_n (impulse J), and each
# higher derivative by (Δf⁽ⁱ⁻ⁿ⁾ − Σ_l a_l Δw⁽ˡ⁺ⁱ⁻ⁿ⁾)/a_n from the equation; the jumps Δf⁽ʲ⁾
# of the load come from its own branches on either side. x⁽ᵏ⁾ then jumps by Σ_j b_j Δw⁽ʲ⁺ᵏ⁾.


def _input_weights(equation: _Equation) -> list[sympy.Expr]:
    """b_0 … b_m: the coefficient of f⁽ʲ⁾ at index j."""
    return list(reversed(equation.inputs))


def _load_jumps(problem: _Problem, time: sympy.Expr, values: Mapping, count: int) -> list:
    """f(t⁺) − f(t⁻), f′(t⁺) − f′(t⁻), … (``count`` of them) from the load's own branches."""
    instant = _mp(time, values)
    scale = max(abs(_mp(problem.until, values)), TINY)
    jumps = [sympy.S.Zero] * count
    for segment in problem.segments:
        start = _mp(segment.start, values)
        end = None if segment.end is None else _mp(segment.end, values)
        starts_here = _same_time(start, instant, scale)
        ends_here = end is not None and _same_time(end, instant, scale)
        before = start < instant and not starts_here and (end is None or end > instant or ends_here)
        after = (start < instant or starts_here) and (end is None or (end > instant and not ends_here))
        if before == after:
            continue
        sign = 1 if after else -1
        derivative = segment.value
        for i in range(count):
            jumps[i] += sign * derivative.subs(T, time)
            derivative = sympy.diff(derivative, T)
    return jumps


def _jumps(problem: _Problem, time: sympy.Expr, values: Mapping, kicks: Sequence[_Impulse]) -> list:
    """What x, x′, … x⁽ⁿ⁻¹⁾ jump by at ``time`` (impulses ``kicks`` there)."""
    equation = problem.equation
    n = equation.order
    impulse = sympy.Add(*[k.size for k in kicks])
    if not equation.inputs:
        return [sympy.S.Zero] * (n - 1) + [equation.jump(impulse)]
    b = _input_weights(equation)
    m = len(b) - 1
    df = _load_jumps(problem, time, values, max(m, 1))
    a = [equation.a(i) for i in range(n + 1)]
    dw = [sympy.S.Zero] * (n + m)
    dw[n - 1] = impulse / a[n]
    for i in range(n, n + m):
        dw[i] = (df[i - n] - sympy.Add(*[a[lo] * dw[lo + i - n] for lo in range(n)])) / a[n]
    return [sympy.Add(*[b[j] * dw[j + k] for j in range(m + 1)]) for k in range(n)]


def load_between(case: Case, lo: Any, hi: Any, values: Mapping) -> sympy.Expr:
    """The load acting on (lo, hi), as a sympy expression in ``T``, from each load's own
    definition (this module's load evaluator, never the engine's singularity terms)."""
    segments, _impulses = _load_model(case.loads)
    problem = _Problem(_equation(case.system), segments, (), (), sympy.S.One, ())
    return _subs(_load_on(problem, lo, hi, values), values)


def _integrate_with_inputs(problem: _Problem) -> _Trajectory:
    """The independent integration of x = Σ b_j w⁽ʲ⁾ through w (see above); w starts from the
    state that gives the case's x(0⁻) … x⁽ⁿ⁻¹⁾(0⁻) with the load at rest before t = 0."""
    equation = problem.equation
    n = equation.order
    b = _input_weights(equation)
    m = len(b) - 1
    with mpmath.workdps(INTEGRATION_DIGITS):
        a = [_mp(equation.a(i), None, INTEGRATION_DIGITS) for i in range(n + 1)]
        bs = [_mp(value, None, INTEGRATION_DIGITS) for value in b]
        # w⁽ⁱ⁾ as a combination of (w, …, w⁽ⁿ⁻¹⁾) while f = 0 (before t = 0)
        rows = [[mpmath.mpf(1 if i == j else 0) for j in range(n)] for i in range(n)]
        for i in range(n, 2 * n + m):
            rows.append([-mpmath.fsum(a[lo] * rows[lo + i - n][j] for lo in range(n)) / a[n]
                         for j in range(n)])
        matrix = mpmath.matrix([[mpmath.fsum(bs[j] * rows[j + k][c] for j in range(m + 1))
                                 for c in range(n)] for k in range(n)])
        x0 = [_mp(v, None, INTEGRATION_DIGITS) for v in problem.initial]
        if all(v == 0 for v in x0):
            w0 = [mpmath.mpf(0)] * n
        else:
            try:
                w0 = list(mpmath.lu_solve(matrix, mpmath.matrix(x0)))
            except ZeroDivisionError:
                raise ValueError("B(s) shares a root with P(s): the initial values cannot be "
                                 "carried by the auxiliary w of this check") from None
        # x = Σ_{j<n} b_j w⁽ʲ⁾ (+ b_n w⁽ⁿ⁾ = b_n (f − Σ a_l w⁽ˡ⁾)/a_n when m = n)
        output = [bs[j] if j <= m else mpmath.mpf(0) for j in range(n)]
        lead_input = bs[n] / a[n] if m == n else mpmath.mpf(0)
        if m == n:
            output = [output[j] - lead_input * a[j] for j in range(n)]
        auxiliary = _Problem(_Equation(equation.coefficients, sympy.S.One), problem.segments,
                             problem.impulses, tuple(sympy.Float(mpmath.nstr(v, INTEGRATION_DIGITS),
                                                                 INTEGRATION_DIGITS) for v in w0),
                             problem.until, problem.pieces)
        trajectory = _integrate(auxiliary, auxiliary.integration_loads(), output)
        if m == n:
            samples = []
            for time, value in trajectory.samples:
                load = _load_on(problem, time, time, {})
                samples.append((time, value + lead_input * (_mp(load.subs(T, sympy.Float(
                    mpmath.nstr(time, INTEGRATION_DIGITS), INTEGRATION_DIGITS)), None,
                    INTEGRATION_DIGITS) if load != 0 else 0)))
            largest = max([abs(v) for _t, v in samples] + [trajectory.largest])
            trajectory = _Trajectory(samples, largest, trajectory.steps, trajectory.capped)
        return trajectory


# ----------------------------------------------------------------------------- integration


@dataclass
class _Trajectory:
    samples: list[tuple[mpmath.mpf, mpmath.mpf]]
    largest: mpmath.mpf
    steps: int
    capped: bool = False          # some interval needed more than STEP_LIMIT quadrature steps


_GAUSS_CACHE: dict[int, list[tuple[mpmath.mpf, mpmath.mpf]]] = {}


def _gauss_nodes() -> list[tuple[mpmath.mpf, mpmath.mpf]]:
    """Gauss–Legendre nodes and weights on [−1, 1] at the working precision."""
    precision = mpmath.mp.prec
    if precision not in _GAUSS_CACHE:
        _GAUSS_CACHE[precision] = GaussLegendre(mpmath.mp).calc_nodes(GAUSS_DEGREE, precision)
    return _GAUSS_CACHE[precision]


def _matvec(matrix: list[list[mpmath.mpf]], vector: list[mpmath.mpf]) -> list[mpmath.mpf]:
    return [mpmath.fsum(row[k] * vector[k] for k in range(len(vector))) for row in matrix]


def _matvec_plain(matrix: list[list[mpmath.mpf]], vector: list[mpmath.mpf]) -> list[mpmath.mpf]:
    """The same product summed left to right (long histories: thousands of steps)."""
    result = []
    for row in matrix:
        total = row[0] * vector[0]
        for k in range(1, len(vector)):
            total += row[k] * vector[k]
        result.append(total)
    return result


def _expm(matrix: list[list[mpmath.mpf]], h: mpmath.mpf) -> list[list[mpmath.mpf]]:
    return [list(row) for row in _expm_kept(tuple(tuple(row) for row in matrix), h, mpmath.mp.prec)]


@lru_cache(maxsize=4096)
def _expm_kept(matrix: tuple, h: mpmath.mpf, precision: int) -> tuple:
    """e^{matrix·h} (kept: repeated pulses and repeated checks of one case reuse it)."""
    result = mpmath.expm(mpmath.matrix([list(row) for row in matrix]) * h)
    size = len(matrix)
    return tuple(tuple(result[i, j] for j in range(size)) for i in range(size))


def _rates(a: list[mpmath.mpf], rho: mpmath.mpf) -> tuple[mpmath.mpf, mpmath.mpf]:
    """For the quadrature step only: the fastest oscillation or growth of the free response
    (max |Im λ| + max(Re λ, 0)) and the fastest decay (max −Re λ), from approximate roots of
    the characteristic polynomial (mpmath.polyroots on the polynomial scaled by ρ). Without
    roots, ρ for both (small steps, no grading). The accuracy of the integration does not
    depend on these numbers, only its cost."""
    n = len(a) - 1
    try:
        roots = mpmath.polyroots([a[i] * rho ** i for i in range(n, -1, -1)], maxsteps=200,
                                 extraprec=60)
    except (mpmath.NoConvergence, ZeroDivisionError, ValueError):
        return rho, rho
    roots = [mpmath.mpc(r) * rho for r in roots]
    oscillation = max([abs(r.imag) + max(r.real, 0) for r in roots] + [mpmath.mpf(0)])
    decay = max([-r.real for r in roots] + [mpmath.mpf(0)])
    return oscillation, decay


class _SymbolicLoads:
    """The load as the integrator sees it, from the problem's sympy segments (short histories:
    the load on an interval is the sympy sum of the branches active there)."""

    long_history = False

    def __init__(self, problem: _Problem) -> None:
        self.problem = problem
        self.kicks = [(_mp(i.at, None, INTEGRATION_DIGITS), _mp(i.size, None, INTEGRATION_DIGITS))
                      for i in problem.impulses]

    def cuts(self, until: mpmath.mpf) -> list[mpmath.mpf]:
        cuts = [mpmath.mpf(0), until]
        for time in self.problem.breakpoints():
            number = _mp(time, None, INTEGRATION_DIGITS)
            if 0 < number < until and not any(_same_time(number, c, until) for c in cuts):
                cuts.append(number)
        cuts.sort()
        return cuts

    def kicks_at(self, time: mpmath.mpf, until: mpmath.mpf) -> list[mpmath.mpf]:
        return [size for at, size in self.kicks if _same_time(at, time, until)]

    def on(self, lo: mpmath.mpf, hi: mpmath.mpf) -> tuple:
        """("free",), ("polynomial", p, [load⁽q⁾(lo) for q ≤ p]) or ("general", f, rates)."""
        load = _load_on(self.problem, lo, hi, {})
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
        rates = [_mp(s.rate, None, INTEGRATION_DIGITS) for s in self.problem.segments
                 if s.rate is not None and s.value.has(T) and _mp(s.start, None) <= mid
                 and (s.end is None or mid < _mp(s.end, None))]
        function = _function([load])
        return ("general", lambda time: function(time)[0], rates)


def _integrate(problem: Any, loads: Any = None, output: Sequence | None = None) -> _Trajectory:
    """Integrate a_n x⁽ⁿ⁾ + … + a_0 x = b·load(t) at 40 digits (numeric problem only).

    Method (chosen to share nothing with the Laplace route of the derivation): the state
    z = (x, x'/ρ, …, x⁽ⁿ⁻¹⁾/ρⁿ⁻¹) of the companion system z' = A z + β·load, ρ a bound on the
    poles (Fujiwara), is carried across uniform steps h of each interval between the load's
    own breakpoints by the variation-of-constants formula
    z(t+h) = e^{Ah} z(t) + ∫₀ʰ e^{A(h−s)} e_n β load(t+s) ds, with e^{Ah} from mpmath's matrix
    exponential (Taylor series with scaling and squaring). The integral is
      * 0 where no load acts;
      * exact where the load is a polynomial of degree p on the interval: the load and its
        derivatives become p + 1 extra states (w_q' = w_{q+1}) of an augmented matrix whose
        exponential carries both (Van Loan's construction);
      * otherwise (half-sine, formula) 12-point Gauss–Legendre quadrature with the step held
        to h·(ν + Ω) ≤ 2 (ν the load's own angular rate, Ω the fastest oscillation of the free
        response), where its error term (h·rate)^24·(12!)^4/(24!)^3 is below 1e-29. Fast
        decaying modes (stiff systems) are resolved by grading each step geometrically
        towards its end, [0, h/2], [h/2, 3h/4], …, down to a width of 2/(fastest decay).
    Impulses add b·J/a_n to x⁽ⁿ⁻¹⁾ at their instant. Every interval is cut into at least two
    sample divisions and, in proportion to its length, enough more that the interior division
    nodes (never a breakpoint) give at least SAMPLES comparison points over the window.
    Steps of equal length share their matrix exponentials (for long histories the lengths are
    compared to INTEGRATION_DIGITS − 5 digits, so that the thousands of equal table intervals
    need only a few).

    ``loads`` gives the load on each interval (default: from the problem's sympy segments).
    ``output`` (weights c_i) samples Σ c_i x⁽ⁱ⁾ instead of x (inputs with derivatives).
    """
    loads = loads if loads is not None else _SymbolicLoads(problem)
    with mpmath.workdps(INTEGRATION_DIGITS):
        equation = problem.equation
        n = equation.order
        a = [_mp(equation.a(i), None, INTEGRATION_DIGITS) for i in range(n + 1)]
        b = _mp(equation.scale, None, INTEGRATION_DIGITS)
        until = _mp(problem.until, None, INTEGRATION_DIGITS)
        if not until > 0:
            raise ValueError(f"the analysis window ends at {_short(until)} s")
        if a[n] == 0:
            raise ValueError("the leading coefficient is 0")
        bounds = [2 * abs(a[i] / a[n]) ** (mpmath.mpf(1) / (n - i)) for i in range(n) if a[i] != 0]
        rho = max(bounds + [1 / until])
        A = [[mpmath.mpf(0)] * n for _ in range(n)]
        for i in range(n - 1):
            A[i][i + 1] = rho
        for i in range(n):
            A[n - 1][i] += -(a[i] / a[n]) * rho ** (i - n + 1)
        beta = b / (a[n] * rho ** (n - 1))
        z = [_mp(problem.initial[i], None, INTEGRATION_DIGITS) / rho ** i for i in range(n)]
        oscillation, decay = None, None
        weights = None if output is None else [output[i] * rho ** i for i in range(n)]

        def sampled(state):
            return state[0] if weights is None else mpmath.fsum(w * v for w, v in zip(weights, state))

        cuts = loads.cuts(until)
        multiply = _matvec_plain if loads.long_history else _matvec

        cache: dict[tuple, Any] = {}
        samples: list[tuple[mpmath.mpf, mpmath.mpf]] = []
        largest = abs(sampled(z))
        steps = 0
        capped = False
        for lo, hi in zip(cuts, cuts[1:]):
            for size in loads.kicks_at(lo, until):
                z[n - 1] += b * size / a[n] / rho ** (n - 1)
            largest = max(largest, abs(sampled(z)))
            length = hi - lo
            load = loads.on(lo, hi)
            divisions = max(2, int(mpmath.ceil(SAMPLES * length / until)) + 1)
            per_division = 1
            if load[0] == "free":
                kind: tuple = ("free",)
            elif load[0] == "polynomial":
                kind = ("polynomial", load[1])
            else:
                if oscillation is None:
                    oscillation, decay = _rates(a, rho)
                rates = load[2]
                nu = max(rates) if rates else 32 / length
                needed = int(mpmath.ceil(length * (abs(nu) + oscillation) / 2))
                per_division = max(1, -(-needed // divisions))
                if divisions * per_division > STEP_LIMIT:
                    per_division, capped = max(1, STEP_LIMIT // divisions), True
                kind = ("general",)
            count = divisions * per_division
            h = length / count
            if loads.long_history:                     # equal lengths to 35 digits: one step
                h = mpmath.mpf(mpmath.nstr(h, INTEGRATION_DIGITS - 5, strip_zeros=False))
            key = kind + (h,)
            if kind[0] == "polynomial":
                p = kind[1]
                size = n + p + 1
                if key not in cache:
                    M = [[mpmath.mpf(0)] * size for _ in range(size)]
                    for i in range(n):
                        M[i][:n] = A[i]
                    M[n - 1][n] = rho                  # z_(n-1)' gets ρ·w_0 = β·load
                    for q in range(p):
                        M[n + q][n + q + 1] = rho      # w_q' = ρ·w_(q+1)
                    cache[key] = _expm(M, h)
                state = list(z)
                for q in range(p + 1):                 # w_q = β·load⁽q⁾(lo)/ρ^(q+1)
                    state.append(beta * load[2][q] / rho ** (q + 1))
            else:
                state = list(z)
                if key not in cache:
                    cache[key] = _expm(A, h) if kind[0] == "free" else \
                        (_expm(A, h), _quadrature_vectors(A, beta, h, decay))
            if kind[0] == "general":
                propagator, vectors = cache[key]
                load_function = load[1]
            else:
                propagator = cache[key]
            for k in range(1, count + 1):
                start = lo + (k - 1) * h
                state = multiply(propagator, state)
                if kind[0] == "general":
                    for s, vector in vectors:
                        value = load_function(start + s)
                        for i in range(n):
                            state[i] += vector[i] * value
                steps += 1
                largest = max(largest, abs(sampled(state)))
                if k < count and k % per_division == 0:
                    samples.append((lo + k * h, sampled(state)))
            z = state[:n]
        return _Trajectory(samples, largest, steps, capped)


def _quadrature_vectors(A: list[list[mpmath.mpf]], beta: mpmath.mpf, h: mpmath.mpf,
                        decay: mpmath.mpf) -> list[tuple[mpmath.mpf, list[mpmath.mpf]]]:
    """Nodes s and vectors w·β·e^{A(h−s)}e_n of the quadrature of one step (graded to its end
    where the free response decays faster than the step can resolve)."""
    n = len(A)
    ends = [mpmath.mpf(0)]
    width = h
    while width * decay > 2 and len(ends) < 200:
        width /= 2
        ends.append(h - width)
    ends.append(h)
    vectors = []
    for left, right in zip(ends, ends[1:]):
        for xi, weight in _gauss_nodes():
            s = left + (right - left) * (1 + xi) / 2
            column = [row[n - 1] for row in _expm(A, h - s)]
            vectors.append((s, [(right - left) * weight / 2 * beta * c for c in column]))
    return vectors


def _polynomial_value(polynomial: sympy.Expr, time: mpmath.mpf) -> mpmath.mpf:
    coefficients = [_mp(c, None, INTEGRATION_DIGITS) for c in sympy.Poly(polynomial, T).all_coeffs()]
    return mpmath.polyval(coefficients, time)


def _spread(samples: list, cap: int | None) -> list:
    """At most ``cap`` of the samples, evenly spread over the list (all of them without cap)."""
    if cap is None or len(samples) <= cap:
        return samples
    return [samples[(i * (len(samples) - 1)) // (cap - 1)] for i in range(cap)]


def _integration_check(problem: Any, label: str = "", peak: Any = None) -> Check:
    def run() -> tuple[bool, str]:
        if getattr(problem.equation, "inputs", ()):
            trajectory = _integrate_with_inputs(problem)
        else:
            trajectory = _integrate(problem, problem.integration_loads())
        samples = _spread(trajectory.samples, problem.sample_cap)
        starts = problem.piece_starts(INTEGRATION_DIGITS)
        functions: dict[int, Callable] = {}
        worst, where = mpmath.mpf(0), None
        with mpmath.workdps(INTEGRATION_DIGITS):
            for time, value in samples:
                index = bisect.bisect_right(starts, time) - 1
                if index < 0:
                    return False, f"no piece covers t = {_short(time)} s"
                if index not in functions:
                    functions[index] = problem.value_function(index)
                difference = abs(functions[index](time) - value)
                if where is None or difference > worst:
                    worst, where = difference, time
            scale = max(trajectory.largest, TINY)
            passed = worst <= INTEGRATION_TOLERANCE * scale
        peak_note = f", the derivation's peak {float(peak):.6g}" if peak is not None else ""
        return passed, (f"max |x − x_integrated| = {_figure(worst)} at t = {_short(where)} s, "
                        f"{_figure(worst / scale)} of max |x_integrated| = {_figure(scale)}"
                        f"{peak_note} (limit {_figure(INTEGRATION_TOLERANCE)}; "
                        f"{len(samples)} points, {trajectory.steps} steps, "
                        f"{INTEGRATION_DIGITS}-digit matrix exponential and Gauss–Legendre"
                        + ("; step limit reached on a stiff interval, quadrature accuracy not "
                           "assured" if trajectory.capped else "") + ")")
    return _guard("independent integration" + (f" ({label})" if label else ""), run)


# ----------------------------------------------------------------------------- impulse areas


def _impulse_area_checks(case: Case, substitutions: Sequence[Mapping]) -> list[Check]:
    checks = []
    for load in case.loads:
        if load.shape == "impulse" or load.values.get("impulse") is None:
            continue

        def run(load: LoadSpec = load) -> tuple[bool, str]:
            branches, _ = _local_shape(load)
            parts, passed = [], True
            for values in substitutions:
                with mpmath.workdps(AREA_DIGITS):
                    area = mpmath.mpf(0)
                    for lo, hi, value, _rate in branches:
                        if hi is None:
                            raise ValueError("the pulse has no end")
                        expr = _subs(sympy.sympify(value), values)
                        if expr.free_symbols - {TAU}:
                            raise ValueError(f"no numeric value for {expr}")
                        function = _function([expr], TAU)
                        area += mpmath.quad(lambda u, f=function: f(u)[0],
                                            [_mp(lo, values), _mp(hi, values)])
                    stated = _mp(load.values["impulse"], values)
                    difference = abs(area - stated) / max(abs(stated), TINY)
                passed = passed and difference <= AREA_TOLERANCE
                parts.append(f"∫ load dt = {mpmath.nstr(area, 12)} vs stated "
                             f"{mpmath.nstr(stated, 12)} (relative difference {_figure(difference)})")
            return passed, "; ".join(parts) + f" (limit {_figure(AREA_TOLERANCE)}, mpmath.quad " \
                f"of the {load.shape} shape at {AREA_DIGITS} digits)"
        checks.append(_guard(f"impulse of {load.key}", run))
    return checks


# ----------------------------------------------------------------------------- symbols


def _resolved_values(case: Case) -> dict[sympy.Symbol, sympy.Expr]:
    """The declared values, with any value written in other symbols resolved."""
    values = {d.symbol: sympy.sympify(d.value) for d in case.symbols if d.value is not None}
    for _ in range(len(values) + 1):
        updated = {symbol: value.subs(values) for symbol, value in values.items()}
        if updated == values:
            break
        values = updated
    return values


def _order_kept(problem: _Problem, values: Mapping, regime: str | None) -> bool:
    try:
        starts = [_mp(p.start, values, 30) for p in problem.pieces]
        until = _mp(problem.until, values, 30)
        coefficients = [_mp(a, values, 30) for a in problem.equation.coefficients]
        for time in problem.breakpoints():
            _mp(time, values, 30)
    except (ValueError, TypeError):
        return False
    if not starts or starts[0] != 0 or any(not b > a for a, b in zip(starts, starts[1:])):
        return False
    if not starts[-1] < until or coefficients[0] == 0:
        return False
    if len(coefficients) == 3 and regime is not None:
        a2, a1, a0 = coefficients
        discriminant = a1 * a1 - 4 * a2 * a0
        wanted = {"undamped": a1 == 0,
                  "under-damped": discriminant < 0,
                  "over-damped": discriminant > 0,
                  "critically-damped": abs(discriminant) <= mpmath.mpf("1e-25") * a1 * a1}
        return wanted.get(regime, True)
    return True


def _regime(equation: _Equation, known: Mapping, stated: str | None) -> str | None:
    """The damping regime the pieces are valid in: from the sign of the discriminant (with
    the declared values put in) where that is decided, else as stated in the case."""
    if equation.order != 2:
        return None
    a2, a1, a0 = (sympy.sympify(a).subs(known) for a in equation.coefficients)
    if a1 == 0:
        return "undamped"
    discriminant = sympy.factor(sympy.simplify(a1**2 - 4 * a2 * a0))
    if discriminant.is_zero:
        return "critically-damped"
    if discriminant.is_negative:
        return "under-damped"
    if discriminant.is_positive:
        return "over-damped"
    return stated


def _draws(case: Case, problem: _Problem) -> list[dict[sympy.Symbol, sympy.Expr]]:
    """DRAWS seeded random positive substitutions that keep the pieces' order and regime.

    Each symbol without a value gets 0.25 … 4 (log-uniform, three significant digits, exact).
    A stated critically damped regime on symbols is kept by solving a² = 4·a₂·a₀ for one
    of the drawn symbols."""
    rng = random.Random(SEED)
    known = _resolved_values(case)
    unknown = [d.symbol for d in case.symbols if d.value is None]
    regime = _regime(problem.equation, known, case.system.regime)
    critical = None
    if regime == "critically-damped":
        a2, a1, a0 = (sympy.sympify(a).subs(known) for a in problem.equation.coefficients)
        critical = a1**2 - 4 * a2 * a0
        solvable = [s for s in unknown if critical.has(s)]
        if sympy.simplify(critical) == 0 or not solvable:
            critical = None
        else:
            critical = (critical, solvable[0])
    draws = []
    for _ in range(400):
        values = dict(known)
        for symbol in unknown:
            values[symbol] = sympy.Rational(round(1000 * math.exp(rng.uniform(math.log(0.25),
                                                                              math.log(4)))), 1000)
        if critical is not None:
            expression, symbol = critical
            others = {s: v for s, v in values.items() if s != symbol}
            roots = [r for r in sympy.solve(expression.subs(others), symbol)
                     if r.is_positive]
            if not roots:
                continue
            values[symbol] = roots[0]
        values = {s: sympy.sympify(v).subs(values) for s, v in values.items()}
        if _order_kept(problem, values, regime):
            draws.append(values)
            if len(draws) == DRAWS:
                break
    return draws


def _describe(values: Mapping) -> str:
    return ", ".join(f"{symbol} = {_short(value)}" for symbol, value in
                     sorted(values.items(), key=lambda item: str(item[0])))


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
INPUT_PIECE_LIMIT = 400            # with input derivatives: per-piece checks up to this many
LONG_SAMPLES = 2000                # comparison points of the integration, at most
LONG_POINT_FRACTIONS = ("0.07", "0.41", "0.77")   # residual points per interval
PARSE_DIGITS = EXACT_DIGITS + 20   # numbers of the parsed pieces and loads
_U = sympy.Dummy("u", real=True)   # a piece's local time
_FALLING = [[math.perm(i, r) for r in range(i + 1)] for i in range(8)]   # i!/(i−r)!


with mpmath.workdps(PARSE_DIGITS):
    _SAME = mpmath.mpf("1e-30")        # _same_time's tolerance, made once


def _close(a: mpmath.mpf, b: mpmath.mpf, scale: mpmath.mpf) -> bool:
    """_same_time for the long route (the tolerance made once, not per call)."""
    return abs(a - b) <= _SAME * max(abs(a), abs(b), scale)


class _OutsideStructure(Exception):
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


class _Parser:
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
            raise _OutsideStructure(f"{expr} is not real")
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
                    raise _OutsideStructure(f"{expr} is not linear")
                s, q = s * dq + q * ds, q * dq
            return s, q
        raise _OutsideStructure(f"{expr} is not linear in {self.variable}")

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
                raise _OutsideStructure(f"{expr}: not a polynomial power")
            try:
                s, q = self.linear(base)
                return [_Term(mpmath.mpf(1), ((s, q, int(exponent)),), zero, zero, True)]
            except _OutsideStructure:
                pass
            result = [_constant_term(mpmath.mpf(1))]
            for _ in range(int(exponent)):
                result = [product for left in result for right in self._terms(base)
                          for product in left.times(right)]
            return result
        if len(expr.args) != 1:
            raise _OutsideStructure(f"{expr}: outside the exp·cos/sin·polynomial structure")
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
        raise _OutsideStructure(f"{expr}: outside the exp·cos/sin·polynomial structure")


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
        self.floats = _has_float(expr)
        self.weights = list(weights)
        derivatives = [expr]
        for _ in range(len(weights) - 1):
            derivatives.append(sympy.diff(derivatives[-1], variable))
        self.functions = [_function(list(_terms(d)), variable) for d in derivatives]

    def terms_at(self, time: mpmath.mpf, orders: int) -> list[list[mpmath.mpf]]:
        v = time - self.origin
        return [self.functions[i](v) for i in range(orders + 1)]

    def residual_terms(self, time: mpmath.mpf) -> list[mpmath.mpf]:
        values = self.terms_at(time, len(self.weights) - 1)
        return [a * v for a, terms in zip(self.weights, values) if a != 0 for v in terms]


def _long_number(value: sympy.Expr) -> mpmath.mpf:
    """A real number at PARSE_DIGITS (exact rationals directly, anything else through sympy)."""
    return _long_number_kept(sympy.sympify(value))


@lru_cache(maxsize=1 << 16)
def _long_number_kept(value: sympy.Expr) -> mpmath.mpf:
    with mpmath.workdps(PARSE_DIGITS):
        if value.is_Rational:
            return mpmath.mpf(int(value.p)) / int(value.q)
        if value.is_Float:
            return +mpmath.mpf(value._mpf_)
        return +_mp(value, None, PARSE_DIGITS)


@dataclass
class _LongPiece:
    start: sympy.Expr
    end: sympy.Expr | None
    lo: mpmath.mpf
    function: Any                  # _Smooth or _Differentiated


@dataclass(frozen=True)
class _Branch:
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


def _numeric_branches(loads: Sequence[LoadSpec]) -> tuple[list[_Branch], list[_Impulse]]:
    """The loads from their own definitions (the shape table; table rows interpolated)."""
    branches: list[_Branch] = []
    impulses: list[_Impulse] = []
    infinity = mpmath.inf
    for load in loads:
        local: list[tuple] = []                 # (from, to, origin offset, poly, function, rate)
        if load.shape == "table":
            points = [(_long_number(t), _long_number(v)) for t, v in load.points]
            with mpmath.workdps(PARSE_DIGITS):
                for (t0, v0), (t1, v1) in zip(points, points[1:]):
                    if t1 == t0:
                        continue                               # a jump: two rows at one time
                    local.append((t0, t1, t0, (v0, (v1 - v0) / (t1 - t0)), None, None))
            kicks: list = []
        else:
            shape_branches, kicks = _local_shape(load)
            for lo, hi, value, rate in shape_branches:
                value = sympy.sympify(value)
                if value.free_symbols - {TAU}:
                    raise ValueError(f"no numeric value for {value}")
                top = infinity if hi is None else _long_number(hi)
                if value.is_polynomial(TAU):
                    poly = tuple(_long_number(c) for c in reversed(sympy.Poly(value, TAU).all_coeffs()))
                    local.append((_long_number(lo), top, mpmath.mpf(0), poly, None, None))
                else:
                    local.append((_long_number(lo), top, mpmath.mpf(0), None,
                                  _function([value], TAU), _long_number(rate)))
        for start in load.starts():
            origin = _long_number(start)
            with mpmath.workdps(PARSE_DIGITS):
                for lo, hi, offset, poly, function, rate in local:
                    branches.append(_Branch(load.key, origin + lo, origin + hi, origin + offset,
                                            poly, function, rate))
            for at, size in kicks:
                impulses.append(_Impulse(load.key, start + at, size))
    return branches, impulses


class _NumericLoads:
    """The load history with numbers: sorted breakpoints and, for each elementary interval
    between two of them, the branches acting there (found by bisection)."""

    long_history = True        # the integrator shares steps of equal length, sums plainly

    def __init__(self, branches: list[_Branch], impulses: list[tuple[mpmath.mpf, mpmath.mpf]],
                 until: mpmath.mpf) -> None:
        with mpmath.workdps(PARSE_DIGITS):
            self._build(branches, impulses, until)

    def _build(self, branches: list[_Branch], impulses: list[tuple[mpmath.mpf, mpmath.mpf]],
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
        self.active: list[tuple[_Branch, ...]] = []
        current: list[_Branch] = []
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

    def acting(self, time: mpmath.mpf) -> tuple[_Branch, ...]:
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
class _LongProblem:
    """A numeric case with many pieces: equation, loads and pieces with numbers."""

    equation: _Equation
    impulses: tuple[_Impulse, ...]
    initial: tuple[sympy.Expr, ...]
    until: sympy.Expr
    pieces: list[_LongPiece]
    loads: _NumericLoads
    a: list[mpmath.mpf]            # a_0 … a_n at PARSE_DIGITS
    b: mpmath.mpf

    sample_cap = LONG_SAMPLES

    def integration_loads(self) -> _NumericLoads:
        return self.loads

    def piece_starts(self, dps: int) -> list[mpmath.mpf]:
        return [piece.lo for piece in self.pieces]

    def value_function(self, index: int) -> Callable[[mpmath.mpf], mpmath.mpf]:
        function = self.pieces[index].function
        return lambda time: mpmath.fsum(function.terms_at(time, 0)[0])

    def impulses_at(self, time: mpmath.mpf) -> list[_Impulse]:
        """The impulses acting at ``time`` (to 1e-30 of the window)."""
        if not hasattr(self, "_kicks"):
            ordered = sorted(((_long_number(i.at), i) for i in self.impulses),
                             key=lambda item: item[0])
            self._kicks = ([i for _, i in ordered], [at for at, _ in ordered],
                           _long_number(self.until))
        impulses, times, until = self._kicks
        return _NumericLoads.near(impulses, times, time, until)


def _read_piece(piece: Any, start: mpmath.mpf, local_parser: _Parser, global_parser: _Parser,
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
        parser, origin, variable = local_parser, start, _U
        try:
            parser.floats = False
            entries = []
            with mpmath.workdps(PARSE_DIGITS):
                for mode, coefficient in terms.items():
                    c = parser.number(sympy.sympify(coefficient))
                    entries += [(c, parser.prepared(term, weights)) for term in parser.mode(mode)]
            return _Smooth(entries, origin, parser.floats, weights)
        except _OutsideStructure:
            expr = sympy.Add(*[sympy.sympify(c) * m.expression(_U) for m, c in terms.items()])
    elif callable(getattr(local, "expression", None)):
        parser, origin, variable = local_parser, start, _U
        expr = sympy.sympify(local.expression(_U))
    else:
        parser, origin, variable = global_parser, mpmath.mpf(0), T
        expr = sympy.sympify(piece.expression(T))
    try:
        parser.floats = False
        entries = [(mpmath.mpf(1), _prepare(term, weights)) for term in parser.terms(expr)]
        return _Smooth(entries, origin, parser.floats, weights)
    except _OutsideStructure:
        return _Differentiated(expr, variable, origin, weights)


def _is_long(case: Case, derivation: Any) -> bool:
    return not case.symbols and len(derivation.pieces) > LONG_HISTORY


def _long_problem(derivation: Any) -> _LongProblem:
    case: Case = derivation.case
    equation = _equation(case.system)
    n = equation.order
    a = [_long_number(equation.a(i)) for i in range(n + 1)]
    b = _long_number(equation.scale)
    initial = tuple(sympy.sympify(v) for v in case.initial) if case.initial is not None \
        else (sympy.S.Zero,) * n
    if len(initial) != n:
        raise ValueError(f"{len(initial)} initial values for an equation of order {n}")
    until = sympy.sympify(derivation.window.until)
    until_number = _long_number(until)
    branches, impulses = _numeric_branches(case.loads)
    kicks = [(_long_number(i.at), _long_number(i.size)) for i in impulses]
    loads = _NumericLoads(branches, kicks, until_number)
    local_parser, global_parser = _Parser(_U), _Parser(T)
    pieces = []
    for piece in derivation.pieces:
        start = sympy.sympify(piece.start)
        end = None if piece.end is None else sympy.sympify(piece.end)
        lo = _long_number(start)
        pieces.append(_LongPiece(start, end, lo, _read_piece(piece, lo, local_parser,
                                                              global_parser, a)))
    return _LongProblem(equation, tuple(impulses), initial, until, pieces, loads, a, b)


def _digits(floats: bool) -> tuple[int, mpmath.mpf]:
    return (FLOAT_DIGITS, FLOAT_TOLERANCE) if floats else (EXACT_DIGITS, EXACT_TOLERANCE)


def _cancellation(values: Sequence[mpmath.mpf]) -> mpmath.mpf:
    """|Σ values| relative to Σ |values| (working precision)."""
    return abs(mpmath.fsum(values)) / max(mpmath.fsum(values, absolute=True), TINY)


def _mismatch(left: Sequence[mpmath.mpf], right: Sequence[mpmath.mpf],
              jump: mpmath.mpf) -> mpmath.mpf:
    """|Σ right − Σ left − jump| relative to the sum of the magnitudes (working precision)."""
    mismatch = abs(mpmath.fsum(right) - mpmath.fsum(left) - jump)
    magnitude = mpmath.fsum(right, absolute=True) + mpmath.fsum(left, absolute=True) + abs(jump)
    return mismatch / max(magnitude, TINY)


def _route(kinds: set[bool], points: str) -> str:
    """How the numbers were made (``kinds``: pieces with float coefficients or not)."""
    if kinds == {True}:
        return f"{FLOAT_DIGITS}-digit evaluation{points}; coefficients are 30-digit floats"
    if kinds == {False}:
        return f"{EXACT_DIGITS}-digit evaluation{points}; exact coefficients, evaluated numerically"
    return (f"{FLOAT_DIGITS}-digit evaluation of the pieces with 30-digit float coefficients "
            f"(limit {_figure(FLOAT_TOLERANCE)}), {EXACT_DIGITS}-digit of the exact ones (limit "
            f"{_figure(EXACT_TOLERANCE)}){points}")


def _long_ends(problem: _LongProblem) -> list[mpmath.mpf]:
    """Where each piece ends: its stated end, or the end of the window for the last."""
    if not hasattr(problem, "_ends"):
        until = _long_number(problem.until)
        problem._ends = [_long_number(p.end) if p.end is not None else until
                         for p in problem.pieces]
    return problem._ends


def _long_residual_check(problem: _LongProblem) -> Check:
    count = len(problem.pieces)

    def run() -> tuple[bool, str]:
        b = problem.b
        worst = None                         # (ratio / limit, ratio, limit, time, index)
        over: list[int] = []
        kinds: set[bool] = set()
        changes: dict[int, list[mpmath.mpf]] = {}
        for index, (piece, hi) in enumerate(zip(problem.pieces, _long_ends(problem))):
            lo = piece.lo
            if not hi > lo:
                return False, (f"piece {index + 1}: the interval ({_short(lo)}, {_short(hi)}) is "
                               "empty or reversed")
            floats = piece.function.floats
            kinds.add(floats)
            dps, limit = _digits(floats)
            inside = problem.loads.inside(lo, hi)
            if inside:
                changes[index] = inside
            bounds = [lo] + inside + [hi]
            largest, where = mpmath.mpf(0), None
            with mpmath.workdps(dps):
                for x, y in zip(bounds, bounds[1:]):
                    acting = problem.loads.acting((x + y) / 2)
                    for fraction in LONG_POINT_FRACTIONS:
                        time = x + (y - x) * mpmath.mpf(fraction)
                        values = piece.function.residual_terms(time)
                        values += [-b * branch.value(time) for branch in acting]
                        ratio = _cancellation(values)
                        if where is None or ratio > largest:
                            largest, where = ratio, time
            if largest > limit:
                over.append(index)
            if worst is None or largest / limit > worst[0]:
                worst = (largest / limit, largest, limit, where, index)
        _, largest, limit, where, index = worst
        ends = _long_ends(problem)

        def interval(i: int) -> str:
            text = f"({_short(problem.pieces[i].lo)}, {_short(ends[i])})"
            if i in changes:
                text += " where the load changes inside the piece at t = " + \
                    ", ".join(_short(t) for t in changes[i][:5])
            return text
        failed = ""
        if over:
            failed = (f"{len(over)} of {count} pieces over the limit, the first on "
                      f"{interval(over[0])}; ")
        return not over, (f"{failed}max |residual|/scale = {_figure(largest)} at t = "
                          f"{_short(where)} s on {interval(index)} (limit {_figure(limit)}; "
                          + _route(kinds, f" at {len(LONG_POINT_FRACTIONS)} points per interval "
                                          f"between load breakpoints") + ")")
    return _guard(f"ode residual on {count} pieces", run)


def _jump(problem: _LongProblem, kicks: Sequence[_Impulse]) -> mpmath.mpf:
    """b·ΣJ/a_n (numbers)."""
    with mpmath.workdps(PARSE_DIGITS):
        return problem.b * mpmath.fsum(_long_number(k.size) for k in kicks) / \
            problem.a[problem.equation.order]


def _long_initial_check(problem: _LongProblem) -> Check:
    def run() -> tuple[bool, str]:
        n = problem.equation.order
        function = problem.pieces[0].function
        kicks = problem.impulses_at(mpmath.mpf(0))
        jump = _jump(problem, kicks)
        dps, limit = _digits(function.floats)
        worst, label = mpmath.mpf(0), ""
        with mpmath.workdps(dps):
            derivatives = function.terms_at(mpmath.mpf(0), n - 1)
            for j in range(n):
                expected = _long_number(problem.initial[j]) + (jump if j == n - 1 else 0)
                ratio = _mismatch([], derivatives[j], expected)
                if ratio > worst or not label:
                    worst, label = ratio, f"{_name_of_derivative(j)}(0+)"
        given = "at rest" if all(_is_zero(v) for v in problem.initial) else "as given"
        extra = f"; impulse of {', '.join(k.load for k in kicks)} at t = 0" if kicks else ""
        return worst <= limit, (f"initial state {given}{extra}: max |mismatch|/scale = "
                                f"{_figure(worst)} in {label} (limit {_figure(limit)}; "
                                f"{dps}-digit evaluation)")
    return _guard("initial values", run)


def _long_breakpoint_checks(problem: _LongProblem) -> list[Check]:
    n = problem.equation.order
    pieces = problem.pieces
    count = len(pieces) - 1
    names = [_name_of_derivative(j) for j in range(n)]

    def run() -> tuple[bool, str]:
        worst = None                          # (ratio / limit, ratio, limit, label)
        over: list[str] = []
        kinds: set[bool] = set()
        jumps: list[tuple[mpmath.mpf, list[_Impulse]]] = []
        for index in range(count):
            time = pieces[index + 1].lo
            kicks = problem.impulses_at(time)
            jump = _jump(problem, kicks)
            if kicks:
                jumps.append((time, kicks))
            left, right = pieces[index].function, pieces[index + 1].function
            floats = left.floats or right.floats
            kinds.add(floats)
            dps, limit = _digits(floats)
            with mpmath.workdps(dps):
                before = left.terms_at(time, n - 1)
                after = right.terms_at(time, n - 1)
                largest, label = mpmath.mpf(0), ""
                for j in range(n):
                    ratio = _mismatch(before[j], after[j], jump if j == n - 1 else mpmath.mpf(0))
                    if ratio > largest or not label:
                        largest, label = ratio, f"{names[j]} at t = {_short(time)}"
            if largest > limit:
                over.append(label)
            if worst is None or largest / limit > worst[0]:
                worst = (largest / limit, largest, limit, label)
        if worst is None:
            return True, "one piece, no boundary"
        _, largest, limit, label = worst
        rule = f"{', '.join(names)} continuous"
        if jumps:
            shown = ", ".join(_short(time) for time, _ in jumps[:5]) + (", …" if len(jumps) > 5 else "")
            loads = sorted({k.load for _, kicks in jumps for k in kicks})
            rule = (f"{', '.join(names[:-1])} continuous; " if n > 1 else "") + \
                f"{names[-1]} jumps by b·J/a_n at t = {shown} (impulse of {', '.join(loads)})"
        failed = f"{len(over)} of {count} boundaries fail, the first in {over[0]}; " if over else ""
        return not over, (f"{rule}: {failed}max |mismatch|/scale = {_figure(largest)} in {label} "
                          f"(limit {_figure(limit)}; " + _route(kinds, "") + ")")
    checks = [_guard(f"breakpoint conditions at {count} boundaries", run)] if count else []

    until = _long_number(problem.until)
    known = [piece.lo for piece in pieces[1:]]
    return checks + _impulses_off_boundaries(
        problem.impulses, n, until, _long_number,
        lambda at: bool(_NumericLoads.near(known, known, at, until)))


def _long_checks(case: Case, problem: _LongProblem, peak: Any) -> list[Check]:
    checks = [_coverage_check(problem, {}, _long_number)]
    checks.append(_long_residual_check(problem))
    checks.append(_long_initial_check(problem))
    checks += _long_breakpoint_checks(problem)
    checks.append(_integration_check(problem, peak=peak))
    return checks + _impulse_area_checks(case, [{}])


# ----------------------------------------------------------------------------- entry point


def _numeric_checks(problem: _Problem, peak: Any) -> list[Check]:
    checks = [_coverage_check(problem, {})]
    checks += _residual_checks(problem, {}, (), symbolic=False)
    checks.append(_initial_check(problem, {}, (), symbolic=False))
    checks += _breakpoint_checks(problem, {}, (), symbolic=False)
    checks.append(_integration_check(problem, peak=peak))
    return checks


def verify(derivation: Any) -> list[Check]:
    """The independent checks of one derivation (see the module docstring).

    Never raises: whatever cannot be evaluated is a failed check saying why.
    """
    try:
        case: Case = derivation.case
        inputs = _equation(case.system).inputs
        if inputs and len(derivation.pieces) > INPUT_PIECE_LIMIT:
            return [Check("verification", False, f"derivatives of the input act on more than "
                          f"{INPUT_PIECE_LIMIT} pieces, more than these checks take (the "
                          "long-history checks do not carry them)", inconclusive=True)]
        long = _is_long(case, derivation) and not inputs   # (inputs: the per-piece checks)
        problem: Any = _long_problem(derivation) if long else _problem(derivation)
    except Exception as error:  # noqa: BLE001 - reported as a failed check
        return [Check("verification set-up", False,
                      f"could not read the case or the pieces: {type(error).__name__}: {error}")]
    results = getattr(derivation, "numbers", None)
    peak = getattr(getattr(results, "peak", None), "value", None)

    try:
        if long:
            return _long_checks(case, problem, peak)
        return _checks(case, problem, peak)
    except Exception as error:  # noqa: BLE001 - reported as a failed check
        return [Check("verification", False,
                      f"the checks could not be completed: {type(error).__name__}: {error}")]


def _checks(case: Case, problem: _Problem, peak: Any) -> list[Check]:
    if not case.symbols:
        return _numeric_checks(problem, peak) + _impulse_area_checks(case, [{}])

    if case.is_fully_valued:
        values = _resolved_values(case)
        numeric = _numeric_checks(problem.subs(values), peak)
        symbolic = _residual_checks(problem, values, [values], symbolic=True)
        return numeric[:1] + symbolic + numeric[1:] + _impulse_area_checks(case, [values])

    draws = _draws(case, problem)
    if not draws:
        return [Check("random substitutions", False,
                      "no positive substitution of the symbols without value keeps the order of "
                      "the pieces (and the damping regime) in 400 draws")]
    reference = draws[0]
    checks = [_coverage_check(problem, reference)]
    checks += _residual_checks(problem, reference, draws, symbolic=True)
    checks.append(_initial_check(problem, reference, draws, symbolic=True))
    checks += _breakpoint_checks(problem, reference, draws, symbolic=True)
    for number, values in enumerate(draws, start=1):
        label = f"substitution {number} of {len(draws)}: {_describe(values)}"
        checks.append(_integration_check(problem.subs(values), label))
    return checks + _impulse_area_checks(case, draws)

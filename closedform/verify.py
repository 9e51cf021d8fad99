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
    """One independent check: its name, whether it passed, and the figure behind it."""

    name: str
    passed: bool
    detail: str


# ----------------------------------------------------------------------------- the model


@dataclass(frozen=True)
class _Equation:
    """a_n x⁽ⁿ⁾ + … + a_0 x = b · load(t), rebuilt from the model's parameters."""

    coefficients: tuple[sympy.Expr, ...]    # a_n … a_0
    scale: sympy.Expr                       # b

    @property
    def order(self) -> int:
        return len(self.coefficients) - 1

    def a(self, i: int) -> sympy.Expr:
        """The coefficient of x⁽ⁱ⁾."""
        return self.coefficients[self.order - i]

    def jump(self, impulse: sympy.Expr) -> sympy.Expr:
        """What an impulse J adds to x⁽ⁿ⁻¹⁾: integrate the equation across the impulse."""
        return self.scale * impulse / self.coefficients[0]

    def subs(self, values: Mapping) -> _Equation:
        return _Equation(tuple(_subs(a, values) for a in self.coefficients),
                         _subs(self.scale, values))


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
        return _Equation(tuple(sympy.sympify(p.get(f"a{i}", 0)) for i in range(order, -1, -1)),
                         one)
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


def _coverage_check(problem: _Problem, values: Mapping) -> Check:
    def run() -> tuple[bool, str]:
        pieces = problem.pieces
        if not pieces:
            return False, "the derivation has no pieces"
        until = _mp(problem.until, values)
        problems = []
        start = _mp(pieces[0].start, values)
        if start != 0:
            problems.append(f"the first piece starts at {_short(start)} s, not 0")
        previous = None
        for index, piece in enumerate(pieces):
            here = _mp(piece.start, values)
            if previous is not None and not here > previous:
                problems.append(f"piece {index + 1} starts at {_short(here)} s, not after "
                                f"{_short(previous)} s")
            if piece.end is not None:
                end = _mp(piece.end, values)
                if index + 1 == len(pieces):
                    if end < until and not _same_time(end, until, until):
                        problems.append(f"the last piece ends at {_short(end)} s, before "
                                        f"until = {_short(until)} s")
                else:
                    following = _mp(pieces[index + 1].start, values)
                    if not _same_time(end, following, until):
                        problems.append(f"piece {index + 1} ends at {_short(end)} s but piece "
                                        f"{index + 2} starts at {_short(following)} s")
            elif index + 1 != len(pieces):
                problems.append(f"piece {index + 1} is open-ended but not the last")
            previous = here
        if not _mp(pieces[-1].start, values) < until:
            problems.append(f"the last piece starts at or after until = {_short(until)} s")
        if problems:
            return False, "; ".join(problems)
        return True, f"{len(pieces)} pieces on [0, {_short(until)}] s, end to end"
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
    for term in _terms(sympy.expand(equation.scale * load)):
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
        jump = problem.equation.jump(sympy.Add(*[k.size for k in kicks]))
        pairs = []
        for j in range(n):
            expected = problem.initial[j] + (jump if j == n - 1 else 0)
            pairs.append((f"{_name_of_derivative(j)}(0+)", [], list(_terms(derivatives[j])),
                          expected))
        passed, detail = _compare(pairs, symbolic, fallbacks, sympy.S.Zero)
        given = "at rest" if all(_is_zero(v) for v in problem.initial) else "as given"
        extra = f"; impulse of {', '.join(k.load for k in kicks)} at t = 0" if kicks else ""
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
            jump = problem.equation.jump(sympy.Add(*[k.size for k in kicks]))
            left = problem.derivatives(index)
            right = problem.derivatives(index + 1)
            pairs = []
            for j in range(n):
                pairs.append((f"{_name_of_derivative(j)} at t = {_short(time)}",
                              list(_terms(left[j])), list(_terms(right[j])),
                              jump if j == n - 1 else sympy.S.Zero))
            passed, detail = _compare(pairs, symbolic, fallbacks, time)
            names = [_name_of_derivative(j) for j in range(n)]
            if kicks:
                size = sympy.simplify(jump) if symbolic else _short(_mp(jump, reference))
                rule = (f"{names[-1]} jumps by b·J/a_n = {size} "
                        f"(impulse of {', '.join(k.load for k in kicks)})")
                if n > 1:
                    rule = f"{', '.join(names[:-1])} continuous; {rule}"
            else:
                rule = f"{', '.join(names)} continuous"
            return passed, f"{rule}: {detail}"
        checks.append(_guard(f"breakpoint conditions at t = {_short(time)}{suffix}", run))

    # An impulse inside the window must sit on a piece boundary.
    until = _mp(problem.until, reference)
    known = [_mp(b, reference) for b in boundaries]
    for impulse in problem.impulses:
        def run_impulse(impulse: _Impulse = impulse) -> tuple[bool, str]:
            at = _mp(impulse.at, reference)
            if at <= 0 or at >= until or any(_same_time(at, b, until) for b in known):
                return True, ""
            return False, (f"the impulse of {impulse.load} acts at t = {_short(at)} s, where no "
                           f"piece ends: {_name_of_derivative(n - 1)} cannot jump there")
        check = _guard(f"breakpoint conditions at t = {_short(impulse.at)}{suffix}", run_impulse)
        if not check.passed:
            checks.append(check)
    return checks


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


def _integrate(problem: _Problem) -> _Trajectory:
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
    """
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

        cuts = [mpmath.mpf(0), until]
        for time in problem.breakpoints():
            number = _mp(time, None, INTEGRATION_DIGITS)
            if 0 < number < until and not any(_same_time(number, c, until) for c in cuts):
                cuts.append(number)
        cuts.sort()
        kicks = [(_mp(i.at, None, INTEGRATION_DIGITS), _mp(i.size, None, INTEGRATION_DIGITS))
                 for i in problem.impulses]

        cache: dict[tuple, Any] = {}
        samples: list[tuple[mpmath.mpf, mpmath.mpf]] = []
        largest = abs(z[0])
        steps = 0
        capped = False
        for lo, hi in zip(cuts, cuts[1:]):
            for at, size in kicks:
                if _same_time(at, lo, until):
                    z[n - 1] += b * size / a[n] / rho ** (n - 1)
            largest = max(largest, abs(z[0]))
            length = hi - lo
            load = _load_on(problem, lo, hi, {})
            divisions = max(2, int(mpmath.ceil(SAMPLES * length / until)) + 1)
            per_division = 1
            if load == 0:
                kind: tuple = ("free",)
            elif load.is_polynomial(T):
                kind = ("polynomial", sympy.Poly(load, T).degree())
            else:
                if oscillation is None:
                    oscillation, decay = _rates(a, rho)
                mid = (lo + hi) / 2
                rates = [_mp(s.rate, None, INTEGRATION_DIGITS) for s in problem.segments
                         if s.rate is not None and s.value.has(T) and _mp(s.start, None) <= mid
                         and (s.end is None or mid < _mp(s.end, None))]
                nu = max(rates) if rates else 32 / length
                needed = int(mpmath.ceil(length * (abs(nu) + oscillation) / 2))
                per_division = max(1, -(-needed // divisions))
                if divisions * per_division > STEP_LIMIT:
                    per_division, capped = max(1, STEP_LIMIT // divisions), True
                kind = ("general",)
            count = divisions * per_division
            h = length / count
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
                derivative = load
                state = list(z)
                for q in range(p + 1):                 # w_q = β·load⁽q⁾(lo)/ρ^(q+1)
                    state.append(beta * _polynomial_value(derivative, lo) / rho ** (q + 1))
                    derivative = sympy.diff(derivative, T)
            else:
                state = list(z)
                if key not in cache:
                    cache[key] = _expm(A, h) if kind[0] == "free" else \
                        (_expm(A, h), _quadrature_vectors(A, beta, h, decay))
            if kind[0] == "general":
                propagator, vectors = cache[key]
                load_function = _function([load])
            else:
                propagator = cache[key]
            for k in range(1, count + 1):
                start = lo + (k - 1) * h
                state = _matvec(propagator, state)
                if kind[0] == "general":
                    for s, vector in vectors:
                        value = load_function(start + s)[0]
                        for i in range(n):
                            state[i] += vector[i] * value
                steps += 1
                largest = max(largest, abs(state[0]))
                if k < count and k % per_division == 0:
                    samples.append((lo + k * h, state[0]))
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


def _integration_check(problem: _Problem, label: str = "", peak: Any = None) -> Check:
    def run() -> tuple[bool, str]:
        trajectory = _integrate(problem)
        starts = [_mp(p.start, None, INTEGRATION_DIGITS) for p in problem.pieces]
        functions: dict[int, Callable] = {}
        worst, where = mpmath.mpf(0), None
        with mpmath.workdps(INTEGRATION_DIGITS):
            for time, value in trajectory.samples:
                index = bisect.bisect_right(starts, time) - 1
                if index < 0:
                    return False, f"no piece covers t = {_short(time)} s"
                if index not in functions:
                    functions[index] = _function([problem.pieces[index].x])
                difference = abs(functions[index](time)[0] - value)
                if where is None or difference > worst:
                    worst, where = difference, time
            scale = max(trajectory.largest, TINY)
            passed = worst <= INTEGRATION_TOLERANCE * scale
        peak_note = f", the derivation's peak {float(peak):.6g}" if peak is not None else ""
        return passed, (f"max |x − x_integrated| = {_figure(worst)} at t = {_short(where)} s, "
                        f"{_figure(worst / scale)} of max |x_integrated| = {_figure(scale)}"
                        f"{peak_note} (limit {_figure(INTEGRATION_TOLERANCE)}; "
                        f"{len(trajectory.samples)} points, {trajectory.steps} steps, "
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
        problem = _problem(derivation)
    except Exception as error:  # noqa: BLE001 - reported as a failed check
        return [Check("verification set-up", False,
                      f"could not read the case or the pieces: {type(error).__name__}: {error}")]
    results = getattr(derivation, "results", None)
    peak = getattr(getattr(results, "peak", None), "value", None)
    try:
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

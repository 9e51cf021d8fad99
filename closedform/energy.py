"""Energy balance of a second-order response at every breakpoint, as an extra check.

Multiplying a₂x″ + a₁x′ + a₀x = b·f(t) by x′ and integrating from 0 to t gives

    W(t) = [E(t) − E(0)] + D(t),   E = ½a₂x′² + ½a₀x²,   D(t) = ∫₀ᵗ a₁x′² dt,
    W(t) = ∫₀ᵗ b·f·x′ dt + Σ b·J·(x′(tᵢ⁻) + x′(tᵢ⁺))/2  over the impulses J at tᵢ < t

(work done by the loads = kinetic + strain energy gained + energy dissipated; an impulse
does the work b·J times the mean of the velocities before and after it, which is the change
of ½a₂x′² it causes). For a spring-mass-damper these are joules (a₂ = m, a₁ = c, a₀ = k,
b = 1); for base excitation b = −m and the work is that of the effective force −m·a_g on
the relative motion; for a series RLC circuit the equation is multiplied by C first, so that
E = ½Li² + ½Cv², D = ∫Ri² dt and W = ∫v_s·i dt, again joules.

E(t) is taken from the pieces at the breakpoint (the value just before it), E(0) from the
case's initial values. The integrals W and D are evaluated independently of the closed
form, by quadrature of the pieces' derivative and of the load evaluated from each load's own
definition (the verification's independent load model), over spans cut at every breakpoint:

* up to SUMMARY_LIMIT pieces: mpmath.quad (Gauss–Legendre, 25 digits), spans at most one
  natural period long;
* longer histories: a fixed 8-point Gauss–Legendre rule in float64 (nodes from
  numpy.polynomial.legendre.leggauss) on spans of at most LONG_PHASE radians of the fastest
  mode or load, vectorised per piece and summed with compensation (math.fsum), so a
  thousand-segment history costs a fraction of a second. On such a span the rule's error is
  about (h·ω)^16·(8!)^4 / (17·(16!)^3) < 1e-22 of the integrand (Davis & Rabinowitz,
  Methods of Numerical Integration, 2nd ed., section 2.7, Gauss–Legendre error term; from
  memory), far below float rounding.

The balance closes when |W − ΔE − D| ≤ limit × (|W| + E(t) + E(0) + D + E_max), where E_max
is the largest kinetic + strain energy met at any quadrature node up to t: a window that ends
with the system back at rest (W, E and D all rounding noise at t) is judged against the
energy the motion actually had, not against nothing. The limit is 1e-12 at 25 digits and
1e-10 in float64 (rounding of a thousand spans summed, with a wide margin).

Models of other orders have no such energy and get no energy checks.
"""

from __future__ import annotations

import bisect
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import mpmath
import numpy
import sympy

from .results import FloatEvaluator, Interval, PreciseEvaluator, numeric_intervals, piece_functions
from .verify import (
    Check,
    T,
    _draws,
    _equation,
    _load_model,
    _long_number,
    _numeric_branches,
    _NumericLoads,
    _problem,
    _resolved_values,
)

DIGITS = 25                          # working precision of the quadrature
TOLERANCE = mpmath.mpf("1e-12")      # relative closure of the balance
SPANS_PER_PERIOD = 1                 # quadrature spans per natural period, at least
SUMMARY_LIMIT = 40                   # longer histories get one summarised energy check
FLOAT_TOLERANCE = 1e-10              # relative closure in float64 (long histories)
LONG_NODES = 8                       # Gauss–Legendre nodes per span in float64
LONG_PHASE = 0.5                     # radians of the fastest mode or load per span, at most

# The product cites the identity itself; book references with "from memory" stay in tests.
SOURCE = ("work-energy balance of the equation of motion (multiply by x′ and integrate); "
          "work–energy theorem")


def energy_checks(derivation) -> list[Check]:
    """One check per breakpoint (and at the end of the window) that the work done by the
    loads equals the kinetic and strain energy gained plus the energy dissipated."""
    case = derivation.case
    equation = _equation(case.system)
    if equation.order != 2 or equation.inputs or not derivation.pieces:
        return []     # (with derivatives of the input, the work of b_m f⁽ᵐ⁾ at a step is not defined)
    try:
        values = _substitution(derivation)
        if values is None:
            return [Check("energy balance", False, "no positive substitution of the symbols "
                          "without value keeps the order of the pieces and the damping regime")]
        if len(derivation.pieces) > SUMMARY_LIMIT and not case.symbols:
            return _summarised(_balance_in_floats(derivation, equation))
        return _summarised(_balance(derivation, equation, values))
    except Exception as error:  # noqa: BLE001 - reported as a failed check, never swallowed
        return [Check("energy balance", False,
                      f"could not be evaluated: {type(error).__name__}: {error}")]


def _substitution(derivation) -> dict | None:
    """The symbol values: none for a numeric case, the declared ones, or (symbols without
    value) the first of the verification's seeded random substitutions."""
    case = derivation.case
    if not case.symbols:
        return {}
    if case.is_fully_valued:
        return _resolved_values(case)
    draws = _draws(case, _problem(derivation))
    return draws[0] if draws else None


def _number(value, values: Mapping) -> mpmath.mpf:
    number = sympy.N(sympy.sympify(value).subs(values), DIGITS + 15)
    return mpmath.mpf(str(number))


@dataclass(frozen=True)
class _Balance:
    """The equation a₂x″ + a₁x′ + a₀x = b·f scaled to energies (×C for a circuit)."""

    a2: object
    a1: object
    a0: object
    b: object
    unit: str

    def energy(self, x, velocity):
        return (self.a2 * velocity**2 + self.a0 * x**2) / 2


def _scaled_equation(case, equation, values: Mapping) -> _Balance:
    a2, a1, a0 = (_number(a, values) for a in equation.coefficients)
    b = _number(equation.scale, values)
    factor = _number(case.system.parameters["capacitance"], values) \
        if case.system.model == "series-rlc" else mpmath.mpf(1)
    unit = "equation units" if case.system.model == "ode" else "J"
    return _Balance(a2 * factor, a1 * factor, a0 * factor, b * factor, unit)


def _independent_loads(case, values: Mapping) -> tuple[list, list]:
    """The load from each load's own definition (the verification's load model): branches
    (start, end or None, f(t)) and impulses (at, J), with numbers."""
    branches, impulses = _load_model(case.loads)
    segments = [(_number(b.start, values), None if b.end is None else _number(b.end, values),
                 sympy.lambdify(T, sympy.sympify(b.value).subs(values), modules="mpmath"))
                for b in branches]
    return segments, [(_number(i.at, values), _number(i.size, values)) for i in impulses]


class _LoadSweep:
    """The load on successive intervals (start, end), taken in increasing time: the branches
    whose span holds the interval's midpoint, summed (None where no load acts). A sweep keeps
    the work linear in the number of branches."""

    def __init__(self, segments: Sequence) -> None:
        self.segments = sorted(segments, key=lambda s: s[0])
        self.next = 0
        self.active: list = []

    def __call__(self, start, end) -> Callable | None:
        middle = (start + end) / 2
        while self.next < len(self.segments) and self.segments[self.next][0] <= middle:
            self.active.append(self.segments[self.next])
            self.next += 1
        self.active = [s for s in self.active if s[1] is None or middle < s[1]]
        functions = [s[2] for s in self.active]
        if not functions:
            return None
        if len(functions) == 1:
            return functions[0]
        return lambda time: mpmath.fsum(f(time) for f in functions)


def _balance(derivation, equation, values: Mapping) -> list[_Closure]:
    case = derivation.case
    with mpmath.workdps(DIGITS):
        scaled = _scaled_equation(case, equation, values)
        pieces = derivation.pieces
        intervals: list[Interval] = numeric_intervals(
            piece_functions(pieces), [p.start for p in pieces], derivation.window.until, values)
        until = intervals[-1].end
        starts = [i.start for i in intervals]
        states = [PreciseEvaluator(i.function, orders=2) for i in intervals]   # x, x′
        segments, impulses = _independent_loads(case, values)
        initial = [_number(v, values) for v in case.initial] if case.initial is not None \
            else [mpmath.mpf(0), mpmath.mpf(0)]
        energy_start = scaled.energy(*initial)
        omega = mpmath.sqrt(abs(scaled.a0 / scaled.a2))

        def close(a, c) -> bool:
            return abs(a - c) <= mpmath.mpf(10) ** (-DIGITS + 5) * max(abs(a), abs(c), until)

        cuts = sorted([mpmath.mpf(0), until] + starts + [t for t, _ in impulses if t < until]
                      + [t for lo, hi, _f in segments for t in (lo, hi)
                         if t is not None and 0 < t < until])
        times = [cuts[0]] + [b for a, b in zip(cuts, cuts[1:]) if not close(a, b)]
        checkpoints = starts[1:] + [until]
        work, dissipated = mpmath.mpf(0), mpmath.mpf(0)
        checks = []
        next_checkpoint = 0
        load_on = _LoadSweep(segments)
        largest = [energy_start]            # the largest energy met at any node so far
        for lo, hi in zip(times, times[1:]):
            index = bisect.bisect_right(starts, (lo + hi) / 2) - 1
            start, state = starts[index], _Watched(states[index], scaled, largest)
            for at, size in impulses:
                if close(at, lo):    # the engine starts a piece at every impulse
                    before = initial[1] if index == 0 else \
                        states[index - 1](lo - starts[index - 1])[1]
                    work += scaled.b * size * (before + state(lo - start)[1]) / 2
            count = max(1, int(mpmath.ceil((hi - lo) * omega / (2 * mpmath.pi) * SPANS_PER_PERIOD)))
            points = [lo + (hi - lo) * k / count for k in range(count + 1)]
            if scaled.a1 != 0:
                dissipated += scaled.a1 * mpmath.quad(
                    lambda time, state=state, start=start: state(time - start)[1] ** 2,
                    points, method="gauss-legendre")
            load = load_on(lo, hi)
            if load is not None:
                work += scaled.b * mpmath.quad(
                    lambda time, state=state, start=start, load=load:
                    load(time) * state(time - start)[1], points, method="gauss-legendre")
            while next_checkpoint < len(checkpoints) and checkpoints[next_checkpoint] < hi \
                    and not close(hi, checkpoints[next_checkpoint]):
                next_checkpoint += 1
            if next_checkpoint < len(checkpoints) and close(hi, checkpoints[next_checkpoint]):
                next_checkpoint += 1
                checks.append(_check(hi, work, scaled.energy(*state(hi - start)), energy_start,
                                     dissipated, largest[0], scaled.unit, TOLERANCE,
                                     f"mpmath.quad (Gauss–Legendre, {DIGITS} digits)"))
        return checks


class _Watched:
    """A piece's [x, x′] evaluator that keeps, in ``largest[0]``, the largest kinetic +
    strain energy at any time it was asked for."""

    def __init__(self, state: PreciseEvaluator, scaled: _Balance, largest: list) -> None:
        self.state, self.scaled, self.largest = state, scaled, largest

    def __call__(self, u) -> list:
        values = self.state(u)
        self.largest[0] = max(self.largest[0], self.scaled.energy(values[0], values[1]))
        return values


def _balance_in_floats(derivation, equation) -> list[_Closure]:
    """The balance of a long numeric history: W and D by a fixed 8-point Gauss–Legendre rule
    in float64 on short spans, vectorised per piece (see the module text). The load comes
    from the verification's numeric load model (its breakpoints, acting branches, impulses)."""
    case = derivation.case
    with mpmath.workdps(DIGITS):
        exact = _scaled_equation(case, equation, {})
    a2, a1, a0, b = (float(v) for v in (exact.a2, exact.a1, exact.a0, exact.b))
    scaled = _Balance(a2, a1, a0, b, exact.unit)
    pieces = derivation.pieces
    intervals = numeric_intervals(piece_functions(pieces), [p.start for p in pieces],
                                  derivation.window.until, {})
    until = intervals[-1].end
    branches, kicks = _numeric_branches(case.loads)
    loads = _NumericLoads(branches, [(_long_number(k.at), _long_number(k.size)) for k in kicks],
                          until)
    force = _FloatForce()
    initial = [float(_long_number(v)) for v in case.initial] if case.initial is not None \
        else [0.0, 0.0]
    energy_start = scaled.energy(*initial)
    load_rate = max([abs(float(br.rate)) for br in branches if br.rate is not None], default=0.0)
    base_rate = max(math.sqrt(abs(a0 / a2)), load_rate)   # natural frequency or load rate
    nodes, weights = numpy.polynomial.legendre.leggauss(LONG_NODES)
    work_terms, dissipated_terms = [], []
    largest, velocity_before = energy_start, initial[1]
    checks = []
    for interval in intervals:
        lo, hi = float(interval.start), float(interval.end)
        evaluate = FloatEvaluator(interval.function, orders=2)
        (_x0,), (v0,) = evaluate(numpy.zeros(1), orders=2)
        for size in loads.kicks_at(interval.start, until):
            work_terms.append(b * float(size) * (velocity_before + v0) / 2)
        fastest = max(base_rate, 1 / evaluate.scale)
        cuts = [interval.start] + loads.inside(interval.start, interval.end) + [interval.end]
        for left, right in zip(cuts, cuts[1:]):
            acting = loads.acting((left + right) / 2)
            left, right = float(left), float(right)
            count = max(1, math.ceil((right - left) * fastest / LONG_PHASE))
            edges = numpy.linspace(left, right, count + 1)
            half = numpy.diff(edges) / 2
            times = (((edges[:-1] + edges[1:]) / 2)[:, None] + half[:, None] * nodes).ravel()
            spread = (half[:, None] * weights).ravel()
            x, velocity = evaluate(times - lo, orders=2)
            largest = max(largest, float(numpy.max(scaled.energy(x, velocity))))
            if a1 != 0:
                dissipated_terms.append(a1 * math.fsum(spread * velocity ** 2))
            if acting:
                work_terms.append(b * math.fsum(spread * force(acting, times) * velocity))
        (x1,), (v1,) = evaluate(numpy.array([hi - lo]), orders=2)
        velocity_before = v1
        energy = scaled.energy(x1, v1)
        largest = max(largest, energy)
        checks.append(_check(hi, math.fsum(work_terms), energy, energy_start,
                             math.fsum(dissipated_terms), largest, scaled.unit, FLOAT_TOLERANCE,
                             f"{LONG_NODES}-point Gauss–Legendre in float64 on spans of at "
                             f"most {LONG_PHASE} rad"))
    return checks


class _FloatForce:
    """The sum of acting load branches at an array of times, in float64 (each polynomial
    branch's coefficients converted once; other shapes evaluated point by point)."""

    def __init__(self) -> None:
        self.polynomials: dict[int, tuple[float, list[float]]] = {}

    def __call__(self, acting: Sequence, times: numpy.ndarray) -> numpy.ndarray:
        total = numpy.zeros_like(times)
        for branch in acting:
            if branch.poly is None:
                total += [float(branch.value(mpmath.mpf(time))) for time in times]
                continue
            if id(branch) not in self.polynomials:
                self.polynomials[id(branch)] = (float(branch.origin),
                                                [float(c) for c in reversed(branch.poly)])
            origin, coefficients = self.polynomials[id(branch)]
            total += numpy.polyval(coefficients, times - origin)
        return total


def _summarised(checks: list[_Closure]) -> list[Check]:
    """Every check for a short history; for a long one, one check with the first failure or
    else the largest relative closure (the sheet cannot list a thousand breakpoints)."""
    if len(checks) <= SUMMARY_LIMIT:
        return [Check(c.name, c.passed, c.detail) for c in checks]
    failed = [c for c in checks if not c.passed]
    if failed:
        return [Check(f"energy balance at {len(checks)} breakpoints", False,
                      f"{len(failed)} failed; first failure {failed[0].name}: "
                      f"{failed[0].detail}")]
    worst = max(checks, key=lambda check: check.closure)
    return [Check(f"energy balance at {len(checks)} breakpoints", True,
                  f"0 failed; largest relative closure {worst.name}: {worst.detail}")]


@dataclass(frozen=True)
class _Closure:
    """One balance at one time, with its relative closure kept as a number."""

    name: str
    passed: bool
    detail: str
    closure: float          # |W − ΔE − D| relative to the scale
    time: float
    work: float
    energy: float
    dissipated: float


def _check(time, work, energy, energy_start, dissipated, largest, unit: str, limit,
           method: str) -> _Closure:
    closure = abs(work - (energy - energy_start) - dissipated)
    scale = abs(work) + energy + energy_start + dissipated + largest
    relative = closure / scale if scale != 0 else (0 if closure == 0 else mpmath.inf)
    passed = relative <= limit

    def show(value) -> str:
        return mpmath.nstr(mpmath.mpf(value), 10, min_fixed=-4, max_fixed=6)
    detail = (f"work of the loads W = {show(work)} {unit}; kinetic + strain energy E = "
              f"{show(energy)} {unit} (initially {show(energy_start)}); dissipated D = "
              f"{show(dissipated)} {unit}; |W − (E − E(0)) − D| = {mpmath.nstr(mpmath.mpf(closure), 3)}, "
              f"{mpmath.nstr(mpmath.mpf(relative), 3)} of |W| + E + E(0) + D + E_max (E_max = "
              f"{show(largest)} {unit}, the largest energy so far; limit "
              f"{mpmath.nstr(limit, 1)}); W and D by {method} of the pieces and the "
              f"loads; {SOURCE}")
    return _Closure(f"energy balance at t = {float(time):.6g} s", bool(passed), detail,
                    float(relative), float(time), float(work), float(energy), float(dissipated))

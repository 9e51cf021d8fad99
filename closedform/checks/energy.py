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
case's initial values. The integrals W and D are evaluated independently of the engine: each
piece is read as a sum of exponential-polynomial terms (the checks' own parser), the load
comes from each load's own definition (the checks' load model), and the integrals of their
products over every span between breakpoints are taken in closed form
(``work_integrals``), so an interval costs the same whatever its length in periods. A load
branch outside that structure (a formula with other functions) is integrated by mpmath.quad
on that branch's span only.

The balance closes when |W − ΔE − D| ≤ 1e-12 × (|W| + E(t) + E(0) + D + E_max), where E_max
is the largest kinetic + strain energy met at the breakpoints and at the quarter points of
every interval, plus the rounding allowance 10^(5−digits) × the sizes of all the terms that
were added. The arithmetic starts at 40 digits and is repeated at 80 and 160 where that
allowance is not below a hundredth of the limit (terms that cancel); a balance that cannot
be brought to its limit even so is **inconclusive**, with the reason, not passed and not
failed.

Models of other orders have no such energy and get no energy checks.
"""

from __future__ import annotations

import bisect
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import mpmath
import sympy

from ..case import TAU
from .base import Check
from .long import LOCAL_TIME, OutsideStructure, Parser
from .model import equation_of, local_shape, problem_of
from .substitutions import random_substitutions, resolved_values
from .work_integrals import (
    FLOAT64,
    Arithmetic,
    Row,
    combined,
    derivative,
    integral_of_sum,
    precise,
    products,
    shifted,
    value,
)

PRECISIONS = (40, 80, 160)           # working digits, raised where terms cancel
TOLERANCE = 1e-12                    # relative closure of the balance
ROUNDING = 16                        # the rounding allowance: this many units × the sizes
SUMMARY_LIMIT = 40                   # longer histories get one summarised energy check
QUADRATURE_SPANS = 2                 # spans per period of a branch integrated by mpmath.quad

# The product cites the identity itself; book references with "from memory" stay in tests.
SOURCE = ("work-energy balance of the equation of motion (multiply by x′ and integrate); "
          "work–energy theorem")


def energy_checks(derivation) -> list[Check]:
    """One check per breakpoint (and at the end of the window) that the work done by the
    loads equals the kinetic and strain energy gained plus the energy dissipated."""
    case = derivation.case
    equation = equation_of(case.system)
    if equation.order != 2 or equation.inputs or not derivation.pieces:
        return []     # (with derivatives of the input, the work of b_m f⁽ᵐ⁾ at a step is not defined)
    try:
        values = _substitution(derivation)
        if values is None:
            return [Check("energy balance", False, "no positive substitution of the symbols "
                          "without value keeps the order of the pieces and the damping regime")]
        return _summarised(balance(derivation, values))
    except Exception as error:  # noqa: BLE001 - reported as a failed check, never swallowed
        return [Check("energy balance", False,
                      f"could not be evaluated: {type(error).__name__}: {error}")]


def balance(derivation, values: Mapping | None = None) -> list[Closure]:
    """The balance at every breakpoint, in the first arithmetic that decides all of them:
    40, 80 and 160 digits; for a long numeric history float64 first, each integral redone at
    40 digits where float64's rounding allowance would not be small against the limit."""
    equation = equation_of(derivation.case.system)
    values = dict(values or {})
    passes: list[tuple[Arithmetic | None, Arithmetic]] = [(None, precise(d)) for d in PRECISIONS]
    if not values and len(derivation.pieces) > SUMMARY_LIMIT:
        passes.insert(0, (FLOAT64, precise(PRECISIONS[0])))
    closures: list[Closure] = []
    for fast, exact in passes:
        closures = _balance(derivation, equation, values, fast, exact)
        if all(c.settled for c in closures):
            break
    return closures


def _substitution(derivation) -> dict | None:
    """The symbol values: none for a numeric case, the declared ones, or (symbols without
    value) the first of the verification's seeded random substitutions."""
    case = derivation.case
    if not case.symbols:
        return {}
    if case.is_fully_valued:
        return resolved_values(case)
    draws = random_substitutions(case, problem_of(derivation))
    return draws[0] if draws else None


class _Numbers:
    """Numbers at the working precision from sympy values (with the symbol values)."""

    def __init__(self, values: Mapping) -> None:
        self.values = values
        self.kept: dict = {}

    def __call__(self, expr) -> mpmath.mpf:
        if not isinstance(expr, sympy.Basic):
            expr = sympy.sympify(expr)
        if not self.values and expr.is_Rational:
            return mpmath.mpf(int(expr.p)) / int(expr.q)
        if not self.values and expr.is_Float:
            return mpmath.mpf(expr._mpf_)
        if expr not in self.kept:
            number = sympy.N(expr.subs(self.values), mpmath.mp.dps + 15)
            if number.free_symbols:
                raise ValueError(f"no numeric value for {number}")
            self.kept[expr] = mpmath.mpf(str(number))
        return +self.kept[expr]


@dataclass(frozen=True)
class _Balance:
    """The equation a₂x″ + a₁x′ + a₀x = b·f scaled to energies (×C for a circuit)."""

    a2: Any
    a1: Any
    a0: Any
    b: Any
    unit: str

    def energy(self, x, velocity):
        return (self.a2 * velocity**2 + self.a0 * x**2) / 2


def _scaledequation_of(case, equation, number: Callable) -> _Balance:
    a2, a1, a0 = (number(a) for a in equation.coefficients)
    b = number(equation.scale)
    factor = number(case.system.parameters["capacitance"]) \
        if case.system.model == "series-rlc" else 1
    unit = "equation units" if case.system.model == "ode" else "J"
    return _Balance(a2 * factor, a1 * factor, a0 * factor, b * factor, unit)


# ----------------------------------------------------------------------------- the terms


def _term_row(term, scale=1) -> Row:
    """One parsed term C·Π(s·v + q)^k·e^{λv + μ} as a row."""
    poly = [term.coefficient * scale * mpmath.exp(term.offset)]
    for s, q, k in term.factors:
        for _ in range(k):
            grown = [c * q for c in poly] + [mpmath.mpf(0)]
            for r, c in enumerate(poly):
                grown[r + 1] += c * s
            poly = grown
    return Row(tuple(poly), term.rate, term.real)


def _numeric_rows(function) -> list[Row]:
    """The rows of a 30-digit piece: (power, rate, frequency, kind, c) is
    c·u^p·e^{σu}·cos ωu = Re(c·u^p·e^{(σ+iω)u}), and sin ωu = Re(−i·e^{iωu})."""
    rows = []
    for power, rate, frequency, kind, c in function.rows:
        poly = (mpmath.mpf(0),) * power
        if frequency == 0:
            rows.append(Row(poly + (+c,), +rate, True))
        else:
            coefficient = c if kind == "cos" else -mpmath.mpc(0, 1) * c
            rows.append(Row(poly + (coefficient,), mpmath.mpc(rate, frequency), False))
    return rows


class _PieceReader:
    """A piece's rows in its local time u = t − start: from its 30-digit form where it
    carries one, else from its exponential polynomial read by the checks' parser."""

    def __init__(self, number: _Numbers) -> None:
        self.number = number
        self.parser = Parser(LOCAL_TIME)
        self.modes: dict = {}

    def __call__(self, piece) -> list[Row]:
        numeric = getattr(piece, "numeric", None)
        if numeric is not None and hasattr(numeric, "rows"):
            return combined(_numeric_rows(numeric))
        local = piece.local
        terms = getattr(local, "terms", None)
        rows: list[Row] = []
        if isinstance(terms, Mapping):
            for mode, coefficient in terms.items():
                c = self.number(coefficient)
                rows += [_term_row(term, c) for term in self._mode(mode)]
        elif callable(getattr(local, "expression", None)):
            expr = sympy.sympify(local.expression(LOCAL_TIME)).subs(self.number.values)
            rows = [_term_row(term) for term in self.parser.terms(expr)]
        else:       # no exponential-polynomial form: its numeric form says why, or it has none
            numeric = getattr(local, "numeric", None)
            if callable(numeric):
                numeric(self.number.values, mpmath.mp.dps)
            raise ValueError("a piece is not a sum of terms u^k·e^(σu)·cos|sin(ωu), which this "
                             "check integrates")
        return combined(rows)

    def _mode(self, mode) -> list:
        if mode not in self.modes:
            if self.number.values:
                expr = sympy.sympify(mode.expression(LOCAL_TIME)).subs(self.number.values)
                self.modes[mode] = self.parser.terms(expr)
            else:
                self.modes[mode] = self.parser.mode(mode)
        return self.modes[mode]


# ----------------------------------------------------------------------------- the loads


@dataclass(frozen=True)
class _Branch:
    """One branch of one occurrence of a load: on start ≤ t < end the load is Σ rows in
    t − origin, or ``function(t − origin)`` where it is outside the row structure."""

    start: Any
    end: Any
    origin: Any
    rows: dict[str, list[Row]] | None       # by arithmetic
    function: Callable | None
    rate: Any


class _Loads:
    """The loads from their own definitions: branches and impulses, with numbers."""

    def __init__(self, loads, exact: _Numbers, both: _Both) -> None:
        parser = Parser(TAU)
        self.branches: list[_Branch] = []
        self.impulses: list[tuple[Any, Any]] = []
        number = exact
        zero = mpmath.mpf(0)
        for load in loads:
            local = []                 # (from, to, origin offset, rows, function, rate)
            kicks: list = []
            if load.shape == "table":
                points = [(number(t), number(v)) for t, v in load.points]
                for (t0, v0), (t1, v1) in zip(points, points[1:]):
                    if t1 != t0:       # two rows at one time are a jump
                        row = Row((v0, (v1 - v0) / (t1 - t0)), zero, True)
                        local.append((t0, t1, t0, (row,), None, None))
            else:
                shape, kicks = local_shape(load)
                for lo, hi, expression, rate in shape:
                    expression = sympy.sympify(expression).subs(exact.values)
                    top = math.inf if hi is None else number(hi)
                    try:
                        found = combined(_term_row(t) for t in parser.terms(expression))
                        local.append((number(lo), top, zero, tuple(found), None, None))
                    except OutsideStructure:
                        function = sympy.lambdify(TAU, expression, modules="mpmath")
                        local.append((number(lo), top, zero, None, function,
                                      exact(rate) if rate is not None else None))
            for start in load.starts():
                origin = number(start)
                for lo, hi, offset, found, function, rate in local:
                    self.branches.append(_Branch(origin + lo, origin + hi, origin + offset,
                                                 None if found is None else both.rows(found),
                                                 function, rate))
                for at, size in kicks:
                    self.impulses.append((origin + number(at), number(size)))
        self.branches.sort(key=lambda b: b.start)
        self.impulses.sort(key=lambda i: i[0])
        self.times = sorted({t for b in self.branches for t in (b.start, b.end)
                             if t != math.inf})
        self.next = 0
        self.active: list[_Branch] = []

    def inside(self, lo, hi, close: Callable) -> list:
        """The load breakpoints strictly inside (lo, hi)."""
        first = bisect.bisect_right(self.times, lo)
        last = bisect.bisect_left(self.times, hi)
        return [t for t in self.times[first:last] if not close(t, lo) and not close(t, hi)]

    def acting(self, middle) -> list[_Branch]:
        """The branches acting at ``middle``, for increasing ``middle`` (a sweep)."""
        while self.next < len(self.branches) and self.branches[self.next].start <= middle:
            self.active.append(self.branches[self.next])
            self.next += 1
        self.active = [b for b in self.active if middle < b.end]
        return self.active


# ----------------------------------------------------------------------------- the balance


class _Both:
    """Rows, lengths and times in the exact arithmetic and, where there is a fast one, in
    that too; ``run`` computes in the fast arithmetic first and again in the exact one where
    the fast one's rounding allowance is above the threshold given."""

    def __init__(self, fast: Arithmetic | None, exact: Arithmetic) -> None:
        self.fast, self.exact = fast, exact
        self.arithmetics = [a for a in (fast, exact) if a is not None]

    def rows(self, found: Sequence[Row]) -> dict:
        return {a.name: [Row(tuple(a.number(c) for c in row.poly), a.number(row.rate), row.real)
                         for row in found] for a in self.arithmetics}

    def number(self, value) -> dict:
        return {a.name: a.number(value) for a in self.arithmetics}

    def run(self, compute: Callable, threshold) -> tuple[Any, Any]:
        """compute(arithmetic) → (value, size): (value, rounding allowance) in mpmath."""
        if self.fast is not None:
            try:
                result, size = compute(self.fast)
                allowance = ROUNDING * self.fast.unit * size
                if allowance <= threshold and math.isfinite(allowance):
                    return mpmath.mpf(result), mpmath.mpf(allowance)
            except (OverflowError, ZeroDivisionError):
                pass
        result, size = compute(self.exact)
        return result, ROUNDING * self.exact.unit * size


def _balance(derivation, equation, values: Mapping, fast: Arithmetic | None,
             exact_arithmetic: Arithmetic) -> list[Closure]:
    case = derivation.case
    digits = int(exact_arithmetic.name.split()[0])
    with mpmath.workdps(digits):
        both = _Both(fast, exact_arithmetic)
        exact = _Numbers(values)
        scaled = _scaledequation_of(case, equation, exact)
        pieces = derivation.pieces
        starts = [exact(p.start) for p in pieces]
        until = exact(derivation.window.until)
        ends = starts[1:] + [until]
        loads = _Loads(case.loads, exact, both)
        read = _PieceReader(exact)
        initial = [exact(v) for v in case.initial] if case.initial is not None \
            else [mpmath.mpf(0), mpmath.mpf(0)]
        energy_start = scaled.energy(*initial)
        tiny = mpmath.mpf(10) ** (-digits + 8)

        def close(a, c) -> bool:
            return abs(a - c) <= tiny * max(abs(a), abs(c), until)

        work = dissipated = rounding = mpmath.mpf(0)
        largest = energy_start
        # x′ at the end of the piece before (its rows and length): worked out only where an
        # impulse acts at the start of the next piece
        before: tuple | None = None
        kicks = list(loads.impulses)
        closures = []
        for start, end, piece in zip(starts, ends, pieces):
            x_exact = read(piece)
            x = both.rows(x_exact)
            v = both.rows(combined(derivative(row) for row in x_exact))
            length = both.number(end - start)
            # the energy level here, for the thresholds (float64 where there is a fast pass)
            first = both.arithmetics[0]
            guess = [value(x[first.name], length[first.name], first)[0],
                     value(v[first.name], length[first.name], first)[0]]
            level = max(largest, abs(work), dissipated,
                        mpmath.mpf(scaled.energy(*(mpmath.mpf(g) for g in guess))))
            threshold = mpmath.mpf("1e-3") * TOLERANCE * level
            while kicks and (kicks[0][0] < start or close(kicks[0][0], start)):
                at, impulse = kicks.pop(0)
                if close(at, start) and not close(at, until):
                    after, size = value(v[exact_arithmetic.name], 0, exact_arithmetic)
                    velocity_before = initial[1] if before is None else value(
                        before[0], before[1], exact_arithmetic)[0]
                    step = scaled.b * impulse * (velocity_before + after) / 2
                    work += step
                    rounding += ROUNDING * exact_arithmetic.unit * abs(scaled.b * impulse) * size
                # an impulse strictly between piece starts is not counted: the balance fails
            if scaled.a1 != 0:
                d, r = both.run(lambda a, v=v, length=length: integral_of_sum(
                    products(v[a.name], v[a.name]), length[a.name], a), threshold)
                dissipated += scaled.a1 * d
                rounding += abs(scaled.a1) * r
            cuts = [start] + loads.inside(start, end, close) + [end]
            for lo, hi in zip(cuts, cuts[1:]):
                for branch in loads.acting((lo + hi) / 2):
                    w, r = both.run(lambda a, branch=branch, lo=lo, hi=hi, v=v, start=start: _branch_work(
                        branch, v[a.name], start, lo, hi, scaled, a), threshold)
                    work += scaled.b * w
                    rounding += abs(scaled.b) * r
            for fraction in (0, 1, 2, 3):
                u = length[first.name] * fraction / 4
                largest = max(largest, mpmath.mpf(scaled.energy(
                    value(x[first.name], u, first)[0], value(v[first.name], u, first)[0])))
            energy, r = both.run(lambda a, x=x, v=v, length=length: _energy_at(
                x[a.name], v[a.name], length[a.name], scaled, a), threshold)
            rounding += r
            largest = max(largest, energy)
            closures.append(_closure(end, work, energy, energy_start, dissipated, largest,
                                     rounding + abs(energy_start) * ROUNDING
                                     * exact_arithmetic.unit, scaled.unit,
                                     fast.name + " where it suffices, else " + exact_arithmetic.name
                                     if fast is not None else exact_arithmetic.name))
            before = (v[exact_arithmetic.name], length[exact_arithmetic.name])
        return closures


def _energy_at(x: Sequence[Row], v: Sequence[Row], u, scaled: _Balance,
               arithmetic: Arithmetic) -> tuple[Any, Any]:
    """(E at u, the size of what was added for it)."""
    (position, x_size), (velocity, v_size) = value(x, u, arithmetic), value(v, u, arithmetic)
    energy = (arithmetic.number(scaled.a2) * velocity ** 2
              + arithmetic.number(scaled.a0) * position ** 2) / 2
    size = (abs(arithmetic.number(scaled.a2)) * v_size ** 2
            + abs(arithmetic.number(scaled.a0)) * x_size ** 2) / 2
    return energy, size


def _branch_work(branch: _Branch, v: Sequence[Row], start, lo, hi, scaled: _Balance,
                 arithmetic: Arithmetic) -> tuple[Any, Any]:
    """∫_lo^hi f·x′ dt for one load branch: (value, size of what was added)."""
    if branch.rows is not None:
        number = arithmetic.number
        velocity = v if lo == start else [shifted(row, number(lo - start), arithmetic) for row in v]
        load = [shifted(row, number(lo - branch.origin), arithmetic)
                for row in branch.rows[arithmetic.name]]
        return integral_of_sum(products(load, velocity), number(hi - lo), arithmetic)
    with mpmath.workdps(max(mpmath.mp.dps, PRECISIONS[0])):      # quadrature in mpmath
        lo_, hi_, origin, begin = (mpmath.mpf(x) for x in (lo, hi, branch.origin, start))
        velocity = [Row(tuple(mpmath.mpmathify(c) for c in row.poly), mpmath.mpmathify(row.rate),
                        row.real) for row in v]
        omega = mpmath.sqrt(abs(mpmath.mpf(scaled.a0) / scaled.a2))
        rate = max(omega, abs(branch.rate) if branch.rate is not None else 0)
        count = max(1, int(mpmath.ceil((hi_ - lo_) * rate / (2 * mpmath.pi) * QUADRATURE_SPANS)))
        points = [lo_ + (hi_ - lo_) * k / count for k in range(count + 1)]
        mp = precise(mpmath.mp.dps)
        result = mpmath.quad(lambda t: branch.function(t - origin)
                             * value(velocity, t - begin, mp)[0], points, method="gauss-legendre")
    return arithmetic.number(result), abs(arithmetic.number(result))


def _summarised(checks: list[Closure]) -> list[Check]:
    """Every check for a short history; for a long one, one check with the first failure,
    else the first inconclusive balance, else the largest relative closure (the sheet
    cannot list a thousand breakpoints)."""
    if len(checks) <= SUMMARY_LIMIT:
        return [c.check() for c in checks]
    count = len(checks)
    failed = [c for c in checks if not c.passed and c.settled]
    if failed:
        return [Check(f"energy balance at {count} breakpoints", False,
                      f"{len(failed)} failed; first failure {failed[0].name}: "
                      f"{failed[0].detail}")]
    unsettled = [c for c in checks if not c.passed]
    if unsettled:
        return [Check(f"energy balance at {count} breakpoints", False,
                      f"{len(unsettled)} inconclusive; first {unsettled[0].name}: "
                      f"{unsettled[0].detail}", inconclusive=True)]
    worst = max(checks, key=lambda check: check.closure)
    return [Check(f"energy balance at {count} breakpoints", True,
                  f"0 failed; largest relative closure {worst.name}: {worst.detail}")]


@dataclass(frozen=True)
class Closure:
    """One balance at one time, with its relative closure kept as a number.

    ``settled``: the rounding allowance is below a hundredth of the limit, so the balance
    judged the pieces and not the arithmetic; an unsettled balance that does not close is
    inconclusive."""

    name: str
    passed: bool
    settled: bool
    explain: Callable[[], str]      # the figures in words (made when asked: long histories)
    closure: float                  # |W − ΔE − D| relative to the scale
    time: float
    work: float
    energy: float
    dissipated: float

    @property
    def detail(self) -> str:
        return self.explain()

    def check(self) -> Check:
        inconclusive = not self.passed and not self.settled
        return Check(self.name, self.passed, self.detail, inconclusive=inconclusive)


def _closure(time, work, energy, energy_start, dissipated, largest, rounding, unit: str,
             arithmetic: str) -> Closure:
    """The balance at one time, judged with its rounding allowance: passed where even the
    allowance keeps it within the limit, failed where it is outside the limit by more than
    the allowance, and undecided (not ``settled``) in between."""
    closure = abs(work - (energy - energy_start) - dissipated)
    scale = abs(work) + energy + energy_start + dissipated + largest
    relative = closure / scale if scale != 0 else (0 if closure == 0 else math.inf)
    limit = TOLERANCE * scale
    passed = closure + rounding <= limit
    settled = passed or closure - rounding > limit

    def explain() -> str:
        return _explain(work, energy, energy_start, dissipated, closure, relative, largest,
                        rounding, unit, arithmetic, settled)
    return Closure(f"energy balance at t = {float(time):.6g} s", bool(passed), bool(settled),
                   explain, float(relative), float(time), float(work), float(energy),
                   float(dissipated))


def _explain(work, energy, energy_start, dissipated, closure, relative, largest, rounding,
             unit: str, arithmetic: str, settled: bool) -> str:
    def show(number) -> str:
        return mpmath.nstr(mpmath.mpf(number), 10, min_fixed=-4, max_fixed=6)
    detail = (f"work of the loads W = {show(work)} {unit}; kinetic + strain energy E = "
              f"{show(energy)} {unit} (initially {show(energy_start)}); dissipated D = "
              f"{show(dissipated)} {unit}; |W − (E − E(0)) − D| = {mpmath.nstr(mpmath.mpf(closure), 3)}, "
              f"{mpmath.nstr(mpmath.mpf(relative), 3)} of |W| + E + E(0) + D + E_max (E_max = "
              f"{show(largest)} {unit}, the largest energy at the breakpoints and quarter "
              f"points; limit {mpmath.nstr(TOLERANCE, 1)}); W and D integrated in closed form "
              f"from the pieces' exponential-polynomial terms and the loads ({arithmetic}); "
              f"{SOURCE}")
    if not settled:
        detail = (f"could not be established: the terms cancel so far that the rounding "
                  f"allowance in {arithmetic} ({mpmath.nstr(mpmath.mpf(rounding), 3)} {unit}) "
                  f"is not small against the limit; " + detail)
    return detail

"""Independent checks of a several-mass response, by a route that has no modes in it.

Nothing here uses the modal decomposition, the characteristic polynomial or the Laplace
engine. The equation is the matrix equation itself, M x″ + C x′ + K x = f(t), with the
matrices of the case (for per-mode damping ratios, the damping matrix is rebuilt here from
this module's own 40-digit eigen-decomposition, M Φ diag(2ζ_r ω_r) Φᵀ M with Φ
M-orthonormal). The loads are evaluated from each load's own definition (the shape table
of the design brief), never from the singularity terms.

* **matrix equation residual on (a, b)**: every mass's piece (read from its printed sympy
  form into exponential-cosine terms by this module's own reader) and its derivatives put into
  each row of the matrix equation at five Gauss points of the interval, at 40 digits;
  |residual| ≤ 1e-20 × (the sum of the magnitudes of the terms), which an exact or
  30-digit solution meets and a wrong one misses by many orders;
* **initial values**: x(0⁺) = x₀ and M (x′(0⁺) − v₀) = the impulses at t = 0;
* **jump conditions at t = …**: x continuous at every breakpoint, M Δx′ = the impulse
  vector there (zero where no impulse acts);
* **independent integration of the full system**: y′ = A y + B f(t) for the state
  y = (x, x′), stepped exactly for the homogeneous part by the matrix exponential
  (mpmath.expm, 30 digits) with the load's convolution integral by 8-point
  Gauss–Legendre quadrature on steps of ‖A‖₁·h ≤ 3 (rule error below 1e-15 per step) that never straddle a load
  breakpoint; where the load is linear in time (steps, ramps, tables, zero) the
  convolution is done exactly, A⁻¹(e^{Ah} − I)·b₀ + [A⁻²(e^{Ah} − I) − A⁻¹h]·b₁; compared with the pieces of every mass at up to 80 step ends,
  max deviation ≤ 1e-12 of the largest |x|.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import mpmath
import sympy

from ..specs import TAU, LoadSpec
from .base import Check

T = sympy.Symbol("t", real=True)
U = sympy.Symbol("u", real=True)
DPS = 40
RESIDUAL_TOLERANCE = mpmath.mpf("1e-20")
INTEGRATION_TOLERANCE = 1e-12
GAUSS_POINTS = 5
MAX_COMPARED = 80


# ----------------------------------------------------------------------------- loads


def load_branches(load: LoadSpec) -> tuple[list[tuple], list[tuple]]:
    """One load, every occurrence: branches (from, to or None, value in t) and impulses
    (at, J), straight from the definition of its shape."""
    v = load.values
    shape = load.shape
    zero = sympy.S.Zero
    local: list[tuple] = []
    kicks: list[tuple] = []
    if shape == "step":
        local = [(zero, None, v["amplitude"])]
    elif shape == "ramp":
        d = v.get("duration")
        local = [(zero, d, v["rate"] * TAU)] + ([(d, None, v["rate"] * d)] if d is not None else [])
    elif shape == "impulse":
        kicks = [(zero, v["impulse"])]
    elif shape == "formula":
        local = [(zero, v["duration"], load.expression)]
    elif shape == "table":
        for (t0, v0), (t1, v1) in zip(load.points, load.points[1:]):
            if t1 != t0:
                local.append((t0, t1, v0 + (v1 - v0) * (TAU - t0) / (t1 - t0)))
    elif shape == "trapezoid":
        a = v["amplitude"]
        rise, hold, fall = v["rise"], v["hold"], v["fall"]
        end = rise + hold + fall
        local = [(zero, rise, a * TAU / rise) if rise != 0 else None,
                 (rise, rise + hold, a) if hold != 0 else None,
                 (rise + hold, end, a * (end - TAU) / fall) if fall != 0 else None]
        local = [b for b in local if b is not None]
    else:
        a, d = v["amplitude"], v["duration"]
        if shape == "rectangle":
            local = [(zero, d, a)]
        elif shape == "decay":
            local = [(zero, d, a * (1 - TAU / d))]
        elif shape == "half-sine":
            local = [(zero, d, a * sympy.sin(sympy.pi * TAU / d))]
        elif shape == "triangle":
            top = v.get("peak_at", sympy.Rational(1, 2)) * d
            local = [b for b in ((zero, top, a * TAU / top) if top != 0 else None,
                                 (top, d, a * (d - TAU) / (d - top)) if top != d else None) if b]
        else:
            raise ValueError(f"unknown load shape {shape!r}")
    branches, impulses = [], []
    for start in load.starts():
        for lo, hi, value in local:
            branches.append((start + lo, None if hi is None else start + hi,
                             sympy.sympify(value).subs(TAU, T - start)))
        impulses += [(start + at, size) for at, size in kicks]
    return branches, impulses


def _linear(value) -> bool:
    value = sympy.sympify(value)
    return value.is_polynomial(T) and sympy.degree(value, T) <= 1 if value.has(T) else True


class Loading:
    """f(t) as a vector over the masses, and the impulse vectors, from the loads' definitions."""

    def __init__(self, derivation) -> None:
        case, chain = derivation.case, derivation.chain
        n = chain.size
        self.n = n
        self.branches: list[tuple] = []    # (weights, from, to or None, value(t), linear)
        self.impulses: list[tuple[mpmath.mpf, list]] = []
        self.times: set = set()
        with mpmath.workdps(DPS):
            ones = [sum(chain.mass_matrix[i, j] for j in range(n)) for i in range(n)]
            self.distribution = {}
            for load in case.loads:
                mass = chain.load_masses[load.number - 1]
                if mass is None:
                    weights = [-_mp(w) for w in ones]       # −M·1·a_g
                else:
                    weights = [mpmath.mpf(1) if i == mass - 1 else mpmath.mpf(0) for i in range(n)]
                branches, impulses = load_branches(load)
                for lo, hi, value in branches:
                    function = sympy.lambdify(T, value, "mpmath")
                    self.branches.append((weights, _mp(lo), None if hi is None else _mp(hi),
                                          function, _linear(value)))
                    self.times.add(_mp(lo))
                    if hi is not None:
                        self.times.add(_mp(hi))
                for at, size in impulses:
                    self.impulses.append((_mp(at), [w * _mp(size) for w in weights]))
                    self.times.add(_mp(at))

    def force(self, time) -> list:
        """f(time), the right-continuous value (a branch holds on lo ≤ t < hi)."""
        total = [mpmath.mpf(0)] * self.n
        for weights, lo, hi, function, _constant in self.branches:
            if time >= lo and (hi is None or time < hi):
                value = mpmath.mpf(function(time))
                total = [a + w * value for a, w in zip(total, weights)]
        return total

    def linear_on(self, lo, hi) -> bool:
        """Every branch acting on [lo, hi) is linear in t (steps, ramps, holds, tables, zero)."""
        return all(linear for _w, start, end, _f, linear in self.branches
                   if start < hi and (end is None or end > lo))

    def kick(self, time, scale) -> list:
        total = [mpmath.mpf(0)] * self.n
        for at, vector in self.impulses:
            if abs(at - time) <= mpmath.mpf(10) ** -30 * max(scale, 1):
                total = [a + b for a, b in zip(total, vector)]
        return total


# ----------------------------------------------------------------------------- matrices


def _mp(value) -> mpmath.mpf:
    value = sympy.sympify(value)
    if value.is_Rational:
        return mpmath.mpf(value.p) / value.q
    return mpmath.mpf(str(sympy.N(value, DPS + 5)))


def _matrix(matrix) -> mpmath.matrix:
    n = matrix.shape[0]
    return mpmath.matrix([[_mp(matrix[i, j]) for j in range(n)] for i in range(n)])


def equation_matrices(derivation) -> tuple[mpmath.matrix, mpmath.matrix, mpmath.matrix]:
    """M, C, K at 40 digits. C for per-mode ratios is rebuilt from this module's own
    eigen-decomposition (not from the derivation's modes)."""
    chain = derivation.chain
    m, k = _matrix(chain.mass_matrix), _matrix(chain.stiffness_matrix)
    n = chain.size
    if chain.damping_matrix is not None:
        return m, _matrix(chain.damping_matrix), k
    c = mpmath.zeros(n, n)
    if chain.damping_ratios is not None:
        lower = mpmath.cholesky(m)
        inverse = mpmath.inverse(lower)
        values, vectors = mpmath.eigsy(inverse * k * inverse.T)
        order = sorted(range(n), key=lambda i: values[i])
        shapes = inverse.T * vectors         # M-orthonormal columns
        for rank, i in enumerate(order):
            zeta = _mp(chain.damping_ratios[rank])
            column = shapes[:, i]
            c += (2 * zeta * mpmath.sqrt(values[i])) * (m * column) * (m * column).T
    return m, c, k


# ----------------------------------------------------------------------------- the pieces


def _shifted(function, start):
    return lambda time: function(time - start)


class _NotATermSum(Exception):
    pass


class TermSum:
    """A piece read from its printed sympy form as Σ c·u^k·e^{σu}·cos|sin(ωu), each term
    held as Re or Im of c·u^k·e^{zu}, z = σ + iω; value and derivatives by the Leibniz rule
    (this module's own reading, not the engine's basis functions)."""

    def __init__(self, expr: sympy.Expr) -> None:
        self.terms = []
        for term in sympy.Add.make_args(sympy.expand(expr)):
            self.terms.append(self._read(term))

    @staticmethod
    def _read(term: sympy.Expr) -> tuple:
        coefficient, power, rate, frequency, part = sympy.S.One, 0, sympy.S.Zero, sympy.S.Zero, "re"
        for factor in sympy.Mul.make_args(term):
            if not factor.has(U):
                coefficient *= factor
            elif factor == U:
                power += 1
            elif factor.is_Pow and factor.base == U and factor.exp.is_Integer and factor.exp > 0:
                power += int(factor.exp)
            elif isinstance(factor, sympy.exp):
                slope, offset = _linear_parts(factor.args[0])
                rate += slope
                coefficient *= sympy.exp(offset)
            elif isinstance(factor, (sympy.cos, sympy.sin)) and frequency == 0:
                slope, offset = _linear_parts(factor.args[0])
                if offset != 0:
                    raise _NotATermSum(factor)
                frequency = slope
                part = "re" if isinstance(factor, sympy.cos) else "im"
            else:
                raise _NotATermSum(factor)
        return (_mp(coefficient), power, mpmath.mpc(_mp(rate), _mp(frequency)), part)

    def __call__(self, u, order: int = 0):
        total = mpmath.mpf(0)
        for coefficient, power, z, part in self.terms:
            e = mpmath.exp(z * u)
            value = mpmath.mpc(0)
            for j in range(min(order, power) + 1):
                falling = math.factorial(power) // math.factorial(power - j)
                value += math.comb(order, j) * falling * u ** (power - j) * z ** (order - j)
            value *= e
            total += coefficient * (value.real if part == "re" else value.imag)
        return total


def _linear_parts(argument: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr]:
    argument = sympy.expand(argument)
    slope = argument.coeff(U, 1)
    offset = sympy.expand(argument - slope * U)
    if offset.has(U) or slope.has(U):
        raise _NotATermSum(argument)
    return slope, offset


def _compiled(expr: sympy.Expr, start) -> list:
    """Value and first two derivatives of one piece as functions of the global time."""
    try:
        terms = TermSum(expr)
        return [(lambda time, order=order: terms(time - start, order)) for order in range(3)]
    except _NotATermSum:
        return [_shifted(sympy.lambdify(U, sympy.diff(expr, U, order), "mpmath"), start)
                for order in range(3)]


class Histories:
    """x_i(t) and its first two derivatives from each mass's pieces, compiled for mpmath."""

    def __init__(self, derivation) -> None:
        self.starts = [_mp(p.start) for p in derivation.masses[0].pieces]
        self.functions = []
        for response in derivation.masses:
            compiled = []
            for piece, start in zip(response.pieces, self.starts):
                # the piece as printed, in its local time u = t − start, differentiated by sympy
                compiled.append(_compiled(piece.local.expression(U), start))
            self.functions.append(compiled)

        peaks = [abs(r.peak.value) for r in derivation.masses if r.peak is not None]
        self.scale = mpmath.mpf(max(peaks + [1e-300]))

    def momentum_scale(self, m, k):
        """A momentum of the size the response has: ‖M‖ · ω_max · max|x|, with
        ω_max² ≤ ‖M⁻¹K‖ (so a rounding-level jump is judged against the motion)."""
        omega = mpmath.sqrt(mpmath.mnorm(mpmath.inverse(m) * k, 1))
        return mpmath.mnorm(m, 1) * omega * self.scale

    def index(self, time, left: bool = False) -> int:
        k = 0
        for i, start in enumerate(self.starts):
            if start < time or (not left and start == time):
                k = i
        return k

    def value(self, mass: int, order: int, time, left: bool = False):
        return mpmath.mpf(self.functions[mass][self.index(time, left)][order](time))

    def at(self, k: int, order: int, time) -> list:
        return [mpmath.mpf(f[k][order](time)) for f in self.functions]


def _residual_checks(derivation, histories: Histories, loading: Loading, m, c, k) -> list[Check]:
    n = derivation.chain.size
    until = _mp(derivation.until)
    checks = []
    nodes = [(1 + x) / 2 for x in (mpmath.mpf(-0.9061798459386640), mpmath.mpf(-0.5384693101056831),
                                   mpmath.mpf(0), mpmath.mpf(0.5384693101056831),
                                   mpmath.mpf(0.9061798459386640))]
    bounds = histories.starts[1:] + [until]
    for index, (lo, hi) in enumerate(zip(histories.starts, bounds)):
        worst = mpmath.mpf(0)
        for node in nodes[:GAUSS_POINTS]:
            time = lo + (hi - lo) * node
            x, v, a = (histories.at(index, order, time) for order in range(3))
            f = loading.force(time)
            for row in range(n):
                terms = [m[row, j] * a[j] for j in range(n)] + [c[row, j] * v[j] for j in range(n)] \
                    + [k[row, j] * x[j] for j in range(n)] + [-f[row]]
                scale = sum(abs(term) for term in terms)
                residual = abs(sum(terms))
                if scale > 0:
                    worst = max(worst, residual / scale)
        passed = worst <= RESIDUAL_TOLERANCE
        checks.append(Check(f"matrix equation residual on ({float(lo):.6g}, {float(hi):.6g})",
                            passed, f"max |M x″ + C x′ + K x − f| / scale = {_figure(worst)} "
                            f"(limit {_figure(RESIDUAL_TOLERANCE)}) at {GAUSS_POINTS} points, "
                            f"every row, 40 digits"))
    return checks


def _figure(value) -> str:
    return mpmath.nstr(value, 2, min_fixed=1, max_fixed=0) if value != 0 else "0"


def _initial_check(derivation, histories: Histories, loading: Loading, m) -> Check:
    chain = derivation.chain
    n = chain.size
    zero = mpmath.mpf(0)
    x = histories.at(0, 0, zero)
    v = histories.at(0, 1, zero)
    x0 = [_mp(value) for value in chain.initial_displacements]
    v0 = [_mp(value) for value in chain.initial_velocities]
    kick = loading.kick(zero, 1)
    momentum = [sum(m[i, j] * (v[j] - v0[j]) for j in range(n)) for i in range(n)]
    scale_x = max([abs(a) for a in x0 + x] + [histories.scale])
    scale_p = max([abs(a) for a in momentum + kick] + [histories.momentum_scale(m, _matrix(chain.stiffness_matrix))])
    error = max(max(abs(a - b) for a, b in zip(x, x0)) / scale_x,
                max(abs(a - b) for a, b in zip(momentum, kick)) / scale_p)
    return Check("initial values", error <= RESIDUAL_TOLERANCE,
                 f"x(0⁺) = x₀ and M(x′(0⁺) − v₀) = impulses at 0 for every mass: largest "
                 f"relative difference {_figure(error)}")


def _jump_checks(derivation, histories: Histories, loading: Loading, m) -> list[Check]:
    n = derivation.chain.size
    checks = []
    for k in range(1, len(histories.starts)):
        time = histories.starts[k]
        before = [histories.functions[i][k - 1] for i in range(n)]
        after = [histories.functions[i][k] for i in range(n)]
        x_left = [mpmath.mpf(f[0](time)) for f in before]
        x_right = [mpmath.mpf(f[0](time)) for f in after]
        jump = [mpmath.mpf(g[1](time)) - mpmath.mpf(f[1](time)) for f, g in zip(before, after)]
        momentum = [sum(m[i, j] * jump[j] for j in range(n)) for i in range(n)]
        kick = loading.kick(time, abs(time))
        scale_x = max([abs(a) for a in x_left] + [histories.scale])
        scale_p = max([abs(a) for a in momentum + kick] + [histories.momentum_scale(m, k)])
        error = max(max(abs(a - b) for a, b in zip(x_left, x_right)) / scale_x,
                    max(abs(a - b) for a, b in zip(momentum, kick)) / scale_p)
        checks.append(Check(f"jump conditions at t = {float(time):.6g}", error <= RESIDUAL_TOLERANCE,
                            f"x continuous and M·Δx′ = impulse vector ({'an impulse acts' if any(kick) else 'none acts'}): "
                            f"largest relative difference {_figure(error)}"))
    return checks


# ----------------------------------------------------------------------------- integration


def _gauss_legendre(points: int = 8) -> list[tuple]:
    nodes = []
    for i in range(1, points + 1):
        x = mpmath.cos(mpmath.pi * (i - mpmath.mpf(1) / 4) / (points + mpmath.mpf(1) / 2))
        for _ in range(100):
            p0, p1 = mpmath.mpf(1), x
            for j in range(2, points + 1):
                p0, p1 = p1, ((2 * j - 1) * x * p1 - (j - 1) * p0) / j
            derivative = points * (x * p1 - p0) / (x * x - 1)
            step = p1 / derivative
            x -= step
            if abs(step) < mpmath.mpf(10) ** -(mpmath.mp.dps + 2):
                break
        nodes.append((x, 2 / ((1 - x * x) * derivative**2)))
    return nodes


def integrate(derivation, loading: Loading, m, c, k, samples: Sequence) -> list[list]:
    """x at the ``samples`` times (right-continuous) from y′ = A y + B f, own integration."""
    n = derivation.chain.size
    until = _mp(derivation.until)
    m_inverse = mpmath.inverse(m)
    a = mpmath.zeros(2 * n, 2 * n)
    for i in range(n):
        a[i, n + i] = 1
    lower_k, lower_c = -m_inverse * k, -m_inverse * c
    for i in range(n):
        for j in range(n):
            a[n + i, j] = lower_k[i, j]
            a[n + i, n + j] = lower_c[i, j]
    norm = mpmath.mnorm(a, 1)
    limit = mpmath.mpf(3) / max(norm, mpmath.mpf(10) ** -10)
    chain = derivation.chain
    state = mpmath.matrix([_mp(v) for v in chain.initial_displacements]
                          + [_mp(v) for v in chain.initial_velocities])
    stops = sorted({t for t in loading.times if 0 <= t < until} | {mpmath.mpf(0), until}
                   | {mpmath.mpf(s) for s in samples})
    gauss = _gauss_legendre()
    results: dict = {}
    cache: dict = {}
    wanted = samples_set(samples)

    def impulse(time):
        kick = loading.kick(time, abs(time))
        if any(kick):
            dv = m_inverse * mpmath.matrix(kick)
            for i in range(n):
                state[n + i] += dv[i]

    identity = mpmath.eye(2 * n)
    a_inverse = mpmath.inverse(a)

    def input_vector(time):
        vector = m_inverse * mpmath.matrix(loading.force(time))
        return mpmath.matrix([0] * n + [vector[i] for i in range(n)])

    for lo, hi in zip(stops, stops[1:]):
        impulse(lo)
        if lo in wanted:
            results[lo] = [state[i] for i in range(n)]
        span = hi - lo
        if loading.linear_on(lo, hi):
            # a load linear in time, b(τ) = b₀ + b₁τ, convolved exactly:
            # y(h) = e^{Ah} y + A⁻¹(e^{Ah} − I) b₀ + [A⁻²(e^{Ah} − I) − A⁻¹h] b₁
            key = ("linear", mpmath.nstr(span, 25))
            if key not in cache:
                full = mpmath.expm(a * span)
                first = a_inverse * (full - identity)
                cache[key] = (full, first, a_inverse * first - a_inverse * span)
            full, first, second = cache[key]
            start, middle = input_vector(lo), input_vector(lo + span / 2)
            state = full * state + first * start + second * ((middle - start) * (2 / span))
            continue
        steps = max(1, int(mpmath.ceil(span / limit)))
        h = span / steps
        key = ("quadrature", mpmath.nstr(h, 25))
        if key not in cache:
            full = mpmath.expm(a * h)
            partial = [(mpmath.expm(a * (h * (1 - (x + 1) / 2))), w * h / 2, (x + 1) / 2)
                       for x, w in gauss]
            cache[key] = (full, partial)
        full, partial = cache[key]
        for step in range(steps):
            start = lo + step * h
            forced = mpmath.matrix(2 * n, 1)
            for propagator, weight, fraction in partial:
                forced += weight * (propagator * input_vector(start + fraction * h))
            state = full * state + forced
    impulse(until)
    results[until] = [state[i] for i in range(n)]
    return [results[mpmath.mpf(s)] for s in samples]


def samples_set(samples: Sequence) -> set:
    return {mpmath.mpf(s) for s in samples}


def _integration_check(derivation, histories: Histories, loading: Loading, m, c, k) -> Check:
    until = _mp(derivation.until)
    count = min(MAX_COMPARED, 40 + 4 * len(histories.starts))
    samples = [until * (i + mpmath.mpf(1) / 3) / count for i in range(count)]
    samples = [s for s in samples if all(abs(s - b) > until * mpmath.mpf(10) ** -9
                                          for b in histories.starts)]
    integrated = integrate(derivation, loading, m, c, k, samples)
    worst, largest = 0.0, 0.0
    where = None
    for time, values in zip(samples, integrated):
        for mass, value in enumerate(values):
            ours = histories.value(mass, 0, time)
            largest = max(largest, abs(float(ours)))
            difference = abs(float(ours - value))
            if difference > worst:
                worst, where = difference, (float(time), mass + 1)
    relative = worst / largest if largest > 0 else worst
    passed = math.isfinite(relative) and relative <= INTEGRATION_TOLERANCE
    at = f" (mass {where[1]} at t = {where[0]:.6g} s)" if where else ""
    return Check("independent integration of the full system", passed,
                 f"state-space y′ = A y + B f(t) stepped by the matrix exponential, loads "
                 f"linear in time convolved exactly, others by 8-point Gauss–Legendre (30 "
                 f"digits), {len(samples)} times, "
                 f"every mass: max deviation {relative:.1e} of the largest |x|{at} "
                 f"(limit {INTEGRATION_TOLERANCE:.0e})")


def _coverage_check(derivation) -> Check:
    pieces = derivation.masses[0].pieces
    ok = pieces[0].start == 0 and all(a.end == b.start for a, b in zip(pieces, pieces[1:])) \
        and pieces[-1].end is None
    same = all(len(r.pieces) == len(pieces) for r in derivation.responses)
    return Check("pieces cover the analysis window", ok and same,
                 f"{len(pieces)} intervals from 0 to until, the same for every response"
                 if ok and same else "the pieces do not meet end to end")


def chain_checks(derivation) -> list[Check]:
    """Every independent check of a several-mass derivation."""
    with mpmath.workdps(DPS):
        m, c, k = equation_matrices(derivation)
        loading = Loading(derivation)
        histories = Histories(derivation)
        checks = [_coverage_check(derivation)]
        checks += _residual_checks(derivation, histories, loading, m, c, k)
        checks.append(_initial_check(derivation, histories, loading, m))
        checks += _jump_checks(derivation, histories, loading, m)
    with mpmath.workdps(30):
        checks.append(_integration_check(derivation, histories, loading, m, c, k))
    finite = all(r.peak is None or math.isfinite(r.peak.value) for r in derivation.responses)
    checks.append(Check("finite results", finite, "every reported number is finite"
                        if finite else "a peak is not finite"))
    return checks

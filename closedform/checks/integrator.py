"""The independent integration: the equation integrated at 40 digits by matrix
exponentials between the load's own breakpoints, and the check comparing it with the pieces."""

from __future__ import annotations

import bisect
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import mpmath
import sympy
from mpmath.calculus.quadrature import GaussLegendre

from .base import (
    GAUSS_DEGREE,
    INTEGRATION_DIGITS,
    INTEGRATION_TOLERANCE,
    SAMPLES,
    STEP_LIMIT,
    TINY,
    Check,
    T,
    figure,
    guard,
    short,
    to_mpf,
)
from .model import Equation, Problem, SymbolicLoads, load_on

# ----------------------------------------------------------------------------- integration


@dataclass
class Trajectory:
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


def integrate(problem: Any, loads: Any = None, output: Sequence | None = None) -> Trajectory:
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
    loads = loads if loads is not None else SymbolicLoads(problem)
    with mpmath.workdps(INTEGRATION_DIGITS):
        equation = problem.equation
        n = equation.order
        a = [to_mpf(equation.a(i), None, INTEGRATION_DIGITS) for i in range(n + 1)]
        b = to_mpf(equation.scale, None, INTEGRATION_DIGITS)
        until = to_mpf(problem.until, None, INTEGRATION_DIGITS)
        if not until > 0:
            raise ValueError(f"the analysis window ends at {short(until)} s")
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
        z = [to_mpf(problem.initial[i], None, INTEGRATION_DIGITS) / rho ** i for i in range(n)]
        oscillation, decay = None, None

        cuts = loads.cuts(until)
        multiply = _matvec_plain if loads.long_history else _matvec

        cache: dict[tuple, Any] = {}
        weights = None if output is None else [output[i] * rho ** i for i in range(n)]

        def sampled(state):
            return state[0] if weights is None else mpmath.fsum(w * v for w, v in zip(weights, state))

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
        return Trajectory(samples, largest, steps, capped)


# ----------------------------------------------------------------------------- inputs with derivatives
#
# Where derivatives of the input act, a_n x⁽ⁿ⁾ + … + a_0 x = b_m f⁽ᵐ⁾ + … + b_0 f, the
# integration uses the classical realisation through an auxiliary w with
# a_n w⁽ⁿ⁾ + … + a_0 w = f (the same companion system as for a plain load, b = 1) and
# x = b_m w⁽ᵐ⁾ + … + b_0 w: it needs no derivative of f, and shares nothing with the
# transform B(s)F(s)/P(s) of the derivation.


def integrate_with_inputs(problem: Any) -> Trajectory:
    """The independent integration of x = Σ b_j w⁽ʲ⁾ through w (see above); w starts from the
    state that gives the case's x(0⁻) … x⁽ⁿ⁻¹⁾(0⁻) with the load at rest before t = 0."""
    equation = problem.equation
    n = equation.order
    b = list(reversed(equation.inputs))          # b_0 … b_m
    m = len(b) - 1
    with mpmath.workdps(INTEGRATION_DIGITS):
        a = [to_mpf(equation.a(i), None, INTEGRATION_DIGITS) for i in range(n + 1)]
        bs = [to_mpf(value, None, INTEGRATION_DIGITS) for value in b]
        # w⁽ⁱ⁾ as a combination of (w, …, w⁽ⁿ⁻¹⁾) while f = 0 (before t = 0)
        rows = [[mpmath.mpf(1 if i == j else 0) for j in range(n)] for i in range(n)]
        for i in range(n, 2 * n + m):
            rows.append([-mpmath.fsum(a[lo] * rows[lo + i - n][j] for lo in range(n)) / a[n]
                         for j in range(n)])
        matrix = mpmath.matrix([[mpmath.fsum(bs[j] * rows[j + k][c] for j in range(m + 1))
                                 for c in range(n)] for k in range(n)])
        x0 = [to_mpf(v, None, INTEGRATION_DIGITS) for v in problem.initial]
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
        auxiliary = Problem(Equation(equation.coefficients, sympy.S.One), problem.segments,
                            problem.impulses, tuple(sympy.Float(mpmath.nstr(v, INTEGRATION_DIGITS),
                                                                INTEGRATION_DIGITS) for v in w0),
                            problem.until, problem.pieces)
        trajectory = integrate(auxiliary, auxiliary.integration_loads(), output)
        if m == n:
            samples = []
            for time, value in trajectory.samples:
                load = load_on(problem, time, time, {})
                samples.append((time, value + lead_input * (to_mpf(load.subs(T, sympy.Float(
                    mpmath.nstr(time, INTEGRATION_DIGITS), INTEGRATION_DIGITS)), None,
                    INTEGRATION_DIGITS) if load != 0 else 0)))
            largest = max([abs(v) for _t, v in samples] + [trajectory.largest])
            trajectory = Trajectory(samples, largest, trajectory.steps, trajectory.capped)
        return trajectory


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


def _spread(samples: list, cap: int | None) -> list:
    """At most ``cap`` of the samples, evenly spread over the list (all of them without cap)."""
    if cap is None or len(samples) <= cap:
        return samples
    return [samples[(i * (len(samples) - 1)) // (cap - 1)] for i in range(cap)]


PHASE_DIGITS = 10      # digits of the phase the integration must keep at the end of the window


def phase_reach(problem: Any) -> mpmath.mpf:
    """An upper bound on the phase of the fastest mode over the window: the window length
    times Fujiwara's bound on the roots of the characteristic polynomial,
    |s| ≤ 2·max_k |a_{n−k}/a_n|^{1/k} (Fujiwara 1916; a published bound, from memory)."""
    with mpmath.workdps(INTEGRATION_DIGITS):
        equation = problem.equation
        n = equation.order
        numbers = [to_mpf(equation.a(i)) for i in range(n + 1)]
        top = abs(numbers[n])
        bound = max([abs(numbers[n - k] / top) ** (mpmath.mpf(1) / k) for k in range(1, n + 1)],
                    default=mpmath.mpf(0))
        return 2 * bound * abs(to_mpf(problem.until))


def integration_check(problem: Any, label: str = "", peak: Any = None) -> Check:
    name = "independent integration" + (f" ({label})" if label else "")
    try:
        reach = phase_reach(problem)
    except (ValueError, TypeError, ZeroDivisionError):
        reach = mpmath.mpf(0)
    if reach > mpmath.mpf(10) ** (INTEGRATION_DIGITS - PHASE_DIGITS):
        return Check(name, False, f"could not be established: the fastest mode turns through "
                     f"up to {figure(reach)} rad over the window, more than "
                     f"{INTEGRATION_DIGITS}-digit arithmetic can follow to {PHASE_DIGITS} digits "
                     f"(the other checks still judge the pieces)", inconclusive=True)
    check = _integration_check(problem, name, peak)
    if not check.passed and "step limit reached" in check.detail:
        return Check(check.name, False, "could not be established: " + check.detail,
                     inconclusive=True)
    return check


def _integration_check(problem: Any, name: str, peak: Any) -> Check:
    def run() -> tuple[bool, str]:
        if getattr(problem.equation, "inputs", ()):
            trajectory = integrate_with_inputs(problem)
        else:
            trajectory = integrate(problem, problem.integration_loads())
        samples = _spread(trajectory.samples, problem.sample_cap)
        starts = problem.piece_starts(INTEGRATION_DIGITS)
        functions: dict[int, Callable] = {}
        worst, where = mpmath.mpf(0), None
        with mpmath.workdps(INTEGRATION_DIGITS):
            for time, value in samples:
                index = bisect.bisect_right(starts, time) - 1
                if index < 0:
                    return False, f"no piece covers t = {short(time)} s"
                if index not in functions:
                    functions[index] = problem.value_function(index)
                difference = abs(functions[index](time) - value)
                if where is None or difference > worst:
                    worst, where = difference, time
            scale = max(trajectory.largest, TINY)
            passed = worst <= INTEGRATION_TOLERANCE * scale
        peak_note = f", the derivation's peak {float(peak):.6g}" if peak is not None else ""
        return passed, (f"max |x − x_integrated| = {figure(worst)} at t = {short(where)} s, "
                        f"{figure(worst / scale)} of max |x_integrated| = {figure(scale)}"
                        f"{peak_note} (limit {figure(INTEGRATION_TOLERANCE)}; "
                        f"{len(samples)} points, {trajectory.steps} steps, "
                        f"{INTEGRATION_DIGITS}-digit matrix exponential and Gauss–Legendre"
                        + ("; step limit reached on a stiff interval, quadrature accuracy not "
                           "assured" if trajectory.capped else "") + ")")
    return guard(name, run)

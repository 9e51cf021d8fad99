"""The checks of short histories, on the pieces' sympy expressions: the pieces cover the
window, the residual of the equation on each piece, the initial values, the conditions at
every breakpoint, and the area of pulses given by their impulse."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import mpmath
import sympy

from ..case import TAU, Case, LoadSpec
from .base import (
    AREA_DIGITS,
    AREA_TOLERANCE,
    EXACT_DIGITS,
    EXACT_TOLERANCE,
    FLOAT_DIGITS,
    FLOAT_TOLERANCE,
    POINT_FRACTIONS,
    SIMPLIFY_OPS_LIMIT,
    TINY,
    Check,
    T,
    figure,
    guard,
    has_float,
    is_zero,
    same_time,
    short,
    substitute,
    sum_terms,
    to_mpf,
)
from .compiler import compile_function
from .model import Equation, Impulse, Problem, load_on, load_spans, local_shape


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
            terms = compile_function([term.subs(probe) for term in sum_terms(expanded)])
            with mpmath.workdps(FLOAT_DIGITS):
                values = terms(mpmath.mpf(0))
                if abs(mpmath.fsum(values)) > FLOAT_TOLERANCE * mpmath.fsum(abs(v) for v in values):
                    return False
        except (ValueError, TypeError, ZeroDivisionError):
            pass
    return sympy.simplify(expanded) == 0


# ----------------------------------------------------------------------------- coverage


def coverage_check(problem: Any, values: Mapping,
                    number: Callable[[sympy.Expr], mpmath.mpf] | None = None) -> Check:
    def run() -> tuple[bool, str]:
        pieces = problem.pieces
        if not pieces:
            return False, "the derivation has no pieces"
        convert = number if number is not None else (lambda value: to_mpf(value, values))
        until = convert(problem.until)
        problems = []
        start = convert(pieces[0].start)
        if start != 0:
            problems.append(f"the first piece starts at {short(start)} s, not 0")
        previous = None
        for index, piece in enumerate(pieces):
            here = convert(piece.start)
            if previous is not None and not here > previous:
                problems.append(f"piece {index + 1} starts at {short(here)} s, not after "
                                f"{short(previous)} s")
            if piece.end is not None:
                end = convert(piece.end)
                if index + 1 == len(pieces):
                    if end < until and not same_time(end, until, until):
                        problems.append(f"the last piece ends at {short(end)} s, before "
                                        f"until = {short(until)} s")
                else:
                    following = convert(pieces[index + 1].start)
                    if not same_time(end, following, until):
                        problems.append(f"piece {index + 1} ends at {short(end)} s but piece "
                                        f"{index + 2} starts at {short(following)} s")
            elif index + 1 != len(pieces):
                problems.append(f"piece {index + 1} is open-ended but not the last")
            previous = here
        if not convert(pieces[-1].start) < until:
            problems.append(f"the last piece starts at or after until = {short(until)} s")
        if problems:
            return False, "; ".join(problems)
        count = f"{len(pieces)} piece" + ("" if len(pieces) == 1 else "s")
        return True, f"{count} on [0, {short(until)}] s, end to end"
    return guard("pieces cover the analysis window", run)


# ----------------------------------------------------------------------------- residual


def _split_zero(x: sympy.Expr, load: sympy.Expr, equation: Equation, simplify: bool,
                probe: Mapping | None = None) -> bool:
    """Exact test of Σ a_i x⁽ⁱ⁾ − b·load ≡ 0, term by term.

    x is grouped as Σ C_φ·φ(t) (C_φ free of t); the operator is applied to each φ alone and
    expanded, and the coefficient of every resulting function of t must vanish. This keeps
    the (possibly long) constants C_φ out of the expansion of derivatives.
    """
    groups: dict[sympy.Expr, sympy.Expr] = {}
    for term in sum_terms(x):
        constant, phi = term.as_independent(T, as_Add=False)
        groups[phi] = groups.get(phi, sympy.S.Zero) + constant
    totals: dict[sympy.Expr, sympy.Expr] = {}
    order = equation.order
    for phi, constant in groups.items():
        image = sympy.expand(sympy.Add(*[equation.a(i) * sympy.diff(phi, T, i)
                                         for i in range(order + 1)]))
        for term in sum_terms(image):
            k, psi = term.as_independent(T, as_Add=False)
            totals[psi] = totals.get(psi, sympy.S.Zero) + constant * k
    for term in sum_terms(sympy.expand(equation.right_side(load))):
        k, psi = term.as_independent(T, as_Add=False)
        totals[psi] = totals.get(psi, sympy.S.Zero) - k
    return all(_zero_symbolically(total, simplify, probe) for total in totals.values())


def _residual_figure(equation: Equation, derivatives: Sequence[sympy.Expr], load: sympy.Expr,
                     spans: Sequence[tuple[mpmath.mpf, mpmath.mpf]],
                     dps: int) -> tuple[mpmath.mpf, mpmath.mpf]:
    """max |Σ terms| / Σ |terms| over points inside the spans, and where."""
    terms: list[sympy.Expr] = []
    for i in range(equation.order + 1):
        a = equation.a(i)
        if a != 0:
            terms.extend(a * term for term in sum_terms(derivatives[i]))
    if equation.inputs:
        terms.extend(-term for term in sum_terms(sympy.expand(equation.right_side(load))))
    else:
        terms.extend(-equation.scale * term for term in sum_terms(load))
    evaluate = compile_function(terms)
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


def residual_checks(problem: Problem, reference: Mapping, fallbacks: Sequence[Mapping],
                     symbolic: bool) -> list[Check]:
    checks = []
    for index, piece in enumerate(problem.pieces):
        end = piece.end if piece.end is not None else problem.until
        name = f"ode residual on ({short(piece.start)}, {short(end)})"
        if symbolic:
            name += " [symbolic]"
        checks.append(guard(name, lambda index=index, end=end: _residual(
            problem, index, end, reference, fallbacks, symbolic)))
    return checks


def _residual(problem: Problem, index: int, end: sympy.Expr, reference: Mapping,
              fallbacks: Sequence[Mapping], symbolic: bool) -> tuple[bool, str]:
    piece = problem.pieces[index]
    lo, hi = to_mpf(piece.start, reference), to_mpf(end, reference)
    if not hi > lo:
        return False, f"the interval ({short(lo)}, {short(hi)}) is empty or reversed"
    spans = load_spans(problem, piece.start, end, reference)
    groups: dict[sympy.Expr, list[tuple[sympy.Expr, sympy.Expr]]] = {}
    for span in spans:
        load = load_on(problem, to_mpf(span[0], reference), to_mpf(span[1], reference), reference)
        groups.setdefault(load, []).append(span)
    floats = has_float(piece.x)
    dps, tolerance = (FLOAT_DIGITS, FLOAT_TOLERANCE) if floats else (EXACT_DIGITS, EXACT_TOLERANCE)
    note = ""
    if len(groups) > 1:
        note = "; the load changes inside this piece at t = " + ", ".join(
            short(to_mpf(span[0], reference)) for span in spans[1:])
    worst, where, exact = mpmath.mpf(0), None, True
    for load, group in groups.items():
        if not floats and _split_zero(piece.x, load, problem.equation, symbolic,
                                      fallbacks[0] if symbolic and fallbacks else None):
            continue
        exact = False
        derivatives = problem.derivatives(index)
        for values in (fallbacks if symbolic else [{}]):
            equation = problem.equation.subs(values)
            numeric = [substitute(d, values) for d in derivatives]
            bounds = [(to_mpf(a, values), to_mpf(b, values)) for a, b in group]
            ratio, time = _residual_figure(equation, numeric, substitute(load, values), bounds, dps)
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
    return passed, (f"max |residual|/scale = {figure(worst)} at t = {short(where)} s "
                    f"(limit {figure(tolerance)}; {route}){note}")


# ----------------------------------------------------------------------------- initial values and jumps


def _compare(pairs: Sequence[tuple[str, Sequence[sympy.Expr], Sequence[sympy.Expr], sympy.Expr]],
             symbolic: bool, fallbacks: Sequence[Mapping], time: sympy.Expr) -> tuple[bool, str]:
    """Each pair: label, terms on the left side (at ``time``), on the right, and the jump
    expected from left to right. Exact where expansion gives 0, else by numbers."""
    floats = any(has_float(*left, *right) for _, left, right, _ in pairs)
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
            instant = to_mpf(time, values, dps + 10)
            terms_left = [substitute(e, values) for e in left]
            terms_right = [substitute(e, values) for e in right]
            jump = substitute(expected, values)
            with mpmath.workdps(dps):
                left_values = compile_function(terms_left)(instant) if terms_left else []
                right_values = compile_function(terms_right)(instant) if terms_right else []
                jump_value = to_mpf(jump, None, dps)
                mismatch = abs(mpmath.fsum(right_values) - mpmath.fsum(left_values) - jump_value)
                magnitude = mpmath.fsum(abs(v) for v in left_values + right_values) + abs(jump_value)
                ratio = mismatch / max(magnitude, TINY)
            if ratio > worst or not worst_label:
                worst, worst_label = ratio, label
    if exact:
        how = "simplify" if symbolic else "expand"
        return True, f"exact: the differences {how} to 0"
    return worst <= tolerance, (f"max |mismatch|/scale = {figure(worst)} in {worst_label} "
                                f"(limit {figure(tolerance)}; {dps}-digit evaluation"
                                + (f" at {len(fallbacks)} substitution(s)" if symbolic else "")
                                + ")")


_PRIMES = ("", "'", "''", "'''", "⁽⁴⁾")


def name_of_derivative(j: int) -> str:
    return "x" + (_PRIMES[j] if j < len(_PRIMES) else f"^({j})")


def _impulses_at(problem: Problem, time: sympy.Expr, values: Mapping) -> list[Impulse]:
    instant = to_mpf(time, values)
    scale = abs(to_mpf(problem.until, values))
    return [i for i in problem.impulses if same_time(to_mpf(i.at, values), instant, scale)]


def initial_check(problem: Problem, reference: Mapping, fallbacks: Sequence[Mapping],
                   symbolic: bool) -> Check:
    def run() -> tuple[bool, str]:
        if not problem.pieces:
            return False, "no pieces"
        n = problem.equation.order
        derivatives = problem.derivatives(0, n - 1)
        kicks = _impulses_at(problem, sympy.S.Zero, reference)
        jumps = _jumps(problem, sympy.S.Zero, reference, kicks)
        pairs = []
        for j in range(n):
            expected = problem.initial[j] + jumps[j]
            pairs.append((f"{name_of_derivative(j)}(0+)", [], list(sum_terms(derivatives[j])),
                          expected))
        passed, detail = _compare(pairs, symbolic, fallbacks, sympy.S.Zero)
        given = "at rest" if all(is_zero(v) for v in problem.initial) else "as given"
        extra = f"; impulse of {', '.join(k.load for k in kicks)} at t = 0" if kicks else ""
        if problem.equation.inputs and any(not is_zero(j) for j in jumps):
            extra += "; jumps from the input's derivatives at t = 0 added"
        return passed, f"initial state {given}{extra}: {detail}"
    return guard("initial values" + (" [symbolic]" if symbolic else ""), run)


def breakpoint_checks(problem: Problem, reference: Mapping, fallbacks: Sequence[Mapping],
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
            left = problem.derivatives(index, n - 1)
            right = problem.derivatives(index + 1, n - 1)
            pairs = []
            for j in range(n):
                pairs.append((f"{name_of_derivative(j)} at t = {short(time)}",
                              list(sum_terms(left[j])), list(sum_terms(right[j])), jumps[j]))
            passed, detail = _compare(pairs, symbolic, fallbacks, time)
            names = [name_of_derivative(j) for j in range(n)]
            if problem.equation.inputs:
                shown = ", ".join(f"{name} by {short(to_mpf(value, reference))}"
                                  for name, value in zip(names, jumps))
                rule = (f"jumps from the input's derivatives and impulses (integrated across "
                        f"t = {short(time)} from the load's own branches): {shown}")
            elif kicks:
                size = sympy.simplify(jump) if symbolic else short(to_mpf(jump, reference))
                rule = (f"{names[-1]} jumps by b·J/a_n = {size} "
                        f"(impulse of {', '.join(k.load for k in kicks)})")
                if n > 1:
                    rule = f"{', '.join(names[:-1])} continuous; {rule}"
            else:
                rule = f"{', '.join(names)} continuous"
            return passed, f"{rule}: {detail}"
        checks.append(guard(f"breakpoint conditions at t = {short(time)}{suffix}", run))

    until = to_mpf(problem.until, reference)
    known = [to_mpf(b, reference) for b in boundaries]
    return checks + impulses_off_boundaries(
        problem.impulses, n, until, lambda value: to_mpf(value, reference),
        lambda at: any(same_time(at, b, until) for b in known), suffix)


# ----------------------------------------------------------------------------- inputs with derivatives
#
# Where derivatives of the input act, a_n x⁽ⁿ⁾ + … + a_0 x = b_m f⁽ᵐ⁾ + … + b_0 f: across a
# breakpoint, through the auxiliary w with a_n w⁽ⁿ⁾ + … + a_0 w = f and x = Σ b_j w⁽ʲ⁾,
# w, …, w⁽ⁿ⁻²⁾ are continuous, w⁽ⁿ⁻¹⁾ jumps by J/a_n (impulse J), and each higher
# derivative by (Δf⁽ⁱ⁻ⁿ⁾ − Σ_l a_l Δw⁽ˡ⁺ⁱ⁻ⁿ⁾)/a_n from the equation; the jumps Δf⁽ʲ⁾ of the
# load come from its own branches on either side. x⁽ᵏ⁾ then jumps by Σ_j b_j Δw⁽ʲ⁺ᵏ⁾.


def load_jumps(problem: Problem, time: sympy.Expr, values: Mapping, count: int) -> list:
    """f(t⁺) − f(t⁻), f′(t⁺) − f′(t⁻), … (``count`` of them) from the load's own branches."""
    instant = to_mpf(time, values)
    scale = max(abs(to_mpf(problem.until, values)), TINY)
    jumps = [sympy.S.Zero] * count
    for segment in problem.segments:
        start = to_mpf(segment.start, values)
        end = None if segment.end is None else to_mpf(segment.end, values)
        starts_here = same_time(start, instant, scale)
        ends_here = end is not None and same_time(end, instant, scale)
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


def _jumps(problem: Problem, time: sympy.Expr, values: Mapping, kicks: Sequence[Impulse]) -> list:
    """What x, x′, … x⁽ⁿ⁻¹⁾ jump by at ``time`` (impulses ``kicks`` there)."""
    equation = problem.equation
    n = equation.order
    impulse = sympy.Add(*[k.size for k in kicks])
    if not equation.inputs:
        return [sympy.S.Zero] * (n - 1) + [equation.jump(impulse)]
    b = list(reversed(equation.inputs))          # b_0 … b_m
    m = len(b) - 1
    df = load_jumps(problem, time, values, max(m, 1))
    a = [equation.a(i) for i in range(n + 1)]
    dw = [sympy.S.Zero] * (n + m)
    dw[n - 1] = impulse / a[n]
    for i in range(n, n + m):
        dw[i] = (df[i - n] - sympy.Add(*[a[lo] * dw[lo + i - n] for lo in range(n)])) / a[n]
    return [sympy.Add(*[b[j] * dw[j + k] for j in range(m + 1)]) for k in range(n)]


def impulses_off_boundaries(impulses: Sequence[Impulse], order: int, until: mpmath.mpf,
                             number: Callable[[sympy.Expr], mpmath.mpf],
                             on_boundary: Callable[[mpmath.mpf], bool],
                             suffix: str = "") -> list[Check]:
    """An impulse inside the window must sit on a piece boundary (where the highest
    derivative can jump): a failed check for each one that does not."""
    checks = []
    for impulse in impulses:
        def run(impulse: Impulse = impulse) -> tuple[bool, str]:
            at = number(impulse.at)
            if at <= 0 or at >= until or on_boundary(at):
                return True, ""
            return False, (f"the impulse of {impulse.load} acts at t = {short(at)} s, where no "
                           f"piece ends: {name_of_derivative(order - 1)} cannot jump there")
        check = guard(f"breakpoint conditions at t = {short(impulse.at)}{suffix}", run)
        if not check.passed:
            checks.append(check)
    return checks


# ----------------------------------------------------------------------------- impulse areas


def impulse_area_checks(case: Case, substitutions: Sequence[Mapping]) -> list[Check]:
    checks = []
    for load in case.loads:
        if load.shape == "impulse" or load.values.get("impulse") is None:
            continue

        def run(load: LoadSpec = load) -> tuple[bool, str]:
            branches, _ = local_shape(load)
            parts, passed = [], True
            for values in substitutions:
                with mpmath.workdps(AREA_DIGITS):
                    area = mpmath.mpf(0)
                    for lo, hi, value, _rate in branches:
                        if hi is None:
                            raise ValueError("the pulse has no end")
                        expr = substitute(sympy.sympify(value), values)
                        if expr.free_symbols - {TAU}:
                            raise ValueError(f"no numeric value for {expr}")
                        function = compile_function([expr], TAU)
                        area += mpmath.quad(lambda u, f=function: f(u)[0],
                                            [to_mpf(lo, values), to_mpf(hi, values)])
                    stated = to_mpf(load.values["impulse"], values)
                    difference = abs(area - stated) / max(abs(stated), TINY)
                passed = passed and difference <= AREA_TOLERANCE
                parts.append(f"∫ load dt = {mpmath.nstr(area, 12)} vs stated "
                             f"{mpmath.nstr(stated, 12)} (relative difference {figure(difference)})")
            return passed, "; ".join(parts) + f" (limit {figure(AREA_TOLERANCE)}, mpmath.quad " \
                f"of the {load.shape} shape at {AREA_DIGITS} digits)"
        checks.append(guard(f"impulse of {load.key}", run))
    return checks

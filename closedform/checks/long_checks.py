"""The checks of long histories on numbers: one residual check over all pieces, the initial
values, one check of the conditions at all boundaries, the integration, the pulse areas."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import mpmath

from ..case import Case
from .base import (
    EXACT_DIGITS,
    EXACT_TOLERANCE,
    FLOAT_DIGITS,
    FLOAT_TOLERANCE,
    TINY,
    Check,
    figure,
    guard,
    is_zero,
    short,
)
from .exact import coverage_check, impulse_area_checks, impulses_off_boundaries, name_of_derivative
from .integrator import integration_check
from .long import LONG_POINT_FRACTIONS, PARSE_DIGITS, LongProblem, NumericLoads, long_number
from .model import Impulse


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
            f"(limit {figure(FLOAT_TOLERANCE)}), {EXACT_DIGITS}-digit of the exact ones (limit "
            f"{figure(EXACT_TOLERANCE)}){points}")


def _long_ends(problem: LongProblem) -> list[mpmath.mpf]:
    """Where each piece ends: its stated end, or the end of the window for the last."""
    if not hasattr(problem, "_ends"):
        until = long_number(problem.until)
        problem._ends = [long_number(p.end) if p.end is not None else until
                         for p in problem.pieces]
    return problem._ends


def _long_residual_check(problem: LongProblem) -> Check:
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
                return False, (f"piece {index + 1}: the interval ({short(lo)}, {short(hi)}) is "
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
            text = f"({short(problem.pieces[i].lo)}, {short(ends[i])})"
            if i in changes:
                text += " where the load changes inside the piece at t = " + \
                    ", ".join(short(t) for t in changes[i][:5])
            return text
        failed = ""
        if over:
            failed = (f"{len(over)} of {count} pieces over the limit, the first on "
                      f"{interval(over[0])}; ")
        return not over, (f"{failed}max |residual|/scale = {figure(largest)} at t = "
                          f"{short(where)} s on {interval(index)} (limit {figure(limit)}; "
                          + _route(kinds, f" at {len(LONG_POINT_FRACTIONS)} points per interval "
                                          f"between load breakpoints") + ")")
    return guard(f"ode residual on {count} pieces", run)


def _jump(problem: LongProblem, kicks: Sequence[Impulse]) -> mpmath.mpf:
    """b·ΣJ/a_n (numbers)."""
    with mpmath.workdps(PARSE_DIGITS):
        return problem.b * mpmath.fsum(long_number(k.size) for k in kicks) / \
            problem.a[problem.equation.order]


def _long_initial_check(problem: LongProblem) -> Check:
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
                expected = long_number(problem.initial[j]) + (jump if j == n - 1 else 0)
                ratio = _mismatch([], derivatives[j], expected)
                if ratio > worst or not label:
                    worst, label = ratio, f"{name_of_derivative(j)}(0+)"
        given = "at rest" if all(is_zero(v) for v in problem.initial) else "as given"
        extra = f"; impulse of {', '.join(k.load for k in kicks)} at t = 0" if kicks else ""
        return worst <= limit, (f"initial state {given}{extra}: max |mismatch|/scale = "
                                f"{figure(worst)} in {label} (limit {figure(limit)}; "
                                f"{dps}-digit evaluation)")
    return guard("initial values", run)


def _long_breakpoint_checks(problem: LongProblem) -> list[Check]:
    n = problem.equation.order
    pieces = problem.pieces
    count = len(pieces) - 1
    names = [name_of_derivative(j) for j in range(n)]

    def run() -> tuple[bool, str]:
        worst = None                          # (ratio / limit, ratio, limit, label)
        over: list[str] = []
        kinds: set[bool] = set()
        jumps: list[tuple[mpmath.mpf, list[Impulse]]] = []
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
                        largest, label = ratio, f"{names[j]} at t = {short(time)}"
            if largest > limit:
                over.append(label)
            if worst is None or largest / limit > worst[0]:
                worst = (largest / limit, largest, limit, label)
        if worst is None:
            return True, "one piece, no boundary"
        _, largest, limit, label = worst
        rule = f"{', '.join(names)} continuous"
        if jumps:
            shown = ", ".join(short(time) for time, _ in jumps[:5]) + (", …" if len(jumps) > 5 else "")
            loads = sorted({k.load for _, kicks in jumps for k in kicks})
            rule = (f"{', '.join(names[:-1])} continuous; " if n > 1 else "") + \
                f"{names[-1]} jumps by b·J/a_n at t = {shown} (impulse of {', '.join(loads)})"
        failed = f"{len(over)} of {count} boundaries fail, the first in {over[0]}; " if over else ""
        return not over, (f"{rule}: {failed}max |mismatch|/scale = {figure(largest)} in {label} "
                          f"(limit {figure(limit)}; " + _route(kinds, "") + ")")
    checks = [guard(f"breakpoint conditions at {count} boundaries", run)] if count else []

    until = long_number(problem.until)
    known = [piece.lo for piece in pieces[1:]]
    return checks + impulses_off_boundaries(
        problem.impulses, n, until, long_number,
        lambda at: bool(NumericLoads.near(known, known, at, until)))


def long_history_checks(case: Case, problem: LongProblem, peak: Any) -> list[Check]:
    checks = [coverage_check(problem, {}, long_number)]
    checks.append(_long_residual_check(problem))
    checks.append(_long_initial_check(problem))
    checks += _long_breakpoint_checks(problem)
    checks.append(integration_check(problem, peak=peak))
    return checks + impulse_area_checks(case, [{}])

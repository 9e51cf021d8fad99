"""The numbers an engineer takes from a response: peak, time of peak, static response, DLF.

Extremes are found from the roots of the derivative on each interval plus the interval
ends — never by taking the largest of sampled values. A fine float grid only brackets the
sign changes of x'(t); each root is then refined to 30 significant digits with mpmath.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import mpmath
import numpy
import sympy

from .basis import ExponentialPolynomial, NumericExponentialPolynomial
from .response import load_pieces

DIGITS = 30
GRID_PER_SCALE = 64          # grid points per shortest period or decay time
GRID_LIMIT = 400_000         # per interval
PEAK_TOLERANCE = 1e-9        # "earliest time within 1e-9 (relative) of the maximum"


@dataclass(frozen=True)
class Extreme:
    """A signed value and the earliest time its magnitude is reached (SI)."""

    value: float
    time: float
    value_mp: object = None   # the 30-digit value, for checks that need it


@dataclass(frozen=True)
class Interval:
    """One interval [start, end] with the function on it in local time (numeric)."""

    start: mpmath.mpf
    end: mpmath.mpf
    function: NumericExponentialPolynomial


def numeric_intervals(locals_: Sequence[ExponentialPolynomial | NumericExponentialPolynomial],
                      starts: Sequence[sympy.Expr], until: sympy.Expr,
                      substitutions: Mapping | None = None) -> list[Interval]:
    """Pieces as numeric functions on [start, end] (the last one ends at ``until``)."""
    subs = dict(substitutions or {})
    with mpmath.workdps(DIGITS + 10):
        numeric_starts = [mpmath.mpf(str(sympy.N(sympy.sympify(a).subs(subs), DIGITS + 10)))
                          for a in starts]
        end = mpmath.mpf(str(sympy.N(sympy.sympify(until).subs(subs), DIGITS + 10)))
    bounds = numeric_starts[1:] + [end]
    return [Interval(a, b, f if isinstance(f, NumericExponentialPolynomial) else f.numeric(subs, DIGITS))
            for a, b, f in zip(numeric_starts, bounds, locals_)]


def stationary_points(function: NumericExponentialPolynomial, length: mpmath.mpf) -> list:
    """Roots of the function's derivative on (0, length), refined to 30 digits."""
    derivative = function.derivative()
    if not derivative.rows or length <= 0:
        return []
    scale = derivative.fastest_scale()
    count = GRID_PER_SCALE * 4 if scale == float("inf") else int(float(length) / scale * GRID_PER_SCALE)
    count = min(max(count, 256), GRID_LIMIT)
    grid = numpy.linspace(0.0, float(length), count + 1)
    with numpy.errstate(over="ignore", invalid="ignore"):
        values = derivative.evaluate_float(grid)
    signs = numpy.where(numpy.isfinite(values), numpy.sign(values), 0.0)
    roots = [mpmath.mpf(grid[i]) for i in numpy.nonzero(signs[1:-1] == 0)[0] + 1]
    for i in numpy.nonzero(signs[:-1] * signs[1:] < 0)[0]:
        roots.append(_refine(derivative, mpmath.mpf(grid[i]), mpmath.mpf(grid[i + 1])))
    return sorted(r for r in roots if 0 < r < length)


def _refine(function: NumericExponentialPolynomial, low, high):
    """Bracketed root by the Illinois (modified regula falsi) method, then bisection."""
    with mpmath.workdps(DIGITS + 10):
        f_low, f_high = function(low), function(high)
        side = 0
        for _ in range(200):
            if f_high == f_low:
                break
            middle = (low * f_high - high * f_low) / (f_high - f_low)
            if not low < middle < high:
                middle = (low + high) / 2
            f_middle = function(middle)
            if f_middle == 0:
                return middle
            if (f_middle > 0) == (f_high > 0):
                high, f_high = middle, f_middle
                if side == 1:
                    f_low /= 2
                side = 1
            else:
                low, f_low = middle, f_middle
                if side == -1:
                    f_high /= 2
                side = -1
            if abs(high - low) <= mpmath.mpf(10) ** (-DIGITS) * max(1, abs(high)):
                break
        return (low + high) / 2


def extreme_magnitude(intervals: Sequence[Interval]) -> Extreme | None:
    """max |f| over the intervals, signed, at the earliest time it is reached."""
    candidates = []
    with mpmath.workdps(DIGITS + 10):
        for interval in intervals:
            length = interval.end - interval.start
            points = [mpmath.mpf(0)] + stationary_points(interval.function, length)
            if length > 0:
                points.append(length)
            for local in points:
                candidates.append((interval.start + local, interval.function(local)))
        if not candidates:
            return None
        largest = max(abs(value) for _time, value in candidates)
        threshold = largest * (1 - mpmath.mpf(PEAK_TOLERANCE))
        time, value = min(((time, value) for time, value in candidates if abs(value) >= threshold),
                          key=lambda pair: pair[0])
        return Extreme(float(value), float(time), value)


@dataclass(frozen=True)
class Results:
    """Peak response, static response and dynamic load factor, SI, floats for reporting."""

    peak: Extreme | None
    static: float | None
    dlf: float | None
    largest_load: Extreme | None


def evaluate_results(case, model, history, solution, window) -> Results:
    """Peak, static response and DLF; None where symbols have no values."""
    if not case.is_fully_valued:
        return Results(None, None, None, None)
    values = case.symbol_values()
    starts = [piece.start for piece in solution.pieces]
    intervals = numeric_intervals([p.numeric or p.local for p in solution.pieces], starts,
                                  window.until, values)
    peak = extreme_magnitude(intervals)
    load_locals = load_pieces(history, starts, exact=solution.exact)
    largest = extreme_magnitude(numeric_intervals(load_locals, starts, window.until, values))
    static = None
    gain = model.static_gain()
    if gain is not None and largest is not None and largest.value != 0:
        static = abs(float(sympy.N(gain.subs(values), 30))) * abs(largest.value)
    dlf = abs(peak.value) / static if (peak is not None and static) else None
    return Results(peak, static, dlf, largest)


def result_fields(results: Results) -> dict:
    """JSON fields for the results beyond peak, static and DLF (SI)."""
    return {}

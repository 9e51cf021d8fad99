"""The numbers an engineer takes from a response: peaks, times of peaks, static response,
DLF, forces on the support, residual vibration and the impulse idealization of each pulse.

Extremes are found from the roots of the derivative on each interval plus the interval
ends — never by taking the largest of sampled values. The search of peaksearch brackets
every stationary point that can hold the maximum, each alone (Taylor bounds over cells that
cover the interval, no sampling grid); the roots are narrowed in float to pick the
candidates, and those are refined to 30 significant digits with mpmath and evaluated at
that precision. The check of extremes.py establishes each reported extreme again by a
method of its own.

Values at interval ends are one-sided: an interval [a, b] contributes f(a⁺) and f(b⁻). This
matters for the acceleration, which jumps where a step load acts (x'' takes the value just
after the step at a, just before it at b) and contains a Dirac part where an impulse acts;
the Dirac part itself is not a value and is left out — the reported peak acceleration is the
largest one-sided value.

Everything is SI; ``result_fields`` gives the JSON fields beyond peak, static and DLF.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import mpmath
import numpy
import sympy
from mpmath.libmp import fzero

from . import models, peaksearch, quantities, shapes
from .basis import (
    SIN,
    ExponentialPolynomial,
    NumericCarrier,
    NumericExponentialPolynomial,
    fastest_time_scale,
)
from .loads import LoadHistory
from .response import load_pieces, solve
from .specs import LoadSpec

DIGITS = 30
PEAK_TOLERANCE = 1e-9        # "earliest time within 1e-9 (relative) of the maximum"
CANDIDATE_MARGIN = 1e-6      # float candidates this close to the float maximum get 30 digits
FLOAT_ERROR = 1e-14          # relative float64 evaluation error allowed per unit of term size
FLOAT_ITERATIONS = 30        # Newton/bisection steps for a float root (a starting value)
NON_OSCILLATORY_SPAN = 40    # slowest time constants searched after a pulse (no oscillation)

# The closed forms used here, named by the identity they rest on (the product cites no book
# section it has not checked; the tests hold the book references).
SOURCE_FREE_VIBRATION = "homogeneous solution of the damped oscillator equation"
SOURCE_IMPULSE_RESPONSE = "impulse–momentum theorem (impulse response); peak derived from it"


@dataclass(frozen=True)
class Extreme:
    """A signed value and the earliest time its magnitude is reached (SI)."""

    value: float
    time: float
    value_mp: Any = None      # the 30-digit value (mpmath), for checks that need it
    time_mp: Any = None       # the 30-digit time


@dataclass(frozen=True)
class Interval:
    """One interval [start, end] with the function on it in local time (numeric)."""

    start: mpmath.mpf
    end: mpmath.mpf
    function: NumericExponentialPolynomial


def numeric_intervals(locals_: Sequence[ExponentialPolynomial | NumericExponentialPolynomial],
                      starts: Sequence[sympy.Expr], until: sympy.Expr,
                      substitutions: Mapping | None = None) -> list[Interval]:
    """The functions on [start, next start] (the last to ``until``), at 30 digits; functions
    already carried in 30-digit arithmetic are taken as they are."""
    subs = dict(substitutions or {})
    with mpmath.workdps(DIGITS + 10):
        numeric_starts = [real_number(a, subs) for a in starts]
        end = real_number(until, subs)
    bounds = numeric_starts[1:] + [end]
    return [Interval(a, b, f if isinstance(f, NumericExponentialPolynomial)
                     else f.numeric(subs, DIGITS))
            for a, b, f in zip(numeric_starts, bounds, locals_)]


def piece_functions(pieces) -> list[ExponentialPolynomial | NumericExponentialPolynomial]:
    """Each piece's function in local time: its 30-digit carried form where it has one."""
    return [p.numeric if getattr(p, "numeric", None) is not None else p.local for p in pieces]


def real_number(value: sympy.Expr, subs: Mapping | None = None) -> mpmath.mpf:
    """A real sympy value as an mpmath number at DIGITS + 10 digits."""
    value = sympy.sympify(value)
    if value.is_Rational:          # breakpoints of a long table: skip sympy's evaluation
        return _rational_number(int(value.p), int(value.q))
    with mpmath.workdps(DIGITS + 10):
        return mpmath.mpf(str(sympy.N(value.subs(subs or {}), DIGITS + 10)))


@functools.lru_cache(maxsize=65536)
def _rational_number(p: int, q: int) -> mpmath.mpf:
    """p/q at DIGITS + 10 digits (the breakpoints of a long history are read several times)."""
    with mpmath.workdps(DIGITS + 10):
        return mpmath.mpf(p) / q


# ----------------------------------------------------------------------------- extremes


def _groups(rows, convert: Callable = lambda number: number) -> dict[tuple, tuple[list, list]]:
    """Rows u^k·e^(σu)·cos|sin(ωu)·c gathered by (σ, ω) into polynomial coefficients:
    Σ_k u^k (A_k cos ωu + B_k sin ωu) e^(σu)."""
    groups: dict[tuple, tuple[list, list]] = {}
    for power, rate, frequency, kind, c in rows:
        cosine, sine = groups.setdefault((convert(rate), convert(frequency)), ([], []))
        for part in (cosine, sine):
            part.extend([0] * (power + 1 - len(part)))
        (sine if kind == SIN else cosine)[power] += convert(c)
    return groups


def _derivatives(groups: dict[tuple, tuple[list, list]], orders: int) -> list[dict]:
    """The groups of f, f′, … f^(orders−1): d/du of u^k (A cos ωu + B sin ωu) e^(σu) gives
    A′_k = (k+1)A_(k+1) + σA_k + ωB_k and B′_k = (k+1)B_(k+1) + σB_k − ωA_k."""
    result = [groups]
    for _ in range(orders - 1):
        derived = {}
        for (rate, frequency), (a, b) in result[-1].items():
            n = len(a)
            derived[(rate, frequency)] = (
                [(k + 1) * a[k + 1] + rate * a[k] + frequency * b[k] if k + 1 < n
                 else rate * a[k] + frequency * b[k] for k in range(n)],
                [(k + 1) * b[k + 1] + rate * b[k] - frequency * a[k] if k + 1 < n
                 else rate * b[k] - frequency * a[k] for k in range(n)])
        result.append(derived)
    return result


class _ByIdentity:
    """A small cache keyed by the identity of a function's rows (hashing tuples of mpf
    numbers costs more than the work saved); each entry keeps its rows alive, so an id is
    never reused while cached."""

    def __init__(self, work: Callable, size: int = 4096) -> None:
        self.work, self.size = work, size
        self.entries: dict[tuple, tuple] = {}

    def __call__(self, rows: tuple, *arguments):
        key = (id(rows), *arguments)
        entry = self.entries.get(key)
        if entry is None or entry[0] is not rows:
            if len(self.entries) >= self.size:
                self.entries.clear()
            entry = self.entries[key] = (rows, self.work(rows, *arguments))
        return entry[1]


#: The float groups of f … f^(orders−1) of a function's rows, worked out once: the same
#: interval is bracketed, searched and evaluated by several evaluators. Shared, so never
#: changed by its users.
_float_derivatives = _ByIdentity(
    lambda rows: tuple(_derivatives(_groups(rows, float), peaksearch.FLOAT_ORDER + 2)))


def _float_orders(rows: tuple, orders: int) -> tuple[dict, ...]:
    known = _float_derivatives(rows)
    if orders > len(known):
        return tuple(_derivatives(_groups(rows, float), orders))
    return known[:orders]
_exact_group_count = _ByIdentity(lambda rows: len(_groups(rows)))


def _horner(coefficients: list, u):
    total = coefficients[-1]
    for c in reversed(coefficients[:-1]):
        total = total * u + c
    return total


class FloatEvaluator:
    """f, f′, f″ … of a numeric exponential polynomial in float64, for bracketing and for
    choosing candidates only: the numbers are converted once, and e^(σu)·cos ωu and
    e^(σu)·sin ωu are computed once per rate and frequency for every order."""

    def __init__(self, function: NumericExponentialPolynomial, orders: int = 3) -> None:
        self.orders = _float_orders(function.rows, orders)
        self.scale = fastest_time_scale(self.orders[0])     # from the float (σ, ω) groups
        self.empty = not function.rows

    def __call__(self, u: numpy.ndarray, orders: int | None = None) -> list[numpy.ndarray]:
        """[f(u), f′(u), …] (the first ``orders`` of them) on an array of local times."""
        u = numpy.asarray(u, dtype=float)
        wanted = self.orders[:orders] if orders else self.orders
        totals = [numpy.zeros_like(u) for _ in wanted]
        with numpy.errstate(over="ignore", invalid="ignore"):
            for rate, frequency in self.orders[0]:
                growth = numpy.exp(rate * u) if rate != 0 else 1.0
                if frequency != 0:
                    angle = frequency * u
                    cosine, sine = numpy.cos(angle) * growth, numpy.sin(angle) * growth
                for order, groups in enumerate(wanted):
                    a, b = groups[(rate, frequency)]
                    if frequency != 0:
                        totals[order] = totals[order] + _horner(a, u) * cosine + _horner(b, u) * sine
                    else:
                        totals[order] = totals[order] + _horner(a, u) * growth
        return totals

    def size(self, u: numpy.ndarray) -> numpy.ndarray:
        """Σ_k (|A_k| + |B_k|) u^k e^(σu) for f: the size of what is added (float error)."""
        u = numpy.asarray(u, dtype=float)
        total = numpy.zeros_like(u)
        with numpy.errstate(over="ignore", invalid="ignore"):
            for (rate, _frequency), (a, b) in self.orders[0].items():
                total = total + _horner([abs(x) + abs(y) for x, y in zip(a, b)], u) \
                    * numpy.exp(rate * u)
        return total


class PreciseEvaluator:
    """f, f′, f″ … of a numeric exponential polynomial at the working mpmath precision, the
    exponential and trigonometric factors shared as in FloatEvaluator."""

    def __init__(self, function: NumericExponentialPolynomial, orders: int = 3) -> None:
        self.orders = _derivatives(_groups(function.rows), orders)

    def __call__(self, u) -> list:
        """[f(u), f′(u), …] at one local time."""
        totals = [mpmath.mpf(0)] * len(self.orders)
        for rate, frequency in self.orders[0]:
            growth = mpmath.exp(rate * u) if rate != 0 else 1
            if frequency != 0:
                cosine, sine = mpmath.cos_sin(frequency * u)
                cosine, sine = cosine * growth, sine * growth
            for order, groups in enumerate(self.orders):
                a, b = groups[(rate, frequency)]
                if frequency != 0:
                    totals[order] += _horner(a, u) * cosine + _horner(b, u) * sine
                else:
                    totals[order] += _horner(a, u) * growth
        return totals


def stationary_points(function: NumericExponentialPolynomial, length: mpmath.mpf) -> list:
    """Roots of the function's derivative on (0, length), refined to 30 digits: every one,
    each bracketed alone by the complete search (no pruning by value)."""
    evaluator = FloatEvaluator(function)
    if evaluator.empty or length <= 0:
        return []
    interval = Interval(mpmath.mpf(0), mpmath.mpf(length), function)
    brackets, _estimates, _best, precise_route = interval_brackets(interval, 0.0, prune=False)
    if not brackets:
        return []
    precise = PreciseEvaluator(function)
    if precise_route:
        guesses = [float((a + b) / 2) for a, b in brackets]
    else:
        guesses = _float_roots(evaluator, brackets).tolist()
    roots = [_polish(precise, guess, bracket) for guess, bracket in zip(guesses, brackets)]
    unique: list[mpmath.mpf] = []
    for root in sorted(r for r in roots if 0 < r < length):
        if not unique or abs(root - unique[-1]) > mpmath.mpf(10) ** (-DIGITS + 5) * max(1, abs(root)):
            unique.append(root)
    return unique


def _refine(function: Callable, low, high):
    """Bracketed root of ``function`` by the Illinois (modified regula falsi) method."""
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


def _polish(evaluator: PreciseEvaluator, guess: float, bracket: tuple):
    """A root of f′ from its float value to 30 digits: Newton's method on f′, kept inside the
    bracket; Illinois if it strays. Convergence is quadratic, so once a step is below
    10^−(DIGITS/2 + 2) of the time the next one would be below 10^−(DIGITS + 4): that step
    is taken and the root returned (one or two steps from double precision)."""
    with mpmath.workdps(DIGITS + 10):
        low, high = mpmath.mpf(bracket[0]), mpmath.mpf(bracket[1])
        root = mpmath.mpf(guess)
        tolerance = mpmath.mpf(10) ** (-DIGITS // 2 - 2) * high
        for _ in range(8):
            _value, slope, curvature = evaluator(root)[:3]
            if curvature == 0:
                break
            step = slope / curvature
            if not low <= root - step <= high:
                break
            root -= step
            if abs(step) <= tolerance:
                return root
        return _refine(lambda u: evaluator(u)[1], low, high)


def _float_roots(evaluator: FloatEvaluator, brackets: list) -> numpy.ndarray:
    """The roots of f′ in all brackets at once, in float (candidates only): Newton steps on
    f′ kept inside each bracket, bisection where a step would leave it. Where rounding noise
    makes f′ change sign (a double root, e.g. x′ ≈ 0 at a start from rest) the bracket only
    shrinks; FLOAT_ITERATIONS bounds that, the 30-digit refinement decides."""
    low = numpy.array([b[0] for b in brackets])
    high = numpy.array([b[1] for b in brackets])
    sign_low = numpy.sign(evaluator(low)[1])
    root = (low + high) / 2
    for _ in range(FLOAT_ITERATIONS):
        _value, slope, curvature = evaluator(root)
        same = numpy.sign(slope) == sign_low
        low = numpy.where(same, root, low)
        high = numpy.where(same, high, root)
        with numpy.errstate(divide="ignore", invalid="ignore"):
            newton = root - slope / curvature
        inside = numpy.isfinite(newton) & (newton >= low) & (newton <= high)
        step = numpy.where(inside, newton, (low + high) / 2)
        done = ((numpy.abs(step - root) <= 4 * numpy.spacing(numpy.abs(root) + high))
                | (high - low <= 4 * numpy.spacing(high)) | (slope == 0))
        root = numpy.where(slope == 0, root, step)
        if numpy.all(done):
            break
    return root


def _route_of(evaluator: FloatEvaluator, length: float) -> float:
    """The cancellation figure of an interval: the size of the terms over the largest |f| on
    a few points (large where nearly equal poles give huge coefficients that cancel)."""
    points = numpy.linspace(0.0, length, 65)
    with numpy.errstate(over="ignore", invalid="ignore"):
        values = numpy.abs(evaluator(points, orders=1)[0])
        size = evaluator.size(points)
    largest = float(numpy.max(values)) if numpy.all(numpy.isfinite(values)) else math.inf
    if not math.isfinite(largest) or not numpy.all(numpy.isfinite(size)):
        return math.inf
    return float(numpy.max(size)) / max(largest, 1e-300)


def _float_distinct(evaluator: FloatEvaluator, function: NumericExponentialPolynomial) -> bool:
    """Whether float64 keeps the function's exponents apart (nearly equal poles 5e-17 apart
    are one number in float64, and their huge coefficients would be summed)."""
    return len(evaluator.orders[0]) == _exact_group_count(function.rows)


def interval_brackets(interval: Interval, best: float, prune: bool = True):
    """(brackets, estimates, best, precise) of one interval: every stationary point that can
    hold the maximum, each alone in its bracket (see peaksearch)."""
    length = interval.end - interval.start
    evaluator = FloatEvaluator(interval.function, orders=peaksearch.FLOAT_ORDER + 1)
    if evaluator.empty or length <= 0:
        return [], [], best, False
    length_float = float(length)
    figure = _route_of(evaluator, length_float)
    if not _float_distinct(evaluator, interval.function):
        figure = math.inf     # distinct exponents that are one number in float64
    if figure <= peaksearch.CANCELLATION_LIMIT:
        groups = list(_float_orders(interval.function.rows, peaksearch.FLOAT_ORDER + 2))
        try:
            plain = FloatEvaluator(interval.function)

            def locate(low, high):
                roots = _float_roots(plain, list(zip(low, high)))
                with numpy.errstate(over="ignore", invalid="ignore"):
                    return roots, plain(roots, orders=1)[0], _float_error(plain, roots)
            brackets, estimates, best = peaksearch.search_float(
                evaluator, groups, length_float, best, PEAK_TOLERANCE, prune, locate)
            return brackets, estimates, best, False
        except ArithmeticError:
            pass
    with mpmath.workdps(DIGITS + 10):
        order = peaksearch.PRECISE_ORDER
        precise = PreciseEvaluator(interval.function, orders=order + 1)
        groups = _derivatives(_groups(interval.function.rows), order + 2)
        brackets, estimates, found = peaksearch.search_precise(
            precise, groups, length, best if prune else 0, PEAK_TOLERANCE if prune else 1,
            DIGITS + 10)
    return brackets, estimates, max(best, float(found)), True


def _taylor_bound(evaluator: FloatEvaluator, length: float) -> float:
    """An upper bound of |f| on [0, length] by Taylor's theorem with remainder:
    |f(0)| + L·|f′(0)| + L²/2 · sup|f″|, with sup|f″| bounded by Σ (|A″ₖ| + |B″ₖ|)·Lᵏ·e^(max(0, σL))
    over the float groups of f″, plus a rounding allowance far above float64's (1e-12 of
    the sizes added); inf where it cannot be formed. Short intervals of a long history are
    bounded within a fraction of a percent, so most of them need no search for the peak."""
    if not length >= 0 or len(evaluator.orders) < 3:
        return math.inf
    value = slope = value_size = slope_size = curvature = 0.0
    try:
        for a, _b in evaluator.orders[0].values():
            value += a[0]
            value_size += abs(a[0])
        for a, _b in evaluator.orders[1].values():
            slope += a[0]
            slope_size += abs(a[0])
        for (rate, _frequency), (a, b) in evaluator.orders[2].items():
            growth = math.exp(max(0.0, rate * length))
            curvature += sum((abs(x) + abs(y)) * length ** k
                             for k, (x, y) in enumerate(zip(a, b))) * growth
    except (OverflowError, TypeError, ValueError):
        return math.inf
    rest = length * slope_size + length * length / 2 * curvature
    bound = abs(value) + length * abs(slope) + length * length / 2 * curvature \
        + 1e-12 * (value_size + rest)
    return bound if math.isfinite(bound) else math.inf


def _float_error(evaluator: FloatEvaluator, u: numpy.ndarray) -> numpy.ndarray:
    """Float64 evaluation error: relative FLOAT_ERROR of the terms' size, and the rounding of
    the phase ω·u and the growth σ·u (long windows)."""
    fastest = 0.0 if evaluator.scale == math.inf else 2 * math.pi / evaluator.scale
    return evaluator.size(u) * (FLOAT_ERROR + 4 * 2.0 ** -52 * (1 + fastest * numpy.abs(u)))


@dataclass(frozen=True, eq=False)     # compared by identity: each is one candidate
class _Candidate:
    """A candidate for the extreme: an interval end or a stationary point inside it."""

    index: int                 # of the interval
    kind: Literal["start", "end", "overflow", "precise", "root"]
    time: float                # local time (float), the bracket's middle for "precise"
    bracket: tuple | None      # the stationary point's bracket, None at an end
    value: float               # the float value and its error bound (inf: 30 digits decide)
    error: float


def _ends_one_by_one(evaluator: FloatEvaluator, interval: Interval):
    """(ends, float values, errors, distinct) of one interval's ends (one-sided values)."""
    length = interval.end - interval.start
    ends: list[tuple[float, Literal["start", "end"]]] = \
        [(0.0, "start")] if (length <= 0 or evaluator.empty) else \
        [(0.0, "start"), (float(length), "end")]
    points = numpy.array([u for u, _ in ends])
    with numpy.errstate(over="ignore", invalid="ignore"):
        values = evaluator(points, orders=1)[0]
        errors = _float_error(evaluator, points)
    return ends, values.tolist(), errors.tolist(), _float_distinct(evaluator, interval.function)


@dataclass(frozen=True)
class FirstLook:
    """What extreme_magnitude first needs of every interval, worked out for all of them at
    once in float64 arrays: the one-sided values at the ends with their float error, whether
    float64 keeps the exponents apart, and the Taylor bound of |f| over the interval. The
    numbers are those of FloatEvaluator, _float_error, _float_distinct and _taylor_bound:
    the same float groups Σ_k u^k (A_k cos ωu + B_k sin ωu) e^(σu), the coefficients of a
    group summed in the order of the rows, the same formulas (sums over groups may be taken
    in another order: a difference of rounding, inside the float error allowed). An interval
    with a number outside the float range is looked at by those functions themselves."""

    ends: list[list[tuple[float, Literal["start", "end"]]]]
    values: list[list[float]]
    errors: list[list[float]]
    distinct: list[bool]
    bounds: list[float]


def _exact_key(number) -> object:
    """A hashable key equal for equal real numbers (mpf by its mantissa and exponent)."""
    if isinstance(number, mpmath.mpf):
        return number._mpf_
    if isinstance(number, (int, float)):
        return mpmath.mpf(number)._mpf_
    return number


@dataclass(frozen=True)
class _FloatGroups:
    """The float groups of many intervals side by side: group g belongs to interval
    ``owner[g]`` and holds Σ_k u^k (A[g, k] cos ωu + B[g, k] sin ωu) e^(σu); ``orders`` are
    (A, B) of f, f′, f″ (_groups and _derivatives, for every group at once)."""

    owner: numpy.ndarray
    rate: numpy.ndarray
    frequency: numpy.ndarray
    orders: list[tuple[numpy.ndarray, numpy.ndarray]]


def _float_rows(intervals: Sequence[Interval]):
    """The rows of every interval in floats, (owner, power, σ, ω, is sine, c) lists; the
    intervals with a number outside the float range (``apart``); the intervals whose float
    (σ, ω) stands for two exact ones elsewhere (``merged``: float64 cannot tell them apart)."""
    pairs: dict[tuple[int, int], tuple] = {}   # rates and frequencies are shared by rows
    exact: dict[tuple, set] = {}               # float (σ, ω) → the exact pairs behind it
    rows: list[tuple] = []
    apart: set[int] = set()
    for index, interval in enumerate(intervals):
        read = []
        for p, r, w, kind, c in interval.function.rows:
            kept = pairs.get((id(r), id(w)))
            if kept is None or kept[0] is not r or kept[1] is not w:
                kept = pairs[(id(r), id(w))] = (r, w, float(r), float(w))  # type: ignore[arg-type]
                exact.setdefault(kept[2:], set()).add((_exact_key(r), _exact_key(w)))
            read.append((index, p, kept[2], kept[3], kind == SIN, float(c)))  # type: ignore[arg-type]
        if all(math.isfinite(row[2]) and math.isfinite(row[3]) and math.isfinite(row[5])
               for row in read):
            rows += read
        else:
            apart.add(index)          # one by one, as FloatEvaluator and its helpers do
    columns = tuple(list(column) for column in zip(*rows)) if rows else ([],) * 6
    blurred = {key for key, behind in exact.items() if len(behind) > 1}
    merged = {index for index, interval in enumerate(intervals) if blurred and any(
        (float(r), float(w)) in blurred  # type: ignore[arg-type]
        for _p, r, w, _k, _c in interval.function.rows)}
    return columns, frozenset(apart), merged


def _grouped(columns) -> _FloatGroups:
    """The rows gathered by (interval, σ, ω), the coefficients of a group summed in the
    order of its rows as _groups does, and the groups of f′ and f″ as _derivatives forms
    them: A′_k = (k+1)A_(k+1) + σA_k + ωB_k, B′_k = (k+1)B_(k+1) + σB_k − ωA_k."""
    owner, power, rate, frequency, sine, coefficient = (numpy.array(c) for c in columns)
    order = numpy.lexsort((frequency, rate, owner))      # stable: rows keep their order
    owner, power, rate = owner[order], power[order], rate[order]
    frequency, sine, coefficient = frequency[order], sine[order], coefficient[order]
    new = numpy.ones(len(order), dtype=bool)
    new[1:] = (owner[1:] != owner[:-1]) | (rate[1:] != rate[:-1]) \
        | (frequency[1:] != frequency[:-1])
    group = numpy.cumsum(new) - 1
    heads = numpy.flatnonzero(new)
    top = int(power.max()) + 1
    a = numpy.zeros((len(heads), top))
    b = numpy.zeros((len(heads), top))
    numpy.add.at(a, (group[~sine], power[~sine]), coefficient[~sine])
    numpy.add.at(b, (group[sine], power[sine]), coefficient[sine])
    sigma, omega = rate[heads][:, None], frequency[heads][:, None]
    steps = numpy.arange(1, top, dtype=float)
    orders = [(a, b)]
    for _ in range(2):
        a, b = orders[-1]
        next_a, next_b = numpy.zeros_like(a), numpy.zeros_like(b)
        next_a[:, :-1] = steps * a[:, 1:]
        next_b[:, :-1] = steps * b[:, 1:]
        orders.append((next_a + sigma * a + omega * b, next_b + sigma * b - omega * a))
    return _FloatGroups(owner[heads], rate[heads], frequency[heads], orders)


def _horner_rows(coefficients: numpy.ndarray, u: numpy.ndarray) -> numpy.ndarray:
    total = coefficients[:, -1].copy()
    for k in range(coefficients.shape[1] - 2, -1, -1):
        total = total * u + coefficients[:, k]
    return total


def first_look(intervals: Sequence[Interval]) -> FirstLook:
    """The FirstLook of the intervals."""
    count = len(intervals)
    length = numpy.array([float(i.end - i.start) for i in intervals])
    columns, apart, merged = _float_rows(intervals)
    apart = apart | frozenset(numpy.flatnonzero(~numpy.isfinite(length)).tolist())
    empty = numpy.bincount(numpy.array(columns[0], dtype=int), minlength=count) == 0
    values0: numpy.ndarray = numpy.zeros(count)
    values1, sizes0, sizes1 = values0, values0, values0
    bounds = numpy.where(length >= 0, 0.0, math.inf)     # nothing to bound without rows
    scale = numpy.full(count, math.inf)
    with numpy.errstate(over="ignore", invalid="ignore", divide="ignore"):
        if columns[0]:
            groups = _grouped(columns)
            owner, sigma, omega = groups.owner, groups.rate, groups.frequency
            (a, b), (a1, _b1), (a2, b2) = groups.orders
            u = length[owner]
            growth = numpy.where(sigma != 0, numpy.exp(sigma * u), 1.0)
            at_end = numpy.where(omega != 0,
                                 _horner_rows(a, u) * (numpy.cos(omega * u) * growth)
                                 + _horner_rows(b, u) * (numpy.sin(omega * u) * growth),
                                 _horner_rows(a, u) * growth)
            size_parts = numpy.abs(a) + numpy.abs(b)
            values0 = numpy.bincount(owner, a[:, 0], count)       # u = 0: the constants
            values1 = numpy.bincount(owner, at_end, count)
            sizes0 = numpy.bincount(owner, size_parts[:, 0], count)
            sizes1 = numpy.bincount(owner, _horner_rows(size_parts, u) * numpy.exp(sigma * u),
                                    count)
            # _taylor_bound: |f(0)| + L·|f′(0)| + L²/2 · sup|f″|, and its rounding allowance
            value_size = numpy.bincount(owner, numpy.abs(a[:, 0]), count)
            slope = numpy.bincount(owner, a1[:, 0], count)
            slope_size = numpy.bincount(owner, numpy.abs(a1[:, 0]), count)
            powers = u[:, None] ** numpy.arange(a.shape[1], dtype=float)
            curvature = numpy.bincount(owner, ((numpy.abs(a2) + numpy.abs(b2)) * powers).sum(axis=1)
                                       * numpy.exp(numpy.maximum(0.0, sigma * u)), count)
            rest = length * slope_size + length * length / 2 * curvature
            bounds = numpy.abs(values0) + length * numpy.abs(slope) \
                + length * length / 2 * curvature + 1e-12 * (value_size + rest)
            bounds = numpy.where(numpy.isfinite(bounds) & (length >= 0), bounds, math.inf)
            # the fastest time scale of each interval (fastest_time_scale of its groups)
            period = numpy.where(omega != 0, 2 * math.pi / numpy.abs(omega), math.inf)
            decay = numpy.where(sigma != 0, 1 / numpy.abs(sigma), math.inf)
            numpy.minimum.at(scale, owner, numpy.minimum(period, decay))
        fastest = numpy.where(scale == math.inf, 0.0, 2 * math.pi / scale)
        errors0 = sizes0 * (FLOAT_ERROR + 4 * 2.0 ** -52)               # _float_error at 0
        errors1 = sizes1 * (FLOAT_ERROR + 4 * 2.0 ** -52 * (1 + fastest * numpy.abs(length)))
    distinct = [index not in merged or _float_distinct(FloatEvaluator(interval.function),
                                                       interval.function)
                for index, interval in enumerate(intervals)]
    bound_list = bounds.tolist()
    ends, values, errors = [], [], []
    for index in range(count):
        if index in apart:          # outside the float range: the per-interval functions
            evaluator = FloatEvaluator(intervals[index].function)
            end_points, end_values, end_errors, distinct[index] = \
                _ends_one_by_one(evaluator, intervals[index])
            ends.append(end_points)
            values.append(end_values)
            errors.append(end_errors)
            bound_list[index] = _taylor_bound(evaluator, float(length[index]))
        elif length[index] <= 0 or empty[index]:
            ends.append([(0.0, "start")])
            values.append([float(values0[index])])
            errors.append([float(errors0[index])])
        else:
            ends.append([(0.0, "start"), (float(length[index]), "end")])
            values.append([float(values0[index]), float(values1[index])])
            errors.append([float(errors0[index]), float(errors1[index])])
    return FirstLook(ends, values, errors, distinct, bound_list)


FLOAT_RANGE = 1000     # coefficients beyond 2^±this are scaled before the float search
#                        (only there: scaled from 2^±700, x″ + 10³⁰⁰x = 1 took its search
#                        40 times as long, 1.2 s → 52 s, for the same peak)


def extreme_magnitude(intervals: Sequence[Interval]) -> Extreme | None:
    """max |f| over the intervals, signed, at the earliest time it is reached.

    The float search needs coefficients well inside the float range (1e-322 is a subnormal
    with a few bits, and its rounding error is not 1e-16 of it): where the largest lies
    beyond 2^±FLOAT_RANGE, every coefficient is first multiplied by one power of two, which
    is exact at every precision, and the extreme scaled back.

    Candidates are the interval ends (one-sided values) and the stationary points inside each
    interval, every one of them bracketed alone by the complete search of peaksearch (cells
    excluded or resolved by Taylor bounds, never a sampling grid). Float roots and values
    choose among them; candidates within CANDIDATE_MARGIN (plus the float evaluation error)
    of the largest are refined and evaluated at 30 digits, in time order, and the earliest
    within PEAK_TOLERANCE of the 30-digit maximum is reported.
    """
    scale = _scale_exponent(intervals)
    if scale:
        found = _extreme_magnitude([Interval(i.start, i.end, NumericExponentialPolynomial(
            tuple((p, r, w, k, mpmath.ldexp(c, -scale)) for p, r, w, k, c in i.function.rows),
            i.function.digits)) for i in intervals])
        if found is None:
            return None
        value = mpmath.ldexp(found.value_mp, scale)
        return Extreme(float(value), found.time, value, found.time_mp)
    return _extreme_magnitude(intervals)


def _scale_exponent(intervals: Sequence[Interval]) -> int:
    """The power of two that brings the largest coefficient near 1, or 0 where it lies
    inside 2^±FLOAT_RANGE (or there are none, or they are not all real mpmath numbers)."""
    largest = None       # 2^(exponent + bits) bounds |c| (mpmath's sign, mantissa, exponent, bits)
    for interval in intervals:
        for *_mode, c in interval.function.rows:
            if not isinstance(c, mpmath.mpf):
                return 0
            _sign, mantissa, exponent, bits = number = c._mpf_
            if mantissa:
                if largest is None or exponent + bits > largest:
                    largest = exponent + bits
            elif number != fzero:         # mpmath's special values: ±inf, nan
                return 0
    return largest if largest is not None and abs(largest) > FLOAT_RANGE else 0


def _extreme_magnitude(intervals: Sequence[Interval]) -> Extreme | None:
    found: list[_Candidate] = []
    evaluators: dict[int, FloatEvaluator] = {}

    def evaluator_of(index: int) -> FloatEvaluator:
        if index not in evaluators:
            evaluators[index] = FloatEvaluator(intervals[index].function)
        return evaluators[index]

    best = 0.0
    look = first_look(intervals)
    for index in range(len(intervals)):
        ends, values, errors = look.ends[index], look.values[index], look.errors[index]
        if not look.distinct[index]:
            values = errors = [math.inf] * len(ends)     # 30 digits decide
        for (u, kind), value, error in zip(ends, values, errors):
            found.append(_Candidate(index, kind, u, None, float(value), float(error)))
            if math.isfinite(value) and math.isfinite(error) and error <= 1e-6 * abs(value):
                best = max(best, abs(float(value)) - float(error))   # a value float can see
    for index, interval in enumerate(intervals):
        if best > 0 and look.distinct[index] and \
                look.bounds[index] < best * (1 - CANDIDATE_MARGIN):
            continue    # no point inside can come near a value already reached: no search
        try:
            brackets, _estimates, best, precise_route = interval_brackets(interval, best)
        except OverflowError:
            found.append(_Candidate(index, "overflow", 0.0, None, math.inf, math.inf))
            continue
        if not brackets:
            continue
        if precise_route:
            for bracket in brackets:
                found.append(_Candidate(index, "precise", float((bracket[0] + bracket[1]) / 2),
                                        bracket, math.inf, math.inf))
            continue
        roots = _float_roots(evaluator_of(index), brackets)
        with numpy.errstate(over="ignore", invalid="ignore"):
            root_values = evaluator_of(index)(roots, orders=1)[0]
            root_errors = _float_error(evaluator_of(index), roots)
        for bracket, root, value, error in zip(brackets, roots, root_values, root_errors):
            found.append(_Candidate(index, "root", float(root), bracket, float(value),
                                    float(error)))
    if not found:
        return None
    finite = [item for item in found if numpy.isfinite(item.value) and numpy.isfinite(item.error)]
    if finite and len(finite) == len([i for i in found if i.kind != "precise"]):
        largest = max(abs(item.value) for item in finite)
        largest_error = max(item.error for item in finite if abs(item.value) == largest)
        found = [item for item in found if item.kind == "precise"
                 or abs(item.value) >= largest - CANDIDATE_MARGIN * largest
                 - 4 * (item.error + largest_error)]
    # else: float overflow somewhere — let 30 digits decide among all candidates
    precise: dict[int, PreciseEvaluator] = {}

    def evaluate(item: _Candidate) -> tuple:
        index, kind, time, bracket = item.index, item.kind, item.time, item.bracket
        interval = intervals[index]
        if index not in precise:
            precise[index] = PreciseEvaluator(interval.function)
        if kind == "start" or kind == "overflow":
            local = mpmath.mpf(0)
        elif kind == "end":
            local = interval.end - interval.start
        else:
            assert bracket is not None          # a stationary point has its bracket
            local = _polish(precise[index], time, bracket)
        return interval.start + local, precise[index](local)[0]

    with mpmath.workdps(DIGITS + 10):
        # the largest few by float value (and every one without a float value) fix the maximum
        # every candidate without a float value, then by float value + error until the rest
        # cannot exceed the 30-digit maximum found beyond 1e-10 (relative)
        def reach(item: _Candidate) -> float:
            value = abs(item.value) + 4 * item.error
            return value if math.isfinite(value) else math.inf
        ranked = sorted(found, key=lambda item: -reach(item))
        done: dict[int, tuple] = {}
        largest = mpmath.mpf(0)
        for item in ranked:
            if math.isfinite(reach(item)) and done and reach(item) <= float(largest) * (1 + 1e-10):
                break
            done[id(item)] = evaluate(item)
            largest = max(largest, abs(done[id(item)][1]))
        ordered = sorted(found, key=lambda item: (float(intervals[item.index].start) + item.time))
        for item in ordered:
            threshold = largest * (1 - mpmath.mpf(PEAK_TOLERANCE))
            if id(item) not in done:
                if abs(item.value) + 4 * item.error < float(threshold) * (1 - 1e-12):
                    continue
                done[id(item)] = evaluate(item)
                largest = max(largest, abs(done[id(item)][1]))
            if abs(done[id(item)][1]) >= threshold * (1 + mpmath.mpf(10) ** -11):
                break     # the earliest: nothing unevaluated exceeds `largest` beyond float error
        threshold = largest * (1 - mpmath.mpf(PEAK_TOLERANCE))
        time, value = min(((time, value) for time, value in done.values() if abs(value) >= threshold),
                          key=lambda pair: pair[0])
        return Extreme(float(value), float(time), value, time)


# ----------------------------------------------------------------------------- combinations


def linear_combination(parts: Sequence[tuple[Any, NumericExponentialPolynomial]],
                       ) -> NumericExponentialPolynomial:
    """Σ factor · function, numeric (rows are concatenated; evaluation adds them)."""
    rows = []
    digits = DIGITS
    with mpmath.workdps(DIGITS + 10):
        for factor, function in parts:
            digits = function.digits
            rows += [(power, rate, frequency, kind, c * factor)
                     for power, rate, frequency, kind, c in function.rows]
    return NumericExponentialPolynomial(tuple(rows), digits)


@dataclass(frozen=True)
class Scaled:
    """The response times a constant factor (the spring force k·x): its largest magnitude
    is the response's, times |factor|, at the same (earliest) time, so it is not searched
    for again."""

    factor: Any

    def __call__(self, function: NumericExponentialPolynomial) -> NumericExponentialPolynomial:
        return linear_combination([(self.factor, function)])

    def extreme(self, peak: Extreme | None) -> Extreme | None:
        if peak is None:
            return None
        with mpmath.workdps(DIGITS + 10):
            factor = self.factor
            if isinstance(factor, sympy.Basic):
                factor = mpmath.mpf(str(sympy.N(factor, DIGITS + 10)))
            value = peak.value_mp * factor if peak.value_mp is not None else None
        shown = float(value) if value is not None else peak.value * float(factor)
        return Extreme(shown, peak.time, value, peak.time_mp)


def _mapped(intervals: Sequence[Interval],
            transform: Callable[[NumericExponentialPolynomial], NumericExponentialPolynomial],
            ) -> list[Interval]:
    with mpmath.workdps(DIGITS + 10):    # derivatives multiply coefficients: keep the digits
        return [Interval(i.start, i.end, transform(i.function)) for i in intervals]


# ----------------------------------------------------------------------------- results


@dataclass(frozen=True)
class QuantityPeak:
    """The peak of one derived quantity (velocity, support reaction, current …), SI."""

    name: str           # the JSON field, e.g. "peak_support_reaction"
    description: str    # what it is, in words, for the sheet
    unit: str           # SI unit text
    extreme: Extreme | None


@dataclass(frozen=True)
class Residual:
    """Amplitude of the free vibration left after the last load has ended (SI).

    Under-damped: the coefficient A of x = A·e^(−ζω(t−t₁))·cos(ω_d(t−t₁) − φ) at the instant
    t₁ the last load ends, A = √(x² + ((x′ + ζωx)/ω_d)²) (undamped: √(x² + (x′/ω)²));
    first-order: |y(t₁)|, the start of y(t₁)·e^(−(t−t₁)/τ).
    """

    amplitude: float
    after: float
    unit: str
    formula: str
    source: str


@dataclass(frozen=True)
class ImpulseIdealization:
    """One pulse replaced by an impulse of the same area at its centroid (first occurrence).

    The impulse response of a second-order model, J·b/(a₂ω_d)·e^(−ζω(t−t_c))·sin ω_d(t−t_c)
    (spring-mass-damper: J/(mω_d)…), peaks at ω_d(t − t_c) = arccos ζ with the value
    J·b/(a₂ω)·exp(−ζ·arccos ζ/√(1−ζ²)); it is compared with the peak of the response to the
    pulse alone from rest. ``relative_error`` = (|impulse peak| − |pulse peak|)/|pulse peak|:
    positive where the idealization overestimates.
    """

    load: int
    shape: str
    start: float
    duration: float
    duration_ratio: float        # t_d / T_n
    area: float
    area_unit: str
    centroid: float | None       # absolute time of the centroid of the first occurrence
    #                              (None for a pulse of zero area)
    impulse_peak: Extreme | None
    pulse_peak: Extreme | None
    relative_error: float | None
    unit: str
    source: str = SOURCE_IMPULSE_RESPONSE


@dataclass(frozen=True)
class Results:
    """Peak response, static response and dynamic load factor, SI, floats for reporting,
    with the quantities derived from the response beyond the peak."""

    peak: Extreme | None
    static: float | None
    dlf: float | None
    largest_load: Extreme | None
    quantities: tuple[QuantityPeak, ...] = ()
    residual: Residual | None = None
    idealizations: tuple[ImpulseIdealization, ...] = ()


def evaluate_results(case, model, history, solution, window) -> Results:
    """Peak, static response, DLF and the derived quantities; None where symbols have no
    values."""
    definitions = quantity_definitions(case, model)
    if not case.is_fully_valued:
        return Results(None, None, None, None,
                       tuple(QuantityPeak(name, text, unit, None)
                             for name, text, unit, _ in definitions))
    values = case.symbol_values()
    starts = [piece.start for piece in solution.pieces]
    intervals = numeric_intervals(piece_functions(solution.pieces), starts, window.until, values)
    peak = extreme_magnitude(intervals)
    load_locals = load_pieces(history, starts, exact=solution.exact)
    largest = extreme_magnitude(numeric_intervals(load_locals, starts, window.until, values))
    static = None
    gain = model.static_gain()
    if gain is not None and largest is not None and largest.value != 0:
        static = abs(float(sympy.N(gain.subs(values), 30))) * abs(largest.value)
    dlf = abs(peak.value) / static if (peak is not None and static) else None
    peaks = tuple(QuantityPeak(name, text, unit, None if transform is None else
                               transform.extreme(peak) if isinstance(transform, Scaled) else
                               extreme_magnitude(_mapped(intervals, transform)))
                  for name, text, unit, transform in definitions)
    residual = None
    if history.rewrites and load_locals and _is_zero(load_locals[-1]):
        residual = residual_amplitude(case, model, intervals[-1], values)
    idealizations = impulse_idealizations(case, model, history, solution, values)
    return Results(peak, static, dlf, largest, peaks, residual, idealizations)


def _is_zero(function: ExponentialPolynomial | NumericExponentialPolynomial) -> bool:
    if isinstance(function, NumericExponentialPolynomial):
        return all(c == 0 for *_mode, c in function.rows)
    return function.is_zero()


def _area_unit(load_dimension) -> str:
    """The SI unit of a load's time integral: a named one (N*s, m/s) or the load's unit·s."""
    area = _unit(load_dimension * quantities.dimension("time"))
    load = _unit(load_dimension)
    if "(" in area or area.count("*") > 1:
        return "s" if load == "1" else f"{load}*s"
    return area


def _unit(dimension) -> str:
    return quantities.si_unit_text(dimension)


def quantity_definitions(case, model) -> list[tuple[str, str, str, Callable | None]]:
    """(JSON name, description, SI unit, transform of the response) for the model: those
    of its definition in ``closedform.models``, else the derivatives x′ (and x″).

    The transform maps the numeric response on one interval to the quantity on it.
    """
    model_name = case.system.model
    response = case.system.response_dimension
    time = quantities.dimension("time")
    values = case.symbol_values()
    if not case.is_fully_valued:
        values = None

    def number(expr: sympy.Expr):
        return None if values is None else real_number(expr, values)

    def derivative(order: int) -> Callable:
        def transform(function: NumericExponentialPolynomial) -> NumericExponentialPolynomial:
            for _ in range(order):
                function = function.derivative()
            return function
        return transform

    def combination(x_factor, v_factor) -> Callable:
        if v_factor == 0 and x_factor is not None and x_factor != 0:
            return Scaled(x_factor)
        return lambda f: linear_combination([(factor, g) for factor, g in
                                             ((x_factor, f), (v_factor, f.derivative()))
                                             if factor != 0])

    definition = models.get(model_name)
    if definition.quantities is not None:
        # the models combine the coefficients (−k/m, −c/m): at the working digits, never at
        # whatever precision the caller's mpmath context happens to hold
        with mpmath.workdps(DIGITS + 10):
            found = definition.quantities(models.QuantityContext(
                case.system.parameters, tuple(model.coefficients), model.order, response,
                time, number, _unit, derivative, combination))
        if case.system.member is not None:   # a member's reactions come from its shape
            found = [(name, "resistance R = k·y (the total load the member carries "
                            "statically at the deflection y)" if name == "peak_spring_force"
                      else text, unit, value) for name, text, unit, value in found
                     if name != "peak_support_reaction"]
        return found
    first, second = derivative(1), derivative(2)
    definitions: list[tuple[str, str, str, Callable | None]] = [
        ("peak_derivative", "first derivative x′", _unit(response / time), first)]
    if model.order >= 2:
        definitions.append(("peak_second_derivative", "second derivative x″ (one-sided values)",
                            _unit(response / time**2), second))
    return definitions


def residual_amplitude(case, model, free: Interval, values: Mapping) -> Residual | None:
    """The free vibration amplitude at the start of ``free`` (the interval after the last
    load has ended): see ``Residual``. None where the free motion does not oscillate."""
    unit = _unit(case.system.response_dimension)
    with mpmath.workdps(DIGITS + 10):
        x: mpmath.mpf = free.function(0)
        velocity: mpmath.mpf = free.function.derivative()(0)
        if model.order == 1:
            return Residual(float(abs(x)), float(free.start), unit, "|y(t₁)|",
                            "first-order free decay y(t₁)·e^(−(t−t₁)/τ)")
        if model.order != 2 or model.regime not in ("undamped", "under-damped"):
            return None
        omega = real_number(model.natural_frequency(), values)
        zeta = real_number(model.damping_ratio(), values)
        damped = omega * mpmath.sqrt(1 - zeta**2)
        amplitude = mpmath.sqrt(x**2 + ((velocity + zeta * omega * x) / damped) ** 2)
        formula = ("√(x² + (x′/ω)²)" if zeta == 0 else "√(x² + ((x′ + ζωx)/ω_d)²)")
        return Residual(float(amplitude), float(free.start), unit, formula, SOURCE_FREE_VIBRATION)


# ----------------------------------------------------------------------------- impulse idealization


def pulse_area_and_centroid(load: LoadSpec, values: Mapping) -> tuple[sympy.Expr, sympy.Expr]:
    """∫ f dτ and the centroid ∫ τ f dτ / ∫ f dτ of one occurrence (τ from its start), exact.

    Polylines (rectangle, triangle, decay, trapezoid, table) segment by segment:
    ∫ f = (f₀ + f₁)(τ₁ − τ₀)/2 and ∫ τ f = (τ₁ − τ₀)(τ₀(2f₀ + f₁) + τ₁(f₀ + 2f₁))/6; the
    half-sine A·sin(πτ/d) has area 2Ad/π and centroid d/2; a formula is integrated by sympy
    (each shape's definition in ``closedform.shapes`` says how).
    """
    area_and_centroid = shapes.get(load.shape).area_and_centroid
    if area_and_centroid is None:
        raise ValueError(f"the load shape {load.shape!r} is not a pulse")
    return area_and_centroid(load, values)


def impulse_response_peak(coefficients: Sequence, scale, impulse) -> tuple[mpmath.mpf, mpmath.mpf]:
    """(time after the impulse, signed peak value) of the response to J·δ(t) from rest of
    a₂x″ + a₁x′ + a₀x = b·f, closed form (mpmath numbers in, out).

    ω = √(a₀/a₂), ζ = a₁/(2√(a₀a₂)), h(t) = bJ/(a₂ω_d)·e^(−ζωt)·sin ω_d t:
    h′ = 0 where tan ω_d t = ω_d/(ζω), i.e. ω_d t* = arccos ζ, and
    h(t*) = bJ/(a₂ω)·exp(−ζ·arccos ζ/√(1−ζ²)); later extremes are smaller (decaying).
    ζ = 1: h = (bJ/a₂)·t·e^(−ωt), peak at 1/ω, bJ/(a₂ωe).
    ζ > 1: h = (bJ/a₂)(e^(p₁t) − e^(p₂t))/(p₁ − p₂), peak at ln(p₂/p₁)/(p₁ − p₂).
    """
    a2, a1, a0 = coefficients
    with mpmath.workdps(DIGITS + 10):
        omega = mpmath.sqrt(a0 / a2)
        zeta = a1 / (2 * mpmath.sqrt(a0 * a2))
        gain = scale * impulse / a2
        if zeta < 1:
            time = mpmath.acos(zeta) / (omega * mpmath.sqrt(1 - zeta**2))
            return time, gain / omega * mpmath.exp(-zeta * mpmath.acos(zeta) / mpmath.sqrt(1 - zeta**2))
        if zeta == 1:
            return 1 / omega, gain / (omega * mpmath.e)
        root = omega * mpmath.sqrt(zeta**2 - 1)
        # p1 p2 = ω²: the slow root from the product, which does not cancel for large ζ.
        p2 = -zeta * omega - root
        p1 = omega**2 / p2
        time = mpmath.log(p2 / p1) / (p1 - p2)
        return time, gain * (mpmath.exp(p1 * time) - mpmath.exp(p2 * time)) / (p1 - p2)


def impulse_idealizations(case, model, history: LoadHistory, solution,
                          values: Mapping) -> tuple[ImpulseIdealization, ...]:
    """The impulse idealization of every pulse of a second-order case (first occurrence)."""
    if model.order != 2 or model.coefficients[-1] == 0 or model.input_coefficients:
        return ()     # (where input derivatives act, the impulse response is not b·h)
    with mpmath.workdps(DIGITS + 10):
        coefficients = [real_number(a, values) for a in model.coefficients]
        scale = real_number(model.input_scale, values)
        omega = mpmath.sqrt(coefficients[2] / coefficients[0])
        zeta = coefficients[1] / (2 * mpmath.sqrt(coefficients[2] * coefficients[0]))
        if zeta < 1:
            span = mpmath.pi / (omega * mpmath.sqrt(1 - zeta**2))   # half a damped period
        else:
            span = NON_OSCILLATORY_SPAN * real_number(model.slowest_time_scale(), values)
    unit = _unit(case.system.response_dimension)
    area_unit = _area_unit(case.system.load_dimension)
    result = []
    for load in case.loads:
        if not shapes.get(load.shape).pulse:
            continue
        start = load.starts()[0]
        duration = load.length()
        area, centroid = pulse_area_and_centroid(load, values)
        with mpmath.workdps(DIGITS + 10):
            start_mp, duration_mp = real_number(start, values), real_number(duration, values)
            area_mp = real_number(area, values)
            ratio = duration_mp * omega / (2 * mpmath.pi)
            end = start_mp + duration_mp
            pulse = _pulse_alone_peak(case, model, history, solution, load, values, end,
                                      end + span)
            impulse_peak = None
            relative_error = None
            centroid_mp = None
            if area_mp != 0:
                centroid_mp = start_mp + real_number(centroid, values)
            # A pulse that changes sign can have its centroid outside itself (even before
            # t = 0): no impulse of its area at that time stands for it, so no peak is given.
            if centroid_mp is not None and start_mp <= centroid_mp <= end:
                delay, value = impulse_response_peak(coefficients, scale, area_mp)
                impulse_peak = Extreme(float(value), float(centroid_mp + delay), value,
                                       centroid_mp + delay)
                if pulse is not None and pulse.value_mp != 0:
                    relative_error = float((abs(value) - abs(pulse.value_mp)) / abs(pulse.value_mp))
        result.append(ImpulseIdealization(
            load.number, load.shape, float(start_mp), float(duration_mp), float(ratio),
            float(area_mp), area_unit, None if centroid_mp is None else float(centroid_mp),
            impulse_peak, pulse, relative_error, unit))
    return tuple(result)


def _pulse_alone_peak(case, model, history: LoadHistory, solution, load: LoadSpec,
                      values: Mapping, end, until) -> Extreme | None:
    """Peak of the response to the first occurrence of ``load`` alone, from rest, over
    [start, until].

    When the case is that one pulse (no other load, no impulse, numbers only) and its pieces
    run past the pulse's end, the pulse-alone response is the case's response less the free
    vibration from the initial values (superposition); otherwise the pulse is solved alone.
    """
    pieces = solution.pieces
    bound = sympy.Float(until, DIGITS + 10)
    # Reused only from rest: less the free vibration of large initial values, the pulse's own
    # small response would be a difference of nearly equal terms, which the peak search can
    # only bound by splitting cells without end.
    reuse = (len(history.rewrites) == 1 and not history.impulses and not case.symbols
             and solution.free is None
             and abs(real_number(pieces[-1].start, values) - end) <= abs(end) * mpmath.mpf(10) ** -DIGITS)
    if not reuse:
        rewrite = next(r for r in history.rewrites if r.load_number == load.number)
        pieces = solve(model, LoadHistory((rewrite,)), None, bound, exact=solution.exact,
                       ordering=values).pieces
    pieces = [p for p in pieces if real_number(p.start, values) < until]
    intervals = numeric_intervals(piece_functions(pieces), [p.start for p in pieces], bound, values)
    if reuse and solution.free is not None:
        carrier = NumericCarrier(DIGITS)
        free = carrier.numeric_terms(solution.free.time_function)
        intervals = [Interval(i.start, i.end, linear_combination(
            [(1, i.function), (-1, carrier.numeric_polynomial(carrier.shifted(free, i.start)))]))
            for i in intervals]
    return extreme_magnitude(intervals)


# ----------------------------------------------------------------------------- JSON


def _extreme_field(extreme: Extreme | None, unit: str) -> dict | None:
    if extreme is None:
        return None
    return {"value": extreme.value, "time": extreme.time, "unit": unit}


def result_fields(results: Results) -> dict:
    """JSON fields for the results beyond peak, static and DLF (SI; times in s).

    Each peak is {"value", "time", "unit"} (signed value at the earliest time its magnitude
    is reached); ``residual`` is {"amplitude", "after", "unit"} or null; ``impulse_idealization``
    lists one entry per pulse.
    """
    fields: dict = {q.name: _extreme_field(q.extreme, q.unit) for q in results.quantities}
    residual = results.residual
    fields["residual"] = None if residual is None else {
        "amplitude": residual.amplitude, "after": residual.after, "unit": residual.unit}
    fields["impulse_idealization"] = [{
        "load": i.load,
        "shape": i.shape,
        "start": i.start,
        "duration": i.duration,
        "duration_ratio": i.duration_ratio,
        "area": i.area,
        "area_unit": i.area_unit,
        "centroid": i.centroid,
        "impulse_peak": _extreme_field(i.impulse_peak, i.unit),
        "pulse_peak": _extreme_field(i.pulse_peak, i.unit),
        "relative_error": i.relative_error,
    } for i in results.idealizations]
    return fields

"""Step-response metrics from the closed form: rise time, settling time, percent overshoot,
and the times the response crosses levels the engineer names.

Every time here is a root of the closed-form pieces, never read off samples. On each
interval between breakpoints the stationary points of the response (``results.
stationary_points``: every root of x′, each bracketed alone by the complete search, refined
to 30 digits) cut the interval into stretches on which x is monotone; a level is crossed on
a stretch exactly when x − level changes sign between its ends, and that one root is found
by bisection at 40 digits and then polished with ``mpmath.findroot`` (Newton, x′ as the
derivative) to 30 significant digits. A jump of x at a breakpoint (an impulse on a
first-order model) across the level counts as a crossing at the breakpoint.

The metrics are defined where the response has a final value: the last piece, which
describes the response for all later times when no load acts after the window, is a
constant x_f plus decaying terms u^k·e^(σu)·cos|sin(ωu) with σ < 0, and x_f ≠ 0. With
r = x/x_f (definitions as in the control-engineering texts, percent of the final value):

* rise time: from the first time r reaches 0.1 to the first time it reaches 0.9 (defined
  when r(0) < 0.1);
* settling time: the last time |x − x_f| = 0.02·|x_f|. Past the window the last piece is
  followed until its envelope Σ |A_k,σ,ω| u^k e^(σu) (which bounds |x − x_f|, and
  decreases for u > k/|σ|) is inside the band; the crossings up to there are found as
  above, so the time is established exactly, also when it lies beyond the window. Where the
  response past the window is not known (a load acts later) or the envelope does not enter
  the band within 10⁶ decay times, it is reported as not established;
* percent overshoot: 100·(max r − 1) after the response first reaches x_f, with the time
  of that extreme (defined when r(0) < 1); 0 when it never passes x_f, while the envelope
  bounds any later excess (the bound is given).

Crossing times of ``[report] levels`` are given on the analysis window [0, until]; a level
that is never reached has no times (that is a result, not an error).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import mpmath

from . import quantities
from .basis import COS, NumericExponentialPolynomial
from .errors import DerivationError
from .results import DIGITS, Interval, numeric_intervals, piece_functions, real_number, stationary_points

BAND = mpmath.mpf(2) / 100           # settling band, relative to the final value
RISE_LEVELS = (mpmath.mpf(1) / 10, mpmath.mpf(9) / 10)
ENVELOPE_LIMIT = 10**6               # slowest decay times the envelope is followed at most
OVERSHOOT_FLOOR = mpmath.mpf(10) ** -9   # smallest excess (relative) an overshoot search resolves
BISECTIONS = 40                      # bisection steps before the Newton polish
SOURCE = ("roots of the closed-form pieces between consecutive stationary points, refined with "
          "mpmath.findroot to 30 digits; beyond the window, the envelope of the decaying terms")


@dataclass(frozen=True)
class Crossing:
    """The times (s) at which the response equals ``level`` (SI) in the window."""

    level: float
    times: tuple[float, ...]


@dataclass(frozen=True)
class RiseTime:
    value: float      # t90 − t10, s
    start: float      # first time the response reaches 10 % of the final value
    end: float        # first time it reaches 90 %


@dataclass(frozen=True)
class SettlingTime:
    value: float | None       # last time |x − x_f| = band (s); None: not established
    band: float
    established: bool
    note: str


@dataclass(frozen=True)
class Overshoot:
    value: float              # percent of the final value
    time: float | None        # time of the largest excess (None: no overshoot)
    peak: float | None        # the response there
    note: str


@dataclass(frozen=True)
class ResponseMetrics:
    """The step-response metrics of one case (SI; None where a metric is not defined)."""

    unit: str
    final_value: float | None
    rise_time: RiseTime | None
    settling_time: SettlingTime | None
    overshoot: Overshoot | None
    crossings: tuple[Crossing, ...]
    note: str = ""
    source: str = SOURCE


# ----------------------------------------------------------------------------- roots


def _tiny(scale) -> mpmath.mpf:
    return mpmath.mpf(10) ** (-DIGITS) * scale


def _refine(function: NumericExponentialPolynomial, slope: NumericExponentialPolynomial,
            level, low, high):
    """The one root of function − level in (low, high), where it changes sign: bisection at
    40 digits, then mpmath.findroot (Newton) to 30 significant digits, kept in the bracket."""
    with mpmath.workdps(DIGITS + 10):
        g_low = function(low) - level
        for _ in range(BISECTIONS):
            middle = (low + high) / 2
            g_middle = function(middle) - level
            if g_middle == 0:
                return middle
            if (g_middle > 0) == (g_low > 0):
                low, g_low = middle, g_middle
            else:
                high = middle
        guess = (low + high) / 2
        try:
            root = mpmath.findroot(lambda u: function(u) - level, guess, solver="newton",
                                   df=slope, tol=mpmath.mpf(10) ** (-2 * DIGITS - 10),
                                   verify=False)
        except (ZeroDivisionError, ValueError):
            root = guess
        if not low <= root <= high:
            # Newton left the bracket (flat x′): bisect on to full precision instead
            for _ in range(4 * DIGITS):
                middle = (low + high) / 2
                if ((function(middle) - level) > 0) == (g_low > 0):
                    low = middle
                else:
                    high = middle
            root = (low + high) / 2
        return root


def _stretches(interval: Interval) -> tuple[list, list]:
    """Local times [0, stationary points…, length] of one interval and x at each (40 digits)."""
    length = interval.end - interval.start
    points = [mpmath.mpf(0)]
    if length > 0:
        points += stationary_points(interval.function, length) + [length]
    with mpmath.workdps(DIGITS + 10):
        values = [interval.function(u) for u in points]
    return points, values


def crossing_times(intervals: Sequence[Interval], level, stretches: list | None = None) -> list:
    """Every time (mpf) at which the response equals ``level`` on the intervals, in order."""
    level = mpmath.mpf(level)
    stretches = stretches if stretches is not None else [_stretches(i) for i in intervals]
    times: list = []

    def add(time) -> None:
        if not times or abs(time - times[-1]) > mpmath.mpf(10) ** (-DIGITS + 5) * max(1, abs(time)):
            times.append(time)

    previous = None
    for interval, (points, values) in zip(intervals, stretches):
        scale = max([abs(level)] + [abs(v) for v in values])
        gaps = [v - level for v in values]
        zero = [abs(g) <= _tiny(scale) for g in gaps]
        if previous is not None and not zero[0] and previous * gaps[0] < 0:
            add(interval.start)            # a jump across the level at the breakpoint
        slope = None
        for i in range(len(points)):
            if zero[i]:
                add(interval.start + points[i])
            elif i + 1 < len(points) and not zero[i + 1] and gaps[i] * gaps[i + 1] < 0:
                if slope is None:
                    slope = interval.function.derivative()
                add(interval.start + _refine(interval.function, slope, level, points[i],
                                             points[i + 1]))
        previous = gaps[-1] if not zero[-1] else None
    return times


# ----------------------------------------------------------------------------- final value


def _tail(function: NumericExponentialPolynomial):
    """(final value, decaying rows) of a last piece, or (None, reason)."""
    rows = [row for row in function.rows if row[4] != 0]
    size = sum((abs(row[4]) for row in rows), mpmath.mpf(0))
    constant = mpmath.mpf(0)
    decaying = []
    for power, rate, frequency, kind, c in rows:
        if abs(c) <= mpmath.mpf(10) ** (-DIGITS + 5) * size:
            continue
        if power == 0 and rate == 0 and frequency == 0:
            if kind == COS:
                constant += c
            continue
        if frequency == 0 and kind != COS:
            continue                       # sin(0·u) = 0
        if rate >= 0:
            return None, ("the response does not settle to a final value (undamped, growing or "
                          "unbounded terms remain after the last load)")
        decaying.append((power, rate, frequency, kind, c))
    if constant == 0:
        return None, "the final value is zero (the response returns to rest)"
    return constant, decaying


def _envelope(rows: list):
    """E(u) = Σ √(A² + B²)·u^k·e^(σu) over (k, σ, ω): a bound on |x − x_f|, and u_m = max k/|σ|
    past which every term decreases."""
    groups: dict[tuple, list] = {}
    for power, rate, frequency, kind, c in rows:
        pair = groups.setdefault((power, rate, frequency), [0, 0])
        pair[0 if kind == COS else 1] += c
    terms = [(power, rate, mpmath.sqrt(a**2 + b**2)) for (power, rate, _f), (a, b) in groups.items()]
    turn = max((power / -rate for power, rate, _a in terms), default=mpmath.mpf(0))

    def envelope(u):
        return sum((a * u**power * mpmath.exp(rate * u) for power, rate, a in terms), mpmath.mpf(0))
    slowest = max((-1 / rate for _p, rate, _a in terms), default=mpmath.mpf(0))
    return envelope, turn, slowest


def envelope_time(rows: list, bound, start, cap=None):
    """A local time u ≥ start past which the envelope stays ≤ bound (None: not within
    ENVELOPE_LIMIT slowest decay times, nor before ``cap``)."""
    with mpmath.workdps(DIGITS + 10):
        envelope, turn, slowest = _envelope(rows)
        low = max(mpmath.mpf(start), turn)
        if cap is not None and low > cap:
            return None
        if envelope(low) <= bound:
            return low
        step = slowest if slowest > 0 else mpmath.mpf(1)
        high = low + step
        while envelope(high) > bound:
            step *= 2
            high = low + step
            if step > ENVELOPE_LIMIT * slowest:
                return None
        for _ in range(60):
            middle = (low + high) / 2
            if envelope(middle) <= bound:
                high = middle
            else:
                low = middle
        return None if cap is not None and high > cap else high


# ----------------------------------------------------------------------------- metrics


def _continues(history, until, values) -> bool:
    """Whether the last piece describes the response for every time after the window (no
    load term or impulse acts after it)."""
    with mpmath.workdps(DIGITS + 10):
        end = real_number(until, values)
        for term in (*history.terms, *history.impulses):
            if real_number(term.at, values) > end:
                return False
    return True


def _extended(intervals: list[Interval], length) -> list[Interval]:
    last = intervals[-1]
    return intervals[:-1] + [Interval(last.start, last.start + length, last.function)]


def response_metrics(case, model, history, solution, window) -> ResponseMetrics | None:
    """The metrics of one derived case; None for a case whose symbols have no values.

    Raises DerivationError where the roots cannot be found (a response beyond the float range
    while levels are asked for): never a metric that was not established."""
    if case.is_symbolic and not case.is_fully_valued:
        return None
    try:
        return _metrics(case, history, solution, window)
    except (OverflowError, ArithmeticError) as error:
        raise DerivationError(f"the response metrics could not be computed: "
                              f"{type(error).__name__}: {error}") from None


def _metrics(case, history, solution, window) -> ResponseMetrics:
    values = case.symbol_values()
    unit = quantities.si_unit_text(case.system.response_dimension)
    starts = [piece.start for piece in solution.pieces]
    intervals = numeric_intervals(piece_functions(solution.pieces), starts, window.until, values)
    final, rows = _tail(intervals[-1].function)
    if final is None and not case.report.levels:
        return ResponseMetrics(unit, None, None, None, None, (), rows)
    stretches = [_stretches(i) for i in intervals]      # (the costly part: every x′ root)
    crossings = tuple(Crossing(float(level), tuple(float(t) for t in crossing_times(
        intervals, real_number(level, values), stretches))) for level in case.report.levels)
    if final is None:
        return ResponseMetrics(unit, None, None, None, None, crossings, rows)
    with mpmath.workdps(DIGITS + 10):
        x0 = intervals[0].function(0)
        ratio0 = x0 / final
        band = BAND * abs(final)
        window_length = intervals[-1].end - intervals[-1].start
    continues = _continues(history, window.until, values)
    # followed at most ENVELOPE_LIMIT windows past the end (float-sized intervals)
    cap = ENVELOPE_LIMIT * intervals[-1].end
    settle_at = envelope_time(rows, band, window_length, cap) if continues else None
    followed = _extended(intervals, settle_at) if settle_at is not None else intervals
    followed_stretches = stretches if settle_at is None else \
        stretches[:-1] + [_stretches(followed[-1])]

    rise = None
    if ratio0 < RISE_LEVELS[0]:
        low = crossing_times(followed, RISE_LEVELS[0] * final, followed_stretches)
        high = crossing_times(followed, RISE_LEVELS[1] * final, followed_stretches)
        if low and high:
            rise = RiseTime(float(high[0] - low[0]), float(low[0]), float(high[0]))

    if settle_at is None:
        why = ("a load acts after the analysis window, so the response after it is not known "
               "here" if not continues else "the envelope of the decaying terms does not enter "
               f"the band within {ENVELOPE_LIMIT:g} decay times or analysis windows")
        settling = SettlingTime(None, float(BAND), False, f"not established: {why}")
    else:
        edges = [t for level in (final - band, final + band)
                 for t in crossing_times(followed, level, followed_stretches)]
        time = max(edges) if edges else mpmath.mpf(0)
        end = followed[-1].end
        beyond = time > intervals[-1].end
        if end > intervals[-1].end * (1 + mpmath.mpf(10) ** (-DIGITS + 5)):
            note = (f"the last piece followed past the window to t = {mpmath.nstr(end, 6)} s, "
                    "after which the envelope of its decaying terms stays inside the band")
        else:
            note = ("after the end of the window the envelope of the last piece's decaying "
                    "terms stays inside the band")
        if beyond:
            note += "; the settling time lies beyond the analysis window"
        settling = SettlingTime(float(time), float(BAND), True, note)

    overshoot = None
    if ratio0 < 1:
        overshoot = _overshoot(followed, followed_stretches, final, rows, settle_at, cap)
    return ResponseMetrics(unit, float(final), rise, settling, overshoot, crossings)


def _overshoot(intervals, stretches, final, rows, followed_to, cap) -> Overshoot:
    """The largest excess beyond the final value after the response first reaches it."""
    def search(intervals, stretches):
        first = crossing_times(intervals, final, stretches)
        if not first:
            return None, None
        best = (mpmath.mpf(0), None, None)
        for interval, (points, values) in zip(intervals, stretches):
            for u, x in zip(points, values):
                time = interval.start + u
                excess = (x - final) / final
                if time >= first[0] and excess > best[0]:
                    best = (excess, time, x)
        return best, first[0]

    with mpmath.workdps(DIGITS + 10):
        best, _first = search(intervals, stretches)
        if followed_to is None:
            if best is None:
                return Overshoot(0.0, None, None, "the response does not reach its final value "
                                 "in the window (the response after it is not known here)")
            return Overshoot(float(100 * best[0]), None if best[1] is None else float(best[1]),
                             None if best[2] is None else float(best[2]),
                             "within the analysis window (the response after it is not known here)")
        envelope, _turn, _slowest = _envelope(rows)
        local_end = intervals[-1].end - intervals[-1].start
        excess = best[0] if best is not None else mpmath.mpf(0)
        if excess * abs(final) < envelope(local_end):
            further = envelope_time(rows, max(excess, OVERSHOOT_FLOOR) * abs(final), local_end,
                                    cap)
            if further is not None and further > local_end:
                intervals = _extended(intervals, further)
                stretches = stretches[:-1] + [_stretches(intervals[-1])]
                best, _first = search(intervals, stretches)
                excess = best[0] if best is not None else mpmath.mpf(0)
                local_end = further
        bound = envelope(local_end) / abs(final)
        end = intervals[-1].end
        if best is None or best[1] is None:
            return Overshoot(0.0, None, None, "the response does not pass its final value up to "
                             f"t = {mpmath.nstr(end, 6)} s; after that any excess is below "
                             f"{mpmath.nstr(100 * bound, 3)} % (envelope)")
        return Overshoot(float(100 * best[0]), float(best[1]), float(best[2]),
                         f"largest excess up to t = {mpmath.nstr(end, 6)} s; after that the "
                         f"envelope bounds it by {mpmath.nstr(100 * bound, 3)} %")


# ----------------------------------------------------------------------------- JSON


def metric_fields(metrics: ResponseMetrics | None) -> dict:
    """The JSON fields of the metrics, where they exist (SI, times in s)."""
    if metrics is None:
        return {}
    fields: dict = {}
    if metrics.final_value is not None:
        fields["final_value"] = metrics.final_value
        rise = metrics.rise_time
        fields["rise_time"] = None if rise is None else {
            "value": rise.value, "start": rise.start, "end": rise.end, "unit": "s"}
        settling = metrics.settling_time
        fields["settling_time"] = {"value": settling.value, "band": settling.band,
                                   "established": settling.established, "unit": "s",
                                   "note": settling.note}
        overshoot = metrics.overshoot
        fields["overshoot"] = None if overshoot is None else {
            "value": overshoot.value, "time": overshoot.time, "response": overshoot.peak,
            "unit": "%", "note": overshoot.note}
    if metrics.crossings:
        fields["crossings"] = [{"level": c.level, "times": list(c.times), "unit": metrics.unit}
                               for c in metrics.crossings]
    return fields


# ----------------------------------------------------------------------------- sheet


def metric_rows(metrics: ResponseMetrics | None, show, response_dimension,
                response_prefer=()) -> list[dict]:
    """Rows {name, si, shown} of the sheet's metrics table; ``show(value, dimension,
    prefer)`` gives the (SI, report-unit) texts of a number. Empty where nothing applies."""
    if metrics is None:
        return []
    time = quantities.dimension("time")
    rows: list[dict] = []

    def row(name: str, value, dimension=None, prefer=(), text: str | None = None) -> None:
        if value is None:
            rows.append({"name": name, "si": text, "shown": None})
            return
        si, shown = show(float(value), dimension, prefer)
        rows.append({"name": name, "si": si, "shown": shown})

    if metrics.final_value is not None:
        row("final value x_f (last piece as t → ∞)", metrics.final_value, response_dimension,
            response_prefer)
        rise = metrics.rise_time
        if rise is None:
            row("rise time, 10 % to 90 % of x_f", None,
                text="not defined (the response starts at or beyond 10 % of x_f, or does not "
                     "reach 90 %)")
        else:
            row("rise time, 10 % to 90 % of x_f", rise.value, time, ("time",))
            row("reaches 10 % of x_f at t", rise.start, time, ("time",))
            row("reaches 90 % of x_f at t", rise.end, time, ("time",))
        settling = metrics.settling_time
        name = "settling time, 2 % band about x_f"
        if settling.value is None:
            row(name, None, text=settling.note)
        else:
            row(name, settling.value, time, ("time",))
        overshoot = metrics.overshoot
        if overshoot is None:
            row("percent overshoot of x_f", None,
                text="not defined (the response starts at or beyond its final value)")
        else:
            si, _shown = show(overshoot.value, quantities.dimension("dimensionless"), ())
            rows.append({"name": "percent overshoot of x_f", "si": si, "shown": None})
            if overshoot.time is not None:
                row("time of the largest overshoot", overshoot.time, time, ("time",))
    for crossing in metrics.crossings:
        unit = "" if metrics.unit == "1" else f" {metrics.unit}"
        label = f"reaches the level {crossing.level:.6g}{unit} at t"
        if not crossing.times:
            rows.append({"name": label, "si": "not reached in the analysis window (no crossing)",
                         "shown": None})
        for time_value in crossing.times:
            row(label, time_value, time, ("time",))
    return rows


def metric_notes(metrics: ResponseMetrics | None) -> list[str]:
    """The sentences under the metrics table: how each was established."""
    if metrics is None or (metrics.final_value is None and not metrics.crossings):
        return []
    notes = [f"Times are measured from t = 0 and found as {SOURCE}."]
    if metrics.final_value is not None:
        notes.append(f"Settling: {metrics.settling_time.note}.")
        if metrics.overshoot is not None:
            notes.append(f"Overshoot: {metrics.overshoot.note}.")
    elif metrics.note:
        notes.append(f"No rise time, settling time or overshoot: {metrics.note}.")
    return notes

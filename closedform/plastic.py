"""Yielding springs: the response as a chain of linear phases between events.

Between two events the resistance is one straight line of the resistance function, so
m x'' + c x' + R(x) = F(t) is linear with constant coefficients and is solved by the same
Laplace engine as any other case (``response.solve``):

- elastic phase: R = k·(x − x_p), x_p the plastic offset (0 before the first yield);
  the equation is m x'' + c x' + k x = F(t) + k·x_p;
- plastic phase on the upper (lower) yield line: R = k₂·x ± R_y·(1 − k₂/k), so
  m x'' + c x' + k₂ x = F(t) ∓ R_y·(1 − k₂/k) (k₂ = 0 for an elastic-plastic spring).

Each phase starts from the exact state (x, x′) at the event that opens it. Its response is
the response of the phase's equation to the whole load history from rest, plus the
constant force times the phase's unit-force response, plus the free response that makes the
state at the event come out right (superposition; the three parts are solved once per
stiffness). Events are found on the closed form of each piece:

- yield (or reverse-yield, in the direction opposite to the previous yielding): x reaches
  the displacement where k·(x − x_p) meets a yield line. Every stationary point of x on the
  piece is found by the complete bracketing search of ``results.stationary_points``, x is
  monotone between them, so each crossing is bracketed alone and refined to 30 digits by
  mpmath.findroot (Illinois) on the closed form;
- unload: x′ changes sign on a yield line — a root of x′ (a stationary point of x, again
  from the complete search) after which x′ has the other sign, or a velocity jump from an
  impulse at a breakpoint.

The results an engineer takes from the response: the ductility ratio μ = max|x| / x_y and
its time, the permanent set (the displacement at which the spring force would be zero on
elastic unloading from the state at the end of the window), the largest rebound after the
peak, and the plastic work (1 − k₂/k)·∫R dx over the plastic phases, exact from the event
states since R is linear in x on a yield line.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

import mpmath
import sympy

from .basis import COS, NumericCarrier, NumericExponentialPolynomial
from .checks.registry import DERIVE, PRINTED_EQUATIONS, run_checks
from .derivation import Derivation, result_dictionary
from .errors import CaseError, DerivationError
from .loads import STEP, LoadHistory, Rewrite, SingularityTerm, rewrite_loads
from .resistance import Resistance
from .response import (
    DIGITS,
    EXACT_BREAKPOINT_LIMIT,
    Piece,
    Solution,
    load_pieces,
    order_times,
    solve,
)
from .results import (
    Extreme,
    Interval,
    QuantityPeak,
    Results,
    extreme_magnitude,
    linear_combination,
    numeric_intervals,
    piece_functions,
    quantity_definitions,
    stationary_points,
)
from .specs import Case, SystemSpec
from .systems import LinearModel, build_model

WORK = DIGITS + 10                # working digits of the event search
MAX_PHASES = 2000                 # a guard against an endless chain (chattering)
SOURCE_PHASES = ("piecewise-linear resistance: each phase between events is a linear "
                 "constant-coefficient equation, solved by Laplace transform from the state "
                 "at its event")


@dataclass(frozen=True)
class Event:
    """One change of the spring's branch, SI, 30-digit values."""

    time: Any
    kind: str                 # yield | unload | reverse-yield
    displacement: Any
    velocity: Any
    force: Any


@dataclass(frozen=True)
class Phase:
    """One linear phase: R = slope·x + constant on [start, end]."""

    number: int
    kind: str                 # elastic | plastic
    direction: int            # plastic: +1 upper yield line, −1 lower; elastic: 0
    start: Any
    end: Any
    slope: sympy.Expr         # k (elastic) or k₂ (plastic)
    constant: Any             # −k·x_p (elastic) or ±R_y·(1 − α) (plastic)
    model: LinearModel
    first_piece: int          # index of its first piece in the response
    piece_count: int

    @property
    def offset(self):
        """Elastic: the plastic offset x_p (R = k(x − x_p))."""
        return -self.constant / float_number(self.slope) if self.kind == "elastic" else None


@dataclass(frozen=True)
class PlasticResponse:
    """The phases, events and yield results of one case."""

    resistance: Resistance
    phases: tuple[Phase, ...]
    events: tuple[Event, ...]
    piece_phases: tuple[int, ...]           # phase index of each piece
    intervals: tuple[Interval, ...]         # numeric pieces in local time (30 digits)
    ductility: Extreme | None
    yield_displacement: float
    permanent_set: Any
    rebound: Extreme | None
    rebound_force: Extreme | None
    plastic_work: Any
    final_state: tuple = field(default=())   # (x, x′, R) at the end of the window

    def force_line(self, piece_index: int) -> tuple[Any, Any]:
        """(slope, constant) of R = slope·x + constant on the piece."""
        phase = self.phases[self.piece_phases[piece_index]]
        return float_number(phase.slope), phase.constant


def float_number(value: sympy.Expr):
    """A sympy number at the working precision (mpmath)."""
    with mpmath.workdps(WORK):
        return mpmath.mpf(sympy.Float(sympy.N(value, WORK), WORK)._mpf_)


def time_value(value) -> sympy.Float:
    """An event time as a sympy Float of the working precision (for pieces)."""
    return sympy.Float(mpmath.nstr(value, WORK, strip_zeros=False), WORK)


# ----------------------------------------------------------------------------- models


def phase_model(case: Case, stiffness: sympy.Expr) -> LinearModel:
    """The phase's equation m x'' + c x' + stiffness·x = b·load (damping c kept as a
    coefficient, so a damping ratio given for k keeps its c on the yield line)."""
    parameters = dict(case.system.parameters)
    parameters.pop("damping_ratio", None)
    parameters["stiffness"] = stiffness
    system = SystemSpec(case.system.model, parameters, None, case.system.load_dimension,
                        case.system.response_dimension)
    return build_model(system, {})


def constant_history(scale: sympy.Expr) -> LoadHistory:
    """A unit force from t = 0, in the load's units (1/b)."""
    term = SingularityTerm(1 / scale, sympy.S.Zero, STEP, 0)
    return LoadHistory((Rewrite(0, "step", "unit force of the phase", "", (term,)),))


@dataclass
class _Basis:
    """The three responses of one phase equation, in 30-digit terms per breakpoint."""

    starts: list            # breakpoints of the load response (mpf)
    exact: list             # the same breakpoints as the engine gives them (exact)
    load: list              # terms (dict Mode → mpf) on each, local time
    unit: dict              # unit force from rest at t = 0
    free_x: dict            # free response from x = 1, x′ = 0 at u = 0
    free_v: dict            # free response from x = 0, x′ = 1


class _Solver:
    """The phase chain of one case (internal; the result is a PlasticResponse)."""

    def __init__(self, case: Case, model: LinearModel, history: LoadHistory, until) -> None:
        self.case = case
        self.model = model
        self.history = history
        self.until = until
        self.until_mp = float_number(until)
        self.carrier = NumericCarrier(DIGITS)
        self.bases: dict[sympy.Expr, tuple[LinearModel, _Basis]] = {}

    def basis(self, stiffness: sympy.Expr) -> tuple[LinearModel, _Basis]:
        if stiffness not in self.bases:
            model = self.model if stiffness == self.case.system.parameters["stiffness"] \
                else phase_model(self.case, stiffness)
            loaded = solve(model, self.history, None, self.until, exact=False)
            unit = solve(model, constant_history(model.input_scale), None, self.until,
                         exact=False)
            empty = LoadHistory(())
            free_x = solve(model, empty, (sympy.S.One, sympy.S.Zero), self.until, exact=False)
            free_v = solve(model, empty, (sympy.S.Zero, sympy.S.One), self.until, exact=False)
            c = self.carrier
            self.bases[stiffness] = (model, _Basis(
                [float_number(p.start) for p in loaded.pieces],
                [p.start for p in loaded.pieces],
                [c.numeric_terms(p.local) for p in loaded.pieces],
                c.numeric_terms(unit.pieces[0].local),
                c.numeric_terms(free_x.pieces[0].local),
                c.numeric_terms(free_v.pieces[0].local)))
        return self.bases[stiffness]

    def phase_pieces(self, stiffness: sympy.Expr, force, start, x0, v0
                     ) -> tuple[LinearModel, list[tuple[Any, dict, Any]]]:
        """(start, terms, exact start or None) of each piece of the phase from ``start`` on
        (a load breakpoint keeps its exact value, an event time is a number): load response +
        force × unit response + the free response matching (x0, v0) at ``start``."""
        model, basis = self.basis(stiffness)
        c = self.carrier
        with mpmath.workdps(WORK):
            index = max(i for i, a in enumerate(basis.starts) if a <= start)
            at_start = c.add(c.shifted(basis.load[index], start - basis.starts[index]),
                             c.shifted(basis.unit, start), force)
            function = c.numeric_polynomial(at_start)
            dx = x0 - function(0)
            dv = v0 - function.derivative()(0)
            pieces = []
            for i in range(index, len(basis.starts)):
                s = start if i == index else basis.starts[i]
                if s >= self.until_mp:
                    break
                terms = c.add(c.shifted(basis.load[i], s - basis.starts[i]),
                              c.shifted(basis.unit, s), force)
                terms = c.add(terms, c.shifted(basis.free_x, s - start), dx)
                terms = c.add(terms, c.shifted(basis.free_v, s - start), dv)
                pieces.append((s, terms, None if i == index else basis.exact[i]))
        return model, pieces


def _crossing(function: NumericExponentialPolynomial, length, level, upward: bool, noise,
              turns=None):
    """The earliest u in (0, length] where the function crosses ``level`` upward (or
    downward): stationary points split the piece into monotone stretches; a stretch whose
    ends straddle the level holds exactly one crossing, refined by findroot. A stationary
    point within ``noise`` of the level is a touch (the spring reaches yield at rest and
    turns back), not a crossing."""
    with mpmath.workdps(WORK):
        if turns is None:
            turns = stationary_points(function, length)
        points = [mpmath.mpf(0)] + list(turns) + [mpmath.mpf(length)]
        sign = 1 if upward else -1
        values = [sign * (function(u) - level) for u in points]
        for (a, fa), (b, fb) in zip(zip(points, values), zip(points[1:], values[1:])):
            if fa <= noise < fb:
                if fa >= 0:
                    return a
                return _bracketed_root(lambda u: function(u) - level, a, b)
    return None


def _bracketed_root(g, a, b):
    """A root of g in [a, b] (a sign change) to 30 digits: mpmath.findroot with the
    Illinois method, kept inside the bracket (bisection where it strays)."""
    with mpmath.workdps(WORK):
        try:
            root = mpmath.findroot(g, (a, b), solver="illinois", tol=mpmath.mpf(10) ** (-2 * WORK + 10),
                                   maxsteps=200)
            if a <= root <= b:
                return root
        except (ValueError, ZeroDivisionError):
            pass
        low, high, g_low = a, b, g(a)
        for _ in range(200):
            middle = (low + high) / 2
            g_middle = g(middle)
            if (g_middle > 0) == (g_low > 0):
                low, g_low = middle, g_middle
            else:
                high = middle
            if high - low <= mpmath.mpf(10) ** (-WORK) * max(1, abs(high)):
                break
        return (low + high) / 2


def _unloading(function: NumericExponentialPolynomial, length, direction: int):
    """The earliest u in (0, length) where x′ changes sign from ``direction`` to the other."""
    with mpmath.workdps(WORK):
        roots = stationary_points(function, length)
        velocity = function.derivative()
        ends = roots[1:] + [mpmath.mpf(length)]
        for root, nxt in zip(roots, ends):
            if direction * velocity((root + nxt) / 2) < 0:
                return root
    return None


def solve_phases(case: Case, model: LinearModel, history: LoadHistory, first: Solution,
                 until) -> tuple[list[Piece], list[int], list[Phase], list[Event]]:
    """The chain of phases on [0, until]: pieces (the first phase's exact ones kept as the
    engine gave them), the phase of each piece, the phases and the events."""
    with mpmath.workdps(WORK):
        return _chain(case, model, history, first, until)


def _chain(case: Case, model: LinearModel, history: LoadHistory, first: Solution, until):
    resistance: Resistance = case.system.resistance
    k = case.system.parameters["stiffness"]
    k2 = resistance.post_yield_stiffness
    solver = _Solver(case, model, history, until)
    k_mp, k2_mp = float_number(k), float_number(k2)
    until_mp = solver.until_mp
    # a touch of the yield line within this much is rounding, not yielding (30 digits)
    noise = mpmath.mpf(10) ** (-DIGITS + 5) * float_number(resistance.yield_displacement)

    def threshold(offset, direction):
        return (k_mp * offset + float_number(resistance.line_intercept(direction))) / (k_mp - k2_mp)

    pieces: list[Piece] = []
    owners: list[int] = []
    phases: list[Phase] = []
    events: list[Event] = []
    # the first phase: elastic from the case's initial state, exact where the case is
    candidates = [(p, f) for p, f in zip(first.pieces, numeric_intervals(
        piece_functions(first.pieces), [p.start for p in first.pieces], until))]
    current = [(interval.start, interval.function, piece) for piece, interval in candidates]
    kind, direction, offset = "elastic", 0, mpmath.mpf(0)
    phase_model_now = model
    start = mpmath.mpf(0)
    last_yield = 0
    while True:
        if len(phases) >= MAX_PHASES:
            raise DerivationError(f"more than {MAX_PHASES} elastic and plastic phases in the "
                                  "window; shorten report.until")
        first_index = len(pieces)
        found = None
        for i, (s, function, _source) in enumerate(current):
            end = current[i + 1][0] if i + 1 < len(current) else until_mp
            length = end - s
            if kind == "elastic":
                with mpmath.workdps(WORK):     # one complete search serves both lines
                    turns = stationary_points(function, length)
                hits = [(u, d) for d in (1, -1)
                        if (u := _crossing(function, length, threshold(offset, d), d > 0,
                                           noise, turns)) is not None]
                if hits:
                    u, d = min(hits, key=lambda hit: hit[0])
                    found = (i, s, function, u, "reverse-yield" if last_yield and d != last_yield
                             else "yield", d)
            else:
                with mpmath.workdps(WORK):
                    jumped = i > 0 and direction * function.derivative()(0) < 0
                u = mpmath.mpf(0) if jumped else _unloading(function, length, direction)
                if u is not None:
                    found = (i, s, function, u, "unload", 0)
            if found is not None:
                break
        stop = len(current) if found is None else found[0] + 1
        for i in range(stop):
            s, function, source = current[i]
            end = current[i + 1][0] if i + 1 < len(current) else None
            following = _exact_start(current[i + 1][2]) if i + 1 < len(current) else None
            if found is not None and i == found[0]:
                end, following = s + found[3], None
                if found[3] == 0:
                    break
            pieces.append(_piece(s, end, function, source, solver.carrier, following))
            owners.append(len(phases))
        phase_end = until_mp if found is None else found[1] + found[3]
        slope = k if kind == "elastic" else k2
        constant = -k_mp * offset if kind == "elastic" else \
            float_number(resistance.line_intercept(direction))
        phases.append(Phase(len(phases) + 1, kind, direction, start, phase_end, slope,
                            constant, phase_model_now, first_index, len(pieces) - first_index))
        if found is None:
            break
        _i, s, function, u, event_kind, d = found
        with mpmath.workdps(WORK):
            time = s + u
            x = function(u)
            v = function.derivative()(u)
            if event_kind == "unload":
                v = mpmath.mpf(0) if u != 0 else v
                force = k2_mp * x + constant
                offset = x - force / k_mp
                kind, direction = "elastic", 0
            else:
                x = threshold(offset, d)
                force = k_mp * (x - offset)
                kind, direction, last_yield = "plastic", d, d
        events.append(Event(time, event_kind, x, v, force))
        start = time
        stiffness = k if kind == "elastic" else k2
        force_constant = k_mp * offset if kind == "elastic" else \
            -float_number(resistance.line_intercept(direction))
        phase_model_now, numbered = solver.phase_pieces(stiffness, force_constant, time, x, v)
        current = [(s, solver.carrier.numeric_polynomial(terms), (terms, exact))
                   for s, terms, exact in numbered]
    return pieces, owners, phases, events


def _exact_start(source):
    """The exact start of a piece still to come (None: an event time)."""
    return source.start if isinstance(source, Piece) else source[1]


def _piece(start, end, function, source, carrier: NumericCarrier, following=None) -> Piece:
    """A Piece from the engine's own (first phase) or from carried 30-digit terms; a start
    or end at a load breakpoint keeps its exact value (``following``: the next piece's
    exact start), an event time is a 40-digit number."""
    if isinstance(source, Piece):
        if end is None or source.end is not None and float_number(source.end) == end:
            return source
        return replace(source, end=time_value(end))
    terms, exact = source
    if end is None:
        finish = None
    else:
        finish = following if following is not None else time_value(end)
    return Piece(exact if exact is not None else time_value(start), finish,
                 carrier.exponential_polynomial(terms), function)


# ----------------------------------------------------------------------------- results


def _constant(value) -> NumericExponentialPolynomial:
    return NumericExponentialPolynomial(((0, mpmath.mpf(0), mpmath.mpf(0), COS, value),), DIGITS)


def _candidates(intervals, after):
    """(time, local u, interval index) of every stationary point of x and every interval
    end at or after ``after``: the only places an extreme of an affine function of x can
    sit on a piece."""
    found = []
    with mpmath.workdps(WORK):
        for index, interval in enumerate(intervals):
            length = interval.end - interval.start
            if interval.end < after:
                continue
            points = [mpmath.mpf(0)] + stationary_points(interval.function, length) + [length]
            found += [(interval.start + u, u, index) for u in points if interval.start + u >= after]
    return found


def plastic_results(case: Case, model: LinearModel, history: LoadHistory, pieces, owners,
                    phases, events, until) -> tuple[Results, PlasticResponse]:
    """Peak, static, DLF and the derived peaks (the spring force on its branch), and the
    yield results: ductility, permanent set, rebound, plastic work."""
    with mpmath.workdps(WORK):
        return _results(case, model, history, pieces, owners, phases, events, until)


def _results(case, model, history, pieces, owners, phases, events, until):
    resistance: Resistance = case.system.resistance
    m = float_number(case.system.parameters["mass"])
    c = float_number(case.system.parameters["damping"])
    k = float_number(case.system.parameters["stiffness"])
    intervals = numeric_intervals(piece_functions(pieces), [p.start for p in pieces], until)
    peak = extreme_magnitude(intervals)
    breakpoints = order_times({sympy.S.Zero} | {term.at for term in history.terms}
                              | {impulse.at for impulse in history.impulses})
    breakpoints = [b for b in breakpoints if sympy.N(b - until, 30) < 0]
    load_intervals = numeric_intervals(load_pieces(history, breakpoints, exact=False),
                                       breakpoints, until)
    largest = extreme_magnitude(load_intervals)
    gain = model.static_gain()
    static = None
    if gain is not None and largest is not None and largest.value != 0:
        static = abs(float(sympy.N(gain, 30))) * abs(largest.value)
    dlf = abs(peak.value) / static if (peak is not None and static) else None

    def line(index):
        phase = phases[owners[index]]
        return float_number(phase.slope), phase.constant

    with mpmath.workdps(WORK):
        force = [Interval(i.start, i.end, linear_combination(
            [(line(n)[0], i.function), (1, _constant(line(n)[1]))]))
            for n, i in enumerate(intervals)]
        reaction = [Interval(i.start, i.end, linear_combination(
            [(1, f.function), (c, i.function.derivative())]))
            for i, f in zip(intervals, force)]
        absolute = [Interval(r.start, r.end, linear_combination([(-1 / m, r.function)]))
                    for r in reaction]
    replaced = {"peak_spring_force": (force, "spring force R(x) of the resistance function"),
                "peak_support_reaction": (reaction, "support reaction R(x) + c·x′"),
                "peak_absolute_acceleration": (absolute, "absolute acceleration of the mass, "
                                                         "−(R(u) + c·u′)/m")}
    quantities = []
    for name, text, unit, transform in quantity_definitions(case, model):
        if name in replaced:
            values, text = replaced[name]
            quantities.append(QuantityPeak(name, text, unit, extreme_magnitude(values)))
        else:
            with mpmath.workdps(WORK):
                mapped = [Interval(i.start, i.end, transform(i.function)) for i in intervals]
            quantities.append(QuantityPeak(name, text, unit, extreme_magnitude(mapped)))
    numbers = Results(peak, static, dlf, largest, tuple(quantities), None, ())

    x_y = resistance.yield_displacement
    x_y_mp = float_number(x_y)
    ductility = None
    rebound = rebound_force = None
    with mpmath.workdps(WORK):
        if peak is not None:
            ratio = abs(peak.value_mp) / x_y_mp if peak.value_mp is not None else \
                abs(mpmath.mpf(peak.value)) / x_y_mp
            ductility = Extreme(float(ratio), peak.time, ratio, peak.time_mp)
            sign = 1 if peak.value > 0 else -1
            after = peak.time_mp if peak.time_mp is not None else mpmath.mpf(peak.time)
            points = _candidates(intervals, after)
            if points:
                values = [(sign * intervals[n].function(u), t, u, n) for t, u, n in points]
                low, t_low, u_low, n_low = min(values, key=lambda item: item[0])
                if low < sign * (peak.value_mp if peak.value_mp is not None else peak.value):
                    rebound = Extreme(float(sign * low), float(t_low), sign * low, t_low)
                forces = [(-sign * force[n].function(u), t) for t, u, n in points]
                worst, t_worst = max(forces, key=lambda item: item[0])
                if worst > 0:
                    rebound_force = Extreme(float(-sign * worst), float(t_worst), -sign * worst,
                                            t_worst)
        last = intervals[-1]
        u_end = last.end - last.start
        x_end = last.function(u_end)
        v_end = last.function.derivative()(u_end)
        slope, constant = line(len(intervals) - 1)
        r_end = slope * x_end + constant
        permanent = x_end - r_end / k
        work = mpmath.mpf(0)
        alpha = float_number(resistance.hardening_ratio)
        states = [(e.time, e.displacement, e.force) for e in events] + [(until, x_end, r_end)]
        for phase in phases:
            if phase.kind != "plastic":
                continue
            begin = next(s for s in states if s[0] == phase.start)
            finish = next((s for s in states if s[0] == phase.end), states[-1])
            work += (1 - alpha) * (begin[2] + finish[2]) / 2 * (finish[1] - begin[1])
    response = PlasticResponse(resistance, tuple(phases), tuple(events), tuple(owners),
                               tuple(intervals), ductility, float(x_y_mp), permanent, rebound,
                               rebound_force, work, (x_end, v_end, r_end))
    return numbers, response


# ----------------------------------------------------------------------------- derivation


def derive_plastic(case: Case, *, time_budget: float | None = None, sheet_check: bool = True):
    """``derive`` for a case with a [system.resistance]: the phase chain, its results and
    its independent checks (checks/plastic.py, through the checks' registry), as a PlasticDerivation. ``sheet_check`` False
    leaves out re-reading the printed sheet (for spectra, where no sheet is printed)."""
    from .budget import time_budget as budget_for
    from .derivation import analysis_window, finite_check, window_warnings

    if case.symbols:
        raise CaseError("a resistance function needs numbers; the case declares symbols "
                        "(events are found numerically from the closed forms)",
                        key="system.resistance", file=case.source)
    with budget_for(time_budget, case.source) as budget:
        with budget.stage("model and poles"):
            model = build_model(case.system, {})
        with budget.stage("load rewrite"):
            history = rewrite_loads(case.loads)
            window = analysis_window(case, model)
        _refuse_initial_beyond_yield(case)
        breakpoints = {term.at for term in history.terms} | {i.at for i in history.impulses}
        exact = len(breakpoints) <= EXACT_BREAKPOINT_LIMIT and model.exact_poles
        with budget.stage("Laplace transform of the first phase"):
            first = solve(model, history, case.initial, window.until, exact=exact)
        with budget.stage("phases and events"):
            pieces, owners, phases, events = solve_phases(case, model, history, first,
                                                          window.until)
        solution = replace(first, pieces=tuple(pieces), exact=first.exact and not events)
        with budget.stage("results"):
            numbers, response = plastic_results(case, model, history, pieces, owners, phases,
                                                events, window.until)
        partial = PlasticDerivation(case, model, history, window, solution, numbers, (),
                                    plastic=response)
        # the registry's families that fit a yielding spring: its own checks (checks/plastic.py)
        # and the printed equations re-read
        checks = run_checks(partial, DERIVE, stage=budget.stage,
                            without=() if sheet_check else (PRINTED_EQUATIONS,))
        checks += (finite_check(numbers),)
    return PlasticDerivation(case, model, history, window, solution, numbers, checks,
                             window_warnings(case, window, numbers), plastic=response)


def _refuse_initial_beyond_yield(case: Case) -> None:
    if not case.initial:
        return
    x_y = case.system.resistance.yield_displacement
    if abs(case.initial[0]) >= x_y:
        raise CaseError(f"the initial displacement {float(case.initial[0]):g} m is at or beyond "
                        f"the yield displacement {float(x_y):g} m (a yielding spring starts "
                        "inside its elastic range)", key="initial", file=case.source)


@dataclass(frozen=True)
class PlasticDerivation(Derivation):
    """A Derivation whose spring yields: ``plastic`` holds the phases, events and yield
    results; the JSON adds them and a ``phase`` on every piece."""

    plastic: PlasticResponse | None = None

    def to_dict(self) -> dict[str, Any]:
        result = result_dictionary(self)
        for entry, owner in zip(result["pieces"], self.plastic.piece_phases):
            entry["phase"] = self.plastic.phases[owner].kind
        result.update(plastic_fields(self.plastic))
        return result


def plastic_fields(response: PlasticResponse) -> dict[str, Any]:
    """The JSON fields of a yielding spring (SI; times in s)."""
    def number(value):
        value = float(value)
        return value if math.isfinite(value) else None

    def extreme(value: Extreme | None, unit: str):
        return None if value is None else {"value": value.value, "time": value.time,
                                           "unit": unit}

    r = response.resistance
    return {
        "resistance": {"kind": r.kind, "yield_force": float(sympy.N(r.yield_force, 17)),
                       "stiffness": float(sympy.N(r.stiffness, 17)),
                       "post_yield_stiffness": float(sympy.N(r.post_yield_stiffness, 17))},
        "ductility": extreme(response.ductility, "1"),
        "yield_displacement": {"value": response.yield_displacement, "unit": "m"},
        "permanent_set": {"value": number(response.permanent_set), "unit": "m"},
        "rebound": extreme(response.rebound, "m"),
        "rebound_force": extreme(response.rebound_force, "N"),
        "plastic_work": {"value": number(response.plastic_work), "unit": "J"},
        "events": [{"time": number(e.time), "kind": e.kind, "displacement": number(e.displacement),
                    "velocity": number(e.velocity), "spring_force": number(e.force)}
                   for e in response.events],
        "phases": [{"number": p.number, "kind": p.kind, "direction": p.direction,
                    "start": number(p.start), "end": number(p.end),
                    "stiffness": float(sympy.N(p.slope, 17)),
                    "force_constant": number(p.constant)} for p in response.phases],
    }


"""The pipeline for one case: case → model → load terms → Laplace → pieces → results → checks.

``derive`` is a pure function of the ``Case``; the ``Derivation`` it returns holds every
intermediate value the sheet shows, so that nothing is re-derived while rendering.
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol

import sympy

from . import __version__, models
from .case import Case
from .checks.base import Check
from .checks.registry import DERIVE, PRINTED_EQUATIONS, run_checks
from .loads import LoadHistory, rewrite_loads
from .metrics import ResponseMetrics, metric_fields, response_metrics
from .precision import own_precision
from .response import EXACT_BREAKPOINT_LIMIT, Piece, Solution, solve
from .results import Extreme, Results, evaluate_results, result_fields
from .support_motion import with_absolute_displacement
from .systems import LinearModel, build_model

if TYPE_CHECKING:
    from .chain import ChainDerivation

DEFAULT_PERIODS = 5   # default window: last load end + this many slowest periods/time constants


@dataclass(frozen=True)
class Window:
    """The analysis window [0, until] and how it was chosen."""

    until: sympy.Expr
    note: str


class ResponsePiece(Protocol):
    """One piece of a response as the checks read it (a :class:`~closedform.response.Piece`,
    or a claimed formula in its place)."""

    @property
    def start(self) -> sympy.Expr: ...

    @property
    def end(self) -> sympy.Expr | None: ...

    def expression(self, time: sympy.Symbol = ...) -> sympy.Expr: ...

    def expression_text(self) -> str: ...


class DerivedResponse(Protocol):
    """What the independent checks read of a derivation: the case, the response's pieces
    over the window, and the results. A :class:`Derivation` is one; so is the audit's
    ``ClaimedResponse`` (a claimed formula in place of our pieces on its interval)."""

    @property
    def case(self) -> Case: ...

    @property
    def pieces(self) -> Sequence[ResponsePiece]: ...

    @property
    def window(self) -> Window: ...

    @property
    def numbers(self) -> Results: ...


@dataclass(frozen=True)
class Derivation:
    """Everything derived for one case, immutable.

    ``numbers`` holds the results as SI floats for the sheets and checks; ``results`` shows
    the same results as pint quantities by their JSON names.

    Examples
    --------
    >>> import closedform
    >>> case = closedform.load_case({"title": "Step on a mount",
    ...     "system": {"model": "spring-mass-damper", "mass": "100 kg", "stiffness": "1 MN/m"},
    ...     "load": [{"shape": "step", "amplitude": "2 kN"}]})
    >>> d = closedform.derive(case)
    >>> d.status
    'verified'
    >>> round(d.results.peak.to("mm").magnitude, 9)       # 2·F/k for a step, undamped
    4.0
    >>> round(float(d.evaluate([0.0])[0]), 12)
    0.0
    """

    case: Case
    model: LinearModel
    history: LoadHistory
    window: Window
    solution: Solution
    numbers: Results
    checks: tuple[Check, ...]
    warnings: tuple[str, ...] = ()
    metrics: ResponseMetrics | None = None

    @property
    def pieces(self) -> tuple[Piece, ...]:
        return self.solution.pieces

    @property
    def status(self) -> str:
        return "verified" if self.checks and all(c.passed for c in self.checks) else "failed"

    @property
    def passed(self) -> bool:
        return self.status == "verified"

    @property
    def results(self):
        """Every result of the JSON by its JSON name, as pint quantities.

        Returns
        -------
        closedform.ResultQuantities
            ``results.peak`` and every ``results.peak_…`` are ``Extreme`` (``value`` and
            ``time`` quantities, ``to()`` converts the value); ``static``, ``until`` are
            quantities, ``dlf`` dimensionless; null JSON fields are None.
        """
        from .quantity_results import ResultQuantities
        return ResultQuantities.of(self)

    def evaluate(self, times, derivative: int = 0, *, response: str | None = None,
                 precise: bool | None = None):
        """The response at ``times`` from the closed-form pieces, SI.

        Parameters
        ----------
        times : array_like
            Times in seconds inside the analysis window [0, until]; any shape. At a
            breakpoint the piece that starts there is used (values just after a step).
        derivative : int, optional
            0 for the value, 1 for the first time derivative, and so on.
        response : str, optional
            ``None`` (or the variable name, or ``"response"``) for the response itself;
            another response of the model by its JSON name with or without ``peak_``
            (``"velocity"``, ``"spring_force"``, ``"support_reaction"``, ``"current"``,
            …); ``"load"`` for the load history. ``response_names()`` lists them.
        precise : bool, optional
            Evaluate each point at 30 significant digits with mpmath (slower) rather than
            vectorised in float64. Default: 30 digits where the engine carries the pieces
            at 30 digits (long load histories), float64 otherwise.

        Returns
        -------
        numpy.ndarray
            float64 values in SI units, the shape of ``times``.

        Examples
        --------
        >>> import closedform
        >>> d = closedform.derive(closedform.load_case({"title": "Sensor lag",
        ...     "system": {"model": "first-order", "time_constant": "2 s"},
        ...     "load": [{"shape": "step", "amplitude": 1}]}))
        >>> d.evaluate([0.0, 2.0]).round(12).tolist()     # 1 − e^(−t/τ)
        [0.0, 0.632120558829]
        """
        from .api import evaluate
        return evaluate(self, times, derivative, response, precise)

    def response_names(self) -> tuple[str, ...]:
        """The names ``evaluate(times, response=…)`` accepts, sorted."""
        from .api import response_transforms
        return tuple(sorted(response_transforms(self)))

    def plot(self, ax=None):
        """Draw the response (left axis) and the load (right axis) over the window.

        Parameters
        ----------
        ax : matplotlib.axes.Axes, optional
            The axes to draw into; default: the current axes of pyplot.

        Returns
        -------
        matplotlib.axes.Axes
            ``ax``, with the response and the peak; the load is on its twin axes.
        """
        from .plots import draw
        return draw(self, ax)

    def to_dict(self) -> dict[str, Any]:
        return result_dictionary(self)

    def to_json(self) -> str:
        """Strict JSON (RFC 8259): a non-finite number is never written (it is null in
        ``to_dict``, and the "finite results" check says which one it was)."""
        return json.dumps(self.to_dict(), indent=2, allow_nan=False)

    def _repr_markdown_(self) -> str:
        from .api import sheet_markdown
        return sheet_markdown(self)

    def _repr_latex_(self) -> str:
        from .render import render_latex
        return render_latex(self, standalone=False)

    def _repr_html_(self) -> str:
        from .api import summary_html
        return summary_html(self)


def last_load_end(case: Case) -> sympy.Expr:
    ends = [start + load.length() for load in case.loads for start in load.starts()]
    if not ends:
        return sympy.S.Zero
    numeric = [e for e in ends if not e.free_symbols]
    if len(numeric) == len(ends):
        return max(ends, key=lambda e: sympy.N(e, 30))
    return sympy.Max(*ends)


def analysis_window(case: Case, model: LinearModel) -> Window:
    if case.report.until is not None:
        return Window(case.report.until, "as given in [report] until")
    scale = model.slowest_time_scale()
    end = last_load_end(case)
    if scale is None:
        from .errors import CaseError
        raise CaseError("the model has no natural period or time constant to size a default "
                        "window; give [report] until", key="report.until", file=case.source)
    return Window(sympy.simplify(end + DEFAULT_PERIODS * scale),
                  f"default: end of the last load plus {DEFAULT_PERIODS} times the longest "
                  "natural period or time constant")


@own_precision
def derive(case: Case, *, time_budget: float | None = None, sheet_check: bool = True,
           spare_core: bool = False) -> Derivation | ChainDerivation:
    """Derive, evaluate and check the response of one case.

    ``time_budget`` (seconds) bounds the whole derivation; past it a TimeBudgetExceeded
    names the stage that was running. ``sheet_check`` False leaves out re-reading the
    printed equations, for a run that prints no sheet (``derive --json -``): there is then
    nothing printed to re-read, and the JSON result lists only the checks that ran.
    ``spare_core`` (the command line sets it when it derives fewer cases at once than the
    machine has cores) lets the verification of a long history run in a helper process
    alongside the other checks (:func:`closedform.checks.registry.run_checks`): the same
    checks and numbers, sooner.
    """
    from .budget import time_budget as budget_for

    if case.chain is not None:          # several masses: the modal route (closedform.chain)
        from .chain import derive_chain
        return derive_chain(case, time_budget=time_budget)
    if getattr(case.system, "resistance", None) is not None:
        from .plastic import derive_plastic  # a yielding spring: a chain of linear phases
        return derive_plastic(case, time_budget=time_budget, sheet_check=sheet_check)
    with budget_for(time_budget, case.source) as budget:
        with budget.stage("model and poles"):
            model = build_model(case.system, case.symbol_values())
        with budget.stage("load rewrite"):
            history = rewrite_loads(case.loads)
            window = analysis_window(case, model)
        values = case.symbol_values()
        breakpoints = {term.at for term in history.terms} | {i.at for i in history.impulses}
        exact = case.is_symbolic or (len(breakpoints) <= EXACT_BREAKPOINT_LIMIT
                                     and model.exact_poles)
        with budget.stage("Laplace transform, partial fractions and assembly"):
            solution = solve(model, history, case.initial, window.until, exact=exact,
                             ordering=values)
        with budget.stage("results"):
            results = evaluate_results(case, model, history, solution, window)
            results = with_absolute_displacement(results, case, history, solution, window)
        with budget.stage("response metrics"):
            metrics = response_metrics(case, model, history, solution, window)
        partial = Derivation(case, model, history, window, solution, results, (), (), metrics)
        checks = run_checks(partial, DERIVE, stage=budget.stage,
                            without=() if sheet_check else (PRINTED_EQUATIONS,),
                            alongside=spare_core)
        checks += (finite_check(results),)
    return Derivation(case, model, history, window, solution, results, checks,
                      window_warnings(case, window, results), metrics)


def _seconds(value: sympy.Expr) -> str:
    return f"{float(value):.6g} s"


def window_warnings(case: Case, window: Window, results: Results | None = None
                    ) -> tuple[str, ...]:
    """What an engineer must know before using the numbers (warnings, not errors): loads
    outside the window, a window that ends before the loads do, a peak at the end of the
    window or at t = 0, a damping ratio of 1 or more, a residual that cannot be given."""
    values = case.symbol_values()
    warnings = []
    for load in case.loads:
        first = load.starts()[0]
        late = sympy.simplify(first - window.until)
        if late.free_symbols and values:
            late = late.subs(values)
        if late.is_nonnegative:
            warnings.append(f"{case.source}: {load.key}: starts at or after the end of the "
                            "analysis window and does not act on it")
    numeric = not case.symbols or case.is_fully_valued
    until = window.until.subs(values)
    end = last_load_end(case).subs(values)
    if numeric and not until.free_symbols and not end.free_symbols and case.loads:
        if end > until and not any(
                sympy.sympify(load.starts()[0]).subs(values) >= until for load in case.loads):
            warnings.append(f"{case.source}: report.until: the analysis window ends at "
                            f"{_seconds(until)}, before the last load ends at {_seconds(end)}; "
                            "nothing after the window is covered (extend until)")
        if end == until and results is not None and results.residual is None \
                and models.get(case.system.model).residual_warning:
            warnings.append(f"{case.source}: report.until: the last load ends exactly at the "
                            f"end of the analysis window ({_seconds(until)}), so no residual "
                            "vibration after it is reported (extend until past the load)")
    zeta = case.system.parameters.get("damping_ratio")
    if zeta is not None and not sympy.sympify(zeta).subs(values).free_symbols \
            and sympy.sympify(zeta).subs(values) >= 1:
        shown = sympy.sympify(zeta).subs(values)
        warnings.append(f"{case.source}: system.damping_ratio: {float(shown):g} is 1 or more "
                        "(critically damped or overdamped, no oscillation); did you mean "
                        f"{float(shown):g} % ({float(shown) / 100:g})?")
    peak = results.peak if results is not None else None
    if peak is not None and not until.free_symbols:
        span = float(until)
        if span > 0 and abs(peak.time - span) <= 1e-9 * span:
            warnings.append(f"{case.source}: report.until: the peak sits at the end of the "
                            f"analysis window (t = {_seconds(until)}); the response may still "
                            "grow after it (extend until)")
        elif peak.time == 0 and case.initial is not None and any(v != 0 for v in case.initial):
            warnings.append(f"{case.source}: initial: the peak is the initial value at t = 0; "
                            "the loads never drive the response past it")
    for entry in results.idealizations if results is not None else ():
        if entry.centroid is not None and entry.impulse_peak is None:   # (outside the pulse)
            warnings.append(f"{case.source}: load[{entry.load}]: the pulse changes sign and its "
                            f"centroid (t = {_seconds(entry.centroid)}) lies outside it, so no "
                            "impulse of its area stands for it: the impulse idealization gives "
                            "no impulse peak")
    return tuple(warnings)


def non_finite_results(results: Results) -> list[str]:
    """The JSON names of reported numbers that are not finite (an overflow: e^(700·t))."""
    fields = {"peak": _extreme(results.peak), "static": results.static, "dlf": results.dlf,
              **result_fields(results)}
    return [name for name, value in _walk(fields) if isinstance(value, float)
            and not math.isfinite(value)]


def _walk(value: Any, name: str = ""):
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _walk(item, f"{name}.{key}" if name else str(key))
    elif isinstance(value, (list, tuple)):
        for index, item in enumerate(value):
            yield from _walk(item, f"{name}[{index}]")
    else:
        yield name, value


def finite_check(results: Results) -> Check:
    """Every reported number is a finite float: an overflow is a failure, never a value."""
    bad = non_finite_results(results)
    if bad:
        return Check("finite results", False,
                     f"not finite in double precision (overflow or undefined): {', '.join(bad)}; "
                     "reported as null; the response exceeds the float range (about 1.8e308) "
                     "inside the window")
    return Check("finite results", True, "every reported number is finite")


def _strict(value: Any) -> Any:
    """The value with every non-finite float replaced by None (JSON null)."""
    if isinstance(value, dict):
        return {key: _strict(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_strict(item) for item in value]
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _time_value(value: sympy.Expr | None, values: dict) -> float | str | None:
    if value is None:
        return None
    if value.free_symbols:
        return str(value)
    return float(sympy.N(value, 30))


def _extreme(extreme: Extreme | None) -> dict[str, float] | None:
    if extreme is None:
        return None
    return {"value": extreme.value, "time": extreme.time}


CURRENT_PIECE_LIMIT = 200     # longer histories: the current's pieces are left to evaluate()


def current_pieces(derivation) -> list[tuple[sympy.Expr, sympy.Expr | None, sympy.Expr]]:
    """(start, end, i(t) = C·v′(t) in the global time) of each piece of a series-rlc case."""
    if derivation.case.system.model != "series-rlc" or len(derivation.pieces) > CURRENT_PIECE_LIMIT:
        return []
    from .response import t
    capacitance = derivation.case.system.parameters["capacitance"]
    return [(p.start, p.end, sympy.expand(capacitance * sympy.diff(p.expression(t), t)))
            for p in derivation.pieces]


def current_fields(derivation) -> dict[str, Any]:
    """``current`` of a series-rlc case: i(0) and i(t) = C·v′(t) on each interval (SI)."""
    if derivation.case.system.model != "series-rlc":
        return {}
    values = derivation.case.symbol_values()
    initial = derivation.case.initial
    capacitance = derivation.case.system.parameters["capacitance"]
    start = sympy.S.Zero if initial is None else capacitance * initial[1]
    return {"current": {
        "initial": _time_value(start, values), "unit": "A",
        "pieces": [{"start": _time_value(a, values), "end": _time_value(b, values),
                    "expr": str(expr)} for a, b, expr in current_pieces(derivation)]}}


def result_dictionary(derivation: Derivation) -> dict[str, Any]:
    """The JSON result contract (schema 1) of the design brief."""
    from . import quantities
    from .member_results import member_fields

    case = derivation.case
    values = case.symbol_values()
    results = derivation.numbers
    return _strict({
        "schema": 1,
        "title": case.title,
        "reference": case.reference,
        "tool_version": __version__,
        "status": derivation.status,
        "model": "member" if case.system.member is not None else case.system.model,
        "variable": {"name": derivation.model.variable,
                     "unit": quantities.si_unit_text(case.system.response_dimension)},
        "regime": derivation.model.regime,
        "until": _time_value(derivation.window.until, values),
        "pieces": [{"start": _time_value(p.start, values), "end": _time_value(p.end, values),
                    "expr": p.expression_text()} for p in derivation.pieces],
        "peak": _extreme(results.peak),
        "static": results.static,
        "dlf": results.dlf,
        **result_fields(results),
        **metric_fields(derivation.metrics),
        **current_fields(derivation),
        **(member_fields(derivation) if case.system.member is not None else {}),
        "warnings": list(derivation.warnings),
        "checks": [{"name": c.name, "passed": c.passed, "outcome": c.outcome, "detail": c.detail}
                   for c in derivation.checks],
    })

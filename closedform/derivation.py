"""The pipeline for one case: case → model → load terms → Laplace → pieces → results → checks.

``derive`` is a pure function of the ``Case``; the ``Derivation`` it returns holds every
intermediate value the sheet shows, so that nothing is re-derived while rendering.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

import sympy

from . import __version__
from .case import Case
from .energy import energy_checks
from .loads import LoadHistory, rewrite_loads
from .response import EXACT_BREAKPOINT_LIMIT, Solution, solve
from .results import Extreme, Results, evaluate_results, result_fields
from .systems import LinearModel, build_model
from .verify import Check, verify

DEFAULT_PERIODS = 5   # default window: last load end + this many slowest periods/time constants


@dataclass(frozen=True)
class Window:
    """The analysis window [0, until] and how it was chosen."""

    until: sympy.Expr
    note: str


@dataclass(frozen=True)
class Derivation:
    """Everything derived for one case, immutable."""

    case: Case
    model: LinearModel
    history: LoadHistory
    window: Window
    solution: Solution
    results: Results
    checks: tuple[Check, ...]
    warnings: tuple[str, ...] = ()

    @property
    def pieces(self):
        return self.solution.pieces

    @property
    def status(self) -> str:
        return "verified" if self.checks and all(c.passed for c in self.checks) else "failed"

    @property
    def passed(self) -> bool:
        return self.status == "verified"

    def to_dict(self) -> dict[str, Any]:
        return result_dictionary(self)

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2)

    def _repr_markdown_(self) -> str:
        from .render import render_markdown
        return render_markdown(self)


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


def derive(case: Case, *, time_budget: float | None = None) -> Derivation:
    """Derive, evaluate and check the response of one case.

    ``time_budget`` (seconds) bounds the whole derivation; past it a TimeBudgetExceeded
    names the stage that was running.
    """
    from .budget import time_budget as budget_for

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
        partial = Derivation(case, model, history, window, solution, results, ())
        with budget.stage("verification"):
            checks = tuple(verify(partial))
        with budget.stage("energy balance"):
            checks += tuple(energy_checks(partial))
    return Derivation(case, model, history, window, solution, results, checks,
                      window_warnings(case, window))


def window_warnings(case: Case, window: Window) -> tuple[str, ...]:
    """Loads that never act inside the analysis window (a warning, not an error)."""
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
    return tuple(warnings)


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


def result_dictionary(derivation: Derivation) -> dict[str, Any]:
    """The JSON result contract (schema 1) of the design brief."""
    from . import quantities

    case = derivation.case
    values = case.symbol_values()
    results = derivation.results
    return {
        "schema": 1,
        "title": case.title,
        "reference": case.reference,
        "tool_version": __version__,
        "status": derivation.status,
        "model": case.system.model,
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
        "warnings": list(derivation.warnings),
        "checks": [{"name": c.name, "passed": c.passed, "detail": c.detail}
                   for c in derivation.checks],
    }

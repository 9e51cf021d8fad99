"""Rendering: the derivation sheet from the Derivation's data and trace (Jinja2).

Nothing is derived here: expressions are only typeset (sympy.latex) and numbers formatted.
"""

from __future__ import annotations

from functools import cache
from typing import Any

import jinja2
import sympy

from . import __version__
from .laplace import s
from .response import t

FORMATS = ("md", "json")

CAUTION = ("This sheet supports, and does not replace, review by a qualified engineer "
           "under the applicable codes and local practice.")

ASSUMPTIONS = {
    "spring-mass-damper": ["linear elastic spring, lumped mass, small displacements",
                           "viscous (velocity-proportional) damping",
                           "load applied at the mass along the single degree of freedom"],
    "base-excitation": ["linear elastic spring, lumped mass, small displacements",
                        "viscous damping", "rigid support moving with the given acceleration",
                        "u is the displacement relative to the support"],
    "first-order": ["linear first-order lag with constant time constant and gain"],
    "series-rlc": ["linear, lumped, time-invariant R, L and C in series",
                   "ideal voltage source; v is the capacitor voltage"],
    "ode": ["linear ordinary differential equation with constant coefficients"],
}


@cache
def make_environment() -> jinja2.Environment:
    return jinja2.Environment(
        loader=jinja2.PackageLoader("closedform", "templates"),
        autoescape=False, keep_trailing_newline=True, trim_blocks=True, lstrip_blocks=True,
        undefined=jinja2.StrictUndefined)


def latex(expr: Any) -> str:
    return sympy.latex(expr, ln_notation=True)


def number(value: float | None, digits: int = 6) -> str:
    if value is None:
        return "—"
    return f"{value:.{digits}g}"


def exact_time(value: sympy.Expr | None) -> str:
    if value is None:
        return "\\infty"
    if value.free_symbols:
        return latex(value)
    return latex(value) if value.is_Rational else f"{float(sympy.N(value, 20)):.10g}"


def sheet_context(derivation) -> dict[str, Any]:
    case = derivation.case
    model = derivation.model
    solution = derivation.solution
    variable = sympy.Function(model.variable)(t)
    local = sympy.Symbol(r"\hat{t}")
    pieces = []
    for i, piece in enumerate(derivation.pieces, start=1):
        pieces.append({
            "number": i,
            "start": exact_time(piece.start),
            "end": exact_time(piece.end) if piece.end is not None else exact_time(derivation.window.until),
            "local": latex(piece.local.expression(local)),
            "shifted": piece.start != 0,
        })
    kernels = []
    for kernel in solution.kernels:
        inversion = kernel.inversion
        kernels.append({
            "name": kernel.name,
            "transform": latex(inversion.transform.expression()),
            "fractions": latex(sympy.Add(*[f.expression() for f in inversion.fractions])),
            "time": latex(inversion.time_function.expression(sympy.Symbol("t"))),
            "source": kernel.pair.source if kernel.pair else "",
            "pair_time": latex(kernel.pair.time_function) if kernel.pair else "",
            "pair_transform": latex(kernel.pair.transform) if kernel.pair else "",
        })
    rewrites = [{"load": r.load_number, "shape": r.shape, "rule": r.rule, "source": r.source,
                 "terms": latex(r.expression(sympy.Symbol("t")))}
                for r in derivation.history.rewrites]
    results = derivation.results
    failed = [c for c in derivation.checks if not c.passed]
    return {
        "case": case,
        "version": __version__,
        "status": derivation.status,
        "failed": failed,
        "checks": derivation.checks,
        "equation": model.equation,
        "ode": latex(sympy.Eq(sympy.Add(*[a * sympy.Derivative(variable, (t, model.order - i))
                                          if model.order - i else a * variable
                                          for i, a in enumerate(model.coefficients)]),
                              model.input_scale * sympy.Function(model.load_name)(t))),
        "parameters": [(name, latex(value)) for name, value in case.system.parameters.items()],
        "regime": model.regime,
        "initial": [latex(v) for v in case.initial] if case.initial is not None else None,
        "loads": [{"number": load.number, "shape": load.shape, "at": latex(load.at),
                   "values": ", ".join(f"{k} = {latex(v)}" for k, v in load.values.items()),
                   "repeat": load.repeat} for load in case.loads],
        "rewrites": rewrites,
        "load_total": latex(derivation.history.expression(sympy.Symbol("t"))),
        "transform": latex(sympy.Eq(sympy.Function("X")(s), solution.transform)),
        "initial_numerator": latex(solution.initial_numerator),
        "polynomial": latex(model.characteristic_polynomial()),
        "poles": [latex(p.root()) + (" (pair)" if p.is_pair else "") +
                  (f", multiplicity {p.multiplicity}" if p.multiplicity > 1 else "")
                  for p in model.poles],
        "free": latex(solution.free.time_function.expression(sympy.Symbol("t")))
        if solution.free else None,
        "kernels": kernels,
        "variable": model.variable,
        "pieces": pieces,
        "exact": solution.exact,
        "window": exact_time(derivation.window.until),
        "window_note": derivation.window.note,
        "peak": results.peak,
        "static": results.static,
        "dlf": results.dlf,
        "number": number,
        "assumptions": ASSUMPTIONS[case.system.model],
        "caution": CAUTION,
    }


def render_markdown(derivation) -> str:
    return make_environment().get_template("sheet.md.j2").render(sheet_context(derivation))


def render_outputs(derivation, formats, stem: str) -> dict[str, str | bytes]:
    """File name → content for every requested format (nothing is written here)."""
    contents: dict[str, str | bytes] = {}
    if "md" in formats:
        contents[f"{stem}.md"] = render_markdown(derivation)
    if "json" in formats:
        contents[f"{stem}.json"] = derivation.to_json() + "\n"
    return contents

"""Section: the problem — the model, its equation, parameters, symbols and initial values,
and the assumptions and caution the sheet states."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Any

from .. import models, quantities
from . import member, yielding
from .escaping import Math, with_subscripts
from .typesetting import as_factor, inline, typeset, unit_latex
from .units import RESPONSE_PREFER

if TYPE_CHECKING:
    from .context import Sheet

CAUTION = ("This sheet supports, and does not replace, review by a qualified engineer "
           "under the applicable codes and local practice.")

COMMON_ASSUMPTIONS = ["parameters constant in time; loads exactly as given in the case file",
                      "the results hold on the analysis window stated with them"]

DERIVATIVE_MARKS = {0: "{v}", 1: r"\dot{{{v}}}", 2: r"\ddot{{{v}}}"}
PARAMETER_SYMBOLS = {"mass": "m", "stiffness": "k", "damping": "c", "damping_ratio": r"\zeta",
                     "time_constant": r"\tau", "gain": "K", "inductance": "L",
                     "resistance": "R", "capacitance": "C", "initial_current": "i(0)"}
PARAMETER_DIMENSIONS = {"mass": "mass", "stiffness": "stiffness", "damping": "damping",
                        "damping_ratio": "dimensionless", "time_constant": "time",
                        "inductance": "inductance", "resistance": "resistance",
                        "capacitance": "capacitance", "initial_current": "current"}


def variable_mark(variable: str, order: int) -> str:
    """The ``order``-th derivative of the response as the sheet writes it: x, ẋ, ẍ, x⁽³⁾."""
    if order in DERIVATIVE_MARKS:
        return DERIVATIVE_MARKS[order].format(v=variable)
    return f"{variable}^{{({order})}}"


def equation_with_values(model) -> Math:
    """The model's equation with its coefficients written out."""
    left = []
    for i, a in enumerate(model.coefficients):
        order = model.order - i
        if a == 0:
            continue
        mark = variable_mark(model.variable, order)
        left.append(mark if a == 1 else rf"{as_factor(a)}\,{mark}")
    scale = model.input_scale
    load = rf"{model.load_name}(t)"
    right = load if scale == 1 else (rf"-{load}" if scale == -1 else rf"{as_factor(scale)}\,{load}")
    if getattr(model, "input_coefficients", ()):       # b_m f⁽ᵐ⁾ + … + b_0 f
        m = len(model.input_coefficients) - 1
        parts = []
        for i, b in enumerate(model.input_coefficients):
            if b == 0:
                continue
            mark = variable_mark(model.load_name, m - i) + ("(t)" if m - i == 0 else "")
            parts.append(mark if b == 1 else (f"-{mark}" if b == -1 else rf"{as_factor(b)}\,{mark}"))
        right = " + ".join(parts).replace("+ -", "- ")
    return Math(" + ".join(left).replace("+ -", "- ") + " = " + right)


def problem_context(sheet: Sheet) -> dict[str, Any]:
    case, model, units = sheet.case, sheet.model, sheet.units
    response_dimension, load_dimension = sheet.response_dimension, sheet.load_dimension
    parameters = []
    for name, value in case.system.parameters.items():
        if name in PARAMETER_DIMENSIONS:
            dimension = quantities.dimension(PARAMETER_DIMENSIONS[name])
        elif name == "gain":
            dimension = response_dimension / load_dimension
        else:
            dimension = quantities.dimension("dimensionless")
        si, shown = units.show(value, dimension, exact=True)
        symbol = PARAMETER_SYMBOLS.get(name) or re.sub(r"^([ab])(\d)$", r"\1_{\2}", name)
        parameters.append({"name": name.replace("_", " "), "symbol": inline(symbol),
                           "si": si, "shown": shown})
    symbols = [{"name": inline(typeset(d.symbol)),
                "unit": inline(unit_latex(d.unit)) if unit_latex(d.unit) else "1",
                "value": units.show(d.value, d.dimension, exact=True)[0]
                if d.value is not None else None}
               for d in case.symbols]
    initial = None
    if case.initial is not None:
        initial = []
        for i, value in enumerate(case.initial):
            si, shown = units.show(value, response_dimension / sheet.time_dimension**i,
                                   prefer=RESPONSE_PREFER if i == 0 else ("velocity",),
                                   exact=True)
            initial.append({"name": inline(variable_mark(model.variable, i) + "(0)"), "si": si,
                            "shown": shown})
    assumptions = list(models.get(case.system.model).assumptions_of(case.system)) \
        + COMMON_ASSUMPTIONS
    if member.is_member(sheet.derivation):      # a member as its equivalent oscillator
        assumptions = [*member.ASSUMPTIONS, *assumptions]
    if yielding.is_yielding(sheet.derivation):      # k·x becomes the resistance function R(x)
        equation = Math(yielding.EQUATIONS[case.system.model])
        values = yielding.equation_with_values(sheet.derivation)
        assumptions = yielding.assumptions(sheet.derivation, assumptions)
    else:
        equation, values = Math(model.equation), equation_with_values(model)
    assumptions = [with_subscripts(a, sheet.escape) for a in assumptions]   # R_y as R, y below
    return {
        "model": case.system.model,
        "equation": sheet.check.form(equation),
        "equation_values": sheet.check.form(values),
        "variable": inline(model.variable),
        "variable_name": Math(model.variable),
        "load_name": inline(rf"{model.load_name}(t)"),
        "regime": model.regime if model.regime != case.system.model else None,
        "regime_note": getattr(model, "regime_note", "") or None,
        "parameters": parameters,
        "symbols": symbols,
        "symbolic": case.is_symbolic,
        "initial": initial,
        "assumptions": assumptions,
        "caution": CAUTION,
    }

"""Section: the Laplace transform of the equation — P(s), Q(s), the load's transform, X(s)
and the poles."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import sympy

from .escaping import Math
from .typesetting import Display, available_width, display, inline, ordered_terms, typeset, visible_width

if TYPE_CHECKING:
    from .context import Sheet


def time_shift_source() -> str:
    from ..laplace import SOURCES
    return SOURCES.get("time shift", "")


def transform_context(sheet: Sheet) -> dict[str, Any]:
    model, solution, check = sheet.model, sheet.derivation.solution, sheet.check
    history = sheet.derivation.history
    load_transform_name = rf"\mathcal{{L}}\{{{model.load_name}\}}(s)"
    transform_short = typeset(solution.transform) if solution.transform is not None else None
    transform = {
        "polynomial": check.of_s("P(s)", model.characteristic_polynomial(), display(
            "P(s)", [typeset(t) for t in ordered_terms(model.characteristic_polynomial())])),
        "initial": check.of_s("Q(s)", solution.initial_numerator, display(
            "Q(s)", [typeset(t) for t in ordered_terms(solution.initial_numerator)])),
        "load": check.of_s("the load transform", solution.load_transform, display(
            load_transform_name, [typeset(t) for t in ordered_terms(solution.load_transform)]))
        if solution.load_transform is not None else None,
        "terms": len(history.terms) + len(history.impulses),
        "scale": typeset(model.input_scale),
        "full": check.of_s("X(s)", solution.transform, Display(Math("X(s)"), (transform_short,)))
        if transform_short is not None
        and visible_width(transform_short) <= available_width("X(s)") else None,
        "poles": [inline(typeset(p.root())) + Math(sheet.escape(
            (" and its conjugate" if p.is_pair else "")
            + (f", multiplicity {p.multiplicity}" if p.multiplicity > 1 else "")))
            for p in model.poles],
    }
    inputs = None
    if getattr(model, "input_coefficients", ()):       # derivatives of the input act
        from ..inputs import singular_parts
        polynomial = model.input_polynomial()
        time_symbol = sympy.Symbol("t")
        inputs = {
            "polynomial": check.of_s("B(s)", polynomial, display(
                "B(s)", [typeset(t) for t in ordered_terms(sympy.expand(polynomial))])),
            "load": Math(model.load_name),
            "singular": [{"at": inline(typeset(part.at)),
                          "part": inline(typeset(part.expression(time_symbol)))}
                         for part in singular_parts(model, history)],
        }
    return {"transform": transform, "inputs": inputs, "load_transform": Math(load_transform_name),
            "time_shift_source": time_shift_source()}

"""Units for display: SI beside the case's ``[report] units``, for display only."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import sympy

from .. import models, quantities
from .escaping import Math
from .typesetting import current_style, inline, is_short, number, typeset, with_unit

#: The ``[report] units`` keys a response is shown in, preferred in this order.
RESPONSE_PREFER = ("response", "displacement", "voltage", "current", "temperature")
#: The ``[report] units`` key of each model's load.
LOAD_PREFER = {"spring-mass-damper": ("force",), "base-excitation": ("acceleration",),
               "series-rlc": ("voltage",)}


def load_prefer(system) -> tuple[str, ...]:
    """The ``[report] units`` keys the load of ``system`` is shown in (a support
    displacement is a displacement, not an acceleration)."""
    definition = models.get(system.model)
    if definition.input_load_prefer and definition.input_coefficients(system):
        return definition.input_load_prefer
    return LOAD_PREFER.get(system.model, ())


@dataclass(frozen=True)
class DisplayUnit:
    """A unit from ``[report] units``: the text the user wrote and its exact SI factor."""

    key: str
    text: str
    factor: sympy.Expr
    dimension: Any


class Units:
    """SI and the case's ``[report] units`` side by side, for display only."""

    def __init__(self, case) -> None:
        self.values = case.symbol_values()
        self.units: list[DisplayUnit] = []
        for key in sorted(case.report.units):
            text = case.report.units[key]
            factor, dimension = quantities.unit_factor(text, key=f"report.units.{key}")
            self.units.append(DisplayUnit(key, text, factor, dimension))

    def unit_for(self, dimension: Any, prefer: Sequence[str] = ()) -> DisplayUnit | None:
        """The display unit for a dimension (preferring the named keys), None for SI."""
        matching = [u for u in self.units if u.dimension == dimension]
        for key in prefer:
            for unit in matching:
                if unit.key == key:
                    return unit
        return matching[0] if matching else None

    def float(self, value: Any) -> float | None:
        value = sympy.sympify(value).subs(self.values)
        if value.free_symbols:
            return None
        return float(sympy.N(value, 30))

    def show(self, value: Any, dimension: Any, prefer: Sequence[str] = (),
             exact: bool = False) -> tuple[Math, Math | None]:
        """(SI text, text in the report unit or None), as inline math.

        ``value`` is a float or a sympy expression; ``exact`` shows the exact SI value with
        its decimal value beside it when they differ.
        """
        si_unit = quantities.si_unit_text(dimension)
        if isinstance(value, float) or value is None:
            numeric = value
            exact_text = None
        else:
            expr = sympy.sympify(value)
            numeric = self.float(expr)
            style = current_style()
            exact = exact and (style.numbers == "exact"
                               or (style.numbers == "auto" and is_short(expr)))
            exact_text = typeset(expr) if ((exact and not expr.is_Integer) or numeric is None) \
                else None
        if numeric is None:
            return inline(with_unit(exact_text or "", si_unit)) if exact_text else None, None
        decimal = number(numeric)
        if exact_text is not None and exact_text != decimal:
            si = inline(with_unit(f"{exact_text} \\approx {decimal}", si_unit))
        else:
            si = inline(with_unit(decimal, si_unit))
        unit = self.unit_for(dimension, prefer)
        if unit is None:
            return si, None
        converted = numeric / float(sympy.N(unit.factor, 30))
        return si, inline(with_unit(number(converted), unit.text))


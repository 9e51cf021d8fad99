"""Section: the response interval by interval (one exponential polynomial in the local
time per interval, in SI and, where the case asks for it, in the report units)."""

from __future__ import annotations

from types import SimpleNamespace
from typing import TYPE_CHECKING, Any

import sympy

from .. import quantities
from .escaping import Math
from .layout import EXCERPT_HEAD, EXCERPT_LIMIT, EXCERPT_TAIL, excerpt
from .typesetting import (
    as_factor,
    available_width,
    current_style,
    decimal_float,
    display,
    grouped_terms,
    inline,
    polynomial_rows,
    shown_digits,
    typeset,
    unit_latex,
)
from .units import RESPONSE_PREFER, Units

if TYPE_CHECKING:
    from .context import Sheet

LESS = {True: r"\le", False: "<"}


def rounded_number(value: sympy.Expr, units: Units) -> sympy.Expr:
    """A rate or frequency in the report units, to the sheet's digits."""
    number_ = sympy.N(sympy.sympify(value).subs(units.values), 20)
    return sympy.S.Zero if number_ == 0 else decimal_float(number_, current_style().digits)


def current_display(sheet: Sheet, number: int, piece, end, local):
    """i(t̂) = C·v′(t̂) on one interval of a series-rlc case, registered for re-reading."""
    case = sheet.case
    if case.system.model != "series-rlc" or getattr(piece, "numeric", None) is not None:
        return None
    current = piece.local.derivative().scaled(case.system.parameters["capacitance"])
    shown = SimpleNamespace(numeric=None, local=current, start=piece.start)
    return sheet.check.piece(number, shown, end, display(
        "i(t)", grouped_terms(polynomial_rows(current), local, available_width("i(t)"))),
        tolerance=1e-9 if any(sympy.sympify(c).has(sympy.Float)
                              for c in current.terms.values()) else 1e-15, what="current")


def pieces_context(sheet: Sheet) -> dict[str, Any]:
    derivation, case, units, check = sheet.derivation, sheet.case, sheet.units, sheet.check
    escape, variable = sheet.escape, sheet.variable
    time_dimension, response_dimension = sheet.time_dimension, sheet.response_dimension
    local = sympy.Symbol(r"\hat{t}")
    response_unit = units.unit_for(response_dimension, RESPONSE_PREFER)
    time_unit = units.unit_for(time_dimension, ("time",))
    converted = (case.is_fully_valued and (response_unit is not None or time_unit is not None)
                 and (response_unit is None or response_unit.factor != 1
                      or time_unit is not None and time_unit.factor != 1))
    si_response_unit = quantities.si_unit_text(response_dimension)
    pieces = []
    for i, piece in excerpt(list(enumerate(derivation.pieces, start=1)), lambda omitted: None):
        end = piece.end if piece.end is not None else derivation.window.until
        last = piece.end is None
        start_si, start_shown = units.show(piece.start, time_dimension, ("time",), exact=True)
        end_si, end_shown = units.show(end, time_dimension, ("time",), exact=True)
        rows = polynomial_rows(piece.local)
        shift = "t" if piece.start == 0 else rf"t - {as_factor(piece.start) if not piece.start.is_Rational else typeset(piece.start)}"
        entry = {
            "number": i, "last": last,
            "interval": inline(rf"{typeset(piece.start)} \le t {LESS[last]} "
                               rf"{typeset(end)}"),
            "interval_shown": (Math(f"{start_shown} {escape('to')} {end_shown}")
                               if start_shown is not None and end_shown is not None else None),
            "local": inline(rf"\hat{{t}} = {shift}"),
            "si": check.piece(i, piece, end, display(
                rf"{variable}(t)", grouped_terms(rows, local, available_width(rf"{variable}(t)"))),
                tolerance=1e-9 if any(sympy.sympify(c).has(sympy.Float)
                                      for c in piece.local.terms.values()) else 1e-15),
            "shown": None,
            "current": current_display(sheet, i, piece, end, local),
        }
        if converted:
            rf = 1 / (response_unit.factor if response_unit else sympy.S.One)
            tf = time_unit.factor if time_unit else sympy.S.One
            shown_rows = []
            for power, rate, frequency, kind, coefficient in rows:
                value = sympy.N((coefficient * rf * tf**power).subs(units.values), 20)
                if value == 0:
                    continue
                shown_rows.append((power, rounded_number(rate * tf, units),
                                   rounded_number(frequency * tf, units),
                                   kind, decimal_float(value, current_style().digits)))
            response_text = response_unit.text if response_unit else si_response_unit
            time_text = time_unit.text if time_unit else "s"
            shown_lhs = rf"{variable}(t)\,[{unit_latex(response_text) or '1'}]"
            entry["shown"] = None if not shown_rows else check.piece(
                i, piece, end, display(shown_lhs, grouped_terms(shown_rows, local,
                                                                available_width(shown_lhs))),
                response_factor=rf, time_factor=tf, tolerance=10.0 ** (1 - current_style().digits),
                what="in report units")
            entry["shown_time"] = inline(rf"\hat{{t}}\,[{unit_latex(time_text)}]")
        pieces.append(entry)
        if len(derivation.pieces) > EXCERPT_LIMIT and i == EXCERPT_HEAD:
            pieces.append({"gap": Math(escape(
                f"Intervals {EXCERPT_HEAD + 1} to {len(derivation.pieces) - EXCERPT_TAIL} are "
                f"not printed; the coefficients of every interval are in {sheet.coefficient_file}."))})
    return {
        "exact": derivation.solution.exact and not any(
            sympy.sympify(c).has(sympy.Float) for p in derivation.pieces
            for c in p.local.terms.values()),
        "shown_digits": shown_digits(),
        "pieces": pieces,
        "converted": converted,
        "si_units": Math(f"{variable} {escape('in')} " + (
            inline(unit_latex(si_response_unit)) if unit_latex(si_response_unit)
            else escape("the case's units"))),
    }

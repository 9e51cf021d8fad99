"""The console's one-line figures of a derivation, rounded like the sheet."""

from __future__ import annotations

import sympy

from .. import quantities
from .units import RESPONSE_PREFER, Units


def plain_number(value: float, digits: int) -> str:
    """A float as plain text with ``digits`` significant digits (the console's form)."""
    text = f"{value:.{digits}g}"
    return "0" if text in ("0", "-0") else text


def summary_figures(derivation) -> list[str]:
    """The console's figures, in the report units and rounded like the sheet:
    ["peak 13.8231 mm at t = 29.1791 ms", "DLF 1.89446"]."""
    case = derivation.case
    results = derivation.numbers
    digits = case.report.digits
    units = Units(case)

    def shown(value: float, dimension, prefer) -> str:
        unit = units.unit_for(dimension, prefer)
        if unit is None:
            text = quantities.si_unit_text(dimension)
            return plain_number(value, digits) + ("" if text == "1" else f" {text}")
        return f"{plain_number(value / float(sympy.N(unit.factor, 30)), digits)} {unit.text}"

    figures = []
    peak = results.peak
    if peak is not None:
        figures.append(
            f"peak {shown(peak.value, case.system.response_dimension, RESPONSE_PREFER)} at "
            f"t = {shown(peak.time, quantities.dimension('time'), ('time',))}")
    if results.dlf is not None:
        figures.append(f"DLF {plain_number(results.dlf, digits)}")
    plastic = getattr(derivation, "plastic", None)
    if plastic is not None and plastic.ductility is not None:     # a yielding spring
        figures.append(f"ductility {plain_number(plastic.ductility.value, digits)}")
    return figures


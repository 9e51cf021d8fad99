"""The data files beside a sheet: the response sampled as CSV, and the coefficient file of
a long history (every load term and every interval's coefficients)."""

from __future__ import annotations

import math
from pathlib import Path

import sympy

from .. import plots, quantities
from ..errors import CaseError
from .units import Units

CSV_POINTS = 1000          # intervals of the CSV time grid


def render_coefficients(derivation) -> str:
    """Every load term and every interval's coefficients, SI, for long histories."""
    rows = ["# closedform: load terms c*g(t-a)*H(t-a) and J*delta(t-a), then the response on "
            "each interval as sum of coefficient * local_time^power * exp(rate*local_time) "
            "* cos|sin(frequency*local_time); SI units, local_time = t - start"]
    rows.append("kind,number,start_s,end_s,coefficient,power,rate_1_per_s,frequency_rad_per_s,"
                "function")
    values = derivation.case.symbol_values()

    def text(value) -> str:
        if isinstance(value, sympy.Float):
            return format(float(value), ".17g")
        value = sympy.sympify(value).subs(values)
        return format(float(sympy.N(value, 30)), ".17g") if not value.free_symbols else str(value)

    history = derivation.history
    for number, term in enumerate(history.terms, start=1):
        rows.append(f"load term,{number},{text(term.at)},,{text(term.coefficient)},"
                    f"{term.mode.power},{text(term.mode.rate)},{text(term.mode.frequency)},"
                    f"{term.mode.kind}")
    for number, impulse in enumerate(history.impulses, start=1):
        rows.append(f"impulse,{number},{text(impulse.at)},,{text(impulse.impulse)},,,,delta")
    for number, piece in enumerate(derivation.pieces, start=1):
        end = text(piece.end) if piece.end is not None else text(derivation.window.until)
        for mode in piece.local.modes():
            rows.append(f"interval,{number},{text(piece.start)},{end},"
                        f"{text(piece.local.terms[mode])},{mode.power},{text(mode.rate)},"
                        f"{text(mode.frequency)},{mode.kind}")
    return "\n".join(rows) + "\n"


def render_csv(derivation, points: int = CSV_POINTS) -> str:
    """The response sampled on an even grid over the window, SI, 17 significant digits."""
    case = derivation.case
    if not plots.plottable(derivation):
        raise CaseError("csv output needs a value for every symbol", file=Path(case.source).name,
                        key="symbols")
    units = Units(case)
    until = units.float(derivation.window.until)
    starts = [units.float(p.start) for p in derivation.pieces]
    functions = [p.numeric if getattr(p, "numeric", None) is not None else p.local.numeric(units.values)
                 for p in derivation.pieces]
    unit = quantities.si_unit_text(case.system.response_dimension)
    lines = [f"t [s],{derivation.model.variable} [{unit}]"]
    index = 0
    for k in range(points + 1):
        time = until * k / points
        while index + 1 < len(starts) and starts[index + 1] <= time:
            index += 1
        value = float(functions[index](time - starts[index]))
        # beyond the float range (an overflow, reported as a failed check): an empty field
        lines.append(f"{time:.17g},{value:.17g}" if math.isfinite(value) else f"{time:.17g},")
    return "\n".join(lines) + "\n"


"""A support that moves by a given displacement y(t) (base excitation, input =
"support-displacement"): the absolute displacement of the mass from the closed form.

The response is u, the displacement relative to the support, from m u″ + c u′ + k u = −m y″
(the derivatives of y enter the transform as s²Y(s); see inputs.py). The absolute
displacement is x = u + y: on each interval the engine's own piece of u plus the load's
piece of y (both exponential polynomials in the local time), and its peak is found like
every other peak, from the roots of the derivative (results.extreme_magnitude). The absolute
acceleration u″ + y″ = −(k u + c u′)/m and the force through spring and damper k u + c u′
are the quantities every base-excitation case reports already.
"""

from __future__ import annotations

from dataclasses import replace

from . import quantities
from .response import load_pieces
from .results import (
    Interval,
    QuantityPeak,
    Results,
    extreme_magnitude,
    linear_combination,
    numeric_intervals,
    piece_functions,
)

NAME = "peak_absolute_displacement"
TEXT = "absolute displacement of the mass x = u + y (support displaced by y)"


def moves_by_displacement(case) -> bool:
    return case.system.model == "base-excitation" and case.system.input == "support-displacement"


def absolute_intervals(case, history, solution, window) -> list[Interval]:
    """x = u + y on each interval (numeric, local time)."""
    values = case.symbol_values()
    starts = [piece.start for piece in solution.pieces]
    relative = numeric_intervals(piece_functions(solution.pieces), starts, window.until, values)
    support = numeric_intervals(load_pieces(history, starts, exact=solution.exact), starts,
                                window.until, values)
    return [Interval(u.start, u.end, linear_combination([(1, u.function), (1, y.function)]))
            for u, y in zip(relative, support)]


def with_absolute_displacement(results: Results, case, history, solution, window) -> Results:
    """The results with the peak absolute displacement added (support displacement only)."""
    if not moves_by_displacement(case):
        return results
    unit = quantities.si_unit_text(case.system.response_dimension)
    extreme = None
    if not case.is_symbolic or case.is_fully_valued:
        extreme = extreme_magnitude(absolute_intervals(case, history, solution, window))
    return replace(results, quantities=results.quantities + (QuantityPeak(NAME, TEXT, unit, extreme),))

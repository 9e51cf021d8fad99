"""What the piecewise-linear pulses share (rectangle, triangle, decay, trapezoid, table):
a step at every jump and a ramp at every change of slope of their corner points, the
area and centroid segment by segment."""

from __future__ import annotations

from collections.abc import Callable, Mapping

import sympy

from ..specs import LoadSpec
from . import Points, polyline_area_and_centroid
from .rules import RULES

RULE = RULES["piecewise-linear"]


def rewrite(points: Callable[[LoadSpec], Points]) -> Callable[[LoadSpec, sympy.Expr], list]:
    def terms(load: LoadSpec, start: sympy.Expr) -> list:
        from ..loads import piecewise_linear_terms  # the engine, only when rewriting
        return piecewise_linear_terms(points(load), start, load.number)
    return terms


def area_and_centroid(points: Callable[[LoadSpec], Points]
                      ) -> Callable[[LoadSpec, Mapping], tuple[sympy.Expr, sympy.Expr]]:
    return lambda load, values: polyline_area_and_centroid(points(load), values)

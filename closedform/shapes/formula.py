"""The formula load: f(τ) on 0 ≤ τ < d, a formula in τ of the whitelisted grammar whose
Laplace transform is rational (sums and products of powers, exp, sin, cos, sinh, cosh)."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

import sympy

from .. import quantities
from ..errors import CaseError
from ..expressions import parse_expression
from ..messages import toml_type
from ..specs import TAU, LoadSpec
from . import LoadReading, ShapeDefinition, centroid, register
from .rules import RULES


def read(reading: LoadReading) -> None:
    reading.duration()
    data, reader, key = reading.data, reading.reader, reading.key
    if "expr" not in data or not isinstance(data["expr"], str):
        raise reading.error("expr", "missing (a formula load needs expr, a string in tau)")
    scale = sympy.S.One
    if "unit" in data:
        if not isinstance(data["unit"], str):
            raise reading.error("unit", f"expected a unit string, got {toml_type(data['unit'])}")
        try:
            scale, dimension = quantities.unit_factor(data["unit"], key=f"{key}.unit")
        except CaseError as error:
            raise error.located(file=reader.file, key=f"{key}.unit",
                                line=reader.line_of(f"{key}.unit"))
        if dimension != reading.load_dimension:
            raise reading.error("unit", f"expected a unit of "
                                f"{quantities.describe(reading.load_dimension)}, got "
                                f"{quantities.describe(dimension)}")
    names = dict(reader.names)
    names["tau"] = TAU
    try:
        expression = parse_expression(data["expr"], names=names, key=f"{key}.expr")
    except CaseError as error:
        raise error.located(file=reader.file, key=f"{key}.expr",
                            line=reader.line_of(f"{key}.expr"))
    reading.expression = expression * scale


def rewrite(load: LoadSpec, start: sympy.Expr) -> list:
    from ..loads import exponential_polynomial_of, windowed_terms  # the engine, only
    shape = exponential_polynomial_of(load.expression, TAU, key=f"{load.key}.expr")
    return windowed_terms(shape, start, load.values["duration"], load.number)


def area_and_centroid(load: LoadSpec, values: Mapping) -> tuple[sympy.Expr, sympy.Expr]:
    """Integrated by sympy."""
    d = load.values["duration"]
    expression = load.expression.subs(values)
    area = sympy.integrate(expression, (TAU, 0, d.subs(values)))
    moment = sympy.integrate(TAU * expression, (TAU, 0, d.subs(values)))
    return centroid(area, moment)


DEFINITION = register(ShapeDefinition(
    name="formula",
    keys=("expr", "duration", "unit"),
    read=read,
    length=lambda load: load.values["duration"],
    corners=lambda load: 2,
    rule=RULES["window"],
    rewrite=rewrite,
    fields=MappingProxyType({"duration": "time"}),
    example=MappingProxyType({"shape": "formula", "expr": "2*exp(-tau/0.01)*sin(300*tau)",
                              "unit": "kN", "duration": "30 ms"}),
    pulse=True,
    area_and_centroid=area_and_centroid,
))

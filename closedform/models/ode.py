"""A linear ODE with constant coefficients: aₙx⁽ⁿ⁾ + … + a₁x′ + a₀x = f(t), order 1 to 4,
all dimensionless (the case's own consistent units)."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Any

import sympy

from .. import quantities
from ..messages import shown
from ..specs import SystemSpec, ValueReader
from . import ModelDefinition, register

NAME = "ode"


def read(reader: ValueReader, data: Mapping[str, Any]) -> SystemSpec:
    """coefficients = [aₙ, …, a₀], 2 to 5 numbers, aₙ ≠ 0; kept as a{n} … a0."""
    parameters: dict[str, sympy.Expr] = {}
    coefficients = data.get("coefficients")
    if not isinstance(coefficients, list) or not 2 <= len(coefficients) <= 5:
        raise reader.error("system.coefficients", "expected a list [a_n, …, a_0] of 2 to 5 "
                           f"numbers (order 1 to 4), got {shown(coefficients)}")
    values = []
    for i, item in enumerate(coefficients):
        values.append(reader.quantity(item, "dimensionless", f"system.coefficients[{i}]"))
    if values[0] == 0:
        raise reader.error("system.coefficients[0]", "the leading coefficient a_n must not be 0")
    for i, value in enumerate(values):
        parameters[f"a{len(values) - 1 - i}"] = value
    d = quantities.dimension
    return SystemSpec(NAME, MappingProxyType(parameters), data.get("regime"),
                      d("dimensionless"), d("dimensionless"))


def equation_of(p: Mapping[str, sympy.Expr]) -> tuple[tuple[sympy.Expr, ...], sympy.Expr]:
    order = len(p) - 1
    return tuple(p[f"a{order - i}"] for i in range(order + 1)), sympy.S.One


DEFINITION = register(ModelDefinition(
    name=NAME,
    keys=("model", "coefficients", "regime"),
    read=read,
    equation_of=equation_of,
    order=lambda system: len(system.parameters) - 1,
    equation=r"a_n x^{(n)} + \dots + a_1 \dot{x} + a_0 x = f(t)",
    variable="x",
    load_name="f",
    example=MappingProxyType({"model": NAME, "coefficients": [1, 3, 12, 10]}),
    assumptions=("linear ordinary differential equation with constant coefficients",
                 "coefficients, load and response in the consistent units the case gives"),
))

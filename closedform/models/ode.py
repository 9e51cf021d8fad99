"""A linear ODE with constant coefficients: aₙx⁽ⁿ⁾ + … + a₁x′ + a₀x = f(t), order 1 to 4,
all dimensionless (the case's own consistent units); with ``input_coefficients`` the
right-hand side is b_m f⁽ᵐ⁾ + … + b_0 f (m < n)."""

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
    if "input_coefficients" in data:
        parameters.update(input_coefficients(reader, data["input_coefficients"], len(values) - 1))
    d = quantities.dimension
    return SystemSpec(NAME, MappingProxyType(parameters), data.get("regime"),
                      d("dimensionless"), d("dimensionless"))


def input_coefficients(reader: ValueReader, data: Any, order: int) -> dict[str, sympy.Expr]:
    """input_coefficients = [b_m, …, b_0], m < n, kept as parameters b{m} … b0."""
    key = "system.input_coefficients"
    if not isinstance(data, list) or not data:
        raise reader.error(key, f"expected a list [b_m, …, b_0] of numbers, got {shown(data)}")
    if len(data) > order:
        raise reader.error(key, f"expected at most {order} input coefficients [b_m, …, b_0] "
                                f"with m < n = {order} (as many as the output's, or more, "
                                f"would put a Dirac impulse into x), got {len(data)}")
    values = [reader.quantity(item, "dimensionless", f"{key}[{i}]") for i, item in enumerate(data)]
    if values[0] == 0 and len(values) > 1:
        raise reader.error(f"{key}[0]", "the leading input coefficient b_m must not be 0 "
                                        "(leave it out)")
    if all(value == 0 for value in values):
        raise reader.error(key, "at least one input coefficient must not be 0")
    return {f"b{len(values) - 1 - i}": value for i, value in enumerate(values)}


def order(system: SystemSpec) -> int:
    return sum(1 for name in system.parameters if name[:1] == "a") - 1


def inputs(system: SystemSpec) -> tuple[sympy.Expr, ...]:
    """b_m … b_0 (empty without input_coefficients)."""
    p = system.parameters
    names = sorted((name for name in p if name[:1] == "b"), key=lambda n: -int(n[1:]))
    return tuple(p[name] for name in names)


def equation_of(p: Mapping[str, sympy.Expr]) -> tuple[tuple[sympy.Expr, ...], sympy.Expr]:
    """(aₙ … a₀) and b = 1, or b = b_0 where input coefficients are given (the static gain
    is then B(0)/a₀)."""
    n = sum(1 for name in p if name[:1] == "a") - 1
    return tuple(p[f"a{n - i}"] for i in range(n + 1)), p.get("b0", sympy.S.One)


DEFINITION = register(ModelDefinition(
    name=NAME,
    keys=("model", "coefficients", "regime", "input_coefficients"),
    read=read,
    equation_of=equation_of,
    order=order,
    inputs=inputs,
    input_equation=(r"a_n x^{(n)} + \dots + a_1 \dot{x} + a_0 x = b_m f^{(m)} + \dots + b_1 "
                    r"\dot{f} + b_0 f"),
    equation=r"a_n x^{(n)} + \dots + a_1 \dot{x} + a_0 x = f(t)",
    variable="x",
    load_name="f",
    example=MappingProxyType({"model": NAME, "coefficients": [1, 3, 12, 10]}),
    assumptions=("linear ordinary differential equation with constant coefficients",
                 "coefficients, load and response in the consistent units the case gives"),
))

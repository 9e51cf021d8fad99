"""The first-order lag: τ·y′ + y = K·u(t), u in the case's input unit, K its gain."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Any

import sympy

from .. import quantities
from ..messages import has_unit, toml_type
from ..specs import SystemSpec, ValueReader
from . import ModelDefinition, QuantityContext, QuantityDefinition, register, required

NAME = "first-order"


def read(reader: ValueReader, data: Mapping[str, Any]) -> SystemSpec:
    """τ > 0; the input's unit (dimensionless unless given) and the gain K ≠ 0, whose unit
    makes the response's (y in input unit × gain unit)."""
    parameters: dict[str, sympy.Expr] = {}
    parameters["time_constant"] = required(reader, data, NAME, "time_constant", "time")
    input_unit = data.get("input_unit", "1")
    if not isinstance(input_unit, str):
        raise reader.error("system.input_unit", "expected a unit string, "
                                                f"got {toml_type(input_unit)}")
    load_dim = reader.unit_dimension(input_unit, "system.input_unit")
    gain_dim = quantities.dimension("dimensionless")
    if "gain" in data:
        gain = data["gain"]
        if isinstance(gain, str) and has_unit(gain):
            gain_dim = reader.unit_dimension(gain.split(None, 1)[1], "system.gain")
        parameters["gain"] = reader.quantity(gain, gain_dim, "system.gain")
        if parameters["gain"] == 0:
            raise reader.error("system.gain", "must not be zero")
    else:
        parameters["gain"] = sympy.S.One
    return SystemSpec(NAME, MappingProxyType(parameters), data.get("regime"), load_dim,
                      load_dim * gain_dim)


def derived(context: QuantityContext) -> list[QuantityDefinition]:
    return [("peak_rate", "rate of change y′", context.unit(context.response / context.time),
             context.derivative(1))]


DEFINITION = register(ModelDefinition(
    name=NAME,
    keys=("model", "time_constant", "gain", "input_unit"),
    read=read,
    equation_of=lambda p: ((p["time_constant"], sympy.S.One), p["gain"]),
    order=lambda system: 1,
    equation=r"\tau\,\dot{y} + y = K\,u(t)",
    variable="y",
    load_name="u",
    example=MappingProxyType({"model": NAME, "time_constant": "40 ms", "gain": "2 K/V", "input_unit": "V"}),
    assumptions=("linear first-order lag with constant time constant and gain",),
    quantities=derived,
    residual_warning=False,
))

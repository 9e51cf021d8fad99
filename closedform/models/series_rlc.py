"""The series RLC circuit: L·C·v″ + R·C·v′ + v = v_s(t), v the capacitor voltage."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Any

import sympy

from .. import quantities
from ..specs import SystemSpec, ValueReader
from . import (
    ModelDefinition,
    QuantityContext,
    QuantityDefinition,
    register,
    required,
    second_order,
)

NAME = "series-rlc"


def read(reader: ValueReader, data: Mapping[str, Any]) -> SystemSpec:
    """L > 0, R ≥ 0 (0 unless given), C > 0; the inductor's initial_current if given."""
    parameters: dict[str, sympy.Expr] = {}
    parameters["inductance"] = required(reader, data, NAME, "inductance", "inductance")
    parameters["resistance"] = reader.non_negative(
        reader.quantity(data.get("resistance", 0), "resistance", "system.resistance"),
        "system.resistance", "resistance")
    parameters["capacitance"] = required(reader, data, NAME, "capacitance", "capacitance")
    if "initial_current" in data:      # i(0) = C·v′(0): folded into the initial values
        parameters["initial_current"] = reader.quantity(data["initial_current"], "current",
                                                        "system.initial_current")
    d = quantities.dimension
    return SystemSpec(NAME, MappingProxyType(parameters), data.get("regime"), d("voltage"),
                      d("voltage"))


def equation_of(p: Mapping[str, sympy.Expr]) -> tuple[tuple[sympy.Expr, ...], sympy.Expr]:
    one = sympy.S.One
    return (p["inductance"] * p["capacitance"], p["resistance"] * p["capacitance"], one), one


def derived(context: QuantityContext) -> list[QuantityDefinition]:
    capacitance = context.number(context.parameters["capacitance"])
    current = context.unit(quantities.dimension("current"))
    return [
        ("peak_current", "current i = C·v′", current,
         context.combination(0, capacitance) if capacitance is not None else None),
        ("peak_capacitor_voltage", "capacitor voltage v", context.unit(context.response),
         context.derivative(0)),
    ]


DEFINITION = register(ModelDefinition(
    name=NAME,
    keys=("model", "inductance", "resistance", "capacitance", "regime", "initial_current"),
    read=read,
    equation_of=equation_of,
    order=second_order,
    equation=r"L C\,\ddot{v} + R C\,\dot{v} + v = v_s(t)",
    variable="v",
    load_name="v_s",
    example=MappingProxyType({"model": NAME, "inductance": "20 mH", "resistance": "4 ohm", "capacitance": "50 uF"}),
    assumptions=("linear, lumped, time-invariant R, L and C in series",
                 "ideal voltage source; v is the capacitor voltage"),
    quantities=derived,
))

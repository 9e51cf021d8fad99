"""Base excitation: m·u″ + c·u′ + k·u = −m·a_g(t), u relative to a support that moves
with the acceleration a_g; with ``input = "support-displacement"`` the support moves by a
displacement y and m·u″ + c·u′ + k·u = −m·y″ (the derivatives of the input act)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace
from types import MappingProxyType
from typing import Any

import sympy

from .. import quantities
from ..messages import shown
from ..specs import SystemSpec, ValueReader
from . import ModelDefinition, mechanical, register, second_order

NAME = "base-excitation"
INPUTS = ("support-acceleration", "support-displacement")


def read(reader: ValueReader, data: Mapping[str, Any]) -> SystemSpec:
    """m, k, c as for every mechanical model; ``input`` the kind of support motion."""
    system = mechanical.read(reader, data, NAME, data.get("regime"), "acceleration")
    excitation = data.get("input", INPUTS[0])
    if excitation not in INPUTS:
        raise reader.error("system.input", f"unknown input {shown(excitation)} (expected "
                                           f"one of: {', '.join(INPUTS)})")
    if excitation == "support-displacement":
        return replace(system, load_dimension=quantities.dimension("length"), input=excitation)
    return system


def inputs(system: SystemSpec) -> tuple[sympy.Expr, ...]:
    """A support displacement y: m u″ + c u′ + k u = −m y″ (u relative to the support)."""
    if system.input == "support-displacement":
        return (-system.parameters["mass"], sympy.S.Zero, sympy.S.Zero)
    return ()


DEFINITION = register(ModelDefinition(
    name=NAME,
    keys=(*mechanical.KEYS, "input"),
    read=read,
    equation_of=lambda p: ((p["mass"], p["damping"], p["stiffness"]), -p["mass"]),
    order=second_order,
    equation=r"m\,\ddot{u} + c\,\dot{u} + k\,u = -m\,a_g(t)",
    variable="u",
    load_name="a_g",
    example=MappingProxyType({"model": NAME, "mass": "80 kg", "stiffness": "320 kN/m", "damping": "400 N*s/m"}),
    assumptions=(*mechanical.ASSUMPTIONS,
                 "viscous damping", "rigid support moving with the given acceleration",
                 "u is the displacement relative to the support"),
    quantities=lambda context: mechanical.derived(context, relative=True),
    mechanical=True,
    damping_ratio_poles=True,
    inputs=inputs,
    input_equation=r"m\,\ddot{u} + c\,\dot{u} + k\,u = -m\,\ddot{y}(t)",
    input_load_name="y",
    input_load_prefer=("displacement",),
    input_assumptions=(*mechanical.ASSUMPTIONS, "viscous damping",
                       "rigid support moving with the given displacement y(t), at rest before "
                       "t = 0",
                       "u is the displacement relative to the support; the absolute "
                       "displacement is u + y"),
))

"""Base excitation: m·u″ + c·u′ + k·u = −m·a_g(t), u relative to a support that moves
with the acceleration a_g."""

from __future__ import annotations

from types import MappingProxyType

from . import ModelDefinition, mechanical, register, second_order

NAME = "base-excitation"

DEFINITION = register(ModelDefinition(
    name=NAME,
    keys=mechanical.KEYS,
    read=lambda reader, data: mechanical.read(reader, data, NAME, data.get("regime"),
                                              "acceleration"),
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
))

"""The spring-mass-damper: m·x″ + c·x′ + k·x = F(t), a force on the mass."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from . import ModelDefinition, mechanical, register, second_order

NAME = "spring-mass-damper"

DEFINITION = register(ModelDefinition(
    name=NAME,
    keys=mechanical.KEYS,
    read=lambda reader, data: mechanical.read(reader, data, NAME, data.get("regime"), "force"),
    equation_of=lambda p: ((p["mass"], p["damping"], p["stiffness"]), sympy.S.One),
    order=second_order,
    equation=r"m\,\ddot{x} + c\,\dot{x} + k\,x = F(t)",
    variable="x",
    load_name="F",
    example=MappingProxyType({"model": NAME, "mass": "420 kg", "stiffness": "2.6 MN/m", "damping_ratio": 0.05}),
    assumptions=(*mechanical.ASSUMPTIONS,
                 "viscous (velocity-proportional) damping",
                 "load applied at the mass along the single degree of freedom"),
    quantities=lambda context: mechanical.derived(context, relative=False),
    mechanical=True,
    damping_ratio_poles=True,
))

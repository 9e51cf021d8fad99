"""What the two single-degree-of-freedom mechanical models share: mass, stiffness and
damping (or a damping ratio), read the same way, and the same derived quantities."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Any

import sympy

from .. import quantities
from ..resistance import read_resistance
from ..specs import SystemSpec, ValueReader
from . import QuantityContext, QuantityDefinition, required

KEYS = ("model", "mass", "stiffness", "damping", "damping_ratio", "regime", "resistance")
ASSUMPTIONS = ("linear elastic spring, lumped mass, small displacements",)


def read(reader: ValueReader, data: Mapping[str, Any], model: str, regime: str | None,
         load: str) -> SystemSpec:
    """m, k and c (c = 2ζ√(km) where the damping ratio ζ is given instead; 0 if neither),
    and the resistance function of a yielding spring where [system.resistance] is given."""
    parameters: dict[str, sympy.Expr] = {}
    parameters["mass"] = required(reader, data, model, "mass", "mass")
    parameters["stiffness"] = required(reader, data, model, "stiffness", "stiffness")
    if "damping" in data and "damping_ratio" in data:
        raise reader.error("system.damping_ratio", "give damping or damping_ratio, not both")
    if "damping" in data:
        parameters["damping"] = reader.non_negative(
            reader.quantity(data["damping"], "damping", "system.damping"), "system.damping",
            "damping")
    elif "damping_ratio" in data:
        ratio = reader.non_negative(reader.quantity(data["damping_ratio"], "dimensionless",
                                                    "system.damping_ratio"),
                                    "system.damping_ratio")
        parameters["damping_ratio"] = ratio
        parameters["damping"] = 2 * ratio * sympy.sqrt(parameters["stiffness"]
                                                        * parameters["mass"])
    else:
        parameters["damping"] = sympy.S.Zero
    d = quantities.dimension
    resistance = None
    if "resistance" in data:        # a yielding spring: [system.resistance] (issue 15)
        resistance = read_resistance(data["resistance"], model, parameters["stiffness"],
                                     reader.quantity, reader.error, reader.table)
    return SystemSpec(model, MappingProxyType(parameters), regime, d(load), d("length"),
                      resistance=resistance)


def derived(context: QuantityContext, *, relative: bool) -> list[QuantityDefinition]:
    """Velocity and acceleration of the response, spring force and support reaction (and,
    relative to a moving support, the absolute acceleration of the mass)."""
    m, c, k = (context.number(a) for a in context.coefficients)
    response, time, unit = context.response, context.time, context.unit
    first, second = context.derivative(1), context.derivative(2)
    combination = context.combination
    force = unit(quantities.dimension("force"))
    word = "relative " if relative else ""
    prefix = "peak_relative_" if relative else "peak_"
    definitions = [
        (f"{prefix}velocity", f"{word}velocity x′", unit(response / time), first),
        (f"{prefix}acceleration", f"{word}acceleration x″ (one-sided values at load "
         "steps; the Dirac part at an impulse is left out)", unit(response / time**2),
         second),
    ]
    if relative:
        definitions.append(
            ("peak_absolute_acceleration", "absolute acceleration of the mass, "
             "u″ + a_g = −(k·u + c·u′)/m", unit(response / time**2),
             combination(None if m is None else -k / m, None if m is None else -c / m)))
    where = "between mass and support" if relative else "on the support"
    definitions += [
        ("peak_spring_force", f"spring force k·x ({where})", force,
         combination(k, 0) if k is not None else None),
        ("peak_support_reaction", f"support reaction k·x + c·x′ ({where})", force,
         combination(k, c) if k is not None else None),
    ]
    return definitions

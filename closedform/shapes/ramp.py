"""The ramp: r·(t − a)·H(t − a), held at r·d after a duration d where one is given."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from . import LoadReading, ShapeDefinition, register
from .rules import RULES


def read(reading: LoadReading) -> None:
    if "rate" not in reading.data:
        raise reading.error("rate", "missing (a ramp load needs rate)")
    reading.values["rate"] = reading.quantity("rate", reading.load_dimension / reading.time)
    reading.duration(required=False)


def rewrite(load, start: sympy.Expr) -> list:
    from ..loads import RAMP, SingularityTerm  # the engine, only when rewriting
    v = load.values
    terms = [SingularityTerm(v["rate"], start, RAMP, load.number)]
    if "duration" in v:
        terms.append(SingularityTerm(-v["rate"], start + v["duration"], RAMP, load.number))
    return terms


DEFINITION = register(ShapeDefinition(
    name="ramp",
    keys=("rate", "duration"),
    read=read,
    length=lambda load: load.values.get("duration", sympy.S.Zero),
    corners=lambda load: 2,
    rule=RULES["ramp"],
    rewrite=rewrite,
    fields=MappingProxyType({"rate": "rate", "duration": "time"}),
    example=MappingProxyType({"shape": "ramp", "rate": "50 kN/s", "duration": "40 ms"}),
    endless=lambda values: "duration" not in values,
))

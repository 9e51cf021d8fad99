"""The step: A·H(t − a), from its start on for ever."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from ..specs import LoadSpec
from . import LoadReading, ShapeDefinition, register
from .rules import RULES


def read(reading: LoadReading) -> None:
    reading.amplitude_or_impulse(None)


def rewrite(load: LoadSpec, start: sympy.Expr) -> list:
    from ..loads import STEP, SingularityTerm  # the engine, only when rewriting
    return [SingularityTerm(load.values["amplitude"], start, STEP, load.number)]


DEFINITION = register(ShapeDefinition(
    name="step",
    keys=("amplitude",),
    read=read,
    length=lambda load: sympy.S.Zero,
    corners=lambda load: 1,
    rule=RULES["step"],
    rewrite=rewrite,
    fields=MappingProxyType({"amplitude": "load"}),
    example=MappingProxyType({"shape": "step", "amplitude": "2 kN", "at": "10 ms"}),
    endless=lambda values: True,
))

"""The impulse: J·δ(t − a)."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from ..specs import LoadSpec
from . import LoadReading, ShapeDefinition, register
from .rules import RULES


def read(reading: LoadReading) -> None:
    if "impulse" not in reading.data:
        raise reading.error("impulse", "missing (an impulse load needs impulse)")
    reading.values["impulse"] = reading.quantity("impulse",
                                                 reading.load_dimension * reading.time)


def rewrite(load: LoadSpec, start: sympy.Expr) -> list:
    from ..loads import ImpulseTerm  # the engine, only when rewriting
    return [ImpulseTerm(load.values["impulse"], start, load.number)]


DEFINITION = register(ShapeDefinition(
    name="impulse",
    keys=("impulse",),
    read=read,
    length=lambda load: sympy.S.Zero,
    corners=lambda load: 1,
    rule=RULES["impulse"],
    rewrite=rewrite,
    fields=MappingProxyType({"impulse": "impulse"}),
    example=MappingProxyType({"shape": "impulse", "impulse": "20 N*s", "at": "5 ms"}),
))

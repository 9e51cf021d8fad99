"""The rectangular pulse: A on 0 ≤ τ < d (area A·d)."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from ..specs import LoadSpec
from . import LoadReading, Points, ShapeDefinition, SpectrumEntry, polyline, register


def read(reading: LoadReading) -> None:
    reading.duration()
    reading.amplitude_or_impulse(reading.values["duration"])


def points(load: LoadSpec) -> Points:
    a, d = load.values["amplitude"], load.values["duration"]
    return ((sympy.S.Zero, a), (d, a))


DEFINITION = register(ShapeDefinition(
    name="rectangle",
    keys=("duration", "amplitude", "impulse"),
    read=read,
    length=lambda load: load.values["duration"],
    corners=lambda load: 2,
    rule=polyline.RULE,
    rewrite=polyline.rewrite(points),
    fields=MappingProxyType({"amplitude": "load", "impulse": "impulse", "duration": "time"}),
    example=MappingProxyType({"shape": "rectangle", "amplitude": "3 kN", "duration": "20 ms"}),
    pulse=True,
    area_and_centroid=polyline.area_and_centroid(points),
    points=points,
    spectrum=SpectrumEntry(lambda pulse, d: {"duration": d, "amplitude": sympy.S.One},
                           lambda pulse: "rectangle"),
))

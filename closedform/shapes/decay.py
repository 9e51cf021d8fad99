"""The decaying triangle: A·(1 − τ/d) on 0 ≤ τ < d, its peak at the start (area A·d/2)."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from ..specs import LoadSpec
from . import LoadReading, Points, ShapeDefinition, SpectrumEntry, polyline, register


def read(reading: LoadReading) -> None:
    reading.duration()
    reading.amplitude_or_impulse(sympy.Rational(1, 2) * reading.values["duration"])


def points(load: LoadSpec) -> Points:
    a, d = load.values["amplitude"], load.values["duration"]
    return ((sympy.S.Zero, a), (d, sympy.S.Zero))


DEFINITION = register(ShapeDefinition(
    name="decay",
    keys=("duration", "amplitude", "impulse"),
    read=read,
    length=lambda load: load.values["duration"],
    corners=lambda load: 2,
    rule=polyline.RULE,
    rewrite=polyline.rewrite(points),
    fields=MappingProxyType({"amplitude": "load", "impulse": "impulse", "duration": "time"}),
    example=MappingProxyType({"shape": "decay", "impulse": "40 N*s", "duration": "15 ms"}),
    pulse=True,
    area_and_centroid=polyline.area_and_centroid(points),
    points=points,
    spectrum=SpectrumEntry(lambda pulse, d: {"duration": d, "amplitude": sympy.S.One},
                           lambda pulse: "decaying triangle (peak at the start)"),
))

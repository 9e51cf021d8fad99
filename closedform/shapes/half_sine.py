"""The half-sine pulse: A·sin(πτ/d) on 0 ≤ τ < d (area 2Ad/π, centroid d/2)."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

import sympy

from ..specs import LoadSpec
from . import LoadReading, ShapeDefinition, SpectrumEntry, register
from .rules import RULES


def read(reading: LoadReading) -> None:
    reading.duration()
    reading.amplitude_or_impulse(2 / sympy.pi * reading.values["duration"])


def rewrite(load: LoadSpec, start: sympy.Expr) -> list:
    from ..basis import SIN, BasisTerm, ExponentialPolynomial  # the engine, only
    from ..loads import windowed_terms  # when rewriting
    v = load.values
    omega = sympy.pi / v["duration"]
    shape = ExponentialPolynomial.single(BasisTerm(0, sympy.S.Zero, omega, SIN), v["amplitude"])
    return windowed_terms(shape, start, v["duration"], load.number)


def area_and_centroid(load: LoadSpec, values: Mapping) -> tuple[sympy.Expr, sympy.Expr]:
    d, amplitude = load.values["duration"], load.values["amplitude"]
    return (2 * amplitude * d / sympy.pi).subs(values), (d / 2).subs(values)


DEFINITION = register(ShapeDefinition(
    name="half-sine",
    keys=("duration", "amplitude", "impulse"),
    read=read,
    length=lambda load: load.values["duration"],
    corners=lambda load: 2,
    rule=RULES["window"],
    rewrite=rewrite,
    fields=MappingProxyType({"amplitude": "load", "impulse": "impulse", "duration": "time"}),
    example=MappingProxyType({"shape": "half-sine", "amplitude": "5 kN", "duration": "25 ms"}),
    pulse=True,
    area_and_centroid=area_and_centroid,
    spectrum=SpectrumEntry(lambda pulse, d: {"duration": d, "amplitude": sympy.S.One},
                           lambda pulse: "half-sine"),
))

"""The triangular pulse: 0 at the start, A at p·d, 0 at d (area A·d/2)."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from ..messages import plain
from ..specs import LoadSpec
from . import LoadReading, Points, ShapeDefinition, SpectrumEntry, polyline, register


def read(reading: LoadReading) -> None:
    reading.duration()
    key = f"{reading.key}.peak_at"
    peak_at = reading.reader.quantity(reading.data.get("peak_at", "0.5"), "dimensionless", key)
    if peak_at.is_negative or (peak_at - 1).is_positive:
        raise reading.error("peak_at", "must lie between 0 and 1 (expected a fraction of the "
                                       f"duration, got {plain(peak_at)})")
    reading.values["peak_at"] = peak_at
    reading.amplitude_or_impulse(sympy.Rational(1, 2) * reading.values["duration"])


def points(load: LoadSpec) -> Points:
    v = load.values
    a, d, p = v["amplitude"], v["duration"], v["peak_at"]
    zero = sympy.S.Zero
    return ((zero, zero), (p * d, a), (d, zero))


def spectrum_values(pulse, d: sympy.Expr) -> dict:
    return {"duration": d, "amplitude": sympy.S.One, "peak_at": pulse.peak_at}


DEFINITION = register(ShapeDefinition(
    name="triangle",
    keys=("duration", "amplitude", "impulse", "peak_at"),
    read=read,
    length=lambda load: load.values["duration"],
    corners=lambda load: 3,
    rule=polyline.RULE,
    rewrite=polyline.rewrite(points),
    fields=MappingProxyType({"amplitude": "load", "impulse": "impulse", "duration": "time",
                             "peak_at": "dimensionless"}),
    example=MappingProxyType({"shape": "triangle", "amplitude": "4 kN", "duration": "30 ms",
                              "peak_at": 0.25}),
    pulse=True,
    area_and_centroid=polyline.area_and_centroid(points),
    points=points,
    spectrum=SpectrumEntry(
        spectrum_values,
        lambda pulse: f"triangle, peak at {float(pulse.peak_at):g} of the duration",
        lambda pulse: {"peak_at": float(pulse.peak_at)}),
))

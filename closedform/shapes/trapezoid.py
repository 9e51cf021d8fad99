"""The trapezoidal pulse: a rise to A, a hold at A and a fall back to 0."""

from __future__ import annotations

from types import MappingProxyType

import sympy

from ..specs import LoadSpec
from . import LoadReading, Points, ShapeDefinition, SpectrumEntry, polyline, register


def read(reading: LoadReading) -> None:
    values = reading.values
    for name in ("rise", "hold", "fall"):
        if name not in reading.data:
            raise reading.error(name, f"missing (a trapezoid load needs {name})")
        values[name] = reading.reader.non_negative(reading.quantity(name, reading.time),
                                                   f"{reading.key}.{name}", reading.time)
    if (values["rise"] + values["hold"] + values["fall"]).is_zero:
        raise reading.error("hold", "rise + hold + fall must be positive (expected a pulse "
                                    "that lasts, got 0 s in all)")
    reading.amplitude_or_impulse(None)


def points(load: LoadSpec) -> Points:
    v = load.values
    a, rise, hold, fall = v["amplitude"], v["rise"], v["hold"], v["fall"]
    zero = sympy.S.Zero
    return ((zero, zero), (rise, a), (rise + hold, a), (rise + hold + fall, zero))


def spectrum_values(pulse, d: sympy.Expr) -> dict:
    return {"rise": pulse.rise * d, "hold": pulse.hold * d, "fall": pulse.fall * d,
            "amplitude": sympy.S.One}


def describe(pulse) -> str:
    return (f"trapezoid, rise {float(pulse.rise):g}, hold {float(pulse.hold):g}, "
            f"fall {float(pulse.fall):g} of the duration")


DEFINITION = register(ShapeDefinition(
    name="trapezoid",
    keys=("rise", "hold", "fall", "amplitude"),
    read=read,
    length=lambda load: load.values["rise"] + load.values["hold"] + load.values["fall"],
    corners=lambda load: 4,
    rule=polyline.RULE,
    rewrite=polyline.rewrite(points),
    fields=MappingProxyType({"amplitude": "load", "rise": "time", "hold": "time",
                             "fall": "time"}),
    example=MappingProxyType({"shape": "trapezoid", "amplitude": "2 kN", "rise": "5 ms",
                              "hold": "10 ms", "fall": "8 ms"}),
    pulse=True,
    area_and_centroid=polyline.area_and_centroid(points),
    points=points,
    spectrum=SpectrumEntry(
        spectrum_values, describe,
        lambda pulse: {"rise": float(pulse.rise), "hold": float(pulse.hold),
                       "fall": float(pulse.fall)}),
))

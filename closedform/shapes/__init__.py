"""The load-shape registry: one module per shape, each holding one ``ShapeDefinition``.

A definition is everything the engine side knows about a shape in one place: the keys of
its [[load]] table and how they are read and validated (with their dimensions), how long
one occurrence lasts and how many breakpoints it brings, the rewrite rule (text and
published source) and the rewrite of one occurrence into singularity terms, the area and
centroid of a pulse (for the impulse idealization), the fields a sheet prints, and the
entry of the ``spectrum`` command where the shape has one. Case reading (``case``), the
load rewrite (``loads``), ``results`` and ``shock`` look a shape up here by its name.

The independent checks do not: they evaluate each shape from its definition with their
own load evaluator, so a shape the checks do not know is reported by them, never passed.

A new shape is one new module here that calls ``register`` (see DEVELOPERS.md). A
definition may also be registered from outside the package (a test does so).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import sympy

from .. import quantities
from ..catalogue import Catalogue
from ..specs import LoadSpec, ValueReader

Points = tuple[tuple[sympy.Expr, sympy.Expr], ...]


class LoadReading:
    """One [[load]] table being read: the reader, the table, its key, and the values, points
    and expression the shape's ``read`` fills in (exact SI)."""

    def __init__(self, reader: ValueReader, data: Mapping[str, Any], key: str, shape: str,
                 load_dimension: Any) -> None:
        self.reader = reader
        self.data = data
        self.key = key
        self.shape = shape
        self.load_dimension = load_dimension
        self.time = quantities.dimension("time")
        self.values: dict[str, sympy.Expr] = {}
        self.points: Points = ()
        self.expression: sympy.Expr | None = None

    def error(self, name: str, message: str) -> Exception:
        return self.reader.error(f"{self.key}.{name}", message)

    def quantity(self, name: str, dimension: Any) -> sympy.Expr:
        return self.reader.quantity(self.data[name], dimension, f"{self.key}.{name}")

    def duration(self, name: str = "duration", required: bool = True) -> None:
        """A positive time (missing: an error if ``required``)."""
        if name not in self.data:
            if required:
                raise self.error(name, f"missing (a {self.shape} load needs {name})")
            return
        self.values[name] = self.reader.positive(self.quantity(name, self.time),
                                                 f"{self.key}.{name}", "a positive time",
                                                 self.time)

    def amplitude_or_impulse(self, area_factor: sympy.Expr | None) -> None:
        """The amplitude, or (where ``area_factor`` = area / amplitude is given) the impulse,
        from which the amplitude is worked out."""
        data = self.data
        has_amplitude, has_impulse = "amplitude" in data, "impulse" in data
        if has_amplitude and has_impulse:
            raise self.error("impulse", "give amplitude or impulse, not both")
        if has_amplitude:
            self.values["amplitude"] = self.quantity("amplitude", self.load_dimension)
        elif has_impulse and area_factor is not None:
            impulse = self.quantity("impulse", self.load_dimension * self.time)
            self.values["impulse"] = impulse
            self.values["amplitude"] = sympy.simplify(impulse / area_factor)
        else:
            what = "amplitude or impulse" if area_factor is not None else "amplitude"
            raise self.error("amplitude", f"missing (a {self.shape} load needs {what})")


@dataclass(frozen=True)
class SpectrumEntry:
    """A shape's place in the ``spectrum`` command: the load of a pulse of peak 1 lasting
    ``duration`` (from the pulse's fractions), its description and its JSON parameters."""

    values: Callable[[Any, sympy.Expr], dict[str, sympy.Expr]]
    describe: Callable[[Any], str]
    parameters: Callable[[Any], dict] = lambda pulse: {}


@dataclass(frozen=True)
class ShapeDefinition:
    """One load shape (see the module docstring).

    ``read`` fills a ``LoadReading``; ``length(load)`` is how long one occurrence acts (0
    for steps, impulses and open ramps); ``corners(load)`` how many breakpoints it brings
    (start, corners, end); ``rule`` the rewrite rule (text, source) and ``rewrite(load,
    start)`` the singularity terms of one occurrence starting at ``start``. ``fields`` are
    the values a sheet prints, with the kind of each (load, impulse, rate, time or
    dimensionless). A pulse (``pulse``) has ``area_and_centroid(load, values)``; a
    polyline also ``points(load)``, its corner points. ``endless(values)``: the load never
    ends (and so cannot repeat). ``example``: a [[load]] table of this shape for a force
    load, used by the tests.
    """

    name: str
    keys: tuple[str, ...]
    read: Callable[[LoadReading], None]
    length: Callable[[LoadSpec], sympy.Expr]
    corners: Callable[[LoadSpec], int]
    rule: tuple[str, str]
    rewrite: Callable[[LoadSpec, sympy.Expr], list]
    fields: Mapping[str, str]
    example: Mapping[str, Any]
    pulse: bool = False
    area_and_centroid: Callable[[LoadSpec, Mapping], tuple[sympy.Expr, sympy.Expr]] | None = None
    points: Callable[[LoadSpec], Points] | None = None
    endless: Callable[[Mapping[str, sympy.Expr]], bool] = lambda values: False
    spectrum: SpectrumEntry | None = None


BUILT_IN = ("step", "ramp", "impulse", "rectangle", "triangle", "decay", "half_sine",
            "trapezoid", "table", "formula")
#: The keys every [[load]] table may have, whatever its shape.
COMMON_KEYS = ("shape", "at", "repeat", "label")


def _validate(definition: ShapeDefinition) -> None:
    if definition.pulse and definition.area_and_centroid is None:
        raise ValueError(f"pulse shape {definition.name!r} needs its area and centroid")


CATALOGUE: Catalogue[ShapeDefinition] = Catalogue("shape", BUILT_IN, _validate)
register = CATALOGUE.register        # a definition module ends in register(ShapeDefinition(…))
unregister = CATALOGUE.unregister    # (tests) remove a shape registered from outside
names = CATALOGUE.names              # every registered shape, built-in ones first
get = CATALOGUE.get
known = CATALOGUE.known
close_match = CATALOGUE.close_match


def centroid(area: sympy.Expr, moment: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr]:
    """(area, moment / area); a pulse of zero area has no centroid (nan)."""
    if area == 0:
        return sympy.S.Zero, sympy.nan
    return area, moment / area


def polyline_area_and_centroid(points: Points, values: Mapping) -> tuple[sympy.Expr, sympy.Expr]:
    """∫ f dτ and the centroid ∫ τ f dτ / ∫ f dτ of a polyline, exact, segment by segment:
    ∫ f = (f₀ + f₁)(τ₁ − τ₀)/2 and ∫ τ f = (τ₁ − τ₀)(τ₀(2f₀ + f₁) + τ₁(f₀ + 2f₁))/6."""
    points = [(sympy.sympify(t), sympy.sympify(f)) for t, f in points]
    if all(t.is_Rational and f.is_Rational for t, f in points):
        # a table's rows: integers over common denominators T and F (t = τ/T, f = φ/F),
        # exact, without sympy's cost per operation
        times_q = math.lcm(*(int(t.q) for t, _f in points))
        values_q = math.lcm(*(int(f.q) for _t, f in points))
        area, moment = _polygon_sums([(int(t.p) * (times_q // int(t.q)),
                                       int(f.p) * (values_q // int(f.q))) for t, f in points])
        return centroid(sympy.Rational(area, 2 * times_q * values_q),
                        sympy.Rational(moment, 6 * times_q * times_q * values_q))
    area, moment = _polygon_sums([(t.subs(values), f.subs(values)) for t, f in points])
    return centroid(area / 2, moment / 6)


def _polygon_sums(points: Sequence[tuple[Any, Any]]) -> tuple[Any, Any]:
    """(2·∫ f dτ, 6·∫ τ f dτ) of the polyline through the points (no division, so that it
    stays in integers for integer points)."""
    area = moment = 0
    for (t0, f0), (t1, f1) in zip(points, points[1:]):
        area += (f0 + f1) * (t1 - t0)
        moment += (t1 - t0) * (t0 * (2 * f0 + f1) + t1 * (f0 + 2 * f1))
    return area, moment


CATALOGUE.load(__name__, __path__)

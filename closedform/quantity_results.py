"""The results of a derivation as pint quantities, by their JSON names, for use from Python.

``Derivation.results`` is a :class:`ResultQuantities`: every result field of the JSON
result (``peak``, ``static``, ``dlf``, ``peak_spring_force``, ``residual``, …) is an
attribute of the same name. Scalars are pint quantities in SI, extremes are
:class:`Extreme` (a value and the time it is reached, both quantities), and a field that is
null in the JSON (a symbolic case without values) is ``None``.

The quantities belong to :func:`unit_registry`, one float registry for every result, so
results of different derivations can be added, compared and converted together. (The
registry that reads case files, ``closedform.quantities.registry()``, keeps exact fraction
factors; pint cannot print units with powers from a fraction registry on Python 3.11, so
results live in a float registry of their own.)
"""

from __future__ import annotations

import functools
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from typing import Any


@functools.cache
def unit_registry():
    """The pint unit registry every result quantity belongs to (float magnitudes).

    Returns
    -------
    pint.UnitRegistry
        The same registry on every call; build quantities to compare with results from it.

    Examples
    --------
    >>> units = unit_registry()
    >>> units.Quantity(2.5, "kN").to("N")
    <Quantity(2500.0, 'newton')>
    >>> unit_registry() is units
    True
    """
    import pint

    return pint.UnitRegistry()


def quantity(value: float | None, unit: str):
    """``value`` in ``unit`` (SI unit text as in the JSON, ``"1"`` for a pure number), or
    None for a null field.

    Examples
    --------
    >>> quantity(0.012, "m").to("mm")
    <Quantity(12.0, 'millimeter')>
    >>> quantity(None, "m") is None
    True
    """
    if value is None:
        return None
    units = unit_registry()
    return units.Quantity(float(value), "dimensionless" if unit in ("", "1") else unit)


@dataclass(frozen=True)
class Extreme:
    """A signed extreme value and the earliest time its magnitude is reached.

    ``to``, ``magnitude`` and ``units`` are those of ``value``, so an extreme converts
    like a quantity: ``d.results.peak_spring_force.to("kN")`` is the peak force in kN.

    Parameters
    ----------
    value : pint.Quantity
        The value at the extreme (signed).
    time : pint.Quantity
        The time it is reached, in seconds.

    Examples
    --------
    >>> peak = Extreme(quantity(-0.004, "m"), quantity(0.031, "s"))
    >>> peak.to("mm").magnitude
    -4.0
    >>> peak.time.to("ms").magnitude
    31.0
    """

    value: Any
    time: Any

    def to(self, unit: str):
        """The value in ``unit`` (a pint quantity)."""
        return self.value.to(unit)

    @property
    def magnitude(self) -> float:
        return self.value.magnitude

    @property
    def units(self):
        return self.value.units

    def __str__(self) -> str:
        return f"{self.value} at {self.time}"


@dataclass(frozen=True)
class Residual:
    """Amplitude of the free vibration left after the last load has ended, and when that
    free vibration starts; ``to`` converts the amplitude.

    Parameters
    ----------
    amplitude : pint.Quantity
        The amplitude (JSON ``residual.amplitude``).
    after : pint.Quantity
        The time the last load ends (JSON ``residual.after``).
    """

    amplitude: Any
    after: Any

    def to(self, unit: str):
        """The amplitude in ``unit``."""
        return self.amplitude.to(unit)


@dataclass(frozen=True)
class RiseTime:
    """Rise time from 10 % to 90 % of the final value (JSON ``rise_time``): ``value`` and the
    times ``start`` and ``end`` it runs between; ``to`` converts the value."""

    value: Any
    start: Any
    end: Any

    def to(self, unit: str):
        return self.value.to(unit)

    def __str__(self) -> str:
        return f"{self.value} from {self.start} to {self.end}"


@dataclass(frozen=True)
class SettlingTime:
    """Settling time into the band (JSON ``settling_time``): ``value`` (None when not
    established), the relative ``band``, ``established`` and the ``note`` saying how."""

    value: Any
    band: float
    established: bool
    note: str

    def to(self, unit: str):
        return None if self.value is None else self.value.to(unit)

    def __str__(self) -> str:
        return f"{self.value} ({self.note})"


@dataclass(frozen=True)
class ImpulseIdealization:
    """One pulse replaced by an impulse of its area at its centroid (JSON
    ``impulse_idealization`` entries, with quantities for the numbers that have units)."""

    load: int
    shape: str
    start: Any
    duration: Any
    duration_ratio: float
    area: Any
    centroid: Any
    impulse_peak: Extreme | None
    pulse_peak: Extreme | None
    relative_error: float | None


def _extreme(field: Mapping[str, Any] | None, unit: str) -> Extreme | None:
    if field is None:
        return None
    return Extreme(quantity(field["value"], field.get("unit", unit)), quantity(field["time"], "s"))


def _idealization(entry: Mapping[str, Any]) -> ImpulseIdealization:
    return ImpulseIdealization(
        entry["load"], entry["shape"], quantity(entry["start"], "s"),
        quantity(entry["duration"], "s"), entry["duration_ratio"],
        quantity(entry["area"], entry["area_unit"]), quantity(entry["centroid"], "s"),
        _extreme(entry["impulse_peak"], ""), _extreme(entry["pulse_peak"], ""),
        entry["relative_error"])


class ResultQuantities:
    """Every result of a derivation by its JSON name, as pint quantities (read only).

    Built from the JSON result fields: ``peak`` and every ``peak_…`` field are
    :class:`Extreme`; ``static`` and ``until`` are quantities; ``dlf`` is a dimensionless
    quantity; where the response has a final value, ``final_value`` is a quantity,
    ``rise_time`` a :class:`RiseTime`, ``settling_time`` a :class:`SettlingTime` and
    ``overshoot`` an :class:`Extreme` in percent;
    ``residual`` is a :class:`Residual`; ``impulse_idealization`` a tuple of
    :class:`ImpulseIdealization`. A field that is null in the JSON is ``None``. An unknown
    name raises AttributeError listing the names there are; ``dir()`` lists them too.

    Parameters
    ----------
    fields : Mapping
        The JSON result dictionary (``Derivation.to_dict()`` or a part of it holding at
        least the result fields and ``variable``).

    Examples
    --------
    >>> results = ResultQuantities({"variable": {"name": "x", "unit": "m"},
    ...                             "peak": {"value": 0.012, "time": 0.05},
    ...                             "static": 0.01, "dlf": 1.2})
    >>> results.peak.to("mm").magnitude
    12.0
    >>> round(results.dlf.magnitude, 6)
    1.2
    >>> results.names()
    ('dlf', 'peak', 'static')
    """

    _FIELDS = ("until", "peak", "static", "dlf", "residual", "impulse_idealization")

    def __init__(self, fields: Mapping[str, Any]) -> None:
        unit = fields.get("variable", {}).get("unit", "1")
        values: dict[str, Any] = {}
        for name, field in fields.items():
            if name == "until":
                values[name] = field if isinstance(field, str) else quantity(field, "s")
            elif name == "peak":
                values[name] = _extreme(field, unit)
            elif name == "static":
                values[name] = quantity(field, unit)
            elif name == "dlf":
                values[name] = quantity(field, "1")
            elif name == "residual":
                values[name] = None if field is None else Residual(
                    quantity(field["amplitude"], field["unit"]), quantity(field["after"], "s"))
            elif name == "impulse_idealization":
                values[name] = tuple(_idealization(entry) for entry in field)
            elif name == "final_value":
                values[name] = quantity(field, unit)
            elif name == "rise_time":
                values[name] = None if field is None else RiseTime(
                    quantity(field["value"], "s"), quantity(field["start"], "s"),
                    quantity(field["end"], "s"))
            elif name == "settling_time":
                values[name] = SettlingTime(
                    None if field["value"] is None else quantity(field["value"], "s"),
                    field["band"], field["established"], field["note"])
            elif name == "overshoot":
                values[name] = None if field is None else Extreme(
                    quantity(field["value"], "percent"),
                    None if field["time"] is None else quantity(field["time"], "s"))
            elif isinstance(field, Mapping) and {"value", "time", "unit"} <= set(field) \
                    or (field is None and name.startswith("peak_")):
                values[name] = _extreme(field, unit)
        object.__setattr__(self, "_values", values)

    @classmethod
    def of(cls, derivation) -> ResultQuantities:
        """The results of ``derivation``: the same fields, names and SI units as its JSON
        result."""
        from . import quantities
        from .metrics import metric_fields
        from .results import result_fields

        numbers = derivation.numbers
        until = derivation.window.until
        peak = numbers.peak
        member: dict[str, Any] = {}
        if getattr(derivation.case.system, "member", None) is not None:
            # a member's support reaction is V = a·R + b·F of its assumed shape, not the
            # oscillator's spring force: the JSON result's field, by the function that makes it
            from .member_results import peak_support_reaction
            member = {"peak_support_reaction": peak_support_reaction(derivation)}
        return cls({
            "variable": {"unit": quantities.si_unit_text(derivation.case.system.response_dimension)},
            "until": str(until) if until.free_symbols else float(until.evalf(30)),
            "peak": None if peak is None else {"value": peak.value, "time": peak.time},
            "static": numbers.static,
            "dlf": numbers.dlf,
            **result_fields(numbers),
            **metric_fields(getattr(derivation, "metrics", None)),
            **member,
        })

    def names(self) -> tuple[str, ...]:
        """The JSON names available, sorted."""
        return tuple(sorted(self._values))

    def __getattr__(self, name: str) -> Any:
        values = object.__getattribute__(self, "_values")
        if name in values:
            return values[name]
        raise AttributeError(f"no result named {name!r}; the results are: "
                             f"{', '.join(sorted(values))} (the SI floats are in "
                             "Derivation.numbers)")

    def __setattr__(self, name: str, value: Any) -> None:
        raise AttributeError("results are read only")

    def __dir__(self) -> list[str]:
        return sorted(set(self._values) | {"names"})

    def __iter__(self) -> Iterator[str]:
        return iter(self.names())

    def __repr__(self) -> str:
        shown = ", ".join(f"{name}={self._values[name]}" for name in self.names()
                          if name != "impulse_idealization")
        return f"ResultQuantities({shown})"

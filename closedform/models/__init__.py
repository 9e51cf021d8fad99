"""The model registry: one module per model, each holding one ``ModelDefinition``.

A definition is everything the tool knows about a model in one place: the keys of its
[system] table and how they are read and validated (with their dimensions), the equation's
coefficients aₙ…a₀ and input scale b (aₙx⁽ⁿ⁾ + … + a₀x = b·load), the printed equation,
variable and load names, the derived quantities reported beside the response, and the
model's assumptions for the sheet. Case reading (``case``), the engine (``systems``),
``results`` and the sheets look a model up here by its name; the independent checks do not
(they build the equation from the parameters themselves).

A new model is one new module here that calls ``register`` (see DEVELOPERS.md). A
definition may also be registered from outside the package (a test does so).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import sympy

from ..catalogue import Catalogue
from ..specs import SystemSpec, ValueReader

#: A reported quantity: (JSON name, description, SI unit, transform of the response on one
#: interval, or None where it cannot be evaluated).
QuantityDefinition = tuple[str, str, str, Callable | None]


@dataclass(frozen=True)
class QuantityContext:
    """What a model's derived quantities are built from (given by ``results``).

    ``number(expr)`` is the value of a parameter at the declared symbol values (None for a
    case with symbols left without values); ``unit(dimension)`` is its SI unit text;
    ``derivative(k)`` maps a response to its k-th derivative; ``combination(p, q)`` maps x
    to p·x + q·x′ (None when p or q is None).
    """

    parameters: Mapping[str, sympy.Expr]
    coefficients: tuple[sympy.Expr, ...]
    order: int
    response: Any
    time: Any
    number: Callable[[sympy.Expr], Any]
    unit: Callable[[Any], str]
    derivative: Callable[[int], Callable]
    combination: Callable[[Any, Any], Callable]


@dataclass(frozen=True)
class ModelDefinition:
    """One model (see the module docstring).

    ``read(reader, data)`` turns the [system] table into a ``SystemSpec`` (exact SI,
    located errors); ``equation_of(parameters)`` gives ((aₙ, …, a₀), b); ``order(system)``
    the order of the equation. ``quantities`` gives the derived quantities (None: the
    generic derivatives x′ and x″). ``mechanical``: the initial state may be given as
    displacement and velocity. ``example``: a [system] table of this model, used by the
    tests.
    """

    name: str
    keys: tuple[str, ...]
    read: Callable[[ValueReader, Mapping[str, Any]], SystemSpec]
    equation_of: Callable[[Mapping[str, sympy.Expr]],
                          tuple[tuple[sympy.Expr, ...], sympy.Expr]]
    order: Callable[[SystemSpec], int]
    equation: str
    variable: str
    load_name: str
    assumptions: tuple[str, ...]
    example: Mapping[str, Any]
    quantities: Callable[[QuantityContext], list[QuantityDefinition]] | None = None
    mechanical: bool = False
    #: the damping ratio, where the case gives one, fixes the poles (−ζω ± ω√(ζ² − 1))
    damping_ratio_poles: bool = False
    #: warn when the window ends as the last load does (no residual vibration reported)
    residual_warning: bool = True
    #: b_m … b_0 of a right-hand side b_m f⁽ᵐ⁾ + … + b_0 f where derivatives of the input act
    #: (empty: none act, the right-hand side is b·load); then ``input_equation`` is printed,
    #: the load is named ``input_load_name`` (if given) and measured in ``input_load_prefer``,
    #: and ``input_assumptions`` (if given) replace ``assumptions``
    inputs: Callable[[SystemSpec], tuple[sympy.Expr, ...]] | None = None
    input_equation: str = ""
    input_load_name: str = ""
    input_load_prefer: tuple[str, ...] = ()
    input_assumptions: tuple[str, ...] = ()

    def input_coefficients(self, system: SystemSpec) -> tuple[sympy.Expr, ...]:
        """b_m … b_0 of the system where derivatives of its input act, else ()."""
        return () if self.inputs is None else tuple(sympy.sympify(b) for b in self.inputs(system))

    def assumptions_of(self, system: SystemSpec) -> tuple[str, ...]:
        """The assumptions printed for this system (its input may change them)."""
        if self.input_assumptions and self.input_coefficients(system):
            return self.input_assumptions
        return self.assumptions


BUILT_IN = ("spring_mass_damper", "base_excitation", "first_order", "series_rlc", "ode")

CATALOGUE: Catalogue[ModelDefinition] = Catalogue("model", BUILT_IN)
register = CATALOGUE.register        # a definition module ends in register(ModelDefinition(…))
unregister = CATALOGUE.unregister    # (tests) remove a model registered from outside
names = CATALOGUE.names              # every registered model, built-in ones first
get = CATALOGUE.get
known = CATALOGUE.known
close_match = CATALOGUE.close_match


def required(reader: ValueReader, data: Mapping[str, Any], model: str, name: str,
             dimension: str) -> sympy.Expr:
    """A positive parameter the model cannot do without."""
    if name not in data:
        raise reader.error(f"system.{name}", f"missing (the {model} model needs {name})")
    return reader.positive(reader.quantity(data[name], dimension, f"system.{name}"),
                           f"system.{name}", dimension=dimension)


def second_order(system: SystemSpec) -> int:
    return 2


CATALOGUE.load(__name__, __path__)

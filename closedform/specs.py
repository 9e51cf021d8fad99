"""The frozen values a case is made of, shared by every stage: ``Case``, ``SystemSpec``,
``LoadSpec`` and the rest (exact SI numbers or expressions in declared symbols).

``case`` reads them from a case file; the model and shape registries (``closedform.models``,
``closedform.shapes``) say what a model's parameters and a shape's fields are. This module
imports neither, so every registry module can use these types.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any, Protocol

import sympy

REGIMES = ("undamped", "under-damped", "critically-damped", "over-damped")

TAU = sympy.Symbol("tau", real=True)


class ValueReader(Protocol):
    """What a registry module's reading code may ask of the case reader: located errors
    and exact SI values (see ``case``)."""

    file: str
    folder: Path
    names: dict[str, sympy.Expr]

    def error(self, key: str, message: str) -> Exception: ...

    def line_of(self, key: str) -> int | None: ...

    def quantity(self, value: Any, expected: str | Any, key: str) -> sympy.Expr: ...

    def positive(self, value: sympy.Expr, key: str, what: str = ...,
                 dimension: str | Any | None = None) -> sympy.Expr: ...

    def non_negative(self, value: sympy.Expr, key: str,
                     dimension: str | Any | None = None) -> sympy.Expr: ...

    def unit_dimension(self, unit: str, key: str) -> Any: ...

    def table(self, value: Any, key: str) -> Mapping[str, Any]: ...


@dataclass(frozen=True)
class SymbolDeclaration:
    """A name declared under [symbols]: a positive real quantity, maybe with a value."""

    name: str
    symbol: sympy.Symbol
    unit: str
    dimension: Any
    value: sympy.Expr | None


@dataclass(frozen=True)
class SystemSpec:
    """The model and its parameters in exact SI (or in declared symbols)."""

    model: str
    parameters: Mapping[str, sympy.Expr]
    regime: str | None
    load_dimension: Any
    response_dimension: Any
    input: str | None = None      # base-excitation: support-acceleration | support-displacement
    resistance: Any = None          # resistance.Resistance of a yielding spring, or None
    member: Any = None              # member.EquivalentMember when the case gives a member

    def get(self, name: str) -> sympy.Expr | None:
        return self.parameters.get(name)


@dataclass(frozen=True)
class Repeat:
    count: int
    every: sympy.Expr


@dataclass(frozen=True)
class LoadSpec:
    """One [[load]] entry as the engineer gave it, resolved to exact SI.

    ``amplitude`` is always the peak value of a pulse (worked out from ``impulse``, the
    area, where that was given); ``impulse`` keeps the stated area so verification can
    check it independently.
    """

    number: int                       # 1-based position in the file
    shape: str
    at: sympy.Expr
    values: Mapping[str, sympy.Expr]
    points: tuple[tuple[sympy.Expr, sympy.Expr], ...] = ()
    expression: sympy.Expr | None = None   # formula loads, in TAU
    repeat: Repeat | None = None
    label: str = ""

    @property
    def key(self) -> str:
        return f"load[{self.number}]"

    def get(self, name: str) -> sympy.Expr | None:
        return self.values.get(name)

    def length(self) -> sympy.Expr:
        """How long one occurrence of the load acts (0 for steps, impulses, open ramps):
        its shape's definition says (``closedform.shapes``)."""
        from . import shapes
        return shapes.get(self.shape).length(self)

    def starts(self) -> tuple[sympy.Expr, ...]:
        """Start time of each occurrence (one unless repeated)."""
        if self.repeat is None:
            return (self.at,)
        return tuple(self.at + i * self.repeat.every for i in range(self.repeat.count))


@dataclass(frozen=True)
class ReportSpec:
    until: sympy.Expr | None
    units: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    numbers: str = "auto"       # auto | exact | decimal: how the sheet prints numbers
    digits: int = 6             # significant digits of decimals on the sheet
    paper: str = "a4"           # a4 | letter
    levels: tuple[sympy.Expr, ...] = ()   # response levels whose crossing times are reported


@dataclass(frozen=True)
class Case:
    """One case file, validated: everything the derivation needs and nothing it must guess."""

    title: str
    reference: str
    system: SystemSpec
    loads: tuple[LoadSpec, ...]
    initial: tuple[sympy.Expr, ...] | None
    symbols: tuple[SymbolDeclaration, ...]
    report: ReportSpec
    claims: Mapping[str, Any]
    source: str = "<case>"
    sha256: str = ""
    chain: Any = None        # several masses (chain_case.ChainSpec) for the chain/matrix models

    def symbol_values(self) -> dict[sympy.Symbol, sympy.Expr]:
        return {d.symbol: d.value for d in self.symbols if d.value is not None}

    @property
    def is_symbolic(self) -> bool:
        return bool(self.symbols)

    @property
    def is_fully_valued(self) -> bool:
        return all(d.value is not None for d in self.symbols)

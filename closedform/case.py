"""The case model and its loading from TOML: the only stage that reads case files.

A ``Case`` holds exact SI numbers (sympy Rationals) or expressions in declared symbols,
never floats and never raw strings that still need interpreting. Every problem in a case
file becomes a ``CaseError`` naming the file, the TOML key and, where it can be found, the
line. The [system] table is read by its model's definition (``closedform.models``) and each
[[load]] by its shape's (``closedform.shapes``); this module reads the rest and holds the
limits. The frozen values themselves are in ``specs``, a table's CSV file in ``csvtable``.

Case files are untrusted text. Nothing read here is ever evaluated: values go through the
whitelisted grammar of ``expressions`` and the unit reader of ``quantities``. Sizes are
limited before any work is done (the ``MAX_*`` constants: file sizes, points, breakpoints,
loads, symbols, free text), a CSV named by a table load must be a regular file in the case
file's folder or below it (no absolute paths, no '..', no symbolic link leading out), and
file names and keys from the file are escaped where they appear in a message, so a message
stays one line and cannot drive the terminal.
"""

from __future__ import annotations

import difflib
import re
import unicodedata
from collections.abc import Mapping
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

import sympy

from . import models, quantities, shapes
from .casefile import (
    MAX_CASE_BYTES,
    CaseDocument,
    line_of,
    locate,
    parse_case_text,
    read_case_file,
)
from .csvtable import MAX_CSV_BYTES, MAX_TABLE_POINTS
from .errors import CaseError
from .expressions import quote
from .files import display_name, read_limited
from .messages import key_part as _key_part
from .messages import plain as _plain
from .messages import shown as _shown
from .messages import shown_value as _shown_value
from .messages import toml_type as _toml_type
from .resistance import SPRING_MODELS, read_resistance
from .specs import (
    REGIMES,
    TAU,
    Case,
    LoadSpec,
    Repeat,
    ReportSpec,
    SymbolDeclaration,
    SystemSpec,
)

__all__ = ["MAX_BREAKPOINTS", "MAX_CASE_BYTES", "MAX_CSV_BYTES", "MAX_LOADS", "MAX_SYMBOLS",
           "MAX_TABLE_POINTS", "MAX_TEXT", "MODELS", "PULSE_SHAPES", "REGIMES", "SHAPES", "TAU",
           "Case", "LoadSpec", "Repeat", "ReportSpec", "SymbolDeclaration", "SystemSpec",
           "display_name", "load_case", "load_case_text", "locate", "quantity_reader",
           "read_limited"]

#: The built-in models (``closedform.models`` may hold more).
MODELS = models.names()
#: The built-in shapes and those of them that are pulses (``closedform.shapes`` may hold more).
SHAPES = shapes.names()
PULSE_SHAPES = tuple(name for name in SHAPES if shapes.get(name).pulse)

_TOP_KEYS = ("title", "reference", "system", "initial", "load", "report", "symbols", "claims")
_REPORT_KEYS = ("until", "units", "numbers", "digits", "paper", "levels")
# [report] units: every quantity a sheet shows, with the dimension its unit must have
# (None: the model's response, whatever it measures).
_DISPLAY_DIMENSIONS = {
    "displacement": "length", "velocity": "velocity", "acceleration": "acceleration",
    "force": "force", "time": "time", "mass": "mass", "stiffness": "stiffness",
    "damping": "damping", "moment": "energy", "pressure": "pressure", "voltage": "voltage",
    "current": "current", "temperature": "temperature", "impulse": "impulse",
    "energy": "energy", "charge": "charge", "resistance": "resistance",
    "inductance": "inductance", "capacitance": "capacitance", "frequency": "frequency",
    "power": "power", "response": None,
}
_DISPLAY_QUANTITIES = tuple(_DISPLAY_DIMENSIONS)
NUMBER_STYLES = ("auto", "exact", "decimal")
PAPER_SIZES = ("a4", "letter")
DIGITS_RANGE = (2, 15)
_INITIAL_KEYS = ("values", "displacement", "velocity", "voltage")
# Claim names are the result names of the JSON result, known only once the case is derived
# (closedform.claims checks them then); here a claim key must merely look like one.
_CLAIM_NAME_RE = re.compile(r"[a-z][a-z0-9_]{0,63}")

# Limits that keep a hostile or mistaken case cheap to refuse, each named in its message.
#: Most breakpoints (starts, corners and ends of every occurrence of every load) in one case.
MAX_BREAKPOINTS = 10_000
#: Longest title, reference or label, in characters.
MAX_TEXT = 500
#: Most [[load]] tables in one case.
MAX_LOADS = 1000
#: Most names declared under [symbols].
MAX_SYMBOLS = 100
#: Most [report] levels.
MAX_LEVELS = 20
# Characters refused in free text: controls (a tab is fine) and the bidirectional overrides
# that make text display in an order other than the one it is read in.
_HIDDEN_CHARACTERS = frozenset(chr(c) for c in (*range(0, 9), *range(10, 32), 127,
                                                *range(0x80, 0xA0), *range(0x202A, 0x202F),
                                                *range(0x2066, 0x206A)))
#: Unicode categories refused in free text besides those: format characters (soft hyphen,
#: zero-width space/joiners, word joiner, byte-order mark, bidirectional marks, tag
#: characters), line and paragraph separators, surrogates, private-use and unassigned code
#: points. Each is invisible or ambiguous on a sheet, so a title, reference or label
#: holding one is an input error naming the key, the column and the code point.
_HIDDEN_CATEGORIES = frozenset(("Cf", "Zl", "Zp", "Cs", "Co", "Cn"))
#: Names the formulas of a case reserve for themselves (time, local time, the Laplace
#: variable, the constants), in addition to the functions.
_RESERVED_SYMBOLS = ("t", "tau", "s", "u", "v", "pi", "e", "I", "E")
_SYMBOL_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,30}")


# ----------------------------------------------------------------------------- loading


def load_case(source: str | Path | Mapping[str, Any] | CaseDocument, *,
              text: str | None = None, name: str | None = None) -> Case:
    """Read a case from a path, a TOML string (``text=``), an already parsed mapping or a
    document read by ``closedform.casefile``."""
    if isinstance(source, CaseDocument):
        return _Reader(source.file, source.text, source.folder, source.digest).case(source.data)
    if isinstance(source, Mapping):
        return _Reader(display_name(name or "<dict>"), "", Path.cwd()).case(source)
    if text is None:
        return load_case(read_case_file(source, name))
    return load_case(parse_case_text(text, display_name(name or "<string>"), Path.cwd()))


def load_case_text(text: str, name: str = "<string>") -> Case:
    return load_case("", text=text, name=name)


def quantity_reader(case: Case) -> _Reader:
    """A reader that understands the case's declared symbols, for values read later
    (claims, say); its ``quantity(value, dimension, key)`` gives exact SI."""
    reader = _Reader(case.source, "", Path.cwd())
    for declaration in case.symbols:
        reader.names[declaration.name] = declaration.symbol
        reader.name_dimensions[declaration.name] = declaration.dimension
    return reader




class _Reader:
    """Turns parsed TOML into a Case, raising located CaseErrors."""

    def __init__(self, file: str, text: str, folder: Path, digest: str = "") -> None:
        self.file = file
        self.text = text
        self.folder = folder
        self.digest = digest
        self.names: dict[str, sympy.Expr] = {}
        self.name_dimensions: dict[str, Any] = {}

    # -- errors ------------------------------------------------------------------------
    def error(self, key: str, message: str) -> CaseError:
        return CaseError(message, file=self.file, key=key, line=self.line_of(key))

    def line_of(self, key: str) -> int | None:
        """Best-effort line of a dotted key such as ``load[2].duration`` in the TOML text."""
        return line_of(self.text, key)

    def check_keys(self, table: Mapping[str, Any], allowed: tuple[str, ...], prefix: str) -> None:
        for name in table:
            if name not in allowed:
                close = difflib.get_close_matches(name, allowed, n=1)
                hint = f"; did you mean '{close[0]}'?" if close else \
                    f" (expected one of: {', '.join(allowed)})"
                key = f"{prefix}.{_key_part(name)}" if prefix else _key_part(name)
                raise self.error(key, f"unknown key {quote(name)}{hint}")

    # -- values ------------------------------------------------------------------------
    def quantity(self, value: Any, expected: str | Any, key: str) -> sympy.Expr:
        dimension = quantities.dimension(expected) if isinstance(expected, str) else expected
        if isinstance(value, bool) or not isinstance(value, (str, int, float)):
            raise self.error(key, f"expected a quantity such as \"2.6 MN/m\" or a number, "
                                  f"got {_toml_type(value)}")
        if not isinstance(value, str) and value == 0:
            return sympy.S.Zero   # zero is zero in every unit
        try:
            return quantities.parse_quantity(value, expected=dimension, names=self.names,
                                             name_dimensions=self.name_dimensions, key=key)
        except CaseError as error:
            raise error.located(file=self.file, key=key, line=self.line_of(key))

    def positive(self, value: sympy.Expr, key: str, what: str = "a positive value",
                 dimension: str | Any | None = None) -> sympy.Expr:
        """``value`` if it is positive (or symbolic); ``dimension`` gives the SI unit the
        offending value is shown in."""
        if value.is_positive is False or value.is_zero:
            raise self.error(key, f"must be positive (expected {what}, got "
                                  f"{_plain(value, dimension)})")
        if value.is_positive is None and not value.free_symbols:
            raise self.error(key, f"must be positive (got {_plain(value, dimension)})")
        return value

    def non_negative(self, value: sympy.Expr, key: str,
                     dimension: str | Any | None = None) -> sympy.Expr:
        if value.is_negative:
            raise self.error(key, f"must not be negative (expected 0 or more, got "
                                  f"{_plain(value, dimension)})")
        return value

    # -- tables ------------------------------------------------------------------------
    def case(self, data: Mapping[str, Any]) -> Case:
        self.check_keys(data, _TOP_KEYS, "")
        title = data.get("title")
        if not isinstance(title, str) or not title.strip():
            raise self.error("title", "a non-empty title string is required")
        self.free_text(title, "title")
        reference = data.get("reference", "")
        if not isinstance(reference, str):
            raise self.error("reference", f"expected a string, got {_toml_type(reference)}")
        self.free_text(reference, "reference")
        symbols = self.symbols(data.get("symbols", {}))
        if "system" not in data:
            raise self.error("system", "the [system] table is required")
        from .chain_case import CHAIN_MODELS, read_chain_case
        if self.table(data["system"], "system").get("model") in CHAIN_MODELS:
            return read_chain_case(self, data, lambda system, loads, report, chain: Case(
                title=title.strip(), reference=reference.strip(), system=system, loads=loads,
                initial=None, symbols=(), report=report, claims=self.claims(data),
                source=self.file, sha256=self.digest, chain=chain))
        system = self.system(self.table(data["system"], "system"))
        loads_data = data.get("load", [])
        if not isinstance(loads_data, list):
            raise self.error("load", "loads are given as [[load]] tables")
        if len(loads_data) > MAX_LOADS:
            raise self.error("load", f"too many loads (at most {MAX_LOADS} [[load]] tables, got "
                                     f"{len(loads_data)})")
        loads = tuple(self.load(self.table(item, f"load[{i}]"), i, system.load_dimension)
                      for i, item in enumerate(loads_data, start=1))
        if system.member is not None:    # the oscillator carries the total load on the span
            from .member import scale_load
            if system.member.distribution == "uniform":
                loads = tuple(scale_load(load, system.member.span) for load in loads)
            system = replace(system, load_dimension=quantities.dimension("force"))
        self.breakpoint_limit(loads)
        if system.input == "support-displacement":
            for load in loads:
                if load.shape == "impulse":
                    raise self.error(f"{load.key}.shape", "an impulse is not a support "
                                     "displacement (a Dirac displacement has no finite response); "
                                     "give the displacement history, e.g. a step or a table")
        initial = self.initial(data.get("initial"), system)
        report = self.report(self.table(data.get("report", {}), "report"), system)
        return Case(title=title.strip(), reference=reference.strip(), system=system,
                    loads=loads, initial=initial, symbols=symbols, report=report,
                    claims=self.claims(data), source=self.file, sha256=self.digest)

    def claims(self, data: Mapping[str, Any]) -> Mapping[str, Any]:
        claims = self.table(data.get("claims", {}), "claims")
        for name in claims:
            if not _CLAIM_NAME_RE.fullmatch(name):
                raise self.error(f"claims.{_key_part(name)}",
                                 f"not a claim name {quote(name)} (expected a result name of the "
                                 "JSON result such as peak or dlf, or response, at, tolerance)")
        return MappingProxyType(dict(claims))

    def table(self, value: Any, key: str) -> Mapping[str, Any]:
        if not isinstance(value, Mapping):
            raise self.error(key, f"expected a table, got {_toml_type(value)}")
        return value

    def free_text(self, text: str, key: str) -> None:
        """A title, reference or label: any printable text of sensible length."""
        if len(text) > MAX_TEXT:
            raise self.error(key, f"text too long (at most {MAX_TEXT} characters, got {len(text)})")
        for column, character in enumerate(text, start=1):
            if (character in _HIDDEN_CHARACTERS
                    or unicodedata.category(character) in _HIDDEN_CATEGORIES):
                raise self.error(key, f"character not allowed at column {column} (expected "
                                      f"printable text, got U+{ord(character):04X})")

    def breakpoint_limit(self, loads: tuple[LoadSpec, ...]) -> None:
        """Refuse load histories with more breakpoints than any derivation could handle,
        before a single term is built."""
        total = 0
        for load in loads:
            occurrences = load.repeat.count if load.repeat is not None else 1
            total += occurrences * _corners(load)
            if total > MAX_BREAKPOINTS:
                raise self.error(load.key, f"too many breakpoints (expected at most "
                                           f"{MAX_BREAKPOINTS} in all loads, got {total} up to "
                                           f"this load)")

    def symbols(self, data: Any) -> tuple[SymbolDeclaration, ...]:
        data = self.table(data, "symbols")
        if len(data) > MAX_SYMBOLS:
            raise self.error("symbols", f"too many symbols (at most {MAX_SYMBOLS}, got {len(data)})")
        declarations = []
        functions = _function_names()
        for name, spec in data.items():
            key = f"symbols.{_key_part(name)}"
            if not _SYMBOL_NAME_RE.fullmatch(name) or "__" in name:
                raise self.error(key, f"not a valid symbol name (expected a letter followed by "
                                      f"at most 30 letters, digits or single underscores, got "
                                      f"{quote(name)})")
            if name in _RESERVED_SYMBOLS or name in functions:
                raise self.error(key, f"reserved name (expected a name that is not a function "
                                      f"or one of {', '.join(_RESERVED_SYMBOLS)}, got "
                                      f"{quote(name)})")
            if isinstance(spec, str):
                unit, value_text = spec, None
            elif isinstance(spec, Mapping):
                self.check_keys(spec, ("unit", "value"), key)
                unit = spec.get("unit", "1")
                value_text = spec.get("value")
                if not isinstance(unit, str):
                    raise self.error(f"{key}.unit", f"expected a unit string, got {_toml_type(unit)}")
            else:
                raise self.error(key, "expected a unit string or { unit = …, value = … }, "
                                      f"got {_toml_type(spec)}")
            try:
                dimension = quantities.dimension_of_unit(unit, key=key) if unit.strip() not in ("", "1") \
                    else quantities.dimension("dimensionless")
            except CaseError as error:
                raise error.located(file=self.file, key=key, line=self.line_of(key))
            symbol = sympy.Symbol(name, positive=True)
            value = None
            if value_text is not None:
                value = self.quantity(value_text, dimension, f"{key}.value")
                self.positive(value, f"{key}.value", "a positive value: symbols are positive reals",
                              dimension)
            declarations.append(SymbolDeclaration(name, symbol, unit, dimension, value))
            self.names[name] = symbol
            self.name_dimensions[name] = dimension
        return tuple(declarations)

    def system(self, data: Mapping[str, Any]) -> SystemSpec:
        """The [system] table, read by its model's definition (``closedform.models``)."""
        model = data.get("model")
        if model is None:
            raise self.error("system.model", f"missing (expected one of: "
                                             f"{', '.join(models.names())})")
        if model == "member":           # a beam as its equivalent oscillator (issue 16)
            return self.member(data)
        if not models.known(model):
            close = models.close_match(model)
            hint = f"; did you mean '{close}'?" if close else ""
            raise self.error("system.model", f"unknown model {_shown(model)} (expected one of: "
                                             f"{', '.join(models.names())}){hint}")
        definition = models.get(model)
        if isinstance(data.get("resistance"), Mapping) and model not in SPRING_MODELS:
            # a [system.resistance] table on a model without a spring: refused, located
            read_resistance(data["resistance"], model, None, self.quantity, self.error, self.table)
        self.check_keys(data, definition.keys, "system")
        regime = data.get("regime")
        if regime is not None and regime not in REGIMES:
            raise self.error("system.regime", f"unknown regime {_shown(regime)} (expected one of: "
                                              f"{', '.join(REGIMES)})")
        return definition.read(self, data)

    def member(self, data: Mapping[str, Any]) -> SystemSpec:
        """[system] of a member: read, validated, and mapped to its equivalent oscillator."""
        from . import member
        from .resistance import Resistance
        self.check_keys(data, member.MEMBER_KEYS, "system")
        choices = {"support": member.SUPPORTS, "load_distribution": member.LOAD_DISTRIBUTIONS}
        chosen = {}
        for name, allowed in choices.items():
            value = data.get(name)
            if value not in allowed:
                got = "nothing" if value is None else _shown(value)
                raise self.error(f"system.{name}", f"expected one of: {', '.join(allowed)} "
                                                   f"(got {got})")
            chosen[name] = value
        d = quantities.dimension
        dimensions = {"span": d("length"),
                      "flexural_rigidity": d("force") * d("length") * d("length"),
                      "mass_per_length": d("mass") / d("length"), "plastic_moment": d("energy")}
        values = {}
        for name, dimension in dimensions.items():
            if name not in data:
                if name == "plastic_moment":
                    continue
                raise self.error(f"system.{name}", f"missing (a member needs {name})")
            value = self.quantity(data[name], dimension, f"system.{name}")
            if value.free_symbols:
                raise self.error(f"system.{name}", "must be a number, not a symbol (the "
                                                   "member's factors are derived for numbers)")
            values[name] = self.positive(value, f"system.{name}", dimension=dimension)
        ratio = self.non_negative(self.quantity(data.get("damping_ratio", 0), "dimensionless",
                                                "system.damping_ratio"), "system.damping_ratio")
        equivalent = member.equivalent_member(
            chosen["support"], chosen["load_distribution"], values["span"],
            values["flexural_rigidity"], values["mass_per_length"],
            values.get("plastic_moment"), ratio)
        mass = member.oscillator_number(equivalent.load_mass_factor * equivalent.mass)
        stiffness = member.oscillator_number(equivalent.equivalent_stiffness)
        parameters = {"mass": mass, "stiffness": stiffness, "damping_ratio": ratio,
                      "damping": 2 * ratio * sympy.sqrt(stiffness * mass)}
        resistance = None
        if equivalent.plastic_moment is not None:
            resistance = Resistance("elastic-plastic",
                                    member.oscillator_number(equivalent.resistance("plastic")),
                                    stiffness, sympy.S.Zero, "yield")
        load_dimension = d("force") / d("length") if chosen["load_distribution"] == "uniform" \
            else d("force")
        return SystemSpec("spring-mass-damper", MappingProxyType(parameters), None,
                          load_dimension, d("length"), resistance=resistance,
                          member=equivalent)

    def unit_dimension(self, unit: str, key: str) -> Any:
        """The dimension of a unit string given in the case ("1" or "" for none)."""
        if unit.strip() in ("", "1"):
            return quantities.dimension("dimensionless")
        try:
            return quantities.dimension_of_unit(unit, key=key)
        except CaseError as error:
            raise error.located(file=self.file, key=key, line=self.line_of(key))

    def load(self, data: Mapping[str, Any], number: int, load_dimension: Any) -> LoadSpec:
        key = f"load[{number}]"
        shape = data.get("shape")
        if not shapes.known(shape):
            close = shapes.close_match(shape)
            hint = f"; did you mean '{close}'?" if close else ""
            raise self.error(f"{key}.shape", f"unknown shape {_shown(shape)} (expected one of: "
                                             f"{', '.join(shapes.names())}){hint}")
        self.check_keys(data, shapes.get(shape).keys + shapes.COMMON_KEYS, key)
        at = self.non_negative(self.quantity(data.get("at", 0), "time", f"{key}.at"), f"{key}.at",
                               "time")
        label = data.get("label", "")
        if not isinstance(label, str):
            raise self.error(f"{key}.label", f"expected a string, got {_toml_type(label)}")
        self.free_text(label, f"{key}.label")
        definition = shapes.get(shape)
        reading = shapes.LoadReading(self, data, key, shape, load_dimension)
        definition.read(reading)
        values, points, expression = reading.values, reading.points, reading.expression
        repeat = None
        if "repeat" in data:
            repeat = self.repeat(data["repeat"], f"{key}.repeat")
            length = LoadSpec(number, shape, at, values, points, expression).length()
            if definition.endless(values):
                raise self.error(f"{key}.repeat", f"a {shape} that never ends cannot repeat")
            if (repeat.every - length).is_negative:
                raise self.error(f"{key}.repeat.every", "repeats would overlap (every "
                                 f"{_plain(repeat.every)} s is shorter than the load, "
                                 f"{_plain(length)} s)")
        return LoadSpec(number, shape, at, MappingProxyType(values), points, expression,
                        repeat, label)

    def repeat(self, data: Any, key: str) -> Repeat:
        data = self.table(data, key)
        self.check_keys(data, ("count", "every"), key)
        count = data.get("count")
        if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 10000:
            raise self.error(f"{key}.count", f"expected a whole number from 1 to 10000, got "
                                             f"{_shown(count)}")
        if "every" not in data:
            raise self.error(f"{key}.every", "missing (the time between repeats)")
        every = self.positive(self.quantity(data["every"], "time", f"{key}.every"),
                              f"{key}.every", "a positive time", "time")
        return Repeat(count, every)

    def initial(self, data: Any, system: SystemSpec) -> tuple[sympy.Expr, ...] | None:
        current = system.parameters.get("initial_current")
        if data is None and current is None:
            return None
        data = self.table({} if data is None else data, "initial")
        self.check_keys(data, _INITIAL_KEYS, "initial")
        order = _order(system)
        dimensions = _initial_dimensions(system, order)
        if "values" in data:
            if current is not None:
                raise self.error("initial.values", "give the capacitor voltage as initial.voltage "
                                                   "with system.initial_current, not values")
            if "displacement" in data or "velocity" in data:
                raise self.error("initial.values", "give values or displacement/velocity, not both")
            if "voltage" in data:
                raise self.error("initial.values", "give values or voltage, not both")
            raw = data["values"]
            if not isinstance(raw, list) or len(raw) != order:
                raise self.error("initial.values", f"expected {order} values x(0)…x^({order - 1})(0), "
                                                   f"got {_shown(raw)}")
            return tuple(self.quantity(v, dimensions[i], f"initial.values[{i}]")
                         for i, v in enumerate(raw))
        if system.model == "series-rlc":     # i(0) = C·v′(0): folded into the initial values
            if "displacement" in data or "velocity" in data:
                raise self.error("initial.displacement" if "displacement" in data else
                                 "initial.velocity", "displacement/velocity are for mechanical "
                                 "models; use voltage = … (capacitor) and system.initial_current")
            voltage = self.quantity(data.get("voltage", 0), dimensions[0], "initial.voltage")
            return (voltage, sympy.S.Zero if current is None
                    else current / system.parameters["capacitance"])
        if "voltage" in data:
            raise self.error("initial.voltage", "voltage is the capacitor voltage of the "
                                                "series-rlc model; use values = […]")
        if not models.get(system.model).mechanical:
            raise self.error("initial.displacement", "displacement/velocity are for mechanical "
                                                     "models; use values = […]")
        result = [sympy.S.Zero] * order
        if "displacement" in data:
            result[0] = self.quantity(data["displacement"], dimensions[0], "initial.displacement")
        if "velocity" in data:
            result[1] = self.quantity(data["velocity"], dimensions[1], "initial.velocity")
        return tuple(result)

    def report(self, data: Mapping[str, Any], system: SystemSpec | None = None) -> ReportSpec:
        self.check_keys(data, _REPORT_KEYS, "report")
        until = None
        if "until" in data:
            until = self.positive(self.quantity(data["until"], "time", "report.until"),
                                  "report.until", "a positive time", "time")
        units: dict[str, str] = {}
        if "units" in data:
            table = self.table(data["units"], "report.units")
            self.check_keys(table, _DISPLAY_QUANTITIES, "report.units")
            for name, unit in table.items():
                if not isinstance(unit, str):
                    raise self.error(f"report.units.{name}", f"expected a unit string, got {_toml_type(unit)}")
                try:
                    _factor, dimension = quantities.unit_factor(unit, key=f"report.units.{name}")
                except CaseError as error:
                    raise error.located(file=self.file, key=f"report.units.{name}",
                                        line=self.line_of(f"report.units.{name}"))
                wanted = _DISPLAY_DIMENSIONS[name]
                expected = (quantities.dimension(wanted) if wanted is not None
                            else system.response_dimension if system is not None else None)
                if expected is not None and dimension != expected:
                    raise self.error(
                        f"report.units.{name}",
                        f"unit {unit!r} measures {quantities.describe(dimension)}, not "
                        f"{quantities.describe(expected)} (expected a unit such as "
                        f"{quantities.si_unit_text(expected)})")
                units[name] = unit
        numbers = data.get("numbers", "auto")
        if numbers not in NUMBER_STYLES:
            raise self.error("report.numbers", f"expected one of {', '.join(NUMBER_STYLES)}, "
                                               f"got {_shown_value(numbers)}")
        digits = data.get("digits", 6)
        if isinstance(digits, bool) or not isinstance(digits, int) \
                or not DIGITS_RANGE[0] <= digits <= DIGITS_RANGE[1]:
            raise self.error("report.digits", f"expected a whole number of significant digits "
                                              f"from {DIGITS_RANGE[0]} to {DIGITS_RANGE[1]}, "
                                              f"got {_shown_value(digits)}")
        paper = data.get("paper", "a4")
        if paper not in PAPER_SIZES:
            raise self.error("report.paper", f"expected one of {', '.join(PAPER_SIZES)}, "
                                             f"got {_shown_value(paper)}")
        levels = data.get("levels", [])     # response values whose crossing times are wanted
        if not isinstance(levels, list) or len(levels) > MAX_LEVELS:
            raise self.error("report.levels", f"expected a list of at most {MAX_LEVELS} values "
                                              f"of the response, got {_shown(levels)}")
        dimension = system.response_dimension if system is not None else "dimensionless"
        return ReportSpec(until, MappingProxyType(units), numbers, digits, paper,
                          tuple(self.quantity(item, dimension, f"report.levels[{i}]")
                                for i, item in enumerate(levels)))


def _function_names() -> tuple[str, ...]:
    from .expressions import FUNCTIONS
    return tuple(FUNCTIONS)


def _order(system: SystemSpec) -> int:
    return models.get(system.model).order(system)


def _initial_dimensions(system: SystemSpec, order: int) -> list[Any]:
    base = system.response_dimension
    time = quantities.dimension("time")
    return [base / time**i for i in range(order)]


def _corners(load: LoadSpec) -> int:
    """How many breakpoints one occurrence of a load brings (start, corners, end)."""
    return shapes.get(load.shape).corners(load)

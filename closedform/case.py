"""The case model and its loading from TOML: the only stage that reads case files.

A ``Case`` holds exact SI numbers (sympy Rationals) or expressions in declared symbols,
never floats and never raw strings that still need interpreting. Every problem in a case
file becomes a ``CaseError`` naming the file, the TOML key and, where it can be found, the
line.
"""

from __future__ import annotations

import csv
import difflib
import hashlib
import io
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import sympy

from . import quantities
from .errors import CaseError
from .expressions import parse_expression

MODELS = ("spring-mass-damper", "base-excitation", "first-order", "series-rlc", "ode")
SHAPES = ("step", "ramp", "impulse", "rectangle", "triangle", "decay", "half-sine",
          "trapezoid", "table", "formula")
REGIMES = ("undamped", "under-damped", "critically-damped", "over-damped")
PULSE_SHAPES = ("rectangle", "triangle", "decay", "half-sine", "trapezoid", "table", "formula")

TAU = sympy.Symbol("tau", real=True)

_TOP_KEYS = ("title", "reference", "system", "initial", "load", "report", "symbols", "claims")
_SYSTEM_KEYS = {
    "spring-mass-damper": ("model", "mass", "stiffness", "damping", "damping_ratio", "regime"),
    "base-excitation": ("model", "mass", "stiffness", "damping", "damping_ratio", "regime"),
    "first-order": ("model", "time_constant", "gain", "input_unit"),
    "series-rlc": ("model", "inductance", "resistance", "capacitance", "regime"),
    "ode": ("model", "coefficients", "regime"),
}
_LOAD_KEYS = {
    "step": ("amplitude",),
    "ramp": ("rate", "duration"),
    "impulse": ("impulse",),
    "rectangle": ("duration", "amplitude", "impulse"),
    "triangle": ("duration", "amplitude", "impulse", "peak_at"),
    "decay": ("duration", "amplitude", "impulse"),
    "half-sine": ("duration", "amplitude", "impulse"),
    "trapezoid": ("rise", "hold", "fall", "amplitude"),
    "table": ("points", "csv", "units"),
    "formula": ("expr", "duration", "unit"),
}
_COMMON_LOAD_KEYS = ("shape", "at", "repeat", "label")
_REPORT_KEYS = ("until", "units")
_DISPLAY_QUANTITIES = ("displacement", "velocity", "acceleration", "force", "time", "voltage",
                       "current", "response")
_INITIAL_KEYS = ("values", "displacement", "velocity")
_CLAIM_KEYS = ("peak", "peak_time", "dlf", "static", "residual", "response", "tolerance")


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
        """How long one occurrence of the load acts (0 for steps, impulses, open ramps)."""
        v = self.values
        if self.shape in ("rectangle", "triangle", "decay", "half-sine", "formula"):
            return v["duration"]
        if self.shape == "ramp":
            return v.get("duration", sympy.S.Zero)
        if self.shape == "trapezoid":
            return v["rise"] + v["hold"] + v["fall"]
        if self.shape == "table":
            return self.points[-1][0]
        return sympy.S.Zero

    def starts(self) -> tuple[sympy.Expr, ...]:
        """Start time of each occurrence (one unless repeated)."""
        if self.repeat is None:
            return (self.at,)
        return tuple(self.at + i * self.repeat.every for i in range(self.repeat.count))


@dataclass(frozen=True)
class ReportSpec:
    until: sympy.Expr | None
    units: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))


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

    def symbol_values(self) -> dict[sympy.Symbol, sympy.Expr]:
        return {d.symbol: d.value for d in self.symbols if d.value is not None}

    @property
    def is_symbolic(self) -> bool:
        return bool(self.symbols)

    @property
    def is_fully_valued(self) -> bool:
        return all(d.value is not None for d in self.symbols)


# ----------------------------------------------------------------------------- loading


def load_case(source: str | Path | Mapping[str, Any], *, text: str | None = None,
              name: str | None = None) -> Case:
    """Read a case from a path, a TOML string (``text=``) or an already parsed mapping."""
    if isinstance(source, Mapping):
        return _Reader(name or "<dict>", "", Path.cwd()).case(source)
    if text is None:
        path = Path(source)
        try:
            raw = path.read_bytes()
        except OSError as error:
            raise CaseError(f"cannot read the case file ({error.strerror})", file=str(path))
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError as error:
            raise CaseError(f"the case file is not UTF-8 text (byte {error.start})", file=str(path))
        return _parse(text, name or str(path), path.parent, hashlib.sha256(raw).hexdigest())
    return _parse(text, name or "<string>", Path.cwd(),
                  hashlib.sha256(text.encode("utf-8")).hexdigest())


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


def _parse(text: str, file: str, folder: Path, digest: str) -> Case:
    if "\x00" in text:
        raise CaseError("the case file contains a NUL byte", file=file)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        message = str(error)
        match = re.search(r"\(at line (\d+), column (\d+)\)", message)
        line = int(match.group(1)) if match else None
        message = re.sub(r"\s*\(at line \d+, column \d+\)", "", message)
        raise CaseError(f"TOML syntax error: {message}", file=file, line=line)
    except RecursionError:
        raise CaseError("TOML nesting is too deep", file=file)
    return _Reader(file, text, folder, digest).case(data)


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
        if not self.text or not key:
            return None
        lines = self.text.splitlines()
        header = re.compile(r"\s*\[")
        parts = key.split(".")
        start, end = 0, len(lines)
        match = re.fullmatch(r"(\w+)\[(\d+)\]", parts[0])
        table_line = None
        if match:
            pattern = re.compile(rf"\s*\[\[\s*{re.escape(match.group(1))}\s*\]\]")
            found = [i for i, line in enumerate(lines) if pattern.match(line)]
            if len(found) >= int(match.group(2)):
                table_line = found[int(match.group(2)) - 1]
        else:
            pattern = re.compile(rf"\s*\[\s*{re.escape(parts[0])}\s*\]")
            table_line = next((i for i, line in enumerate(lines) if pattern.match(line)), None)
        if table_line is not None:
            parts = parts[1:]
            start = table_line + 1
            end = next((i for i in range(start, len(lines)) if header.match(lines[i])), len(lines))
            if not parts:
                return table_line + 1
        else:
            end = next((i for i, line in enumerate(lines) if header.match(line)), len(lines))
        leaf = re.sub(r"\[\d+\]$", "", parts[0])
        pattern = re.compile(rf"\s*{re.escape(leaf)}\s*=")
        for i in range(start, end):
            if pattern.match(lines[i]):
                return i + 1
        return table_line + 1 if table_line is not None else None

    def check_keys(self, table: Mapping[str, Any], allowed: tuple[str, ...], prefix: str) -> None:
        for name in table:
            if name not in allowed:
                close = difflib.get_close_matches(name, allowed, n=1)
                hint = f"; did you mean '{close[0]}'?" if close else \
                    f" (expected one of: {', '.join(allowed)})"
                key = f"{prefix}.{name}" if prefix else name
                raise self.error(key, f"unknown key '{name}'{hint}")

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

    def positive(self, value: sympy.Expr, key: str, what: str = "a positive value") -> sympy.Expr:
        if value.is_positive is False or value.is_zero:
            raise self.error(key, f"must be positive (expected {what}, got {_plain(value)})")
        if value.is_positive is None and not value.free_symbols:
            raise self.error(key, f"must be positive (got {_plain(value)})")
        return value

    def non_negative(self, value: sympy.Expr, key: str) -> sympy.Expr:
        if value.is_negative:
            raise self.error(key, f"must not be negative (got {_plain(value)})")
        return value

    # -- tables ------------------------------------------------------------------------
    def case(self, data: Mapping[str, Any]) -> Case:
        self.check_keys(data, _TOP_KEYS, "")
        title = data.get("title")
        if not isinstance(title, str) or not title.strip():
            raise self.error("title", "a non-empty title string is required")
        reference = data.get("reference", "")
        if not isinstance(reference, str):
            raise self.error("reference", f"expected a string, got {_toml_type(reference)}")
        symbols = self.symbols(data.get("symbols", {}))
        if "system" not in data:
            raise self.error("system", "the [system] table is required")
        system = self.system(self.table(data["system"], "system"))
        loads_data = data.get("load", [])
        if not isinstance(loads_data, list):
            raise self.error("load", "loads are given as [[load]] tables")
        loads = tuple(self.load(self.table(item, f"load[{i}]"), i, system.load_dimension)
                      for i, item in enumerate(loads_data, start=1))
        initial = self.initial(data.get("initial"), system)
        report = self.report(self.table(data.get("report", {}), "report"))
        claims = self.table(data.get("claims", {}), "claims")
        self.check_keys(claims, _CLAIM_KEYS, "claims")
        return Case(title=title.strip(), reference=reference.strip(), system=system,
                    loads=loads, initial=initial, symbols=symbols, report=report,
                    claims=MappingProxyType(dict(claims)), source=self.file, sha256=self.digest)

    def table(self, value: Any, key: str) -> Mapping[str, Any]:
        if not isinstance(value, Mapping):
            raise self.error(key, f"expected a table, got {_toml_type(value)}")
        return value

    def symbols(self, data: Any) -> tuple[SymbolDeclaration, ...]:
        data = self.table(data, "symbols")
        declarations = []
        reserved = {"t", "tau", "s", "u", "v", "pi", "e", "I", "E"} | set(_function_names())
        for name, spec in data.items():
            key = f"symbols.{name}"
            if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_]{0,30}", name) or name in reserved:
                raise self.error(key, f"'{name}' cannot be a symbol name (expected a letter "
                                      "followed by letters, digits or _, not a reserved name)")
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
                self.positive(value, f"{key}.value", "a positive value: symbols are positive reals")
            declarations.append(SymbolDeclaration(name, symbol, unit, dimension, value))
            self.names[name] = symbol
            self.name_dimensions[name] = dimension
        return tuple(declarations)

    def system(self, data: Mapping[str, Any]) -> SystemSpec:
        model = data.get("model")
        if model not in MODELS:
            close = difflib.get_close_matches(str(model), MODELS, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise self.error("system.model", f"unknown model {_shown(model)} (expected one of: "
                                             f"{', '.join(MODELS)}){hint}")
        self.check_keys(data, _SYSTEM_KEYS[model], "system")
        parameters: dict[str, sympy.Expr] = {}
        regime = data.get("regime")
        if regime is not None and regime not in REGIMES:
            raise self.error("system.regime", f"unknown regime {_shown(regime)} (expected one of: "
                                              f"{', '.join(REGIMES)})")

        def required(name: str, dimension: str) -> sympy.Expr:
            if name not in data:
                raise self.error(f"system.{name}", f"missing (the {model} model needs {name})")
            return self.positive(self.quantity(data[name], dimension, f"system.{name}"),
                                 f"system.{name}")

        if model in ("spring-mass-damper", "base-excitation"):
            parameters["mass"] = required("mass", "mass")
            parameters["stiffness"] = required("stiffness", "stiffness")
            if "damping" in data and "damping_ratio" in data:
                raise self.error("system.damping_ratio", "give damping or damping_ratio, not both")
            if "damping" in data:
                parameters["damping"] = self.non_negative(
                    self.quantity(data["damping"], "damping", "system.damping"), "system.damping")
            elif "damping_ratio" in data:
                ratio = self.non_negative(self.quantity(data["damping_ratio"], "dimensionless",
                                                        "system.damping_ratio"),
                                          "system.damping_ratio")
                parameters["damping_ratio"] = ratio
                parameters["damping"] = 2 * ratio * sympy.sqrt(parameters["stiffness"]
                                                                * parameters["mass"])
            else:
                parameters["damping"] = sympy.S.Zero
        elif model == "first-order":
            parameters["time_constant"] = required("time_constant", "time")
            input_unit = data.get("input_unit", "1")
            if not isinstance(input_unit, str):
                raise self.error("system.input_unit", "expected a unit string, "
                                                      f"got {_toml_type(input_unit)}")
            load_dim = self.unit_dimension(input_unit, "system.input_unit")
            gain_dim = quantities.dimension("dimensionless")
            if "gain" in data:
                gain = data["gain"]
                if isinstance(gain, str) and _has_unit(gain):
                    gain_dim = self.unit_dimension(gain.split(None, 1)[1], "system.gain")
                parameters["gain"] = self.quantity(gain, gain_dim, "system.gain")
                if parameters["gain"] == 0:
                    raise self.error("system.gain", "must not be zero")
            else:
                parameters["gain"] = sympy.S.One
            return SystemSpec(model, MappingProxyType(parameters), regime, load_dim,
                              load_dim * gain_dim)
        elif model == "series-rlc":
            parameters["inductance"] = required("inductance", "inductance")
            parameters["resistance"] = self.non_negative(
                self.quantity(data.get("resistance", 0), "resistance", "system.resistance"),
                "system.resistance")
            parameters["capacitance"] = required("capacitance", "capacitance")
        else:
            coefficients = data.get("coefficients")
            if not isinstance(coefficients, list) or not 2 <= len(coefficients) <= 5:
                raise self.error("system.coefficients", "expected a list [a_n, …, a_0] of 2 to 5 "
                                 f"numbers (order 1 to 4), got {_shown(coefficients)}")
            values = []
            for i, item in enumerate(coefficients):
                values.append(self.quantity(item, "dimensionless", f"system.coefficients[{i}]"))
            if values[0] == 0:
                raise self.error("system.coefficients[0]", "the leading coefficient a_n must not be 0")
            for i, value in enumerate(values):
                parameters[f"a{len(values) - 1 - i}"] = value
        d = quantities.dimension
        dimensions = {"spring-mass-damper": (d("force"), d("length")),
                      "base-excitation": (d("acceleration"), d("length")),
                      "series-rlc": (d("voltage"), d("voltage")),
                      "ode": (d("dimensionless"), d("dimensionless"))}[model]
        return SystemSpec(model, MappingProxyType(parameters), regime, *dimensions)

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
        if shape not in SHAPES:
            close = difflib.get_close_matches(str(shape), SHAPES, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise self.error(f"{key}.shape", f"unknown shape {_shown(shape)} (expected one of: "
                                             f"{', '.join(SHAPES)}){hint}")
        self.check_keys(data, _LOAD_KEYS[shape] + _COMMON_LOAD_KEYS, key)
        at = self.non_negative(self.quantity(data.get("at", 0), "time", f"{key}.at"), f"{key}.at")
        label = data.get("label", "")
        if not isinstance(label, str):
            raise self.error(f"{key}.label", f"expected a string, got {_toml_type(label)}")
        values: dict[str, sympy.Expr] = {}
        time = quantities.dimension("time")
        per_time = load_dimension / time
        area = load_dimension * time

        def duration(name: str = "duration", required: bool = True) -> None:
            if name not in data:
                if required:
                    raise self.error(f"{key}.{name}", f"missing (a {shape} load needs {name})")
                return
            values[name] = self.positive(self.quantity(data[name], time, f"{key}.{name}"),
                                         f"{key}.{name}", "a positive time")

        def amplitude_or_impulse(area_factor: sympy.Expr | None) -> None:
            has_amplitude, has_impulse = "amplitude" in data, "impulse" in data
            if has_amplitude and has_impulse:
                raise self.error(f"{key}.impulse", "give amplitude or impulse, not both")
            if has_amplitude:
                values["amplitude"] = self.quantity(data["amplitude"], load_dimension,
                                                    f"{key}.amplitude")
            elif has_impulse and area_factor is not None:
                values["impulse"] = self.quantity(data["impulse"], area, f"{key}.impulse")
                values["amplitude"] = sympy.simplify(values["impulse"] / area_factor)
            else:
                what = "amplitude or impulse" if area_factor is not None else "amplitude"
                raise self.error(f"{key}.amplitude", f"missing (a {shape} load needs {what})")

        points: tuple[tuple[sympy.Expr, sympy.Expr], ...] = ()
        expression = None
        if shape == "step":
            amplitude_or_impulse(None)
        elif shape == "ramp":
            if "rate" not in data:
                raise self.error(f"{key}.rate", "missing (a ramp load needs rate)")
            values["rate"] = self.quantity(data["rate"], per_time, f"{key}.rate")
            duration(required=False)
        elif shape == "impulse":
            if "impulse" not in data:
                raise self.error(f"{key}.impulse", "missing (an impulse load needs impulse)")
            values["impulse"] = self.quantity(data["impulse"], area, f"{key}.impulse")
        elif shape in ("rectangle", "decay", "half-sine", "triangle"):
            duration()
            if shape == "triangle":
                peak_at = self.quantity(data.get("peak_at", "0.5"), "dimensionless",
                                        f"{key}.peak_at")
                if peak_at.is_negative or (peak_at - 1).is_positive:
                    raise self.error(f"{key}.peak_at", "must lie between 0 and 1 (a fraction of "
                                                       f"the duration), got {_plain(peak_at)}")
                values["peak_at"] = peak_at
            factor = {"rectangle": sympy.S.One, "decay": sympy.Rational(1, 2),
                      "triangle": sympy.Rational(1, 2),
                      "half-sine": 2 / sympy.pi}[shape] * values["duration"]
            amplitude_or_impulse(factor)
        elif shape == "trapezoid":
            for name in ("rise", "hold", "fall"):
                if name not in data:
                    raise self.error(f"{key}.{name}", f"missing (a trapezoid load needs {name})")
                values[name] = self.non_negative(self.quantity(data[name], time, f"{key}.{name}"),
                                                 f"{key}.{name}")
            if (values["rise"] + values["hold"] + values["fall"]).is_zero:
                raise self.error(f"{key}.hold", "rise + hold + fall must be positive")
            amplitude_or_impulse(None)
        elif shape == "table":
            points = self.table_points(data, key, load_dimension)
        elif shape == "formula":
            duration()
            if "expr" not in data or not isinstance(data["expr"], str):
                raise self.error(f"{key}.expr", "missing (a formula load needs expr, a string in tau)")
            scale = sympy.S.One
            if "unit" in data:
                if not isinstance(data["unit"], str):
                    raise self.error(f"{key}.unit", f"expected a unit string, got {_toml_type(data['unit'])}")
                try:
                    scale, dimension = quantities.unit_factor(data["unit"], key=f"{key}.unit")
                except CaseError as error:
                    raise error.located(file=self.file, key=f"{key}.unit",
                                        line=self.line_of(f"{key}.unit"))
                if dimension != load_dimension:
                    raise self.error(f"{key}.unit", f"expected a unit of "
                                     f"{quantities.describe(load_dimension)}, got "
                                     f"{quantities.describe(dimension)}")
            names = dict(self.names)
            names["tau"] = TAU
            try:
                expression = parse_expression(data["expr"], names=names, key=f"{key}.expr")
            except CaseError as error:
                raise error.located(file=self.file, key=f"{key}.expr", line=self.line_of(f"{key}.expr"))
            expression = expression * scale
        repeat = None
        if "repeat" in data:
            repeat = self.repeat(data["repeat"], f"{key}.repeat")
            length = LoadSpec(number, shape, at, values, points, expression).length()
            if shape in ("step", "ramp") and "duration" not in values:
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
                              f"{key}.every", "a positive time")
        return Repeat(count, every)

    def table_points(self, data: Mapping[str, Any], key: str,
                     load_dimension: Any) -> tuple[tuple[sympy.Expr, sympy.Expr], ...]:
        has_points, has_csv = "points" in data, "csv" in data
        if has_points == has_csv:
            raise self.error(f"{key}.points", "give exactly one of points or csv")
        time_factor, value_factor = sympy.S.One, sympy.S.One
        if "units" in data:
            units = data["units"]
            if not (isinstance(units, list) and len(units) == 2 and all(isinstance(u, str) for u in units)):
                raise self.error(f"{key}.units", f"expected two unit strings [time, value], got "
                                                 f"{_shown(units)}")
            try:
                time_factor, time_dimension = quantities.unit_factor(units[0], key=f"{key}.units")
                value_factor, value_dimension = quantities.unit_factor(units[1], key=f"{key}.units")
            except CaseError as error:
                raise error.located(file=self.file, key=f"{key}.units", line=self.line_of(f"{key}.units"))
            if time_dimension != quantities.dimension("time"):
                raise self.error(f"{key}.units", f"expected a time unit first, got "
                                                 f"{quantities.describe(time_dimension)}")
            if value_dimension != load_dimension:
                raise self.error(f"{key}.units", "expected a unit of "
                                 f"{quantities.describe(load_dimension)} second, got "
                                 f"{quantities.describe(value_dimension)}")
        rows: list[tuple[sympy.Expr, sympy.Expr]] = []
        where: list[str] = []
        if has_points:
            raw = data["points"]
            if not isinstance(raw, list) or len(raw) < 2:
                raise self.error(f"{key}.points", "expected a list of at least two [t, value] pairs")
            for i, pair in enumerate(raw):
                item_key = f"{key}.points[{i}]"
                if not isinstance(pair, list) or len(pair) != 2:
                    raise self.error(item_key, f"expected a [t, value] pair, got {_shown(pair)}")
                t = self.table_number(pair[0], "time", time_factor, item_key)
                v = self.table_number(pair[1], load_dimension, value_factor, item_key)
                rows.append((t, v))
                where.append(item_key)
            file_for_errors = None
        else:
            rows, where, file_for_errors = self.csv_points(data["csv"], key, load_dimension,
                                                           time_factor, value_factor)
        for i in range(1, len(rows)):
            step = rows[i][0] - rows[i - 1][0]
            if step.is_negative:
                message = f"times must not decrease (got {_plain(rows[i][0])} s after {_plain(rows[i - 1][0])} s)"
                raise self._row_error(where[i], message, file_for_errors)
            if step.is_zero and i >= 2 and (rows[i - 1][0] - rows[i - 2][0]).is_zero:
                raise self._row_error(where[i], f"duplicate time {_plain(rows[i][0])} s (a jump "
                                      "takes exactly two rows at the same time)", file_for_errors)
        if rows[0][0].is_negative:
            raise self._row_error(where[0], "times start at 0 or later (local to 'at')", file_for_errors)
        if (rows[-1][0] - rows[0][0]).is_zero:
            raise self.error(f"{key}.points", "the table spans no time")
        return tuple(rows)

    def _row_error(self, where: str, message: str, csv_file: str | None) -> CaseError:
        if csv_file is not None:
            return CaseError(message, file=csv_file, line=int(where))
        return self.error(where, message)

    def table_number(self, value: Any, dimension: Any, factor: sympy.Expr, key: str) -> sympy.Expr:
        if isinstance(value, str):
            return self.quantity(value, dimension, key)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.error(key, f"expected a number, got {_toml_type(value)}")
        return self.quantity(value, "dimensionless", key) * factor

    def csv_points(self, name: Any, key: str, load_dimension: Any, time_factor: sympy.Expr,
                   value_factor: sympy.Expr) -> tuple[list, list, str]:
        if not isinstance(name, str) or not name.strip():
            raise self.error(f"{key}.csv", f"expected a file name, got {_shown(name)}")
        path = (self.folder / name)
        try:
            content = path.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as error:
            reason = getattr(error, "strerror", None) or "not UTF-8 text"
            raise self.error(f"{key}.csv", f"cannot read {name} ({reason})")
        if "\x00" in content:
            raise CaseError("the CSV file contains a NUL byte", file=str(path))
        rows, where = [], []
        header_seen = False
        for number, row in enumerate(csv.reader(io.StringIO(content)), start=1):
            if not row or all(not cell.strip() for cell in row) or row[0].lstrip().startswith("#"):
                continue
            if len(row) != 2:
                raise CaseError(f"expected two columns (time, value), got {len(row)}",
                                file=str(path), line=number)
            cells = [cell.strip() for cell in row]
            if not header_seen and not rows and not _looks_numeric(cells[0]):
                header_seen = True
                time_factor, value_factor = self.csv_header(cells, path, number, load_dimension,
                                                            time_factor, value_factor)
                continue
            try:
                t = self.quantity(cells[0], "dimensionless", "time") * time_factor
                v = self.quantity(cells[1], "dimensionless", "value") * value_factor
            except CaseError as error:
                raise CaseError(error.message, file=str(path), line=number)
            rows.append((t, v))
            where.append(str(number))
            if len(rows) > 200000:
                raise CaseError("more than 200000 rows", file=str(path), line=number)
        if len(rows) < 2:
            raise self.error(f"{key}.csv", f"{name} holds fewer than two data rows")
        return rows, where, str(path)

    def csv_header(self, cells: list[str], path: Path, number: int, load_dimension: Any,
                   time_factor: sympy.Expr, value_factor: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr]:
        """A header row such as ``t [ms], F [kN]`` may carry the units."""
        factors = [time_factor, value_factor]
        expected = [quantities.dimension("time"), load_dimension]
        for i, cell in enumerate(cells):
            match = re.search(r"\[([^\]]+)\]|\(([^)]+)\)", cell)
            if not match:
                continue
            unit = match.group(1) or match.group(2)
            try:
                factor, dimension = quantities.unit_factor(unit, key="header")
            except CaseError as error:
                raise CaseError(error.message, file=str(path), line=number)
            if dimension != expected[i]:
                raise CaseError(f"column {i + 1}: expected a unit of "
                                f"{quantities.describe(expected[i])}, got "
                                f"{quantities.describe(dimension)}", file=str(path), line=number)
            factors[i] = factor
        return factors[0], factors[1]

    def initial(self, data: Any, system: SystemSpec) -> tuple[sympy.Expr, ...] | None:
        if data is None:
            return None
        data = self.table(data, "initial")
        self.check_keys(data, _INITIAL_KEYS, "initial")
        order = _order(system)
        dimensions = _initial_dimensions(system, order)
        if "values" in data:
            if "displacement" in data or "velocity" in data:
                raise self.error("initial.values", "give values or displacement/velocity, not both")
            raw = data["values"]
            if not isinstance(raw, list) or len(raw) != order:
                raise self.error("initial.values", f"expected {order} values x(0)…x^({order - 1})(0), "
                                                   f"got {_shown(raw)}")
            return tuple(self.quantity(v, dimensions[i], f"initial.values[{i}]")
                         for i, v in enumerate(raw))
        if system.model not in ("spring-mass-damper", "base-excitation"):
            raise self.error("initial.displacement", "displacement/velocity are for mechanical "
                                                     "models; use values = […]")
        result = [sympy.S.Zero] * order
        if "displacement" in data:
            result[0] = self.quantity(data["displacement"], dimensions[0], "initial.displacement")
        if "velocity" in data:
            result[1] = self.quantity(data["velocity"], dimensions[1], "initial.velocity")
        return tuple(result)

    def report(self, data: Mapping[str, Any]) -> ReportSpec:
        self.check_keys(data, _REPORT_KEYS, "report")
        until = None
        if "until" in data:
            until = self.positive(self.quantity(data["until"], "time", "report.until"),
                                  "report.until", "a positive time")
        units: dict[str, str] = {}
        if "units" in data:
            table = self.table(data["units"], "report.units")
            self.check_keys(table, _DISPLAY_QUANTITIES, "report.units")
            for name, unit in table.items():
                if not isinstance(unit, str):
                    raise self.error(f"report.units.{name}", f"expected a unit string, got {_toml_type(unit)}")
                try:
                    quantities.unit_factor(unit, key=f"report.units.{name}")
                except CaseError as error:
                    raise error.located(file=self.file, key=f"report.units.{name}",
                                        line=self.line_of(f"report.units.{name}"))
                units[name] = unit
        return ReportSpec(until, MappingProxyType(units))


def _function_names() -> tuple[str, ...]:
    from .expressions import FUNCTIONS
    return tuple(FUNCTIONS)


def _order(system: SystemSpec) -> int:
    if system.model == "first-order":
        return 1
    if system.model == "ode":
        return len(system.parameters) - 1
    return 2


def _initial_dimensions(system: SystemSpec, order: int) -> list[Any]:
    base = system.response_dimension
    time = quantities.dimension("time")
    return [base / time**i for i in range(order)]


def _has_unit(text: str) -> bool:
    return bool(re.fullmatch(r"\s*[-+]?[0-9.eE+-]+\s+[A-Za-z].*", text))


def _looks_numeric(cell: str) -> bool:
    return bool(re.fullmatch(r"[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?", cell))


def _toml_type(value: Any) -> str:
    return {bool: "a boolean", int: "an integer", float: "a number", str: "a string",
            list: "an array", dict: "a table"}.get(type(value), type(value).__name__)


def _shown(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _plain(value: sympy.Expr) -> str:
    if value.free_symbols:
        return str(value)
    number = sympy.N(value, 6)
    return f"{float(number):g}"

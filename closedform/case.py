"""The case model and its loading from TOML: the only stage that reads case files.

A ``Case`` holds exact SI numbers (sympy Rationals) or expressions in declared symbols,
never floats and never raw strings that still need interpreting. Every problem in a case
file becomes a ``CaseError`` naming the file, the TOML key and, where it can be found, the
line.

Case files are untrusted text. Nothing read here is ever evaluated: values go through the
whitelisted grammar of ``expressions`` and the unit reader of ``quantities``. Sizes are
limited before any work is done (the ``MAX_*`` constants: file sizes, points, breakpoints,
loads, symbols, free text), a CSV named by a table load must be a regular file in the case
file's folder or below it (no absolute paths, no '..', no symbolic link leading out), and
file names and keys from the file are escaped where they appear in a message, so a message
stays one line and cannot drive the terminal.
"""

from __future__ import annotations

import csv
import datetime
import difflib
import hashlib
import io
import json
import os
import re
import stat
import tomllib
import unicodedata
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

import sympy

from . import quantities
from .errors import CaseError, ExpressionError
from .expressions import parse_expression, parse_number, quote
from .resistance import SPRING_MODELS, read_resistance

MODELS = ("spring-mass-damper", "base-excitation", "first-order", "series-rlc", "ode")
SHAPES = ("step", "ramp", "impulse", "rectangle", "triangle", "decay", "half-sine",
          "trapezoid", "table", "formula")
REGIMES = ("undamped", "under-damped", "critically-damped", "over-damped")
PULSE_SHAPES = ("rectangle", "triangle", "decay", "half-sine", "trapezoid", "table", "formula")

TAU = sympy.Symbol("tau", real=True)

_TOP_KEYS = ("title", "reference", "system", "initial", "load", "report", "symbols", "claims")
_SYSTEM_KEYS = {
    "spring-mass-damper": ("model", "mass", "stiffness", "damping", "damping_ratio", "regime",
                           "resistance"),
    "base-excitation": ("model", "mass", "stiffness", "damping", "damping_ratio", "regime",
                        "resistance"),
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
_REPORT_KEYS = ("until", "units", "numbers", "digits", "paper")
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
_INITIAL_KEYS = ("values", "displacement", "velocity")
# Claim names are the result names of the JSON result, known only once the case is derived
# (closedform.claims checks them then); here a claim key must merely look like one.
_CLAIM_NAME_RE = re.compile(r"[a-z][a-z0-9_]{0,63}")

# Limits that keep a hostile or mistaken case cheap to refuse, each named in its message.
#: Largest case file read, in bytes.
MAX_CASE_BYTES = 1_000_000
#: Largest CSV file read for a table load, in bytes.
MAX_CSV_BYTES = 2_000_000
#: Most points in one table load (inline or CSV).
MAX_TABLE_POINTS = 10_000
#: Most breakpoints (starts, corners and ends of every occurrence of every load) in one case.
MAX_BREAKPOINTS = 10_000
#: Longest title, reference or label, in characters.
MAX_TEXT = 500
#: Most [[load]] tables in one case.
MAX_LOADS = 1000
#: Most names declared under [symbols].
MAX_SYMBOLS = 100
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
_BARE_KEY_RE = re.compile(r"[A-Za-z0-9_-]+")


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
    numbers: str = "auto"       # auto | exact | decimal: how the sheet prints numbers
    digits: int = 6             # significant digits of decimals on the sheet
    paper: str = "a4"           # a4 | letter


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
        return _Reader(display_name(name or "<dict>"), "", Path.cwd()).case(source)
    if text is None:
        path = Path(source)
        shown = display_name(name or str(path))
        raw = read_limited(path, MAX_CASE_BYTES, shown, "the case file")
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError as error:
            line = raw[:error.start].count(b"\n") + 1
            raise CaseError(f"the case file is not UTF-8 text (expected UTF-8, got byte "
                            f"0x{raw[error.start]:02X})", file=shown, line=line)
        return _parse(text, shown, path.parent, hashlib.sha256(raw).hexdigest())
    return _parse(text, display_name(name or "<string>"), Path.cwd(),
                  hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest())


def locate(error: CaseError, path: str | Path) -> CaseError:
    """``error`` about the case file at ``path``, with the file and (where its key can be
    found in the file) the line filled in.

    Later stages (the model, the load rewrite, the window) raise CaseErrors that know the
    key but not the file; the command line shows them located like those of loading. An
    error about another file (a CSV, an option) is returned as it is.
    """
    shown = display_name(str(path))
    if error.file not in (None, "<case>", shown):
        return error
    line = error.line
    if line is None and error.key:
        try:
            text = read_limited(Path(path), MAX_CASE_BYTES, shown, "the case file").decode()
        except (CaseError, UnicodeDecodeError):
            text = ""
        line = _Reader(shown, text, Path(path).parent).line_of(error.key)
    return CaseError(error.message, file=shown, key=error.key, line=line)


def display_name(path: str) -> str:
    """A file name as it may appear in a one-line message: unchanged when printable,
    otherwise with control and invisible characters escaped (a file name from someone else
    must not break the line or drive the terminal)."""
    if path.isprintable():
        return path
    return "".join(c if c.isprintable() else ascii(c)[1:-1] for c in path)


def read_limited(path: Path, limit: int, shown: str, what: str, *, key: str | None = None,
                 line: int | None = None, file: str | None = None) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes, else a CaseError.

    The file is opened without blocking and checked to be a regular file before anything is
    read, so a FIFO, a device or a folder given as a case or CSV file cannot hang the tool or
    feed it endless data. Errors name ``file`` (default: ``shown``), ``key`` and ``line``.
    """
    where = {"file": file or shown, "key": key, "line": line}
    try:
        descriptor = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except (OSError, ValueError) as error:
        reason = getattr(error, "strerror", None) or "the name holds a NUL character"
        raise CaseError(f"cannot read {what} ({reason})", **where)
    info = os.fstat(descriptor)
    if not stat.S_ISREG(info.st_mode):
        os.close(descriptor)
        kind = "a folder" if stat.S_ISDIR(info.st_mode) else "a special file"
        raise CaseError(f"cannot read {what} (expected a regular file, got {kind})", **where)
    with os.fdopen(descriptor, "rb") as stream:
        if info.st_size > limit:
            raise CaseError(f"{what} is too large (at most {limit} bytes, got {info.st_size})",
                            **where)
        try:
            raw = stream.read(limit + 1)
        except OSError as error:
            raise CaseError(f"cannot read {what} ({error.strerror})", **where)
    if len(raw) > limit:
        raise CaseError(f"{what} is too large (at most {limit} bytes)", **where)
    return raw


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
    # A UTF-8 byte-order mark at the very start (as some editors write one) is not part of
    # the TOML document; anywhere else it is refused like any other invisible character.
    if text.startswith("\ufeff"):
        text = text[1:]
    if "\x00" in text:
        line = text[:text.index("\x00")].count("\n") + 1
        raise CaseError("the case file contains a NUL byte (expected text)", file=file, line=line)
    if len(text) > MAX_CASE_BYTES:
        raise CaseError(f"the case file is too large (at most {MAX_CASE_BYTES} characters, "
                        f"got {len(text)})", file=file)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        message = str(error)
        match = re.search(r"\(at line (\d+), column (\d+)\)", message)
        line = int(match.group(1)) if match else None
        message = re.sub(r"\s*\(at line \d+, column \d+\)", "", message)
        # tomllib names a table by its Python tuple, ('load', 'repeat'): show load.repeat
        message = re.sub(r"\((?:'[^']*'(?:, )?)+,?\)",
                         lambda m: ".".join(re.findall(r"'([^']*)'", m.group())), message)
        column = f" (column {match.group(2)})" if match else ""
        raise CaseError(f"TOML syntax error: {message}{column}", file=file, line=line)
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
        lines = self.text.split("\n")     # TOML's newlines only, as tomllib counts them
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
            pattern = re.compile(rf"\s*\[\[?\s*{re.escape(parts[0])}\s*\]")
            if len(parts) > 1:      # a sub-table of its own: [system.resistance]
                sub = re.compile(rf"\s*\[\s*{re.escape(parts[0])}\s*\.\s*"
                                 rf"{re.escape(parts[1])}\s*\]")
                if any(sub.match(line) for line in lines):
                    pattern, parts = sub, parts[1:]
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
        initial = self.initial(data.get("initial"), system)
        report = self.report(self.table(data.get("report", {}), "report"), system)
        claims = self.table(data.get("claims", {}), "claims")
        for name in claims:
            if not _CLAIM_NAME_RE.fullmatch(name):
                raise self.error(f"claims.{_key_part(name)}",
                                 f"not a claim name {quote(name)} (expected a result name of the "
                                 "JSON result such as peak or dlf, or response, at, tolerance)")
        return Case(title=title.strip(), reference=reference.strip(), system=system,
                    loads=loads, initial=initial, symbols=symbols, report=report,
                    claims=MappingProxyType(dict(claims)), source=self.file, sha256=self.digest)

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
        model = data.get("model")
        if model is None:
            raise self.error("system.model", f"missing (expected one of: {', '.join(MODELS)})")
        if model == "member":           # a beam as its equivalent oscillator (issue 16)
            return self.member(data)
        if model not in MODELS:
            close = difflib.get_close_matches(str(model), MODELS, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise self.error("system.model", f"unknown model {_shown(model)} (expected one of: "
                                             f"{', '.join(MODELS)}){hint}")
        if isinstance(data.get("resistance"), Mapping) and model not in SPRING_MODELS:
            read_resistance(data["resistance"], model, None, self.quantity, self.error, self.table)
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
                                 f"system.{name}", dimension=dimension)

        if model in ("spring-mass-damper", "base-excitation"):
            parameters["mass"] = required("mass", "mass")
            parameters["stiffness"] = required("stiffness", "stiffness")
            if "damping" in data and "damping_ratio" in data:
                raise self.error("system.damping_ratio", "give damping or damping_ratio, not both")
            if "damping" in data:
                parameters["damping"] = self.non_negative(
                    self.quantity(data["damping"], "damping", "system.damping"), "system.damping",
                    "damping")
            elif "damping_ratio" in data:
                ratio = self.non_negative(self.quantity(data["damping_ratio"], "dimensionless",
                                                        "system.damping_ratio"),
                                          "system.damping_ratio")
                parameters["damping_ratio"] = ratio
                parameters["damping"] = 2 * ratio * sympy.sqrt(parameters["stiffness"]
                                                                * parameters["mass"])
            else:
                parameters["damping"] = sympy.S.Zero
            if "resistance" in data:
                resistance = read_resistance(data["resistance"], model, parameters["stiffness"],
                                             self.quantity, self.error, self.table)
                dimensions = ((quantities.dimension("force"), quantities.dimension("length"))
                              if model == "spring-mass-damper" else
                              (quantities.dimension("acceleration"), quantities.dimension("length")))
                return SystemSpec(model, MappingProxyType(parameters), regime, *dimensions,
                                  resistance)
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
                "system.resistance", "resistance")
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
                          load_dimension, d("length"), resistance, equivalent)

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
        at = self.non_negative(self.quantity(data.get("at", 0), "time", f"{key}.at"), f"{key}.at",
                               "time")
        label = data.get("label", "")
        if not isinstance(label, str):
            raise self.error(f"{key}.label", f"expected a string, got {_toml_type(label)}")
        self.free_text(label, f"{key}.label")
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
                                         f"{key}.{name}", "a positive time", time)

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
                    raise self.error(f"{key}.peak_at", "must lie between 0 and 1 (expected a "
                                                       "fraction of the duration, got "
                                                       f"{_plain(peak_at)})")
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
                                                 f"{key}.{name}", time)
            if (values["rise"] + values["hold"] + values["fall"]).is_zero:
                raise self.error(f"{key}.hold", "rise + hold + fall must be positive (expected a "
                                                "pulse that lasts, got 0 s in all)")
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
                              f"{key}.every", "a positive time", "time")
        return Repeat(count, every)

    def table_points(self, data: Mapping[str, Any], key: str,
                     load_dimension: Any) -> tuple[tuple[sympy.Expr, sympy.Expr], ...]:
        has_points, has_csv = "points" in data, "csv" in data
        if not has_points and not has_csv:
            raise self.error(f"{key}.points", "missing (a table load needs points or csv)")
        if has_points and has_csv:
            raise self.error(f"{key}.csv", "give points or csv, not both")
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
            if len(raw) > MAX_TABLE_POINTS:
                raise self.error(f"{key}.points", f"too many points (at most {MAX_TABLE_POINTS}, "
                                                  f"got {len(raw)})")
            for i, pair in enumerate(raw):
                item_key = f"{key}.points[{i}]"
                if not isinstance(pair, list) or len(pair) != 2:
                    raise self.error(item_key, f"expected a [t, value] pair, got {_shown(pair)}")
                t = self.table_number(pair[0], "time", time_factor, item_key)
                v = self.table_number(pair[1], load_dimension, value_factor, item_key)
                rows.append((t, v))
                where.append(item_key)
            csv_file = None
        else:
            rows, where, csv_file = self.csv_points(data["csv"], key, load_dimension,
                                                    time_factor, value_factor)
        csv_key = f"{key}.csv"
        for i in range(1, len(rows)):
            step = rows[i][0] - rows[i - 1][0]
            if step.is_negative:
                message = (f"times must not decrease (got {_plain(rows[i][0])} s after "
                           f"{_plain(rows[i - 1][0])} s)")
                raise self._row_error(where[i], message, csv_file, csv_key)
            if step.is_zero and i >= 2 and (rows[i - 1][0] - rows[i - 2][0]).is_zero:
                raise self._row_error(where[i], f"duplicate time {_plain(rows[i][0])} s (a jump "
                                      "takes exactly two rows at the same time)", csv_file, csv_key)
        if rows[0][0].is_negative:
            raise self._row_error(where[0], "times start at 0 or later (local to 'at')", csv_file,
                                  csv_key)
        if (rows[-1][0] - rows[0][0]).is_zero:
            raise self.error(f"{key}.points" if csv_file is None else csv_key,
                             "the table spans no time")
        return tuple(rows)

    def _row_error(self, where: str, message: str, csv_file: str | None,
                   csv_key: str) -> CaseError:
        if csv_file is not None:
            return CaseError(message, file=csv_file, key=csv_key, line=int(where))
        return self.error(where, message)

    def table_number(self, value: Any, dimension: Any, factor: sympy.Expr, key: str) -> sympy.Expr:
        if isinstance(value, str):
            return self.quantity(value, dimension, key)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.error(key, f"expected a number, got {_toml_type(value)}")
        return self.quantity(value, "dimensionless", key) * factor

    def csv_path(self, name: Any, key: str) -> tuple[Path, str]:
        """The CSV file a table names, refused unless it lies in the case file's folder or
        below it: no absolute paths, no '..', no symbolic link leading elsewhere."""
        if not isinstance(name, str) or not name.strip():
            raise self.error(key, f"expected a file name, got {_shown(name)}")
        if not name.isprintable():
            raise self.error(key, f"expected a file name of printable characters, got "
                                  f"{quote(name)}")
        relative = Path(name)
        if relative.is_absolute() or relative.drive or relative.root:
            raise self.error(key, f"absolute paths are refused (expected a file name relative "
                                  f"to the case file's folder, got {quote(name)})")
        if ".." in relative.parts:
            raise self.error(key, f"paths leaving the case folder are refused (expected a file "
                                  f"in the case file's folder or below it, got {quote(name)})")
        path = self.folder / relative
        try:
            inside = path.resolve().is_relative_to(self.folder.resolve())
        except (OSError, RuntimeError, ValueError):   # a loop of links, say
            inside = False
        if not inside:
            raise self.error(key, f"{quote(name)} leads outside the case folder through a "
                                  "symbolic link (expected a file in the case file's folder "
                                  "or below it)")
        return path, display_name(str(path))

    def csv_points(self, name: Any, key: str, load_dimension: Any, time_factor: sympy.Expr,
                   value_factor: sympy.Expr) -> tuple[list, list, str]:
        """The rows of a two-column CSV (time, value), with the CSV line of each row."""
        csv_key = f"{key}.csv"
        path, shown = self.csv_path(name, csv_key)
        raw = read_limited(path, MAX_CSV_BYTES, shown, quote(name), key=csv_key,
                           line=self.line_of(csv_key), file=self.file)

        def problem(message: str, line: int | None) -> CaseError:
            return CaseError(message, file=shown, key=csv_key, line=line)

        if b"\x00" in raw:
            raise problem("the CSV file contains a NUL byte (expected text)",
                          raw[:raw.index(b"\x00")].count(b"\n") + 1)
        try:
            content = raw.decode("utf-8-sig")
        except UnicodeDecodeError as error:
            offset = error.start + (3 if raw.startswith(b"\xef\xbb\xbf") else 0)
            raise problem(f"not UTF-8 text (expected UTF-8, got byte 0x{raw[offset]:02X})",
                          raw[:offset].count(b"\n") + 1)
        reader = csv.reader(io.StringIO(content, newline=""))
        cells_by_line: list[tuple[int, list[str]]] = []
        header: tuple[int, list[str]] | None = None
        try:
            for row in reader:
                number = reader.line_num
                if not row or all(not cell.strip() for cell in row) \
                        or row[0].lstrip().startswith("#"):
                    continue
                if len(row) != 2:
                    raise problem(f"expected two columns (time, value), got {len(row)}", number)
                cells = [cell.strip() for cell in row]
                if header is None and not cells_by_line and not _looks_numeric(cells[0]):
                    header = (number, cells)
                    continue
                cells_by_line.append((number, cells))
                if len(cells_by_line) > MAX_TABLE_POINTS:
                    raise problem(f"too many rows (at most {MAX_TABLE_POINTS} data rows)", number)
        except csv.Error as error:
            raise problem(f"not a readable CSV row ({error})", reader.line_num)
        if header is not None:
            time_factor, value_factor = self.csv_header(header[1], shown, csv_key, header[0],
                                                        load_dimension, time_factor,
                                                        value_factor)
        if len(cells_by_line) < 2:
            raise self.error(csv_key, f"{quote(name)} holds fewer than two data rows "
                                      f"(expected at least two rows of time, value)")
        rows, where = [], []
        factors = (time_factor, value_factor)
        for number, cells in cells_by_line:
            values = []
            for column, cell in enumerate(cells, start=1):
                try:
                    values.append(_csv_number(cell, column) * factors[column - 1])
                except CaseError as error:
                    raise problem(error.message, number)
            rows.append((values[0], values[1]))
            where.append(str(number))
        return rows, where, shown

    def csv_header(self, cells: list[str], shown: str, csv_key: str, number: int,
                   load_dimension: Any, time_factor: sympy.Expr,
                   value_factor: sympy.Expr) -> tuple[sympy.Expr, sympy.Expr]:
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
                raise CaseError(f"column {i + 1}: {error.message}", file=shown, key=csv_key,
                                line=number)
            if dimension != expected[i]:
                raise CaseError(f"column {i + 1}: wrong unit in the header (expected a unit of "
                                f"{quantities.describe(expected[i])}, got "
                                f"{quantities.describe(dimension)})", file=shown, key=csv_key,
                                line=number)
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
        return ReportSpec(until, MappingProxyType(units), numbers, digits, paper)


def _shown_value(value: Any) -> str:
    """A TOML value as a message shows it: strings quoted, others by their TOML type."""
    if isinstance(value, str):
        return repr(value[:40])
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, int):
        return str(value)
    return _toml_type(value)


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


def _csv_number(cell: str, column: int) -> sympy.Expr:
    """The exact value of one CSV cell: a plain number, nothing else."""
    if _looks_numeric(cell):
        try:
            return parse_number(cell, key=None)
        except ExpressionError as error:
            message = re.sub(r" at column \d+", "", error.message)
            raise CaseError(f"column {column}: {message}")
    if re.fullmatch(r"[-+]?[0-9.]+([eE][-+]?\d+)?\s*\S.*", cell):
        raise CaseError(f"column {column}: not a plain number (expected a number, with the "
                        f"units in the header such as 'time [ms], force [kN]', got {quote(cell)})")
    raise CaseError(f"column {column}: not a number (expected a number such as 0.25 or "
                    f"-1.5e3, got {quote(cell)})")


def _toml_type(value: Any) -> str:
    return {bool: "a boolean", int: "an integer", float: "a number", str: "a string",
            list: "an array", dict: "a table", datetime.datetime: "a date-time",
            datetime.date: "a date", datetime.time: "a time of day"}.get(type(value),
                                                                         type(value).__name__)


def _shown(value: Any) -> str:
    """A TOML value for a one-line message: its repr, ASCII only (so a look-alike letter
    shows as an escape), shortened."""
    try:
        text = ascii(value)
    except RecursionError:
        text = f"<{_toml_type(value)} nested too deeply>"
    return _shown_text(text)


def _plain(value: sympy.Expr, dimension: str | Any | None = None) -> str:
    """A value for a message: 6 significant digits, with its SI unit when ``dimension`` is
    given and the value is not zero (zero is zero in every unit)."""
    if value.free_symbols:
        return _shown_text(str(value))
    number = sympy.N(value, 6)
    text = f"{float(number):g}"
    if dimension is None or value.is_zero:
        return text
    if isinstance(dimension, str):
        dimension = quantities.dimension(dimension)
    unit = quantities.si_unit_text(dimension)
    return text if unit == "1" else f"{text} {unit}"


def _key_part(name: str) -> str:
    """A TOML key as written in a message: bare when it can be, else quoted and escaped;
    shortened past 40 characters."""
    shown = name if len(name) <= 40 else name[:40]
    if not _BARE_KEY_RE.fullmatch(shown):
        shown = json.dumps(shown, ensure_ascii=True)
    return shown + ("..." if len(name) > 40 else "")


def _shown_text(text: str) -> str:
    return text if len(text) <= 60 else text[:57] + "..."


def _corners(load: LoadSpec) -> int:
    """How many breakpoints one occurrence of a load brings (start, corners, end)."""
    if load.shape == "table":
        return len(load.points)
    return {"step": 1, "impulse": 1, "ramp": 2, "triangle": 3, "trapezoid": 4}.get(load.shape, 2)

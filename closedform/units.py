"""Units and dimensions, light: pint's definitions read with exact fractions, no sympy.

A :class:`Dimension` maps base dimensions to exact exponents, such as ``{'[mass]': 1,
'[time]': -2}``. Unit texts (of case files, of record headers) are checked for shape here
before pint reads them and looked up to an exact :class:`fractions.Fraction` factor to
coherent SI. ``closedform.quantities`` builds the exact sympy magnitudes of case values on
this module; a route that needs only floats (the record spectrum) uses it without importing
sympy.

pint is the only source of unit names and factors. Importing pint and loading its registry
cost about 0.13 s a run, so the factors pint gave are kept on disk
(:class:`ConversionCache`), keyed by pint's installed files and by this module's own source:
a run whose units are all known there does not import pint at all.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import re
import tempfile
from collections.abc import Iterator, Mapping
from fractions import Fraction
from pathlib import Path
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

from .errors import quote

if TYPE_CHECKING:
    import pint


class Dimension:
    """A physical dimension: the exact exponent of each base dimension ('[mass]',
    '[length]', '[time]', '[current]', …), zero exponents left out. Immutable and hashable;
    ``*``, ``/`` and ``**`` (by an int or a Fraction) give the dimension of a product, a
    quotient and a power. For text use :func:`describe` or :func:`si_unit_text`."""

    __slots__ = ("_exponents", "_hash")
    _exponents: tuple[tuple[str, Fraction], ...]
    _hash: int

    def __init__(self, exponents: Mapping[str, Any] | None = None) -> None:
        powers = tuple(sorted((base, Fraction(power)) for base, power
                              in (exponents or {}).items() if power != 0))
        object.__setattr__(self, "_exponents", powers)
        object.__setattr__(self, "_hash", hash(powers))

    def __setattr__(self, name: str, value: Any) -> None:
        raise AttributeError("a Dimension is immutable")

    def __reduce__(self) -> tuple[type, tuple[dict[str, Fraction]]]:
        return Dimension, (dict(self._exponents),)

    def items(self) -> tuple[tuple[str, Fraction], ...]:
        return self._exponents

    def __iter__(self) -> Iterator[str]:
        return (base for base, _ in self._exponents)

    def __len__(self) -> int:
        return len(self._exponents)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Dimension) and self._exponents == other._exponents

    def __hash__(self) -> int:
        return self._hash

    def __mul__(self, other: Dimension) -> Dimension:
        powers = dict(self._exponents)
        for base, power in other._exponents:
            powers[base] = powers.get(base, 0) + power
        return Dimension(powers)

    def __truediv__(self, other: Dimension) -> Dimension:
        return self * other ** -1

    def __pow__(self, exponent: int | Fraction) -> Dimension:
        exponent = Fraction(exponent)
        return Dimension({base: power * exponent for base, power in self._exponents})

    def __repr__(self) -> str:
        return f"Dimension({dict(self._exponents)!r})"

#: Longest unit text accepted, in characters.
MAX_UNIT_LENGTH = 100

_BASES = ("[mass]", "[length]", "[time]", "[current]", "[temperature]", "[substance]",
          "[luminosity]")
_BASE_NAMES = {"[mass]": "mass", "[length]": "length", "[time]": "time",
               "[current]": "current", "[temperature]": "temperature",
               "[substance]": "amount", "[luminosity]": "luminosity"}
_BASE_UNITS = {"[mass]": "kg", "[length]": "m", "[time]": "s", "[current]": "A",
               "[temperature]": "K", "[substance]": "mol", "[luminosity]": "cd"}


def _make(**powers: int) -> Dimension:
    return Dimension({f"[{base}]": power for base, power in powers.items()})


DIMENSIONLESS = _make()
TIME = _make(time=1)
MASS = _make(mass=1)
LENGTH = _make(length=1)
CURRENT = _make(current=1)
FORCE = _make(mass=1, length=1, time=-2)
STIFFNESS = FORCE / LENGTH
DAMPING = FORCE * TIME / LENGTH
VELOCITY = LENGTH / TIME
ACCELERATION = LENGTH / TIME ** 2
IMPULSE = FORCE * TIME
VOLTAGE = _make(mass=1, length=2, time=-3, current=-1)
RESISTANCE = VOLTAGE / CURRENT
INDUCTANCE = VOLTAGE * TIME / CURRENT
CAPACITANCE = CURRENT * TIME / VOLTAGE
FREQUENCY = DIMENSIONLESS / TIME
CHARGE = CURRENT * TIME
ENERGY = FORCE * LENGTH
POWER = ENERGY / TIME
PRESSURE = FORCE / LENGTH ** 2
TEMPERATURE = _make(temperature=1)

#: Every named dimension, by the name :func:`dimension` accepts.
DIMENSIONS: Mapping[str, Dimension] = MappingProxyType({
    "dimensionless": DIMENSIONLESS, "time": TIME, "mass": MASS, "length": LENGTH,
    "current": CURRENT, "force": FORCE, "stiffness": STIFFNESS, "damping": DAMPING,
    "velocity": VELOCITY, "acceleration": ACCELERATION, "impulse": IMPULSE,
    "voltage": VOLTAGE, "resistance": RESISTANCE, "inductance": INDUCTANCE,
    "capacitance": CAPACITANCE, "frequency": FREQUENCY, "charge": CHARGE,
    "energy": ENERGY, "power": POWER, "pressure": PRESSURE, "temperature": TEMPERATURE,
})

# How each named dimension reads in a message and which SI unit labels it.
_DESCRIPTIONS = {
    DIMENSIONLESS: "dimensionless", TIME: "time", MASS: "mass", LENGTH: "length",
    CURRENT: "current", FORCE: "force", STIFFNESS: "force/length",
    DAMPING: "force*time/length", VELOCITY: "length/time", ACCELERATION: "length/time^2",
    IMPULSE: "force*time", VOLTAGE: "voltage", RESISTANCE: "resistance",
    INDUCTANCE: "inductance", CAPACITANCE: "capacitance", FREQUENCY: "1/time",
    CHARGE: "charge", ENERGY: "energy", POWER: "power", PRESSURE: "force/length^2",
    TEMPERATURE: "temperature",
}
_SI_UNITS = {
    DIMENSIONLESS: "1", TIME: "s", MASS: "kg", LENGTH: "m", CURRENT: "A", FORCE: "N",
    STIFFNESS: "N/m", DAMPING: "N*s/m", VELOCITY: "m/s", ACCELERATION: "m/s^2",
    IMPULSE: "N*s", VOLTAGE: "V", RESISTANCE: "ohm", INDUCTANCE: "H", CAPACITANCE: "F",
    FREQUENCY: "1/s", CHARGE: "C", ENERGY: "J", POWER: "W", PRESSURE: "Pa",
    TEMPERATURE: "K",
    # rates and other derived forms, as the trades write them
    PRESSURE / TIME: "Pa/s", PRESSURE * TIME: "Pa*s", FORCE / TIME: "N/s",
    ACCELERATION / TIME: "m/s^3", VOLTAGE / TIME: "V/s", CURRENT / TIME: "A/s",
    TEMPERATURE / TIME: "K/s", POWER / TIME: "W/s", ENERGY * TIME: "J*s",
    VOLTAGE * TIME: "V*s", STIFFNESS / TIME: "N/(m*s)", PRESSURE / LENGTH: "Pa/m",
    ACCELERATION * TIME: "m/s", TEMPERATURE * TIME: "K*s", CURRENT * TIME ** 2: "C*s",
}

# Unit characters outside ASCII that the trades write, and the ASCII pint reads.
_UNIT_CHARACTERS = (("°C", "delta_degC"), ("°F", "delta_degF"), ("°", "deg"), ("Ω", "ohm"),
                    ("\u2126", "ohm"), ("·", "*"), ("⋅", "*"))
_MICRO_RE = re.compile(r"[µμ](?=[A-Za-zΩ\u2126])")


def ascii_unit(text: str) -> str:
    """A unit text with µ/μ (micro, before a unit name), Ω (ohm), ° (degree; °C and °F as
    temperature differences) and the middle dot spelled the way pint reads them."""
    text = _MICRO_RE.sub("u", text)
    for character, spelled in _UNIT_CHARACTERS:
        text = text.replace(character, spelled)
    return text


def dimension(name: str) -> Dimension:
    """The dimension called ``name`` ("force", "stiffness", …; see :data:`DIMENSIONS`)."""
    try:
        return DIMENSIONS[name]
    except KeyError:
        raise ValueError(f"unknown dimension name {name!r} "
                         f"(expected one of {', '.join(DIMENSIONS)})") from None


def multiply_dimensions(*dimensions: Dimension) -> Dimension:
    """The dimension of a product of quantities."""
    result = DIMENSIONLESS
    for item in dimensions:
        result = result * item
    return result


def divide_dimensions(numerator: Dimension, denominator: Dimension) -> Dimension:
    """The dimension of a quotient of quantities."""
    return numerator / denominator


def power_dimension(base: Dimension, exponent: Any) -> Dimension:
    """The dimension of a quantity raised to a fixed rational power (``sqrt`` is 1/2); the
    exponent is an int, a Fraction or a sympy Rational."""
    if hasattr(exponent, "p") and hasattr(exponent, "q"):     # a sympy Rational
        exponent = Fraction(int(exponent.p), int(exponent.q))
    if exponent == 0:
        return DIMENSIONLESS
    return base ** Fraction(exponent)


def _power_text(name: str, exponent: Any) -> str:
    exponent = Fraction(exponent)
    if exponent == 1:
        return name
    if exponent.denominator == 1:
        return f"{name}^{exponent.numerator}"
    return f"{name}^({exponent.numerator}/{exponent.denominator})"


def _product_text(dim: Dimension, labels: Mapping[str, str]) -> str:
    order = {base: index for index, base in enumerate(_BASES)}
    items = sorted(dim.items(), key=lambda item: (order.get(item[0], len(order)), item[0]))

    def label(base: str) -> str:
        return labels.get(base, base.strip("[]"))

    upper = [_power_text(label(base), power) for base, power in items if power > 0]
    lower = [_power_text(label(base), -power) for base, power in items if power < 0]
    top = "*".join(upper) or "1"
    if not lower:
        return top
    bottom = lower[0] if len(lower) == 1 else "(" + "*".join(lower) + ")"
    return f"{top}/{bottom}"


def describe(dim: Dimension) -> str:
    """A readable name of a dimension for messages: "force/length", "mass",
    "length/time^2", or a product of base dimensions such as "mass*length^2/time^3"."""
    named = _DESCRIPTIONS.get(dim)
    if named is not None:
        return named
    return _product_text(dim, _BASE_NAMES)


def si_unit_text(dim: Dimension) -> str:
    """The coherent SI unit that magnitudes of this dimension are expressed in, as plain text:
    "N/m", "N*s/m", "m/s^2", "ohm", "1" for dimensionless, else base units such as
    "kg*m^2/s^3"."""
    named = _SI_UNITS.get(dim)
    if named is not None:
        return named
    return _product_text(dim, _BASE_UNITS)


def example_value(dim: Dimension) -> str:
    unit = si_unit_text(dim)
    if unit == "1":
        return '"0.5"'
    if not unit[0].isalpha():
        # "12 1/s" would not read back as a number and a unit; negative powers do.
        order = {base: index for index, base in enumerate(_BASES)}
        unit = "*".join(_power_text(_BASE_UNITS.get(base, base), power) for base, power
                        in sorted(dim.items(), key=lambda item: order.get(item[0], 99)))
    return f'"12 {unit}"'

#: Environment variable naming the folder for pint's parsed-definitions cache, or "off".
UNIT_CACHE_VARIABLE = "CLOSEDFORM_UNIT_CACHE"


def unit_cache_folder() -> Path | None:
    """Where pint keeps its parsed unit definitions between runs (its own documented disk
    cache): ``$CLOSEDFORM_UNIT_CACHE``, else the user's cache folder; None when "off"."""
    chosen = os.environ.get(UNIT_CACHE_VARIABLE)
    if chosen is not None:
        return None if chosen.strip().lower() in ("", "off", "0", "no") else Path(chosen)
    import platformdirs  # a dependency of pint itself

    return platformdirs.user_cache_path("closedform", appauthor=False) / "units"


@functools.cache
def registry() -> pint.UnitRegistry:
    """The one pint unit registry, with exact (fraction) conversion factors.

    Parsing pint's definition file and building its tables takes about 0.3 s a run; pint's
    disk cache keeps the result keyed by the definition file's content. Any trouble with the
    cache (a folder that cannot be made, a file being written by another run at the same
    moment, a damaged file) only costs that time: the registry is then built without it.
    """
    folder = unit_cache_folder()
    for cache in ((folder, None) if folder is not None else (None,)):
        try:
            if cache is not None:
                cache.mkdir(parents=True, exist_ok=True)
            import pint

            return pint.UnitRegistry(non_int_type=Fraction, cache_folder=cache)
        except Exception:   # noqa: BLE001 - a cache is never a reason to fail
            if cache is None:
                raise
    raise AssertionError("unreachable: the last attempt builds without a cache")

_UNIT_CHARACTERS_RE = re.compile(r"[A-Za-z0-9_*/^. ()\-]*")
_UNIT_EXPONENT_RE = re.compile(r"\s*(?:-?\d+(?:\.\d+)?|\(\s*-?\d+\s*/\s*\d+\s*\))")
_DIGITS_RE = re.compile(r"\d+")
_UNIT_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_]*")


class UnitProblem(Exception):
    """A unit text that is refused; the message says why (the caller adds the key)."""


def _check_unit_text(text: str) -> None:
    """Reject any unit text outside the small shape pint needs, before pint reads it."""
    if not text:
        raise UnitProblem("missing unit (expected a unit such as m, kN/m or N*s/m, got nothing)")
    if len(text) > MAX_UNIT_LENGTH:
        raise UnitProblem(f"unit too long (at most {MAX_UNIT_LENGTH} characters, "
                           f"got {len(text)})")
    bad = _UNIT_CHARACTERS_RE.match(text)
    assert bad is not None
    if bad.end() != len(text):
        raise UnitProblem(f"character not allowed in unit {quote(text)} at column "
                           f"{bad.end() + 1} (expected letters, digits, _ * / ^ ( ) and "
                           f"spaces, got {quote(text[bad.end()])})")
    if "__" in text:
        raise UnitProblem(f"unexpected '__' in unit {quote(text)}")
    index = 0
    while index < len(text):
        char = text[index]
        if char == "^" or text.startswith("**", index):
            index += 1 if char == "^" else 2
            # Exponents are kept to short plain numbers: pint would otherwise compute
            # something like m^(9^9^9) in full.
            match = _UNIT_EXPONENT_RE.match(text, index)
            if match is None or any(len(digits) > 2
                                    for digits in _DIGITS_RE.findall(match.group())):
                raise UnitProblem(f"unit exponent not allowed in {quote(text)} at column "
                                   f"{index + 1} (expected a short number such as ^2, ^-1 or "
                                   f"^(1/2))")
            index = match.end()
            continue
        if char in " */()":
            index += 1
            continue
        match = _UNIT_NAME_RE.match(text, index)
        if match is not None:
            index = match.end()
            continue
        if char == "1" and not text[index + 1:index + 2].isdigit():
            index += 1
            continue
        raise UnitProblem(f"unexpected {quote(char)} in unit {quote(text)} at column "
                           f"{index + 1} (expected a unit name)")


def normal_unit_text(unit_text: str) -> str:
    """A unit as written (µ, Ω, °, the middle dot; blanks around it) in the ASCII form that
    :func:`unit_fraction` looks up."""
    return ascii_unit(unit_text.strip(" \t"))


@functools.lru_cache(maxsize=1024)
def unit_fraction(text: str) -> tuple[Fraction, Dimension]:
    """The exact factor from an ASCII unit text to coherent SI (pint's: angle units carry
    pint's 50-digit decimal pi) and the unit's dimension; :class:`UnitProblem` if refused.

    What pint gave for a text on an earlier run is read from the :class:`ConversionCache`
    (the shape check runs first all the same); a refused text is never kept there."""
    _check_unit_text(text)
    cache = _conversions()
    known = cache.get(text)
    if known is not None:
        return known
    found = _pint_fraction(text)
    cache.put(text, found)
    return found


def _pint_fraction(text: str) -> tuple[Fraction, Dimension]:
    """pint's exact factor and dimension of a unit text whose shape has been checked."""
    units_registry = registry()
    unknown = UnitProblem(f"unknown unit {quote(text)} (expected a unit such as m, mm, kg, "
                          f"lb, N, kN/m, N*s/m, ms, V, ohm, uF)")
    try:
        units = units_registry.parse_units(text)
        dim = units_registry.get_dimensionality(units)
    except Exception:  # pint signals a bad unit with many exception types
        raise unknown from None
    outside = [base for base in dim if base not in _BASE_NAMES]
    if outside:
        raise UnitProblem(f"unit {quote(text)} is not supported (expected SI base dimensions, "
                          f"got {', '.join(sorted(outside))})")
    try:
        zero = units_registry.Quantity(Fraction(0), units).to_base_units().magnitude
        one = units_registry.Quantity(Fraction(1), units).to_base_units().magnitude
    except Exception:  # offset and logarithmic units refuse plain multiplication
        zero, one = None, None
    if zero != 0 or one is None:
        raise UnitProblem(f"offset units are not accepted (got {quote(text)}; use kelvin or "
                          f"delta_degC for temperatures; logarithmic units are not accepted "
                          f"either)")
    if isinstance(one, float) or not one:
        raise UnitProblem(f"unit {quote(text)} has no exact conversion factor")
    return Fraction(one), Dimension(dict(dim))


# ----------------------------------------------------------------------------- conversions kept on disk

#: Bump when the file's layout changes (a change of this module's code already changes the
#: key: its source is part of it).
_CONVERSIONS_FORMAT = 1
_CONVERSIONS_FILE = "conversions.json"


def _installed_pint() -> bytes:
    """What pint's answers depend on, read without importing pint: the name, size and
    modification time of each file of its package (a new release or a reinstall changes
    them) and the full text of its two definition files."""
    import importlib.util

    spec = importlib.util.find_spec("pint")
    if spec is None or spec.origin is None:
        raise OSError("pint is not installed")
    folder = Path(spec.origin).parent
    parts = []
    for entry in sorted(os.scandir(folder), key=lambda item: item.name):
        if entry.is_file():
            status = entry.stat()
            parts.append(f"{entry.name}:{status.st_size}:{status.st_mtime_ns}".encode())
    for name in ("default_en.txt", "constants_en.txt"):
        parts.append((folder / name).read_bytes())
    return b"\0".join(parts)


def _digest(*parts: bytes) -> str:
    return hashlib.blake2b(b"\0".join(parts), digest_size=20).hexdigest()


class ConversionCache:
    """The factors and dimensions pint gave for unit texts, kept in one JSON file beside
    pint's own cache (:func:`unit_cache_folder`), so that a later run need not import pint.

    The file holds a key and the entries with a digest of them. The key is made from this
    module's source and pint's installed files (:func:`_installed_pint`), so a different
    pint or a change here starts an empty cache; a file whose digest does not match its
    entries (damaged, edited) is ignored. Entries are written back whole, through a
    temporary file and an atomic rename; two runs writing at once may drop each other's new
    entries, which only costs pint's time on a later run. Any trouble reading or writing
    only costs that time: the cache is never a reason to fail, nor a source of a factor pint
    did not give."""

    def __init__(self, folder: Path | None) -> None:
        self.folder = folder
        self.entries: dict[str, tuple[Fraction, Dimension]] = {}
        self.key = ""
        if folder is None:
            return
        try:
            self.key = _digest(str(_CONVERSIONS_FORMAT).encode(),
                               Path(__file__).read_bytes(), _installed_pint())
            stored = json.loads((folder / _CONVERSIONS_FILE).read_text(encoding="utf-8"))
            if stored["key"] != self.key or stored["digest"] != _digest(
                    json.dumps(stored["entries"], sort_keys=True).encode()):
                return
            self.entries = {text: (Fraction(factor), Dimension(
                {base: Fraction(power) for base, power in powers.items()}))
                for text, (factor, powers) in stored["entries"].items()}
        except Exception:  # noqa: BLE001 - a missing or damaged file is an empty cache
            self.entries = {}

    def get(self, text: str) -> tuple[Fraction, Dimension] | None:
        return self.entries.get(text)

    def put(self, text: str, found: tuple[Fraction, Dimension]) -> None:
        self.entries[text] = found
        if self.folder is None or not self.key:
            return
        entries = {name: [str(factor), {base: str(power) for base, power in dim.items()}]
                   for name, (factor, dim) in self.entries.items()}
        content = {"key": self.key, "entries": entries,
                   "digest": _digest(json.dumps(entries, sort_keys=True).encode())}
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            handle, temporary = tempfile.mkstemp(dir=self.folder, prefix=".conversions-")
            try:
                with os.fdopen(handle, "w", encoding="utf-8") as file:
                    json.dump(content, file, sort_keys=True)
                os.replace(temporary, self.folder / _CONVERSIONS_FILE)
            except BaseException:
                os.unlink(temporary)
                raise
        except Exception:  # noqa: BLE001 - a cache is never a reason to fail
            pass


@functools.cache
def _conversions() -> ConversionCache:
    return ConversionCache(unit_cache_folder())

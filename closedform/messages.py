"""How values from a case file are shown in a one-line error message: TOML types by
name, strings shortened and escaped, numbers to 6 significant digits with their SI unit.
Used by case reading and by the model and shape registries."""

from __future__ import annotations

import datetime
import json
import re
from typing import Any

import sympy

from . import quantities

_BARE_KEY_RE = re.compile(r"[A-Za-z0-9_-]+")


def shown_value(value: Any) -> str:
    """A TOML value as a message shows it: strings quoted, others by their TOML type."""
    if isinstance(value, str):
        return repr(value[:40])
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, int):
        return str(value)
    return toml_type(value)


def toml_type(value: Any) -> str:
    return {bool: "a boolean", int: "an integer", float: "a number", str: "a string",
            list: "an array", dict: "a table", datetime.datetime: "a date-time",
            datetime.date: "a date", datetime.time: "a time of day"}.get(type(value),
                                                                         type(value).__name__)


def shown(value: Any) -> str:
    """A TOML value for a one-line message: its repr, ASCII only (so a look-alike letter
    shows as an escape), shortened."""
    try:
        text = ascii(value)
    except RecursionError:
        text = f"<{toml_type(value)} nested too deeply>"
    return shown_text(text)


def plain(value: sympy.Expr, dimension: str | Any | None = None) -> str:
    """A value for a message: 6 significant digits, with its SI unit when ``dimension`` is
    given and the value is not zero (zero is zero in every unit)."""
    if value.free_symbols:
        return shown_text(str(value))
    number = sympy.N(value, 6)
    text = f"{float(number):g}"
    if dimension is None or value.is_zero:
        return text
    if isinstance(dimension, str):
        dimension = quantities.dimension(dimension)
    unit = quantities.si_unit_text(dimension)
    return text if unit == "1" else f"{text} {unit}"


def key_part(name: str) -> str:
    """A TOML key as written in a message: bare when it can be, else quoted and escaped;
    shortened past 40 characters."""
    part = name if len(name) <= 40 else name[:40]
    if not _BARE_KEY_RE.fullmatch(part):
        part = json.dumps(part, ensure_ascii=True)
    return part + ("..." if len(name) > 40 else "")


def shown_text(text: str) -> str:
    return text if len(text) <= 60 else text[:57] + "..."


def has_unit(text: str) -> bool:
    """Whether a value string carries a unit after its number ("2 m/V")."""
    return bool(re.fullmatch(r"\s*[-+]?[0-9.eE+-]+\s+[A-Za-z].*", text))

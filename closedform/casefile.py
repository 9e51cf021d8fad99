"""The case file as a TOML document: read (size-limited, UTF-8), parsed and fingerprinted,
with nothing heavy imported, so that an unreadable file or a TOML syntax error is refused
before the engine (sympy, pint) is loaded. ``closedform.case`` reads the document's values."""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .errors import CaseError
from .files import display_name, read_limited

#: Largest case file read, in bytes.
MAX_CASE_BYTES = 1_000_000


@dataclass(frozen=True)
class CaseDocument:
    """A parsed case file: its TOML tables, its text (for locating keys), the folder its
    relative paths are read from and the SHA-256 of its bytes."""

    data: dict[str, Any]
    text: str
    file: str
    folder: Path
    digest: str


def read_case_file(path: str | Path, name: str | None = None) -> CaseDocument:
    """The case file at ``path`` read and parsed; errors name ``name`` (default: the path)."""
    path = Path(path)
    shown = display_name(name or str(path))
    raw = read_limited(path, MAX_CASE_BYTES, shown, "the case file")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as error:
        line = raw[:error.start].count(b"\n") + 1
        raise CaseError(f"the case file is not UTF-8 text (expected UTF-8, got byte "
                        f"0x{raw[error.start]:02X})", file=shown, line=line)
    return parse_case_text(text, shown, path.parent, hashlib.sha256(raw).hexdigest())


def parse_case_text(text: str, file: str, folder: Path, digest: str | None = None
                    ) -> CaseDocument:
    """``text`` parsed as a case file called ``file``."""
    if digest is None:
        digest = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()
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
    return CaseDocument(data, text, file, folder, digest)


def line_of(text: str, key: str) -> int | None:
    """Best-effort line of a dotted key such as ``load[2].duration`` in the TOML text."""
    if not text or not key:
        return None
    lines = text.split("\n")     # TOML's newlines only, as tomllib counts them
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
        line = line_of(text, error.key)
    return CaseError(error.message, file=shown, key=error.key, line=line)

"""The CSV file of a table load: two columns (time, value), units in an optional header
row, each cell a plain number. The file must lie in the case file's folder or below it.
Errors name the CSV file, the case key (``load[n].csv``) and the CSV line."""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path
from typing import Any

import sympy

from . import quantities
from .errors import CaseError, ExpressionError
from .expressions import parse_number, quote
from .files import display_name, read_limited
from .messages import shown as _shown
from .specs import ValueReader

#: Largest CSV file read for a table load, in bytes.
MAX_CSV_BYTES = 2_000_000
#: Most points in one table load (inline or CSV).
MAX_TABLE_POINTS = 10_000


def csv_path(reader: ValueReader, name: Any, key: str) -> tuple[Path, str]:
    """The CSV file a table names, refused unless it lies in the case file's folder or
    below it: no absolute paths, no '..', no symbolic link leading elsewhere."""
    if not isinstance(name, str) or not name.strip():
        raise reader.error(key, f"expected a file name, got {_shown(name)}")
    if not name.isprintable():
        raise reader.error(key, f"expected a file name of printable characters, got "
                              f"{quote(name)}")
    relative = Path(name)
    if relative.is_absolute() or relative.drive or relative.root:
        raise reader.error(key, f"absolute paths are refused (expected a file name relative "
                              f"to the case file's folder, got {quote(name)})")
    if ".." in relative.parts:
        raise reader.error(key, f"paths leaving the case folder are refused (expected a file "
                              f"in the case file's folder or below it, got {quote(name)})")
    path = reader.folder / relative
    try:
        inside = path.resolve().is_relative_to(reader.folder.resolve())
    except (OSError, RuntimeError, ValueError):   # a loop of links, say
        inside = False
    if not inside:
        raise reader.error(key, f"{quote(name)} leads outside the case folder through a "
                              "symbolic link (expected a file in the case file's folder "
                              "or below it)")
    return path, display_name(str(path))


def csv_points(reader: ValueReader, name: Any, key: str, load_dimension: Any, time_factor: sympy.Expr,
               value_factor: sympy.Expr) -> tuple[list, list, str]:
    """The rows of a two-column CSV (time, value), with the CSV line of each row."""
    csv_key = f"{key}.csv"
    path, shown = csv_path(reader, name, csv_key)
    raw = read_limited(path, MAX_CSV_BYTES, shown, quote(name), key=csv_key,
                       line=reader.line_of(csv_key), file=reader.file)

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
    lines = csv.reader(io.StringIO(content, newline=""))
    cells_by_line: list[tuple[int, list[str]]] = []
    header: tuple[int, list[str]] | None = None
    try:
        for row in lines:
            number = lines.line_num
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
        raise problem(f"not a readable CSV row ({error})", lines.line_num)
    if header is not None:
        time_factor, value_factor = csv_header(reader, header[1], shown, csv_key, header[0],
                                                    load_dimension, time_factor,
                                                    value_factor)
    if len(cells_by_line) < 2:
        raise reader.error(csv_key, f"{quote(name)} holds fewer than two data rows "
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


def csv_header(reader: ValueReader, cells: list[str], shown: str, csv_key: str, number: int,
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


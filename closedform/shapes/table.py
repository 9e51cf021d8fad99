"""The table load: points (τ, value), inline or from a CSV file, linear between them; two
points at one time make a jump. Zero before the first point and after the last."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Any

import sympy

from .. import csvtable, quantities
from ..csvtable import MAX_TABLE_POINTS
from ..errors import CaseError
from ..messages import plain as _plain
from ..messages import shown as _shown
from ..messages import toml_type as _toml_type
from ..specs import LoadSpec, ValueReader
from . import LoadReading, ShapeDefinition, polyline, register


def read(reading: LoadReading) -> None:
    reading.points = table_points(reading.reader, reading.data, reading.key,
                                  reading.load_dimension)


def points(load: LoadSpec):
    return load.points


def table_points(reader: ValueReader, data: Mapping[str, Any], key: str,
                 load_dimension: Any) -> tuple[tuple[sympy.Expr, sympy.Expr], ...]:
    has_points, has_csv = "points" in data, "csv" in data
    if not has_points and not has_csv:
        raise reader.error(f"{key}.points", "missing (a table load needs points or csv)")
    if has_points and has_csv:
        raise reader.error(f"{key}.csv", "give points or csv, not both")
    time_factor, value_factor = sympy.S.One, sympy.S.One
    if "units" in data:
        units = data["units"]
        if not (isinstance(units, list) and len(units) == 2 and all(isinstance(u, str) for u in units)):
            raise reader.error(f"{key}.units", f"expected two unit strings [time, value], got "
                                             f"{_shown(units)}")
        try:
            time_factor, time_dimension = quantities.unit_factor(units[0], key=f"{key}.units")
            value_factor, value_dimension = quantities.unit_factor(units[1], key=f"{key}.units")
        except CaseError as error:
            raise error.located(file=reader.file, key=f"{key}.units", line=reader.line_of(f"{key}.units"))
        if time_dimension != quantities.dimension("time"):
            raise reader.error(f"{key}.units", f"expected a time unit first, got "
                                             f"{quantities.describe(time_dimension)}")
        if value_dimension != load_dimension:
            raise reader.error(f"{key}.units", "expected a unit of "
                             f"{quantities.describe(load_dimension)} second, got "
                             f"{quantities.describe(value_dimension)}")
    rows: list[tuple[sympy.Expr, sympy.Expr]] = []
    where: list[str] = []
    if has_points:
        raw = data["points"]
        if not isinstance(raw, list) or len(raw) < 2:
            raise reader.error(f"{key}.points", "expected a list of at least two [t, value] pairs")
        if len(raw) > MAX_TABLE_POINTS:
            raise reader.error(f"{key}.points", f"too many points (at most {MAX_TABLE_POINTS}, "
                                              f"got {len(raw)})")
        for i, pair in enumerate(raw):
            item_key = f"{key}.points[{i}]"
            if not isinstance(pair, list) or len(pair) != 2:
                raise reader.error(item_key, f"expected a [t, value] pair, got {_shown(pair)}")
            t = table_number(reader, pair[0], "time", time_factor, item_key)
            v = table_number(reader, pair[1], load_dimension, value_factor, item_key)
            rows.append((t, v))
            where.append(item_key)
        csv_file = None
    else:
        rows, where, csv_file = csvtable.csv_points(reader, data["csv"], key, load_dimension,
                                                time_factor, value_factor)
    csv_key = f"{key}.csv"
    for i in range(1, len(rows)):
        step = rows[i][0] - rows[i - 1][0]
        if step.is_negative:
            message = (f"times must not decrease (got {_plain(rows[i][0])} s after "
                       f"{_plain(rows[i - 1][0])} s)")
            raise row_error(reader, where[i], message, csv_file, csv_key)
        if step.is_zero and i >= 2 and (rows[i - 1][0] - rows[i - 2][0]).is_zero:
            raise row_error(reader, where[i], f"duplicate time {_plain(rows[i][0])} s (a jump "
                                  "takes exactly two rows at the same time)", csv_file, csv_key)
    if rows[0][0].is_negative:
        raise row_error(reader, where[0], "times start at 0 or later (local to 'at')", csv_file,
                              csv_key)
    if (rows[-1][0] - rows[0][0]).is_zero:
        raise reader.error(f"{key}.points" if csv_file is None else csv_key,
                         "the table spans no time")
    return tuple(rows)


def row_error(reader: ValueReader, where: str, message: str, csv_file: str | None,
               csv_key: str) -> CaseError:
    if csv_file is not None:
        return CaseError(message, file=csv_file, key=csv_key, line=int(where))
    return reader.error(where, message)


def table_number(reader: ValueReader, value: Any, dimension: Any, factor: sympy.Expr, key: str) -> sympy.Expr:
    if isinstance(value, str):
        return reader.quantity(value, dimension, key)
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise reader.error(key, f"expected a number, got {_toml_type(value)}")
    return reader.quantity(value, "dimensionless", key) * factor


DEFINITION = register(ShapeDefinition(
    name="table",
    keys=("points", "csv", "units"),
    read=read,
    length=lambda load: load.points[-1][0],
    corners=lambda load: len(load.points),
    rule=polyline.RULE,
    rewrite=polyline.rewrite(points),
    fields=MappingProxyType({}),
    example=MappingProxyType({"shape": "table", "units": ["ms", "kN"],
                              "points": [[0, 0], [5, 2], [5, 1], [12, 1.5], [20, 0]]}),
    pulse=True,
    area_and_centroid=polyline.area_and_centroid(points),
    points=points,
))

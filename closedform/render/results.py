"""Section: the results table (peak, time of peak, static response, DLF and every further
field the results carry), the analysis window and the static gain."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import sympy

from .. import quantities
from ..errors import ClosedformError
from ..metrics import metric_notes, metric_rows
from .escaping import Math
from .typesetting import as_factor, inline, number, typeset
from .units import RESPONSE_PREFER, Units

if TYPE_CHECKING:
    from .context import Sheet


def static_gain(b: sympy.Expr, a0: sympy.Expr) -> Math:
    """b/a_0 as the sheet states it: the ratio, with b and a_0 shown only where they are
    not already the ratio (no "1/1")."""
    if a0 == 0:
        return inline(r"b/a_0")
    ratio = sympy.simplify(b / a0)
    if a0 == 1 or b == 1 or b == ratio:
        return inline(rf"b/a_0 = {typeset(ratio)}")
    return inline(rf"b/a_0 = {as_factor(b)} / {as_factor(a0)} = {typeset(ratio)}")


def results_context(sheet: Sheet) -> dict[str, Any]:
    derivation, units, escape = sheet.derivation, sheet.units, sheet.escape
    results, model = derivation.numbers, sheet.model
    time_dimension, response_dimension = sheet.time_dimension, sheet.response_dimension
    rows = []

    def result_row(name: str, value: float | None, dimension: Any, prefer: Sequence[str] = ()):
        if value is None:
            rows.append({"name": name, "si": None, "shown": None})
            return
        si, shown = units.show(float(value), dimension, prefer)
        rows.append({"name": name, "si": si, "shown": shown})

    peak = results.peak
    result_row(f"peak {sheet.variable} (signed, largest magnitude)",
               peak.value if peak else None, response_dimension, RESPONSE_PREFER)
    result_row("time of peak", peak.time if peak else None, time_dimension, ("time",))
    largest = getattr(results, "largest_load", None)
    if largest is not None and largest.value:
        result_row("largest load", largest.value, sheet.load_dimension, sheet.load_prefer)
    result_row("static response (largest load held steady)", results.static, response_dimension,
               RESPONSE_PREFER)
    result_row("dynamic load factor |peak| / static", results.dlf,
               quantities.dimension("dimensionless"))
    for key, value in _extra_fields(results).items():
        rows.extend(_field_rows(key, value, units, escape))
    peak_label = None
    if peak is not None:
        peak_si, peak_shown = units.show(float(peak.value), response_dimension, RESPONSE_PREFER)
        time_si, time_shown = units.show(float(peak.time), time_dimension, ("time",))
        peak_label = Math(f"{peak_shown or peak_si} {escape('at t =')} {time_shown or time_si}")
    return {
        "window": units.show(derivation.window.until, time_dimension, ("time",), exact=True),
        "window_note": derivation.window.note,
        "results": rows,
        "metrics": metric_rows(getattr(derivation, "metrics", None), units.show,
                               response_dimension, RESPONSE_PREFER),
        "metrics_notes": metric_notes(getattr(derivation, "metrics", None)),
        "results_available": peak is not None,
        "static_gain": static_gain(model.input_scale, model.coefficients[-1]),
        "peak_label": peak_label,
    }


def _extra_fields(results) -> dict[str, Any]:
    from ..results import result_fields
    return dict(result_fields(results))


# Reading conventions for result fields whose exact set this module does not know: a
# "unit" entry applies to the value-like entries beside it, "<name>_unit" to "<name>", and
# time-like entries are in seconds. Everything else is shown as a plain number or text.
TIME_KEYS = ("time", "after", "before", "start", "end", "duration", "centroid", "at")
VALUE_KEYS = ("value", "amplitude")


def _field_rows(key: str, value: Any, units: Units, escape) -> list[dict[str, Any]]:
    """Rows of the results table for one field of ``results.result_fields``."""
    name = key.replace("_", " ")
    if isinstance(value, (list, tuple)) and value and all(isinstance(v, Mapping) for v in value):
        rows = []
        for i, item in enumerate(value, start=1):
            label = f"{name}, load {item['load']}" if "load" in item else f"{name} {i}"
            rest = {k: v for k, v in item.items() if k != "load"}
            rows.extend(_mapping_rows(label, rest, units, escape))
        return rows
    if isinstance(value, Mapping):
        return _mapping_rows(name, value, units, escape)
    return [{"name": name, **_field_text(value, units, escape)}]


SPLIT_PARTS = 3     # a result with more parts than this gets one row per part


def _mapping_rows(label: str, value: Mapping, units: Units, escape) -> list[dict[str, Any]]:
    """One row for a short mapping (or a value at a time), else a row per part."""
    parts = [k for k in value if k != "unit" and not k.endswith("_unit")]
    if len(parts) <= SPLIT_PARTS or ("value" in value and "time" in value):
        return [{"name": label, **_field_text(value, units, escape)}]
    own_unit = value.get("unit") if isinstance(value.get("unit"), str) else None
    rows = []
    for k in parts:
        part_unit = value.get(f"{k}_unit") if isinstance(value.get(f"{k}_unit"), str) else (
            "s" if k in TIME_KEYS else own_unit if k in VALUE_KEYS else None)
        rows.append({"name": f"{label}: {k.replace('_', ' ')}",
                     **_field_text(value[k], units, escape, part_unit)})
    return rows


def _field_text(value: Any, units: Units, escape, unit: str | None = None) -> dict[str, Any]:
    """{"si": …, "shown": …} for a field value of any shape."""
    if value is None:
        return {"si": None, "shown": None}
    if isinstance(value, bool):
        text = Math(escape("yes" if value else "no"))
        return {"si": text, "shown": None}
    if isinstance(value, (int, float)):
        return _field_number(float(value), unit, units, escape)
    if isinstance(value, sympy.Basic):
        return {"si": inline(typeset(value)), "shown": None}
    if isinstance(value, Mapping):
        own_unit = value.get("unit") if isinstance(value.get("unit"), str) else None
        if "value" in value and "time" in value:
            amount = _field_number(value["value"], own_unit, units, escape)
            time = _field_number(value["time"], "s", units, escape)
            at = Math(" " + escape("at t =") + " ")
            return {"si": _joined(amount["si"], at, time["si"]),
                    "shown": _joined(amount["shown"] or amount["si"], at, time["shown"] or time["si"])
                    if amount["shown"] or time["shown"] else None}
        si_parts, shown_parts, converted = [], [], False
        for k, v in value.items():
            if k == "unit" or k.endswith("_unit"):
                continue
            part_unit = value.get(f"{k}_unit") if isinstance(value.get(f"{k}_unit"), str) else (
                "s" if k in TIME_KEYS else own_unit if k in VALUE_KEYS else None)
            text = _field_text(v, units, escape, part_unit)
            label = Math(escape(k.replace("_", " ")) + " ")
            si_parts.append(_joined(label, text["si"] or Math(escape("—"))))
            shown_parts.append(_joined(label, text["shown"] or text["si"] or Math(escape("—"))))
            converted = converted or text["shown"] is not None
        separator = Math("; ")
        return {"si": Math(separator.join(si_parts)),
                "shown": Math(separator.join(shown_parts)) if converted else None}
    if isinstance(value, (list, tuple)):
        if not value:
            return {"si": None, "shown": None}
        parts = [_field_text(v, units, escape)["si"] or Math(escape("—")) for v in value]
        return {"si": Math("; ".join(parts)), "shown": None}
    return {"si": Math(escape(str(value))), "shown": None}


def _field_number(value: Any, unit: str | None, units: Units, escape) -> dict[str, Any]:
    if value is None:
        return {"si": None, "shown": None}
    if isinstance(value, str):
        return {"si": Math(escape(value)), "shown": None}
    if unit is None:
        return {"si": inline(number(float(value))), "shown": None}
    try:
        factor, dimension = quantities.unit_factor(unit, key=None)
    except ClosedformError:
        return {"si": Math(inline(number(float(value))) + escape(" " + unit)), "shown": None}
    si, shown = units.show(float(value) * float(sympy.N(factor, 30)), dimension,
                           prefer=("time",) if dimension == quantities.dimension("time") else ())
    return {"si": si, "shown": shown}


def _joined(*parts: Math | None) -> Math:
    return Math("".join(str(p) for p in parts if p is not None))

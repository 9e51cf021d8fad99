"""The JSON result of a case of several masses (schema 1, extended as shared/DESIGN.md says).

``pieces``/``peak``/``static``/``dlf`` are those of the watched mass ([report] watch);
``responses`` holds every mass, the stretch of every spring and the support reaction as
``{name, label, kind, unit, pieces, peak}``; ``modes`` the natural modes. Every scalar a
reviewer may want to claim is also a top-level result table, so ``closedform check`` finds
it by name: ``peak_mass_2`` (and ``peak_mass_2_time``), ``peak_stretch_1``,
``peak_spring_force_1``, ``peak_support_reaction``.
"""

from __future__ import annotations

import math
from typing import Any

import sympy

from . import __version__


def _number(value: Any) -> float | None:
    if value is None:
        return None
    number = float(sympy.N(value, 30))
    return number if math.isfinite(number) else None


def _extreme(extreme, unit: str | None = None) -> dict[str, Any] | None:
    if extreme is None:
        return None
    table = {"value": extreme.value, "time": extreme.time}
    if unit is not None:
        table["unit"] = unit
    return table


def _pieces(pieces) -> list[dict[str, Any]]:
    return [{"start": _number(p.start), "end": _number(p.end) if p.end is not None else None,
             "expr": p.expression_text()} for p in pieces]


def _strict(value: Any) -> Any:
    if isinstance(value, dict):
        return {key: _strict(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_strict(item) for item in value]
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _poles(derivation) -> list[dict[str, Any]] | None:
    """The state-space poles σ ± iω_d of det(Ms² + Cs + K) (non-classical damping only),
    with ω = |pole| and ζ = −σ/|pole| of each."""
    if derivation.state_space is None:
        return None
    poles = []
    for pole in derivation.state_space.modes:
        size = sympy.sqrt(pole.rate**2 + pole.frequency**2)
        poles.append({"rate": _number(pole.rate), "frequency": _number(pole.frequency),
                      "omega": _number(size), "damping_ratio": _number(-pole.rate / size)})
    return poles


UNITS = {"displacement": "m", "stretch": "m", "support-reaction": "N"}


def result_dictionary(derivation) -> dict[str, Any]:
    case = derivation.case
    chain = derivation.chain
    numbers = derivation.numbers
    fields: dict[str, Any] = {}
    for response in derivation.responses:
        if response.kind == "displacement":
            fields[f"peak_mass_{response.name[1:]}"] = _extreme(response.peak, "m")
        elif response.kind == "stretch":
            fields[f"peak_stretch_{response.name[1:]}"] = _extreme(response.peak, "m")
            fields[f"peak_spring_force_{response.name[1:]}"] = _extreme(response.spring_force, "N")
        else:
            fields["peak_support_reaction"] = _extreme(response.peak, "N")
    return _strict({
        "schema": 1,
        "title": case.title,
        "reference": case.reference,
        "tool_version": __version__,
        "status": derivation.status,
        "model": chain.model,
        "variable": {"name": f"x{chain.watch}", "unit": "m"},
        "excitation": chain.excitation,
        "route": derivation.route,
        "watch": chain.watch,
        "until": _number(derivation.until),
        "pieces": _pieces(derivation.pieces),
        "peak": _extreme(numbers.peak),
        "static": numbers.static,
        "dlf": numbers.dlf,
        **fields,
        "responses": [{"name": r.name, "label": r.label, "kind": r.kind,
                       "unit": UNITS[r.kind], "pieces": _pieces(r.pieces),
                       "peak": _extreme(r.peak)} for r in derivation.responses],
        "modes": [{"omega": _number(m.omega), "frequency_hz": _number(m.omega / (2 * sympy.pi)),
                   "damping_ratio": _number(m.damping_ratio),
                   "shape": [_number(v) for v in m.shape],
                   "participation": _number(m.participation),
                   "effective_mass": _number(m.effective_mass),
                   "modal_mass": _number(m.modal_mass)} for m in derivation.modes],
        "poles": _poles(derivation),
        "warnings": list(derivation.warnings),
        "checks": [{"name": c.name, "passed": c.passed, "outcome": c.outcome, "detail": c.detail}
                   for c in derivation.checks],
    })

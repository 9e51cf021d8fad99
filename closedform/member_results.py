"""The results of a member case: its equivalent system and the dynamic support reactions.

The JSON gains ``equivalent`` (per range that occurs: load, mass and load-mass factors,
stiffness and resistance at the end of the range, SI) and ``peak_support_reaction``, the
largest |V(t)| over the supports, V = a·R(t) + b·F(t) + c·M_p/L with the coefficients of the range the
resistance R is in at t (elastic while |R| ≤ R_e, then elastic-plastic, plastic on the yield
line). R(t) is the spring force of the oscillator (k·y elastic, from the phase's force line
when it yields), F(t) the total load and M_p/L taken with the sign of R (the yielded sections
bend with it); the largest value is searched on a grid of
``GRID`` points per piece and refined by a bounded scalar search around the best point.
"""

from __future__ import annotations

import math
from typing import Any

import numpy
import sympy

GRID = 400


def _number(value) -> float | None:
    return None if value is None else float(sympy.N(value, 17))


def equivalent_fields(member) -> dict[str, Any]:
    """``equivalent``: {range: {load_factor, mass_factor, load_mass_factor, stiffness,
    resistance}} and the reference point, SI."""
    table = {}
    for item in member.ranges:
        table[item.name] = {
            "load_factor": _number(item.load_factor),
            "mass_factor": _number(item.mass_factor),
            "load_mass_factor": _number(item.load_mass_factor),
            "stiffness": _number(member.stiffness(item.name)),
            "resistance": _number(member.resistance(item.name)),
        }
    return {"equivalent": {**table,
                           "reference_point": _number(member.factors.reference * member.span),
                           "beam_mass": _number(member.mass),
                           "mass": _number(member.load_mass_factor * member.mass),
                           "stiffness": _number(member.equivalent_stiffness)}}


def reaction_history(derivation, times: numpy.ndarray) -> numpy.ndarray:
    """|V| of each support (rows) at ``times`` (float64, N)."""
    member = derivation.case.system.member
    x = numpy.asarray(derivation.evaluate(times), dtype=float)
    load = numpy.asarray(derivation.evaluate(times, response="load"), dtype=float)
    plastic = getattr(derivation, "plastic", None)
    if plastic is None:
        force = float(member.equivalent_stiffness) * x
        yielding = numpy.zeros_like(x, dtype=bool)
    else:
        force = numpy.empty_like(x)
        yielding = numpy.zeros_like(x, dtype=bool)
        starts = numpy.array([float(p.start) for p in derivation.pieces])
        index = numpy.clip(numpy.searchsorted(starts, times, side="right") - 1, 0,
                           len(starts) - 1)
        for i in numpy.unique(index):
            slope, constant = plastic.force_line(int(i))
            chosen = index == i
            force[chosen] = float(slope) * x[chosen] + float(constant)
            yielding[chosen] = plastic.phases[plastic.piece_phases[int(i)]].kind != "elastic"
    first_yield = member.resistance("elastic")
    # the yielded sections' moments ±M_p, signed as the resistance that bends the member
    yielded = numpy.zeros_like(x) if member.plastic_moment is None else \
        numpy.sign(force) * float(member.plastic_moment / member.span)
    rows = []
    ranges = {r.name: r for r in member.ranges}
    for side_index in range(len(ranges["elastic"].reaction)):
        value = numpy.empty_like(x)
        for name, item in ranges.items():
            _side, a, b, c = item.reaction[side_index]
            if name == "elastic":
                chosen = ~yielding & (numpy.abs(force) <= (numpy.inf if first_yield is None
                                                           else float(first_yield)))
            elif name == "elastic-plastic":
                chosen = ~yielding & (numpy.abs(force) > float(first_yield))
            else:
                chosen = yielding
            value[chosen] = float(a) * force[chosen] + float(b) * load[chosen] \
                + float(c) * yielded[chosen]
        rows.append(numpy.abs(value))
    return numpy.array(rows)


def peak_support_reaction(derivation) -> dict[str, Any] | None:
    """{value, time, support, unit} of the largest dynamic support reaction (None where the
    response leaves the float range: overflowing values are not reported as numbers)."""
    try:
        with numpy.errstate(all="ignore"):
            found = _peak_support_reaction(derivation)
    except (ValueError, ArithmeticError):
        return None
    if found is None or not (math.isfinite(found["value"]) and math.isfinite(found["time"])):
        return None
    return found


def _peak_support_reaction(derivation) -> dict[str, Any] | None:
    from scipy.optimize import minimize_scalar

    member = derivation.case.system.member
    pieces = derivation.pieces
    if not pieces or not derivation.case.is_fully_valued:   # symbols without values
        return None
    edges = sorted({float(p.start) for p in pieces} | {float(derivation.window.until)})
    if not all(math.isfinite(edge) for edge in edges):
        return None
    times = numpy.unique(numpy.concatenate([numpy.linspace(a, b, GRID)
                                            for a, b in zip(edges, edges[1:])]))
    history = reaction_history(derivation, times)
    side, where = numpy.unravel_index(numpy.argmax(history), history.shape)
    lo, hi = times[max(where - 1, 0)], times[min(where + 1, len(times) - 1)]
    best_time, best = float(times[where]), float(history[side, where])
    if hi > lo:
        found = minimize_scalar(
            lambda t: -reaction_history(derivation, numpy.array([t]))[side, 0],
            bounds=(lo, hi), method="bounded", options={"xatol": 1e-12 * max(1.0, hi)})
        if -found.fun > best:
            best_time, best = float(found.x), float(-found.fun)
    names = [r[0] for r in member.factors.range("elastic").reaction]
    return {"value": best, "time": best_time, "support": names[side], "unit": "N"}


def member_fields(derivation) -> dict[str, Any]:
    """The JSON fields a member adds."""
    member = derivation.case.system.member
    return {**equivalent_fields(member),
            "peak_support_reaction": peak_support_reaction(derivation)}

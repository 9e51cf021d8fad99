"""Section: a member as its equivalent oscillator (issue 16): the assumed shapes, each
factor's integral with its exact value, the stiffness, the resistances and the dynamic
reactions (context for templates/member.*.j2). ``member_context`` is the section builder
(``member`` in the templates, None for any other case); the problem section puts this
module's ``ASSUMPTIONS`` before the model's. Nothing is derived here: the factors are those
of ``closedform.member``."""

from __future__ import annotations

from typing import Any

import sympy

from .. import quantities
from ..member import SUPPORT_TEXT, XI
from ..member_results import peak_support_reaction
from .escaping import Math, with_subscripts
from .typesetting import inline

ASSUMPTIONS = [
    "the member is prismatic (constant EI and mass per length), slender (Euler-Bernoulli "
    "bending, shear and rotary inertia neglected) and loaded by F(t) times a fixed "
    "distribution, so that one equivalent oscillator represents it",
    "the equivalent system is an approximation valid for the first mode only: the member is "
    "assumed to keep the shape of each range (static deflected shape, shape of the increment "
    "after the fixed ends yield, collapse mechanism); higher modes and their reactions are "
    "not represented",
    "with a plastic moment: one load-mass factor for the whole response, the mean of the "
    "elastic and plastic values; where the fixed ends yield first the resistance is the "
    "elastic-perfectly-plastic line of equal area up to R_m (equivalent stiffness k_E); plastic "
    "hinges with a rigid-perfectly-plastic moment M_p, the same at supports and in the span; "
    "the ductility ratio is taken against the yield deflection R_m/k_E of that line",
    "dynamic support reactions from the equilibrium of the member under the load, the "
    "inertia forces of the assumed shape and the bending moments of the resistance at the "
    "supports and the critical section; damping forces are not included in them",
]

_NAMES = {"elastic": "Elastic range", "elastic-plastic": "Elastic-plastic range",
          "plastic": "Plastic range"}


def is_member(derivation) -> bool:
    """Whether the derivation is that of a member's equivalent oscillator."""
    return getattr(derivation.case.system, "member", None) is not None


def member_context(sheet) -> dict[str, Any]:
    """The template value ``member``: the member section, or None for any other case."""
    if not is_member(sheet.derivation):
        return {"member": None}
    return {"member": section(sheet.derivation, sheet.units, sheet.escape)}


def section(derivation, units, escape) -> dict[str, Any]:
    member = derivation.case.system.member
    f = member.factors
    force = _dimension("force")
    ranges = []
    point = member.distribution == "point"
    for item in member.ranges:
        phi = item.shape
        load_integral = (rf"\varphi(\xi_P) = {sympy.latex(item.load_factor)}" if point else
                         rf"\int_0^1 \varphi\,d\xi = {sympy.latex(item.load_factor)}")
        rows = [
            {"name": "assumed shape φ(ξ), ξ = x/L, φ = 1 at the reference point",
             "value": inline(r"\varphi(\xi) = " + sympy.latex(phi.polynomial()))},
            {"name": "load factor K_L = ∫p·φ dx / F",
             "value": inline(r"K_L = " + load_integral + rf" \approx {float(item.load_factor):.4f}")},
            {"name": "mass factor K_M = ∫m·φ² dx / M",
             "value": inline(rf"K_M = \int_0^1 \varphi^2\,d\xi = {sympy.latex(item.mass_factor)}"
                             rf" \approx {float(item.mass_factor):.4f}")},
            {"name": "load-mass factor K_LM = K_M / K_L",
             "value": inline(rf"K_{{LM}} = {sympy.latex(item.load_mass_factor)} \approx "
                             rf"{float(item.load_mass_factor):.4f}")},
        ]
        if item.stiffness is not None:
            rows.append({"name": "stiffness k = F / y (total load per deflection at the "
                                 "reference point)",
                         "value": Math(inline(rf"k = {_factor(item.stiffness)}\,EI/L^3")
                                       + escape(" = ") + _shown(units, member.stiffness(item.name),
                                                                _dimension("stiffness")))})
        resistance = member.resistance(item.name)
        if resistance is not None:
            number = f.first_yield if item.name == "elastic" else f.collapse
            what = ("first yield R_e (the largest elastic moment reaches M_p)"
                    if item.name == "elastic" else "collapse load R_m (virtual work of the "
                    "mechanism)")
            rows.append({"name": what,
                         "value": Math(inline(rf"{_factor(number)}\,M_p/L")
                                       + escape(" = ") + _shown(units, resistance, force))})
        for side, a, b, c in item.reaction:
            moments = "" if c == 0 else (rf" {'+' if c > 0 else '-'} M_p/L" if abs(c) == 1
                                         else rf" {_signed(c)}\,M_p/L")
            exact = ",\\ ".join(sympy.latex(v) for v in ((a, b, c) if c != 0 else (a, b)))
            rows.append({"name": f"dynamic reaction, {side} support",
                         "value": inline(rf"V = {_decimal(a)}\,R {_signed(b)}\,F{moments}"
                                         rf" \quad ({exact})")})
        ranges.append({"name": _NAMES[item.name], "note": item.shape_note, "rows": rows})
    load = "uniform, p per length; the oscillator carries the total load F = p·L" if not point else (
        "point load F at the tip" if member.support == "cantilever" else
        "point load F at midspan")
    given = [
        {"name": "supports", "value": SUPPORT_TEXT[member.support]},
        {"name": "load", "value": load},
        {"name": "span L", "value": _shown(units, member.span, _dimension("length"))},
        {"name": "flexural rigidity EI", "value": f"{float(member.rigidity):.6g} N·m²"},
        {"name": "mass M = m·L", "value": _shown(units, member.mass, _dimension("mass"))},
        {"name": "reference point (response y)", "value": member.reference_text},
    ]
    if member.plastic_moment is not None:
        given.append({"name": "plastic moment M_p",
                      "value": f"{float(member.plastic_moment):.6g} N·m"})
    oscillator = [
        {"name": "equivalent mass K_LM·M", "value": Math(
            inline(rf"{sympy.latex(sympy.radsimp(member.load_mass_factor))}\,M")
            + escape(" = ") + _shown(units, member.load_mass_factor * member.mass,
                                     _dimension("mass")))},
        {"name": "stiffness of the oscillator" + (" k_E (equal area up to R_m)"
                                                  if f.range("elastic-plastic") and
                                                  member.plastic_moment is not None else ""),
         "value": _shown(units, member.equivalent_stiffness, _dimension("stiffness"))},
    ]
    peak = peak_support_reaction(derivation)
    if peak is not None:
        moments = any(c != 0 for item in member.ranges for *_ab, c in item.reaction)
        formula = "V = a·R + b·F" + (" + c·M_p/L" if moments else "")
        oscillator.append({"name": f"largest dynamic support reaction |V| ({peak['support']} "
                                   f"support), {formula} of the range R is in",
                           "value": Math(_shown(units, peak["value"], force) + escape(" at t = ")
                                         + _shown(units, peak["time"], _dimension("time")))})
    exact = [value for value in (member.load_mass_factor * member.mass,
                                 member.equivalent_stiffness, member.resistance("plastic"))
             if value is not None and not sympy.nsimplify(value).is_Rational]
    if exact:
        oscillator.append({"name": "irrational values in the oscillator",
                           "value": "carried as 30-significant-digit rationals of the exact "
                                    "values above"})
    if f.collapse_by_statics is not None and member.plastic_moment is not None:
        oscillator.append({"name": "collapse load by statics (moments nowhere above M_p)",
                           "value": inline(rf"{_factor(f.collapse_by_statics)}\,M_p/L")})
    for row in [*given, *oscillator, *(row for r in ranges for row in r["rows"])]:
        row["name"] = with_subscripts(row["name"], escape)     # K_LM as K with LM below
    return {"given": given, "ranges": ranges, "oscillator": oscillator,
            "equation": inline(r"K_{LM} M\,\ddot{y} + c\,\dot{y} + R(y) = F(t),\quad "
                               r"K_L = \frac{\int p\,\varphi\,dx}{F},\ "
                               r"K_M = \frac{\int m\,\varphi^2\,dx}{M}"),
            "caution": "The equivalent system is an approximation valid for the first mode: "
                       "the member is assumed to keep the shapes above."}


def _factor(value) -> str:
    """LaTeX of a number that multiplies a unit group, in parentheses when it is a sum."""
    value = sympy.radsimp(value)
    text = sympy.latex(value)
    return rf"\left({text}\right)" if value.is_Add else text


def _dimension(name):
    return quantities.dimension(name)


def _shown(units, value, dimension):
    si, other = units.show(float(value), dimension, ())
    return other or si


def _decimal(value) -> str:
    return f"{float(value):.4f}"


def _signed(value) -> str:
    v = float(value)
    return f"+ {v:.4f}" if v >= 0 else f"- {-v:.4f}"


__all__ = ["ASSUMPTIONS", "is_member", "member_context", "section", "XI"]

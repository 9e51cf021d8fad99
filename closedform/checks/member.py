"""Checks of a member's equivalent system, by routes other than the derivation's.

- factors by quadrature: K_L = ∫p̂φ and K_M = ∫φ² again by mpmath's numerical quadrature
  of the shape (30 digits) against the exact integrals;
- the static shape: its support conditions hold, and its strain energy equals the work of
  the load (Clapeyron's theorem): ∫EI·w''² dx = F·w̄ with w̄ the load-weighted deflection,
  i.e. ∫φ''² dξ = (k·L³/EI)·K_L, the stiffness the derivation read off the deflection;
- the collapse load: the mechanism's (upper bound, virtual work) equals the static one
  (lower bound, the moments of the partly yielded beam), uniqueness theorem;
- the reactions: with R = F (static) the support reactions add up to the load (the
  M_p/L terms of V = a·R + b·F + c·M_p/L cancel over the supports).
"""

from __future__ import annotations

from typing import Any

import mpmath
import sympy

from .base import Check

DIGITS = 30
TOLERANCE = mpmath.mpf(10) ** -20


def _functions(shape, derivative=0):
    return [(mpmath.mpf(sympy.N(a, DIGITS)), mpmath.mpf(sympy.N(b, DIGITS)),
             sympy.lambdify(sympy.Symbol("xi", real=True),
                            sympy.diff(p, sympy.Symbol("xi", real=True), derivative), "mpmath"))
            for a, b, p in shape.pieces]


def _quad(shape, power=1, derivative=0):
    return mpmath.fsum(mpmath.quad(lambda x, f=f: f(x) ** power, [a, b])
                       for a, b, f in _functions(shape, derivative))


def member_of(response: Any) -> Any:
    """The member (``EquivalentMember``) a response was derived for, or None."""
    system = getattr(getattr(response, "case", None), "system", None)
    return getattr(system, "member", None)


def is_member(response: Any) -> bool:
    """Whether the response is that of a member's equivalent oscillator (issue 16)."""
    return member_of(response) is not None


def member_family(response: Any) -> tuple[Check, ...]:
    """The checks of the member a derivation was made for (the registry's "member" family)."""
    return member_checks(member_of(response))


def member_checks(member) -> tuple[Check, ...]:
    with mpmath.workdps(DIGITS):
        checks = (_factor_check(member), _energy_check(member), _reaction_check(member))
        if member.plastic_moment is not None:
            checks += (_collapse_check(member),)
        return checks


def _relative(a, b):
    a, b = mpmath.mpf(sympy.N(a, DIGITS)) if not isinstance(a, mpmath.mpf) else a, \
        mpmath.mpf(sympy.N(b, DIGITS)) if not isinstance(b, mpmath.mpf) else b
    return abs(a - b) / max(abs(b), mpmath.mpf(10) ** -30)


def _factor_check(member) -> Check:
    worst = mpmath.mpf(0)
    point = member.distribution == "point"
    for item in member.ranges:
        if not point:
            worst = max(worst, _relative(_quad(item.shape), item.load_factor))
        worst = max(worst, _relative(_quad(item.shape, 2), item.mass_factor))
    ok = worst < TOLERANCE
    return Check("member factors by quadrature", ok,
                 f"K_L and K_M of every range by {DIGITS}-digit numerical quadrature of the "
                 f"shape; largest relative difference {mpmath.nstr(worst, 3)} (limit 1e-20)")


def _energy_check(member) -> Check:
    worst = mpmath.mpf(0)
    support_error = mpmath.mpf(0)
    xi = sympy.Symbol("xi", real=True)
    for item in member.ranges:
        if item.stiffness is None:
            continue
        energy = _quad(item.shape, 2, derivative=2)
        worst = max(worst, _relative(energy, item.stiffness * item.load_factor))
        first, last = item.shape.pieces[0][2], item.shape.pieces[-1][2]
        support_error = max(support_error, abs(mpmath.mpf(sympy.N(first.subs(xi, 0), DIGITS))))
        if member.support != "cantilever":
            support_error = max(support_error,
                                abs(mpmath.mpf(sympy.N(last.subs(xi, 1), DIGITS))))
    ok = worst < TOLERANCE and support_error < TOLERANCE
    return Check("member static shape (strain energy = work of the load)", ok,
                 "∫φ''² dξ = (k·L³/EI)·K_L for every elastic range by quadrature, largest "
                 f"relative difference {mpmath.nstr(worst, 3)}; deflection at the supports "
                 f"{mpmath.nstr(support_error, 3)} (limits 1e-20)")


def _collapse_check(member) -> Check:
    f = member.factors
    difference = _relative(f.collapse_by_statics, f.collapse)
    ok = difference < TOLERANCE
    return Check("member collapse load (virtual work = statics)", ok,
                 f"mechanism {float(f.collapse):.10g}·M_p/L, statics "
                 f"{float(f.collapse_by_statics):.10g}·M_p/L; relative difference "
                 f"{mpmath.nstr(difference, 3)}")


def _reaction_check(member) -> Check:
    worst = max(max(abs(float(sum(a + b for _s, a, b, _c in item.reaction)) - 1),
                    abs(float(sum(c for *_ab, c in item.reaction))))
                for item in member.ranges)
    ok = worst < 1e-12
    return Check("member reactions carry the static load", ok,
                 f"Σ(a + b) over the supports = 1 and Σc = 0 in every range (R = F, the "
                 f"plastic moments are internal forces); largest difference {worst:.3g}")

"""The transform table and the Heaviside expansion against published transform pairs.

Source of every pair: Abramowitz & Stegun, Handbook of Mathematical Functions (NBS AMS 55,
1964), chapter 29, table 29.3 (pair numbers beside each row). Each pair is also checked
against sympy's own laplace_transform, an independent general-purpose routine.
"""

from __future__ import annotations

import pytest
import sympy

from closedform.basis import COS, SIN, BasisTerm
from closedform.laplace import Pole, RationalTransform, invert, s, transform_of_mode

a, b = sympy.symbols("a b", positive=True)
u = sympy.Symbol("u", positive=True)
ZERO = sympy.S.Zero

# (id, mode, A&S transform)
FORWARD_PAIRS = [
    ("29.3.1 unit step", BasisTerm(0, ZERO, ZERO), 1 / s),
    ("29.3.2 t", BasisTerm(1, ZERO, ZERO), 1 / s**2),
    ("29.3.3 t^3/3!", BasisTerm(3, ZERO, ZERO), 6 / s**4),
    ("29.3.8 exp(-at)", BasisTerm(0, -a, ZERO), 1 / (s + a)),
    ("29.3.9 t exp(-at)", BasisTerm(1, -a, ZERO), 1 / (s + a) ** 2),
    ("29.3.15 sin(at)", BasisTerm(0, ZERO, a, SIN), a / (s**2 + a**2)),
    ("29.3.16 cos(at)", BasisTerm(0, ZERO, a, COS), s / (s**2 + a**2)),
    ("29.3.22 t sin(at)", BasisTerm(1, ZERO, a, SIN), 2 * a * s / (s**2 + a**2) ** 2),
    ("29.3.24 t cos(at)", BasisTerm(1, ZERO, a, COS), (s**2 - a**2) / (s**2 + a**2) ** 2),
    ("29.3.26 exp(-at) sin(bt)", BasisTerm(0, -a, b, SIN), b / ((s + a) ** 2 + b**2)),
    ("29.3.27 exp(-at) cos(bt)", BasisTerm(0, -a, b, COS), (s + a) / ((s + a) ** 2 + b**2)),
]


@pytest.mark.parametrize("mode, published", [p[1:] for p in FORWARD_PAIRS],
                         ids=[p[0] for p in FORWARD_PAIRS])
def test_forward_pairs_match_the_published_table(mode, published):
    transform, pair = transform_of_mode(mode)
    assert sympy.simplify(transform.expression() - published) == 0
    assert "Abramowitz" in pair.source
    reference = sympy.laplace_transform(mode.expression(u), u, s, noconds=True)
    assert sympy.simplify(transform.expression() - reference) == 0


# (id, numerator, poles, lead, A&S time function)
INVERSE_PAIRS = [
    ("29.3.12 1/((s+a)(s+b))", sympy.S.One, (Pole(-a, ZERO), Pole(-b, ZERO)), sympy.S.One,
     (sympy.exp(-a * u) - sympy.exp(-b * u)) / (b - a)),
    ("29.3.19 1/(s(s^2+a^2))", sympy.S.One, (Pole(ZERO, ZERO), Pole(ZERO, a)), sympy.S.One,
     (1 - sympy.cos(a * u)) / a**2),
    ("29.3.20 1/(s^2(s^2+a^2))", sympy.S.One, (Pole(ZERO, ZERO, 2), Pole(ZERO, a)), sympy.S.One,
     (a * u - sympy.sin(a * u)) / a**3),
    ("29.3.21 1/(s^2+a^2)^2", sympy.S.One, (Pole(ZERO, a, 2),), sympy.S.One,
     (sympy.sin(a * u) - a * u * sympy.cos(a * u)) / (2 * a**3)),
    ("29.3.23 s^2/(s^2+a^2)^2", s**2, (Pole(ZERO, a, 2),), sympy.S.One,
     (sympy.sin(a * u) + a * u * sympy.cos(a * u)) / (2 * a)),
    ("29.3.10 1/(s+a)^3", sympy.S.One, (Pole(-a, ZERO, 3),), sympy.S.One,
     u**2 * sympy.exp(-a * u) / 2),
    ("29.3.26 1/((s+a)^2+b^2)", sympy.S.One, (Pole(-a, b),), sympy.S.One,
     sympy.exp(-a * u) * sympy.sin(b * u) / b),
]


@pytest.mark.parametrize("numerator, poles, lead, published", [p[1:] for p in INVERSE_PAIRS],
                         ids=[p[0] for p in INVERSE_PAIRS])
def test_heaviside_expansion_reproduces_published_inverse_pairs(numerator, poles, lead, published):
    inversion = invert(RationalTransform(numerator, poles, lead))
    assert sympy.simplify(inversion.time_function.expression(u) - published) == 0


def test_resonant_sine_window_gives_t_cos_terms_not_a_division_by_zero():
    """sin(ωt) driving 1/(s²+ω²): the merged double pole must give the t·cos term
    (A&S 29.3.21 with a = ω)."""
    omega = sympy.sqrt(7)
    transform, _ = transform_of_mode(BasisTerm(0, ZERO, omega, SIN))
    merged = transform.divided_by(sympy.S.One, (Pole(ZERO, omega),))
    assert merged.poles == (Pole(ZERO, omega, 2),)
    x = invert(merged).time_function.expression(u)
    expected = omega * (sympy.sin(omega * u) - omega * u * sympy.cos(omega * u)) / (2 * omega**3)
    assert sympy.simplify(x - expected) == 0


def test_inversion_agrees_with_sympys_generic_routine_on_a_damped_kernel():
    """Cross-check with sympy.inverse_laplace_transform (independent general routine)."""
    transform = RationalTransform(sympy.Integer(3) * s + 2,
                                  (Pole(sympy.Rational(-1, 2), sympy.Integer(2)), Pole(ZERO, ZERO)),
                                  sympy.Integer(5))
    ours = invert(transform).time_function.expression(u)
    t = sympy.Symbol("t", positive=True)
    generic = sympy.inverse_laplace_transform(transform.expression(), s, t)
    assert sympy.simplify(ours.subs(u, t) - generic) == 0

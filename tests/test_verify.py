"""The independent verification stage (closedform.checks.verification).

Three kinds of test:

* textbook closed forms handed to ``verify`` as hand-made derivations (no engine involved):
  they must pass, and the same forms with a wrong frequency or a wrong amplitude must fail;
* correct derivations from the engine: every check passes;
* the mutation suite: correct derivations with corrupted pieces (a coefficient scaled by
  1 + 1e-6, a sign flipped, a term dropped, a breakpoint moved, a wrong natural frequency or
  decay rate, a wrong impulse jump, a spurious constant). Every mutant must fail at least one
  check; each parametrized id names the case and the kind of mutant, and every position
  of that kind (each piece, each term) is tried.

Long histories (more than LONG_HISTORY pieces) take the numeric route with one aggregated
residual and one breakpoint check: a 48-row table with an impulse passes, read from the
engine's local forms and from piece.expression(t) alike, and the same kinds of mutant, at
the first loaded piece, a middle one and the last (and in the local coefficient form), fail.
"""

from __future__ import annotations

import dataclasses
import math
import textwrap
import types
from collections.abc import Callable
from functools import cache

import pytest
import sympy

from closedform.case import load_case
from closedform.checks import long as long_route
from closedform.checks.base import Check, T
from closedform.checks.verification import verify
from closedform.derivation import derive

# ----------------------------------------------------------------------------- helpers


def case_of(text: str, name: str = "verify-test.toml"):
    return load_case("", text=textwrap.dedent(text), name=name)


@dataclasses.dataclass(frozen=True)
class FakePiece:
    """A piece with the interface verify reads: start, end and expression(t)."""

    start: sympy.Expr
    end: sympy.Expr | None
    expr: sympy.Expr

    def expression(self, time: sympy.Symbol = T) -> sympy.Expr:
        return self.expr.subs(T, time)


def fake_derivation(case, pieces, until, peak=None):
    return types.SimpleNamespace(
        case=case, pieces=tuple(FakePiece(sympy.sympify(a), None if b is None else sympy.sympify(b),
                                          sympy.sympify(x)) for a, b, x in pieces),
        window=types.SimpleNamespace(until=sympy.sympify(until)),
        numbers=types.SimpleNamespace(peak=peak))


def pieces_of(derivation) -> list[FakePiece]:
    return [FakePiece(p.start, p.end, p.expression(T)) for p in derivation.pieces]


def with_pieces(derivation, pieces: list[FakePiece]):
    return types.SimpleNamespace(case=derivation.case, pieces=tuple(pieces),
                                 window=derivation.window, numbers=derivation.numbers)


def failures(checks: list[Check]) -> list[Check]:
    return [c for c in checks if not c.passed]


def explain(checks: list[Check]) -> str:
    return "\n".join(f"{'ok  ' if c.passed else 'FAIL'} {c.name}: {c.detail}" for c in checks)


def check_named(checks: list[Check], prefix: str) -> list[Check]:
    return [c for c in checks if c.name.startswith(prefix)]


# ----------------------------------------------------------------------------- textbook closed forms

SMD = """
title = "textbook"
[system]
model = "spring-mass-damper"
mass = "{m} kg"
stiffness = "{k} N/m"
{damping}
{initial}
{loads}
[report]
until = "{until} s"
"""


def smd_case(m, k, damping="", initial="", loads="", until=1):
    return case_of(SMD.format(m=m, k=k, damping=damping, initial=initial, loads=loads,
                              until=until))


def test_undamped_step_response_passes_and_wrong_frequency_fails():
    """x = F/k (1 − cos ωt), ω = √(k/m): Chopra, Dynamics of Structures, 4th ed., §4.3
    (step force; from memory)."""
    case = smd_case(2, 800, loads='[[load]]\nshape = "step"\namplitude = "10 N"')
    omega = sympy.sqrt(sympy.Integer(800) / 2)            # 20 rad/s
    right = sympy.Rational(10, 800) * (1 - sympy.cos(omega * T))
    checks = verify(fake_derivation(case, [(0, None, right)], 1))
    assert not failures(checks), explain(checks)
    assert {c.name for c in checks} >= {"pieces cover the analysis window", "ode residual on (0, 1)",
                                        "initial values", "independent integration"}
    wrong = sympy.Rational(10, 800) * (1 - sympy.cos(omega * (1 + sympy.Rational(1, 10**6)) * T))
    bad = verify(fake_derivation(case, [(0, None, wrong)], 1))
    assert check_named(bad, "ode residual on (0, 1)")[0].passed is False
    assert check_named(bad, "independent integration")[0].passed is False


def test_damped_free_vibration_passes_and_undamped_frequency_fails():
    """x = e^(−ζωt) [x0 cos ω_D t + (v0 + ζω x0)/ω_D sin ω_D t], ω_D = ω√(1 − ζ²):
    Chopra, Dynamics of Structures, 4th ed., §2.2, eq. (2.2.4) (from memory)."""
    case = smd_case(1, 100, damping="damping_ratio = 0.1",
                    initial='[initial]\nvalues = ["10 mm", "0.5 m/s"]', until=2)
    zeta, omega = sympy.Rational(1, 10), sympy.Integer(10)
    x0, v0 = sympy.Rational(1, 100), sympy.Rational(1, 2)

    def free(omega_d):
        return sympy.exp(-zeta * omega * T) * (x0 * sympy.cos(omega_d * T)
                                               + (v0 + zeta * omega * x0) / omega_d
                                               * sympy.sin(omega_d * T))
    checks = verify(fake_derivation(case, [(0, None, free(omega * sympy.sqrt(1 - zeta**2)))], 2))
    assert not failures(checks), explain(checks)
    bad = verify(fake_derivation(case, [(0, None, free(omega))], 2))
    assert not check_named(bad, "ode residual")[0].passed
    assert "max |residual|/scale" in check_named(bad, "ode residual")[0].detail


def test_critically_damped_free_vibration_passes():
    """x = [x0 + (v0 + ω x0) t] e^(−ωt) at ζ = 1: Chopra, Dynamics of Structures, 4th ed.,
    §2.2 (critically damped system; from memory)."""
    case = smd_case(1, 100, damping="damping_ratio = 1",
                    initial='[initial]\nvalues = ["20 mm", "-1 m/s"]', until=2)
    omega, x0, v0 = 10, sympy.Rational(1, 50), -1
    right = (x0 + (v0 + omega * x0) * T) * sympy.exp(-omega * T)
    checks = verify(fake_derivation(case, [(0, None, right)], 2))
    assert not failures(checks), explain(checks)
    # Dropping the t·e^(−ωt) part leaves a function that is not a solution at ζ = 1.
    bad = verify(fake_derivation(case, [(0, None, x0 * sympy.exp(-omega * T))], 2))
    assert failures(bad)


def test_first_order_step_passes_and_wrong_time_constant_fails():
    """y = K A (1 − e^(−t/τ)): Ogata, Modern Control Engineering, 5th ed., section 5-3
    (first-order systems; from memory)."""
    case = case_of("""
        title = "first-order step"
        [system]
        model = "first-order"
        time_constant = "0.5 s"
        gain = 2
        [[load]]
        shape = "step"
        amplitude = 3
        [report]
        until = "3 s"
        """)
    right = 6 * (1 - sympy.exp(-2 * T))
    checks = verify(fake_derivation(case, [(0, None, right)], 3))
    assert not failures(checks), explain(checks)
    bad = verify(fake_derivation(case, [(0, None, 6 * (1 - sympy.exp(-sympy.Rational(201, 100) * T)))], 3))
    assert failures(bad)


def test_unit_impulse_response_passes_and_wrong_jump_fails():
    """x = J/(m ω_D) e^(−ζω(t−a)) sin ω_D (t − a) for t ≥ a: Chopra, Dynamics of Structures,
    4th ed., §4.1 (response to unit impulse; from memory)."""
    case = smd_case(2, 800, damping="damping_ratio = 0.05",
                    loads='[[load]]\nshape = "impulse"\nat = "0.1 s"\nimpulse = "3 N*s"')
    zeta, omega, m, J = sympy.Rational(1, 20), sympy.Integer(20), 2, 3
    omega_d = omega * sympy.sqrt(1 - zeta**2)
    u = T - sympy.Rational(1, 10)

    def response(scale):
        return scale * J / (m * omega_d) * sympy.exp(-zeta * omega * u) * sympy.sin(omega_d * u)
    checks = verify(fake_derivation(case, [(0, "1/10", 0), ("1/10", None, response(1))], 1))
    assert not failures(checks), explain(checks)
    bad = verify(fake_derivation(case, [(0, "1/10", 0), ("1/10", None, response(2))], 1))
    jump = check_named(bad, "breakpoint conditions at t = 0.1")[0]
    assert not jump.passed and "jumps by b·J/a_n = 1.5" in jump.detail


def test_undamped_rectangular_pulse_passes_and_missing_breakpoint_fails():
    """x = F/k (1 − cos ωt) for t ≤ t_d, F/k [cos ω(t − t_d) − cos ωt] after: Chopra, Dynamics
    of Structures, 4th ed., §4.7 (rectangular pulse force; from memory)."""
    case = smd_case(2, 800, loads='[[load]]\nshape = "rectangle"\nduration = "0.1 s"\n'
                                  'amplitude = "10 N"')
    F_k, omega, td = sympy.Rational(10, 800), 20, sympy.Rational(1, 10)
    during = F_k * (1 - sympy.cos(omega * T))
    after = F_k * (sympy.cos(omega * (T - td)) - sympy.cos(omega * T))
    checks = verify(fake_derivation(case, [(0, td, during), (td, None, after)], 1))
    assert not failures(checks), explain(checks)
    # The forced piece carried past the end of the pulse: the residual sees the load stop.
    bad = verify(fake_derivation(case, [(0, None, during)], 1))
    residual = check_named(bad, "ode residual on (0, 1)")[0]
    assert not residual.passed and "the load changes inside this piece at t = 0.1" in residual.detail


# ----------------------------------------------------------------------------- engine derivations

CASES = {
    "undamped-rectangle": """
        title = "undamped rectangle pulse"
        [system]
        model = "spring-mass-damper"
        mass = "100 kg"
        stiffness = "1 MN/m"
        [[load]]
        shape = "rectangle"
        at = "5 ms"
        duration = "10 ms"
        amplitude = "10 kN"
        [report]
        until = "100 ms"
        """,
    "damped-half-sine": """
        title = "damped half-sine"
        [system]
        model = "spring-mass-damper"
        mass = "420 kg"
        stiffness = "2.6 MN/m"
        damping_ratio = 0.02
        [[load]]
        shape = "half-sine"
        at = "20 ms"
        duration = "1.5 ms"
        impulse = "95 N*s"
        [report]
        until = "250 ms"
        """,
    "impulse-later": """
        title = "impulse at t > 0 on a displaced oscillator"
        [system]
        model = "spring-mass-damper"
        mass = "100 kg"
        stiffness = "1 MN/m"
        damping_ratio = 0.05
        [initial]
        values = ["1 mm", "0 m/s"]
        [[load]]
        shape = "impulse"
        at = "7 ms"
        impulse = "20 N*s"
        [report]
        until = "80 ms"
        """,
    "first-order-ramp": """
        title = "first-order lag of a ramp"
        [system]
        model = "first-order"
        time_constant = "0.5 s"
        gain = 2
        [[load]]
        shape = "ramp"
        at = "0.2 s"
        rate = "3 s^-1"
        duration = "1 s"
        [report]
        until = "4 s"
        """,
    "critically-damped": """
        title = "critically damped triangle"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "100 N/m"
        damping_ratio = 1
        [[load]]
        shape = "triangle"
        at = "0.1 s"
        duration = "0.3 s"
        amplitude = "50 N"
        peak_at = 0.25
        [report]
        until = "2 s"
        """,
    "symbolic-rectangle": """
        title = "symbolic rectangle"
        [symbols]
        m = "kg"
        k = "N/m"
        F = "N"
        d = "s"
        [system]
        model = "spring-mass-damper"
        mass = "m"
        stiffness = "k"
        [[load]]
        shape = "rectangle"
        duration = "d"
        amplitude = "F"
        [report]
        until = "10 s"
        """,
}

# Further correct derivations, checked to pass (not mutated): other models, shapes, impulses
# at t = 0, symbols in a stated regime. The heavier ones (long derivations) are marked slow.
MORE_CASES = {
    "base-excitation-impulse-and-step": """
        title = "support velocity kick then a step of acceleration"
        [system]
        model = "base-excitation"
        mass = "10 kg"
        stiffness = "4000 N/m"
        damping = "20 N*s/m"
        [[load]]
        shape = "impulse"
        at = "0.05 s"
        impulse = "2 m/s"
        [[load]]
        shape = "step"
        at = "0.1 s"
        amplitude = "3 m/s^2"
        [report]
        until = "0.5 s"
        """,
    "series-rlc-step": """
        title = "switched RLC"
        [system]
        model = "series-rlc"
        inductance = "10 mH"
        resistance = "50 ohm"
        capacitance = "10 uF"
        [[load]]
        shape = "step"
        amplitude = "12 V"
        [report]
        until = "5 ms"
        """,
    "first-order-impulses": """
        title = "first-order impulses, one at t = 0, repeated ones later"
        [system]
        model = "first-order"
        time_constant = "0.5 s"
        gain = 2
        [initial]
        values = [1]
        [[load]]
        shape = "impulse"
        impulse = "0.3 s"
        [[load]]
        shape = "impulse"
        at = "0.4 s"
        impulse = "0.2 s"
        repeat = { count = 3, every = "0.5 s" }
        [report]
        until = "3 s"
        """,
    "symbolic-critically-damped-step": """
        title = "symbolic critically damped"
        [symbols]
        m = "kg"
        k = "N/m"
        c = "N*s/m"
        F = "N"
        [system]
        model = "spring-mass-damper"
        mass = "m"
        stiffness = "k"
        damping = "c"
        regime = "critically-damped"
        [[load]]
        shape = "step"
        amplitude = "F"
        [report]
        until = "10 s"
        """,
    "symbolic-damped-impulse": """
        title = "symbolic damped impulse"
        [symbols]
        m = "kg"
        k = "N/m"
        zeta = "1"
        J = "N*s"
        a = "s"
        [system]
        model = "spring-mass-damper"
        mass = "m"
        stiffness = "k"
        damping_ratio = "zeta"
        regime = "under-damped"
        [[load]]
        shape = "impulse"
        at = "a"
        impulse = "J"
        [report]
        until = "20 s"
        """,
}
SLOW_CASES = {
    "ode-order-4-half-sine": """
        title = "fourth order"
        [system]
        model = "ode"
        coefficients = [1, 2, 11, 10, 30]
        [initial]
        values = [0.1, 0, 0, 0]
        [[load]]
        shape = "half-sine"
        at = "0.5 s"
        duration = "1 s"
        amplitude = 4
        [report]
        until = "8 s"
        """,
    "table-with-jump": """
        title = "table"
        [system]
        model = "spring-mass-damper"
        mass = "2 kg"
        stiffness = "800 N/m"
        damping_ratio = 0.1
        [[load]]
        shape = "table"
        points = [[0, 0], [0.01, 100], [0.02, 100], [0.02, 50], [0.05, 0]]
        at = "10 ms"
        [report]
        until = "0.5 s"
        """,
    "formula": """
        title = "formula"
        [system]
        model = "spring-mass-damper"
        mass = "2 kg"
        stiffness = "800 N/m"
        damping_ratio = 0.1
        [[load]]
        shape = "formula"
        expr = "100*sin(3*tau/0.05)^2 + 20*cos(tau/0.01)*exp(-tau/0.02)"
        duration = "50 ms"
        at = "10 ms"
        [report]
        until = "0.5 s"
        """,
    "stiff-ode-half-sine": """
        title = "stiff: poles -1 and -1e6"
        [system]
        model = "ode"
        coefficients = [1, 1000001, 1000000]
        [[load]]
        shape = "half-sine"
        at = "0.5 s"
        duration = "1 s"
        amplitude = 4
        [report]
        until = "4 s"
        """,
    "repeated-half-sine-float-coefficients": """
        title = "twelve hammer blows"
        [system]
        model = "spring-mass-damper"
        mass = "420 kg"
        stiffness = "2.6 MN/m"
        damping_ratio = 0.02
        [[load]]
        shape = "half-sine"
        at = "20 ms"
        duration = "1.5 ms"
        impulse = "95 N*s"
        repeat = { count = 12, every = "40 ms" }
        [report]
        until = "600 ms"
        """,
}


@pytest.mark.parametrize("name", sorted(MORE_CASES))
def test_more_correct_derivations_pass(name):
    checks = verify(derive(case_of(MORE_CASES[name], name=f"{name}.toml")))
    assert checks and not failures(checks), explain(checks)


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(SLOW_CASES))
def test_heavier_correct_derivations_pass(name):
    checks = verify(derive(case_of(SLOW_CASES[name], name=f"{name}.toml")))
    assert checks and not failures(checks), explain(checks)


# Natural rates of each case (|d argument/dt| of its sines, cosines and exponentials), from
# the textbook relations ω = √(k/m), ω_D = ω√(1 − ζ²), decay ζω, first-order 1/τ.
RATES = {
    "undamped-rectangle": [100.0],
    "damped-half-sine": [math.sqrt(2.6e6 / 420) * math.sqrt(1 - 0.02**2), 0.02 * math.sqrt(2.6e6 / 420)],
    "impulse-later": [100.0 * math.sqrt(1 - 0.05**2), 5.0],
    "first-order-ramp": [2.0],
    "critically-damped": [10.0],
}


@cache
def derived(name: str):
    return derive(case_of(CASES[name], name=f"{name}.toml"))


@pytest.mark.parametrize("name", sorted(CASES))
def test_correct_derivation_passes_every_check(name):
    derivation = derived(name)
    checks = verify(derivation)
    assert checks and not failures(checks), explain(checks)
    assert all(isinstance(c, Check) and c.detail for c in checks)
    assert len(check_named(checks, "ode residual on")) >= len(derivation.pieces)
    assert check_named(checks, "independent integration")


def test_check_names_follow_the_result_contract():
    checks = verify(derived("undamped-rectangle"))
    names = [c.name for c in checks]
    assert names[:4] == ["pieces cover the analysis window", "ode residual on (0, 0.005)",
                         "ode residual on (0.005, 0.015)", "ode residual on (0.015, 0.1)"]
    assert "breakpoint conditions at t = 0.005" in names
    assert "impulse of load[1]" in [c.name for c in verify(derived("damped-half-sine"))]
    with pytest.raises(dataclasses.FrozenInstanceError):
        checks[0].passed = False


def test_symbolic_case_checks_symbolically_and_at_three_substitutions():
    checks = verify(derived("symbolic-rectangle"))
    assert "ode residual on (0, d) [symbolic]" in [c.name for c in checks]
    assert "simplifies to 0" in check_named(checks, "ode residual on (0, d)")[0].detail
    integrations = check_named(checks, "independent integration")
    assert len(integrations) == 3 and all("substitution" in c.name for c in integrations)
    assert [c.name for c in verify(derived("symbolic-rectangle"))] == [c.name for c in checks]


def test_fully_valued_symbols_get_symbolic_and_numeric_residuals():
    derivation = derive(case_of("""
        title = "valued symbols"
        [symbols]
        m = { unit = "kg", value = "420 kg" }
        k = { unit = "N/m", value = "2.6 MN/m" }
        F = { unit = "N", value = "10 kN" }
        d = { unit = "s", value = "2 ms" }
        [system]
        model = "spring-mass-damper"
        mass = "m"
        stiffness = "k"
        [[load]]
        shape = "rectangle"
        duration = "d"
        amplitude = "F"
        [report]
        until = "100 ms"
        """))
    checks = verify(derivation)
    assert not failures(checks), explain(checks)
    names = [c.name for c in checks]
    assert "ode residual on (0, d) [symbolic]" in names and "ode residual on (0, 0.002)" in names


# ----------------------------------------------------------------------------- each check can fail


def test_coverage_fails_when_a_piece_is_missing():
    pieces = pieces_of(derived("undamped-rectangle"))
    checks = verify(with_pieces(derived("undamped-rectangle"), pieces[:-1]))
    assert not check_named(checks, "pieces cover")[0].passed


def test_initial_values_fail_for_a_wrong_start():
    derivation = derived("impulse-later")
    case = dataclasses.replace(derivation.case, initial=(sympy.Rational(2, 1000), sympy.S.Zero))
    checks = verify(types.SimpleNamespace(case=case, pieces=derivation.pieces,
                                          window=derivation.window, numbers=derivation.numbers))
    initial = check_named(checks, "initial values")[0]
    assert not initial.passed and "x(0+)" in initial.detail
    assert not check_named(checks, "independent integration")[0].passed


def test_impulse_inside_a_piece_is_reported():
    derivation = derived("impulse-later")
    first, _second = pieces_of(derivation)
    checks = verify(with_pieces(derivation, [FakePiece(first.start, None, first.expr)]))
    reported = check_named(checks, "breakpoint conditions at t = 0.007")
    assert reported and not reported[0].passed and "no piece ends" in reported[0].detail


def test_impulse_area_fails_when_amplitude_does_not_match_the_stated_impulse():
    derivation = derived("damped-half-sine")
    (load,) = derivation.case.loads
    values = dict(load.values)
    values["amplitude"] = values["amplitude"] * sympy.Rational(1000001, 1000000)
    case = dataclasses.replace(derivation.case, loads=(dataclasses.replace(load, values=values),))
    checks = verify(types.SimpleNamespace(case=case, pieces=derivation.pieces,
                                          window=derivation.window, numbers=derivation.numbers))
    area = check_named(checks, "impulse of load[1]")[0]
    assert not area.passed and "relative difference 1.0e-6" in area.detail


def test_a_broken_piece_is_a_failed_check_not_an_exception():
    class Broken:
        start, end = sympy.S.Zero, None

        def expression(self, time):
            raise RuntimeError("no expression")
    derivation = derived("undamped-rectangle")
    checks = verify(types.SimpleNamespace(case=derivation.case, pieces=(Broken(),),
                                          window=derivation.window, numbers=derivation.numbers))
    assert checks and failures(checks) and "no expression" in checks[0].detail


# ----------------------------------------------------------------------------- mutation suite

EPSILON = sympy.Rational(1, 10**6)
Mutant = tuple[str, list[FakePiece]]


def _terms_positions(pieces: list[FakePiece]):
    for i, piece in enumerate(pieces):
        for j, term in enumerate(sympy.Add.make_args(piece.expr)):
            if term != 0:
                yield i, j, term


def _replace_term(pieces, i, j, new_term) -> list[FakePiece]:
    terms = list(sympy.Add.make_args(pieces[i].expr))
    terms[j] = new_term
    result = list(pieces)
    result[i] = FakePiece(pieces[i].start, pieces[i].end, sympy.Add(*terms))
    return result


def scale_coefficient(name, pieces) -> list[Mutant]:
    return [(f"piece {i + 1} term {j + 1} × (1 + 1e-6)",
             _replace_term(pieces, i, j, term * (1 + EPSILON)))
            for i, j, term in _terms_positions(pieces)]


def flip_sign(name, pieces) -> list[Mutant]:
    return [(f"piece {i + 1} term {j + 1} negated", _replace_term(pieces, i, j, -term))
            for i, j, term in _terms_positions(pieces)]


def drop_term(name, pieces) -> list[Mutant]:
    return [(f"piece {i + 1} term {j + 1} dropped", _replace_term(pieces, i, j, sympy.S.Zero))
            for i, j, term in _terms_positions(pieces)]


def _length(piece: FakePiece, until) -> sympy.Expr:
    return (piece.end if piece.end is not None else until) - piece.start


def shift_breakpoint(name, pieces) -> list[Mutant]:
    """Move the boundary between two pieces (the expressions stay)."""
    until = derived(name).window.until
    mutants = []
    for i in range(len(pieces) - 1):
        delta = EPSILON * _length(pieces[i + 1], until)
        moved = list(pieces)
        moved[i] = FakePiece(pieces[i].start, pieces[i].end + delta, pieces[i].expr)
        moved[i + 1] = FakePiece(pieces[i + 1].start + delta, pieces[i + 1].end, pieces[i + 1].expr)
        mutants.append((f"boundary {i + 1} moved by 1e-6 of the next piece", moved))
    return mutants


def shift_local_time(name, pieces) -> list[Mutant]:
    """The expression of a later piece delayed by a little (its time origin shifted)."""
    until = derived(name).window.until
    mutants = []
    for i in range(1, len(pieces)):
        if pieces[i].expr == 0:
            continue
        delta = EPSILON * _length(pieces[i], until)
        moved = list(pieces)
        moved[i] = FakePiece(pieces[i].start, pieces[i].end, pieces[i].expr.subs(T, T - delta))
        mutants.append((f"piece {i + 1} delayed by 1e-6 of its length", moved))
    return mutants


def wrong_rate(name, pieces) -> list[Mutant]:
    """ω_D (or the decay rate, or 1/τ) off by 1e-6 wherever it appears as a natural rate."""
    rates = RATES[name]

    def natural(expression) -> bool:
        if not isinstance(expression, (sympy.sin, sympy.cos, sympy.exp)):
            return False
        argument = expression.args[0]
        if not argument.has(T):
            return False
        rate = abs(float(sympy.diff(argument, T)))
        return any(abs(rate - r) <= 1e-9 * r for r in rates)

    mutants = []
    for i, piece in enumerate(pieces):
        changed = piece.expr.replace(natural, lambda e: e.func(e.args[0] * (1 + EPSILON)))
        if changed != piece.expr:
            moved = list(pieces)
            moved[i] = FakePiece(piece.start, piece.end, changed)
            mutants.append((f"piece {i + 1} natural rate × (1 + 1e-6)", moved))
    assert mutants, "the case has no natural rate to corrupt"
    return mutants


def wrong_impulse_jump(name, pieces) -> list[Mutant]:
    """The post-impulse piece's velocity (sine) term scaled, as if the jump were wrong."""
    mutants = []
    for i, piece in enumerate(pieces):
        if i == 0 or not piece.expr.has(sympy.sin):
            continue
        changed = piece.expr.replace(lambda e: isinstance(e, sympy.sin) and e.has(T),
                                     lambda e: e * (1 + sympy.Rational(1, 1000)))
        moved = list(pieces)
        moved[i] = FakePiece(piece.start, piece.end, changed)
        mutants.append((f"piece {i + 1} sine term × 1.001", moved))
    assert mutants
    return mutants


def spurious_constant(name, pieces) -> list[Mutant]:
    """A constant of 1e-6 of the response's size added to one piece."""
    peak = derived(name).numbers.peak
    size = sympy.Rational(repr(abs(peak.value))) if peak is not None else sympy.S.One
    return [(f"piece {i + 1} + 1e-6·peak",
             [FakePiece(p.start, p.end, p.expr + size * EPSILON) if k == i else p
              for k, p in enumerate(pieces)])
            for i in range(len(pieces))]


KINDS: dict[str, Callable[[str, list[FakePiece]], list[Mutant]]] = {
    "scale-coefficient": scale_coefficient,
    "flip-sign": flip_sign,
    "drop-term": drop_term,
    "shift-breakpoint": shift_breakpoint,
    "shift-local-time": shift_local_time,
    "wrong-natural-rate": wrong_rate,
    "spurious-constant": spurious_constant,
}
MUTATIONS = [(case, kind) for case in CASES for kind in KINDS
             if not (kind == "wrong-natural-rate" and case not in RATES)]
MUTATIONS.append(("impulse-later", "wrong-impulse-jump"))
KINDS["wrong-impulse-jump"] = wrong_impulse_jump


@pytest.mark.parametrize(("name", "kind"), MUTATIONS, ids=[f"{c}-{k}" for c, k in MUTATIONS])
def test_every_mutant_fails_verification(name, kind):
    derivation = derived(name)
    mutants = KINDS[kind](name, pieces_of(derivation))
    assert mutants, f"no mutant of kind {kind} for {name}"
    survivors = []
    for label, pieces in mutants:
        checks = verify(with_pieces(derivation, pieces))
        if not failures(checks):
            survivors.append(f"{label}:\n{explain(checks)}")
    assert not survivors, f"{len(survivors)} of {len(mutants)} mutants passed:\n" + "\n".join(survivors)


# ----------------------------------------------------------------------------- long histories
#
# Beyond LONG_HISTORY pieces the same checks run on numbers (parsed pieces, the loads with
# numbers) and the residual and breakpoint conditions come as one check each. The same
# mutants must fail there too.


def long_case_text(rows: int = 48) -> str:
    """An invented, measured-looking force history (1 ms rows, zero at both ends) on the
    damped oscillator of the scale benchmark, and an impulse between two rows."""
    values = [0.0 if i in (0, rows) else
              round(6 + 5 * math.sin(i / 7) + 2 * math.sin(i / 2.3) + 0.3 * (-1) ** i, 3)
              for i in range(rows + 1)]
    points = ", ".join(f"[{i / 1000!r}, {1000 * v!r}]" for i, v in enumerate(values))
    return f"""
        title = "long table"
        [system]
        model = "spring-mass-damper"
        mass = "750 kg"
        stiffness = "3.1 MN/m"
        damping_ratio = 0.05
        [[load]]
        shape = "table"
        points = [{points}]
        [[load]]
        shape = "impulse"
        at = "20.5 ms"
        impulse = "30 N*s"
        [report]
        until = "120 ms"
        """


@cache
def long_derivation():
    return derive(case_of(long_case_text(), name="long-table.toml"))


def test_long_history_gets_one_aggregated_check_of_each_kind():
    derivation = long_derivation()
    count = len(derivation.pieces)
    assert count > long_route.LONG_HISTORY
    checks = verify(derivation)
    assert not failures(checks), explain(checks)
    assert [c.name for c in checks] == [
        "pieces cover the analysis window", f"ode residual on {count} pieces", "initial values",
        f"breakpoint conditions at {count - 1} boundaries", "independent integration"]
    assert {(c.name, c.detail) for c in checks} <= {(c.name, c.detail) for c in derivation.checks}
    residual = check_named(checks, "ode residual")[0].detail
    assert "coefficients are 30-digit floats)" in residual
    assert "x' jumps by b·J/a_n at t = 0.0205 (impulse of load[2])" in checks[3].detail
    points = int(check_named(checks, "independent integration")[0].detail.split(" points")[0]
                 .rsplit(" ", 1)[1])
    assert 50 <= points <= long_route.LONG_SAMPLES


def test_long_history_is_read_from_the_local_form_without_substitution():
    """Pieces that carry their local form are read from it: piece.expression(t) (a sympy
    substitution per piece) is not called."""
    derivation = long_derivation()
    calls = []

    class Watched:
        def __init__(self, piece):
            self.start, self.end, self.local = piece.start, piece.end, piece.local

        def expression(self, time=T):
            calls.append(time)
            raise AssertionError("expression(t) called")
    checks = verify(with_pieces(derivation, [Watched(p) for p in derivation.pieces]))
    assert not failures(checks) and not calls, explain(checks)


def test_long_history_read_through_expressions_passes_the_same_checks():
    derivation = long_derivation()
    checks = verify(with_pieces(derivation, pieces_of(derivation)))
    assert not failures(checks), explain(checks)
    assert [c.name for c in checks] == [c.name for c in verify(derivation)]


def test_long_history_piece_outside_the_parsed_structure_goes_through_sympy():
    """x·(2/π)(atan t + atan 1/t) = x for t > 0: not an exp·cos/sin·polynomial form, so the
    piece is differentiated by sympy; right, it passes; scaled by 1 + 1e-6, it fails."""
    derivation = long_derivation()
    pieces = pieces_of(derivation)
    last = pieces[-1]
    one = 2 * (sympy.atan(T) + sympy.atan(1 / T)) / sympy.pi
    disguised = pieces[:-1] + [FakePiece(last.start, last.end, last.expr * one)]
    checks = verify(with_pieces(derivation, disguised))
    assert not failures(checks), explain(checks)
    wrong = pieces[:-1] + [FakePiece(last.start, last.end, last.expr * one * (1 + EPSILON))]
    assert failures(verify(with_pieces(derivation, wrong)))


def test_long_history_residual_failure_names_the_piece():
    derivation = long_derivation()
    pieces = pieces_of(derivation)
    i = len(pieces) // 2
    wrong = list(pieces)
    wrong[i] = FakePiece(pieces[i].start, pieces[i].end, pieces[i].expr * (1 + EPSILON))
    residual = check_named(verify(with_pieces(derivation, wrong)), "ode residual")[0]
    assert not residual.passed
    assert residual.detail.startswith(f"1 of {len(pieces)} pieces over the limit, the first on "
                                      f"({float(pieces[i].start):.6g}, {float(pieces[i].end):.6g})")


def test_long_history_impulse_inside_a_piece_is_reported():
    derivation = long_derivation()
    pieces = pieces_of(derivation)
    (k,) = [i for i, p in enumerate(pieces) if p.start == sympy.Rational(41, 2000)]
    merged = pieces[:k - 1] + [FakePiece(pieces[k - 1].start, pieces[k].end, pieces[k - 1].expr)] \
        + pieces[k + 1:]
    reported = check_named(verify(with_pieces(derivation, merged)), "breakpoint conditions at t = 0.0205")
    assert reported and not reported[0].passed and "no piece ends" in reported[0].detail


def test_long_history_coverage_and_initial_values_can_fail():
    derivation = long_derivation()
    checks = verify(with_pieces(derivation, pieces_of(derivation)[:-1]))
    assert not check_named(checks, "pieces cover")[0].passed
    case = dataclasses.replace(derivation.case, initial=(sympy.Rational(1, 10**6), sympy.S.Zero))
    checks = verify(types.SimpleNamespace(case=case, pieces=derivation.pieces,
                                          window=derivation.window, numbers=derivation.numbers))
    initial = check_named(checks, "initial values")[0]
    assert not initial.passed and "x(0+)" in initial.detail
    assert not check_named(checks, "independent integration")[0].passed


def _long_positions(pieces: list[FakePiece]) -> list[int]:
    """The first loaded piece, one in the middle, the last (free vibration)."""
    return sorted({1, len(pieces) // 2, len(pieces) - 1})


def _negligible(values: list[sympy.Expr], at) -> list[bool]:
    """Which terms are below 1e-20 of the largest at ``at``: the 30-digit rounding noise the
    engine leaves (e.g. a polynomial part of 1e-46 in a free vibration); corrupting those
    changes nothing the checks could or should see."""
    sizes = [abs(float(sympy.N(v.subs(T, at), 30))) for v in values]
    return [size < 1e-20 * max(sizes) for size in sizes]


def _long_term_mutants(pieces, i) -> list[Mutant]:
    mutants = []
    terms = sympy.Add.make_args(pieces[i].expr)
    noise = _negligible(list(terms), pieces[i].start + _length(pieces[i], long_derivation().window.until) / 3)
    for j, term in enumerate(terms):
        if term != 0 and not noise[j]:
            mutants += [(f"piece {i + 1} term {j + 1} × (1 + 1e-6)",
                         _replace_term(pieces, i, j, term * (1 + EPSILON))),
                        (f"piece {i + 1} term {j + 1} negated", _replace_term(pieces, i, j, -term)),
                        (f"piece {i + 1} term {j + 1} dropped",
                         _replace_term(pieces, i, j, sympy.S.Zero))]
    return mutants


def _long_other_mutants(pieces, i) -> list[Mutant]:
    derivation = long_derivation()
    until = derivation.window.until
    piece = pieces[i]
    mutants = []
    natural = piece.expr.replace(lambda e: isinstance(e, (sympy.sin, sympy.cos, sympy.exp))
                                 and e.args[0].has(T), lambda e: e.func(e.args[0] * (1 + EPSILON)))
    mutants.append((f"piece {i + 1} natural rates × (1 + 1e-6)",
                    [FakePiece(piece.start, piece.end, natural) if k == i else p
                     for k, p in enumerate(pieces)]))
    size = sympy.Rational(repr(abs(derivation.numbers.peak.value)))
    mutants.append((f"piece {i + 1} + 1e-6·peak",
                    [FakePiece(p.start, p.end, p.expr + size * EPSILON) if k == i else p
                     for k, p in enumerate(pieces)]))
    delta = EPSILON * _length(piece, until)
    mutants.append((f"piece {i + 1} delayed by 1e-6 of its length",
                    [FakePiece(p.start, p.end, p.expr.subs(T, T - delta)) if k == i else p
                     for k, p in enumerate(pieces)]))
    if i + 1 < len(pieces):
        delta = EPSILON * _length(pieces[i + 1], until)
        moved = list(pieces)
        moved[i] = FakePiece(pieces[i].start, pieces[i].end + delta, pieces[i].expr)
        moved[i + 1] = FakePiece(pieces[i + 1].start + delta, pieces[i + 1].end, pieces[i + 1].expr)
        mutants.append((f"boundary {i + 1} moved by 1e-6 of the next piece", moved))
    return mutants


@dataclasses.dataclass(frozen=True)
class StretchedMode:
    """A mode of the engine read at (1 + 1e-6)·u: all its rates off by 1e-6."""

    mode: object

    def expression(self, u):
        return self.mode.expression(u * (1 + EPSILON))


def _long_local_mutants(derivation, i) -> list[tuple[str, list]]:
    """Mutants of the engine's own pieces, in their local form (coefficient table)."""
    piece = derivation.pieces[i]
    terms = dict(piece.local.terms)

    def replaced(new_terms) -> list:
        local = types.SimpleNamespace(terms=new_terms)
        return [types.SimpleNamespace(start=p.start, end=p.end, local=local) if k == i else p
                for k, p in enumerate(derivation.pieces)]
    mutants = []
    u = sympy.Symbol("u", real=True)
    end = piece.end if piece.end is not None else derivation.window.until
    noise = _negligible([c * mode.expression(u).subs(u, T - piece.start) for mode, c in terms.items()],
                        piece.start + (end - piece.start) / 3)
    for (mode, c), negligible in zip(terms.items(), noise):
        if negligible:
            continue
        mutants.append((f"piece {i + 1} coefficient of {mode} × (1 + 1e-6)",
                        replaced({**terms, mode: c * (1 + EPSILON)})))
        if mode.rate != 0 or mode.frequency != 0:
            stretched = {m: v for m, v in terms.items() if m != mode}
            stretched[StretchedMode(mode)] = c
            mutants.append((f"piece {i + 1} {mode} at (1 + 1e-6)·u", replaced(stretched)))
    return mutants


def _long_jump_mutants(pieces) -> list[Mutant]:
    """The piece that starts at the impulse with its sine terms × 1.001 (a wrong jump)."""
    (k,) = [i for i, p in enumerate(pieces) if p.start == sympy.Rational(41, 2000)]
    changed = pieces[k].expr.replace(lambda e: isinstance(e, sympy.sin) and e.has(T),
                                     lambda e: e * (1 + sympy.Rational(1, 1000)))
    return [(f"piece {k + 1} (after the impulse) sine terms × 1.001",
             [FakePiece(p.start, p.end, changed) if i == k else p for i, p in enumerate(pieces)])]


LONG_KINDS = ["terms", "rates-constant-delay-boundary-jump", "local-form"]


@pytest.mark.parametrize("kind", LONG_KINDS, ids=[f"long-table-{k}" for k in LONG_KINDS])
def test_every_long_history_mutant_fails_verification(kind):
    derivation = long_derivation()
    pieces = pieces_of(derivation)
    mutants: list = []
    for i in _long_positions(pieces):
        if kind == "terms":
            mutants += _long_term_mutants(pieces, i)
        elif kind == "rates-constant-delay-boundary-jump":
            mutants += _long_other_mutants(pieces, i)
        else:
            mutants += _long_local_mutants(derivation, i)
    if kind == "rates-constant-delay-boundary-jump":
        mutants += _long_jump_mutants(pieces)
    assert mutants
    survivors = []
    for label, mutated in mutants:
        checks = verify(with_pieces(derivation, mutated))
        if not failures(checks):
            survivors.append(f"{label}:\n{explain(checks)}")
    assert not survivors, f"{len(survivors)} of {len(mutants)} mutants passed:\n" + "\n".join(survivors)

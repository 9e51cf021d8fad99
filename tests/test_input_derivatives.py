"""ode with input_coefficients (derivatives of the input on the right-hand side).

References: scipy.signal.step / lsim on the same transfer function B(s)/P(s) (reference
library), the derivative rule for an added zero, and Nise's observation on the effect of an
added zero on the overshoot.
"""

from __future__ import annotations

import math

import numpy
import pytest
from scipy import signal
from scipy.optimize import brentq

from tests.conftest import derive_text

from .test_case_errors import assert_message


def ode_case(coefficients, inputs, loads: str, until: float, initial: str = "") -> str:
    return f"""
        title = "Lead term"
        [system]
        model = "ode"
        coefficients = {list(coefficients)!r}
        input_coefficients = {list(inputs)!r}
        {initial}
        {loads}
        [report]
        until = "{until!r} s"
        """


STEP = '[[load]]\nshape = "step"\namplitude = 1'


@pytest.mark.parametrize("zero", [0.5, 1.0, 2.0, 5.0, 20.0])
def test_added_zero_raises_the_overshoot_nise(zero):
    # Nise, Control Systems Engineering, ch. 4 (Sec. 4.8, system response with zeros): a zero
    # added to a second-order system, T(s) = (ω²/a)(s + a)/(s² + 2ζωs + ω²), makes the step
    # response c(t) = c₀(t) + c₀′(t)/a, so the overshoot grows as the zero approaches the
    # poles and tends to that of the plain system as a → ∞. Reference values: scipy.signal.step
    # on the same transfer function, and brentq on c′(t) = 0 for the peak time.
    zeta, omega = 0.5, 2.0
    denominator = [1, 2 * zeta * omega, omega**2]
    numerator = [omega**2 / zero, omega**2]
    d = derive_text(ode_case(denominator, numerator, STEP, 20.0))
    assert d.status == "verified"
    result = d.to_dict()
    times = numpy.linspace(0, 20, 4001)
    _t, reference = signal.step((numerator, denominator), T=times)
    assert numpy.max(numpy.abs(d.evaluate(times) - reference)) <= 1e-7
    # the peak: a root of c′, bracketed on the grid, solved by brentq on the impulse response
    impulse = lambda t: float(signal.impulse((numerator, denominator), T=[0, t])[1][-1])  # noqa: E731
    i = int(numpy.argmax(reference))
    peak_time = brentq(impulse, times[i - 1], times[i + 1], xtol=1e-13)
    assert result["overshoot"]["time"] == pytest.approx(peak_time, rel=1e-8)
    value = float(signal.step((numerator, denominator), T=[0, peak_time])[1][-1])
    assert result["overshoot"]["value"] == pytest.approx(100 * (value - 1), rel=1e-7)
    plain = 100 * math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2))   # Ogata ch. 5 (no zero)
    assert result["overshoot"]["value"] > plain


def test_overshoot_falls_towards_the_plain_system_as_the_zero_moves_away():
    # Nise, ch. 4 (Sec. 4.8): the farther the zero from the dominant poles, the smaller its
    # effect; the plain second-order overshoot (Ogata, Modern Control Engineering, 5th ed.,
    # ch. 5) is the limit.
    zeta, omega = 0.5, 2.0
    values = []
    for zero in (0.5, 1.0, 2.0, 5.0, 50.0):
        d = derive_text(ode_case([1, 2 * zeta * omega, omega**2],
                                 [omega**2 / zero, omega**2], STEP, 20.0))
        values.append(d.to_dict()["overshoot"]["value"])
    assert values == sorted(values, reverse=True)
    assert values[-1] == pytest.approx(100 * math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2)),
                                       rel=2e-2)


def test_third_order_lead_with_pulses_impulse_and_initial_values_against_lsim():
    coefficients, inputs = [1, 4, 9, 10], [3, 0, 5]
    loads = ('[[load]]\nshape = "rectangle"\nat = "0.5 s"\nduration = "1 s"\namplitude = 2\n'
             '[[load]]\nshape = "ramp"\nat = "5 s"\nrate = "1 s^-1"\nduration = "1 s"\n')
    d = derive_text(ode_case(coefficients, inputs, loads, 12.0))
    assert d.status == "verified"
    times = numpy.linspace(0, 12, 24001)
    load = numpy.where((times >= 0.5) & (times < 1.5), 2.0, 0.0) \
        + numpy.clip(times - 5, 0, 1)
    # lsim on B(s)/P(s) with a piecewise-linear input (exact for linear interpolation between
    # samples, so the grid holds every corner); the rectangle's edges fall on grid points
    _t, reference, _x = signal.lsim((inputs, coefficients), load, times, interp=True)
    away = (numpy.abs(times - 0.5) > 2e-3) & (numpy.abs(times - 1.5) > 2e-3)
    assert numpy.max(numpy.abs(d.evaluate(times)[away] - reference[away])) <= 2e-3
    # the step's derivative is an impulse: x′ jumps by b₂·2/a₃ = 6 where the rectangle starts
    before, after = d.evaluate([0.5 - 1e-12, 0.5], derivative=1)
    assert after - before == pytest.approx(6.0, abs=1e-6)


def test_sheet_shows_the_transform_of_the_input_derivatives():
    from closedform.render import render_markdown
    d = derive_text(ode_case([1, 2, 4], [2, 4], STEP, 10.0))
    sheet = render_markdown(d)
    assert "B(s) = 2 s + 4" in sheet
    assert "| $0$ | $2 \\delta\\left(t\\right)$ |" in sheet
    assert "inverse transform of $B(s)\\,G(s)/P(s)$" in sheet
    assert not any(c.name.startswith("energy balance") for c in d.checks)


def test_a_wrong_pieces_fails_the_checks_loudly():
    # the checks are independent of the engine: the response of the plain system (without
    # the zero) put in the place of the derivation's pieces solves the same equation on
    # (0, ∞), where the step is constant, but misses the jump of x′ that the step's
    # derivative (an impulse of the right-hand side) makes at t = 0
    import dataclasses

    from closedform.checks.verification import verify
    right = derive_text(ode_case([1, 2, 4], [2, 4], STEP, 10.0))
    plain = derive_text(ode_case([1, 2, 4], [4], STEP, 10.0))
    wrong = dataclasses.replace(right, solution=plain.solution)
    failed = {c.name for c in verify(wrong) if not c.passed}
    assert "initial values" in failed and "independent integration" in failed
    assert not any(name.startswith("ode residual") for name in failed)


BASE_ODE = """\
title = "Lead"
[system]
model = "ode"
coefficients = [1, 2, 4]
input_coefficients = [1, 2, 4]
[[load]]
shape = "step"
amplitude = 1
"""


@pytest.mark.parametrize(("text", "expected"), [
    (BASE_ODE, "case.toml:5: system.input_coefficients: expected at most 2 input coefficients "
               "[b_m, …, b_0] with m < n = 2 (as many as the output's, or more, would put a "
               "Dirac impulse into x), got 3"),
    (BASE_ODE.replace("[1, 2, 4]\n[[", "[0, 4]\n[["),
     "case.toml:5: system.input_coefficients[0]: the leading input coefficient b_m must not "
     "be 0 (leave it out)"),
    (BASE_ODE.replace("[1, 2, 4]\n[[", "\"2 s\"\n[["),
     "case.toml:5: system.input_coefficients: expected a list [b_m, …, b_0] of numbers, got '2 s'"),
    (BASE_ODE.replace("[1, 2, 4]\n[[", "[\"2 kg\"]\n[["),
     "case.toml:5: system.input_coefficients[0]: wrong dimension (expected dimensionless, got mass)"),
], ids=["as many as the output", "leading zero", "not a list", "with a unit"])
def test_bad_input_coefficients(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


def test_a_history_past_the_long_route_keeps_the_per_piece_checks():
    # more pieces than verify.LONG_HISTORY: the input's derivatives are still checked piece
    # by piece (the aggregated long-history checks do not carry them)
    points = [[round(0.002 * i, 6), round(0.5 + 0.4 * math.sin(i / 3.0), 4)] for i in range(45)]
    table = "[[load]]\nshape = \"table\"\npoints = " + repr(points) + "\n"
    d = derive_text(ode_case([1, 160, 40000], [80, 40000], table, 0.2))
    assert len(d.pieces) > 40
    assert d.status == "verified"
    names = [c.name for c in d.checks]
    assert sum(name.startswith("breakpoint conditions") for name in names) == len(d.pieces) - 1

"""Closed forms and engineering numbers against published results.

Each row names its source. Tolerances: peaks are relative, times absolute in seconds.
"""

from __future__ import annotations

import math

import pytest
import sympy

from closedform.response import t

from .conftest import derive_text


def smd(mass: str, stiffness: str, extra: str, loads: str, until: str) -> str:
    return f"""
title = "reference"
[system]
model = "spring-mass-damper"
mass = "{mass}"
stiffness = "{stiffness}"
{extra}
{loads}
[report]
until = "{until}"
"""


# ---------------------------------------------------------------- first-order step
def test_first_order_step_is_one_minus_exponential_and_reaches_63_percent_at_tau():
    """y = K(1 − e^(−t/τ)); y(τ) = (1 − e^(−1))K ≈ 0.632K.
    Ogata, Modern Control Engineering, 5th ed., section 5-3 (first-order systems; from memory)."""
    derivation = derive_text("""
        title = "first-order step"
        [symbols]
        T = "s"
        K = "1"
        [system]
        model = "first-order"
        time_constant = "T"
        gain = "K"
        [[load]]
        shape = "step"
        amplitude = 1
        [report]
        until = "5*T"
        """)
    T, K = sympy.symbols("T K", positive=True)
    (piece,) = derivation.pieces
    assert sympy.simplify(piece.expression(t) - K * (1 - sympy.exp(-t / T))) == 0
    assert sympy.simplify(piece.expression(t).subs(t, T) / K - (1 - sympy.exp(-1))) == 0
    assert float(1 - sympy.exp(-1)) == pytest.approx(0.632, abs=5e-4)


# ---------------------------------------------------------------- undamped rectangle
RECTANGLE_RATIOS = [0.05, 0.125, 0.25, 0.4, 0.5, 0.75, 1.0, 1.6]


@pytest.mark.parametrize("ratio", RECTANGLE_RATIOS)
def test_undamped_rectangular_pulse_dlf(ratio):
    """DLF = 2 sin(π t_d/T_n) for t_d/T_n ≤ 1/2, and 2 beyond.
    Chopra, Dynamics of Structures, 4th ed., section 4.7 (rectangular pulse; from memory)."""
    mass, stiffness = 100, 3947.8417604357433  # T_n ≈ 1 s; t_d set by the ratio below
    period = 2 * math.pi * math.sqrt(mass / stiffness)
    duration = ratio * period
    derivation = derive_text(smd(f"{mass} kg", f"{stiffness!r} N/m", "",
                                 f'[[load]]\nshape = "rectangle"\nduration = "{duration!r} s"\n'
                                 'amplitude = "1 kN"', f"{3 * period + duration!r} s"))
    expected = 2 * math.sin(math.pi * ratio) if ratio <= 0.5 else 2.0
    assert derivation.numbers.dlf == pytest.approx(expected, rel=1e-9)


# ---------------------------------------------------------------- damped step overshoot
@pytest.mark.parametrize("zeta", ["0.02", "0.05", "0.1", "0.2", "0.5"])
def test_damped_step_overshoot_and_peak_time(zeta):
    """DLF = 1 + exp(−ζπ/√(1−ζ²)) at t_p = π/ω_d.
    Ogata, Modern Control Engineering, 5th ed., section 5-3 (maximum overshoot and peak
    time of the second-order step response; from memory)."""
    derivation = derive_text(smd("200 kg", "500 kN/m", f"damping_ratio = {zeta}",
                                 '[[load]]\nshape = "step"\namplitude = "10 kN"', "0.5 s"))
    z = float(zeta)
    omega_n = math.sqrt(500e3 / 200)
    assert derivation.numbers.dlf == pytest.approx(1 + math.exp(-z * math.pi / math.sqrt(1 - z * z)),
                                                   rel=1e-10)
    assert derivation.numbers.peak.time == pytest.approx(math.pi / (omega_n * math.sqrt(1 - z * z)),
                                                         abs=1e-12)
    assert derivation.numbers.static == pytest.approx(10e3 / 500e3, rel=1e-14)


# ---------------------------------------------------------------- impulse on undamped mass
def test_impulse_on_undamped_oscillator_peak_is_impulse_over_root_km():
    """x = (J/(m ω_n)) sin ω_n t, peak J/√(km) at T_n/4.
    Chopra, Dynamics of Structures, 4th ed., section 4.1 (response to unit impulse; from memory)."""
    derivation = derive_text(smd("50 kg", "2 MN/m", "",
                                 '[[load]]\nshape = "impulse"\nimpulse = "30 N*s"', "0.1 s"))
    assert derivation.numbers.peak.value == pytest.approx(30 / math.sqrt(50 * 2e6), rel=1e-12)
    assert derivation.numbers.peak.time == pytest.approx(0.25 * 2 * math.pi * math.sqrt(50 / 2e6),
                                                         abs=1e-14)
    (_before, after) = derivation.pieces if len(derivation.pieces) == 2 else (None, derivation.pieces[0])
    omega = sympy.sqrt(sympy.Integer(2_000_000) / 50)
    assert sympy.simplify(after.expression(t) - sympy.Rational(30, 50) / omega * sympy.sin(omega * t)) == 0


# ---------------------------------------------------------------- resonant half-sine
def test_half_sine_at_the_natural_period_gives_dlf_pi_over_two():
    """Undamped half-sine with t_d/T_n = 1/2 (load frequency equal to the natural one):
    peak (π/2)·F/k. Harris' Shock and Vibration Handbook, 5th ed., ch. 8 (half-sine pulse
    spectrum; from memory)."""
    derivation = derive_text("""
        title = "resonant half-sine"
        [system]
        model = "spring-mass-damper"
        mass = "2 kg"
        stiffness = "3200 N/m"
        [[load]]
        shape = "half-sine"
        duration = "pi/40 s"
        amplitude = "1 kN"
        [report]
        until = "pi/5 s"
        """)
    assert derivation.model.poles[0].frequency == 40
    kernel = next(k for k in derivation.solution.kernels if k.mode is not None)
    assert kernel.inversion.transform.poles[0].multiplicity == 2   # merged: exact resonance
    assert derivation.numbers.dlf == pytest.approx(math.pi / 2, rel=1e-10)

"""Every model, regime and shape against an independent integrator (scipy solve_ivp).

The equations and loads are written out again here from their textbook definitions; the
only thing taken from closedform is the result under test. Integration uses DOP853 at
rtol = 1e-12; peaks are refined on the dense output. Tolerance: peaks 1e-8 relative,
responses 1e-7 of the peak at 400 points.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy
from scipy.integrate import solve_ivp
from scipy.optimize import minimize_scalar

from closedform.response import t as T

from .conftest import derive_text

G0 = 9.80665


def rectangle(a, d, amp):
    return lambda t: amp if a <= t < a + d else 0.0


def half_sine(a, d, amp):
    return lambda t: amp * math.sin(math.pi * (t - a) / d) if a <= t < a + d else 0.0


def polyline(a, points):
    times = [a + p[0] for p in points]
    values = [p[1] for p in points]
    return lambda t: float(np.interp(t, times, values)) if times[0] <= t <= times[-1] else 0.0


CASES = [
    # id, toml, coefficients a_n..a_0, input scale, load f(t), breakpoints, initial, until
    ("undamped rectangle", """
        [system]
        model = "spring-mass-damper"
        mass = "420 kg"
        stiffness = "2.6 MN/m"
        [[load]]
        shape = "rectangle"
        at = "20 ms"
        duration = "1.5 ms"
        impulse = "95 N*s"
        """, (420, 0, 2.6e6), 1, rectangle(0.02, 0.0015, 95 / 0.0015), (0.02, 0.0215), (0, 0), 0.25),
    ("under-damped half-sine", """
        [system]
        model = "spring-mass-damper"
        mass = "85 kg"
        stiffness = "1.2 MN/m"
        damping_ratio = 0.05
        [[load]]
        shape = "half-sine"
        duration = "60 ms"
        amplitude = "40 kN"
        """, (85, 2 * 0.05 * math.sqrt(85 * 1.2e6), 1.2e6), 1, half_sine(0, 0.06, 40e3), (0.06,), (0, 0), 0.2),
    ("critically damped trapezoid (repeated root)", """
        [system]
        model = "spring-mass-damper"
        mass = "12 kg"
        stiffness = "30 kN/m"
        damping = "1200 N*s/m"
        [[load]]
        shape = "trapezoid"
        rise = "20 ms"
        hold = "50 ms"
        fall = "30 ms"
        amplitude = "450 N"
        """, (12, 1200, 30e3), 1, polyline(0, [(0, 0), (0.02, 450), (0.07, 450), (0.1, 0)]),
     (0.02, 0.07, 0.1), (0, 0), 0.3),
    ("over-damped triangle with initial displacement", """
        [system]
        model = "spring-mass-damper"
        mass = "60 kg"
        stiffness = "150 kN/m"
        damping = "9 kN*s/m"
        [initial]
        displacement = "0.5 mm"
        velocity = "0 m/s"
        [[load]]
        shape = "triangle"
        duration = "40 ms"
        peak_at = 0.25
        amplitude = "3.2 kN"
        """, (60, 9e3, 150e3), 1, polyline(0, [(0, 0), (0.01, 3200), (0.04, 0)]), (0.01, 0.04),
     (0.0005, 0), 0.25),
    ("exact resonance: half-sine at the natural period", """
        [system]
        model = "spring-mass-damper"
        mass = "2 kg"
        stiffness = "3200 N/m"
        [[load]]
        shape = "half-sine"
        duration = "pi/40 s"
        amplitude = "1 kN"
        """, (2, 0, 3200), 1, half_sine(0, math.pi / 40, 1000), (math.pi / 40,), (0, 0), 0.6),
    ("base excitation, decaying pulse", """
        [system]
        model = "base-excitation"
        mass = "310 kg"
        stiffness = "900 kN/m"
        damping_ratio = 0.04
        [[load]]
        shape = "decay"
        duration = "25 ms"
        amplitude = "0.35 g0"
        """, (310, 2 * 0.04 * math.sqrt(310 * 900e3), 900e3), -310,
     polyline(0, [(0, 0.35 * G0), (0.025, 0)]), (0.025,), (0, 0), 0.3),
    ("first-order lag, ramp and hold", """
        [system]
        model = "first-order"
        time_constant = "0.8 s"
        gain = 1.5
        [[load]]
        shape = "ramp"
        rate = "2.5 1/s"
        duration = "6 s"
        """, (0.8, 1), 1.5, lambda t: 2.5 * min(t, 6.0), (6.0,), (0,), 12.0),
    ("series RLC, step and impulse", """
        [system]
        model = "series-rlc"
        inductance = "10 mH"
        resistance = "5 ohm"
        capacitance = "100 uF"
        [[load]]
        shape = "step"
        amplitude = "12 V"
        [[load]]
        shape = "impulse"
        at = "5 ms"
        impulse = "0.001 V*s"
        """, (1e-6, 5e-4, 1), 1, lambda t: 12.0, (0.005,), (0, 0), 0.02),
    ("fourth-order ODE, formula load", """
        [system]
        model = "ode"
        coefficients = [1, 3, 42, 60, 200]
        [[load]]
        shape = "formula"
        expr = "400*exp(-2*tau)*sin(6*tau)"
        duration = "3 s"
        """, (1, 3, 42, 60, 200), 1,
     lambda t: 400 * math.exp(-2 * t) * math.sin(6 * t) if t < 3 else 0.0, (3.0,), (0, 0, 0, 0), 8.0),
]
IMPULSES = {"series RLC, step and impulse": [(0.005, 0.001)]}


def integrate(coefficients, scale, load, breakpoints, initial, until, impulses):
    """Piecewise solve_ivp of a_n x^(n) + … + a_0 x = scale·f(t); impulses as jumps."""
    n = len(coefficients) - 1
    a = [float(c) for c in coefficients]

    def rhs(t, y):
        highest = (scale * load(t) - sum(a[n - i] * y[i] for i in range(n))) / a[0]
        return [*y[1:], highest]

    edges = sorted({0.0, *[b for b in breakpoints if 0 < b < until], until})
    state = [float(v) for v in initial]
    segments = []
    for lo, hi in zip(edges, edges[1:]):
        for when, area in impulses:
            if abs(when - lo) < 1e-15:
                state[-1] += scale * area / a[0]
        solution = solve_ivp(rhs, (lo, hi), state, method="DOP853", rtol=1e-12, atol=1e-20,
                             dense_output=True)
        segments.append((lo, hi, solution.sol))
        state = list(solution.y[:, -1])
    return segments


def value(segments, t):
    for lo, hi, sol in segments:
        if lo <= t <= hi:
            return sol(t)[0]
    raise ValueError(t)


def integrated_peak(segments):
    best = (0.0, 0.0)
    for lo, hi, sol in segments:
        grid = np.linspace(lo, hi, 2001)
        values = sol(grid)[0]
        i = int(np.argmax(np.abs(values)))
        left, right = grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]
        sign = 1 if values[i] >= 0 else -1
        refined = minimize_scalar(lambda t, sign=sign, sol=sol: -sign * sol(t)[0], bounds=(left, right),
                                  method="bounded", options={"xatol": 1e-14})
        candidate = max(abs(values[i]), abs(sol(refined.x)[0]))
        if candidate > abs(best[0]):
            best = (candidate, refined.x)
    return best[0]


@pytest.mark.parametrize("row", CASES, ids=[row[0] for row in CASES])
def test_response_and_peak_agree_with_solve_ivp(row):
    name, body, coefficients, scale, load, breakpoints, initial, until = row
    derivation = derive_text(f'title = "{name}"\n' + body + f'\n[report]\nuntil = "{until!r} s"\n')
    assert derivation.status == "verified"
    segments = integrate(coefficients, scale, load, breakpoints, initial, until,
                         IMPULSES.get(name, []))
    peak = integrated_peak(segments)
    assert abs(derivation.numbers.peak.value) == pytest.approx(peak, rel=1e-8)
    functions = [(float(sympy.N(p.start)), sympy.lambdify(T, p.expression(T), "mpmath"))
                 for p in derivation.pieces]
    for t in np.linspace(0, until, 401)[1:-1]:
        ours = float([f for start, f in functions if start <= t][-1](t))
        assert ours == pytest.approx(value(segments, t), abs=1e-7 * peak)

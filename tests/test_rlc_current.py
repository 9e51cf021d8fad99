"""series-rlc with an initial inductor current: the capacitor voltage and the current
i = C·v′ against scipy's solve_ivp on the loop equations written in the circuit's own state
(inductor current and capacitor voltage), and the located errors of the new keys."""

from __future__ import annotations

import numpy
import pytest
import sympy
from scipy.integrate import solve_ivp

from tests.conftest import derive_text

from .test_case_errors import assert_message

L, R, C = 4.7e-6, 2.2, 220e-9
CASE = """
    title = "Precharged loop"
    [system]
    model = "series-rlc"
    inductance = "4.7 uH"
    resistance = "2.2 ohm"
    capacitance = "220 nF"
    initial_current = "{current} A"
    [initial]
    voltage = "{voltage} V"
    [[load]]
    shape = "step"
    amplitude = "{source} V"
    [report]
    until = "30 us"
    """


def loop(source: float):
    """Kirchhoff's voltage law around the series loop: L di/dt + R i + v = v_s, C dv/dt = i
    (the circuit's own state, not the engine's v-only equation)."""
    return lambda _t, y: [(source - R * y[0] - y[1]) / L, y[0] / C]


@pytest.mark.parametrize(("current", "voltage", "source"), [(3.0, 12.0, 48.0), (-1.5, 0.0, 0.0),
                                                            (2.0, 48.0, 24.0)])
def test_initial_current_against_solve_ivp(current, voltage, source):
    d = derive_text(CASE.format(current=current, voltage=voltage, source=source))
    assert d.status == "verified"
    times = numpy.linspace(0, 30e-6, 3001)
    reference = solve_ivp(loop(source), (0, 30e-6), [current, voltage], t_eval=times,
                          rtol=1e-12, atol=1e-12, method="DOP853")
    scale_v = max(numpy.max(numpy.abs(reference.y[1])), 1.0)
    scale_i = numpy.max(numpy.abs(reference.y[0]))
    assert numpy.max(numpy.abs(d.evaluate(times) - reference.y[1])) <= 1e-8 * scale_v
    currents = d.evaluate(times, response="current")
    assert numpy.max(numpy.abs(currents - reference.y[0])) <= 1e-8 * scale_i
    result = d.to_dict()
    assert result["current"]["initial"] == pytest.approx(current)
    # the peak current is the largest |i| (the grid can only come close from below)
    peak = result["peak_current"]
    assert abs(peak["value"]) >= numpy.max(numpy.abs(reference.y[0])) * (1 - 1e-9)
    assert abs(peak["value"]) <= numpy.max(numpy.abs(reference.y[0])) * (1 + 1e-4)
    # the JSON pieces of the current are sympy-readable and agree with the reference
    t = sympy.Symbol("t")
    for piece in result["current"]["pieces"]:
        expr = sympy.parse_expr(piece["expr"], local_dict={"t": t})
        end = piece["end"] if piece["end"] is not None else 30e-6
        for time in numpy.linspace(piece["start"], end, 7):
            expected = numpy.interp(time, reference.t, reference.y[0])
            assert float(expr.subs(t, time)) == pytest.approx(expected, abs=1e-5 * scale_i)


def test_current_on_the_sheet_is_re_read():
    from closedform.render import render_markdown
    d = derive_text(CASE.format(current=3.0, voltage=12.0, source=48.0))
    sheet = render_markdown(d)
    assert "Current $i = C\\,\\dot{v}$ in A" in sheet
    assert "i(t) &= " in sheet or "i(t) = " in sheet
    reread = next(c for c in d.checks if c.name == "printed equations re-read")
    assert reread.passed


BASE_RLC = """\
title = "Loop"
[system]
model = "series-rlc"
inductance = "4.7 uH"
capacitance = "220 nF"
initial_current = "3 A"
[[load]]
shape = "step"
amplitude = "48 V"
"""


@pytest.mark.parametrize(("text", "expected"), [
    (BASE_RLC.replace('"3 A"', '"3 V"'),
     "case.toml:6: system.initial_current: wrong dimension (expected current, got voltage)"),
    (BASE_RLC + '[initial]\nvalues = ["12 V", "0 V/s"]\n',
     "case.toml:11: initial.values: give the capacitor voltage as initial.voltage with "
     "system.initial_current, not values"),
    (BASE_RLC + '[initial]\nvoltage = "12 A"\n',
     "case.toml:11: initial.voltage: wrong dimension (expected voltage, got current)"),
    (BASE_RLC + '[initial]\nvelocity = "1 m/s"\n',
     "case.toml:11: initial.velocity: displacement/velocity are for mechanical models; use "
     "voltage = … (capacitor) and system.initial_current"),
], ids=["current in volts", "values and current", "voltage in amperes", "mechanical key"])
def test_bad_initial_current(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)

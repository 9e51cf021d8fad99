"""Step-response metrics (rise time, settling time, percent overshoot, level crossings)
against published formulas and against scipy.optimize.brentq on the textbook responses.

The engine finds every time from the closed-form pieces (roots between stationary points,
mpmath.findroot to 30 digits); the references here are formulas from the books and roots of
the textbook formula found by brentq on a sign change located on a fine grid — a route
that shares nothing with the engine.
"""

from __future__ import annotations

import math

import numpy
import pytest
from scipy.optimize import brentq

from closedform.cli import main
from tests.conftest import derive_text

from .test_case_errors import assert_message, edit


def oscillator_step(zeta: float, omega: float, until: float, levels: str = "") -> str:
    """Unit-gain second-order step: m = 1 kg, k = ω² N/m, F = k·1 m, so x_f = 1 m."""
    return f"""
        title = "Unit step on an oscillator"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "{omega**2!r} N/m"
        damping_ratio = {zeta!r}
        [[load]]
        shape = "step"
        amplitude = "{omega**2!r} N"
        [report]
        until = "{until!r} s"
        {levels}
        """


def textbook_step(zeta: float, omega: float):
    """c(t) = 1 − e^(−ζωt)(cos ω_d t + ζ/√(1−ζ²) sin ω_d t), the unit-step response of the
    standard second-order system (Ogata, Modern Control Engineering, 5th ed., ch. 5,
    Sec. 5-3, under-damped case)."""
    damped = omega * math.sqrt(1 - zeta**2)
    return lambda t: 1 - math.exp(-zeta * omega * t) * (
        math.cos(damped * t) + zeta / math.sqrt(1 - zeta**2) * math.sin(damped * t))


def first_root(function, level, end, points=20001):
    grid = numpy.linspace(0, end, points)
    values = numpy.array([function(t) - level for t in grid])
    i = int(numpy.nonzero(numpy.sign(values[1:]) != numpy.sign(values[:-1]))[0][0])
    return brentq(lambda t: function(t) - level, grid[i], grid[i + 1], xtol=1e-15)


def last_root(function, levels, end, points=200001):
    grid = numpy.linspace(0, end, points)
    best = 0.0
    for level in levels:
        values = numpy.array([function(t) - level for t in grid])
        changes = numpy.nonzero(numpy.sign(values[1:]) != numpy.sign(values[:-1]))[0]
        if len(changes):
            i = int(changes[-1])
            best = max(best, brentq(lambda t, lv=level: function(t) - lv, grid[i], grid[i + 1],
                                    xtol=1e-15))
    return best


# ζ, ω_n (rad/s): the cases of the reference checks
OSCILLATORS = [(0.1, 10.0), (0.3, 10.0), (0.5, 4.0), (0.7, 2.0)]


@pytest.mark.parametrize(("zeta", "omega"), OSCILLATORS)
def test_overshoot_and_peak_time_ogata(zeta, omega):
    # Ogata, Modern Control Engineering, 5th ed., ch. 5, Sec. 5-3: maximum percent overshoot
    # 100·exp(−ζπ/√(1−ζ²)) and peak time t_p = π/ω_d, ω_d = ω_n√(1−ζ²).
    d = derive_text(oscillator_step(zeta, omega, 10 / (zeta * omega)))
    assert d.status == "verified"
    result = d.to_dict()
    overshoot = result["overshoot"]
    assert overshoot["value"] == pytest.approx(
        100 * math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2)), rel=1e-12)
    assert overshoot["time"] == pytest.approx(math.pi / (omega * math.sqrt(1 - zeta**2)),
                                              rel=1e-12)
    assert result["final_value"] == pytest.approx(1.0, rel=1e-14)


@pytest.mark.parametrize(("zeta", "omega"), OSCILLATORS)
def test_rise_and_settling_against_brentq(zeta, omega):
    span = 10 / (zeta * omega)
    d = derive_text(oscillator_step(zeta, omega, span))
    result = d.to_dict()
    c = textbook_step(zeta, omega)
    t10, t90 = first_root(c, 0.1, span), first_root(c, 0.9, span)
    assert result["rise_time"]["start"] == pytest.approx(t10, rel=1e-10)
    assert result["rise_time"]["end"] == pytest.approx(t90, rel=1e-10)
    assert result["rise_time"]["value"] == pytest.approx(t90 - t10, rel=1e-9)
    settling = result["settling_time"]
    assert settling["established"] is True
    assert settling["value"] == pytest.approx(last_root(c, (0.98, 1.02), span), rel=1e-10)


def test_settling_beyond_the_window_follows_the_envelope():
    # The window ends well before the 2 % band is reached: the last piece is followed past
    # it, and the settling time still agrees with brentq on the textbook formula.
    zeta, omega = 0.1, 10.0
    d = derive_text(oscillator_step(zeta, omega, 1.0))
    settling = d.to_dict()["settling_time"]
    assert settling["established"] is True
    assert settling["value"] > 1.0
    assert "beyond the analysis window" in settling["note"]
    reference = last_root(textbook_step(zeta, omega), (0.98, 1.02), 10.0)
    assert settling["value"] == pytest.approx(reference, rel=1e-10)


def test_levels_crossing_times_and_a_level_never_reached():
    zeta, omega = 0.3, 10.0
    d = derive_text(oscillator_step(zeta, omega, 2.0, 'levels = ["1200 mm", "5 m", "0.5 m"]'))
    crossings = d.to_dict()["crossings"]
    c = textbook_step(zeta, omega)
    grid = numpy.linspace(0, 2.0, 40001)
    for entry, level in zip(crossings, (1.2, 5.0, 0.5)):
        assert entry["level"] == pytest.approx(level)
        values = numpy.array([c(t) - level for t in grid])
        changes = numpy.nonzero(numpy.sign(values[1:]) != numpy.sign(values[:-1]))[0]
        expected = [brentq(lambda t, lv=level: c(t) - lv, grid[i], grid[i + 1], xtol=1e-15)
                    for i in changes]
        assert len(entry["times"]) == len(expected)
        for ours, theirs in zip(entry["times"], expected):
            assert ours == pytest.approx(theirs, rel=1e-10)
    assert crossings[1]["times"] == []          # 5 m is never reached: no crossing, no error
    assert d.status == "verified"


LUMPED = """
    title = "Lumped-capacitance cooling"
    [system]
    model = "first-order"
    time_constant = "{tau} s"
    input_unit = "K"
    [initial]
    values = ["{initial} K"]
    [[load]]
    shape = "step"
    amplitude = "{ambient} K"
    [report]
    until = "{until} s"
    levels = [{levels}]
    """


@pytest.mark.parametrize(("tau", "initial", "ambient", "level"), [
    (12.0, 473.0, 298.0, 350.0), (3.5, 300.0, 400.0, 380.0), (80.0, 1100.0, 300.0, 320.0)])
def test_lumped_capacitance_time_to_reach_a_temperature(tau, initial, ambient, level):
    # Incropera, DeWitt, Bergman, Lavine, Fundamentals of Heat and Mass Transfer, 6th ed.,
    # ch. 5 (lumped capacitance method): (T − T_∞)/(T_i − T_∞) = exp(−t/τ_t), so the time to
    # reach T is t = τ_t·ln((T_i − T_∞)/(T − T_∞)).
    until = 10 * tau
    d = derive_text(LUMPED.format(tau=tau, initial=initial, ambient=ambient, until=until,
                                  levels=f'"{level} K"'))
    assert d.status == "verified"
    result = d.to_dict()
    (crossing,) = result["crossings"]
    assert crossing["times"] == [pytest.approx(
        tau * math.log((initial - ambient) / (level - ambient)), rel=1e-12)]
    assert result["final_value"] == pytest.approx(ambient)
    # the response starts beyond 10 % (and beyond its final value when cooling): no rise
    # time; an overshoot only when it starts below its final value (heating)
    assert result["rise_time"] is None
    assert (result["overshoot"] is None) == (initial > ambient)
    # 2 % band: |T − T_∞| = 0.02·T_∞ at t = τ·ln(|T_i − T_∞|/(0.02·T_∞)) (same law)
    band = 0.02 * ambient
    expected = tau * math.log(abs(initial - ambient) / band) if abs(initial - ambient) > band \
        else 0.0
    assert result["settling_time"]["value"] == pytest.approx(expected, rel=1e-12)


def test_first_order_step_rise_time():
    # First-order lag from rest: y = K(1 − e^(−t/τ)), rise time 10–90 % = τ·ln 9 (follows
    # from the same exponential law; Ogata, Modern Control Engineering, 5th ed., ch. 5,
    # Sec. 5-2, first-order systems).
    d = derive_text("""
        title = "Sensor step"
        [system]
        model = "first-order"
        time_constant = "0.4 s"
        [[load]]
        shape = "step"
        amplitude = 2
        """)
    result = d.to_dict()
    assert result["rise_time"]["value"] == pytest.approx(0.4 * math.log(9), rel=1e-12)
    assert result["settling_time"]["value"] == pytest.approx(0.4 * math.log(50), rel=1e-12)
    assert result["overshoot"]["value"] == 0.0
    assert result["overshoot"]["time"] is None


@pytest.mark.parametrize(("text", "why"), [
    ("""
        title = "Pulse"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "100 N/m"
        damping_ratio = 0.1
        [[load]]
        shape = "rectangle"
        duration = "0.1 s"
        amplitude = "10 N"
        """, "zero"),
    ("""
        title = "Undamped step"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "100 N/m"
        [[load]]
        shape = "step"
        amplitude = "10 N"
        """, "does not settle"),
])
def test_no_final_value_no_step_metrics(text, why):
    d = derive_text(text)
    result = d.to_dict()
    for name in ("rise_time", "settling_time", "overshoot", "final_value"):
        assert name not in result
    assert why in d.metrics.note


def test_a_load_after_the_window_leaves_settling_not_established():
    d = derive_text(oscillator_step(0.3, 10.0, 5.0).replace(
        "[report]", '[[load]]\nshape = "impulse"\nat = "6 s"\nimpulse = "1 N*s"\n[report]'))
    settling = d.to_dict()["settling_time"]
    assert settling["established"] is False and settling["value"] is None
    assert "not established" in settling["note"]


def test_metrics_are_claimable(tmp_path, capsys):
    zeta, omega = 0.3, 10.0
    overshoot = 100 * math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2))
    text = oscillator_step(zeta, omega, 3.0).replace("        ", "") + (
        f'[claims]\novershoot = {overshoot:.6f}\n'
        f'overshoot_time = "{math.pi / (omega * math.sqrt(1 - zeta**2)) * 1000:.5f} ms"\n'
        'rise_time = "0.1 s"\n')
    case = tmp_path / "claims.toml"
    case.write_text(text, encoding="utf-8")
    code = main(["check", str(case)])
    out = capsys.readouterr().out
    assert code == 1                                     # the rise time claim is wrong
    assert "overshoot: claimed" in out and "overshoot_time: claimed" in out
    lines = {line.split(":")[0]: line for line in out.splitlines() if ": claimed" in line}
    assert lines["overshoot"].endswith(")") and "confirmed" in lines["overshoot"]
    assert "confirmed" in lines["overshoot_time"]
    assert "REFUTED" in lines["rise_time"]


def test_metrics_table_on_the_sheet():
    from closedform.render import render_markdown
    d = derive_text(oscillator_step(0.3, 10.0, 2.0, 'levels = ["5 m"]'))
    sheet = render_markdown(d)
    assert "Step-response metrics:" in sheet
    assert "| percent overshoot of x\\_f | $37.2326$ |" in sheet
    assert "not reached in the analysis window (no crossing)" in sheet


@pytest.mark.parametrize(("text", "expected"), [
    (edit('until = "250 ms"', 'until = "250 ms"\nlevels = ["3 kN"]'),
     "case.toml:14: report.levels[0]: wrong dimension (expected length, got force)"),
    (edit('until = "250 ms"', 'until = "250 ms"\nlevels = "3 mm"'),
     "case.toml:14: report.levels: expected a list of at most 20 values of the response, "
     "got '3 mm'"),
], ids=["wrong dimension", "not a list"])
def test_bad_levels(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


def test_a_wrong_metric_fails_its_check():
    # the metrics are read again from the verification's own parse of the pieces: a time
    # moved by 1 %, or a level crossing that is not one, fails the check
    import dataclasses

    from closedform.checks.extremes import metric_checks
    d = derive_text(oscillator_step(0.3, 10.0, 2.0, 'levels = ["1.2 m"]'))
    (right,) = metric_checks(d)
    assert right.passed
    rise = d.metrics.rise_time
    moved = dataclasses.replace(d.metrics, rise_time=dataclasses.replace(rise, start=rise.start * 1.01))
    (check,) = metric_checks(dataclasses.replace(d, metrics=moved))
    assert not check.passed and "10 % of x_f" in check.detail
    crossing = d.metrics.crossings[0]
    shifted = dataclasses.replace(crossing, times=(crossing.times[0] + 1e-3,) + crossing.times[1:])
    (check,) = metric_checks(dataclasses.replace(
        d, metrics=dataclasses.replace(d.metrics, crossings=(shifted,))))
    assert not check.passed and "level 1.2" in check.detail

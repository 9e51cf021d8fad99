"""Shock spectra from the closed form against published values and an independent mpmath
integration; the spectrum command end to end.

Every expected number names its source. Ratios are t_d/T_n; DLF and residual are over F/k.
The independent integration (``integrated``) uses mpmath.odefun (Taylor series) on
x″ + 2ζx′ + x = f(t) (ω_n = 1), one smooth stretch of the load at a time, and finds the
extremes from the roots of the integrated velocity (mpmath.findroot), never from the
largest sample; it shares no code with closedform.
"""

from __future__ import annotations

import csv
import io
import json
import math

import mpmath
import pytest
import sympy

from closedform.checks.spectrum_check import check_point
from closedform.cli import main
from closedform.spectrum import Pulse, parse_range, response_spectrum, spectrum_point

R = sympy.Rational


def spectrum_at(shape: str, zeta, ratios, **parameters):
    return response_spectrum(Pulse(shape, **parameters), R(zeta), [R(r) for r in ratios]).points


# ----------------------------------------------------------------------------- independent


def integrated(stretches, zeta, free_span, dps: int = 20):
    """Peak |x| (signed value and time) and the state at the end of the load, for
    x″ + 2ζx′ + x = f from rest; ``stretches`` are (t0, t1, f) with f smooth on [t0, t1]."""
    with mpmath.workdps(dps):
        zeta = mpmath.mpf(zeta)
        state = [mpmath.mpf(0), mpmath.mpf(0)]
        best_time, best = mpmath.mpf(0), mpmath.mpf(0)
        end = stretches[-1][1]
        at_end = None
        for t0, t1, force in list(stretches) + [(end, end + free_span, lambda t: 0)]:
            solution = mpmath.odefun(
                lambda t, y, force=force: [y[1], force(t) - 2 * zeta * y[1] - y[0]], t0, state)
            grid = [t0 + (t1 - t0) * k / 48 for k in range(49)]
            values = [solution(t) for t in grid]
            candidates = [(grid[0], values[0][0]), (grid[-1], values[-1][0])]
            for k in range(48):
                if values[k][1] * values[k + 1][1] < 0:
                    root = mpmath.findroot(lambda t, solution=solution: solution(t)[1],
                                           (grid[k], grid[k + 1]), solver="anderson")
                    candidates.append((root, solution(root)[0]))
            for time, x in sorted(candidates):
                if abs(x) > abs(best) * (1 + mpmath.mpf(10) ** -14):
                    best_time, best = time, x
            state = list(values[-1])
            if at_end is None and t1 == end:
                at_end = list(state)
        return best, best_time, at_end


def triangle_stretches(duration, peak_at):
    peak = duration * peak_at
    stretches = []
    if peak > 0:
        stretches.append((0, peak, lambda t: t / peak))
    if duration - peak > 0:
        stretches.append((peak, duration, lambda t: (duration - t) / (duration - peak)))
    return stretches


def independent_point(shape: str, zeta: float, ratio: float, peak_at: float = 0.5):
    """(DLF, t_m/t_d, residual) by integration, ω_n = 1 so t_d = 2π·ratio."""
    with mpmath.workdps(20):
        duration = 2 * mpmath.pi * mpmath.mpf(ratio)
        if shape == "half-sine":
            stretches = [(0, duration, lambda t: mpmath.sin(mpmath.pi * t / duration))]
        elif shape == "decay":
            stretches = [(0, duration, lambda t: 1 - t / duration)]
        else:
            stretches = triangle_stretches(duration, mpmath.mpf(peak_at))
        damped = mpmath.sqrt(1 - mpmath.mpf(zeta) ** 2)
        peak, time, (x, v) = integrated(stretches, zeta, 2 * mpmath.pi / damped)
        residual = mpmath.sqrt(x**2 + ((v + mpmath.mpf(zeta) * x) / damped) ** 2)
        return abs(peak), time / duration, residual


# ----------------------------------------------------------------------------- rectangle


RECTANGLE_RATIOS = ["1/20", "1/8", "1/4", "2/5", "1/2", "3/4", "1", "8/5", "2", "33/10"]


@pytest.mark.parametrize("ratio", RECTANGLE_RATIOS)
def test_undamped_rectangle_dlf_and_residual(ratio):
    """DLF = 2 sin(π t_d/T_n) for t_d/T_n ≤ ½, 2 beyond; residual 2|sin(π t_d/T_n)|.
    Harris' Shock and Vibration Handbook, ch. 8, and Chopra, Dynamics of Structures, 4th ed.,
    section 4.7 (from memory). Beyond ½ the peak comes during the pulse at t = T_n/2, so
    t_m/t_d = 1/(2·t_d/T_n) (Chopra section 4.7, from memory)."""
    (point,) = spectrum_at("rectangle", 0, [ratio])
    r = float(R(ratio))
    expected = 2 * math.sin(math.pi * r) if r <= 0.5 else 2.0
    assert point.dlf == pytest.approx(expected, rel=1e-12)
    assert point.residual == pytest.approx(2 * abs(math.sin(math.pi * r)), rel=1e-12, abs=1e-13)
    if r > 0.5:
        assert point.peak_time_ratio == pytest.approx(1 / (2 * r), rel=1e-12)


@pytest.mark.parametrize("ratio", ["1", "2"])
def test_undamped_rectangle_leaves_no_residual_vibration_at_whole_periods(ratio):
    """Residual amplitude 2|sin(π t_d/T_n)| = 0 at t_d/T_n = 1 and 2 (Harris ch. 8; Chopra
    section 4.7; from memory): zero to the 30 digits of the evaluation."""
    (point,) = spectrum_at("rectangle", 0, [ratio])
    assert point.residual == 0.0
    with mpmath.workdps(40):
        assert abs(point.residual_mp) < mpmath.mpf("1e-30")


# ----------------------------------------------------------------------------- half-sine


def test_half_sine_at_half_the_natural_period_is_the_resonant_limit_pi_over_two():
    """Undamped half-sine with t_d/T_n = ½ (load frequency = natural frequency): DLF = π/2,
    reached at the end of the pulse (Harris ch. 8, from memory). The ratio is resonant: the
    coefficients of the general closed form have the factor 1/(4r² − 1), so the point comes
    from the limit form (the engine at that exact ratio), not from a division by zero."""
    (point,) = spectrum_at("half-sine", 0, ["1/2"])
    assert point.resonant
    with mpmath.workdps(40):
        assert abs(point.peak.value_mp - mpmath.pi / 2) < mpmath.mpf("1e-28")
    assert point.dlf == pytest.approx(math.pi / 2, rel=1e-15)
    assert point.peak_time_ratio == pytest.approx(1.0, rel=1e-15)


def test_half_sine_just_off_resonance_is_continuous_with_the_limit():
    """Continuity of the closed form across the resonant ratio (no source needed: the
    response depends continuously on t_d); both sides within 1e-6 of π/2 at ±1e-7."""
    below, above = spectrum_at("half-sine", 0, ["0.4999999", "0.5000001"])
    assert not below.resonant and not above.resonant
    assert below.dlf == pytest.approx(math.pi / 2, rel=1e-6)
    assert above.dlf == pytest.approx(math.pi / 2, rel=1e-6)


@pytest.mark.parametrize("ratio", ["3/2", "5/2"])
def test_half_sine_leaves_no_residual_vibration(ratio):
    """Residual zero at t_d/T_n = 1.5 (Harris ch. 8, from memory) and at 2.5 (the next zero
    of the same residual spectrum, from memory)."""
    (point,) = spectrum_at("half-sine", 0, [ratio])
    assert point.residual == 0.0
    with mpmath.workdps(40):
        assert abs(point.residual_mp) < mpmath.mpf("1e-30")


def test_half_sine_spectrum_maximum_is_about_1_77_near_0_8():
    """Largest DLF of the undamped half-sine ≈ 1.77 near t_d/T_n ≈ 0.8 (Harris ch. 8, chart
    value from memory; chart tolerance ±0.02)."""
    (point,) = spectrum_at("half-sine", 0, ["4/5"])
    assert point.dlf == pytest.approx(1.77, abs=0.02)


@pytest.mark.parametrize("zeta, ratio", [(0, 0.25), (0, 1.0), (0, 2.2), (0.05, 0.8),
                                         (0.1, 1.7)])
def test_half_sine_against_independent_integration(zeta, ratio):
    """Independent mpmath.odefun integration (see the module docstring)."""
    (point,) = spectrum_at("half-sine", str(zeta), [str(ratio)])
    dlf, time_ratio, residual = independent_point("half-sine", zeta, ratio)
    assert point.dlf == pytest.approx(float(dlf), rel=1e-10)
    assert point.peak_time_ratio == pytest.approx(float(time_ratio), rel=1e-8)
    assert point.residual == pytest.approx(float(residual), rel=1e-10, abs=1e-12)


# ----------------------------------------------------------------------------- triangles


@pytest.mark.parametrize("shape, zeta, ratio", [
    ("decay", 0, 0.3), ("decay", 0, 1.0), ("decay", 0.05, 2.5),
    ("triangle", 0, 0.6), ("triangle", 0, 1.3), ("triangle", 0.1, 0.9),
])
def test_triangular_pulses_against_independent_integration(shape, zeta, ratio):
    """Decaying triangle (peak at the start) and symmetric triangle: independent
    mpmath.odefun integration, one load branch at a time."""
    (point,) = spectrum_at(shape, str(zeta), [str(ratio)])
    dlf, time_ratio, residual = independent_point(shape, zeta, ratio)
    assert point.dlf == pytest.approx(float(dlf), rel=1e-10)
    assert point.peak_time_ratio == pytest.approx(float(time_ratio), rel=1e-8)
    assert point.residual == pytest.approx(float(residual), rel=1e-10, abs=1e-12)


def test_skewed_triangle_against_independent_integration():
    """Triangle peaking at 0.3 of its duration, ζ = 0.05: independent integration."""
    (point,) = spectrum_at("triangle", "0.05", ["1.1"], peak_at=R(3, 10))
    dlf, time_ratio, _residual = independent_point("triangle", 0.05, 1.1, peak_at=0.3)
    assert point.dlf == pytest.approx(float(dlf), rel=1e-10)
    assert point.peak_time_ratio == pytest.approx(float(time_ratio), rel=1e-8)


@pytest.mark.parametrize("shape, ratio, chart, tolerance", [
    # Biggs, Introduction to Structural Dynamics (1964), fig. 2.9 (undamped, triangular load
    # with zero rise time): read from memory, chart not at hand — wide tolerance ±0.1.
    ("decay", "1", 1.5, 0.1),
    ("decay", "10", 1.95, 0.1),
    # Biggs (1964), ch. 2, symmetric triangular pulse chart: largest DLF about 1.5 near
    # t_d/T ≈ 1 (from memory, chart not at hand — wide tolerance ±0.1).
    ("triangle", "1", 1.5, 0.1),
])
def test_triangular_pulses_against_chart_values_read_from_memory(shape, ratio, chart, tolerance):
    (point,) = spectrum_at(shape, 0, [ratio])
    assert point.dlf == pytest.approx(chart, abs=tolerance)


def test_decaying_triangle_tends_to_the_step_value_two():
    """A decaying triangle much longer than the period acts like a suddenly applied load:
    DLF → 2 (Biggs 1964, fig. 2.9, asymptote; from memory). Monotone approach checked on
    the closed form at 5, 20, 80."""
    points = spectrum_at("decay", 0, ["5", "20", "80"])
    dlfs = [p.dlf for p in points]
    assert dlfs == sorted(dlfs)
    assert 2 - dlfs[-1] < 2 - dlfs[0]
    assert dlfs[-1] == pytest.approx(2.0, abs=0.02)


def test_short_pulses_approach_the_impulse_value():
    """For t_d ≪ T_n the peak is that of an impulse of the same area: DLF → 2π·(t_d/T_n)·
    (area/(F·t_d)), i.e. 2π r (rectangle), π r (triangles), 4 r (half-sine) (Chopra, Dynamics
    of Structures, 4th ed., ch. 4, approximate analysis for short pulses; from memory, section
    number not recalled). At r = 0.001 within 1e-5 relative."""
    r = 0.001
    expected = {"rectangle": 2 * math.pi * r, "decay": math.pi * r, "triangle": math.pi * r,
                "half-sine": 4 * r}
    for shape, value in expected.items():
        (point,) = spectrum_at(shape, 0, [str(r)])
        assert point.dlf == pytest.approx(value, rel=1e-5), shape


def test_trapezoid_with_no_hold_is_the_triangle():
    """Consistency of two shape definitions (no source needed): rise ½, hold 0, fall ½ is
    the symmetric triangle."""
    ratios = ["0.3", "1.2"]
    trapezoid = spectrum_at("trapezoid", "0.05", ratios, rise=R(1, 2), hold=R(0), fall=R(1, 2))
    triangle = spectrum_at("triangle", "0.05", ratios)
    for a, b in zip(trapezoid, triangle):
        assert a.dlf == pytest.approx(b.dlf, rel=1e-14)
        assert a.residual == pytest.approx(b.residual, rel=1e-14)


# ----------------------------------------------------------------------------- damping


@pytest.mark.parametrize("zeta", ["0.02", "0.05", "0.1", "0.2", "0.5"])
def test_damped_rectangle_ending_at_the_first_overshoot_peaks_at_the_step_overshoot(zeta):
    """Damped step overshoot 1 + exp(−ζπ/√(1−ζ²)) at t_p = π/ω_d (Ogata, Modern Control
    Engineering, 5th ed., section 5-3, from memory). A rectangle ending exactly at t_p
    (t_d/T_n = 1/(2√(1−ζ²)), here to 40 digits) rises to that overshoot and is released from
    rest there, so its peak is the overshoot and comes at the end of the pulse."""
    z = float(zeta)
    overshoot = 1 + math.exp(-z * math.pi / math.sqrt(1 - z * z))
    ratio = sympy.Rational(str(sympy.N(R(1, 2) / sympy.sqrt(1 - R(zeta) ** 2), 40)))
    (point,) = spectrum_at("rectangle", zeta, [ratio])
    assert point.dlf == pytest.approx(overshoot, rel=1e-13)
    assert point.peak_time_ratio == pytest.approx(1.0, rel=1e-13)


# ----------------------------------------------------------------------------- command line


def test_spectrum_json_contract(capsys):
    code = main(["spectrum", "--shape", "half-sine", "--ratios", "0.25,0.5,1.5", "--json", "-"])
    result = json.loads(capsys.readouterr().out)
    assert code == 0
    assert set(result) == {"schema", "status", "shape", "damping_ratio", "points"}
    assert result["schema"] == 1 and result["status"] == "verified"
    assert result["shape"] == "half-sine" and result["damping_ratio"] == 0.0
    assert [set(p) for p in result["points"]] == [{"ratio", "dlf", "peak_time_ratio",
                                                    "residual", "status", "checks"}] * 3
    assert all(p["status"] == "verified" and len(p["checks"]) == 5 for p in result["points"])
    assert [p["ratio"] for p in result["points"]] == [0.25, 0.5, 1.5]
    assert result["points"][1]["dlf"] == pytest.approx(math.pi / 2, rel=1e-15)   # Harris ch. 8
    assert result["points"][2]["residual"] == 0.0                                # Harris ch. 8


def test_spectrum_writes_csv_svg_png_reproducibly(tmp_path):
    arguments = ["spectrum", "--shape", "triangle", "--peak-at", "0.25", "--damping-ratio",
                 "0.05", "--range", "0.1:3:8"]
    assert main(arguments + ["-o", str(tmp_path / "a")]) == 0
    assert main(arguments + ["-o", str(tmp_path / "b")]) == 0
    names = sorted(p.name for p in (tmp_path / "a").iterdir())
    assert names == ["spectrum-triangle.csv", "spectrum-triangle.json", "spectrum-triangle.png",
                     "spectrum-triangle.svg"]
    for name in names:
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes(), name
    svg = (tmp_path / "a" / "spectrum-triangle.svg").read_text()
    assert "<dc:date>" not in svg
    assert (tmp_path / "a" / "spectrum-triangle.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    text = (tmp_path / "a" / "spectrum-triangle.csv").read_text()
    rows = [row for row in csv.reader(io.StringIO(text)) if not row[0].startswith("#")]
    assert rows[0] == ["t_d/T_n [1]", "DLF [1]", "t_m/t_d [1]", "A_r/(F/k) [1]", "status"]
    assert len(rows) == 9 and all(row[-1] == "verified" for row in rows[1:])
    assert float(rows[1][0]) == pytest.approx(0.1) and float(rows[-1][0]) == pytest.approx(3.0)
    assert text.splitlines()[1].startswith("# status: VERIFIED")
    assert "dimensionless" in text.splitlines()[2]


def test_range_is_exact():
    ratios = parse_range("0.05:4:80")          # step exactly 1/20
    assert ratios[0] == R(1, 20) and ratios[-1] == 4 and len(ratios) == 80
    assert ratios[9] == R(1, 2)                # the resonant half-sine ratio is hit exactly
    assert R(1, 2) not in parse_range("0.05:4:100")
    assert parse_range("0.7:0.7:1") == [R(7, 10)]


@pytest.mark.parametrize("arguments, message", [
    (["--ratios", "1"], "--shape: missing (expected one of: rectangle, triangle, decay, "
                        "half-sine, trapezoid)"),
    (["--shape", "halfsine", "--ratios", "1"], "--shape: unknown shape 'halfsine' (expected one "
     "of: rectangle, triangle, decay, half-sine, trapezoid)"),
    (["--shape", "rectangle"], "--ratios: give exactly one of --ratios and --range"),
    (["--shape", "rectangle", "--ratios", "0,1"], "--ratios: ratios must be positive, got 0"),
    (["--shape", "rectangle", "--ratios", "1,,2"], "--ratios: expected comma-separated positive "
                                                   "numbers, got '1,,2'"),
    (["--shape", "rectangle", "--ratios", "x"], "--ratios: 'x' is not a number (expected a "
                                                "positive t_d/T_n)"),
    (["--shape", "rectangle", "--range", "1:2"], "--range: expected LO:HI:N, got '1:2'"),
    (["--shape", "rectangle", "--range", "2:1:5"], "--range: HI must not be below LO, got 1 < 2"),
    (["--shape", "rectangle", "--range", "0:1:5"], "--range: LO must be positive, got 0"),
    (["--shape", "rectangle", "--range", "1:2:0"], "--range: N must be from 1 to 100000, got 0"),
    (["--shape", "rectangle", "--ratios", "1", "--damping-ratio", "1"],
     "--damping-ratio: must be at least 0 and below 1 (spectra are for oscillating systems), "
     "got 1"),
    (["--shape", "rectangle", "--ratios", "1", "--peak-at", "0.3"],
     "--peak-at: only a triangle has a peak position (the shape is rectangle)"),
    (["--shape", "triangle", "--ratios", "1", "--peak-at", "1.5"],
     "--peak-at: must lie from 0 to 1 (a fraction of the duration), got 1.5"),
    (["--shape", "trapezoid", "--ratios", "1", "--rise", "0.2", "--hold", "0.5"],
     "--fall: missing (a trapezoid needs --rise, --hold and --fall, fractions of the duration "
     "summing to 1)"),
    (["--shape", "trapezoid", "--ratios", "1", "--rise", "0.2", "--hold", "0.5", "--fall", "0.2"],
     "--fall: --rise, --hold and --fall must sum to 1 (fractions of the duration), got 0.9"),
    (["--shape", "rectangle", "--ratios", "1", "--json", ""],
     "--json: expected '-' (standard output) or a file name, got ''"),
    (["--shape", "rectangle", "--ratios", "1e9"],
     "--ratios: t_d/T_n must be from 1e-06 to 10000 (the range in which each point is computed "
     "and checked), got 1e9"),
    (["--shape", "rectangle", "--range", "1e-7:1:5"],
     "--range: t_d/T_n must be from 1e-06 to 10000 (the range in which each point is computed "
     "and checked), got 1e-7"),
    (["--shape", "rectangle", "--ratios", "1", "--time-budget", "0"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got 0"),
])
def test_bad_arguments_give_one_line_and_exit_2(capsys, arguments, message):
    code = main(["spectrum", *arguments])
    captured = capsys.readouterr()
    assert code == 2
    assert captured.out == ""
    assert captured.err.strip().splitlines() == [message]


# ----------------------------------------------------------------------------- long pulses (issue 13.9)


@pytest.mark.parametrize("zeta", ["0", "0.05"])
def test_long_rectangle_peaks_at_the_first_overshoot(zeta):
    """A rectangle much longer than the period is a suddenly applied load: undamped DLF = 2 for
    every t_d/T_n ≥ ½, first reached at t = T_n/2 (Biggs, Introduction to Structural Dynamics,
    1964, ch. 2, rectangular pulse; Chopra, Dynamics of Structures, 4th ed., section 4.7 — from
    memory); damped: the step overshoot 1 + exp(−ζπ/√(1−ζ²)) at π/ω_d (Ogata, Modern Control
    Engineering, 5th ed., section 5-3, from memory). At the top of the stated range, 10⁴."""
    (point,) = spectrum_at("rectangle", zeta, ["10000"])
    z = float(zeta)
    assert point.status == "verified"
    assert point.dlf == pytest.approx(1 + math.exp(-z * math.pi / math.sqrt(1 - z * z)),
                                      rel=1e-12)
    assert point.peak_time_ratio == pytest.approx(1 / (2 * 10000 * math.sqrt(1 - z * z)),
                                                  rel=1e-9)


def test_long_half_sine_and_decay_tend_to_their_static_and_step_values():
    """t_d ≫ T_n: a half-sine is applied slowly, DLF → 1 (quasi-static) with its peak at mid
    pulse; a decaying triangle starts as a step, DLF → 2 (Biggs 1964, ch. 2, the long-pulse
    ends of the charts; from memory). At 10⁴ within 1e-3, and every point verified."""
    half_sine, = spectrum_at("half-sine", 0, ["10000"])
    decay, = spectrum_at("decay", 0, ["10000"])
    assert half_sine.status == decay.status == "verified"
    assert half_sine.dlf == pytest.approx(1.0, abs=1e-3)
    assert half_sine.peak_time_ratio == pytest.approx(0.5, abs=1e-3)
    assert decay.dlf == pytest.approx(2.0, abs=1e-3)


def test_every_point_of_a_spectrum_is_checked():
    spectrum = response_spectrum(Pulse("triangle"), R("0.05"), parse_range("0.1:3:12"))
    assert spectrum.status == "verified"
    for point in spectrum.points:
        assert [c.name for c in point.checks] == [
            "value at the reported time", "stationary point or load breakpoint",
            "no larger |x| in the pulse and the free vibration", "earliest time of the peak",
            "residual amplitude"]
        assert all(c.passed for c in point.checks)


@pytest.mark.parametrize("shape, zeta, ratio", [("rectangle", 0, 0.3), ("half-sine", 0, 0.5),
                                               ("half-sine", 0.05, 2.2), ("decay", 0, 1e-6),
                                               ("triangle", 0.1, 40)])
def test_the_point_check_refutes_wrong_numbers(shape, zeta, ratio):
    """Each reported number moved by a little: the independent check must fail it."""
    (point,) = spectrum_at(shape, str(zeta), [str(ratio)])
    value, time = float(point.peak.value_mp), float(point.peak.time_mp)
    assert all(c.passed for c in check_point(shape, zeta, ratio, value, time, point.residual))

    def failed(**changed):
        arguments = dict(peak_value=value, peak_time=time, residual=point.residual) | changed
        return {c.name for c in check_point(shape, zeta, ratio, **arguments) if not c.passed}

    assert "value at the reported time" in failed(peak_value=value * (1 - 1e-8))
    assert "no larger |x| in the pulse and the free vibration" in failed(
        peak_value=value * (1 - 1e-8))
    assert failed(peak_time=time * (1 + 1e-4) + 1e-6) & {"value at the reported time",
                                                          "stationary point or load breakpoint"}
    assert "residual amplitude" in failed(residual=point.residual * (1 + 1e-8) + 1e-9)


def test_a_later_equal_peak_is_refuted_by_the_earliest_time_rule():
    """Undamped rectangle, t_d/T_n = 3.7: x = 1 − cos t reaches 2 at π, 3π, 5π, … (the
    first is the one to report); reporting the third instead must fail."""
    duration = 2 * math.pi * 3.7
    names = {c.name for c in check_point("rectangle", 0.0, 3.7, 2.0, 5 * math.pi,
                                         2 * abs(math.sin(math.pi * 3.7))) if not c.passed}
    assert names == {"earliest time of the peak"}
    assert 5 * math.pi < duration


def test_beyond_the_range_the_engine_is_caught_by_the_check():
    """Issue 13.9: at t_d/T_n = 1e5 the 30-digit search reported a later peak. The command
    refuses that ratio; run anyway, the point check says failed."""
    pulse = Pulse("rectangle")
    point = spectrum_point(pulse, R(0), R(10**5))
    assert point.dlf == pytest.approx(2.0)
    if point.peak_time_ratio > 1 / (2 * 10**5) * (1 + 1e-6):
        assert point.status == "failed"
    else:
        assert point.status == "verified"


def test_time_budget_stops_a_long_spectrum(capsys):
    code = main(["spectrum", "--shape", "half-sine", "--range", "0.05:5:100000",
                 "--time-budget", "1"])
    captured = capsys.readouterr()
    assert code == 1 and captured.out == ""
    (line,) = captured.err.strip().splitlines()
    assert line.startswith("error: spectrum: the stage 'shock spectrum: t_d/T_n = ")
    assert line.endswith("ran past the time budget of 1 s (raise it with --time-budget)")

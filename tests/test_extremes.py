"""Peaks that must not be missed, and the independent check of every reported extreme.

References are outside the engine: closed forms from the Laplace transform pairs of a
published table (Abramowitz & Stegun, Handbook of Mathematical Functions, 1964, table
29.3: 1/s ↔ 1, s/(s² + a²) ↔ cos at, a/(s² + a²) ↔ sin at, 1/((s − a)(s − b)) ↔
(e^(at) − e^(bt))/(a − b)), evaluated and maximised with mpmath at 50 digits, and a dense
search of the JSON pieces read by sympy (the JSON contract: expressions readable by
sympy.parse_expr), refined with mpmath.findroot.
"""

from __future__ import annotations

import dataclasses
import functools
import json
import math

import mpmath
import numpy
import pytest
import sympy

from closedform.checks import extremes
from closedform.derivation import finite_check
from closedform.render import render_csv
from tests.conftest import derive_text, long_table_history, replace_check_run


@pytest.fixture(autouse=True)
def fifty_digits():
    """The references of this module at 50 digits; mpmath's global precision restored after."""
    with mpmath.workdps(50):
        yield


def _maximise(function, lo, hi, count: int):
    """max |f| on [lo, hi] (mpmath): dense sampling, then findroot of f′ near the best few."""
    lo, hi = mpmath.mpf(lo), mpmath.mpf(hi)
    step = (hi - lo) / count
    samples = [(abs(function(lo + i * step)), lo + i * step) for i in range(count + 1)]
    samples.sort(key=lambda pair: -pair[0])
    best = samples[0]
    for _value, at in samples[:6]:
        try:
            root = mpmath.findroot(lambda u: mpmath.diff(function, u), at)
        except (ValueError, ZeroDivisionError):
            continue
        if lo <= root <= hi and abs(function(root)) > best[0]:
            best = (abs(function(root)), root)
    return best


def _json_pieces(derivation):
    t = sympy.Symbol("t")
    data = json.loads(derivation.to_json())
    until = data["until"]
    pieces = []
    for piece in data["pieces"]:
        expr = sympy.parse_expr(piece["expr"], local_dict={"t": t})
        end = piece["end"] if piece["end"] is not None else until
        pieces.append((piece["start"], end, expr))
    return pieces, t


def dense_peak(derivation, per_piece: int = 400, precise: bool = True, density: float = 0):
    """Independent max |x| over the window from the JSON pieces."""
    pieces, t = _json_pieces(derivation)
    best = (mpmath.mpf(0), None)
    for start, end, expr in pieces:
        if precise:
            function = sympy.lambdify(t, expr, "mpmath")
            found = _maximise(function, start, end, per_piece)
        else:
            numbers = {a: sympy.Float(a.evalf(30), 30) for a in expr.atoms(sympy.Pow) if a.is_number}
            fast = sympy.lambdify(t, expr.xreplace(numbers), "numpy")
            count = max(200, int((end - start) * density)) if density else per_piece
            grid = numpy.linspace(start, end, count + 1)
            values = numpy.abs(fast(grid) * numpy.ones_like(grid))
            function = sympy.lambdify(t, expr, "mpmath")
            step = (end - start) / count
            found = (mpmath.mpf(0), None)
            for i in numpy.argsort(values)[-12:]:          # the best samples, each refined
                local = _maximise(function, max(start, grid[i] - step), min(end, grid[i] + step), 8)
                if local[0] > found[0]:
                    found = local
        if found[0] > best[0]:
            best = found
    return best


def _check(derivation, name: str = "extreme peak"):
    return next(c for c in derivation.checks if c.name == name)


# ----------------------------------------------------------------------------- 13.2 peaks


def test_nearly_equal_poles_peak_is_the_true_maximum():
    # (s² + 1)(s² + b), b = 1 + 2e-16: poles ±i and ±i√b, 1e-16 apart; unit step, 50 s.
    # x = 1/b + cos t/(1 − b) + cos(√b t)/(b(b − 1))  (partial fractions, A&S 29.3)
    b = mpmath.mpf("1.0000000000000002")
    derivation = derive_text("""
        title = "near pair"
        [system]
        model = "ode"
        coefficients = [1, 0, "2.0000000000000002", 0, "1.0000000000000002"]
        [[load]]
        shape = "step"
        amplitude = 1
        [report]
        until = "50 s"
    """)

    def x(u):
        return 1 / b + mpmath.cos(u) / (1 - b) + mpmath.cos(mpmath.sqrt(b) * u) / (b * (b - 1))

    reference, at = _maximise(x, 0, 50, 2000)
    peak = derivation.numbers.peak
    assert abs(abs(peak.value_mp) - reference) <= 1e-9 * reference
    assert abs(mpmath.diff(x, peak.time_mp)) <= 1e-9 * reference     # a stationary point
    assert derivation.status == "verified"


def test_nearly_critical_damping_peak_after_a_rectangle():
    # ζ = 1 + 1e-30, m = 1 kg, k = 4 N/m, rectangle 1 N for 0.7 s. Step response of the
    # overdamped oscillator x = (1/k)[1 − (p₂e^(p₁t) − p₁e^(p₂t))/(p₂ − p₁)] (A&S 29.3,
    # 1/((s − a)(s − b))), the rectangle as a step less a delayed step.
    derivation = derive_text("""
        title = "nearly critical rectangle"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "4 N/m"
        damping_ratio = "1.000000000000000000000000000001"
        [[load]]
        shape = "rectangle"
        duration = "0.7 s"
        amplitude = "1 N"
        [report]
        until = "6 s"
    """)
    with mpmath.workdps(80):
        zeta, omega = mpmath.mpf("1.000000000000000000000000000001"), mpmath.mpf(2)
        root = omega * mpmath.sqrt(zeta**2 - 1)
        p1, p2 = -zeta * omega + root, -zeta * omega - root

        def step(u):
            if u <= 0:
                return mpmath.mpf(0)
            return (1 - (p2 * mpmath.exp(p1 * u) - p1 * mpmath.exp(p2 * u)) / (p2 - p1)) / 4

        def x(u):
            return step(u) - step(u - mpmath.mpf("0.7"))

        reference, _ = _maximise(x, mpmath.mpf("0.7"), 6, 800)
    peak = derivation.numbers.peak
    assert abs(abs(peak.value_mp) - reference) <= 1e-9 * reference
    assert derivation.status == "verified"


def test_two_modes_long_window_peak_does_not_fall_with_the_window():
    # (s² + 1)(s² + 40000), impulse 1: x = (sin t − sin(200 t)/200)/39999 (A&S 29.3).
    # 4000 s hold 1.3e5 periods of the fast mode. The maximum over a longer window can only
    # be larger or equal.
    text = """
        title = "two modes"
        [system]
        model = "ode"
        coefficients = [1, 0, 40001, 0, 40000]
        [[load]]
        shape = "impulse"
        impulse = "1 s"
        [report]
        until = "{until} s"
    """
    short = derive_text(text.format(until=100))
    long = derive_text(text.format(until=4000))
    assert abs(long.numbers.peak.value) >= abs(short.numbers.peak.value) * (1 - 1e-12)

    def x(u):
        return (mpmath.sin(u) - mpmath.sin(200 * u) / 200) / 39999

    grid = numpy.linspace(0, 4000, 4000 * 200 // 6 * 16)
    values = numpy.abs(numpy.sin(grid) - numpy.sin(200 * grid) / 200) / 39999
    step = grid[1] - grid[0]
    reference = max(_maximise(x, max(0, grid[i] - step), min(4000, grid[i] + step), 8)[0]
                    for i in numpy.argsort(values)[-12:])
    peak = long.numbers.peak
    assert abs(x(peak.time_mp) - peak.value_mp) <= 1e-15 * reference    # a value of x …
    assert abs(peak.value_mp) >= reference * (1 - 1e-9)                  # … and none larger
    assert long.status == "verified"


def test_lightly_damped_long_tail_after_a_resonant_table(monkeypatch):
    # ω = 20π rad/s, ζ = 2e-6, two cycles of a sine table at resonance, then 1e5 periods
    # of decay. The energy balance is left out here (its cost grows with the periods; it
    # is not what this test is about); every other check runs.
    replace_check_run(monkeypatch, "energy balance", lambda derivation: [])
    points = [[round(0.005 * i, 3), round(math.sin(20 * math.pi * 0.005 * i), 6)]
              for i in range(41)]
    derivation = derive_text(f"""
        title = "resonant table, long tail"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "{(20 * math.pi) ** 2!r} N/m"
        damping_ratio = 2e-6
        [[load]]
        shape = "table"
        units = ["s", "N"]
        points = {points}
        [report]
        until = "10000 s"
    """)
    reference, _ = dense_peak(derivation, precise=False, density=100)   # 10 per period
    peak = derivation.numbers.peak
    assert abs(abs(peak.value_mp) - reference) <= 1e-9 * reference
    assert derivation.status == "verified"


# ----------------------------------------------------------------------------- 13.2 the check


SKID = """
    title = "skid"
    [system]
    model = "spring-mass-damper"
    mass = "420 kg"
    stiffness = "2.6 MN/m"
    damping_ratio = 0.02
    [[load]]
    shape = "half-sine"
    at = "5 ms"
    duration = "3 ms"
    amplitude = "40 kN"
    [report]
    until = "120 ms"
"""


@functools.lru_cache(maxsize=1)
def _skid():
    return derive_text(SKID)


def _checks_for(derivation, **results_changes):
    changed = dataclasses.replace(derivation, numbers=dataclasses.replace(
        derivation.numbers, **results_changes), checks=())
    return {c.name: c for c in extremes.extreme_checks(changed)}


def test_mutation_smaller_value_is_refused():
    derivation = _skid()
    peak = derivation.numbers.peak
    lower = dataclasses.replace(peak, value=peak.value * (1 - 1e-6),
                                value_mp=peak.value_mp * (1 - mpmath.mpf("1e-6")))
    check = _checks_for(derivation, peak=lower)["extreme peak"]
    assert not check.passed and check.outcome == "failed"
    assert "differs from the reported" in check.detail


def test_mutation_wrong_time_is_refused():
    derivation = _skid()
    peak = derivation.numbers.peak
    moved = dataclasses.replace(peak, time=peak.time + 1e-4,
                                time_mp=peak.time_mp + mpmath.mpf("1e-4"))
    assert not _checks_for(derivation, peak=moved)["extreme peak"].passed


def test_mutation_a_smaller_local_maximum_is_refused():
    # A consistent but wrong report: the value and time of a later, smaller local maximum
    # (a true stationary point) — only the enclosure can see that something is larger.
    derivation = _skid()
    pieces, t = _json_pieces(derivation)
    start, end, expr = pieces[-1]
    x = sympy.lambdify(t, expr, "mpmath")
    peak = derivation.numbers.peak
    period = 2 * mpmath.pi / mpmath.sqrt(mpmath.mpf(2.6e6) / 420)       # the next maximum of
    later = mpmath.findroot(lambda u: mpmath.diff(x, u),                  # the same sign
                            (peak.time_mp + 0.75 * period, peak.time_mp + 1.25 * period),
                            solver="illinois")
    assert later > peak.time_mp + 0.03 and abs(x(later)) < abs(peak.value_mp)
    value = x(later)
    wrong = dataclasses.replace(peak, value=float(value), time=float(later), value_mp=value,
                                time_mp=later)
    check = _checks_for(derivation, peak=wrong)["extreme peak"]
    assert not check.passed
    assert "exceeds the reported" in check.detail


def test_mutation_of_a_derived_quantity_is_refused():
    derivation = _skid()
    quantities = []
    for q in derivation.numbers.quantities:
        if q.name == "peak_support_reaction":
            e = q.extreme
            q = dataclasses.replace(q, extreme=dataclasses.replace(
                e, value=e.value * 0.99, value_mp=e.value_mp * mpmath.mpf("0.99")))
        quantities.append(q)
    checks = _checks_for(derivation, quantities=tuple(quantities))
    assert not checks["extreme peak_support_reaction"].passed
    assert checks["extreme peak"].passed


def test_a_smaller_value_at_a_breakpoint_of_a_long_history_is_refused(monkeypatch):
    """A consistent but wrong report on a long table with an impulse (the route whose short
    pieces the check settles in one batch): the value of x at a breakpoint in the middle, well below
    the peak, reported as the peak at that time. The value and the time check out (an
    interval end), so only the enclosure can refuse it, and it must, while the batch still
    settles the pieces it can."""
    derivation = long_table_history()
    assert derivation.passed and len(derivation.pieces) > 40
    peak = derivation.numbers.peak
    starts = [float(p.start) for p in derivation.pieces]
    values = derivation.evaluate(starts, precise=True)
    index = next(i for i in range(len(starts) // 2, len(starts))
                 if 0 < abs(values[i]) < 0.9 * abs(peak.value))
    at = mpmath.mpf(derivation.pieces[index].start.p) / derivation.pieces[index].start.q
    value = mpmath.mpf(values[index])
    wrong = dataclasses.replace(peak, value=float(value), time=float(at), value_mp=value,
                                time_mp=at)
    settled = []
    batch = extremes.settled_at_once
    monkeypatch.setattr(extremes, "settled_at_once",
                        lambda *a: settled.append(batch(*a)) or settled[-1])
    check = _checks_for(derivation, peak=wrong)["extreme peak"]
    assert not check.passed and "exceeds the reported" in check.detail
    assert settled and settled[0], "the batch settled nothing: the route was not exercised"


def test_wrong_peak_makes_the_derivation_failed(monkeypatch):
    import closedform.results as results

    real = results.extreme_magnitude

    def low(intervals):
        found = real(intervals)
        if found is None:
            return None
        return dataclasses.replace(found, value=found.value * (1 - 1e-7),
                                   value_mp=found.value_mp * (1 - mpmath.mpf("1e-7")))
    monkeypatch.setattr(results, "extreme_magnitude", low)
    derivation = derive_text(SKID)
    assert derivation.status == "failed"
    assert not _check(derivation).passed


# ----------------------------------------------------------------------------- 13.3 overflow


def test_overflow_is_a_failure_and_the_json_stays_strict():
    derivation = derive_text("""
        title = "runaway formula"
        [system]
        model = "spring-mass-damper"
        mass = "2 kg"
        stiffness = "50 N/m"
        damping_ratio = 0.1
        [[load]]
        shape = "formula"
        expr = "exp(720*tau)"
        duration = "4 s"
        unit = "N"
        [report]
        until = "4.5 s"
    """)
    assert derivation.status == "failed"
    check = _check(derivation, "finite results")
    assert not check.passed and check.outcome == "failed"
    assert "peak.value" in check.detail and "not finite" in check.detail
    # the check of the peak cannot run in double precision: inconclusive, with the reason
    extreme = _check(derivation)
    assert extreme.outcome == "inconclusive" and not extreme.passed
    assert "overflows the float range" in extreme.detail

    def refuse(constant):
        raise AssertionError(f"non-strict JSON constant {constant}")
    data = json.loads(derivation.to_json(), parse_constant=refuse)
    assert data["status"] == "failed"
    assert data["peak"]["value"] is None
    outcomes = {c["name"]: c["outcome"] for c in data["checks"]}
    assert outcomes["finite results"] == "failed" and outcomes["extreme peak"] == "inconclusive"
    csv = render_csv(derivation)
    assert not any(word in csv.lower() for word in ("inf", "nan"))


def test_finite_results_pass_on_an_ordinary_case():
    derivation = _skid()
    assert finite_check(derivation.numbers).passed


def test_a_turning_point_where_the_pulse_ends_is_no_internal_error():
    """Found by fuzzing: a one-period rectangle (T_n = 1 s, k = 39.48 N/m, m = 1 kg) after an
    initial velocity leaves x′ = x″ = 0 at a point the cell bounds cannot settle; the search
    raised ArithmeticError. The peak must now be derived and pass the independent check."""
    import closedform
    derivation = closedform.derive(closedform.load_case_text(
        'title = "One-period rectangle"\n[system]\nmodel = "spring-mass-damper"\nmass = "1 kg"\n'
        'stiffness = "39.48 N/m"\n[[load]]\nshape = "rectangle"\nat = "1 s"\nduration = "1 s"\n'
        'amplitude = "1 N"\n[initial]\nvalues = ["0 m", "0.0001 m/s"]\n', "rectangle.toml"))
    assert derivation.status == "verified", [c.detail for c in derivation.checks if not c.passed]
    assert any(c.name == "extreme peak" and c.passed for c in derivation.checks)

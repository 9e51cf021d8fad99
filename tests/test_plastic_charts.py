"""Yielding springs under a triangular pulse with zero rise (issue 15): chart readings and the
exact stage-by-stage solution.

Sources beside each check:

* chart reading — NAVFAC DM-2.08, *Blast Resistant Structures* (Naval Facilities Engineering
  Command, December 1986), Section 2 worked example of a steel roof beam, step (11),
  p. 2.08-112: "Find X_m/X_E, ductility ratio from Figure 6-7 of NAVFAC P-397 …
  T/T_N = 60.7/25.3 = 2.40 … B/r_u = 1,598.40/1,065.85 = 1.50 … X_m/X_E = 17.0", with
  K_E = 8,629.70 lb/in, K_LM = 0.72, X_E = 0.1235 in and X_m = 17.0 × 0.1235 = 2.10 in
  (read in the stored copy at navalfacilities.tpub.com/dm2_08/dm2_080128.htm). T is the
  duration of the blast load (peak B at once, linear decay), r_u the resistance of the
  elastic-perfectly-plastic beam, so R_m/F₁ = r_u/B = 1/1.50 and t_d/T_n = T/T_N. The title
  of P-397's Figure 6-7 was not in the stored text; DM-2.08 calls it "the dynamic response
  chart", and its parameters (T/T_N, B/r_u, X_m/X_E) are those of the elasto-plastic
  triangular-pulse chart (Biggs 1964 ch. 2; TM 5-1300/UFC 3-340-02 ch. 3). The same
  numbers under a rectangular pulse give μ ≈ 103, so the reading is not of that chart.
* published worked example, quoted secondhand — Biggs, *Introduction to Structural
  Dynamics* (McGraw-Hill, 1964), ch. 2, a constant force on an elasto-plastic system with
  R_m/F₁ = 1.51 and y_m/y_el = 0.806/0.543 = 1.48, as quoted in the PTC Community thread
  "Maximum Response of an Elasto-Plastic SDOF to Rectangular Load Pulses"
  (community.ptc.com/t5/Mathcad/…/m-p/1022672); the book itself was not at hand.
* the stage-by-stage closed form of the undamped oscillator under F₁(1 − t/t_d): elastic
  x = (F₁/k)(1 − cos ωt − (ωt − sin ωt)/(ωt_d)) up to the yield, then on the yield line
  m·x″ = F₁(1 − t/t_d) − R_m (F = 0 after t_d), whose velocity is a quadratic in t — the
  method by which Biggs (1964, ch. 2) builds these charts (section from memory). Written out
  by hand below and solved with mpmath at 30 digits, independent of the engine's Laplace
  phases and of its event search.

Chart-reading tolerance: ±10 % of the read value. The chart is log-log and read to two
figures; in this region (R_m/F₁ < 1, μ ≈ 17) the curve is steep — at t_d/T_n = 2.40 a 1 %
change of R_m/F₁ moves μ by about 4 %, a 2 % change of t_d/T_n by about 3 % — and the
example's ratios are themselves rounded to three figures (25.3 ms, 1.50).
"""

from __future__ import annotations

import math

import mpmath
import pytest
import sympy

import closedform
from closedform.ductility_spectrum import ductility_point
from closedform.shock import Pulse

CHART_TOLERANCE = 0.10       # relative, see the module docstring


def dm208_roof_beam(shape: str = "decay") -> closedform.Case:
    """The DM-2.08 beam per inch of span as an oscillator: effective mass K_LM·m, K_E, r_u,
    the blast load B with duration T, in the example's own units."""
    return closedform.load_case({
        "title": "NAVFAC DM-2.08 steel roof beam under blast (published example)",
        "system": {"model": "spring-mass-damper",
                   "mass": "140139.72 lbf*ms^2/in",       # K_LM·m = 0.72 × 194,638.5
                   "stiffness": "8629.70 lbf/in",          # K_E
                   "resistance": {"kind": "elastic-plastic", "yield": "1065.85 lbf"}},  # r_u
        "load": [{"shape": shape, "duration": "60.7 ms", "amplitude": "1598.40 lbf"}],  # T, B
        "report": {"until": "400 ms"}})


def test_chart_reading_dm208_roof_beam():
    """Chart reading (NAVFAC DM-2.08, 1986, Section 2 example step (11), p. 2.08-112, from
    Figure 6-7 of NAVFAC P-397): T/T_N = 2.40, B/r_u = 1.50 → X_m/X_E = 17.0 (±10 %)."""
    mass, stiffness, strength, peak, duration = 140139.72, 8629.70, 1065.85, 1598.40, 60.7
    period = 2 * math.pi * math.sqrt(mass / stiffness)           # ms
    assert round(period, 1) == 25.3                              # the example's T_N
    assert round(duration / period, 2) == 2.40 and round(peak / strength, 2) == 1.50

    d = closedform.derive(dm208_roof_beam())
    assert d.status == "verified", [c.detail for c in d.checks if not c.passed]
    result = d.to_dict()
    mu = result["ductility"]["value"]
    assert mu == pytest.approx(17.0, rel=CHART_TOLERANCE)        # chart reading
    inch = 0.0254
    assert result["yield_displacement"]["value"] / inch == pytest.approx(0.1235, abs=5e-5)
    # X_m = 17.0 × 0.1235 = 2.10 in in the example (chart reading, same tolerance)
    assert mu * result["yield_displacement"]["value"] / inch == pytest.approx(
        2.10, rel=CHART_TOLERANCE)
    assert [e["kind"] for e in result["events"]] == ["yield", "unload"]
    # the maximum comes while the load still acts (t_m < T), at the unloading
    assert result["ductility"]["time"] == pytest.approx(result["events"][1]["time"], rel=1e-12)
    assert result["ductility"]["time"] < duration / 1000


def test_dm208_reading_is_not_of_the_rectangular_pulse_chart():
    """The same ratios under a rectangular pulse of the same peak and duration give a
    ductility far outside the reading: the reading discriminates between the charts."""
    d = closedform.derive(dm208_roof_beam("rectangle"))
    assert d.status == "verified"
    assert d.to_dict()["ductility"]["value"] > 1.5 * 17.0


def test_worked_example_biggs_constant_force():
    """Published worked example, quoted secondhand (Biggs 1964 ch. 2 via the PTC thread):
    constant force, R_m/F₁ = 1.51, y_m/y_el = 0.806/0.543 = 1.48. The book's three-figure
    numbers: R_m/F₁ = 1.51 ± 0.005 moves μ = 1/(2(1 − F₁/R_m)) by ±0.01."""
    system = {"model": "spring-mass-damper", "mass": "1 kg", "stiffness": "100 N/m",
              "resistance": {"kind": "elastic-plastic", "yield": "15.1 N"}}
    d = closedform.derive(closedform.load_case({
        "title": "constant force on a yielding spring", "system": system,
        "load": [{"shape": "step", "amplitude": "10 N"}], "report": {"until": "3 s"}}))
    assert d.status == "verified"
    assert d.to_dict()["ductility"]["value"] == pytest.approx(0.806 / 0.543, abs=0.01)


# ----------------------------------------------------------------------------- exact stages


def stagewise(strength, ratio):
    """μ and t_m/t_d of the undamped oscillator (m = k = 1, F₁ = 1, R_m = strength,
    t_d = 2π·ratio) under F₁(1 − t/t_d), yielding during the pulse, by hand."""
    mpmath.mp.dps = 30
    r = mpmath.mpf(strength)
    td = 2 * mpmath.pi * mpmath.mpf(ratio)

    def x1(t):                                   # elastic, from rest
        return 1 - mpmath.cos(t) - (t - mpmath.sin(t)) / td

    def v1(t):
        return mpmath.sin(t) - (1 - mpmath.cos(t)) / td

    rising = min(2 * mpmath.atan(td), td)        # x1 rises until v1 = 0 ⇔ tan(t/2) = t_d
    assert x1(rising) > r, "no yield during the pulse"
    ty = mpmath.findroot(lambda t: x1(t) - r, (mpmath.mpf(0), rising), solver="anderson")
    assert 0 < ty < rising
    vy = v1(ty)

    def x2(t):                                   # on the yield line, load still on
        tau = t - ty
        return r + vy * tau + (1 - r) * tau**2 / 2 - (tau**3 / 6 + ty * tau**2 / 2) / td

    def v2(t):
        return vy + (1 - r) * (t - ty) - (t**2 - ty**2) / (2 * td)

    # v2 = 0 ⇔ t²/(2t_d) − (1 − r)·t − c = 0 with c = v_y − (1 − r)·t_y + t_y²/(2t_d)
    c = vy - (1 - r) * ty + ty**2 / (2 * td)
    disc = (td * (1 - r))**2 + 2 * td * c
    roots = sorted(td * (1 - r) + s * mpmath.sqrt(disc) for s in (-1, 1)) if disc >= 0 else []
    stops = [t for t in roots if ty < t <= td]
    if stops:
        tm, xm = stops[0], x2(stops[0])
    else:                                        # still yielding when the load ends: x″ = −r
        vd, xd = v2(td), x2(td)
        assert vd > 0
        tm, xm = td + vd / r, xd + vd**2 / (2 * r)
    return float(xm / r), float(tm / td)


@pytest.mark.parametrize(("strength", "ratio"), [
    (sympy.Rational(2, 3), sympy.Rational(12, 5)),   # the DM-2.08 point: stops during the load
    (sympy.Rational(6, 5), sympy.Rational(1)),       # stops during the load, t_m ≈ t_d/2
    (sympy.Rational(1, 2), sympy.Rational(3, 10)),   # still yielding when the load ends
    (sympy.Rational(3, 2), sympy.Rational(20)),      # long pulse, towards the step relation
])
def test_triangle_zero_rise_matches_the_stagewise_closed_form(strength, ratio):
    point = ductility_point(Pulse("decay"), sympy.S.Zero, strength, ratio)
    assert point.status == "verified", point.failures
    assert point.events == 2                          # yield, unload: the first excursion
    mu, tm = stagewise(strength, ratio)
    assert point.ductility == pytest.approx(mu, rel=1e-10)
    assert point.peak_time_ratio == pytest.approx(tm, rel=1e-10)


def test_long_triangle_approaches_the_step_relation_from_below():
    """The right-hand end of the chart: for t_d ≫ T_n the decaying load acts as the step
    F₁ while x rises, μ → 1/(2(1 − F₁/R_m)) (energy balance, exact), from below."""
    strength = sympy.Rational(3, 2)
    step = 1 / (2 * (1 - 1 / 1.5))
    mus = [ductility_point(Pulse("decay"), sympy.S.Zero, strength, sympy.Integer(n)).ductility
           for n in (5, 20, 80)]
    assert mus[0] < mus[1] < mus[2] < step
    assert step - mus[2] < 0.01 * step

"""The model and shape registries (closedform/models, closedform/shapes).

Every registered model and shape must appear in every table it needs, and the independent
checks must handle each of them: a shape or model that the checks' own evaluator does not
know makes the derivation FAILED, it is never passed. The last tests register a throwaway
model and a throwaway shape from this file alone and derive a case with them end to end;
their response is compared with scipy's ODE integrator (scipy.integrate.solve_ivp, an
outside reference), and the checks are shown to refuse them loudly.
"""

from __future__ import annotations

from types import MappingProxyType

import mpmath
import numpy
import pytest
import sympy
from scipy.integrate import solve_ivp

from closedform import case as case_module
from closedform import models, quantities, render, shapes, spectrum
from closedform.case import load_case
from closedform.derivation import derive
from closedform.loads import RULES, rewrite_load, rewrite_loads
from closedform.response import solve
from closedform.systems import build_model, scalar_equation

T = sympy.Symbol("t", real=True)

BASE_SYSTEM = {"model": "spring-mass-damper", "mass": "420 kg", "stiffness": "2.6 MN/m",
               "damping_ratio": 0.05}


def _case(system: dict, load: dict, until: str = "80 ms", title: str = "registry test"):
    return load_case({"title": title, "system": dict(system), "load": [dict(load)],
                      "report": {"until": until}})


def _example_load(name: str):
    return _case(BASE_SYSTEM, shapes.get(name).example).loads[0]


# ----------------------------------------------------------------------------- shapes


def test_the_case_tables_are_the_registry():
    assert case_module.SHAPES == shapes.names()
    assert case_module.PULSE_SHAPES == tuple(n for n in shapes.names() if shapes.get(n).pulse)
    assert case_module.MODELS == models.names()


@pytest.mark.parametrize("name", shapes.names())
def test_every_shape_appears_in_every_table(name):
    definition = shapes.get(name)
    load = _example_load(name)
    assert load.shape == name
    # keys: its own and none of the common ones
    assert definition.keys and not set(definition.keys) & set(shapes.COMMON_KEYS)
    # the rewrite rule: one of the named rules, with text and source
    text, source = definition.rule
    assert (text, source) in RULES.values() and text and source
    rewrite = rewrite_load(load, sympy.S.Zero)
    assert rewrite.rule == text and rewrite.terms
    # the corner count bounds the breakpoints the rewrite brings (the breakpoint limit
    # counts with it, so an undercount would let a case past the limit)
    times = {term.at for term in rewrite.terms}
    assert 1 <= len(times) <= definition.corners(load)
    # the length is the time of the last breakpoint (0 for a load that does not end)
    last = max(times, key=lambda time: float(time))
    instant = name in ("step", "impulse") or definition.endless(load.values)
    assert sympy.simplify(load.length() - (0 if instant else last)) == 0
    # the printed fields are ones the sheet prints
    assert set(definition.fields) <= set(render.LOAD_VALUE_NAMES)
    assert set(definition.fields) <= set(definition.keys)
    assert set(definition.fields.values()) <= {"load", "impulse", "rate", "time",
                                               "dimensionless"}
    # a pulse has its area and centroid; a polyline its corner points
    if definition.pulse:
        assert definition.area_and_centroid is not None
    if definition.rule == RULES["piecewise-linear"]:
        assert definition.points is not None


def test_the_spectrum_command_offers_the_shapes_with_a_spectrum_entry():
    with_entry = tuple(n for n in shapes.names() if shapes.get(n).spectrum is not None)
    assert with_entry == spectrum.SHAPES
    from closedform.shock import Pulse
    for name in with_entry:
        pulse = Pulse(name) if name != "trapezoid" else Pulse(
            name, rise=sympy.Rational(1, 4), hold=sympy.Rational(1, 2), fall=sympy.Rational(1, 4))
        load = pulse.load(sympy.Rational(1, 10))
        assert load.shape == name and pulse.describe()
        assert float(max(abs(v) for _t, v in _samples(load))) == pytest.approx(1.0, abs=1e-3)


def _samples(load, count: int = 2001):
    function = sympy.lambdify(T, rewrite_load(load, sympy.S.Zero).expression(T),
                              modules=[{"Heaviside": lambda x, *_: numpy.heaviside(x, 1.0),
                                        "DiracDelta": lambda x, *_: 0 * x}, "numpy"])
    end = float(load.length())
    return [(t, function(t)) for t in numpy.linspace(0, end * (1 - 1e-9), count)]


@pytest.mark.parametrize("name", [n for n in shapes.names() if shapes.get(n).pulse])
def test_area_and_centroid_of_every_pulse_against_quadrature(name):
    """Reference: mpmath.quad (tanh-sinh) of the load, split at its breakpoints."""
    load = _example_load(name)
    area, centroid = shapes.get(name).area_and_centroid(load, {})
    history = rewrite_load(load, sympy.S.Zero)
    function = sympy.lambdify(T, history.expression(T), modules=[
        {"Heaviside": lambda x, *_: mpmath.mpf(1) if x >= 0 else mpmath.mpf(0)}, "mpmath"])
    edges = sorted({float(term.at) for term in history.terms} | {float(load.length())})
    with mpmath.workdps(30):
        quad_area = mpmath.quad(function, edges)
        quad_moment = mpmath.quad(lambda t: t * function(t), edges)
    assert float(area) == pytest.approx(float(quad_area), rel=1e-9)
    assert float(centroid) == pytest.approx(float(quad_moment / quad_area), rel=1e-9)


@pytest.mark.parametrize("name", shapes.names())
def test_the_independent_checks_handle_every_shape(name):
    """Evaluating, not reading verify.py: a case with the shape derives with every check
    passing, so the checks' own load evaluator knows the shape."""
    derivation = derive(_case(BASE_SYSTEM, shapes.get(name).example))
    failed = [(c.name, c.detail) for c in derivation.checks if not c.passed]
    assert derivation.status == "verified", failed
    assert len(derivation.checks) >= 5


# ----------------------------------------------------------------------------- models


def _model_case(name: str):
    definition = models.get(name)
    system = dict(definition.example)
    spec = _case(system, {"shape": "step", "amplitude": 0}).system
    unit = quantities.si_unit_text(spec.load_dimension)
    amplitude = "1.5" if unit == "1" else f"1.5 {unit}"
    return _case(system, {"shape": "rectangle", "amplitude": amplitude, "duration": "20 ms"},
                 until="200 ms")


@pytest.mark.parametrize("name", models.names())
def test_every_model_appears_in_every_table(name):
    definition = models.get(name)
    assert definition.keys[0] == "model"
    assert definition.equation and definition.variable and definition.load_name
    assert definition.assumptions and all(definition.assumptions)
    case = _model_case(name)
    model = build_model(case.system)
    assert model.order == definition.order(case.system)
    assert model.equation == definition.equation
    # the sheet prints the definition's assumptions
    derivation = derive(case)
    sheet = render.render_markdown(derivation)
    for assumption in definition.assumptions:
        assert assumption in sheet
    failed = [(c.name, c.detail) for c in derivation.checks if not c.passed]
    assert derivation.status == "verified", failed


def test_a_scalar_equation_is_solved_like_the_case_model():
    """The engine's interface for one mode of a larger model: coefficients, input scale,
    loads and initial values, no case."""
    case = _case(BASE_SYSTEM, {"shape": "half-sine", "amplitude": "5 kN", "duration": "25 ms"})
    model = build_model(case.system)
    history = rewrite_loads(case.loads)
    until = sympy.Rational(8, 100)
    initial = (sympy.Rational(1, 1000), sympy.S.Zero)
    mode = scalar_equation(model.coefficients, model.input_scale)
    assert mode.regime == model.regime == "under-damped"
    by_model = solve(model, history, initial, until, exact=True).pieces
    by_mode = solve(mode, history, initial, until, exact=True).pieces
    assert len(by_model) == len(by_mode) > 1
    for a, b in zip(by_model, by_mode):
        assert a.start == b.start
        for time in (0, sympy.Rational(1, 1000)):
            left = a.local.expression(T).subs(T, time)
            right = b.local.expression(T).subs(T, time)
            assert float(left) == pytest.approx(float(right), rel=1e-12, abs=1e-18)


# ----------------------------------------------------------------------------- throwaways

THERMAL = "lumped-thermal"
STAIRCASE = "staircase"


def _thermal_read(reader, data):
    d = quantities.dimension
    capacity = models.required(reader, data, THERMAL, "heat_capacity",
                               d("energy") / d("temperature"))
    conductance = models.required(reader, data, THERMAL, "conductance",
                                  d("power") / d("temperature"))
    return case_module.SystemSpec(THERMAL, MappingProxyType(
        {"heat_capacity": capacity, "conductance": conductance}), None, d("power"),
        d("temperature"))


def _staircase_points(load):
    amplitude, duration = load.values["amplitude"], load.values["duration"]
    zero = sympy.S.Zero
    return ((zero, amplitude / 2), (duration / 2, amplitude / 2), (duration / 2, amplitude),
            (duration, amplitude))


def _staircase_read(reading):
    reading.duration()
    reading.amplitude_or_impulse(sympy.Rational(3, 4) * reading.values["duration"])


@pytest.fixture
def throwaways():
    """A model and a shape known only to this file, registered for one test."""
    from closedform.shapes import polyline
    model = models.register(models.ModelDefinition(
        name=THERMAL, keys=("model", "heat_capacity", "conductance"), read=_thermal_read,
        equation_of=lambda p: ((p["heat_capacity"], p["conductance"]), sympy.S.One),
        order=lambda system: 1, equation=r"C\,\dot{T} + G\,T = Q(t)", variable="T",
        load_name="Q", assumptions=("one lumped heat capacity, uniform temperature",),
        example=MappingProxyType({"model": THERMAL, "heat_capacity": "50 kJ/K",
                                  "conductance": "2 kW/K"})))
    shape = shapes.register(shapes.ShapeDefinition(
        name=STAIRCASE, keys=("duration", "amplitude", "impulse"), read=_staircase_read,
        length=lambda load: load.values["duration"], corners=lambda load: 3,
        rule=polyline.RULE, rewrite=polyline.rewrite(_staircase_points),
        fields=MappingProxyType({"amplitude": "load", "impulse": "impulse",
                                 "duration": "time"}),
        example=MappingProxyType({"shape": STAIRCASE, "amplitude": "2 kN",
                                  "duration": "20 ms"}),
        pulse=True, area_and_centroid=polyline.area_and_centroid(_staircase_points),
        points=_staircase_points))
    try:
        yield model, shape
    finally:
        models.unregister(THERMAL)
        shapes.unregister(STAIRCASE)
    assert THERMAL not in models.names() and STAIRCASE not in shapes.names()


THROWAWAY_CASE = """\
title = "Heater block, two-stage heating"
[system]
model = "lumped-thermal"
heat_capacity = "50 kJ/K"
conductance = "2 kW/K"
[[load]]
shape = "staircase"
impulse = "600 kJ"
duration = "40 s"
[report]
until = "100 s"
"""


def _reference_temperature(times):
    """C T' + G T = Q(t), T(0) = 0, Q = 10 kW on [0, 20 s), 20 kW on [20 s, 40 s), 0 after
    (impulse 600 kJ = (3/4)·A·40 s gives A = 20 kW): scipy's RK45, stage by stage."""
    capacity, conductance = 50e3, 2e3
    stages = [(0.0, 20.0, 10e3), (20.0, 40.0, 20e3), (40.0, 100.0, 0.0)]
    state = [0.0]
    values = {}
    for start, end, heat in stages:
        inside = [t for t in times if start <= t <= end]
        solution = solve_ivp(lambda _t, y, q=heat: [(q - conductance * y[0]) / capacity],
                             (start, end), state, t_eval=sorted(set(inside) | {end}),
                             rtol=1e-11, atol=1e-12)
        values.update(zip(solution.t, solution.y[0]))
        state = [solution.y[0][-1]]
    return [values[t] for t in times]


def _derive_without_checks(case):
    """The stages of ``derive`` up to the results, public functions only: what the engine
    makes of a case whatever the checks say."""
    from closedform.derivation import Derivation, analysis_window
    from closedform.results import evaluate_results
    model = build_model(case.system, case.symbol_values())
    history = rewrite_loads(case.loads)
    window = analysis_window(case, model)
    solution = solve(model, history, case.initial, window.until, exact=True,
                     ordering=case.symbol_values())
    results = evaluate_results(case, model, history, solution, window)
    return Derivation(case, model, history, window, solution, results, ())


def _refused_loudly(case, name: str) -> None:
    """The checks cannot pass a case whose model or shape they do not know: the derivation
    ends FAILED with a failed check naming it, or stops with an error naming it (an
    internal error, exit 1, on the command line). It never ends verified."""
    try:
        derivation = derive(case)
    except ValueError as error:
        assert name in str(error)
        return
    assert derivation.status == "failed"
    assert any(name in c.detail for c in derivation.checks if not c.passed), derivation.checks


def test_a_throwaway_model_and_shape_registered_from_a_test_derive_end_to_end(throwaways):
    case = load_case("", text=THROWAWAY_CASE, name="heater.toml")
    assert case.system.model == THERMAL and case.loads[0].shape == STAIRCASE
    assert case.loads[0].values["amplitude"] == 20_000           # from the impulse, 3/4·A·d
    derivation = _derive_without_checks(case)
    assert derivation.model.equation == r"C\,\dot{T} + G\,T = Q(t)"
    assert [r.rule for r in derivation.history.rewrites] == [RULES["piecewise-linear"][0]]
    # the engine: the response against scipy's integrator
    times = [5.0, 19.5, 20.0, 30.0, 40.0, 70.0, 100.0]
    mine = derivation.evaluate(times)
    for value, reference in zip(mine, _reference_temperature(times)):
        assert float(value) == pytest.approx(reference, rel=1e-7, abs=1e-9)
    # the peak is at the end of the heating, below the 10 K of steady heating at 20 kW
    assert derivation.numbers.peak.time == pytest.approx(40.0, rel=1e-9)
    assert 0 < derivation.numbers.peak.value < 10
    # the sheet prints the throwaway model's assumptions
    sheet = render.render_markdown(derivation)
    assert "one lumped heat capacity, uniform temperature" in sheet
    # the independent checks know neither: refused loudly, never passed
    _refused_loudly(case, THERMAL)


def test_a_throwaway_shape_alone_is_refused_by_the_checks(throwaways):
    _refused_loudly(_case(BASE_SYSTEM, shapes.get(STAIRCASE).example), STAIRCASE)


def test_a_throwaway_model_alone_is_refused_by_the_checks(throwaways):
    system = dict(models.get(THERMAL).example)
    _refused_loudly(_case(system, {"shape": "rectangle", "amplitude": "1 kW",
                                   "duration": "10 s"}, until="60 s"), THERMAL)


def test_a_registered_name_cannot_be_registered_again_nor_a_built_in_removed():
    with pytest.raises(ValueError, match="registered already"):
        models.register(models.get("ode"))
    with pytest.raises(ValueError, match="registered already"):
        shapes.register(shapes.get("step"))
    with pytest.raises(ValueError, match="built in"):
        models.unregister("ode")
    with pytest.raises(ValueError, match="built in"):
        shapes.unregister("step")


def test_reading_a_case_loads_no_engine_module():
    """The registries are read by case reading, which the independent checks import: the
    shapes import the engine only inside their rewrites."""
    import subprocess
    import sys
    from pathlib import Path
    engine = ("loads", "basis", "laplace", "response", "systems", "results")
    code = ("import sys, closedform.case, closedform.models, closedform.shapes\n"
            f"print([m for m in {engine!r} if 'closedform.' + m in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=Path(__file__).resolve().parents[1], check=True).stdout
    assert out.strip() == "[]"

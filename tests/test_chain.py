"""Several masses (issue 17): modes, modal responses, independent checks, input errors, claims.

Reference values are named beside each check: textbook closed forms (derived again in the
comment, so a reader can follow them without the book), scipy.linalg.eigh as a reference
library for frequencies and shapes, and the theorems the checks rest on.
"""

from __future__ import annotations

import json
import os
from dataclasses import replace

import mpmath
import numpy
import pytest
import scipy.linalg
import sympy

import closedform
from closedform.chain import natural_modes
from closedform.checks.chain import chain_checks
from closedform.cli import main


def chain_case(**system):
    data = {"title": "t", "system": {"model": "chain", **system},
            "load": [{"mass": 2, "shape": "rectangle", "at": "10 ms", "duration": "5 ms",
                      "amplitude": "10 kN"}],
            "report": {"until": "200 ms", "watch": 2}}
    return closedform.load_case(data)


def modes_of(case):
    _polynomial, _factored, roots = natural_modes(case.chain)
    return roots


# --- frequencies and shapes --------------------------------------------------------------------

def test_two_storey_shear_frame_frequencies_and_shapes_exact():
    """Chopra, Dynamics of Structures, ch. 10, two-storey shear frame with m1 = 2m, m2 = m,
    k1 = 2k, k2 = k (values from memory): ω1² = k/(2m), ω2² = 2k/m, φ1 = (1/2, 1),
    φ2 = (−1, 1). Check of the closed form: det(K − λM) = 2m²λ² − 5kmλ + 2k² = 0 gives
    λ = (5 ± 3)k/(4m). Here m = 1 kg, k = 200 N/m: ω = 10 and 20 rad/s, exactly."""
    case = chain_case(masses=["2 kg", "1 kg"], stiffnesses=["400 N/m", "200 N/m"])
    roots = modes_of(case)
    assert [r[0] for r in roots] == [100, 400]
    assert all(r[1] for r in roots)                         # exact: the polynomial factors
    assert roots[0][2] == (sympy.Rational(1, 2), 1)
    assert roots[1][2] == (1, -1)                           # largest entry +1: (−1, 1) scaled


def test_equal_masses_and_springs_give_the_golden_ratio_frequencies():
    """Two equal masses, two equal springs: ω² = (3 ∓ √5)/2 · k/m (Thomson, Theory of
    Vibration with Applications, ch. 5, two-degree-of-freedom systems; from memory).
    det(K − λM) = (2k − mλ)(k − mλ) − k² = m²λ² − 3kmλ + k²; the quadratic does not factor
    over the rationals, so the roots come at 30 digits."""
    case = chain_case(masses=["1 kg", "1 kg"], stiffnesses=["1 N/m", "1 N/m"])
    roots = modes_of(case)
    assert not any(r[1] for r in roots)
    with mpmath.workdps(40):
        expected = [(3 - mpmath.sqrt(5)) / 2, (3 + mpmath.sqrt(5)) / 2]
        for (value, _exact, _shape), reference in zip(roots, expected):
            assert abs(mpmath.mpf(str(value)) - reference) < mpmath.mpf("1e-28")


def test_four_mass_chain_matches_scipy_eigh():
    """Reference library: scipy.linalg.eigh(K, M) (LAPACK generalised symmetric
    eigenproblem) for frequencies and mass-normalised shapes; relative 1e-10."""
    masses = [1200, 300, 75, 410]
    stiff = [4.0e6, 0.5e6, 1.3e6, 2.2e6]
    case = chain_case(masses=[f"{m} kg" for m in masses],
                      stiffnesses=[f"{k} N/m" for k in stiff])
    roots = modes_of(case)
    n = len(masses)
    k = numpy.zeros((n, n))
    for i in range(n):
        k[i, i] += stiff[i]
        if i:
            k[i - 1, i - 1] += stiff[i]
            k[i - 1, i] -= stiff[i]
            k[i, i - 1] -= stiff[i]
    values, vectors = scipy.linalg.eigh(k, numpy.diag(masses))
    for (value, _exact, shape), reference, vector in zip(roots, values, vectors.T):
        assert float(value) == pytest.approx(reference, rel=1e-10)
        ours = numpy.array([float(v) for v in shape])
        ref = vector / vector[numpy.argmax(numpy.abs(vector))]
        assert numpy.allclose(ours, ref, rtol=1e-9, atol=1e-12)


def test_effective_modal_masses_sum_to_the_total_mass():
    """Σ_r (φ_rᵀ M 1)² / (φ_rᵀ M φ_r) = total mass (Chopra, Dynamics of Structures, ch. 13,
    modal participating masses), here exactly for a three-mass chain whose frequencies come
    at 30 digits."""
    case = closedform.load_case({
        "title": "t", "system": {"model": "chain", "masses": ["3 kg", "2 kg", "1 kg"],
                                 "stiffnesses": ["500 N/m", "300 N/m", "200 N/m"],
                                 "damping_ratio": 0.05, "excitation": "support-acceleration"},
        "load": [{"shape": "half-sine", "duration": "40 ms", "amplitude": "2 m/s^2"}],
        "report": {"until": "1 s"}})
    derivation = closedform.derive(case)
    assert derivation.status == "verified", [c for c in derivation.checks if not c.passed]
    total = sum(float(m.effective_mass) for m in derivation.modes)
    assert total == pytest.approx(6.0, rel=1e-14)
    assert sum(float(m.participation * m.shape[-1]) for m in derivation.modes) \
        == pytest.approx(1.0, rel=1e-14)     # Σ Γ_r φ_r = 1 (the influence vector), top mass


# --- the tuned absorber -------------------------------------------------------------------------

def test_tuned_undamped_absorber_keeps_the_primary_mass_still():
    """Den Hartog, Mechanical Vibrations, ch. 3 (the undamped dynamic vibration absorber):
    with the absorber tuned to the forcing frequency, √(k2/m2) = Ω, the primary mass does
    not move in the steady state, and the absorber moves as x2 = −(F0/k2) sin Ωt. Started on
    that steady state (x2′(0) = −F0·Ω/k2), the exact response keeps x1 ≡ 0."""
    case = closedform.load_case({
        "title": "absorber", "system": {"model": "chain", "masses": ["10 kg", "1 kg"],
                                        "stiffnesses": ["10000 N/m", "400 N/m"]},
        "initial": {"velocities": ["0 m/s", "-0.5 m/s"]},
        "load": [{"mass": 1, "shape": "formula", "expr": "10*sin(20*tau)", "duration": "1 s"}],
        "report": {"until": "1 s"}})
    derivation = closedform.derive(case)
    assert derivation.status == "verified"
    x1, x2 = derivation.masses
    assert abs(x1.peak.value) < 1e-30 * abs(x2.peak.value)
    assert abs(x2.peak.value) == pytest.approx(10 / 400, rel=1e-12)     # F0/k2


# --- the responses and their checks ---------------------------------------------------------------

def test_modal_response_is_verified_and_reports_every_mass_and_spring():
    case = chain_case(masses=["1200 kg", "300 kg"], stiffnesses=["4 MN/m", "0.5 MN/m"],
                      damping_ratio=0.02)
    derivation = closedform.derive(case)
    assert derivation.status == "verified"
    names = [c.name for c in derivation.checks]
    assert "independent integration of the full system" in names
    assert any(n.startswith("matrix equation residual") for n in names)
    result = derivation.to_dict()
    assert [r["name"] for r in result["responses"]] == ["x1", "x2", "e1", "e2", "R"]
    assert result["peak"] == {"value": result["peak_mass_2"]["value"],
                              "time": result["peak_mass_2"]["time"]}
    assert result["peak_spring_force_1"]["value"] == pytest.approx(
        4e6 * result["peak_stretch_1"]["value"], rel=1e-12)
    assert len(result["modes"]) == 2 and result["modes"][0]["damping_ratio"] == 0.02
    json.dumps(result, allow_nan=False)
    # static: K⁻¹f with the 10 kN on mass 2: x2 = F/k1 + F/k2 (springs in series)
    assert result["static"] == pytest.approx(10e3 / 4e6 + 10e3 / 0.5e6, rel=1e-12)


def test_a_wrong_response_fails_its_checks():
    """The checks can fail: a response scaled by 1.001 breaks the matrix equation."""
    case = chain_case(masses=["1200 kg", "300 kg"], stiffnesses=["4 MN/m", "0.5 MN/m"])
    derivation = closedform.derive(case)
    wrong = list(derivation.responses)
    x2 = wrong[1]
    wrong[1] = replace(x2, pieces=tuple(replace(p, local=p.local.scaled(sympy.Rational(1001, 1000)),
                                                numeric=None) for p in x2.pieces))
    checks = chain_checks(replace(derivation, responses=tuple(wrong)))
    failed = {c.name for c in checks if not c.passed}
    assert "independent integration of the full system" in failed
    assert any(name.startswith("matrix equation residual") for name in failed)


def test_non_classical_damping_takes_the_state_space_route():
    """A damper only between the masses is not classical (C M⁻¹K ≠ K M⁻¹C); the response
    comes from det(Ms² + Cs + K) and must still pass the independent checks; its poles
    are the roots of that polynomial (compared with numpy.roots)."""
    case = closedform.load_case({
        "title": "t", "system": {"model": "chain", "masses": ["2 kg", "1 kg"],
                                 "stiffnesses": ["400 N/m", "200 N/m"],
                                 "dampers": ["0 N*s/m", "3 N*s/m"]},
        "initial": {"velocities": ["0 m/s", "0.1 m/s"]},
        "load": [{"mass": 1, "shape": "step", "at": "0.1 s", "amplitude": "10 N"}],
        "report": {"until": "2 s"}})
    derivation = closedform.derive(case)
    assert derivation.route == "state-space"
    assert derivation.status == "verified"
    # det(Ms² + Cs + K) = (2s² + 3s + 600)(s² + 3s + 200) − (3s + 200)²
    roots = numpy.roots(numpy.polysub(numpy.polymul([2, 3, 600], [1, 3, 200]),
                                      numpy.polymul([3, 200], [3, 200])))
    poles = derivation.to_dict()["poles"]
    ours = sorted((complex(p["rate"], p["frequency"]) for p in poles), key=abs)
    ref = sorted((r for r in roots if r.imag > 0), key=abs)
    assert numpy.allclose(ours, ref, rtol=1e-10)
    # static x1 = F/k1 for a step on mass 1 (k2 carries nothing at rest)
    assert derivation.numbers.static == pytest.approx(10 / 400, rel=1e-12)


def test_support_acceleration_with_initial_values_and_an_impulse():
    case = closedform.load_case({
        "title": "t", "system": {"model": "matrix", "mass_matrix": [["2 kg", 0], [0, "1 kg"]],
                                 "stiffness_matrix": [["600 N/m", "-200 N/m"],
                                                      ["-200 N/m", "200 N/m"]],
                                 "rayleigh": {"mass": "0.5 1/s", "stiffness": "0.001 s"},
                                 "excitation": "support-acceleration"},
        "initial": {"displacements": ["1 mm", "0 mm"]},
        "load": [{"shape": "half-sine", "duration": "50 ms", "amplitude": "3 m/s^2"},
                 {"shape": "impulse", "at": "0.3 s", "impulse": "0.2 m/s"}],
        "report": {"until": "1 s", "watch": 2}})
    derivation = closedform.derive(case)
    assert derivation.status == "verified"
    assert derivation.exact
    # Rayleigh: ζ_r = a0/(2ω_r) + a1·ω_r/2 with ω = 10, 20 rad/s
    assert [m.damping_ratio for m in derivation.modes] == [sympy.Rational(3, 100),
                                                          sympy.Rational(9, 400)]
    assert any(c.name == "jump conditions at t = 0.3" and c.passed for c in derivation.checks)


# --- input errors ---------------------------------------------------------------------------------

BASE = """\
title = "Two masses"
[system]
model = "chain"
masses = ["1200 kg", "300 kg"]
stiffnesses = ["4 MN/m", "0.5 MN/m"]
damping_ratio = 0.02
[[load]]
mass = 2
shape = "rectangle"
duration = "5 ms"
amplitude = "10 kN"
[report]
until = "200 ms"
watch = 2
"""
MATRIX = """\
title = "M"
[system]
model = "matrix"
mass_matrix = [["2 kg", 0], [0, "1 kg"]]
stiffness_matrix = [["600 N/m", "-200 N/m"], ["-200 N/m", "200 N/m"]]
[[load]]
mass = 1
shape = "step"
amplitude = "1 N"
"""


@pytest.mark.parametrize(("text", "expected"), [
    (BASE.replace('["4 MN/m", "0.5 MN/m"]', '["4 MN/m"]'),
     "case.toml:5: system.stiffnesses: expected 2 values, one per mass (as many as "
     "system.masses), got 1"),
    (BASE.replace("mass = 2", "mass = 3"),
     "case.toml:8: load[1].mass: no such mass (expected a mass number from 1 to 2, got 3)"),
    (BASE.replace("mass = 2\n", ""),
     "case.toml:7: load[1]: missing mass (the mass number, 1 to 2, the force acts on)"),
    (BASE.replace("watch = 2", "watch = 0"),
     "case.toml:14: report.watch: no such mass (expected a mass number from 1 to 2, got 0)"),
    (MATRIX.replace('["-200 N/m", "200 N/m"]', '["-250 N/m", "200 N/m"]'),
     "case.toml:5: system.stiffness_matrix: not symmetric (entry [0][1] is -200, entry [1][0] "
     "is -250)"),
    (MATRIX.replace('"600 N/m"', '"100 N/m"'),
     "case.toml:5: system.stiffness_matrix: not positive definite (its leading 2×2 minor is "
     "-20000, not positive; a free-floating system has no static response here)"),
    (MATRIX.replace('[0, "1 kg"]', '[0, "-1 kg"]'),
     "case.toml:4: system.mass_matrix: not positive definite (its leading 2×2 minor is -2, "
     "not positive)"),
    (MATRIX.replace('[["2 kg", 0]', '[["2 kg", 0, 0]'),
     "case.toml:4: system.mass_matrix: expected 2 rows of 2 values (a square matrix), got 2 "
     "rows of 3, 2"),
], ids=["list lengths", "no such mass", "mass missing", "watch", "not symmetric",
        "stiffness not definite", "mass not definite", "not square"])
def test_bad_input_is_one_located_line(tmp_path, capsys, text, expected):
    path = tmp_path / "case.toml"
    path.write_text(text, encoding="utf-8")
    code = main(["derive", str(path), "--json", "-"])
    captured = capsys.readouterr()
    assert code == 2
    assert captured.out == ""
    assert captured.err.splitlines() == [f"{tmp_path}{os.sep}{expected}"]


# --- claims ---------------------------------------------------------------------------------------

def test_every_mass_is_claimable_by_number(tmp_path, capsys):
    """``peak_mass_2`` (and ``peak_mass_2_time``, ``peak_spring_force_1`` …) are claim names;
    a claim within tolerance is confirmed, one outside it refuted (exit 1)."""
    derivation = closedform.derive(closedform.load_case_text(BASE))
    peak = abs(derivation.to_dict()["peak_mass_1"]["value"])
    force = abs(derivation.to_dict()["peak_spring_force_2"]["value"])
    path = tmp_path / "case.toml"
    path.write_text(BASE + f'[claims]\npeak_mass_1 = "{peak * 1000:.6g} mm"\n'
                    f'peak_spring_force_2 = "{force * 1.1:.6g} N"\n', encoding="utf-8")
    code = main(["check", str(path)])
    out = capsys.readouterr().out
    assert code == 1
    assert out.startswith("peak_mass_1: claimed") and "confirmed" in out.splitlines()[0]
    assert "peak_spring_force_2" in out and "REFUTED" in out
    assert out.splitlines()[-1] == "1 confirmed, 1 refuted"


def test_non_classical_damping_with_real_poles_matches_solve_ivp():
    """A large damper between two masses gives two real (over-damped) state-space poles
    besides one pair; the closed form is compared with scipy.integrate.solve_ivp (reference
    library, DOP853, rtol 1e-12) of M u″ + C u′ + K u = −M·1·a_g, started from u2(0) = 10 mm."""
    from scipy.integrate import solve_ivp

    case = closedform.load_case({
        "title": "t", "system": {"model": "chain", "masses": ["1 kg", "1 kg"],
                                 "stiffnesses": ["100 N/m", "100 N/m"],
                                 "dampers": ["0 N*s/m", "60 N*s/m"],
                                 "excitation": "support-acceleration"},
        "initial": {"displacements": ["0 m", "0.01 m"]},
        "load": [{"shape": "ramp", "rate": "20 m/s^3", "duration": "0.1 s"}],
        "report": {"until": "3 s", "watch": 2}})
    derivation = closedform.derive(case)
    assert derivation.route == "state-space" and derivation.status == "verified"
    assert sum(1 for p in derivation.to_dict()["poles"] if p["frequency"] == 0) == 2

    def rate(t, y):
        a_g = 20 * min(t, 0.1)
        x1, x2, v1, v2 = y
        return [v1, v2, -(200 * x1 - 100 * x2 - 60 * (v2 - v1)) - a_g,
                -(100 * (x2 - x1) + 60 * (v2 - v1)) - a_g]

    times = [0.05, 0.5, 1.0, 2.5]
    reference = solve_ivp(rate, (0, 3), [0, 0.01, 0, 0], method="DOP853", rtol=1e-12,
                          atol=1e-15, t_eval=times, max_step=0.01)
    x2 = derivation.masses[1]
    for time, expected in zip(times, reference.y[1]):
        piece = max((p for p in x2.pieces if float(p.start) <= time), key=lambda p: float(p.start))
        value = float(piece.local.numeric()(time - float(piece.start)))
        assert value == pytest.approx(expected, rel=1e-8, abs=1e-12)


def test_damping_ratio_per_mode():
    case = closedform.load_case({
        "title": "t", "system": {"model": "chain", "masses": ["2 kg", "1 kg"],
                                 "stiffnesses": ["400 N/m", "200 N/m"],
                                 "damping_ratio": [0.01, 0.05]},
        "load": [{"mass": 2, "shape": "impulse", "impulse": "1 N*s"}],
        "report": {"until": "1 s"}})
    derivation = closedform.derive(case)
    assert derivation.status == "verified"
    assert [m.damping_ratio for m in derivation.modes] == [sympy.Rational(1, 100),
                                                          sympy.Rational(1, 20)]
    assert derivation.exact


@pytest.mark.parametrize(("text", "expected"), [
    (BASE.replace('masses = ["1200 kg", "300 kg"]', 'masses = ["1 kg", "1 kg", "1 kg", "1 kg", '
                  '"1 kg", "1 kg", "1 kg"]'),
     "case.toml:4: system.masses: too many masses (at most 6, got 7)"),
    (BASE.replace("damping_ratio = 0.02", "damping_ratio = [0.02]"),
     "case.toml:6: system.damping_ratio: expected one number for every mode or a list of 2, "
     "one per mode, got 1"),
    (BASE.replace("damping_ratio = 0.02", 'damping_ratio = 0.02\ndampers = ["1 kN*s/m", '
                  '"1 kN*s/m"]'),
     "case.toml:6: system.damping_ratio: give one of dampers and damping_ratio, not both"),
    ('title = "x"\n[symbols]\nm = "kg"\n' + BASE.split("\n", 1)[1],
     "case.toml:2: symbols: several masses need numbers; [symbols] are not supported for the "
     "chain and matrix models"),
    (BASE.replace('excitation', 'x').replace("damping_ratio = 0.02",
                                             'damping_ratio = 0.02\nexcitation = "support"'),
     "case.toml:7: system.excitation: expected one of force, support-acceleration, got 'support'"),
], ids=["seven masses", "ratio list", "two dampings", "symbols", "excitation"])
def test_more_bad_input(tmp_path, capsys, text, expected):
    test_bad_input_is_one_located_line(tmp_path, capsys, text, expected)


def test_python_evaluate_every_response():
    """``evaluate`` reads the pieces: the stretch of spring
    2 is x2 − x1, and its derivative is the finite-difference slope (central, h = 1e-7 s)."""
    derivation = closedform.derive(closedform.load_case_text(BASE))
    assert derivation.response_names() == ("x1", "x2", "e1", "e2", "R")
    times = numpy.array([0.002, 0.03, 0.11])
    x1, x2 = derivation.evaluate(times, response="x1"), derivation.evaluate(times)
    assert numpy.allclose(derivation.evaluate(times, response="e2"), x2 - x1, rtol=1e-12,
                          atol=1e-18)
    h = 1e-7
    slope = (derivation.evaluate(times + h) - derivation.evaluate(times - h)) / (2 * h)
    assert numpy.allclose(derivation.evaluate(times, 1), slope, rtol=1e-6)


def test_a_classical_damping_matrix_takes_the_modal_route_and_agrees_with_rayleigh():
    """C = 0.5·M + 0.001·K given as a matrix satisfies C M⁻¹K = K M⁻¹C (Caughey–O'Kelly),
    so it is solved mode by mode, and gives the same response as rayleigh = {…}."""
    common = {"model": "matrix", "mass_matrix": [["2 kg", 0], [0, "1 kg"]],
              "stiffness_matrix": [["600 N/m", "-200 N/m"], ["-200 N/m", "200 N/m"]]}
    load = [{"mass": 2, "shape": "rectangle", "duration": "0.1 s", "amplitude": "5 N"}]
    given = closedform.derive(closedform.load_case({
        "title": "t", "system": {**common, "damping_matrix": [["1.6 N*s/m", "-0.2 N*s/m"],
                                                             ["-0.2 N*s/m", "0.7 N*s/m"]]},
        "load": load, "report": {"until": "1 s"}}))
    rayleigh = closedform.derive(closedform.load_case({
        "title": "t", "system": {**common, "rayleigh": {"mass": "0.5 1/s",
                                                        "stiffness": "0.001 s"}},
        "load": load, "report": {"until": "1 s"}}))
    assert given.route == "modal" and given.status == "verified"
    times = numpy.linspace(0, 1, 41)
    for name in ("x1", "x2", "e2", "R"):
        assert numpy.allclose(given.evaluate(times, response=name),
                              rayleigh.evaluate(times, response=name), rtol=1e-12, atol=1e-15)
    # springs read from the stiffness matrix: 400 N/m to the support, 200 N/m between
    assert [(s.first, s.second, s.stiffness) for s in given.chain.springs] == [(0, 1, 400),
                                                                               (1, 2, 200)]

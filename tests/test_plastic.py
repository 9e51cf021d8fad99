"""Yielding springs (issue 15): published relations, a reference integrator, bad input.

Sources beside each check:

* impulse on an undamped elastic-plastic oscillator: the energy balance
  I²/(2m) = R_m·x_y/2 + R_m·(x_m − x_y) gives μ = ((I·ω/R_m)² + 1)/2 — exact (work-energy
  theorem; the same relation is in Biggs, *Introduction to Structural Dynamics* (1964),
  ch. 2, for impulsive loading of an elasto-plastic system — section from memory);
* a step load F₁ below the strength R_m: energy at the largest displacement,
  F₁·x_m = R_m·x_y/2 + R_m·(x_m − x_y), gives μ = 1/(2·(1 − F₁/R_m)) for F₁/R_m ≥ 1/2 —
  exact (Biggs 1964, ch. 2, from memory);
* bilinear spring under an impulse: the same balance with the hardening line,
  I²/(2m) = R_y·x_y/2 + (R_y + R(x_m))·(x_m − x_y)/2 — exact (work-energy theorem);
* damped cases, pulse trains and support motion: scipy.integrate.solve_ivp (DOP853, rtol
  1e-12) with its own event functions for the yield/unload switching — a reference library.

Chart readings for the triangular pulse with zero rise (a published worked example's reading
of the elasto-plastic response chart, NAVFAC DM-2.08 with NAVFAC P-397) and the exact
stage-by-stage solution of that pulse are in test_plastic_charts.py.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import replace
from pathlib import Path

import numpy
import pytest
from scipy.integrate import solve_ivp

import closedform
from closedform.cli import main


def case(system: dict, loads: list, until: str = "2 s", resistance: dict | None = None,
         **extra) -> closedform.Case:
    resistance = resistance or {"kind": "elastic-plastic", "yield": "10 N"}
    return closedform.load_case({"title": "yielding spring", "system": {**system,
                                 "resistance": resistance}, "load": loads,
                                 "report": {"until": until}, **extra})


OSCILLATOR = {"model": "spring-mass-damper", "mass": "1 kg", "stiffness": "100 N/m"}   # ω = 10


# ----------------------------------------------------------------------------- published


@pytest.mark.parametrize("impulse", [1.5, 2.0, 3.5])
def test_impulse_limit_energy_balance(impulse):
    """μ = ((I·ω/R_m)² + 1)/2 (energy balance, exact; Biggs 1964 ch. 2, from memory)."""
    d = closedform.derive(case(OSCILLATOR, [{"shape": "impulse", "impulse": f"{impulse} N*s"}]))
    assert d.status == "verified", [c for c in d.checks if not c.passed]
    expected = ((impulse * 10 / 10) ** 2 + 1) / 2
    result = d.to_dict()
    assert result["ductility"]["value"] == pytest.approx(expected, rel=1e-12)
    x_y = 0.1
    assert result["permanent_set"]["value"] == pytest.approx((expected - 1) * x_y, rel=1e-12)
    assert result["plastic_work"]["value"] == pytest.approx(10 * (expected - 1) * x_y, rel=1e-12)
    assert [e["kind"] for e in result["events"]] == ["yield", "unload"]
    # the yield is at x = x_y on the free vibration x = (I/mω) sin ωt
    assert result["events"][0]["time"] == pytest.approx(math.asin(x_y * 10 / impulse) / 10,
                                                        rel=1e-12)


@pytest.mark.parametrize("ratio", [0.55, 0.7, 0.9])
def test_step_below_strength(ratio):
    """μ = 1/(2(1 − F₁/R_m)) (energy balance, exact; Biggs 1964 ch. 2, from memory)."""
    d = closedform.derive(case(OSCILLATOR, [{"shape": "step", "amplitude": f"{10 * ratio} N"}],
                               until="3 s"))     # the largest displacement before the end
    assert d.status == "verified"
    assert d.to_dict()["ductility"]["value"] == pytest.approx(1 / (2 * (1 - ratio)), rel=1e-12)


def test_step_below_half_strength_stays_elastic():
    d = closedform.derive(case(OSCILLATOR, [{"shape": "step", "amplitude": "4 N"}], until="1 s"))
    result = d.to_dict()
    assert result["events"] == [] and result["plastic_work"]["value"] == 0
    assert result["ductility"]["value"] == pytest.approx(2 * 4 / 10, rel=1e-12)   # DLF 2


def test_bilinear_impulse_energy_balance():
    """I²/(2m) = R_y x_y/2 + (R_y + R_m)(x_m − x_y)/2, R_m = R_y + k₂(x_m − x_y)."""
    k2 = 20.0
    d = closedform.derive(case(OSCILLATOR, [{"shape": "impulse", "impulse": "2 N*s"}],
                               resistance={"kind": "bilinear", "yield": "10 N",
                                           "post_yield_stiffness": f"{k2} N/m"}))
    assert d.status == "verified"
    # (R_y + k₂·e/2)·e = I²/2m − R_y x_y/2 with e = x_m − x_y
    excess = (-10 + math.sqrt(100 + 2 * k2 * (2.0 - 0.5))) / k2
    assert d.to_dict()["ductility"]["value"] == pytest.approx((0.1 + excess) / 0.1, rel=1e-12)


def test_yield_displacement_alternative():
    d = closedform.derive(case(OSCILLATOR, [{"shape": "impulse", "impulse": "2 N*s"}],
                               resistance={"kind": "elastic-plastic",
                                           "yield_displacement": "100 mm"}))
    assert d.to_dict()["ductility"]["value"] == pytest.approx(2.5, rel=1e-12)


# ----------------------------------------------------------------------------- scipy reference


def reference(m, c, k, k2, ry, force, until, breaks, initial=(0.0, 0.0)):
    """Largest |x| and the event kinds by scipy.solve_ivp with switching events."""
    intercept = ry * (1 - k2 / k)
    t, x, v = 0.0, *initial
    branch, direction, offset, last = "elastic", 0, 0.0, 0
    kinds, largest = [], abs(x)
    stops = sorted({b for b in breaks if 0 < b < until} | {until})
    for stop in stops:
        while t < stop - 1e-15:
            def rhs(time, y, branch=branch, direction=direction, offset=offset):
                spring = (k * (y[0] - offset) if branch == "elastic"
                          else k2 * y[0] + direction * intercept)
                return [y[1], (force(time) - c * y[1] - spring) / m]
            events = []
            if branch == "elastic":
                for d in (1, -1):
                    level = (k * offset + d * intercept) / (k - k2)
                    def event(time, y, level=level):
                        return y[0] - level
                    event.terminal, event.direction = True, d
                    events.append(event)
            else:
                def event(time, y):
                    return y[1]
                event.terminal, event.direction = True, -direction
                events.append(event)
            solution = solve_ivp(rhs, (t, stop), [x, v], method="DOP853", rtol=1e-12,
                                 atol=1e-15, events=events, dense_output=True)
            grid = numpy.linspace(t, solution.t[-1], 400)
            largest = max(largest, float(numpy.max(numpy.abs(solution.sol(grid)[0]))))
            t, (x, v) = solution.t[-1], solution.y[:, -1]
            if solution.status != 1:
                break
            if branch == "elastic":
                d = 1 if solution.t_events[0].size else -1
                kinds.append("reverse-yield" if last and d != last else "yield")
                branch, direction, last = "plastic", d, d
            else:
                kinds.append("unload")
                offset = x - (k2 * x + direction * intercept) / k
                branch, direction = "elastic", 0
    return largest, kinds


def test_damped_triangle_against_scipy():
    zeta, f1, td = 0.05, 15.0, 0.3
    d = closedform.derive(case({**OSCILLATOR, "damping_ratio": zeta},
                               [{"shape": "triangle", "duration": f"{td} s",
                                 "amplitude": f"{f1} N", "peak_at": 0}]))
    assert d.status == "verified"
    largest, kinds = reference(1, 2 * zeta * 10, 100, 0, 10,
                               lambda t: f1 * (1 - t / td) if t < td else 0.0, 2.0, [td])
    result = d.to_dict()
    assert result["ductility"]["value"] == pytest.approx(largest / 0.1, rel=1e-7)
    assert [e["kind"] for e in result["events"]] == kinds


def test_pulse_train_cycles_against_scipy():
    pulses = [0.8 * i for i in range(4)]
    d = closedform.derive(case(OSCILLATOR, [{"shape": "rectangle", "duration": "0.2 s",
                                             "amplitude": "12 N",
                                             "repeat": {"count": 4, "every": "0.8 s"}}],
                               until="3.5 s"))
    assert d.status == "verified", [c for c in d.checks if not c.passed]

    def force(t):
        return 12.0 if any(a <= t < a + 0.2 for a in pulses) else 0.0
    largest, kinds = reference(1, 0, 100, 0, 10, force, 3.5,
                               pulses + [a + 0.2 for a in pulses])
    result = d.to_dict()
    assert [e["kind"] for e in result["events"]] == kinds
    assert len(kinds) >= 6            # repeated yielding: the set grows with every pulse
    assert result["ductility"]["value"] == pytest.approx(largest / 0.1, rel=1e-7)
    phases = {p["phase"] for p in result["pieces"]}
    assert phases == {"elastic", "plastic"}


def test_bilinear_reverse_yield_against_scipy():
    d = closedform.derive(case(OSCILLATOR, [{"shape": "rectangle", "duration": "0.3 s",
                                             "amplitude": "15 N"}],
                               resistance={"kind": "bilinear", "yield": "10 N",
                                           "post_yield_stiffness": "20 N/m"}))
    assert d.status == "verified"
    largest, kinds = reference(1, 0, 100, 20, 10, lambda t: 15.0 if t < 0.3 else 0.0, 2.0,
                               [0.3])
    result = d.to_dict()
    assert "reverse-yield" in kinds
    assert [e["kind"] for e in result["events"]] == kinds
    assert result["ductility"]["value"] == pytest.approx(largest / 0.1, rel=1e-7)


def test_base_excitation_is_the_force_case_with_minus_m_ag():
    """m u'' + c u' + R(u) = −m a_g: the same as a force −m·a_g on a fixed base."""
    pulse = {"shape": "half-sine", "duration": "0.3 s"}
    moving = closedform.derive(case({"model": "base-excitation", "mass": "2 kg",
                                     "stiffness": "200 N/m", "damping_ratio": 0.02},
                                    [{**pulse, "amplitude": "7.5 m/s^2"}], until="1.5 s",
                                    resistance={"kind": "elastic-plastic", "yield": "20 N"}))
    fixed = closedform.derive(case({"model": "spring-mass-damper", "mass": "2 kg",
                                    "stiffness": "200 N/m", "damping_ratio": 0.02},
                                   [{**pulse, "amplitude": "-15 N"}], until="1.5 s",
                                   resistance={"kind": "elastic-plastic", "yield": "20 N"}))
    assert moving.status == fixed.status == "verified"
    a, b = moving.to_dict(), fixed.to_dict()
    assert a["ductility"]["value"] == pytest.approx(b["ductility"]["value"], rel=1e-20)
    assert a["ductility"]["value"] > 1


# ----------------------------------------------------------------------------- checks are loud


def test_wrong_plastic_work_fails_the_energy_balance():
    d = closedform.derive(case(OSCILLATOR, [{"shape": "impulse", "impulse": "2 N*s"}]))
    from closedform.checks.plastic import plastic_checks
    wrong = replace(d, plastic=replace(d.plastic, plastic_work=d.plastic.plastic_work * 1.01))
    failed = [c.name for c in plastic_checks(wrong) if not c.passed]
    assert failed == ["energy balance with plastic work"]


def test_wrong_yield_event_fails_the_integration(monkeypatch):
    import closedform.plastic as plastic
    original = plastic._bracketed_root      # an event located slightly late
    monkeypatch.setattr(plastic, "_bracketed_root",
                        lambda g, a, b: original(g, a, b) * (1 + 1e-6))
    d = closedform.derive(case(OSCILLATOR, [{"shape": "impulse", "impulse": "2 N*s"}]))
    assert d.status == "failed"
    failed = {c.name for c in d.checks if not c.passed}
    assert "independent integration of the yielding equation" in failed


# ----------------------------------------------------------------------------- JSON and claims


def test_json_fields_and_claims(tmp_path, capsys):
    text = """\
title = "Impulse on a yielding post"
[system]
model = "spring-mass-damper"
mass = "1 kg"
stiffness = "100 N/m"
[system.resistance]
kind = "elastic-plastic"
yield = "10 N"
[[load]]
shape = "impulse"
impulse = "2 N*s"
[report]
until = "2 s"
[claims]
ductility = 2.5
permanent_set = "150 mm"
plastic_work = "1.5 J"
yield_displacement = "100 mm"
"""
    path = tmp_path / "post.toml"
    path.write_text(text, encoding="utf-8")
    assert main(["check", str(path), "--json", "-"]) == 0
    audit = json.loads(capsys.readouterr().out)
    assert {c["key"] for c in audit["claims"]} == {"ductility", "permanent_set",
                                                   "plastic_work", "yield_displacement"}
    assert all(c["verdict"] == "confirmed" for c in audit["claims"])
    path.write_text(text.replace("ductility = 2.5", "ductility = 2.4"), encoding="utf-8")
    assert main(["check", str(path), "--json", "-"]) == 1
    capsys.readouterr()


# ----------------------------------------------------------------------------- bad input

BASE = """\
title = "Yielding post"
[system]
model = "spring-mass-damper"
mass = "1 kg"
stiffness = "100 N/m"
[system.resistance]
kind = "elastic-plastic"
yield = "10 N"
[[load]]
shape = "impulse"
impulse = "2 N*s"
"""
#  6 [system.resistance]   7 kind   8 yield


@pytest.mark.parametrize(("old", "new", "expected"), [
    ('yield = "10 N"', 'yield = "0 N"',
     "case.toml:8: system.resistance.yield: must be positive (got 0 N)"),
    ('yield = "10 N"', 'yield = "-3 kN"',
     "case.toml:8: system.resistance.yield: must be positive (got -3000 N)"),
    ('yield = "10 N"', 'yield_displacement = "-1 mm"',
     "case.toml:8: system.resistance.yield_displacement: must be positive (got -0.001 m)"),
    ('kind = "elastic-plastic"', 'kind = "bilinear"\npost_yield_stiffness = "-5 N/m"',
     "case.toml:8: system.resistance.post_yield_stiffness: must not be negative (got -5 N/m)"),
    ('kind = "elastic-plastic"', 'kind = "bilinear"\npost_yield_stiffness = "0.1 kN/m"',
     "case.toml:8: system.resistance.post_yield_stiffness: must be below the stiffness "
     "100 N/m (got 100 N/m)"),
    ('kind = "elastic-plastic"', 'kind = "bilinear"',
     "case.toml:6: system.resistance.post_yield_stiffness: missing (a bilinear resistance "
     "needs the stiffness after yield)"),
    ('kind = "elastic-plastic"', 'kind = "plastic"',
     "case.toml:7: system.resistance.kind: expected one of: elastic-plastic, bilinear "
     "(got 'plastic')"),
    ('model = "spring-mass-damper"\nmass = "1 kg"\nstiffness = "100 N/m"',
     'model = "first-order"\ntime_constant = "1 s"',
     "case.toml:5: system.resistance: a resistance function needs a model with a spring "
     "(spring-mass-damper or base-excitation); the first-order model has none"),
    ('model = "spring-mass-damper"\nmass = "1 kg"\nstiffness = "100 N/m"',
     'model = "series-rlc"\ninductance = "1 H"\ncapacitance = "1 F"',
     "case.toml:6: system.resistance: a resistance function needs a model with a spring "
     "(spring-mass-damper or base-excitation); the series-rlc model has none"),
])
def test_bad_resistance_is_one_located_line(tmp_path, capsys, old, new, expected):
    assert old in BASE
    path = tmp_path / "case.toml"
    path.write_text(BASE.replace(old, new, 1), encoding="utf-8")
    code = main(["derive", str(path), "--json", "-"])
    captured = capsys.readouterr()
    assert code == 2
    assert captured.out == "" and "Traceback" not in captured.err
    assert captured.err.splitlines() == [f"{tmp_path}{os.sep}{expected}"]


def test_worked_case_derives_verified():
    path = Path(__file__).parent.parent / "worked_cases" / "blast-wall-yielding.toml"
    d = closedform.derive(closedform.load_case(path))
    assert d.status == "verified", [c for c in d.checks if not c.passed]
    assert d.to_dict()["ductility"]["value"] > 1


def test_sheet_shows_resistance_phases_and_caution():
    from closedform.render import figure_files, render_markdown
    d = closedform.derive(case(OSCILLATOR, [{"shape": "impulse", "impulse": "2 N*s"}]))
    text = render_markdown(d, stem="post")
    assert r"m\,\ddot{x} + c\,\dot{x} + R(x) = F(t)" in text
    assert "| 2 | plastic, upper yield line |" in text
    assert "| 2 | unload |" in text
    assert "come from the applicable codes" in text
    assert "elastic-perfectly-plastic spring" in text and "linear elastic spring" not in text
    assert "post-resistance.svg" in text
    assert "post-resistance.svg" in figure_files(d, "post", "svg")


# ----------------------------------------------------------------------------- spectrum


def test_ductility_spectrum_long_rectangle_is_the_step_relation(capsys):
    """A rectangle much longer than T_n acts as a step while x rises to its maximum:
    μ = 1/(2(1 − F₁/R_m)) (energy balance, exact; Biggs 1964 ch. 2, from memory)."""
    code = main(["spectrum", "--shape", "rectangle", "--strength-ratios", "1.25,1.5",
                 "--ratios", "5", "--json", "-"])
    result = json.loads(capsys.readouterr().out)
    assert code == 0 and result["status"] == "verified" and result["kind"] == "ductility"
    mu = {p["strength_ratio"]: p["ductility"] for p in result["points"]}
    assert mu[1.25] == pytest.approx(1 / (2 * (1 - 1 / 1.25)), rel=1e-12)
    assert mu[1.5] == pytest.approx(1 / (2 * (1 - 1 / 1.5)), rel=1e-12)


def test_ductility_spectrum_csv_and_files(tmp_path, capsys):
    assert main(["spectrum", "--shape", "decay", "--strength-ratios", "1.1",
                 "--ratios", "0.5,1"]) == 0
    rows = [line for line in capsys.readouterr().out.splitlines() if not line.startswith("#")]
    assert rows[0] == "R_m/F_1 [1],t_d/T_n [1],mu [1],t_m/t_d [1],x_p/x_y [1],status"
    assert len(rows) == 3 and all(row.endswith(",verified") for row in rows[1:])
    mu = [float(row.split(",")[2]) for row in rows[1:]]
    assert 1 < mu[0] < mu[1]          # a longer pulse of the same peak drives further
    assert main(["spectrum", "--shape", "decay", "--strength-ratios", "1.1", "--ratios", "1",
                 "-o", str(tmp_path)]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "ductility-decay.csv", "ductility-decay.json", "ductility-decay.png",
        "ductility-decay.svg"]


@pytest.mark.parametrize(("value", "expected"), [
    ("1.25,-1", "--strength-ratios: strength ratios must be positive, got -1"),
    ("1.25,x", "--strength-ratios: 'x' is not a number (expected a positive R_m/F_1)"),
    ("", "--strength-ratios: expected comma-separated positive numbers, got ''"),
])
def test_bad_strength_ratios(capsys, value, expected):
    assert main(["spectrum", "--shape", "rectangle", "--strength-ratios", value,
                 "--ratios", "5"]) == 2
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err.splitlines() == [expected]


def test_python_use_of_a_yielding_case():
    d = closedform.derive(case(OSCILLATOR, [{"shape": "rectangle", "duration": "0.3 s",
                                             "amplitude": "15 N"}]))
    assert "1/3" not in [str(p.start) for p in d.pieces]
    assert any(str(p.start) == "3/10" for p in d.pieces)      # the load breakpoint stays exact
    assert d.evaluate([0.1, 0.5], response="load").tolist() == pytest.approx([15.0, 0.0], abs=1e-20)
    assert "spring_force" not in d.response_names()           # R(x) is per phase
    with pytest.raises(ValueError):
        d.evaluate([0.1], response="spring_force")


def test_console_and_appendix_summary_show_the_ductility(tmp_path, capsys):
    folder = tmp_path / "cases"
    folder.mkdir()
    (folder / "post.toml").write_text(BASE + '[report]\nuntil = "2 s"\n', encoding="utf-8")
    assert main(["derive", str(folder / "post.toml"), "-o", str(tmp_path / "sheet"),
                 "--format", "md"]) == 0
    assert capsys.readouterr().out.strip().endswith("peak 0.25 m at t = 0.225565 s; ductility 2.5")
    assert main(["appendix", str(folder), "-o", str(tmp_path / "out"), "--format", "md"]) == 0
    capsys.readouterr()
    text = (tmp_path / "out" / "appendix.md").read_text(encoding="utf-8")
    assert r"; ductility $\mu = 2.5$ |" in text


def test_claimed_formula_is_refused_for_a_yielding_spring(tmp_path, capsys):
    path = tmp_path / "case.toml"
    path.write_text(BASE + '[report]\nuntil = "2 s"\n[claims]\n'
                    'response = [{ from = "0 s", to = "10 ms", expr = "0" }]\n'
                    'at = [{ time = "0.5 s", value = "150 mm" }]\n', encoding="utf-8")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.splitlines()[0].endswith(
        "claims.response: a claimed formula cannot be audited for a yielding spring (its "
        "equation changes at every event); claim values instead: at = [...], ductility, "
        "peak, …")


@pytest.mark.parametrize(("ratio", "strength"), [(0.05, 0.1), (0.1, 0.25)])
def test_ductility_spectrum_short_decay_pulse_by_energy(ratio, strength):
    """A decaying pulse short enough that the spring is still elastic when it ends: the
    state at t_d from the elastic response x = F₁(1 − cos t) − F₁(t − sin t)/t_d (m = k = 1,
    Duhamel's integral), then the energy balance E = R_m·x_y/2 + R_m(x_m − x_y) gives
    μ = E/R_m² + 1/2 exactly."""
    import sympy

    from closedform.ductility_spectrum import ductility_point
    from closedform.shock import Pulse
    td = 2 * math.pi * ratio
    x = 1 - math.cos(td) - (td - math.sin(td)) / td
    v = math.sin(td) - (1 - math.cos(td)) / td
    assert abs(x) < strength                       # no yield during the pulse
    energy = (x**2 + v**2) / 2
    point = ductility_point(Pulse("decay"), sympy.S.Zero, sympy.nsimplify(strength),
                            sympy.nsimplify(ratio))
    assert point.status == "verified"
    assert point.ductility == pytest.approx(energy / strength**2 + 0.5, rel=1e-12)


def test_yielding_cases_in_worker_processes():
    """derive_many sends each Derivation back from its worker pickled."""
    text = BASE + '[report]\nuntil = "2 s"\n'
    results = closedform.derive_many([text, text], jobs=2, progress=False)
    assert [r.to_dict()["ductility"]["value"] for r in results] == pytest.approx([2.5, 2.5])


@pytest.mark.parametrize(("extra", "expected"), [
    ('[symbols]\nm0 = { unit = "kg", value = "1 kg" }\n',
     "case.toml:6: system.resistance: a resistance function needs numbers; the case declares "
     "symbols (events are found numerically from the closed forms)"),
    ('[initial]\ndisplacement = "0.2 m"\n',
     "case.toml:12: initial: the initial displacement 0.2 m is at or beyond the yield "
     "displacement 0.1 m (a yielding spring starts inside its elastic range)"),
])
def test_symbols_and_initial_beyond_yield_are_refused(tmp_path, capsys, extra, expected):
    path = tmp_path / "case.toml"
    path.write_text(BASE + extra, encoding="utf-8")
    assert main(["derive", str(path), "--json", "-"]) == 2
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err.splitlines() == [f"{tmp_path}{os.sep}{expected}"]


def test_impulse_unloading_a_yielding_spring():
    """An impulse against the motion while the spring yields unloads it at once; the state
    then follows from the jump (regression: the energy balance took the velocity before
    the impulse for the one after it when the two times differed in the last digit)."""
    d = closedform.derive(case(OSCILLATOR, [{"shape": "step", "amplitude": "12 N"},
                                            {"shape": "impulse", "at": "0.15 s",
                                             "impulse": "-1.5 N*s"}], until="1 s"))
    assert d.status == "verified", [c.detail for c in d.checks if not c.passed]
    events = d.to_dict()["events"]
    assert [e["kind"] for e in events] == ["yield", "unload", "yield"]
    assert events[1]["time"] == 0.15 and events[1]["velocity"] < 0


def test_half_sine_from_rest_yields_during_the_pulse_against_scipy():
    """x′ = x″ = 0 at the start (a half-sine from rest): the complete stationary-point
    search must still find the hump inside the pulse where the spring yields (regression:
    the mpmath route of the search stopped early when asked for every stationary point)."""
    system = {"model": "spring-mass-damper", "mass": "1.1 kg", "stiffness": "431.3 N/m"}
    d = closedform.derive(case(system, [{"shape": "half-sine", "duration": "0.408 s",
                                         "amplitude": "13.83 N"}], until="2.17 s",
                               resistance={"kind": "elastic-plastic", "yield": "6.59 N"}))
    assert d.status == "verified", [c.detail for c in d.checks if not c.passed]
    largest, kinds = reference(1.1, 0, 431.3, 0, 6.59,
                               lambda t: 13.83 * math.sin(math.pi * t / 0.408) if t < 0.408
                               else 0.0, 2.17, [0.408])
    result = d.to_dict()
    assert [e["kind"] for e in result["events"]] == kinds
    assert result["events"][0]["time"] < 0.408           # yields while the pulse acts
    assert result["ductility"]["value"] == pytest.approx(largest / (6.59 / 431.3), rel=1e-7)

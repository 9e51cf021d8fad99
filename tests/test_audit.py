"""`closedform check`: claims confirmed or refuted against published values."""

from __future__ import annotations

import json
import math
import textwrap
from pathlib import Path

import pytest

from closedform.cli import main

WORKED = Path(__file__).resolve().parent.parent / "worked_cases"

DAMPED_STEP = """
title = "5 % damped step"
[system]
model = "spring-mass-damper"
mass = "200 kg"
stiffness = "500 kN/m"
damping_ratio = 0.05
[[load]]
shape = "step"
amplitude = "10 kN"
[report]
until = "0.5 s"
[claims]
"""


def run(tmp_path: Path, text: str, *arguments: str) -> tuple[int, str, str]:
    import contextlib
    import io

    path = tmp_path / "claims.toml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["check", str(path), *arguments])
    return code, out.getvalue(), err.getvalue()


def test_claiming_the_undamped_dlf_of_two_for_a_damped_step_is_refuted(tmp_path):
    """Published damped value 1 + exp(−ζπ/√(1−ζ²)) ≈ 1.854 at ζ = 0.05 (Ogata, Modern
    Control Engineering, 5th ed., section 5-3, maximum overshoot; from memory)."""
    code, out, _ = run(tmp_path, DAMPED_STEP + "dlf = 2\n")
    assert code == 1
    (line,) = [row for row in out.splitlines() if row.startswith("dlf:")]
    assert line.startswith("dlf: claimed 2, computed 1.85447")
    assert line.endswith("REFUTED (tolerance 0.005)")


def test_the_published_damped_overshoot_is_confirmed(tmp_path):
    z = 0.05
    published = 1 + math.exp(-z * math.pi / math.sqrt(1 - z * z))   # Ogata §5-3 (from memory)
    omega_d = math.sqrt(500e3 / 200) * math.sqrt(1 - z * z)
    code, out, _ = run(tmp_path, DAMPED_STEP + f"dlf = {published:.4f}\n"
                       f'peak_time = "{math.pi / omega_d:.6f} s"\nstatic = "20 mm"\n')
    assert code == 0, out
    assert out.splitlines()[-1] == "3 confirmed, 0 refuted"


def test_the_undamped_rectangle_formula_claimed_for_a_damped_case_is_refuted(tmp_path):
    """x = (F/k)(1 − cos ω_n t) during a rectangular pulse holds only without damping
    (Chopra, Dynamics of Structures, 4th ed., section 4.7; from memory)."""
    code, out, _ = run(tmp_path, DAMPED_STEP + 'response = [{ from = "0 s", expr = "0.02*(1 - cos(50*t))" }]\n')
    assert code == 1
    (verdict,) = [row for row in out.splitlines() if row.startswith("response[1]")]
    assert verdict.startswith("response[1] on [0, 0.5] s: claimed x = 0.02*(1 - cos(50*t))")
    assert "REFUTED" in verdict and "largest deviation" in verdict
    assert "    against the equation: ode residual on (0, 0.5): FAILED" in out
    assert out.splitlines()[-1] == "0 confirmed, 1 refuted"


def test_the_true_undamped_step_response_is_confirmed(tmp_path):
    """Undamped step: x = (F/k)(1 − cos ω_n t), ω_n = √(k/m) = 50 rad/s here (Chopra,
    Dynamics of Structures, 4th ed., section 4.3; from memory)."""
    text = DAMPED_STEP.replace("damping_ratio = 0.05\n", "") + \
        'response = [{ from = "0 s", expr = "0.02*(1 - cos(50*t))" }]\ndlf = 2\n'
    code, out, _ = run(tmp_path, text)
    assert code == 0, out
    assert out.splitlines()[-1] == "2 confirmed, 0 refuted"


def test_json_output_carries_the_claims(tmp_path):
    code, out, _ = run(tmp_path, DAMPED_STEP + "dlf = 2\n", "--json", "-")
    result = json.loads(out)
    assert code == 1
    (claim,) = result["claims"]
    assert claim["key"] == "dlf" and claim["confirmed"] is False
    assert claim["relative_difference"] == pytest.approx((2 - 1.854468) / 1.854468, rel=1e-4)


def test_the_worked_audit_case_refutes_exactly_its_wrong_number(capsys):
    code = main(["check", str(WORKED / "audit-rack-upright.toml")])
    lines = capsys.readouterr().out.splitlines()
    assert code == 1
    verdicts = {row.split(":")[0]: row.rsplit(": ", 1)[-1] for row in lines[:-1]}
    assert verdicts == {"peak": "confirmed (tolerance 0.005; magnitude of the peak)",
                        "peak_time": "REFUTED (tolerance 0.005)",
                        "dlf": "confirmed (tolerance 0.005)",
                        "static": "confirmed (tolerance 0.005)"}
    assert lines[-1] == "3 confirmed, 1 refuted"


@pytest.mark.parametrize("claims, message", [
    ("", "claims.toml:13: claims: no [claims] to audit (expected some of: at, dlf, "
         "final_value, overshoot, overshoot_response, overshoot_time, peak, "
         "peak_acceleration, peak_acceleration_time, peak_spring_force, peak_spring_force_time, "
         "peak_support_reaction, peak_support_reaction_time, peak_time, peak_velocity, "
         "peak_velocity_time, residual, response, rise_time, rise_time_end, rise_time_start, "
         "settling_time, settling_time_band, static)"),
    ('peak = "3 kg"\n', "claims.toml:14: claims.peak: wrong dimension (expected length, got mass)"),
])
def test_unusable_claims_exit_2(tmp_path, claims, message):
    code, out, err = run(tmp_path, DAMPED_STEP + claims)
    assert code == 2
    assert out == ""
    assert err.strip() == str(tmp_path / message)


def test_an_error_found_after_loading_names_the_file_and_line(tmp_path):
    """A problem the derivation finds (load times that symbols cannot order) is located like
    a loading error: FILE:LINE: KEY: message, exit 2."""
    code, out, err = run(tmp_path, """
        title = "Two steps at unknown times"
        [symbols]
        t1 = { unit = "s" }
        t2 = { unit = "s" }
        [system]
        model = "spring-mass-damper"
        mass = "10 kg"
        stiffness = "1000 N/m"
        [[load]]
        shape = "step"
        at = "t1"
        amplitude = "1 N"
        [[load]]
        shape = "step"
        at = "t2"
        amplitude = "1 N"
        [claims]
        peak = "1 mm"
        """)
    assert code == 2 and out == ""
    assert err.startswith(f"{tmp_path / 'claims.toml'}:") and "load: the load times cannot be " \
        "put in order" in err
    assert "<case>" not in err


# --- issue 12: audits that hold up ------------------------------------------------------------

# Undamped oscillator, omega = sqrt(k/m) = 50 rad/s, under a 5 kN rectangular pulse of 15 ms:
# F/k = 20 mm. During the pulse x = (F/k)(1 - cos wt), after it
# x = (F/k)[cos w(t - t_d) - cos wt] (Chopra, Dynamics of Structures, 4th ed., section 4.7,
# rectangular pulse force; from memory).
PULSE = """
title = "Pulse on an undamped oscillator"
[system]
model = "spring-mass-damper"
mass = "100 kg"
stiffness = "250 kN/m"
[[load]]
shape = "rectangle"
duration = "15 ms"
amplitude = "5 kN"
[report]
until = "200 ms"
[claims]
"""
PULSE_PHASE = '{ from = 0, to = "15 ms", expr = "20*(1 - cos(0.05*t))", expr_unit = "mm", time_unit = "ms" }'
FREE_PHASE = '{ from = "15 ms", expr = "0.02*(cos(50*(t - 0.015)) - cos(50*t))" }'


def verdict_lines(out: str) -> list[str]:
    return [row for row in out.splitlines()[:-1] if not row.startswith(" ")]


def test_a_correct_partial_formula_is_judged_on_its_own_interval_only(tmp_path):
    """Item 1: before, the pulse-phase formula got 'on its own' REFUTED (it does not cover
    the window) and 'against this derivation' confirmed."""
    code, out, _ = run(tmp_path, PULSE + f"response = [{PULSE_PHASE}]\n")
    assert code == 0, out
    (verdict,) = verdict_lines(out)
    assert verdict.startswith("response[1] on [0, 0.015] s: claimed x = 20*(1 - cos(0.05*t)) "
                              "(in mm, t in ms), ")
    assert verdict.endswith("all 5 checks against the equation passed; largest deviation from "
                            "this derivation 0 of the peak at t = 7.5e-05 s)")
    assert "confirmed" in verdict
    listed = [row.strip() for row in out.splitlines() if row.startswith("    ")]
    assert listed == [
        "against the equation: pieces cover the analysis window: passed",
        "against the equation: ode residual on (0, 0.015): passed",
        "against the equation: initial values: passed",
        "against the equation: independent integration: passed",
        "against the equation: energy balance at t = 0.015 s: passed",
        "against this derivation: largest deviation from this derivation 0 of the peak at "
        "t = 7.5e-05 s"]
    assert out.splitlines()[-1] == "1 confirmed, 0 refuted"


def test_a_formula_with_rounded_coefficients_is_judged_by_the_tolerance(tmp_path):
    """A consultant writes x = 20(1 − cos 0.05 t) mm with ω rounded: 0.0501 instead of 0.05
    (0.2 % off). Against the equation it fails at our own round-off limits, as any rounded
    formula must; the verdict follows the stated tolerance, one way or the other."""
    rounded = PULSE_PHASE.replace("0.05*t", "0.0501*t")
    assert rounded != PULSE_PHASE
    code, out, _ = run(tmp_path, PULSE + f'tolerance = {{ expressions = "1 %" }}\nresponse = [{rounded}]\n')
    assert code == 0, out
    (verdict,) = verdict_lines(out)
    assert "confirmed" in verdict
    assert "FAILED at this derivation's own limits (expected of rounded coefficients)" in verdict
    assert "    against the equation: ode residual on (0, 0.015): FAILED" in out
    code, out, _ = run(tmp_path, PULSE + f'tolerance = {{ expressions = "0.01 %" }}\nresponse = [{rounded}]\n')
    assert code == 1, out
    (verdict,) = verdict_lines(out)
    assert "REFUTED" in verdict and "(beyond the tolerance)" in verdict
    assert "expected of rounded coefficients" not in verdict


def test_a_free_vibration_phase_is_checked_for_continuity_with_the_state_it_starts_from(tmp_path):
    code, out, _ = run(tmp_path, PULSE + f"response = [{PULSE_PHASE}, {FREE_PHASE}]\n")
    assert code == 0, out
    assert len(verdict_lines(out)) == 2
    assert "    against the equation: breakpoint conditions at t = 0.015: passed" in out
    # The pulse-phase formula carried on past the pulse is wrong, and both routes say so.
    code, out, _ = run(tmp_path, PULSE + 'response = [{ from = "15 ms", expr = "0.02*(1 - cos(50*t))" }]\n')
    assert code == 1
    (verdict,) = verdict_lines(out)
    assert "REFUTED" in verdict and "(beyond the tolerance)" in verdict
    assert "    against the equation: ode residual on (0.015, 0.2): FAILED" in out
    assert "    against the equation: breakpoint conditions at t = 0.015: passed" in out


@pytest.mark.parametrize("value, message", [
    ("5", "got 5 (did you mean \"5 %\"?)"),
    ("0", "got 0"),
    ("-1", "got -1"),
    ("1", "got 1 (did you mean \"1 %\"?)"),
    ('"abc"', "got 'abc'"),
    ('"150 %"', "got '150 %'"),
    ("true", "got true"),
])
def test_a_tolerance_outside_0_to_1_is_an_input_error_naming_the_key(tmp_path, value, message):
    """Item 2: before, tolerance = 5 (meant as 5 %) confirmed a claim 50 % off."""
    code, out, err = run(tmp_path, DAMPED_STEP + f"tolerance = {value}\ndlf = 2.8\n")
    assert (code, out) == (2, "")
    assert err.strip() == (f"{tmp_path / 'claims.toml'}:14: claims.tolerance: expected a "
                           "relative tolerance between 0 and 1 (such as 0.005) or a percentage "
                           f"such as \"0.5 %\", {message}")


def test_a_percentage_tolerance_is_relative(tmp_path):
    """dlf 1.854 (Ogata §5-3, as above; from memory): 1.9 is 2.5 % off, 2.8 is 51 % off."""
    code, out, _ = run(tmp_path, DAMPED_STEP + 'tolerance = "5 %"\ndlf = 1.9\n')
    assert code == 0 and out.splitlines()[0].endswith("confirmed (tolerance 0.05)")
    code, out, _ = run(tmp_path, DAMPED_STEP + 'tolerance = { numbers = "5 %" }\ndlf = 2.8\n')
    assert code == 1 and out.splitlines()[0].endswith("REFUTED (tolerance 0.05)")


UNDAMPED_STEP = DAMPED_STEP.replace("damping_ratio = 0.05\n", "")


def test_every_scalar_result_is_claimable_by_its_json_name(tmp_path):
    """Item 3. Undamped step F = 10 kN, k = 500 kN/m, m = 200 kg: x = (F/k)(1 − cos ωt),
    ω = 50 rad/s, so the peak velocity is (F/k)ω = 1 m/s at π/(2ω), the peak acceleration F/m
    = 50 m/s² at t = 0, the peak spring force and support reaction 2F = 20 kN (Chopra,
    Dynamics of Structures, 4th ed., section 4.3; from memory)."""
    claims = ('peak_velocity = "1 m/s"\npeak_velocity_time = "31.4159 ms"\n'
              'peak_acceleration = "50 m/s^2"\npeak_spring_force = "20 kN"\n'
              'peak_support_reaction = "20 kN"\nstatic = "20 mm"\npeak = "40 mm"\n'
              'at = [{ time = "10 ms", value = "2.448348762 mm" }]\n')
    code, out, _ = run(tmp_path, UNDAMPED_STEP + claims)
    assert code == 0, out
    keys = [row.split(":")[0] for row in verdict_lines(out)]
    assert keys == ["peak_velocity", "peak_velocity_time", "peak_acceleration",
                    "peak_spring_force", "peak_support_reaction", "static", "peak",
                    "at[1] (t = 0.01 s)"]
    # 0.02·(1 − cos 0.5) = 2.448348762 mm; a value 3 % off is refuted
    code, out, _ = run(tmp_path, UNDAMPED_STEP + 'at = [{ time = "10 ms", value = "2.52 mm" }]\n')
    assert code == 1 and "REFUTED" in out


def test_the_claimable_names_come_from_the_json_result(derive_case):
    from closedform.audit import claimable_results
    from closedform.quantities import dimension

    derivation = derive_case(PULSE)
    result = derivation.to_dict()
    claimable = claimable_results(result, dimension("length"))
    for name, value in result.items():
        if isinstance(value, (int, float)) or (isinstance(value, dict) and "value" in value):
            if name not in ("schema", "until"):
                assert name in claimable
    assert claimable["residual"].value == pytest.approx(0.04 * math.sin(0.375), rel=1e-12)
    # a result added to the JSON later is claimable without any change to the audit
    future = dict(result, ductility={"value": 3.2, "time": 0.0125},
                  permanent_set=0.004)
    names = claimable_results(future, dimension("length"))
    assert names["ductility"].value == 3.2 and names["ductility_time"].value == 0.0125
    assert "permanent_set" in names


def test_the_residual_amplitude_after_a_pulse_is_claimable(tmp_path):
    """Undamped residual amplitude after a rectangular pulse: 2(F/k)|sin(ω t_d / 2)| (Chopra,
    Dynamics of Structures, 4th ed., section 4.7; from memory) = 40 mm · sin 0.375."""
    code, out, _ = run(tmp_path, PULSE + f'residual = "{40 * math.sin(0.375):.6f} mm"\n')
    assert code == 0, out


def test_an_unknown_claim_lists_the_claimable_names(tmp_path):
    code, out, err = run(tmp_path, PULSE + 'peek = "1 mm"\n')
    assert (code, out) == (2, "")
    assert err.strip() == (
        f"{tmp_path / 'claims.toml'}:14: claims.peek: unknown claim 'peek'; did you mean "
        "'peak'? (claimable here: at, dlf, peak, peak_acceleration, peak_acceleration_time, "
        "peak_spring_force, peak_spring_force_time, peak_support_reaction, "
        "peak_support_reaction_time, peak_time, peak_velocity, peak_velocity_time, residual, "
        "residual_after, response, static, tolerance)")


def test_a_claimed_response_gets_the_same_checks_as_the_derivation(derive_case):
    """Item 5: claiming our own last piece back gives exactly our derivation's list of
    checks, energy balance included (before, the energy balance was left out)."""
    from closedform.audit import audit

    derivation = derive_case(PULSE + "dlf = 1\n")
    last = derivation.to_dict()["pieces"][-1]
    claimed = derive_case(PULSE + f'response = [{{ from = "{last["start"]} s", '
                          f'expr = "{last["expr"]}" }}]\n')
    (verdict,) = audit(claimed).verdicts
    assert verdict.confirmed, verdict.line()
    sheet_only = {"printed equations re-read"}     # a check of our own sheet, not of the claim
    # the checks of our reported numbers (extreme …, finite results) concern our extremes,
    # which a claimed formula does not report
    ours = [c.name for c in derivation.checks if c.name not in sheet_only
            and not c.name.startswith("extreme ") and c.name != "finite results"]
    assert [c.name for c in verdict.checks] == ours
    assert any(c.name.startswith("energy balance") for c in verdict.checks)


def test_a_bad_claim_is_located_by_file_line_and_key(tmp_path):
    """Item 6: FILE:LINE: KEY for an entry of a multi-line response list."""
    text = PULSE + textwrap.dedent("""\
        response = [
          { from = 0, to = "15 ms", expr = "0.02*(1 - cos(50*t))" },
          { from = "15 ms", expr = "0.02*(1 - cos(50*t)" },
        ]
        """)
    code, out, err = run(tmp_path, text)
    assert (code, out) == (2, "")
    assert err.startswith(f"{tmp_path / 'claims.toml'}:16: claims.response[2].expr: ")
    code, out, err = run(tmp_path, PULSE + 'at = [{ time = "10 ms", value = "3 kg" }]\n')
    assert err.strip() == (f"{tmp_path / 'claims.toml'}:14: claims.at[1].value: wrong dimension "
                           "(expected length, got mass)")
    code, out, err = run(tmp_path, PULSE + 'response = [{ from = "15 ms", to = "300 ms", expr = "0" }]\n')
    assert err.strip() == (f"{tmp_path / 'claims.toml'}:14: claims.response[1].to: after the end "
                           "of the analysis window (until = 0.200000 s)")


def test_check_writes_an_audit_sheet(tmp_path):
    """Item 4: -o DIR --format md,tex,json writes the audit record, basis sheet included."""
    out_dir = tmp_path / "out"
    # DLF of a short rectangular pulse, undamped: 2 sin(π t_d/T) = 2 sin(0.375) = 0.732545
    # (Chopra, Dynamics of Structures, 4th ed., section 4.7; from memory)
    code, out, _ = run(tmp_path, PULSE + f'dlf = 1.2\nresponse = [{PULSE_PHASE}]\n',
                       "-o", str(out_dir), "--format", "md,tex,json")
    assert code == 1
    names = sorted(p.name for p in out_dir.iterdir())
    assert [n for n in names if "-audit." in n] == ["claims-audit.json", "claims-audit.md",
                                                   "claims-audit.tex"]
    markdown = (out_dir / "claims-audit.md").read_text()
    assert "**REFUTED — 1 of 2 claims refuted, 1 confirmed.**" in markdown
    assert "| 1 | dlf | 1.2 | 0.732545 | $0.638$ | $0.005$ | **REFUTED** |" in markdown
    assert "## 1. Claims" in markdown and "## 2. " in markdown
    assert "| energy balance at t = 0.015 s | passed |" in markdown
    result = json.loads((out_dir / "claims-audit.json").read_text())
    assert [c["verdict"] for c in result["claims"]] == ["refuted", "confirmed"]
    assert result["claims_summary"] == {"confirmed": 1, "refuted": 1}
    assert [c["name"] for c in result["claims"][1]["checks"]][-1] == "energy balance at t = 0.015 s"
    assert "\\section{Claims}" in (out_dir / "claims-audit.tex").read_text()


def test_an_unusable_claim_writes_nothing(tmp_path):
    out_dir = tmp_path / "out"
    code, _, _ = run(tmp_path, PULSE + "tolerance = 5\ndlf = 1\n", "-o", str(out_dir))
    assert code == 2 and not out_dir.exists()
    code, _, err = run(tmp_path, PULSE + "dlf = 1\n", "-o", str(out_dir), "--format", "csv")
    assert code == 2 and "unknown audit format 'csv'" in err


@pytest.mark.skipif(__import__("closedform.render").render.latex_command() is None,
                    reason="latexmk/pdflatex not on PATH")
def test_the_audit_sheet_compiles_to_pdf(tmp_path):
    out_dir = tmp_path / "out"
    code, _, _ = run(tmp_path, PULSE + f'dlf = 0.732545\nresponse = [{PULSE_PHASE}]\n',
                     "-o", str(out_dir), "--format", "pdf")
    assert code == 0
    assert (out_dir / "claims-audit.pdf").read_bytes().startswith(b"%PDF")


def test_the_worked_audit_of_a_consultants_note(capsys):
    """Item 7. Undamped, ω = √(1.6e6/160) = 100 rad/s, F/k = 5 mm, t_d = 12 ms (ω t_d = 1.2 <
    π: the peak comes after the pulse). Rectangular pulse (Chopra, Dynamics of Structures,
    4th ed., section 4.7; from memory): x_max = 2(F/k) sin(ω t_d/2) = 10 mm · sin 0.6 at
    t = t_d/2 + π/(2ω); after the pulse x = 2(F/k) sin(ω t_d/2) sin ω(t − t_d/2), so at 40 ms
    x = 10 mm · sin 0.6 · sin 3.4 < 0 and the residual amplitude equals x_max."""
    x_max = 10 * math.sin(0.6)
    assert x_max == pytest.approx(5.65, rel=5e-3)                    # the note's peak
    assert (6 + math.pi / 0.2) == pytest.approx(21.7, rel=5e-3)     # its time, ms
    assert x_max * math.sin(3.4) == pytest.approx(-1.44, rel=5e-3)  # the note lost the sign
    code = main(["check", str(WORKED / "audit-end-stop-note.toml")])
    lines = capsys.readouterr().out.splitlines()
    assert code == 1
    verdicts = {row.split(":")[0]: "REFUTED" not in row.split("relative difference")[1]
                for row in lines[:-1] if not row.startswith(" ")}
    assert verdicts == {
        "static": True, "peak": True, "peak_time": True, "dlf": True, "peak_velocity": True,
        "peak_spring_force": True, "peak_support_reaction": False, "residual": True,
        "at[1] (t = 0.012 s)": True, "at[2] (t = 0.04 s)": False,
        "response[1] on [0, 0.012] s": True, "response[2] on [0.012, 0.1] s": False}
    assert lines[-1] == "9 confirmed, 3 refuted"


def test_claimed_formulas_as_an_array_of_tables_are_located_too(tmp_path):
    text = PULSE + textwrap.dedent("""\
        [[claims.response]]
        from = 0
        to = "15 ms"
        expr = "0.02*(1 - cos(50*t))"
        [[claims.response]]
        from = "15 ms"
        expr = "0"
        time_unit = "kg"
        """)
    code, out, err = run(tmp_path, text)
    assert (code, out) == (2, "")
    assert err.strip() == (f"{tmp_path / 'claims.toml'}:21: claims.response[2].time_unit: wrong "
                           "dimension (expected time, got mass)")


def test_a_formula_outside_the_exponential_polynomials_is_refuted_with_the_reason(tmp_path):
    code, out, _ = run(tmp_path, PULSE + 'response = [{ from = "15 ms", expr = "0.02*sqrt(t)" }]\n')
    assert code == 1
    assert ("    against the equation: energy balance: FAILED (could not be evaluated: ValueError: "
            "the claimed formula is not a sum of terms u^k·e^(σu)·cos|sin(ωu), u = t − from, "
            "which this check integrates)") in out.splitlines()


def test_claims_on_a_case_with_valued_symbols(tmp_path):
    """The stiffness as a symbol with a value: a formula in that symbol is judged with it."""
    text = PULSE.replace('stiffness = "250 kN/m"', 'stiffness = "k"').replace(
        "[system]", '[symbols]\nk = { unit = "N/m", value = "250 kN/m" }\n[system]')
    code, out, _ = run(tmp_path, text + 'response = [{ from = 0, to = "15 ms", expr = "5000/k*(1 - cos(50*t))" }]\n')
    assert code == 0, out


def test_a_result_without_a_unit_in_the_json_takes_the_dimension_the_claim_writes(derive_case):
    from closedform.case import quantity_reader
    from closedform.claims import claimed_number

    case = derive_case(PULSE).case
    reader = quantity_reader(case)
    assert claimed_number(reader, "4 mm", None, "claims.permanent_set", {}) == pytest.approx(0.004)
    assert claimed_number(reader, 3.5, None, "claims.ductility", {}) == 3.5


def test_a_formula_claimed_from_inside_one_of_our_pieces_continues_our_state(tmp_path):
    """From 5 ms (inside the pulse): the formula must continue x(5 ms), x′(5 ms) of ours."""
    code, out, _ = run(tmp_path, PULSE + 'response = [{ from = "5 ms", to = "15 ms", '
                       'expr = "0.02*(1 - cos(50*t))" }]\n')
    assert code == 0, out
    assert "    against the equation: breakpoint conditions at t = 0.005: passed" in out
    # the same shape shifted to start from rest at 5 ms is a solution of the equation on the
    # interval but does not continue the motion: continuity fails
    code, out, _ = run(tmp_path, PULSE + 'response = [{ from = "5 ms", to = "15 ms", '
                       'expr = "0.02*(1 - cos(50*(t - 0.005)))" }]\n')
    assert code == 1
    assert "    against the equation: ode residual on (0.005, 0.015): passed" in out
    assert "    against the equation: breakpoint conditions at t = 0.005: FAILED" in out

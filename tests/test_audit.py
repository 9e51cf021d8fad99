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
    lines = {row.split(":")[0]: row for row in out.splitlines()}
    assert "REFUTED" in lines["response (on its own)"]
    assert "ode residual" in lines["response (on its own)"]
    assert "REFUTED" in lines["response (against this derivation)"]
    assert "largest deviation" in lines["response (against this derivation)"]


def test_the_true_undamped_step_response_is_confirmed(tmp_path):
    """Undamped step: x = (F/k)(1 − cos ω_n t), ω_n = √(k/m) = 50 rad/s here (Chopra,
    Dynamics of Structures, 4th ed., section 4.3; from memory)."""
    text = DAMPED_STEP.replace("damping_ratio = 0.05\n", "") + \
        'response = [{ from = "0 s", expr = "0.02*(1 - cos(50*t))" }]\ndlf = 2\n'
    code, out, _ = run(tmp_path, text)
    assert code == 0, out
    assert out.splitlines()[-1] == "3 confirmed, 0 refuted"


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
    ("", "claims.toml: claims: no [claims] to audit (expected peak, peak_time, dlf, static, "
         "residual or response)"),
    ('peak = "3 kg"\n', "claims.toml: claims.peak: wrong dimension (expected length, got mass)"),
    ("tolerance = -1\ndlf = 2\n", "claims.toml: claims.tolerance: expected a positive relative "
                                  "tolerance such as 0.005, got -1"),
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

"""Checks that cannot reach their precision say "inconclusive", with the reason, apart from
checks that found something wrong; the result is still not verified (issue: files from
others, item 11)."""

from __future__ import annotations

import json

from closedform.cli import main

from .conftest import derive_text

STIFF = ('title = "stiff"\n[system]\nmodel = "ode"\ncoefficients = [1, 0, 1e300]\n'
         '[[load]]\nshape = "step"\namplitude = 1\n[report]\nuntil = "1 s"\n')


def test_integration_over_more_phase_than_its_digits_is_inconclusive():
    """x″ + 10³⁰⁰x = 1 over 1 s turns through about 10¹⁵⁰ rad: a 40-digit integration cannot
    follow the phase, so it says so instead of reporting a difference as a failure; the
    pieces still pass the exact checks and the energy balance, and the status is failed."""
    derivation = derive_text(STIFF)
    by_name = {c.name: c for c in derivation.checks}
    integration = by_name["independent integration"]
    assert integration.outcome == "inconclusive"
    assert integration.detail.startswith("could not be established: the fastest mode turns")
    assert by_name["ode residual on (0, 1)"].outcome == "passed"
    assert any(c.name.startswith("energy balance") and c.passed for c in derivation.checks)
    assert derivation.status == "failed"


def test_ordinary_integration_is_still_judged():
    """A slow oscillator over a few periods is integrated and passes (the phase bound does
    not refuse ordinary cases)."""
    derivation = derive_text(STIFF.replace("1e300", "39.5").replace('"1 s"', '"3 s"'))
    integration = next(c for c in derivation.checks if c.name == "independent integration")
    assert integration.outcome == "passed", integration.detail


def test_inconclusive_outcome_reaches_the_json(tmp_path, capsys):
    case = tmp_path / "stiff.toml"
    case.write_text(STIFF, encoding="utf-8")
    assert main(["derive", str(case), "--json", "-"]) == 1
    result = json.loads(capsys.readouterr().out)
    outcomes = {c["name"]: c["outcome"] for c in result["checks"]}
    assert outcomes["independent integration"] == "inconclusive"
    assert result["status"] == "failed"


def test_sheet_and_console_tell_inconclusive_from_failed(tmp_path, capsys):
    """The sheet's status box lists an inconclusive check as INCONCLUSIVE (and says what that
    means), its check table marks it so, and the console line names it apart from the failed
    ones."""
    case = tmp_path / "stiff.toml"
    case.write_text(STIFF, encoding="utf-8")
    assert main(["derive", str(case), "-o", str(tmp_path / "out"), "--format", "md,tex"]) == 1
    console = capsys.readouterr().out
    assert "inconclusive checks: independent integration" in console
    assert "failed checks" not in console
    sheet = (tmp_path / "out" / "stiff.md").read_text(encoding="utf-8")
    assert "1 of them inconclusive: they could not reach their precision" in sheet
    assert "- INCONCLUSIVE: independent integration — could not be established" in sheet
    assert "| independent integration | **INCONCLUSIVE** |" in sheet
    latex = (tmp_path / "out" / "stiff.tex").read_text(encoding="utf-8")
    assert "INCONCLUSIVE: independent integration" in latex
    assert r"\textbf{INCONCLUSIVE}" in latex

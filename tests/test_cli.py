"""The command line end to end, in temporary folders: JSON contract, exit codes, messages."""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import pytest
import sympy

from closedform.cli import main

WORKED = Path(__file__).resolve().parent.parent / "worked_cases"

GOOD = """
title = "Hammer on a skid"
[system]
model = "spring-mass-damper"
mass = "420 kg"
stiffness = "2.6 MN/m"
damping_ratio = 0.02
[[load]]
shape = "rectangle"
at = "20 ms"
duration = "1.5 ms"
impulse = "95 N*s"
[report]
until = "250 ms"
"""


def write(folder: Path, text: str, name: str = "case.toml") -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def test_derive_prints_the_json_contract(tmp_path, capsys):
    code = main(["derive", str(write(tmp_path, GOOD)), "--json", "-"])
    result = json.loads(capsys.readouterr().out)
    assert code == 0
    assert result["schema"] == 1
    assert result["status"] == "verified"
    assert result["model"] == "spring-mass-damper"
    assert result["variable"] == {"name": "x", "unit": "m"}
    starts = [p["start"] for p in result["pieces"]]
    assert starts == [0.0, 0.02, 0.0215]
    assert result["pieces"][-1]["end"] is None
    assert result["pieces"][0]["expr"] == "0"
    t = sympy.Symbol("t")
    for piece in result["pieces"]:   # every piece must be readable by sympy
        assert sympy.parse_expr(piece["expr"], local_dict={"t": t}).free_symbols <= {t}
    assert set(result["peak"]) == {"value", "time"}
    assert result["dlf"] == pytest.approx(abs(result["peak"]["value"]) / result["static"])
    assert result["checks"] and all(c["passed"] for c in result["checks"])


def test_derive_writes_sheet_and_json_into_the_folder(tmp_path):
    case = write(tmp_path, GOOD, "skid.toml")
    out = tmp_path / "out"
    assert main(["derive", str(case), "-o", str(out), "--format", "md,json"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["skid-load.svg", "skid-response.svg",
                                                     "skid.json", "skid.md"]
    sheet = (out / "skid.md").read_text()
    assert sheet.splitlines()[0] == "# Hammer on a skid"
    assert "CHECKED" in "\n".join(sheet.splitlines()[:4])
    assert "does not replace" in sheet


@pytest.mark.parametrize("text, message", [
    ("title = \"x\"\n[system]\nmodel = \"spring-mass-damper\"\nmass = \"420 kg\"\n"
     "stiffness = \"2.6 kg\"\n",
     "case.toml:5: system.stiffness: wrong dimension (expected force/length, got mass)"),
    ("title = \"x\"\n[system]\nmodel = \"spring-mass-dampr\"\n",
     "case.toml:3: system.model: unknown model 'spring-mass-dampr' (expected one of: "
     "spring-mass-damper, base-excitation, first-order, series-rlc, ode); did you mean "
     "'spring-mass-damper'?"),
    ("title = \"x\"\n[system]\nmodel = \"first-order\"\ntime_constant = \"0 s\"\n",
     "case.toml:4: system.time_constant: must be positive (expected a positive value, got 0)"),
    ("title = \"x\"\n[sytem]\n", "case.toml:2: sytem: unknown key 'sytem'; did you mean 'system'?"),
    ("title = \"x\"\n[system\n", None),
])
def test_unusable_input_gives_one_line_and_exit_2(tmp_path, capsys, text, message):
    code = main(["derive", str(write(tmp_path, text)), "--json", "-"])
    captured = capsys.readouterr()
    assert code == 2
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1
    assert "Traceback" not in captured.err
    if message is not None:
        assert lines[0] == str(tmp_path / message)


def test_missing_file_is_exit_2(tmp_path, capsys):
    assert main(["derive", str(tmp_path / "nothing.toml")]) == 2
    assert "cannot read the case file" in capsys.readouterr().err


@pytest.mark.parametrize("case", sorted(WORKED.glob("*.toml")), ids=lambda p: p.stem)
def test_every_worked_case_derives_and_passes_its_checks(case, tmp_path, capsys):
    code = main(["derive", str(case), "--json", "-"])
    result = json.loads(capsys.readouterr().out)
    failed = [c for c in result["checks"] if not c["passed"]]
    assert code == 0, failed
    assert result["status"] == "verified"

"""The command line end to end, in temporary folders: JSON contract, exit codes, messages."""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import pytest
import sympy

from closedform.cli import main

from .conftest import worked_derivation

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
    assert "VERIFIED" in "\n".join(sheet.splitlines()[:4])
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


@pytest.mark.parametrize("stem", sorted(p.stem for p in WORKED.glob("*.toml")))
def test_every_worked_case_derives_and_passes_its_checks(stem):
    """Every worked case verified, every check passed (the session's one derivation of it,
    tests/conftest.py)."""
    derivation = worked_derivation(stem)
    result = json.loads(derivation.to_json())
    failed = [c for c in result["checks"] if not c["passed"]]
    assert derivation.passed and not failed, failed
    assert result["status"] == "verified"


def test_the_command_line_gives_the_json_of_the_derivation(capsys):
    """derive CASE --json - (through the batch worker, in a worker process) prints exactly
    the JSON result of the same case derived in the Python interface without a sheet, exit
    0: no sheet is printed, so the printed equations are not re-read, and every other check
    is the Python interface's own."""
    from closedform import derive, load_case

    code = main(["derive", str(WORKED / "drop-hammer-skid.toml"), "--json", "-"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    printed = json.loads(captured.out)
    alone = derive(load_case(WORKED / "drop-hammer-skid.toml"), sheet_check=False)
    assert printed == json.loads(alone.to_json())
    full = json.loads(worked_derivation("drop-hammer-skid").to_json())
    left_out = [c for c in full["checks"] if c not in printed["checks"]]
    assert len(left_out) == 1 and left_out[0]["name"].startswith("printed equations"), left_out
    assert {k: v for k, v in full.items() if k != "checks"} == \
        {k: v for k, v in printed.items() if k != "checks"}


def test_a_sheet_format_re_reads_the_printed_equations(tmp_path):
    """With a sheet written (md), the JSON beside it lists the printed-equations check."""
    code = main(["derive", str(WORKED / "drop-hammer-skid.toml"), "-o", str(tmp_path),
                 "--format", "md,json"])
    assert code == 0
    result = json.loads((tmp_path / "drop-hammer-skid.json").read_text())
    assert any(c["name"].startswith("printed equations") and c["passed"]
               for c in result["checks"])


def test_output_that_is_a_file_is_refused_before_deriving(tmp_path, capsys):
    """-o naming an existing file: one located line, exit 2, the file untouched."""
    case = write(tmp_path, GOOD)
    target = tmp_path / "report.md"
    target.write_text("keep me\n")
    code = main(["derive", str(case), "-o", str(target)])
    err = capsys.readouterr().err
    assert code == 2
    assert err.splitlines() == [f"-o: '{target}' is a file, not a folder for the output"]
    assert target.read_text() == "keep me\n"


def test_cases_under_a_folder_keep_their_subfolders_in_the_output(tmp_path, capsys):
    """Two case.toml in different subfolders write OUT/a/case.md and OUT/b/case.md, not
    one file that the later case overwrites."""
    for sub in ("a", "b"):
        (tmp_path / "cases" / sub).mkdir(parents=True)
    write(tmp_path / "cases" / "a", GOOD)
    write(tmp_path / "cases" / "b", GOOD.replace('"95 N*s"', '"40 N*s"'))
    out = tmp_path / "out"
    assert main(["derive", str(tmp_path / "cases"), "-o", str(out)]) == 0
    first = json.loads((out / "a" / "case.json").read_text())
    second = json.loads((out / "b" / "case.json").read_text())
    # peaks scale with the impulse (a linear system): 40/95 of the first
    assert second["peak"]["value"] == pytest.approx(first["peak"]["value"] * 40 / 95, rel=1e-9)
    assert (out / "a" / "case.md").exists() and (out / "b" / "case.md").exists()


def test_two_named_cases_with_one_stem_are_refused(tmp_path, capsys):
    for sub in ("a", "b"):
        (tmp_path / sub).mkdir()
        write(tmp_path / sub, GOOD)
    out = tmp_path / "out"
    code = main(["derive", str(tmp_path / "a" / "case.toml"), str(tmp_path / "b" / "case.toml"),
                 "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and len(err.splitlines()) == 1
    assert err.startswith("-o: ") and "would write the same sheet files (case.*)" in err
    assert not any(out.rglob("*.md"))


def test_json_pieces_of_a_long_history_read_back_as_the_pieces(tmp_path, capsys):
    """Pieces carried in 30-digit numbers are written term by term into the JSON; the text
    parsed by sympy equals each piece's own sympy expression at points inside it (to 1e-25
    of the piece's size) — the fast writer says the same as sympy's printer."""
    rows = ", ".join(f'["{i * 2} ms", "{(i * 37) % 11 * 0.25:.2f} kN"]' for i in range(24)) + ', ["48 ms", "0 kN"]'
    text = GOOD.replace('shape = "rectangle"\nat = "20 ms"\nduration = "1.5 ms"\nimpulse = "95 N*s"',
                        f"shape = \"table\"\npoints = [{rows}]")
    assert main(["derive", str(write(tmp_path, text)), "--json", "-"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert len(result["pieces"]) > 16           # past the exact route's breakpoint limit
    from closedform import derive, load_case
    derivation = derive(load_case(tmp_path / "case.toml"))
    t = sympy.Symbol("t", real=True)
    for piece, data in zip(derivation.pieces, result["pieces"]):
        assert piece.numeric is not None            # the 30-digit route, written by hand
        parsed = sympy.parse_expr(data["expr"], local_dict={"t": t})
        end = piece.end if piece.end is not None else piece.start + sympy.Rational(1, 10)
        for fraction in (sympy.Rational(1, 5), sympy.Rational(3, 4)):
            at = piece.start + (end - piece.start) * fraction
            ours = sympy.N(piece.expression(t).subs(t, at), 40)
            theirs = sympy.N(parsed.subs(t, at), 40)
            assert abs(ours - theirs) <= sympy.Float("1e-25") * (1 + abs(ours))

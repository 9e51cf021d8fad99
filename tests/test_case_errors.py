"""Every input mistake gives one line ``FILE:LINE: KEY: what is wrong``, exit 2, no traceback.

Each message is checked verbatim through the command line (``closedform derive CASE --json
-``), in a temporary folder, so the file name, the line, the TOML key and the wording are
all part of the contract. The case texts are small edits of one valid case (BASE) whose line
numbers are given beside it.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from closedform.cli import main

# Line numbers of BASE, for reading the expected messages below.
BASE = """\
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
amplitude = "10 kN"
[report]
until = "250 ms"
units = { displacement = "mm", force = "kN", time = "ms" }
"""
#  1 title   2 [system]   3 model   4 mass   5 stiffness   6 damping_ratio   7 [[load]]
#  8 shape   9 at   10 duration   11 amplitude   12 [report]   13 until   14 units

LOAD = """shape = "rectangle"
at = "20 ms"
duration = "1.5 ms"
amplitude = "10 kN"
"""


def edit(old: str, new: str, text: str = BASE) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


def with_load(lines: str) -> str:
    """BASE with the load's four lines (8 to 11) replaced by ``lines`` (from line 8 on)."""
    return edit(LOAD, lines)


TABLE = with_load('shape = "table"\ncsv = "history.csv"\n')   # csv is on line 9


def derive(folder: Path, capsys: pytest.CaptureFixture[str], text: str,
           files: dict[str, str | bytes] | None = None) -> tuple[int, str, str]:
    """Run ``derive case.toml --json -`` in ``folder``; (exit code, stdout, stderr)."""
    case = folder / "case.toml"
    case.write_text(text, encoding="utf-8")
    for name, content in (files or {}).items():
        path = folder / name
        if isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8")
    code = main(["derive", str(case), "--json", "-"])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def assert_message(folder: Path, capsys: pytest.CaptureFixture[str], text: str, expected: str,
                   files: dict[str, str | bytes] | None = None) -> None:
    code, out, err = derive(folder, capsys, text, files)
    assert "Traceback" not in err
    assert code == 2, err
    assert out == ""
    assert err.splitlines() == [f"{folder}{os.sep}{expected}"]


# --- TOML syntax -----------------------------------------------------------------------------

@pytest.mark.parametrize(("text", "expected"), [
    ('title = "x"\n[system\n',
     "case.toml:2: TOML syntax error: Expected ']' at the end of a table declaration (column 8)"),
    (edit('mass = "420 kg"', "mass = 420 kg"),
     "case.toml:4: TOML syntax error: Expected newline or end of document after a statement "
     "(column 12)"),
    (edit('amplitude = "10 kN"', 'amplitude = "10 kN"\namplitude = "12 kN"'),
     "case.toml:12: TOML syntax error: Cannot overwrite a value (column 20)"),
    (BASE + "[system]\n",
     "case.toml:15: TOML syntax error: Cannot declare system twice (column 8)"),
    (edit('title = "Hammer on a skid"', 'title = "Hammer on a skid'),
     "case.toml:1: TOML syntax error: Illegal character '\\n' (column 26)"),
], ids=["table header", "unquoted quantity", "duplicate key", "duplicate table",
        "unterminated string"])
def test_toml_syntax_errors_name_the_line(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


def test_nul_byte_in_the_case_file(tmp_path, capsys):
    assert_message(tmp_path, capsys, edit('at = "20 ms"', 'at = "20\0 ms"'),
                   "case.toml:9: the case file contains a NUL byte (expected text)")


def test_case_file_that_is_not_utf8(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_bytes(BASE.replace("Hammer", "Hammer \xe9").encode("latin-1"))
    assert main(["derive", str(case), "--json", "-"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"{case}:1: the case file is not UTF-8 text (expected UTF-8, got byte 0xE9)"]


def test_missing_case_file(tmp_path, capsys):
    assert main(["derive", str(tmp_path / "nothing.toml"), "--json", "-"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"{tmp_path / 'nothing.toml'}: cannot read the case file (No such file or directory)"]


# --- unknown keys, at every level, with a did-you-mean -----------------------------------------

@pytest.mark.parametrize(("text", "expected"), [
    ('tilte = "x"\n' + BASE,
     "case.toml:1: tilte: unknown key 'tilte'; did you mean 'title'?"),
    ('colour = "red"\n' + BASE,
     "case.toml:1: colour: unknown key 'colour' (expected one of: title, reference, system, "
     "initial, load, report, symbols, claims)"),
    (edit("damping_ratio = 0.02", "dampingratio = 0.02"),
     "case.toml:6: system.dampingratio: unknown key 'dampingratio'; did you mean 'damping_ratio'?"),
    (edit('duration = "1.5 ms"', 'durration = "1.5 ms"'),
     "case.toml:10: load[1].durration: unknown key 'durration'; did you mean 'duration'?"),
    (edit('until = "250 ms"', 'untill = "250 ms"'),
     "case.toml:13: report.untill: unknown key 'untill'; did you mean 'until'?"),
    (edit('displacement = "mm"', 'displacment = "mm"'),
     "case.toml:14: report.units.displacment: unknown key 'displacment'; did you mean "
     "'displacement'?"),
    (BASE + '[initial]\nvelocty = "0 m/s"\n',
     "case.toml:16: initial.velocty: unknown key 'velocty'; did you mean 'velocity'?"),
    (BASE + '[symbols]\nk = { unit = "N/m", vaule = "2 MN/m" }\n',
     "case.toml:16: symbols.k.vaule: unknown key 'vaule'; did you mean 'value'?"),
    (edit('amplitude = "10 kN"', 'amplitude = "10 kN"\nrepeat = { count = 2, evry = "50 ms" }'),
     "case.toml:12: load[1].repeat.evry: unknown key 'evry'; did you mean 'every'?"),
    # A misspelt claim name (claims.peek) is found by `check`, which knows the result names:
    # tests/test_audit.py. A key that cannot be a name at all is refused on loading.
    (BASE + '[claims]\n"\\u001b[2J" = 1\n',
     "case.toml:16: claims.\"\\u001b[2J\": not a claim name '\\x1b[2J' (expected a result "
     "name of the JSON result such as peak or dlf, or response, at, tolerance)"),
], ids=["top", "top without a close match", "system", "load", "report", "report.units",
        "initial", "symbols", "repeat", "control characters escaped"])
def test_unknown_keys(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


# --- missing keys -----------------------------------------------------------------------------

@pytest.mark.parametrize(("text", "expected"), [
    (edit('title = "Hammer on a skid"\n', ""),
     "case.toml: title: a non-empty title string is required"),
    ('title = "x"\n',
     "case.toml: system: the [system] table is required"),
    (edit('model = "spring-mass-damper"\n', ""),
     "case.toml:2: system.model: missing (expected one of: spring-mass-damper, base-excitation, "
     "first-order, series-rlc, ode)"),
    (edit('mass = "420 kg"\n', ""),
     "case.toml:2: system.mass: missing (the spring-mass-damper model needs mass)"),
    (edit('stiffness = "2.6 MN/m"\n', ""),
     "case.toml:2: system.stiffness: missing (the spring-mass-damper model needs stiffness)"),
    ('title = "x"\n[system]\nmodel = "first-order"\n',
     "case.toml:2: system.time_constant: missing (the first-order model needs time_constant)"),
    ('title = "x"\n[system]\nmodel = "series-rlc"\ncapacitance = "1 uF"\n',
     "case.toml:2: system.inductance: missing (the series-rlc model needs inductance)"),
    (edit('duration = "1.5 ms"\n', ""),
     "case.toml:7: load[1].duration: missing (a rectangle load needs duration)"),
    (edit('amplitude = "10 kN"\n', ""),
     "case.toml:7: load[1].amplitude: missing (a rectangle load needs amplitude or impulse)"),
    (with_load('shape = "step"\n'),
     "case.toml:7: load[1].amplitude: missing (a step load needs amplitude)"),
    (with_load('shape = "impulse"\n'),
     "case.toml:7: load[1].impulse: missing (an impulse load needs impulse)"),
    (with_load('shape = "ramp"\n'),
     "case.toml:7: load[1].rate: missing (a ramp load needs rate)"),
    (with_load('shape = "trapezoid"\nhold = "1 ms"\nfall = "1 ms"\namplitude = "1 kN"\n'),
     "case.toml:7: load[1].rise: missing (a trapezoid load needs rise)"),
    (with_load('shape = "trapezoid"\nrise = "1 ms"\nfall = "1 ms"\namplitude = "1 kN"\n'),
     "case.toml:7: load[1].hold: missing (a trapezoid load needs hold)"),
    (with_load('shape = "trapezoid"\nrise = "1 ms"\nhold = "1 ms"\namplitude = "1 kN"\n'),
     "case.toml:7: load[1].fall: missing (a trapezoid load needs fall)"),
    (with_load('shape = "formula"\nduration = "1 ms"\n'),
     "case.toml:7: load[1].expr: missing (a formula load needs expr, a string in tau)"),
    (with_load('shape = "table"\n'),
     "case.toml:7: load[1].points: missing (a table load needs points or csv)"),
    (with_load('shape = "table"\npoints = [[0, 0], [1, 1]]\ncsv = "h.csv"\n'),
     "case.toml:10: load[1].csv: give points or csv, not both"),
    (edit('amplitude = "10 kN"', 'amplitude = "10 kN"\nrepeat = { count = 2 }'),
     "case.toml:12: load[1].repeat.every: missing (the time between repeats)"),
], ids=["title", "system", "model", "mass", "stiffness", "time_constant", "inductance",
        "duration", "amplitude or impulse", "step amplitude", "impulse", "rate", "rise", "hold",
        "fall", "expr", "points or csv", "points and csv", "repeat every"])
def test_missing_keys(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


# --- wrong types and dimensions ---------------------------------------------------------------

@pytest.mark.parametrize(("text", "expected"), [
    (edit('"2.6 MN/m"', '"2.6 kg"'),
     "case.toml:5: system.stiffness: wrong dimension (expected force/length, got mass)"),
    (edit('mass = "420 kg"', 'mass = "420 N"'),
     "case.toml:4: system.mass: wrong dimension (expected mass, got force)"),
    (edit('duration = "1.5 ms"', 'duration = "1.5 m"'),
     "case.toml:10: load[1].duration: wrong dimension (expected time, got length)"),
    (edit('amplitude = "10 kN"', 'amplitude = "10 kN/m"'),
     "case.toml:11: load[1].amplitude: wrong dimension (expected force, got force/length)"),
    (edit('amplitude = "10 kN"', 'impulse = "10 kN"'),
     "case.toml:11: load[1].impulse: wrong dimension (expected force*time, got force)"),
    (edit('until = "250 ms"', "until = 250"),
     "case.toml:13: report.until: number without a unit (expected time, e.g. \"12 s\", got the "
     "plain number 250)"),
    (edit('mass = "420 kg"', "mass = true"),
     "case.toml:4: system.mass: expected a quantity such as \"2.6 MN/m\" or a number, got a "
     "boolean"),
    (edit('model = "spring-mass-damper"', 'model = "spring-mass-dampr"'),
     "case.toml:3: system.model: unknown model 'spring-mass-dampr' (expected one of: "
     "spring-mass-damper, base-excitation, first-order, series-rlc, ode); did you mean "
     "'spring-mass-damper'?"),
    (edit('model = "spring-mass-damper"', 'model = "spr\u0456ng-mass-damper"'),
     "case.toml:3: system.model: unknown model 'spr\\u0456ng-mass-damper' (expected one of: "
     "spring-mass-damper, base-excitation, first-order, series-rlc, ode); did you mean "
     "'spring-mass-damper'?"),
    (edit('shape = "rectangle"', 'shape = "rectangel"'),
     "case.toml:8: load[1].shape: unknown shape 'rectangel' (expected one of: step, ramp, "
     "impulse, rectangle, triangle, decay, half-sine, trapezoid, table, formula); did you "
     "mean 'rectangle'?"),
    (edit('title = "Hammer on a skid"', 'title = "Hammer\\u202eon a skid"'),
     "case.toml:1: title: character not allowed at column 7 (expected printable text, got "
     "U+202E)"),
    (edit('title = "Hammer on a skid"', f'title = "{"x" * 600}"'),
     "case.toml:1: title: text too long (at most 500 characters, got 600)"),
], ids=["stiffness as mass", "mass as force", "duration as length", "amplitude as stiffness",
        "impulse as force", "until without unit", "boolean", "model typo", "model look-alike",
        "shape typo", "bidirectional override in title", "title too long"])
def test_wrong_values(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


# --- values out of range ----------------------------------------------------------------------

FIRST_ORDER = 'title = "x"\n[system]\nmodel = "first-order"\ntime_constant = "{}"\n'
RLC = 'title = "x"\n[system]\nmodel = "series-rlc"\ninductance = "{}"\ncapacitance = "{}"\n'


@pytest.mark.parametrize(("text", "expected"), [
    (edit('"420 kg"', '"0 kg"'),
     "case.toml:4: system.mass: must be positive (expected a positive value, got 0)"),
    (edit('"420 kg"', '"-420 kg"'),
     "case.toml:4: system.mass: must be positive (expected a positive value, got -420 kg)"),
    (edit('"2.6 MN/m"', "0"),
     "case.toml:5: system.stiffness: must be positive (expected a positive value, got 0)"),
    (edit('"2.6 MN/m"', '"-2.6 MN/m"'),
     "case.toml:5: system.stiffness: must be positive (expected a positive value, got "
     "-2.6e+06 N/m)"),
    (FIRST_ORDER.format("-0.8 s"),
     "case.toml:4: system.time_constant: must be positive (expected a positive value, got -0.8 s)"),
    (RLC.format("0 mH", "47 uF"),
     "case.toml:4: system.inductance: must be positive (expected a positive value, got 0)"),
    (RLC.format("2.2 mH", "-47 uF"),
     "case.toml:5: system.capacitance: must be positive (expected a positive value, got "
     "-4.7e-05 F)"),
    (RLC.format("2.2 mH", "47 uF") + 'resistance = "-3.3 ohm"\n',
     "case.toml:6: system.resistance: must not be negative (expected 0 or more, got -3.3 ohm)"),
    (edit("damping_ratio = 0.02", 'damping = "-1.3 kN*s/m"'),
     "case.toml:6: system.damping: must not be negative (expected 0 or more, got -1300 N*s/m)"),
    (edit("damping_ratio = 0.02", "damping_ratio = -0.02"),
     "case.toml:6: system.damping_ratio: must not be negative (expected 0 or more, got -0.02)"),
    (edit("damping_ratio = 0.02", 'damping_ratio = 0.02\ndamping = "1 N*s/m"'),
     "case.toml:6: system.damping_ratio: give damping or damping_ratio, not both"),
    (edit('duration = "1.5 ms"', 'duration = "0 ms"'),
     "case.toml:10: load[1].duration: must be positive (expected a positive time, got 0)"),
    (edit('duration = "1.5 ms"', 'duration = "-1.5 ms"'),
     "case.toml:10: load[1].duration: must be positive (expected a positive time, got -0.0015 s)"),
    (with_load('shape = "trapezoid"\nrise = "-1 ms"\nhold = "1 ms"\nfall = "1 ms"\n'
               'amplitude = "1 kN"\n'),
     "case.toml:9: load[1].rise: must not be negative (expected 0 or more, got -0.001 s)"),
    (with_load('shape = "trapezoid"\nrise = "0 ms"\nhold = "0 ms"\nfall = "0 ms"\n'
               'amplitude = "1 kN"\n'),
     "case.toml:10: load[1].hold: rise + hold + fall must be positive (expected a pulse that "
     "lasts, got 0 s in all)"),
    (edit('at = "20 ms"', 'at = "-20 ms"'),
     "case.toml:9: load[1].at: must not be negative (expected 0 or more, got -0.02 s)"),
    (edit('shape = "rectangle"', 'shape = "triangle"\npeak_at = 1.5'),
     "case.toml:9: load[1].peak_at: must lie between 0 and 1 (expected a fraction of the "
     "duration, got 1.5)"),
    (edit('shape = "rectangle"', 'shape = "triangle"\npeak_at = -0.25'),
     "case.toml:9: load[1].peak_at: must lie between 0 and 1 (expected a fraction of the "
     "duration, got -0.25)"),
    (edit('until = "250 ms"', 'until = "0 s"'),
     "case.toml:13: report.until: must be positive (expected a positive time, got 0)"),
    (edit('until = "250 ms"', 'until = "-250 ms"'),
     "case.toml:13: report.until: must be positive (expected a positive time, got -0.25 s)"),
    (edit('until = "250 ms"', 'until = "1e999 s"'),
     "case.toml:13: report.until: number exponent too large at column 1 (at most 300 in "
     "magnitude, got 999)"),
], ids=["mass zero", "mass negative", "stiffness zero", "stiffness negative",
        "time constant negative", "inductance zero", "capacitance negative",
        "resistance negative", "damping negative", "damping ratio negative", "damping twice",
        "duration zero", "duration negative", "rise negative", "trapezoid of no length",
        "start negative", "peak_at above 1", "peak_at below 0", "until zero", "until negative",
        "until beyond range"])
def test_values_out_of_range(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


# --- repeats ----------------------------------------------------------------------------------

def repeat(spec: str) -> str:
    return edit('amplitude = "10 kN"', f'amplitude = "10 kN"\nrepeat = {spec}')


@pytest.mark.parametrize(("text", "expected"), [
    (repeat('{ count = 3, every = "1 ms" }'),
     "case.toml:12: load[1].repeat.every: repeats would overlap (every 0.001 s is shorter than "
     "the load, 0.0015 s)"),
    (repeat('{ count = 0, every = "50 ms" }'),
     "case.toml:12: load[1].repeat.count: expected a whole number from 1 to 10000, got 0"),
    (repeat('{ count = 10001, every = "50 ms" }'),
     "case.toml:12: load[1].repeat.count: expected a whole number from 1 to 10000, got 10001"),
    (repeat('{ count = 2.5, every = "50 ms" }'),
     "case.toml:12: load[1].repeat.count: expected a whole number from 1 to 10000, got 2.5"),
    (repeat('{ count = 3, every = "0 ms" }'),
     "case.toml:12: load[1].repeat.every: must be positive (expected a positive time, got 0)"),
    (with_load('shape = "step"\namplitude = "1 kN"\nrepeat = { count = 2, every = "1 s" }\n'),
     "case.toml:10: load[1].repeat: a step that never ends cannot repeat"),
    (repeat('{ count = 6000, every = "2 ms" }'),
     "case.toml:7: load[1]: too many breakpoints (expected at most 10000 in all loads, got "
     "12000 up to this load)"),
], ids=["overlapping", "count zero", "count too large", "count not whole", "every zero",
        "endless step", "too many breakpoints"])
def test_repeat_errors(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


# --- tables: points and CSV -------------------------------------------------------------------

def points(values: str) -> str:
    return with_load(f'shape = "table"\npoints = {values}\n')       # points on line 9


@pytest.mark.parametrize(("text", "expected"), [
    (points("[[0, 0], [0.002, 5], [0.001, 3]]"),
     "case.toml:9: load[1].points[2]: times must not decrease (got 0.001 s after 0.002 s)"),
    (points("[[0, 0], [0.001, 5], [0.001, 3], [0.001, 2]]"),
     "case.toml:9: load[1].points[3]: duplicate time 0.001 s (a jump takes exactly two rows "
     "at the same time)"),
    (points("[[-0.001, 0], [0.001, 5]]"),
     "case.toml:9: load[1].points[0]: times start at 0 or later (local to 'at')"),
    (points("[[0, 0]]"),
     "case.toml:9: load[1].points: expected a list of at least two [t, value] pairs"),
    (points("[[0, 0], [0.001]]"),
     "case.toml:9: load[1].points[1]: expected a [t, value] pair, got [0.001]"),
    (points("[[0, 0], [0.001, true]]"),
     "case.toml:9: load[1].points[1]: expected a number, got a boolean"),
    (points("[[0, 0], [0, 5]]"),
     "case.toml:9: load[1].points: the table spans no time"),
    (points('[["0 ms", "0 kN"], ["1 ms", "1 kg"]]'),
     "case.toml:9: load[1].points[1]: wrong dimension (expected force, got mass)"),
    (points("[[0, 0], [1, 1]]") .replace("points =", 'units = ["kg", "kN"]\npoints ='),
     "case.toml:9: load[1].units: expected a time unit first, got mass"),
    (points("[[0, 0], [1, 1]]").replace("points =", 'units = ["ms", "kg"]\npoints ='),
     "case.toml:9: load[1].units: expected a unit of force second, got mass"),
    (points("[" + ", ".join(f"[{i}, 0]" for i in range(10001)) + "]"),
     "case.toml:9: load[1].points: too many points (at most 10000, got 10001)"),
], ids=["unsorted", "three at one time", "negative time", "one point", "not a pair",
        "not a number", "no time span", "wrong dimension", "units: time first",
        "units: load second", "too many"])
def test_table_points(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


@pytest.mark.parametrize(("content", "expected"), [
    ("0,0\n0.002,5\n0.001,3\n",
     "history.csv:3: load[1].csv: times must not decrease (got 0.001 s after 0.002 s)"),
    ("# a comment\n0,0\n0.001,5\n0.001,3\n0.001,2\n",
     "history.csv:5: load[1].csv: duplicate time 0.001 s (a jump takes exactly two rows at the "
     "same time)"),
    ("time [ms], force [kN]\n0,0\n1,5,7\n",
     "history.csv:3: load[1].csv: expected two columns (time, value), got 3"),
    ("0,0\n0.001,abc\n",
     "history.csv:2: load[1].csv: column 2: not a number (expected a number such as 0.25 or "
     "-1.5e3, got 'abc')"),
    ("0,0\n0.001,nan\n",
     "history.csv:2: load[1].csv: column 2: not a number (expected a number such as 0.25 or "
     "-1.5e3, got 'nan')"),
    ("0,0\n1 ms,5 kN\n",
     "history.csv:2: load[1].csv: column 1: not a plain number (expected a number, with the "
     "units in the header such as 'time [ms], force [kN]', got '1 ms')"),
    ("0,0\n0.001,1e999\n",
     "history.csv:2: load[1].csv: column 2: number exponent too large (at most 300 in "
     "magnitude, got 999)"),
    ("time [ms], force [kg]\n0,0\n1,5\n",
     "history.csv:1: load[1].csv: column 2: wrong unit in the header (expected a unit of force, "
     "got mass)"),
    ("time [m], force [kN]\n0,0\n1,5\n",
     "history.csv:1: load[1].csv: column 1: wrong unit in the header (expected a unit of time, "
     "got length)"),
    ("time [ms], force [kilonewtonz]\n0,0\n1,5\n",
     "history.csv:1: load[1].csv: column 2: unknown unit 'kilonewtonz' (expected a unit such "
     "as m, mm, kg, lb, N, kN/m, N*s/m, ms, V, ohm, uF)"),
    ("0,0\n0.001,5\0\n",
     "history.csv:2: load[1].csv: the CSV file contains a NUL byte (expected text)"),
    (b"0,0\n0.001,5\n0.002,\xff\n",
     "history.csv:3: load[1].csv: not UTF-8 text (expected UTF-8, got byte 0xFF)"),
    ("0,0\n" + '"' + "1" * 200_000 + '",2\n',
     "history.csv:2: load[1].csv: not a readable CSV row (field larger than field limit "
     "(131072))"),
    ("time [ms], force [kN]\n",
     "case.toml:9: load[1].csv: 'history.csv' holds fewer than two data rows (expected at "
     "least two rows of time, value)"),
    ("".join(f"{i},0\n" for i in range(10001)),
     "history.csv:10001: load[1].csv: too many rows (at most 10000 data rows)"),
], ids=["unsorted", "three at one time", "three columns", "not a number", "nan",
        "unit in a cell", "exponent", "header unit of the wrong dimension",
        "header time unit of the wrong dimension", "unknown header unit", "NUL byte",
        "not UTF-8", "huge cell", "no data rows", "too many rows"])
def test_csv_problems_name_the_csv_file_and_line(tmp_path, capsys, content, expected):
    assert_message(tmp_path, capsys, TABLE, expected, {"history.csv": content})


def test_csv_that_does_not_exist(tmp_path, capsys):
    assert_message(tmp_path, capsys, TABLE, "case.toml:9: load[1].csv: cannot read "
                   "'history.csv' (No such file or directory)")


def test_csv_that_is_a_folder(tmp_path, capsys):
    (tmp_path / "history.csv").mkdir()
    assert_message(tmp_path, capsys, TABLE, "case.toml:9: load[1].csv: cannot read "
                   "'history.csv' (expected a regular file, got a folder)")


def test_csv_that_is_too_large(tmp_path, capsys):
    assert_message(tmp_path, capsys, TABLE, "case.toml:9: load[1].csv: 'history.csv' is too "
                   "large (at most 2000000 bytes, got 2000001)",
                   {"history.csv": "0" * 2_000_001})


@pytest.mark.parametrize(("name", "expected"), [
    ("/etc/passwd",
     "case.toml:9: load[1].csv: absolute paths are refused (expected a file name relative to "
     "the case file's folder, got '/etc/passwd')"),
    ("../../etc/passwd",
     "case.toml:9: load[1].csv: paths leaving the case folder are refused (expected a file in "
     "the case file's folder or below it, got '../../etc/passwd')"),
    ("data/../../history.csv",
     "case.toml:9: load[1].csv: paths leaving the case folder are refused (expected a file in "
     "the case file's folder or below it, got 'data/../../history.csv')"),
    ("history\\u0000.csv",
     "case.toml:9: load[1].csv: expected a file name of printable characters, got "
     "'history\\x00.csv'"),
], ids=["absolute", "parent", "parent inside", "NUL"])
def test_csv_paths_outside_the_case_folder_are_refused(tmp_path, capsys, name, expected):
    assert_message(tmp_path, capsys, TABLE.replace("history.csv", name), expected)


def test_csv_through_a_link_leading_outside_is_refused(tmp_path, capsys):
    outside = tmp_path / "outside.csv"
    outside.write_text("0,0\n0.001,5\n")
    folder = tmp_path / "cases"
    folder.mkdir()
    (folder / "history.csv").symlink_to(outside)
    assert_message(folder, capsys, TABLE, "case.toml:9: load[1].csv: 'history.csv' leads "
                   "outside the case folder through a symbolic link (expected a file in the "
                   "case file's folder or below it)")


def test_csv_in_a_subfolder_and_through_a_link_inside_is_read(tmp_path, capsys):
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / "history.csv").write_text("t [ms], F [kN]\n0,0\n1,5\n2,0\n")
    (tmp_path / "link.csv").symlink_to(tmp_path / "data" / "history.csv")
    for name in ("data/history.csv", "link.csv"):
        code, out, err = derive(tmp_path, capsys, TABLE.replace("history.csv", name))
        assert (code, err) == (0, ""), err
        assert '"status": "verified"' in out


# --- symbols ----------------------------------------------------------------------------------

@pytest.mark.parametrize(("symbols", "expected"), [
    ('sin = "kg"',
     "case.toml:16: symbols.sin: reserved name (expected a name that is not a function or one "
     "of t, tau, s, u, v, pi, e, I, E, got 'sin')"),
    ('tau = "s"',
     "case.toml:16: symbols.tau: reserved name (expected a name that is not a function or one "
     "of t, tau, s, u, v, pi, e, I, E, got 'tau')"),
    ('2k = "N/m"',
     "case.toml:16: symbols.2k: not a valid symbol name (expected a letter followed by at most "
     "30 letters, digits or single underscores, got '2k')"),
    ('"k m" = "N/m"',
     "case.toml:16: symbols.\"k m\": not a valid symbol name (expected a letter followed by at "
     "most 30 letters, digits or single underscores, got 'k m')"),
    ('__class__ = "kg"',
     "case.toml:16: symbols.__class__: not a valid symbol name (expected a letter followed by "
     "at most 30 letters, digits or single underscores, got '__class__')"),
    ('k = { unit = "N/m", value = "-2.6 MN/m" }',
     "case.toml:16: symbols.k.value: must be positive (expected a positive value: symbols are "
     "positive reals, got -2.6e+06 N/m)"),
    ('k = { unit = "N/m", value = "0 N/m" }',
     "case.toml:16: symbols.k.value: must be positive (expected a positive value: symbols are "
     "positive reals, got 0)"),
    ('zeta = { value = -0.1 }',
     "case.toml:16: symbols.zeta.value: must be positive (expected a positive value: symbols "
     "are positive reals, got -0.1)"),
    ('k = { unit = "N/m", value = "2.6 kg" }',
     "case.toml:16: symbols.k.value: wrong dimension (expected force/length, got mass)"),
    ("k = 3",
     "case.toml:16: symbols.k: expected a unit string or { unit = …, value = … }, got an "
     "integer"),
], ids=["function name", "local time", "leading digit", "space", "dunder", "negative value",
        "zero value", "negative ratio", "value of the wrong dimension", "not a unit"])
def test_symbol_errors(tmp_path, capsys, symbols, expected):
    assert_message(tmp_path, capsys, BASE + f"[symbols]\n{symbols}\n", expected)


# --- the analysis window ----------------------------------------------------------------------

def test_load_entirely_outside_the_window_is_a_warning(tmp_path, capsys):
    text = edit('at = "20 ms"', 'at = "300 ms"')
    code, out, err = derive(tmp_path, capsys, text)
    assert code == 0
    assert err.splitlines() == [f"warning: {tmp_path / 'case.toml'}: load[1]: starts at or "
                                "after the end of the analysis window and does not act on it"]
    assert '"status": "verified"' in out


# --- other value types and tables in the wrong form ----------------------------------------------

@pytest.mark.parametrize(("text", "expected"), [
    (edit('mass = "420 kg"', "mass = 1979-05-27"),
     "case.toml:4: system.mass: expected a quantity such as \"2.6 MN/m\" or a number, got a date"),
    (edit('at = "20 ms"', 'at = "20 ms"\nlabel = 07:32:00'),
     "case.toml:10: load[1].label: expected a string, got a time of day"),
    (edit("[system]", "[[system]]"),
     "case.toml:2: system: expected a table, got an array"),
    (edit("[[load]]", "[load]"),
     "case.toml:7: load: loads are given as [[load]] tables"),
    (BASE + "[initial]\nvalues = [\"1 mm\"]\n",
     "case.toml:16: initial.values: expected 2 values x(0)…x^(1)(0), got ['1 mm']"),
], ids=["date", "time of day", "array of systems", "single load table", "initial count"])
def test_wrong_forms(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)


# --- problems found after loading are located like the others -----------------------------------

@pytest.mark.parametrize(("text", "expected"), [
    (edit("damping_ratio = 0.02", 'damping_ratio = 0.02\nregime = "critically-damped"'),
     "case.toml:7: system.regime: the stated regime 'critically-damped' contradicts the "
     "parameters, which give 'under-damped'"),
    (with_load('shape = "formula"\nexpr = "sin(tau^2)"\nduration = "1.5 ms"\nunit = "kN"\n'),
     "case.toml:9: load[1].expr: 'sin(tau**2)' is not of a linear function of tau (expected "
     "e.g. sin(2*pi*tau/T))"),
    ('title = "x"\n[system]\nmodel = "ode"\ncoefficients = [1, 0]\n[[load]]\nshape = "step"\n'
     "amplitude = 1\n",
     "case.toml: report.until: the model has no natural period or time constant to size a "
     "default window; give [report] until"),
], ids=["regime", "formula without a rational transform", "no default window"])
def test_problems_found_by_later_stages_name_file_and_line(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)

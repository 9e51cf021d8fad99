"""Hostile or broken case files never crash, hang, execute anything or leave files behind.

Every payload below goes into one field of an otherwise valid case file, which is derived
through the command line with an output folder (``-o``). Each must be refused with exit 2
and one line on stderr, quickly, without creating the marker file the payload names and
without writing anything into the output folder. Further tests cover the time budget, a
batch over a folder with good and bad cases, and the atomicity of failed runs.
"""

from __future__ import annotations

import json
import os
import re
import time
from collections.abc import Callable
from pathlib import Path

import pytest

from closedform.cli import main
from tests.conftest import check_run, replace_check_run

GOOD = """\
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
"""

FORMULA = GOOD.replace('shape = "rectangle"', 'shape = "formula"\nexpr = "{}"').replace(
    'amplitude = "10 kN"\n', 'unit = "kN"\n')


def toml(text: str) -> str:
    """``text`` as a TOML basic string (JSON escapes are TOML escapes for these payloads)."""
    return json.dumps(text, ensure_ascii=False)


def field(old: str, new_value: str) -> Callable[[Path], str]:
    """A payload that replaces the value of the line starting with ``old =`` in GOOD."""
    def build(_folder: Path) -> str:
        pattern = re.compile(rf"^{re.escape(old)} = .*$", re.MULTILINE)
        assert pattern.search(GOOD), old
        return pattern.sub(lambda _: f"{old} = {new_value}", GOOD, count=1)
    return build


def formula(expr: str) -> Callable[[Path], str]:
    return lambda _folder: FORMULA.replace('expr = "{}"', f"expr = {toml(expr)}")


def appended(text: str) -> Callable[[Path], str]:
    return lambda _folder: GOOD + text


def table(csv_name: str, prepare: Callable[[Path], None] | None = None
          ) -> Callable[[Path], str]:
    def build(folder: Path) -> str:
        if prepare is not None:
            prepare(folder)
        return GOOD.replace('shape = "rectangle"', f'shape = "table"\ncsv = {toml(csv_name)}') \
            .replace('duration = "1.5 ms"\namplitude = "10 kN"\n', "")
    return build


def million_rows(folder: Path) -> None:
    (folder / "big.csv").write_text("t [ms], F [kN]\n" + "0,0\n" * 1_000_000)


def link_outside(folder: Path) -> None:
    (folder / "linked.csv").symlink_to("/etc/passwd")


def fifo(folder: Path) -> None:
    os.mkfifo(folder / "pipe.csv")


def many_loads(_folder: Path) -> str:
    load = '[[load]]\nshape = "step"\namplitude = "1 N"\n'
    return GOOD + load * 1001


def many_points(_folder: Path) -> str:
    rows = ", ".join(f"[{i}, 0]" for i in range(10_001))
    return GOOD.replace('shape = "rectangle"', f'shape = "table"\npoints = [{rows}]').replace(
        'duration = "1.5 ms"\namplitude = "10 kN"\n', "")


def payloads(marker: Path) -> list[tuple[str, Callable[[Path], str]]]:
    """(name, case text builder); every builder gets the case folder to prepare files in."""
    touch = f"touch {marker}"
    opener = f"open('{marker}', 'w')"
    return [
        ("dunder import in mass", field("mass", toml(f"__import__('os').system('{touch}')"))),
        ("subclass walk in stiffness",
         field("stiffness", toml("().__class__.__bases__[0].__subclasses__()"))),
        ("lambda in amplitude", field("amplitude", toml(f"lambda: {opener}"))),
        ("exec hidden in a unit", field("amplitude", toml(f"10 exec('{opener}')"))),
        ("statement after a quantity",
         field("duration", toml(f"1.5 ms; __import__('os').system('{touch}')"))),
        ("attribute of a unit", field("mass", toml("420 kg.__class__"))),
        ("eval in a unit exponent", field("stiffness", toml("2.6 MN/m^(eval('9'))"))),
        ("unit exponent tower", field("stiffness", toml("2.6 N/m^(9^9^9)"))),
        ("power tower in a formula", formula("9**9**9")),
        ("nested parentheses", formula("(" * 5000 + "tau" + ")" * 5000)),
        ("dunder in a formula", formula("tau.__class__.__mro__")),
        ("call of a non-function", formula(f"getattr(tau, '__globals__')['{marker}']")),
        ("exponential tower", formula("exp(exp(exp(exp(10))))")),
        ("very long number", field("damping_ratio", toml("0." + "1" * 100_000))),
        ("very long title", field("title", toml("x" * 100_000))),
        ("very long key", appended(f"[claims]\n{'k' * 100_000} = 1\n")),
        ("NUL in a quantity", field("until", toml("250 ms\0"))),
        ("terminal escape in a label",
         field("at", '"20 ms"\nlabel = ' + toml("\x1b]0;owned\x07\x1b[2J"))),
        ("terminal escape in a key", appended(toml("\x1b[2J\x1b[31m") + " = 1\n")),
        ("Cyrillic look-alike in the model", field("model", toml("spring-mass-d\u0430mper"))),
        ("fullwidth letters in a unit", field("stiffness", toml("2.6 \uff2dN/m"))),
        ("zero-width space in a value", field("mass", toml("420\u200b kg"))),
        ("deeply nested arrays", field("mass", "[" * 5000 + "]" * 5000)),
        ("deeply nested inline tables",
         field("amplitude", '"10 kN"\nrepeat = ' + "{a=" * 5000 + "1" + "}" * 5000)),
        ("enormous repeat count",
         field("amplitude", '"10 kN"\nrepeat = { count = 9223372036854775807, every = "5 ms" }')),
        ("repeats beyond the breakpoint limit",
         field("amplitude", '"10 kN"\nrepeat = { count = 10000, every = "5 ms" }')),
        ("a thousand and one loads", many_loads),
        ("ten thousand and one table points", many_points),
        ("sympify in an initial value",
         appended('[initial]\nvalues = ["sympify(\'x\')", "0 m/s"]\n')),
        ("eval in a symbol value",
         appended('[symbols]\nk = { unit = "N/m", value = "eval(\'1\')" }\n')),
        ("import as a symbol name", appended(f"[symbols]\n{toml('__import__')} = \"kg\"\n")),
        ("shell in a display unit",
         appended(f"[report.units]\ndisplacement = {toml(f'mm; {touch}')}\n")),
        ("CSV path leaving the folder", table("../../etc/passwd")),
        ("absolute CSV path", table("/etc/passwd")),
        ("CSV link leading outside", table("linked.csv", link_outside)),
        ("CSV that is a FIFO", table("pipe.csv", fifo)),
        ("CSV of a million rows", table("big.csv", million_rows)),
    ]


def test_corpus_is_large_enough(tmp_path):
    assert len(payloads(tmp_path / "marker")) >= 20


@pytest.mark.parametrize("index", range(len(payloads(Path("marker")))),
                         ids=[name for name, _ in payloads(Path("marker"))])
def test_payload_is_refused_without_side_effects(tmp_path, capsys, index):
    marker = tmp_path / "PWNED"
    _, build = payloads(marker)[index]
    folder = tmp_path / "cases"
    folder.mkdir()
    out = tmp_path / "out"
    out.mkdir()
    case = folder / "case.toml"
    case.write_text(build(folder), encoding="utf-8")
    code = main(["derive", str(case), "-o", str(out), "--format", "md,json", "--time-budget", "20"])
    captured = capsys.readouterr()
    assert code == 2, captured.err
    lines = captured.err.splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"{case}:"), captured.err
    assert lines[0].isprintable() and len(lines[0]) < 600
    assert "Traceback" not in captured.err and "internal error" not in captured.err
    assert captured.out == ""
    assert not marker.exists()
    assert list(out.iterdir()) == []


def test_markup_in_free_text_is_valid_and_written_escaped(tmp_path, capsys):
    """Titles and labels are free text: markup in them is printed, never interpreted."""
    marker = tmp_path / "PWNED"
    title = rf"\input{{/etc/passwd}} \write18{{touch {marker}}} <script>x</script> $(touch {marker})"
    text = GOOD.replace('"Hammer on a skid"', toml(title)).replace(
        'at = "20 ms"', 'at = "20 ms"\nlabel = ' + toml("[link](javascript:x) | `code` $x$"))
    case = tmp_path / "case.toml"
    case.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["derive", str(case), "-o", str(out), "--format", "md,tex,json"]) == 0
    capsys.readouterr()
    assert not marker.exists()
    tex = (out / "case.tex").read_text()
    assert r"\input{/etc/passwd}" not in tex and r"\write18{" not in tex
    markdown = (out / "case.md").read_text()
    assert "<script>" not in markdown and "[link](javascript:x)" not in markdown
    assert json.loads((out / "case.json").read_text())["title"] == title


def test_case_file_that_is_a_fifo_does_not_hang(tmp_path, capsys):
    pipe = tmp_path / "case.toml"
    os.mkfifo(pipe)
    assert main(["derive", str(pipe), "--json", "-"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"{pipe}: cannot read the case file (expected a regular file, got a special file)"]


def test_case_file_that_is_too_large(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_text(GOOD + "#" * 1_000_000)
    assert main(["derive", str(case), "--json", "-"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"{case}: the case file is too large (at most 1000000 bytes, got {len(GOOD) + 1_000_000})"]


def test_file_name_with_control_characters_stays_on_one_line(tmp_path, capsys):
    case = tmp_path / "bad\nname\x1b[2J.toml"
    case.write_text('title = "x"\n')
    assert main(["derive", str(case), "--json", "-"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"{tmp_path}/bad\\nname\\x1b[2J.toml: system: the [system] table is required"]


# --- the time budget --------------------------------------------------------------------------

def slow_table(points: int = 1500) -> str:
    """A legitimately slow case: a table load of many irregular points, each a breakpoint
    with a piece to assemble and check."""
    rows = ", ".join(f"[{i}, {(i * 37) % 11 - 5}]" for i in range(points))
    return GOOD.replace('shape = "rectangle"', f'shape = "table"\nunits = ["ms", "kN"]\n'
                        f"points = [{rows}]").replace('duration = "1.5 ms"\namplitude = "10 kN"\n',
                                                      "").replace('"250 ms"', '"1600 ms"')


def test_slow_derivation_stops_at_the_budget_naming_stage_and_case(tmp_path, capsys):
    case = tmp_path / "slow.toml"
    case.write_text(slow_table())
    out = tmp_path / "out"
    code = main(["derive", str(case), "-o", str(out), "--time-budget", "2"])
    captured = capsys.readouterr()
    assert code == 1
    assert re.fullmatch(rf"error: {re.escape(str(case))}: the stage '[^']+' ran past the time "
                        r"budget of 2 s \(raise it with --time-budget\)\n", captured.err), \
        captured.err
    assert not out.exists()


def test_budget_names_the_stage_even_when_a_check_swallows_errors(tmp_path, capsys, monkeypatch):
    """A check that reports every Exception as a failed check must not turn the end of the
    budget into a failed check: the run stops, names the stage and writes nothing."""
    def stubborn_verify(_derivation):
        try:
            time.sleep(30)
        except Exception:   # noqa: BLE001 - what a careless check would do
            pass
        return []

    replace_check_run(monkeypatch, "verification", stubborn_verify)
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    out = tmp_path / "out"
    out.mkdir()
    code = main(["derive", str(case), "-o", str(out), "--time-budget", "4"])
    assert code == 1
    assert capsys.readouterr().err == (f"error: {case}: the stage 'verification' ran past the "
                                       "time budget of 4 s (raise it with --time-budget)\n")
    assert list(out.iterdir()) == []


def test_budget_covers_rendering(tmp_path, capsys, monkeypatch):
    import closedform.render

    def slow_render(*_args, **_kwargs):
        time.sleep(30)

    monkeypatch.setattr(closedform.render, "render_outputs", slow_render)
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    out = tmp_path / "out"
    assert main(["derive", str(case), "-o", str(out), "--time-budget", "5"]) == 1
    assert capsys.readouterr().err == (f"error: {case}: the stage 'rendering the sheets' ran "
                                       "past the time budget of 5 s (raise it with "
                                       "--time-budget)\n")
    assert not out.exists()


def test_budget_leaves_no_alarm_behind(tmp_path, capsys):
    import signal

    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    handler = signal.getsignal(signal.SIGALRM)
    assert main(["derive", str(case), "--json", "-", "--time-budget", "30"]) == 0
    capsys.readouterr()
    assert signal.getitimer(signal.ITIMER_REAL) == (0.0, 0.0)
    assert signal.getsignal(signal.SIGALRM) is handler


# --- batches: keep going, report everything, worst exit code ------------------------------------

def folder_of_cases(folder: Path) -> dict[str, Path]:
    folder.mkdir()
    files = {
        "a-good.toml": GOOD,
        "b-syntax.toml": 'title = "x"\n[system\n',
        "c-dimension.toml": GOOD.replace('"2.6 MN/m"', '"2.6 kg"'),
    }
    for name, text in files.items():
        (folder / name).write_text(text)
    return {name: folder / name for name in files}


@pytest.mark.parametrize("jobs", ["1", "2"])
def test_folder_with_one_good_and_two_bad_cases(tmp_path, capsys, jobs):
    paths = folder_of_cases(tmp_path / "cases")
    out = tmp_path / "out"
    code = main(["derive", str(tmp_path / "cases"), "-o", str(out), "--format", "json",
                 "--jobs", jobs])
    captured = capsys.readouterr()
    assert code == 2
    assert captured.err.splitlines() == [
        f"{paths['b-syntax.toml']}:2: TOML syntax error: Expected ']' at the end of a table "
        "declaration (column 8)",
        f"{paths['c-dimension.toml']}:5: system.stiffness: wrong dimension (expected "
        "force/length, got mass)",
    ]
    assert captured.out.startswith(f"{paths['a-good.toml']}: VERIFIED")
    assert sorted(p.name for p in out.iterdir()) == ["a-good.json"]


def test_batch_exit_code_is_the_worst_one(tmp_path, capsys, monkeypatch):
    """A good case (0), one past its budget (1) and a bad one (2): exit 2, all reported."""
    real_verify = check_run("verification")

    def verify(derivation):
        if derivation.case.title == "Slow":
            time.sleep(30)
        return real_verify(derivation)

    replace_check_run(monkeypatch, "verification", verify)
    folder = tmp_path / "cases"
    folder.mkdir()
    (folder / "a-good.toml").write_text(GOOD)
    (folder / "b-slow.toml").write_text(GOOD.replace("Hammer on a skid", "Slow"))
    code = main(["derive", str(folder), "--json", "-", "--time-budget", "4", "--jobs", "1"])
    captured = capsys.readouterr()
    assert code == 1
    assert [r["title"] for r in json.loads(captured.out)] == ["Hammer on a skid"]
    slow = (f"error: {folder / 'b-slow.toml'}: the stage 'verification' ran past the time "
            "budget of 4 s (raise it with --time-budget)")
    assert captured.err.splitlines() == [slow]
    (folder / "c-bad.toml").write_text("title = 3\n")
    code = main(["derive", str(folder), "--json", "-", "--time-budget", "4", "--jobs", "1"])
    captured = capsys.readouterr()
    assert code == 2
    assert [r["title"] for r in json.loads(captured.out)] == ["Hammer on a skid"]
    assert captured.err.splitlines() == [
        slow, f"{folder / 'c-bad.toml'}:1: title: a non-empty title string is required"]


# --- atomicity: a failed run leaves nothing behind ----------------------------------------------

def test_failed_run_leaves_no_new_files(tmp_path, capsys):
    out = tmp_path / "out"
    out.mkdir()
    (out / "earlier.md").write_text("kept")
    case = tmp_path / "case.toml"
    case.write_text(GOOD.replace('"420 kg"', '"-420 kg"'))
    assert main(["derive", str(case), "-o", str(out), "--format", "md,tex,json,csv,svg"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"{case}:4: system.mass: must be positive (expected a positive value, got -420 kg)"]
    assert [p.name for p in out.iterdir()] == ["earlier.md"]
    assert (out / "earlier.md").read_text() == "kept"


def test_failed_run_does_not_create_the_output_folder(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_text(GOOD.replace('duration = "1.5 ms"', 'duration = "0 ms"'))
    assert main(["derive", str(case), "-o", str(tmp_path / "new" / "out")]) == 2
    capsys.readouterr()
    assert not (tmp_path / "new").exists()


# --- the budget itself ------------------------------------------------------------------------

def test_alarm_landing_in_a_finaliser_is_not_lost():
    """Python only reports exceptions raised in finalisers; the budget must not print that
    report (a traceback) nor lose the alarm."""
    from closedform.budget import time_budget
    from closedform.errors import TimeBudgetExceeded

    class SlowToDie:
        def __del__(self):
            time.sleep(1.0)

    with pytest.raises(TimeBudgetExceeded) as caught:
        with time_budget(0.3, "case.toml") as budget, budget.stage("cleaning up"):
            SlowToDie()
            time.sleep(10)
    assert str(caught.value) == ("case.toml: the stage 'cleaning up' ran past the time budget "
                                 "of 0.3 s (raise it with --time-budget)")


def test_nested_budgets_share_the_earlier_deadline():
    from closedform.budget import time_budget
    from closedform.errors import TimeBudgetExceeded

    with pytest.raises(TimeBudgetExceeded) as caught:
        with time_budget(0.5, "outer.toml") as outer, outer.stage("reading"):
            with time_budget(30, "inner.toml") as inner, inner.stage("deriving"):
                time.sleep(10)
    assert str(caught.value) == ("inner.toml: the stage 'deriving' ran past the time budget "
                                 "of 0.5 s (raise it with --time-budget)")
    with pytest.raises(TimeBudgetExceeded) as caught:
        with time_budget(0.5, "outer.toml") as outer:
            with outer.stage("reading"), time_budget(0.1, "inner.toml"):
                pass
            with outer.stage("rendering"):
                time.sleep(10)
    assert str(caught.value) == ("outer.toml: the stage 'rendering' ran past the time budget "
                                 "of 0.5 s (raise it with --time-budget)")

"""Case files and folders from others (issue 13): names that never run commands, output
written as whole sets, interrupted and dying workers, the memory budget, option checks,
byte-order marks and invisible characters.

These are properties of the tool, not of the mathematics, so the checks are against the
file system, the processes and the exact messages; the derivations they run are the
plain skid case of tests/test_cli.py.
"""

from __future__ import annotations

import errno
import json
import os
import signal
import subprocess
import sys
import textwrap
import threading
import time
from pathlib import Path

import pytest

import closedform.derivation
from closedform import outputs, render
from closedform.cli import main
from tests.conftest import check_run, replace_check_run
from tests.test_cli import GOOD

ROOT = Path(__file__).resolve().parent.parent
PYTHON = sys.executable


needs_latex = pytest.mark.skipif(render.latex_command() is None, reason="pdflatex not on PATH")


def titled(title: str) -> str:
    return GOOD.replace("Hammer on a skid", title)


# --- 13.1 / 13.10: a file's name never runs anything, ordinary names make a PDF ----------------

HOSTILE_STEMS = [
    "-pdflatex=touch PWNED-1",
    "`touch PWNED-2`;$(touch PWNED-3); touch PWNED-4",
    "it's \"quoted\" & 50% ~user $HOME",
    "Brücke Łódź ταλαντωση",
]


@needs_latex
@pytest.mark.parametrize("stem", HOSTILE_STEMS)
def test_a_case_file_name_never_runs_a_command_and_still_gives_a_pdf(tmp_path, monkeypatch,
                                                                      capsys, stem):
    monkeypatch.chdir(tmp_path)
    cases = tmp_path / "cases"
    cases.mkdir()
    case = cases / f"{stem}.toml"
    case.write_text(GOOD, encoding="utf-8")
    out = tmp_path / "out"
    code = main(["derive", str(case), "-o", str(out), "--format", "pdf"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    # a leading '-' becomes '_' (an output name must not read as an option later either)
    assert (out / f"{stem.replace('-', '_', 1) if stem.startswith('-') else stem}.pdf"
            ).read_bytes().startswith(b"%PDF")
    assert not list(tmp_path.rglob("PWNED*")), "a command in the file name was run"
    assert not list(Path(os.environ.get("TMPDIR", "/tmp")).glob("PWNED*"))


def test_latex_runs_on_a_fixed_name_as_an_argument_list_without_a_shell(monkeypatch):
    """Whatever the sheet is called, LaTeX sees only `sheet.tex`, as a list, shell=False."""
    calls = []

    def fake_run(command, **options):
        calls.append((command, options))
        folder = Path(options["cwd"])
        (folder / "sheet.pdf").write_bytes(b"%PDF-fake")
        (folder / "sheet.log").write_text("fine")
        return subprocess.CompletedProcess(command, 0, b"", b"")

    monkeypatch.setattr(render.pdf.shutil, "which", lambda name: f"/usr/bin/{name}")
    monkeypatch.setattr(render.pdf.subprocess, "run", fake_run)
    pdf = render.compile_pdf("\\documentclass{article}", {"a-load.pdf": b"x"},
                             name="-pdflatex=`touch x`")
    assert pdf == b"%PDF-fake"
    [(command, options)] = calls
    assert command == ["pdflatex", "-no-shell-escape", "-interaction=nonstopmode",
                       "-halt-on-error", "sheet.tex"]
    assert options["shell"] is False
    assert options["env"]["shell_escape"] == "f"
    assert not Path(options["cwd"]).exists()   # the private folder is gone afterwards


def test_latex_refuses_figure_files_with_option_like_names(monkeypatch):
    monkeypatch.setattr(render.pdf.shutil, "which", lambda name: f"/usr/bin/{name}")
    with pytest.raises(closedform.errors.ClosedformError, match="not a plain file name"):
        render.compile_pdf("x", {"-shell-escape.pdf": b""})


# --- 13.13: control characters of a file name never reach output names --------------------

def test_control_and_invisible_characters_of_a_name_do_not_reach_output_names(tmp_path,
                                                                            capsys):
    case = tmp_path / "a\x1b[31mred\x07\u202eb\u200bc.toml"
    case.write_text(GOOD)
    out = tmp_path / "out"
    assert main(["derive", str(case), "-o", str(out), "--format", "json"]) == 0
    capsys.readouterr()
    assert [p.name for p in out.iterdir()] == ["a_[31mred__b_c.json"]


@pytest.mark.parametrize("name, stem", [
    ("-rf.toml", "_rf"), (".hidden.toml", "_hidden"), ("tab\there.toml", "tab_here"),
    ("line\u2028sep.toml", "line_sep"), ("tag\U000E0041.toml", "tag_"),
    ("soft\u00adhyphen.toml", "soft_hyphen"), ("\x7f.toml", "_"), ("Zürich 50%.toml", "Zürich 50%"),
])
def test_safe_stem(name, stem):
    assert outputs.safe_stem(name) == stem


# --- 13.6 / 13.7: a case's files are written as one set ------------------------------------

def old_set(folder: Path) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    for name in ("s.md", "s.json", "s.csv"):
        (folder / name).write_text("old " + name)


def listing(folder: Path) -> dict[str, str]:
    return {p.name: p.read_text() for p in sorted(folder.iterdir())}


def test_a_full_disk_halfway_through_a_set_leaves_the_old_set(tmp_path, monkeypatch):
    folder = tmp_path / "out"
    old_set(folder)
    real_fsync = os.fsync
    calls = []

    def fsync(descriptor):
        calls.append(descriptor)
        if len(calls) == 2:
            raise OSError(errno.ENOSPC, "No space left on device")
        real_fsync(descriptor)

    monkeypatch.setattr(outputs.os, "fsync", fsync)
    with pytest.raises(OSError, match="No space left"):
        outputs.write_set(folder, {"s.md": "new", "s.json": "new", "s.csv": "new"})
    assert listing(folder) == {"s.csv": "old s.csv", "s.json": "old s.json", "s.md": "old s.md"}


def test_an_error_while_renaming_puts_the_old_set_back(tmp_path, monkeypatch):
    folder = tmp_path / "out"
    old_set(folder)
    real_replace = os.replace
    calls = []

    def replace(source, target):
        calls.append(target)
        if len(calls) == 4:    # s.md aside, s.md in, s.json aside, then fail
            raise OSError(errno.EIO, "Input/output error")
        real_replace(source, target)

    monkeypatch.setattr(outputs.os, "replace", replace)
    with pytest.raises(OSError):
        outputs.write_set(folder, {"s.md": "new", "s.json": "new", "s.csv": "new"})
    assert listing(folder) == {"s.csv": "old s.csv", "s.json": "old s.json", "s.md": "old s.md"}


def test_a_signal_during_the_renames_waits_until_the_set_is_whole(tmp_path, monkeypatch):
    folder = tmp_path / "out"
    old_set(folder)
    seen = []
    previous = signal.signal(signal.SIGTERM, lambda *_: seen.append(listing(folder)))
    real_replace = os.replace

    def replace(source, target):
        real_replace(source, target)
        os.kill(os.getpid(), signal.SIGTERM)

    monkeypatch.setattr(outputs.os, "replace", replace)
    try:
        outputs.write_set(folder, {"s.md": "new", "s.json": "new", "s.csv": "new"})
    finally:
        signal.signal(signal.SIGTERM, previous)
    assert seen == [{"s.csv": "new", "s.json": "new", "s.md": "new"}]


def test_two_runs_into_one_folder_take_turns(tmp_path):
    """The renames of a set happen under a lock on the folder: a second writer waits."""
    folder = tmp_path / "out"
    folder.mkdir()
    finished = []
    with outputs.folder_lock(folder):
        writer = threading.Thread(target=lambda: finished.append(
            outputs.write_set(folder, {"s.md": "second"})))
        writer.start()
        writer.join(0.5)
        assert writer.is_alive() and not finished
        (folder / "s.md").write_text("first")
    writer.join(10)
    assert finished and listing(folder) == {"s.md": "second"}


def test_an_old_staging_folder_of_a_killed_run_is_removed(tmp_path):
    folder = tmp_path / "out"
    orphan = folder / f"{outputs.STAGE_PREFIX}dead"
    orphan.mkdir(parents=True)
    (orphan / "x.part").write_text("partial")
    long_ago = time.time() - 2 * outputs.ORPHAN_AGE
    os.utime(orphan, (long_ago, long_ago))
    outputs.write_set(folder, {"s.md": "new"})
    assert listing(folder) == {"s.md": "new"}


def test_a_case_whose_subfolder_is_a_file_is_reported_and_the_batch_goes_on(tmp_path, capsys):
    cases = tmp_path / "cases"
    for sub in ("a", "b"):
        (cases / sub).mkdir(parents=True)
        (cases / sub / f"{sub}.toml").write_text(GOOD)
    out = tmp_path / "out"
    out.mkdir()
    (out / "a").write_text("a file where a folder is needed")
    code = main(["derive", str(cases), "-o", str(out), "--format", "json", "--jobs", "1"])
    captured = capsys.readouterr()
    assert code == 2
    assert (out / "b" / "b.json").exists()
    assert (out / "a").read_text() == "a file where a folder is needed"
    assert captured.err.splitlines() == [
        f"error: {cases / 'a' / 'a.toml'}: derived, but nothing of it was written: cannot "
        f"write into '{out / 'a'}': File exists"]
    assert captured.out.splitlines()[0].startswith(f"{cases / 'b' / 'b.toml'}: VERIFIED")


def test_a_full_disk_in_a_batch_reports_the_case_and_goes_on(tmp_path, capsys, monkeypatch):
    cases = tmp_path / "cases"
    cases.mkdir()
    for name in ("a", "b", "c"):
        (cases / f"{name}.toml").write_text(GOOD)
    out = tmp_path / "out"
    real_open = open

    def full_for_b(file, mode="r", *args, **kwargs):
        if "w" in mode and Path(file).name == "b.json":
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_open(file, mode, *args, **kwargs)

    monkeypatch.setattr(outputs, "open", full_for_b, raising=False)
    code = main(["derive", str(cases), "-o", str(out), "--format", "json", "--jobs", "2"])
    captured = capsys.readouterr()
    assert code == 2
    assert sorted(p.name for p in out.iterdir()) == ["a.json", "c.json"]
    assert captured.err.splitlines() == [
        f"error: {cases / 'b.toml'}: derived, but nothing of it was written: cannot write "
        f"into '{out}': No space left on device"]


# --- 13.8: a worker that dies loses only its case --------------------------------------------

@pytest.mark.parametrize("jobs", ["1", "2"])
@pytest.mark.parametrize("death", ["exit", "kill"])
def test_a_dying_worker_loses_only_its_own_case(tmp_path, capsys, monkeypatch, jobs, death):
    real_verify = check_run("verification")

    def verify(derivation):
        if derivation.case.title == "Doomed":
            if death == "exit":
                os._exit(3)
            os.kill(os.getpid(), signal.SIGKILL)
        return real_verify(derivation)

    replace_check_run(monkeypatch, "verification", verify)
    cases = tmp_path / "cases"
    cases.mkdir()
    (cases / "a.toml").write_text(GOOD)
    (cases / "b.toml").write_text(titled("Doomed"))
    (cases / "c.toml").write_text(GOOD)
    out = tmp_path / "out"
    code = main(["derive", str(cases), "-o", str(out), "--format", "json", "--jobs", jobs])
    captured = capsys.readouterr()
    assert code == 1
    assert sorted(p.name for p in out.iterdir()) == ["a.json", "c.json"]
    reason = ("its worker process ended unexpectedly (exit status 3)" if death == "exit" else
              "its worker process was killed by SIGKILL (as the out-of-memory killer does)")
    assert captured.err.splitlines() == [
        f"error: {cases / 'b.toml'}: the case was not derived: {reason}"]
    assert len(captured.out.splitlines()) == 2


# --- 13.4: the memory budget -----------------------------------------------------------------

def test_a_case_past_its_memory_budget_fails_cleanly_and_alone(tmp_path, capsys, monkeypatch):
    real_verify = check_run("verification")
    hoard = []

    def verify(derivation):
        if derivation.case.title == "Greedy":
            while True:                      # about 1 GB/s until the budget ends it
                hoard.append(bytearray(50 * 1024 ** 2))
                time.sleep(0.02)
        return real_verify(derivation)

    replace_check_run(monkeypatch, "verification", verify)
    cases = tmp_path / "cases"
    cases.mkdir()
    (cases / "a.toml").write_text(titled("Greedy"))
    (cases / "b.toml").write_text(GOOD)
    code = main(["derive", str(cases), "--json", "-", "--memory-budget", "600MiB",
                 "--jobs", "2"])
    captured = capsys.readouterr()
    assert code == 1
    assert [r["title"] for r in json.loads(captured.out)] == ["Hammer on a skid"]
    assert captured.err.splitlines() == [
        f"error: {cases / 'a.toml'}: the derivation ran past the memory budget of 600 MiB "
        "(raise it with --memory-budget)"]


def test_check_and_appendix_run_their_cases_under_the_memory_budget_too(tmp_path, capsys,
                                                                        monkeypatch):
    """One batch worker for every command: `check` and `appendix` take --memory-budget
    and a case past it fails alone, named, like a case of `derive`."""
    real_verify = check_run("verification")
    hoard = []

    def verify(derivation):
        if derivation.case.title == "Greedy":
            while True:
                hoard.append(bytearray(50 * 1024 ** 2))
                time.sleep(0.02)
        return real_verify(derivation)

    replace_check_run(monkeypatch, "verification", verify)
    cases = tmp_path / "cases"
    cases.mkdir()
    (cases / "a.toml").write_text(titled("Greedy"))
    (cases / "b.toml").write_text(GOOD)
    over = (f"{cases / 'a.toml'}: the derivation ran past the memory budget of 600 MiB "
            "(raise it with --memory-budget)")
    assert main(["check", str(cases / "a.toml"), "--memory-budget", "600MiB"]) == 1
    assert capsys.readouterr().err.splitlines() == [f"error: {over}"]
    out = tmp_path / "out"
    assert main(["appendix", str(cases), "-o", str(out), "--format", "md", "--jobs", "1",
                 "--memory-budget", "600MiB"]) == 1
    assert capsys.readouterr().err.splitlines() == [f"a.toml: FAILED (not derived): {over}"]
    assert "## 1. FAILED — not derived: a.toml" in (out / "appendix.md").read_text()


def test_a_memory_error_inside_the_worker_is_reported_as_memory(tmp_path, capsys, monkeypatch):
    def verify(derivation):
        raise MemoryError

    replace_check_run(monkeypatch, "verification", verify)
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    assert main(["derive", str(case), "--json", "-"]) == 1
    assert capsys.readouterr().err.splitlines() == [
        f"error: {case}: the derivation ran out of memory (its worker's address-space limit)"]


@pytest.mark.parametrize("value, message", [
    ("4", "--memory-budget: expected a size such as 4GiB or 512MiB, got '4'"),
    ("lots", "--memory-budget: expected a size such as 4GiB or 512MiB, got 'lots'"),
    ("10MiB", "--memory-budget: must be at least 256MiB (the engine alone needs about "
              "200 MiB), got '10MiB'"),
])
def test_bad_memory_budgets(tmp_path, capsys, value, message):
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    assert main(["derive", str(case), "--memory-budget", value]) == 2
    assert capsys.readouterr().err.splitlines() == [message]
    assert main(["check", str(case), "--memory-budget", value]) == 2
    assert capsys.readouterr().err.splitlines() == [message]
    assert main(["appendix", str(tmp_path), "-o", str(tmp_path / "out"),
                 "--memory-budget", value]) == 2
    assert capsys.readouterr().err.splitlines() == [message]


def test_a_memory_budget_beyond_the_machine_is_refused(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    assert main(["derive", str(case), "--memory-budget", "1000TiB"]) == 2
    assert capsys.readouterr().err.startswith(
        "--memory-budget: must not exceed this machine's memory (")


# --- 13.6: signals ---------------------------------------------------------------------------

SLOW_RUNNER = textwrap.dedent("""
    import os, sys, time
    sys.path.insert(0, {root!r})
    import dataclasses
    from closedform.checks import registry
    from closedform.cli import main
    real = registry.FAMILIES[0].run
    assert registry.FAMILIES[0].name == "verification"
    def verify(derivation):
        if derivation.case.title == "Slow":
            with open(os.path.join({pids!r}, str(os.getpid())), "w"):
                pass
            time.sleep(600)
        return real(derivation)
    registry.FAMILIES = (dataclasses.replace(registry.FAMILIES[0], run=verify),) + registry.FAMILIES[1:]
    sys.exit(main(sys.argv[1:]))
    """)


@pytest.mark.parametrize("signum, code", [(signal.SIGINT, 130), (signal.SIGTERM, 143),
                                          (signal.SIGHUP, 129)])
def test_a_signal_stops_the_batch_ends_the_workers_and_names_what_was_written(
        tmp_path, signum, code):
    cases = tmp_path / "cases"
    cases.mkdir()
    (cases / "a.toml").write_text(GOOD)
    for name in ("b", "c"):
        (cases / f"{name}.toml").write_text(titled("Slow"))
    pids = tmp_path / "pids"
    pids.mkdir()
    out = tmp_path / "out"
    runner = tmp_path / "runner.py"
    runner.write_text(SLOW_RUNNER.format(root=str(ROOT), pids=str(pids)))
    process = subprocess.Popen([PYTHON, str(runner), "derive", str(cases), "-o", str(out),
                                "--format", "json", "--jobs", "2"],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and not ((out / "a.json").exists()
                                               and len(list(pids.iterdir())) == 2):
        time.sleep(0.1)
    workers = [int(p.name) for p in pids.iterdir()]
    assert len(workers) == 2
    sent = time.monotonic()
    process.send_signal(signum)
    _out, err = process.communicate(timeout=30)
    assert time.monotonic() - sent < 10
    assert process.returncode == code
    name = signal.Signals(signum).name
    assert err.splitlines()[-2:] == [
        f"stopped: 1 of 3 cases written ({cases / 'a.toml'}); the others were not written",
        f"interrupted ({name}); stopped"]
    for pid in workers:
        assert not Path(f"/proc/{pid}").exists(), f"worker {pid} still runs"
    assert sorted(p.name for p in out.iterdir()) == ["a.json"]


# --- 11.8, 12.7, 13.13: one place for option checks ------------------------------------------

@pytest.mark.parametrize("arguments, message", [
    (["derive", "{case}", "--format", "pdf"],
     "--format: writing pdf needs -o DIR (the folder for the files); --json - prints the "
     "JSON result"),
    (["derive", "{case}", "--format", "md,json"],
     "--format: writing md, json needs -o DIR (the folder for the files); --json - prints "
     "the JSON result"),
    (["derive", "{case}", "-o", "{out}", "--format", "docx"],
     "--format: unknown output format 'docx' (expected some of: md, tex, pdf, json, csv, svg)"),
    (["appendix", "{folder}", "-o", "{out}", "--format", "json"],
     "--format: unknown appendix format 'json' (expected some of: md, tex, pdf)"),
    (["derive", "{case}", "--time-budget", "0"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got 0"),
    (["derive", "{case}", "--time-budget", "-3"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got -3"),
    (["derive", "{case}", "--time-budget", "nan"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got nan"),
    (["derive", "{case}", "--time-budget", "inf"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got inf"),
    (["derive", "{case}", "--time-budget", "1e10"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got 1e+10"),
    (["check", "{case}", "--time-budget", "0"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got 0"),
    (["appendix", "{folder}", "-o", "{out}", "--time-budget", "1e10"],
     "--time-budget: must be a positive number of seconds up to 604800 (a week), got 1e+10"),
    (["derive", "{case}", "--jobs", "0"], "--jobs: must be from 1 to 256, got 0"),
    (["appendix", "{folder}", "-o", "{out}", "--jobs", "0"],
     "--jobs: must be from 1 to 256, got 0"),
    (["derive", "{case}", "-o", ""],
     "-o: must name a folder (use -o . for the current folder), got ''"),
    (["appendix", "{folder}", "--output="],
     "-o: must name a folder (use -o . for the current folder), got ''"),
    (["derive", "{case}", "--json", ""],
     "--json: expected '-' (standard output) or a file name, got ''"),
    (["derive", "{case}", "--json", "{folder}"],
     "--json: '{folder}' is a folder (expected '-' or a file name)"),
    (["check", "{case}", "--json", "{folder}/missing/x.json"],
     "--json: the folder of '{folder}/missing/x.json' does not exist"),
])
def test_option_errors_are_one_line_before_any_work(tmp_path, capsys, arguments, message):
    folder = tmp_path / "cases"
    folder.mkdir()
    case = folder / "case.toml"
    case.write_text(GOOD)
    names = {"case": str(case), "folder": str(folder), "out": str(tmp_path / "out")}
    argv = [a.format(**names) for a in arguments]
    assert main(argv) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err.splitlines() == [message.format(**names)]
    assert not (tmp_path / "out").exists()


def test_json_to_a_file_is_written_whole(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    target = tmp_path / "result.json"
    target.write_text("old")
    assert main(["derive", str(case), "--json", str(target)]) == 0
    assert capsys.readouterr().out == ""
    assert json.loads(target.read_text())["status"] == "verified"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["case.toml", "result.json"]


def test_json_to_a_file_for_check_and_spectrum(tmp_path, capsys):
    target = tmp_path / "spectrum.json"
    assert main(["spectrum", "--shape", "rectangle", "--ratios", "0.5", "--json",
                 str(target)]) == 0
    assert capsys.readouterr().out == ""
    assert json.loads(target.read_text())["points"]


def test_the_light_format_lists_match_the_renderers():
    from closedform import appendix, audit, options
    assert options.SHEET_FORMATS == render.FORMATS
    assert options.APPENDIX_FORMATS == appendix.APPENDIX_FORMATS
    assert getattr(audit, "AUDIT_FORMATS", options.AUDIT_FORMATS) == options.AUDIT_FORMATS


# --- 13.13: byte-order mark and invisible characters ---------------------------------------

def test_a_utf8_byte_order_mark_at_the_start_is_read(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_bytes(b"\xef\xbb\xbf" + GOOD.lstrip().encode())
    assert main(["derive", str(case), "--json", "-"]) == 0
    assert json.loads(capsys.readouterr().out)["title"] == "Hammer on a skid"


@pytest.mark.parametrize("character", [
    "\u200b", "\u200c", "\u200d", "\u2060", "\ufeff", "\u2028", "\u2029", "\U000e0041",
    "\U000e007f", "\u00ad", "\u202a", "\u202e", "\u2066", "\u2069", "\u200e",
])
@pytest.mark.parametrize("key, text", [
    ("title", 'title = "Hammer{c}on a skid"'),
    ("reference", 'title = "Hammer on a skid"\nreference = "Cal{c}c 7"'),
    ("load[1].label", None),
])
def test_invisible_characters_in_free_text_are_an_error_naming_key_and_code_point(
        tmp_path, capsys, character, key, text):
    from closedform.case import load_case_text
    from closedform.errors import CaseError

    if text is None:
        source = GOOD.replace('shape = "rectangle"', f'shape = "rectangle"\nlabel = "ha{character}mmer"')
        column = 3
    else:
        source = GOOD.replace('title = "Hammer on a skid"', text.format(c=character))
        column = 7 if key == "title" else 4
    with pytest.raises(CaseError) as raised:
        load_case_text(source)
    message = str(raised.value)
    assert f": {key}: character not allowed at column {column} (expected printable text, " \
           f"got U+{ord(character):04X})" in message


def test_ordinary_text_of_other_scripts_is_kept():
    from closedform.case import load_case_text
    case = load_case_text(titled("Brücke über die Łaba — ταλάντωση, 振動"))
    assert case.title == "Brücke über die Łaba — ταλάντωση, 振動"


# --- issue 18: the command line starts without the engine --------------------------------

HEAVY = ("sympy", "pint", "numpy", "mpmath", "matplotlib")
PROBE = textwrap.dedent("""
    import contextlib, io, sys
    sys.path.insert(0, {root!r})
    {code}
    print("HEAVY:" + ",".join(m for m in {heavy!r} if m in sys.modules))
    """)


def heavy_after(code: str) -> list[str]:
    finished = subprocess.run([PYTHON, "-c", PROBE.format(root=str(ROOT), code=code, heavy=HEAVY)],
                              capture_output=True, text=True, timeout=120, cwd=ROOT)
    line = [li for li in finished.stdout.splitlines() if li.startswith("HEAVY:")][-1]
    return [m for m in line[len("HEAVY:"):].split(",") if m]


def package_is_light() -> bool:
    return heavy_after("import closedform") == []


@pytest.mark.parametrize("arguments", [
    None, ["--help"], ["--version"], ["derive", "x.toml", "--jobs", "0"],
    ["derive", "x.toml", "--time-budget", "1e10"], ["derive", "x.toml", "--format", "pdf"],
])
def test_the_command_line_imports_nothing_heavy_for_help_version_and_option_errors(arguments):
    if not package_is_light():
        pytest.skip("closedform/__init__.py still imports the engine (its lazy import lands "
                    "separately); the command line itself is light")
    if arguments is None:
        code = "import closedform.cli"
    else:
        code = ("from closedform.cli import main\n"
                "with contextlib.redirect_stdout(io.StringIO()), "
                "contextlib.redirect_stderr(io.StringIO()):\n"
                f"    main({arguments!r})")
    assert heavy_after(code) == []


@pytest.mark.parametrize("content", [None, "title = 'x'\n[system\n", b"\xff\xfe"])
def test_an_unreadable_case_file_or_a_toml_syntax_error_is_refused_before_the_engine_loads(
        tmp_path, content):
    """Issue 18: an input error of the case file itself costs no engine import (probed in
    the worker's own code, run in this process: the command line hands cases to workers)."""
    path = tmp_path / "case.toml"
    if content is not None:
        path.write_bytes(content if isinstance(content, bytes) else content.encode())
    code = ("from closedform.batch import CaseTask, SheetFiles, run_case\n"
            f"outcome = run_case(CaseTask({str(path)!r}, None, SheetFiles(('md',))))\n"
            "assert outcome.exit_code == 2, outcome\n"
            "assert 'case.toml' in outcome.message, outcome")
    assert heavy_after(code) == []


def test_the_record_spectrum_runs_without_sympy(tmp_path):
    """Issue 18: the record spectrum is float64 throughout (its map's coefficients from the
    closed form, its checks in numpy), so it must not pay for importing sympy or mpmath."""
    record = tmp_path / "record.csv"
    record.write_text("time [s], acceleration [g0]\n" + "".join(
        f"{i * 0.01:.2f}, {0.1 * ((i * 7) % 5 - 2):.3f}\n" for i in range(50)))
    code = ("from closedform.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    assert main(['spectrum', '--record', {str(record)!r}, '--damping-ratio',"
            " '0.05', '--periods', '0.05:2:20', '--json', '-']) == 0\n")
    assert set(heavy_after(code)) <= {"numpy", "pint"}


def test_an_unreadable_case_file_is_refused_in_the_parent_without_a_worker(tmp_path,
                                                                           monkeypatch):
    """Issue 18: the input-error target (0.3x the floor) leaves no room for starting a worker
    process; a batch refuses the unreadable files itself, keeps its order, and hands only
    the readable cases to workers, with the outcome run_case would give."""
    from closedform import batch

    good = tmp_path / "good.toml"
    good.write_text("title = 'x'\n")
    missing, broken = tmp_path / "missing.toml", tmp_path / "broken.toml"
    broken.write_text("title = 'x'\n[system\n")
    handed: list[str] = []

    def fake_map(function, arguments, names, **options):
        handed.extend(str(a[0].path) for a in arguments)
        results = [batch.not_derived(str(a[0].path), "stand-in") for a in arguments]
        for index, result in enumerate(results):
            options["on_done"](index, result)
        return results

    monkeypatch.setattr(batch, "map_cases", fake_map)
    tasks = [batch.CaseTask(str(p), None, batch.SheetFiles(("md",)))
             for p in (missing, good, broken)]
    seen: dict[int, object] = {}
    outcomes = batch.run_cases(tasks, progress=False, on_done=seen.__setitem__)
    assert handed == [str(good)]
    assert [o.path for o in outcomes] == [str(missing), str(good), str(broken)]
    assert sorted(seen) == [0, 1, 2]
    for index in (0, 2):
        alone = batch.run_case(tasks[index])
        assert (outcomes[index].exit_code, outcomes[index].message) == (2, alone.message)
    monkeypatch.setattr(batch, "map_cases", lambda *a, **k: pytest.fail("a worker was started"))
    [outcome] = batch.run_cases(tasks[:1], progress=False)
    assert outcome.exit_code == 2 and "missing.toml" in outcome.message


def test_the_listed_help_of_each_command_is_its_own():
    """The command line lists check/appendix/spectrum without importing them; the one-line
    help it shows must be the one each module registers."""
    import argparse

    from closedform import cli

    for name, (module, summary) in cli.COMMAND_MODULES.items():
        parser = argparse.ArgumentParser()
        commands = parser.add_subparsers(dest="command")
        __import__(module, fromlist=["register"]).register(commands)
        [action] = [a for a in commands._choices_actions if a.dest == name]
        assert action.help == summary, name


def test_a_case_stuck_where_the_alarm_cannot_reach_is_ended_by_the_parent(tmp_path, capsys,
                                                                         monkeypatch):
    """Compiled code that never returns to Python cannot be interrupted by the budget's
    alarm (simulated by blocking SIGALRM); the parent ends the worker a grace period past
    the budget and names the case."""
    import closedform.batch

    real_verify = check_run("verification")

    def verify(derivation):
        if derivation.case.title == "Stuck":
            signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGALRM})
            time.sleep(600)
        return real_verify(derivation)

    replace_check_run(monkeypatch, "verification", verify)
    monkeypatch.setattr(closedform.batch, "GRACE_SECONDS", 1.0)
    cases = tmp_path / "cases"
    cases.mkdir()
    (cases / "a.toml").write_text(titled("Stuck"))
    (cases / "b.toml").write_text(GOOD)
    start = time.monotonic()
    code = main(["derive", str(cases), "--json", "-", "--time-budget", "2", "--jobs", "1"])
    captured = capsys.readouterr()
    assert time.monotonic() - start < 60
    assert code == 1
    assert [r["title"] for r in json.loads(captured.out)] == ["Hammer on a skid"]
    assert captured.err.splitlines() == [
        f"error: {cases / 'a.toml'}: the case was not derived: it ran past its time budget "
        "and did not stop (its worker process was ended)"]


def test_check_formats_follow_the_same_rules_once_check_writes_files(tmp_path, capsys):
    from closedform import cli

    parser = cli._parser(["check"])
    check = parser._subparsers._group_actions[0].choices["check"]
    if not any("--format" in a.option_strings for a in check._actions):
        pytest.skip("check has no --format (yet)")
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    assert main(["check", str(case), "--format", "pdf"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        "--format: writing pdf needs -o DIR (the folder for the files); --json - prints the "
        "JSON result"]
    assert main(["check", str(case), "-o", str(tmp_path / "out"), "--format", "docx"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        "--format: unknown audit format 'docx' (expected some of: md, tex, pdf, json)"]


# ----------------------------------------------------------------------------- no text parsed

@pytest.mark.parametrize("stem", ["drop-hammer-skid", "measured-history", "blast-wall-yielding",
                                  "wall-girt-blast-yielding", "symbolic-rectangle",
                                  "audit-rack-upright", "several-masses/instrument-rack-slab"])
def test_no_text_reaches_sympify_on_any_route(monkeypatch, stem):
    """Every ``sympy.sympify`` call of the engine, the checks, the audit and the sheets gets
    a sympy or Python number, never text (sympify would parse text as an expression): one
    worked case of each route (exact, long table from a CSV, yielding spring, member,
    symbolic, claims, several masses) is derived, audited and rendered with text refused."""
    import sympy

    from closedform.audit import audit

    original = sympy.sympify
    seen: list[str] = []

    def numbers_only(value, *arguments, **options):
        if isinstance(value, str):
            seen.append(value)
            raise AssertionError(f"text reached sympify: {value!r}")
        return original(value, *arguments, **options)

    monkeypatch.setattr(sympy, "sympify", numbers_only)
    derivation = closedform.derivation.derive(
        closedform.load_case(ROOT / "worked_cases" / f"{stem}.toml"))
    assert derivation.status == "verified"
    render.render_markdown(derivation, stem=Path(stem).name)
    if derivation.case.claims:
        audit(derivation)
    assert seen == []

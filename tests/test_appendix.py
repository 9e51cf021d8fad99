"""``closedform appendix``: one document for a folder of cases, end to end in temporary folders."""

from __future__ import annotations

import dataclasses
import io
import pickle
import textwrap
from pathlib import Path

import pytest

import closedform.derivation
from closedform import appendix, render
from closedform.batch import TerminalProgress
from closedform.checks.base import Check
from closedform.cli import main
from closedform.errors import DerivationError

STEP = """
title = "Step on a spring-mass"
reference = "AP-1"
[system]
model = "spring-mass-damper"
mass = "1 kg"
stiffness = "4 N/m"
damping_ratio = 0.05
[[load]]
shape = "step"
amplitude = "1 N"
[report]
until = "3 s"
units = { displacement = "mm" }
"""

IMPULSE = """
title = "Tap on a lag & its 100% reading"
[system]
model = "first-order"
time_constant = "0.5 s"
[[load]]
shape = "impulse"
at = "0.2 s"
impulse = "1 s"
[report]
until = "2 s"
"""


def write(folder: Path, name: str, text: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


@pytest.fixture
def cases(tmp_path) -> Path:
    folder = tmp_path / "cases"
    write(folder, "b-step.toml", STEP)
    write(folder, "a-tap.toml", IMPULSE)
    write(folder, "notes.txt", "not a case")
    return folder


def test_appendix_writes_one_document_with_contents_summary_and_sections(cases, tmp_path, capsys):
    out = tmp_path / "out"
    code = main(["appendix", str(cases), "-o", str(out)])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert captured.err == ""          # no progress bar when standard error is not a terminal
    assert "2 cases, 0 failed" in captured.out
    assert sorted(p.name for p in out.iterdir()) == [
        "a-tap-load.pdf", "a-tap-load.svg", "a-tap-response.pdf", "a-tap-response.svg",
        "appendix.md", "appendix.tex",
        "b-step-load.pdf", "b-step-load.svg", "b-step-response.pdf", "b-step-response.svg"]
    md = (out / "appendix.md").read_text(encoding="utf-8")
    lines = md.splitlines()
    assert lines[0] == "# Appendix: transient-response derivations"
    assert lines[2] == "**Status: VERIFIED — all 2 cases passed every independent check.**"
    assert "1. [Tap on a lag & its 100% reading](#case-a-tap)" in md
    assert "2. [Step on a spring-mass](#case-b-step)" in md
    assert md.index("## Contents") < md.index("## Summary") < md.index("## 1. Tap on a lag")
    assert md.index("## 1. Tap on a lag") < md.index("## 2. Step on a spring-mass")
    assert "### 2.1 Problem" in md and "### 2.8 Assumptions and caution" in md
    assert "| [2](#case-b-step) | Step on a spring-mass (b-step.toml) | AP-1 |" in md
    assert "This appendix supports, and does not replace" in md
    tex = (out / "appendix.tex").read_text(encoding="utf-8")
    assert r"\tableofcontents" in tex
    assert r"\section{Tap on a lag \& its 100\% reading}\label{case:a-tap}" in tex
    assert r"\ref{case:b-step}" in tex


def test_failed_cases_come_first_in_the_summary_and_exit_1(cases, tmp_path, capsys, monkeypatch):
    real = closedform.derivation.derive

    def derive(case, **options):
        derivation = real(case, **options)
        if case.title.startswith("Step"):
            return dataclasses.replace(
                derivation, checks=(Check("initial values", False, "off by 1"),))
        return derivation

    monkeypatch.setattr(closedform.derivation, "derive", derive)
    out = tmp_path / "out"
    code = main(["appendix", str(cases), "-o", str(out), "--format", "md"])
    captured = capsys.readouterr()
    assert code == 1
    assert "b-step.toml: FAILED" in captured.err
    md = (out / "appendix.md").read_text(encoding="utf-8")
    assert md.splitlines()[2] == ("**FAILED — 1 of 2 cases did not pass their independent checks. "
                                  "Do not use those results.**")
    summary = md[md.index("## Summary"):md.index("## 1.")]
    assert summary.index("b-step.toml") < summary.index("a-tap.toml")
    assert "**FAILED**" in summary
    assert "## 2. FAILED — do not use: Step on a spring-mass" in md


def test_a_case_that_cannot_be_derived_is_reported_as_failed(cases, tmp_path, monkeypatch, capsys):
    real = closedform.derivation.derive

    def derive(case, **options):
        if case.title.startswith("Tap"):
            raise DerivationError("inverse transform came out empty")
        return real(case, **options)

    monkeypatch.setattr(closedform.derivation, "derive", derive)
    out = tmp_path / "out"
    assert main(["appendix", str(cases), "-o", str(out), "--format", "md"]) == 1
    assert "a-tap.toml: FAILED (not derived): inverse transform came out empty" in capsys.readouterr().err
    md = (out / "appendix.md").read_text(encoding="utf-8")
    assert "## 1. FAILED — not derived: Tap on a lag & its 100% reading" in md


def test_every_unusable_case_file_is_reported_and_nothing_is_written(cases, tmp_path, capsys):
    write(cases, "c-bad.toml", STEP.replace('mass = "1 kg"', 'mass = "1 kgg"'))
    write(cases, "d-broken.toml", "title = \n")
    out = tmp_path / "out"
    assert main(["appendix", str(cases), "-o", str(out)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0].startswith(f"{cases / 'c-bad.toml'}:6: system.mass: ")
    assert err[1].startswith(f"{cases / 'd-broken.toml'}:1: TOML syntax error")
    assert err[2] == "error: 2 of 4 case files are unusable; nothing was written"
    assert not out.exists()


@pytest.mark.parametrize(("arguments", "message"), [
    (["missing-folder"], "missing-folder: not a folder (expected a folder of case files)"),
    (["{empty}"], "{empty}: no case files (*.toml) in this folder"),
    (["{cases}", "--format", "md,docx"], "--format: unknown appendix format 'docx' "
                                         "(expected some of: md, tex, pdf)"),
])
def test_unusable_arguments_exit_2_with_one_line(arguments, message, cases, tmp_path, capsys):
    empty = tmp_path / "empty"
    empty.mkdir()
    names = {"cases": str(cases), "empty": str(empty)}
    arguments = [a.format(**names) for a in arguments]
    assert main(["appendix", *arguments, "-o", str(tmp_path / "out")]) == 2
    assert capsys.readouterr().err.strip() == message.format(**names)


def test_appendix_is_identical_across_runs(cases):
    first, _, _ = appendix.build_appendix(cases, ["md"])
    second, _, _ = appendix.build_appendix(cases, ["md"])
    assert first == second


def test_prepared_case_is_picklable_for_a_process_pool(cases):
    entry = appendix.prepare_case(cases / "b-step.toml", 2, "b-step", ("md",))
    copy = pickle.loads(pickle.dumps(entry))
    assert copy == entry
    assert copy.status == "verified" and copy.markdown.startswith("## 2. Step on a spring-mass")
    bad = write(cases, "bad.toml", "title = 1\n")
    problem = appendix.prepare_case(bad, 3, "bad", ("md",))
    assert pickle.loads(pickle.dumps(problem)) == problem
    assert problem.message == f"{bad}:1: title: a non-empty title string is required"


def test_progress_bar_draws_on_one_line():
    stream = io.StringIO()
    bar = TerminalProgress(stream)
    bar(1, 4, "a.toml")
    bar(4, 4, "")
    text = stream.getvalue()
    assert text.startswith("\r[######------------------] 1/4 a.toml")
    assert text.endswith("\n") and "[########################] 4/4" in text


@pytest.mark.slow
@pytest.mark.skipif(render.latex_command() is None, reason="latexmk/pdflatex not on PATH")
def test_appendix_pdf_compiles(cases, tmp_path):
    out = tmp_path / "out"
    assert main(["appendix", str(cases), "-o", str(out), "--format", "pdf"]) == 0
    assert (out / "appendix.pdf").read_bytes().startswith(b"%PDF")
    assert sorted(p.name for p in out.iterdir()) == ["appendix.pdf"]

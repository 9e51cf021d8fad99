"""Derivation sheets: golden files for every worked case, escaping, failure banners,
reproducibility, output files and PDF compilation.

The golden files in tests/golden/ hold the Markdown and LaTeX sheet of every case in
worked_cases/. After a deliberate change to the engine, the checks or the templates,
regenerate them from the repository root with

    python -m tests.test_render --update-golden

and review the diff like any other change to the sheets.
"""

from __future__ import annotations

import dataclasses
import math
import shutil
import sys
import textwrap
from pathlib import Path

import pytest

import closedform
from closedform import render
from closedform.checks.base import Check
from closedform.errors import ClosedformError

from .conftest import worked_derivation

ROOT = Path(__file__).resolve().parent.parent
WORKED = ROOT / "worked_cases"
GOLDEN = Path(__file__).resolve().parent / "golden"
CASES = sorted(path.stem for path in WORKED.glob("*.toml"))
REGENERATE = "python -m tests.test_render --update-golden"
HAS_LATEX = render.latex_command() is not None
needs_latex = pytest.mark.skipif(not HAS_LATEX, reason="latexmk/pdflatex not on PATH")


worked = worked_derivation      # derived once per session (tests/conftest.py)


def sheets(stem: str) -> dict[str, str]:
    derivation = worked(stem)
    return {"md": render.render_markdown(derivation, stem=stem),
            "tex": render.render_latex(derivation, standalone=True, stem=stem)}


def derive_text(text: str, name: str = "sheet.toml") -> closedform.Derivation:
    return closedform.derive(closedform.load_case_text(textwrap.dedent(text), name))


STEP = """
title = "Step on an undamped oscillator"
reference = "T-1"
[system]
model = "spring-mass-damper"
mass = "1 kg"
stiffness = "4 N/m"
[[load]]
shape = "step"
amplitude = "1 N"
[report]
until = "2 s"
units = { displacement = "mm", time = "ms" }
"""


# ----------------------------------------------------------------------------- golden files


@pytest.mark.parametrize("stem", CASES)
@pytest.mark.parametrize("suffix", ["md", "tex"])
def test_sheet_matches_its_golden_file(stem, suffix):
    golden = GOLDEN / f"{stem}.{suffix}"
    assert golden.exists(), f"no golden file {golden.name}; run {REGENERATE}"
    assert sheets(stem)[suffix] == golden.read_text(encoding="utf-8"), \
        f"{stem}.{suffix} differs from its golden file; if the change is intended, run {REGENERATE}"


def test_golden_files_are_exactly_the_worked_cases():
    golden = {path.stem for path in GOLDEN.glob("*.md")} | {path.stem for path in GOLDEN.glob("*.tex")}
    assert golden == set(CASES), f"stale or missing golden files; run {REGENERATE}"


def update_golden() -> None:
    GOLDEN.mkdir(exist_ok=True)
    for stale in [*GOLDEN.glob("*.md"), *GOLDEN.glob("*.tex")]:
        if stale.stem not in CASES:
            stale.unlink()
    for stem in CASES:
        for suffix, text in sheets(stem).items():
            (GOLDEN / f"{stem}.{suffix}").write_text(text, encoding="utf-8")
        print(f"wrote tests/golden/{stem}.md and .tex")


# ----------------------------------------------------------------------------- content


def test_sheet_states_header_assumptions_and_caution():
    md = sheets("drop-hammer-skid")["md"]
    lines = md.splitlines()
    assert lines[0] == "# Drop-hammer blow on an instrument skid"
    assert lines[2].startswith("**Status: VERIFIED")
    assert "| Reference | CF-DEMO-001 |" in md
    assert "| Case file | drop-hammer-skid.toml |" in md
    assert f"| Tool | closedform {closedform.__version__} |" in md
    assert "| SHA-256 of the case file | " + worked("drop-hammer-skid").case.sha256 in md
    assert render.CAUTION in md
    assert "viscous (velocity-proportional) damping" in md
    for heading in ("Problem", "Load as singularity terms", "Laplace transform",
                    "Partial fractions and inverse transforms", "Response on each interval",
                    "Results", "Independent checks", "Assumptions and caution"):
        assert heading in md
    tex = sheets("drop-hammer-skid")["tex"]
    assert r"\documentclass" in tex and r"\begin{document}" in tex
    assert r"\includegraphics[width=0.9\linewidth]{drop-hammer-skid-response.pdf}" in tex


def test_sheet_shows_every_check_and_every_extra_result_field():
    derivation = worked("drop-hammer-skid")
    md = sheets("drop-hammer-skid")["md"]
    for check in derivation.checks:
        assert render.markdown_escape(check.name) in md
    from closedform.results import result_fields
    for key in result_fields(derivation.numbers):
        assert key.replace("_", " ") in md


def test_report_units_are_shown_beside_si():
    md = sheets("drop-hammer-skid")["md"]
    # peak in mm and its time in ms beside the SI values
    peak = worked("drop-hammer-skid").numbers.peak
    assert f"{peak.value * 1000:.6g}" + r"\,\mathrm{mm}" in md
    assert f"{peak.time * 1000:.6g}" + r"\,\mathrm{ms}" in md
    assert r"x(t)\,[\mathrm{mm}]" in md


def test_symbolic_case_has_no_numbers_and_no_figures():
    md = sheets("symbolic-rectangle")["md"]
    assert "no numbers are reported" in md
    assert ".svg" not in md
    assert render.figure_files(worked("symbolic-rectangle"), "s", "svg") == {}


def test_no_absolute_paths_in_sheets():
    for suffix, text in sheets("measured-history").items():
        assert str(ROOT) not in text, suffix
        assert "measured-history.toml" in text


# ----------------------------------------------------------------------------- escaping


HOSTILE = r"Bolts & nuts: 100% of #3_a \ ~x^2 {y} $5 <a|b> -- µ−≤ Müller"


def hostile_derivation() -> closedform.Derivation:
    text = STEP.replace('title = "Step on an undamped oscillator"',
                        "title = '" + HOSTILE + "'").replace('reference = "T-1"',
                                                             "reference = 'R&D_1%'")
    return derive_text(text)


def test_latex_escapes_a_hostile_title():
    tex = render.render_latex(hostile_derivation(), standalone=True, stem="hostile")
    escaped = (r"Bolts \& nuts: 100\% of \#3\_a \textbackslash{} \textasciitilde{}x\textasciicircum{}2 "
               r"\{y\} \$5 \textless{}a\textbar{}b\textgreater{} -{}- \ensuremath{\mu}\ensuremath{-}"
               r"\ensuremath{\le} M\"{u}ller")
    assert escaped in tex
    assert r"R\&D\_1\%" in tex
    assert HOSTILE not in tex


def test_latex_escape_of_single_characters():
    assert render.latex_escape("a_b") == r"a\_b"
    assert render.latex_escape("50%") == r"50\%"
    assert render.latex_escape("x\ny") == "x y"
    assert render.latex_escape("ω") == r"\ensuremath{\omega}"
    assert render.latex_escape("Ω") == r"\ensuremath{\Omega}"
    assert render.latex_escape("é") == r"\'{e}"
    assert render.latex_escape("x⁽ⁿ⁾") == r"x\ensuremath{^{(}}\ensuremath{^{n}}\ensuremath{^{)}}"
    assert render.latex_escape("☃") == r"\texttt{[U+2603]}"
    # the transform-pair arrow of the shift theorem's statement on the load lines
    assert render.latex_escape("f(t) ↔ F(s)") == r"f(t) \ensuremath{\leftrightarrow} F(s)"


def test_symbols_with_subscripts_in_plain_labels():
    from closedform.render.escaping import with_subscripts
    label = "load-mass factor K_LM = K_M / K_L, R_m/k_E of peak_time & x_integrated"
    assert with_subscripts(label, render.latex_escape) == (
        r"load-mass factor $K_{LM}$ = $K_{M}$ / $K_{L}$, $R_{m}$/$k_{E}$ of peak\_time \& "
        r"x\_integrated")
    assert with_subscripts(label, render.markdown_escape).startswith(
        r"load-mass factor $K_{LM}$ = $K_{M}$ / $K_{L}$, $R_{m}$/$k_{E}$ of peak\_time")
    assert isinstance(with_subscripts("a $ b", render.latex_escape), render.Math)
    assert with_subscripts("a $ b_c", render.latex_escape) == r"a \$ $b_{c}$"


def test_member_sheet_labels_print_subscripts_not_underscores():
    """On the LaTeX sheet of a member, K_LM, K_L, K_M, R_m, M_p, k_E print as symbols with
    subscripts: no escaped underscore "\\_" is left in the member's section, its checks and
    its assumptions (the yielding section's own table is shared with every yielding case)."""
    tex = sheets("wall-girt-blast-yielding")["tex"]
    assert r"load-mass factor $K_{LM}$ = $K_{M}$ / $K_{L}$" in tex
    assert r"collapse load $R_{m}$" in tex and r"oscillator $k_{E}$" in tex
    member = tex[tex.index("Member as an equivalent oscillator"):tex.index("Model: ")]
    checks = tex[tex.index("member factors by quadrature"):]
    assert "\\_" not in member and "\\_" not in checks
    md = sheets("wall-girt-blast-yielding")["md"]
    assert r"| plastic moment $M_{p}$ |" in md and "K\\_" not in md


def test_markdown_escapes_a_hostile_title():
    md = render.render_markdown(hostile_derivation(), stem="hostile")
    assert md.splitlines()[0] == (r"# Bolts & nuts: 100% of \#3\_a \\ \~x^2 {y} \$5 \<a\|b\> -- µ−≤ Müller")


def test_templates_cannot_print_unformatted_values():
    environment = render.make_environment("tex")
    with pytest.raises(TypeError, match="format it first"):
        environment.from_string("((( x )))").render(x=1.5)
    assert environment.from_string("((( x ))) ((( y )))").render(
        x="50%", y=render.Math(r"\frac{1}{2}")) == r"50\% \frac{1}{2}"
    md = render.make_environment("md")
    assert md.from_string("{{ x }}").render(x="a|b_c") == r"a\|b\_c"


def test_math_joins_stay_trusted_only_with_math():
    assert isinstance(render.Math("a") + render.Math("b"), render.Math)
    assert not isinstance(render.Math("a") + "b", render.Math)
    assert not isinstance("a" + render.Math("b"), render.Math)


@pytest.mark.parametrize(("unit", "latex"), [
    ("mm", r"\mathrm{mm}"),
    ("N*s/m", r"\mathrm{N}\,\mathrm{s}/\mathrm{m}"),
    ("m/s^2", r"\mathrm{m}/\mathrm{s}^{2}"),
    ("kg*m^2/s^3", r"\mathrm{kg}\,\mathrm{m}^{2}/\mathrm{s}^{3}"),
    ("ohm", r"\Omega"),
    ("1", ""),
])
def test_units_are_typeset_upright(unit, latex):
    assert render.unit_latex(unit) == latex


@pytest.mark.parametrize(("value", "text"), [
    (0.0027853994, "0.0027854"), (1.2e-05, r"1.2 \times 10^{-5}"), (2.6e6, r"2.6 \times 10^{6}"),
    (-0.0, "0"), (1e-7, "10^{-7}"), (None, None),
])
def test_numbers_are_formatted_for_latex(value, text):
    assert render.number(value) == text


# ----------------------------------------------------------------------------- failures


def test_failed_derivation_starts_with_the_failure():
    derivation = dataclasses.replace(worked("drop-hammer-skid"), checks=(
        Check("ode residual on (0, 0.02)", False, "max |residual|/scale = 3e-4"),))
    md = render.render_markdown(derivation)
    lines = md.splitlines()
    assert lines[0] == "# FAILED — do not use: Drop-hammer blow on an instrument skid"
    assert lines[2] == ("**Status: FAILED — 1 of 1 independent checks did not pass. Do not use this "
                        "result.**")
    assert lines[4] == r"- FAILED: ode residual on (0, 0.02) — max \|residual\|/scale = 3e-4"
    assert "VERIFIED" not in md
    tex = render.render_latex(derivation, standalone=True)
    assert tex.startswith("% closedform derivation sheet: FAILED, do not use\n")
    body = tex[tex.index(r"\begin{document}"):]
    assert body.splitlines()[1] == (r"\section{FAILED --- do not use: Drop-hammer blow on an "
                                    r"instrument skid}\label{case:drop-hammer-skid}")
    assert r"\textbf{Status: FAILED --- 1 of 1 independent checks did not pass. Do not use this result.}" in body
    assert "VERIFIED" not in tex


def test_derivation_without_checks_is_not_shown_as_checked():
    derivation = dataclasses.replace(worked("drop-hammer-skid"), checks=())
    md = render.render_markdown(derivation)
    assert md.startswith("# FAILED — do not use:")
    assert "no independent check was run" in md
    assert "VERIFIED" not in md


# ----------------------------------------------------------------------------- reproducibility


# Python randomises string hashing per process, so the golden-file tests (files written by
# one process, compared in another) also check that nothing depends on the hash seed.
def test_sheets_and_figures_are_identical_across_runs():
    first = derive_text(STEP)
    second = derive_text(STEP)
    outputs = [render.render_outputs(d, ["md", "tex", "json", "csv"], "step")
               for d in (first, second)]
    assert outputs[0].keys() == outputs[1].keys()
    for name in outputs[0]:
        assert outputs[0][name] == outputs[1][name], name
    svg = outputs[0]["step-response.svg"].decode()
    assert "<dc:date>" not in svg
    assert b"CreationDate" not in outputs[0]["step-response.pdf"]


# ----------------------------------------------------------------------------- outputs


def test_render_outputs_gives_every_file_of_each_format():
    derivation = derive_text(STEP)
    assert set(render.render_outputs(derivation, ["md"], "s")) == {
        "s.md", "s-load.svg", "s-response.svg"}
    assert set(render.render_outputs(derivation, ["tex"], "s")) == {
        "s.tex", "s-load.pdf", "s-response.pdf"}
    assert set(render.render_outputs(derivation, ["svg", "json", "csv"], "s")) == {
        "s-load.svg", "s-response.svg", "s.json", "s.csv"}
    assert set(render.FORMATS) >= {"md", "tex", "pdf", "json", "svg"}


def test_pdf_without_latex_names_the_missing_tool(monkeypatch):
    monkeypatch.setattr(render.pdf.shutil, "which", lambda name: None)
    with pytest.raises(ClosedformError, match="pdflatex") as raised:
        render.render_outputs(derive_text(STEP), ["md", "pdf"], "s")
    assert raised.value.exit_code == 1


def test_csv_and_plot_samples_follow_the_closed_form_step_response():
    # Undamped oscillator under a suddenly applied constant force F:
    # x(t) = (F/k)(1 - cos(omega_n t)), omega_n = sqrt(k/m).
    # Source: Chopra, Dynamics of Structures, 4th ed., section 4.3 (from memory).
    derivation = derive_text(STEP)
    lines = render.render_csv(derivation, points=200).splitlines()
    assert lines[0] == "t [s],x [m]"
    assert len(lines) == 202
    for line in lines[1:]:
        time, value = map(float, line.split(","))
        assert value == pytest.approx((1 / 4) * (1 - math.cos(2 * time)), abs=1e-15)
    times, values = closedform.plots.response_samples(derivation)
    assert times[0] == 0 and times[-1] == pytest.approx(2.0)
    for time, value in zip(times, values):
        assert value == pytest.approx((1 / 4) * (1 - math.cos(2 * time)), abs=1e-12)


def test_csv_refuses_a_case_with_symbols_without_values():
    with pytest.raises(closedform.CaseError, match="value for every symbol"):
        render.render_csv(worked("symbolic-rectangle"))


# ----------------------------------------------------------------------------- LaTeX builds


# Every worked case compiling on its own is tests/test_sheets.py's
# test_no_overfull_box_wider_than_10pt (one pdfLaTeX run per case, halt on error, checked for
# "Output written" and for overfull boxes), so it is not compiled a second time here.


@pytest.mark.slow
@needs_latex
def test_hostile_title_compiles_and_pdf_is_reproducible():
    derivation = hostile_derivation()
    files = render.render_outputs(derivation, ["pdf"], "hostile")
    again = render.render_outputs(derivation, ["pdf"], "hostile")
    assert files["hostile.pdf"].startswith(b"%PDF")
    assert files["hostile.pdf"] == again["hostile.pdf"]


@needs_latex
def test_fragment_can_be_input_into_a_host_document(tmp_path):
    derivation = derive_text(STEP)
    fragment = render.render_latex(derivation, standalone=False, stem="step")
    assert r"\documentclass" not in fragment and fragment.startswith(r"\section{")
    host = ("\\documentclass{article}\n" + render.latex_preamble()
            + "\\begin{document}\n\\input{step-sheet}\n\\end{document}\n")
    files = {"step-sheet.tex": fragment.encode(), **render.figure_files(derivation, "step", "pdf")}
    assert render.compile_pdf(host, files, name="host").startswith(b"%PDF")


def test_latex_tool_is_pdflatex_without_shell_escape(monkeypatch):
    """latexmk is not used: its rc files could decide what runs (tests/test_safety.py)."""
    monkeypatch.setattr(render.pdf.shutil, "which", lambda name: f"/usr/bin/{name}")
    assert render.latex_command()[:2] == ["pdflatex", "-no-shell-escape"]
    monkeypatch.setattr(render.pdf.shutil, "which",
                        lambda name: "/usr/bin/latexmk" if name == "latexmk" else None)
    assert render.latex_command() is None


if __name__ == "__main__":
    if sys.argv[1:] != ["--update-golden"]:
        sys.exit(f"usage: {REGENERATE}")
    update_golden()


def test_a_long_history_sheet_prints_an_excerpt_and_puts_every_coefficient_in_a_csv(tmp_path):
    """A 60-segment table: the sheet shows the first and last intervals and names the
    coefficient file, which holds every load term and every interval (common practice for
    long tabulated results: summary in the sheet, full table beside it)."""
    import closedform as cf

    points = ", ".join(f"[{i * 0.002:.3f}, {0 if i in (0, 60) else 1000 + 100 * ((i * i) % 13)}]"
                       for i in range(61))
    case = cf.load_case_text(f"""
title = "Long history"
[system]
model = "spring-mass-damper"
mass = "100 kg"
stiffness = "1 MN/m"
damping_ratio = 0.05
[[load]]
shape = "table"
points = [{points}]
[report]
until = "0.2 s"
""", "long.toml")
    derivation = cf.derive(case)
    assert derivation.status == "verified"
    contents = render.render_outputs(derivation, ["md"], "long")
    sheet = contents["long.md"]
    assert "not printed; the coefficients of every interval are in long-coefficients.csv" in sheet
    assert sheet.count("Interval ") <= render.EXCERPT_HEAD + render.EXCERPT_TAIL + 1
    rows = contents["long-coefficients.csv"].splitlines()
    intervals = {row.split(",")[1] for row in rows if row.startswith("interval,")}
    assert len(intervals) == len(derivation.pieces)
    assert sum(row.startswith("load term,") for row in rows) == len(derivation.history.terms)


def test_accented_greek_letters_print_under_math_accents():
    """ά (alpha with tonos) once became ``\\tonos``, an undefined command that stopped
    pdfLaTeX; now the letter sits under its accent, or a code-point placeholder is printed."""
    from closedform.render import latex_escape
    assert latex_escape("ά") == r"\ensuremath{\acute{\alpha}}"
    assert latex_escape("ϊ") == r"\ensuremath{\ddot{\iota}}"
    assert "tonos" not in latex_escape("Ά ΐ ώ").lower()
    if shutil.which("pdflatex"):
        from closedform.render import compile_pdf
        assert compile_pdf("\\documentclass{article}\\begin{document}"
                           + latex_escape("Πλάκα ϊ Ά") + "\\end{document}\n").startswith(b"%PDF")

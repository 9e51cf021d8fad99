"""Sheets a checker will sign: every printed equation read back, report units, numbers,
status words, warnings and layout.

The equation re-reading check (closedform.checks.reread) parses the printed LaTeX with its own
reader and compares it with the derivation. Its reader is checked here against mpmath's
functions; the check itself is shown to catch corrupted printed lines (mutation tests).
"""

from __future__ import annotations

import json
import re
import textwrap
from pathlib import Path

import mpmath
import pytest

import closedform
from closedform import render
from closedform.checks import reread
from closedform.checks.base import Check

from .conftest import worked_derivation

ROOT = Path(__file__).resolve().parent.parent
WORKED = ROOT / "worked_cases"
CASES = sorted(path.stem for path in WORKED.glob("*.toml"))
CHECK = "printed equations re-read"


def derive_text(text: str, name: str = "sheet.toml") -> closedform.Derivation:
    return closedform.derive(closedform.load_case_text(textwrap.dedent(text), name))


def check_of(derivation) -> Check:
    [check] = [c for c in derivation.checks if c.name == CHECK]
    return check


RAMP = """
title = "Ramp held after 6 s"
[system]
model = "first-order"
time_constant = "0.8 s"
gain = 1
input_unit = "K"
[[load]]
shape = "ramp"
rate = "2.5 K/s"
duration = "6 s"
[report]
until = "12 s"
"""


# ----------------------------------------------------------------------------- the reader


@pytest.mark.parametrize("latex, env, expected", [
    (r"\frac{5}{2}\,t\,H\!\left(t\right)", {"t": 3}, 7.5),
    (r"- \frac{5}{2}\,\left(t - 6\right)\,H\!\left(t - 6\right)", {"t": 3}, 0),
    (r"- \frac{5}{2}\,\left(t - 6\right)\,H\!\left(t - 6\right)", {"t": 8}, -5),
    (r"e^{- \frac{5 u}{4}}", {"u": 2}, mpmath.exp(-2.5)),
    (r"2 e^{- 50 \hat{t}} \left(3 \cos{\left(4 \hat{t} \right)} - \sin{\left(4 \hat{t} \right)}\right)",
     {r"\hat{t}": 0.1}, 2 * mpmath.exp(-5) * (3 * mpmath.cos(0.4) - mpmath.sin(0.4))),
    (r"\frac{\sqrt{3} i}{2} + 1.5 \cdot 10^{-3}", {}, mpmath.mpc(1.5e-3, mpmath.sqrt(3) / 2)),
    (r"\frac{3}{4 e} - \frac{27}{400 e^{\frac{5}{2}}}", {}, 0.75 / mpmath.e - 27 / (400 * mpmath.e ** 2.5)),
    (r"F_{0} d^{2} s^{2} + \frac{k}{m}", {"F_{0}": 2, "d": 3, "s": 0.5, "k": 4, "m": 8}, 5.0),
])
def test_reader_evaluates_the_sheet_grammar_like_mpmath(latex, env, expected):
    with mpmath.workdps(30):
        assert abs(reread.read(latex)(env) - expected) < 1e-12   # expected in doubles


@pytest.mark.parametrize("latex", [r"\frac{1}{", r"3 +", r"\left(t\right", r"\begin{x}"])
def test_reader_refuses_text_outside_its_grammar(latex):
    with pytest.raises(reread.Unreadable):
        reread.read(latex)(dict(t=1, x=1))


def test_reader_never_evaluates_a_step_at_its_jump():
    with pytest.raises(reread.Unreadable):
        reread.read(r"H\!\left(t - 6\right)")({"t": 6})


# ----------------------------------------------------------------------------- 11.1: load lines


def test_ramp_with_duration_prints_every_term_with_its_step():
    # Before the fix the sheet printed 5t/2·H(t) + 15 − 5t/2·H(t − 6): 22.5 K at t = 3 s.
    markdown = render.render_markdown(derive_text(RAMP))
    [line] = re.findall(r"^\{u\}_\{1\}\(t\) = (.*)$", markdown, flags=re.M)
    value = reread.read(line)
    assert value({"t": 3}) == pytest.approx(7.5)      # r·t = 2.5 K/s · 3 s
    assert value({"t": 9}) == pytest.approx(15)       # held at r·d = 15 K after 6 s
    assert value({"t": -1}) == 0                      # nothing before the load starts


@pytest.mark.parametrize("load", [
    'shape = "triangle"\namplitude = "2 N"\nduration = "0.5 s"',
    'shape = "trapezoid"\namplitude = "2 N"\nrise = "0.1 s"\nhold = "0.2 s"\nfall = "0.3 s"',
    'shape = "ramp"\nrate = "4 N/s"\nduration = "0.3 s"\nat = "0.2 s"',
])
def test_load_lines_of_ramps_triangles_and_trapezoids_read_back(load):
    derivation = derive_text(f"""
        title = "Pulse"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "40 N/m"
        [[load]]
        {load}
        [report]
        until = "2 s"
        """.replace("\n        ", "\n"))
    assert check_of(derivation).passed, check_of(derivation).detail
    assert derivation.status == "verified"


# ----------------------------------------------------------------------------- the check


@pytest.mark.parametrize("stem", CASES)
def test_every_worked_sheet_reads_back_equal_to_its_derivation(stem):
    derivation = worked_derivation(stem)
    check = check_of(derivation)
    assert check.passed, check.detail
    numeric = int(check.detail.split()[0])
    assert numeric >= 5, check.detail       # load lines, P, Q, transforms, pieces at least


def replace_in_render(monkeypatch, name: str, replacement) -> None:
    """``name`` replaced in every module of the render package that uses it (each section
    module imports what it calls), so a mutation reaches every place it is printed from."""
    import sys
    package = [m for key, m in list(sys.modules.items()) if key.startswith("closedform.render.")]
    original = next(getattr(m, name) for m in package if hasattr(m, name))
    modules = [m for m in package if getattr(m, name, None) is original]
    assert modules, f"no module of closedform.render uses {name}"
    for module in modules:
        monkeypatch.setattr(module, name, replacement)


def _buggy_singularity_term(coefficient, mode, shift):
    """The printing before the fix: c·g(t − a) expanded, the step attached to its end."""
    import sympy
    t = sympy.Symbol("t")
    at = sympy.Integer(shift.split("-")[1]) if shift != "t" else 0   # whole seconds here
    body = render.typeset(coefficient * mode.expression(t - at))
    step = rf"H\!\left({shift}\right)"
    return step if body == "1" else rf"{body}\,{step}"


def test_mutation_the_old_load_line_fails_the_sheet(monkeypatch):
    replace_in_render(monkeypatch, "singularity_term", _buggy_singularity_term)
    derivation = derive_text(RAMP)
    check = check_of(derivation)
    assert not check.passed
    assert "load line 1" in check.detail
    assert derivation.status == "failed"
    markdown = render.render_markdown(derivation)
    assert markdown.startswith("# FAILED — do not use: ")
    assert markdown.splitlines()[2].startswith("**Status: FAILED")


def test_mutation_one_corrupted_interval_line_fails_the_sheet(monkeypatch):
    original = render.grouped_terms
    calls = []

    def corrupt(rows, u, width=render.LINE_WIDTH):
        terms = original(rows, u, width)
        calls.append(1)
        if len(calls) == 3:          # one line only: a sign flipped in one printed term
            first = terms[0]
            terms[0] = first[1:].lstrip() if first.startswith("-") else "- " + first
        return terms
    replace_in_render(monkeypatch, "grouped_terms", corrupt)
    derivation = derive_text(RAMP)
    check = check_of(derivation)
    assert not check.passed, check.detail
    assert derivation.status == "failed"


def test_mutation_a_wrong_partial_fraction_coefficient_fails_the_sheet(monkeypatch):
    original = render.display

    def corrupt(lhs, terms, note=None):
        terms = list(terms)
        if lhs == "c_{2}":
            terms = [t.replace("4", "3", 1) for t in terms]
        return original(lhs, terms, note)
    replace_in_render(monkeypatch, "display", corrupt)
    check = check_of(derive_text(RAMP))
    assert not check.passed
    assert "partial-fraction coefficient 2" in check.detail


def test_mutation_an_unreadable_printed_line_fails_the_sheet(monkeypatch):
    original = render.display

    def corrupt(lhs, terms, note=None):
        terms = list(terms)
        if lhs == "P(s)":
            terms[-1] = terms[-1] + r" \frac{1}{"
        return original(lhs, terms, note)
    replace_in_render(monkeypatch, "display", corrupt)
    check = check_of(derive_text(RAMP))
    assert not check.passed
    assert "could not be read back" in check.detail


def test_an_equation_printed_without_a_record_fails_the_sheet(monkeypatch):
    original = render.sheet_context

    def extra(derivation, target="md", **kwargs):
        context = original(derivation, target, **kwargs)
        context["window_note"] = render.Math("\n\n$$\nz = 1\n$$\n\n")
        return context
    replace_in_render(monkeypatch, "sheet_context", extra)
    check = check_of(derive_text(RAMP))
    assert not check.passed
    assert "without a record" in check.detail


# ----------------------------------------------------------------------------- 11.3: report units

ISOLATOR = """
title = "Equipment on isolators"
reference = "T-US-1"
[system]
model = "spring-mass-damper"
mass = "150 lb"
stiffness = "4.5 kip/in"
damping_ratio = 0.05
[[load]]
shape = "half-sine"
amplitude = "2.4 kip"
duration = "38 ms"
[report]
until = "0.3 s"
units = { displacement = "in", force = "kip", time = "ms", mass = "lb", stiffness = "kip/in" }
"""


def run_cli(tmp_path, capsys, text, *extra):
    from closedform.cli import main
    case = tmp_path / "case.toml"
    case.write_text(textwrap.dedent(text), encoding="utf-8")
    code = main(["derive", str(case), *extra])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.mark.parametrize("line, message", [
    ('units = { displacement = "kg" }',
     "case.toml:15: report.units.displacement: unit 'kg' measures mass, not length "
     "(expected a unit such as m)"),
    ('units = { stiffness = "kip" }',
     "case.toml:15: report.units.stiffness: unit 'kip' measures force, not force/length "
     "(expected a unit such as N/m)"),
    ('units = { response = "s" }',
     "case.toml:15: report.units.response: unit 's' measures time, not length "
     "(expected a unit such as m)"),
    ('units = { colour = "mm" }',
     "case.toml:15: report.units.colour: unknown key 'colour' (expected one of: "
     "displacement, velocity, acceleration, force, time, mass, stiffness, damping, moment, "
     "pressure, voltage, current, temperature, impulse, energy, charge, resistance, "
     "inductance, capacitance, frequency, power, response)"),
    ('numbers = "fractions"',
     "case.toml:15: report.numbers: expected one of auto, exact, decimal, got 'fractions'"),
    ('digits = 30', "case.toml:15: report.digits: expected a whole number of significant "
                    "digits from 2 to 15, got 30"),
    ('digits = true', "case.toml:15: report.digits: expected a whole number of significant "
                      "digits from 2 to 15, got true"),
    ('paper = "a3"', "case.toml:15: report.paper: expected one of a4, letter, got 'a3'"),
])
def test_report_errors_are_located_input_errors(tmp_path, capsys, line, message):
    text = ISOLATOR.replace(
        'units = { displacement = "in", force = "kip", time = "ms", mass = "lb", '
        'stiffness = "kip/in" }', line)
    code, out, err = run_cli(tmp_path, capsys, text)
    assert code == 2
    assert err.strip().endswith(message), err
    assert len(err.strip().splitlines()) == 1


def test_parameters_show_in_their_report_units():
    markdown = render.render_markdown(derive_text(ISOLATOR))
    rows = {line.split("|")[1].strip(): line for line in markdown.splitlines()
            if line.startswith("| mass") or line.startswith("| stiffness")}
    assert r"$150\,\mathrm{lb}$" in rows["mass"]
    assert r"$4.5\,\mathrm{kip}/\mathrm{in}$" in rows["stiffness"]


@pytest.mark.parametrize("text, si", [
    ("1 µs", "1/1000000"), ("1 μs", "1/1000000"), ("4.7 kΩ", "4700"), ("6.8 µH", "17/2500000"),
    ("3 °C", "3"), ("90 °", "pi/2"), ("2 g0", "196133/10000"), ("5 kN·m", "5000"),
])
def test_unicode_units_are_read(text, si):
    import sympy

    from closedform import quantities
    dimension = {"1 µs": "time", "1 μs": "time", "4.7 kΩ": "resistance",
                 "6.8 µH": "inductance", "3 °C": "temperature", "90 °": "dimensionless",
                 "2 g0": "acceleration", "5 kN·m": "energy"}[text]
    value = quantities.parse_quantity(text, expected=dimension, names={}, name_dimensions={},
                                      key="x")
    # factors: 1 µs = 1e-6 s, 1 °C step = 1 K, 1° = pi/180 rad, g0 = 9.80665 m/s^2
    # (BIPM, The International System of Units, 9th ed. (2019), tables 7-8 and CGPM 1901)
    assert sympy.simplify(value - sympy.sympify(si)) == 0


@pytest.mark.parametrize("unit, latex", [
    ("us", r"\mu\mathrm{s}"), ("µs", r"\mu\mathrm{s}"), ("kΩ", r"\mathrm{k}\Omega"),
    ("kohm", r"\mathrm{k}\Omega"), ("°C", r"{}^{\circ}\mathrm{C}"), ("g0", r"\mathrm{g}_{0}"),
])
def test_units_print_in_the_trades_form(unit, latex):
    assert render.unit_latex(unit) == latex


def test_derived_si_units_print_in_the_trades_form():
    from closedform import quantities as q
    assert q.si_unit_text(q.PRESSURE / q.TIME) == "Pa/s"
    assert q.si_unit_text(q.FORCE / q.TIME) == "N/s"
    assert q.si_unit_text(q.TEMPERATURE / q.TIME) == "K/s"


def test_a_report_unit_equal_to_si_still_fills_its_cell():
    text = RAMP.replace('until = "12 s"', 'until = "12 s"\nunits = { time = "s" }')
    markdown = render.render_markdown(derive_text(text))
    [row] = [line for line in markdown.splitlines() if line.startswith("| time of peak")]
    assert row.rstrip().endswith(r"| $12\,\mathrm{s}$ |")


# ----------------------------------------------------------------------------- 11.4: status words


def test_one_status_vocabulary_across_sheet_json_and_console(tmp_path, capsys):
    import json
    code, out, err = run_cli(tmp_path, capsys, RAMP, "--json", "-")
    assert code == 0 and json.loads(out)["status"] == "verified"
    code, out, err = run_cli(tmp_path, capsys, RAMP)
    assert "VERIFIED" in out
    derivation = derive_text(RAMP)
    markdown = render.render_markdown(derivation)
    assert markdown.splitlines()[2].startswith("**Status: VERIFIED")
    tex = render.render_latex(derivation)
    assert r"\textbf{Status: VERIFIED}" in tex
    assert "CHECKED" not in markdown and "CHECKED" not in tex


# ----------------------------------------------------------------------------- 11.9: cosmetics


def test_ramp_kernel_is_named_without_a_first_power():
    markdown = render.render_markdown(derive_text(RAMP))
    assert "t^1" not in markdown and "unit ramp t" in markdown


def test_one_piece_is_not_called_pieces():
    text = RAMP.replace('until = "12 s"', 'until = "5 s"')
    markdown = render.render_markdown(derive_text(text))
    assert r"1 piece on \[0, 5\] s" in markdown and "1 pieces" not in markdown


def test_static_gain_is_not_written_as_one_over_one():
    markdown = render.render_markdown(derive_text(RAMP))
    assert "b/a_0 = 1$" in markdown and "1 / 1" not in markdown


def test_impulse_idealization_gets_a_row_per_figure():
    derivation = worked_derivation("panel-pressure-pulse")
    markdown = render.render_markdown(derivation)
    rows = [line for line in markdown.splitlines() if line.startswith("| impulse idealization")]
    assert len(rows) >= 5
    assert all(line.count(";") <= 1 for line in rows)


def test_reference_is_never_broken_in_latex():
    assert r"Reference & \mbox{T-US-1} \\" in render.render_latex(derive_text(ISOLATOR))


@pytest.mark.parametrize("paper, option", [("a4", "a4paper"), ("letter", "letterpaper")])
def test_paper_size(paper, option):
    text = RAMP.replace('until = "12 s"', f'until = "12 s"\npaper = "{paper}"')
    tex = render.render_latex(derive_text(text))
    assert rf"\documentclass[10pt,{option}]{{article}}" in tex
    assert rf"\usepackage[{option},margin=22mm]{{geometry}}" in tex


# ----------------------------------------------------------------------------- 11.2: numbers


NON_ROUND = ISOLATOR.replace('until = "0.3 s"', 'until = "0.3 s"\nNUMBERS')


def sheet_with(numbers: str, digits: int | None = None) -> str:
    extra = f'numbers = "{numbers}"' + (f"\ndigits = {digits}" if digits else "")
    return render.render_markdown(derive_text(NON_ROUND.replace("NUMBERS", extra)))


def significant_digits(token: str) -> int:
    if "." in token:
        return len(token.replace(".", "").lstrip("0"))
    return len(token.strip("0")) or 1


def math_numbers(markdown: str) -> list[str]:
    """Every number inside the sheet's math ($…$ and $$…$$), exponents of ten excluded."""
    spans = re.findall(r"\$\$(.*?)\$\$|\$(.*?)\$", markdown, flags=re.S)
    numbers = []
    for display, inline in spans:
        text = re.sub(r"10\^\{-?\d+\}", "", display or inline)
        numbers += re.findall(r"\d+(?:\.\d+)?", text)
    return numbers


@pytest.mark.parametrize("numbers, digits", [("auto", 4), ("auto", 6), ("decimal", 5)])
def test_no_number_longer_than_digits_outside_exact_mode(numbers, digits):
    markdown = sheet_with(numbers, digits)
    # integers up to six digits are exact small numbers (auto keeps them, as do exponents)
    long_ = [n for n in math_numbers(markdown)
             if significant_digits(n) > max(digits, render.SHORT_DIGITS if "." not in n else 0)]
    assert not long_, long_[:5]


def test_exact_mode_keeps_the_long_fractions():
    markdown = sheet_with("exact")
    assert re.search(r"\\frac\{\d{7,}", markdown)       # e.g. the mass 136077711/2000000 kg
    assert r"\frac{136077711}{2000000}" in markdown


def test_auto_keeps_short_exact_forms_and_shows_long_ones_as_decimals():
    markdown = render.render_markdown(derive_text(RAMP))        # round inputs: all exact
    assert r"\frac{4}{5}" in markdown
    long_sheet = sheet_with("auto")
    assert r"\frac{136077711}{2000000}" not in long_sheet
    assert r"$68.0389\,\mathrm{kg}$" in long_sheet               # 150 lb = 68.0388555 kg


def test_decimal_mode_prints_no_fractions_of_numbers():
    markdown = sheet_with("decimal")
    assert not re.search(r"\\frac\{\d+\}\{\d+\}", markdown)


def test_digits_do_not_change_the_json():
    import json
    low = derive_text(NON_ROUND.replace("NUMBERS", "digits = 3"))
    high = derive_text(NON_ROUND.replace("NUMBERS", "digits = 12"))
    assert json.loads(low.to_json())["peak"] == json.loads(high.to_json())["peak"]


def test_long_lines_stay_readable_in_markdown():
    markdown = sheet_with("auto")
    for block in re.findall(r"^\$\$\n(.*?)\n\$\$$", markdown, flags=re.S | re.M):
        for line in block.splitlines():
            assert render.visible_width(line) < 1.6 * render.LINE_WIDTH, line[:80]


HAS_PDFLATEX = __import__("shutil").which("pdflatex") is not None


def overfull_boxes(derivation, stem: str, folder: Path) -> list[float]:
    import subprocess
    for name, content in render.render_outputs(derivation, ["tex"], stem).items():
        (folder / name).write_bytes(content if isinstance(content, bytes) else content.encode())
    subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", f"{stem}.tex"],
                   cwd=folder, capture_output=True, timeout=300, check=False)
    log = (folder / f"{stem}.log").read_text(encoding="utf-8", errors="replace")
    assert "Output written" in log, log[-2000:]
    return [float(w) for w in re.findall(r"Overfull \\hbox \((\d+(?:\.\d+)?)pt too wide\)", log)]


@pytest.mark.skipif(not HAS_PDFLATEX, reason="pdflatex not on PATH")
@pytest.mark.parametrize("stem", CASES + ["test:auto", "test:exact", "test:decimal"])
def test_no_overfull_box_wider_than_10pt(stem, tmp_path):
    """Each worked case's standalone sheet compiles (pdfLaTeX, halt on error, "Output
    written") with no overfull box wider than 10 pt; also the compile check of every worked
    case."""
    if stem.startswith("test:"):
        mode = stem.split(":")[1]
        derivation = derive_text(NON_ROUND.replace("NUMBERS", f'numbers = "{mode}"'))
        stem = f"nonround-{mode}"
    else:
        derivation = worked_derivation(stem)
    widths = overfull_boxes(derivation, stem, tmp_path)
    assert all(w <= 10 for w in widths), widths


# ----------------------------------------------------------------------------- 11.6: warnings


def warnings_of(text: str) -> list[str]:
    return list(derive_text(text).warnings)


def test_warning_window_ends_before_the_last_load():
    [warning] = [w for w in warnings_of(RAMP.replace('until = "12 s"', 'until = "5 s"'))
                 if "before the last load" in w]
    assert warning == ("sheet.toml: report.until: the analysis window ends at 5 s, before the "
                       "last load ends at 6 s; nothing after the window is covered (extend until)")


def test_warning_peak_at_the_end_of_the_window_is_on_console_and_sheet(tmp_path, capsys):
    code, out, err = run_cli(tmp_path, capsys, RAMP)
    assert ("warning: " + str(tmp_path / "case.toml") + ": report.until: the peak sits at the "
            "end of the analysis window (t = 12 s); the response may still grow after it "
            "(extend until)") in err
    markdown = render.render_markdown(derive_text(RAMP))
    assert ("- report.until: the peak sits at the end of the analysis window (t = 12 s); the "
            "response may still grow after it (extend until)") in markdown


def test_warning_damping_ratio_of_one_or_more():
    text = ISOLATOR.replace("damping_ratio = 0.05", "damping_ratio = 5")
    assert ("sheet.toml: system.damping_ratio: 5 is 1 or more (critically damped or "
            "overdamped, no oscillation); did you mean 5 % (0.05)?") in warnings_of(text)


def test_warning_peak_is_the_initial_value():
    text = """
    title = "Released from a displacement"
    [system]
    model = "spring-mass-damper"
    mass = "1 kg"
    stiffness = "100 N/m"
    damping_ratio = 0.1
    [initial]
    displacement = "10 mm"
    [[load]]
    shape = "step"
    amplitude = "0.1 N"
    [report]
    until = "2 s"
    """
    assert ("sheet.toml: initial: the peak is the initial value at t = 0; the loads never "
            "drive the response past it") in warnings_of(text)


def test_a_load_ending_at_until_says_why_there_is_no_residual():
    text = ISOLATOR.replace('until = "0.3 s"', 'until = "38 ms"')
    assert ("sheet.toml: report.until: the last load ends exactly at the end of the analysis "
            "window (0.038 s), so no residual vibration after it is reported (extend until "
            "past the load)") in warnings_of(text)


def test_no_warning_for_an_ordinary_case():
    assert warnings_of(ISOLATOR) == []


# ----------------------------------------------------------------------------- 11.7: sources


@pytest.mark.parametrize("stem", CASES)
def test_product_sheets_never_cite_from_memory(stem):
    derivation = worked_derivation(stem)
    for text in (render.render_markdown(derivation), render.render_latex(derivation)):
        assert "memory" not in text


def test_sources_cite_the_theorem_in_the_json_too():
    """The product's own source strings name the identity (the JSON carries them as they
    are, so no rewriting on the sheet alone can hide a 'from memory' there)."""
    derivation = derive_text(ISOLATOR)
    details = [check["detail"] for check in json.loads(derivation.to_json())["checks"]]
    assert not any("memory" in detail for detail in details)
    assert any(detail.endswith("work–energy theorem") for detail in details)
    assert "time-shift" in render.render_markdown(derivation)


# ----------------------------------------------------------------------------- 11.5: console


def test_console_summary_in_report_units_rounded_like_the_sheet(tmp_path, capsys):
    text = ISOLATOR.replace('until = "0.3 s"', 'until = "0.3 s"\ndigits = 4')
    code, out, err = run_cli(tmp_path, capsys, text)
    line = out.strip()
    assert code == 0
    assert re.fullmatch(re.escape(str(tmp_path / "case.toml")) + r": VERIFIED; peak -?[\d.]+ in "
                        r"at t = \d\d(?:\.\d{1,2})? ms; DLF \d\.\d{3}", line), line
    markdown = render.render_markdown(derive_text(text))
    peak = re.search(r"peak (-?[\d.]+) in", line).group(1)
    assert significant_digits(peak.lstrip("-")) == 4
    assert rf"${peak}\,\mathrm{{in}}$" in markdown


def test_an_impulse_at_a_decimal_time_reads_back_from_its_load_line():
    """Found by fuzzing: an impulse at 0.000167 s printed correctly, but the re-reading check
    compared the printed decimal time with its binary value and found no delta there."""
    derivation = closedform.derive(closedform.load_case_text(
        'title = "Impulse at a decimal time"\n[system]\nmodel = "spring-mass-damper"\n'
        'mass = "1 kg"\nstiffness = "1.416e+05 N/m"\n[[load]]\nshape = "impulse"\n'
        'at = "0.000167 s"\nimpulse = "0.0167 N*s"\n', "impulse.toml"))
    assert derivation.status == "verified", [c.detail for c in derivation.checks if not c.passed]


def test_a_rounded_half_sine_frequency_is_judged_by_the_phase_error_it_makes():
    """Found by fuzzing: π/0.000717 s printed as 1394.7π; after the pulse the two sine terms
    cancel, and the rounding's phase error (ω·u·δ) was judged against their near-zero sum."""
    derivation = closedform.derive(closedform.load_case_text(
        'title = "Short half-sine"\n[system]\nmodel = "spring-mass-damper"\nmass = "1 kg"\n'
        'stiffness = "3.948e+07 N/m"\n[[load]]\nshape = "half-sine"\n'
        'duration = "0.000717 s"\namplitude = "1 N"\n', "half-sine.toml"))
    assert derivation.status == "verified", [c.detail for c in derivation.checks if not c.passed]
